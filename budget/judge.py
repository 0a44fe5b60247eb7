"""Judging captured edges (``busbudget judge``): the simulation's metrics on measured traces.

Every channel of a capture that maps to a receiving tap is judged by the
metric, violation and headroom kernels of the simulation
(:func:`budget.capture.judge_waveform`), against the design's thresholds,
ratings and budget.  What a real capture contains, and how it is handled:

Noise
    The noise sigma of each channel is estimated from its **pre-edge samples**
    (every sample earlier than one 0-100 % ramp before the trace first crosses
    the entry threshold): sigma = 1.4826 x the median absolute deviation from
    their median (a robust standard deviation).  With fewer than
    :data:`MIN_PRE_EDGE` such samples it is estimated from the first
    differences of the whole record, 1.4826 x MAD(diff) / sqrt(2) (an over-
    estimate where the signal itself moves fast: conservative); ``--noise
    SIGMA`` gives it instead.
    The ringback window (and the margin, the lowest level in it) must open at
    the edge's first peak.  On a noisy trace the contract's rule -- the first
    fall-back of 2 % of the swing below the running maximum -- fires on noise
    while the edge is still rising (margins far too low), and a wider
    threshold alone would miss a real shallow ringback and open late (margins
    too high).  So the window opens at the **earlier** of
    (a) the first fall-back of 2 % of the swing **plus k x sigma** on the raw
        samples, k = :data:`NOISE_K` = 6 (the range of Gaussian noise over the
        few hundred samples between the valid-threshold crossing and the first
        peak stays below about 6 sigma), which also marks a non-monotonic edge;
    (b) the first peak, by the contract's 2 % rule, of a lightly smoothed copy
        (centred moving average over :func:`smoothing_window`, 1/16 of the
        0-100 % ramp: noise drops by the square root of the samples averaged
        while the edge's shape barely changes), less half the smoothing window.
    The metrics are then taken on the **raw samples** (no smoothing): the
    margin is the lowest raw sample in the window, so noise counts against it;
    overshoot and undershoot include the noise peaks.  Tested
    (tests/test_judge.py): over many noise seeds, noise levels of 0.2-1.6 % of
    the swing and two example buses, a noisy margin never came out more than
    one sigma above the clean waveform's, and typically 1-3 sigma below it.  A
    fall-back shallower than 2 % of the swing + k sigma cannot be told from
    noise by the monotonicity check (the result states its ``hysteresis``).
Probe offset
    Reported for every channel (``offset``: median of the pre-edge samples
    minus the design's DC starting level at that pin).  By default the trace
    is judged as captured, against the design's DC levels (``levels =
    "design"``): an offset goes straight into the margin.  ``remove_offset``
    (``--remove-offset``) shifts the trace by -offset first (use it when the
    offset is the probe's, not the unit's).  ``levels = "capture"``
    (``--levels capture``) takes V_lo / V_hi from the capture itself: the
    median of the pre-edge samples and of the last :data:`TAIL_FRACTION` of
    the record.
Time origin
    Flight times need the time at which the driver's edge starts in the
    capture: ``t_edge`` (``--t-edge``), or, when the driver's pin is captured
    (a column named like the driving tap or mapped to it with ``--channel``),
    detected from it: the first crossing of the middle of its own settled
    start and end levels is aligned with the simulated driver pin's crossing
    of the middle of its DC levels.  Otherwise flight times are ``null``
    ("not available"), never wrong; the voltage metrics do not depend on it.
    Pre-trigger samples (negative times) are fine.
Window
    A trace that never reaches the entry threshold misses the edge; one whose
    first sample is past it starts inside the edge: both are refused
    (CaptureError, exit 2).  A trace that ends sooner after its entry
    crossing than the simulation of the same receiver needs to settle cuts
    the edge: refused unless ``allow_partial`` (``--allow-partial``), which
    judges what is there and marks the result ``partial`` with the violation
    ``window cuts the edge`` (a partial result never passes).
Guardband
    ``guardband`` [V] (``--guardband``, measurement uncertainty) is
    subtracted from every margin and from the headroom to the absolute
    ratings.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import ArgumentError, CaptureError
from .limits import listed
from .roles import driving_part
from .kernels import metrics as mk

SCHEMA = "busbudget.judge/1"
NOISE_K = 6.0            # hysteresis of the fall-back detection, in noise sigmas (module docstring)
MIN_PRE_EDGE = 16        # pre-edge samples needed to estimate the noise and the starting level from them
TAIL_FRACTION = 0.1      # last fraction of the record taken as the settled end level (levels = "capture")
MAD_TO_SIGMA = 1.4826    # sigma of a normal distribution / its median absolute deviation
LEVELS = ("design", "capture")
SMOOTH_PER_RAMP = 16.0   # smoothing window for finding the first peak: the 0-100 % ramp / 16
PARTIAL = "window cuts the edge"

ASSUMPTIONS = (
    "The capture is the receiver's pin voltage as the design defines it (the die node); a probe on a pad "
    "or via sees a slightly different waveform.",
    "Noise on the capture counts against the margin (raw samples are judged); fall-backs smaller than "
    "2 % of the swing plus the stated hysteresis cannot be told from noise.",
    "Results are estimates to confirm with the part makers' data and the applicable standards; the "
    "responsible engineer decides.",
)


def robust_sigma(x) -> float:
    """Robust standard deviation [V] of samples x: 1.4826 x median |x - median(x)|."""
    x = np.asarray(x, dtype=float)
    return float(MAD_TO_SIGMA * np.median(np.abs(x - np.median(x))))


def diff_sigma(v) -> float:
    """Noise sigma [V] from first differences: 1.4826 x MAD(diff v) / sqrt 2 (white noise assumed)."""
    d = np.diff(np.asarray(v, dtype=float))
    return float(MAD_TO_SIGMA * np.median(np.abs(d - np.median(d))) / math.sqrt(2.0))


def first_crossing(t, x, level):
    """(index, time [s]) of the first sample with x >= level (time interpolated), or (None, None)."""
    idx = np.flatnonzero(x >= level)
    if idx.size == 0:
        return None, None
    i = int(idx[0])
    if i == 0:
        return 0, float(t[0])
    return i, float(t[i - 1] + (level - x[i - 1]) / (x[i] - x[i - 1]) * (t[i] - t[i - 1]))


def ramp_duration(design, edge: str) -> float:
    """0-100 % duration [s] of the driver's ramp (:func:`budget.edges.ramp_time`, one design)."""
    from .edges import ramp_time

    return float(ramp_time(design, edge))


@dataclass
class ChannelResult:
    """One judged channel: the result row (JSON keys) and the kernel's judgement."""
    row: dict
    judgement: object


@dataclass
class JudgeReport:
    """Result of :func:`judge_capture`: rows per channel, the worst case, settings and notes."""
    design: str
    source: str
    capture: str
    driver: str
    edge: str
    results: list
    worst: dict
    settings: dict
    notes: list = field(default_factory=list)
    capture_notes: list = field(default_factory=list)
    measured: list = field(default_factory=list)
    out_of_box: list = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return all(r["pass"] for r in self.results)

    @property
    def verdict(self) -> str:
        return "pass" if self.passed else "fail"

    def to_json(self) -> dict:
        return {"schema": SCHEMA, "design": self.design, "source": self.source, "capture": self.capture,
                "driver": self.driver, "edge": self.edge, "verdict": self.verdict, "worst": self.worst,
                "results": self.results, "settings": self.settings, "measured": self.measured,
                "out_of_box": self.out_of_box, "notes": self.notes, "capture_notes": self.capture_notes,
                "assumptions": list(ASSUMPTIONS)}

    def text(self) -> str:
        return judge_text(self)


def map_channels(design, capture, driver: str, channels: dict | None):
    """{column: tap} for the capture: explicit ``channels`` first, then columns named like taps.

    Returns (receivers {column: tap}, driver column or None, ignored columns).
    """
    channels = dict(channels or {})
    taps = set(design.tap_names)
    for col, tap in channels.items():
        if col not in capture.channels:
            raise CaptureError(f"--channel {col}={tap}: no column {col!r}; columns are: "
                               f"{listed(capture.names)}", source=capture.source)
        if tap not in taps:
            raise ArgumentError(f"--channel {col}={tap}: unknown tap {tap!r}; taps are: "
                                f"{listed(design.tap_names)}")
    mapping = {}
    for col in capture.names:
        if col in channels:
            mapping[col] = channels[col]
        elif col in taps and col not in channels.values():
            mapping[col] = col
    seen = {}
    for col, tap in mapping.items():
        if tap in seen:
            raise ArgumentError(f"columns {seen[tap]!r} and {col!r} both map to tap {tap!r}")
        seen[tap] = col
    drv_col = seen.get(driver)
    receivers = {c: t for c, t in mapping.items() if t != driver}
    for col, tap in receivers.items():
        if not design.parts[design.tap(tap).part].can_receive:
            raise ArgumentError(f"column {col!r} maps to tap {tap!r}, which cannot receive "
                                f"(role {design.parts[design.tap(tap).part].role!r})")
    ignored = [c for c in capture.names if c not in mapping]
    if not receivers:
        raise CaptureError(f"no channel maps to a receiving tap: columns are {listed(capture.names)}, taps "
                           f"are {listed(design.tap_names)}; name the columns like taps or map them with "
                           "--channel COLUMN=TAP", source=capture.source)
    return receivers, drv_col, ignored


def _levels_of(t, v, rising, ramp, entry):
    """Pre-edge samples (before one ramp ahead of the entry crossing) and the record's tail, of trace v."""
    x = v if rising else -v
    i, tc = first_crossing(t, x, entry if rising else -entry)
    pre = v[t < tc - ramp] if tc is not None else v[:0]
    n_tail = max(4, int(TAIL_FRACTION * len(v)))
    return i, tc, pre, v[-n_tail:]


def smoothing_window(t, ramp: float) -> float:
    """Moving-average window [s] used to find the first peak: ramp / 16, at least 4 sample spacings."""
    return max(ramp / SMOOTH_PER_RAMP, 4.0 * float(np.median(np.diff(t))))


def window_opening(t, v, rising: bool, part, v_lo: float, v_hi: float, ramp: float) -> float:
    """Latest opening [s] of the ringback window of a noisy trace: the first peak of a smoothed copy.

    The copy is a centred moving average over :func:`smoothing_window`; its first
    peak is found by the contract's rule (the running maximum at the first
    fall-back of 2 % of the swing, :func:`budget.kernels.metrics.first_peak_time`),
    and the window opens half a smoothing window before it.  The metrics are still
    taken on the raw samples.
    """
    w = smoothing_window(t, ramp)
    s = np.empty_like(v)
    mk.moving_average(t, v, w, s)
    tp = mk.first_peak_time(t, s, rising, float(part.vih), float(part.vil),
                            mk.MONOTONIC_FRACTION * abs(v_hi - v_lo))
    return tp - 0.5 * w


def driver_edge_time(design, capture, col, driver, edge, sim) -> float:
    """Time [s] in the capture at which the driver's edge starts, from the captured driver pin ``col``.

    The captured pin's first crossing of the middle of its settled start and end
    levels is aligned with the simulated pin's first crossing of the middle of
    its DC levels (the simulation starts the ramp at t = 0).
    """
    v = capture[col]
    t = capture.t
    rising = edge == "rise"
    k = sim.index(driver)
    v0, v1 = float(sim.v_start[k]), float(sim.v_end[k])
    ramp = ramp_duration(design, edge)
    mid_sim = 0.5 * (v0 + v1)
    sgn = 1.0 if rising else -1.0
    _, ts = first_crossing(sim.t, sgn * sim.v[:, k], sgn * mid_sim)
    # the capture's own levels: the first and last TAIL_FRACTION of the record
    n = max(4, int(TAIL_FRACTION * len(v)))
    a, b = float(np.median(v[:n])), float(np.median(v[-n:]))
    if not sgn * (b - a) > 0.5 * abs(v1 - v0):
        raise CaptureError(f"the driver channel moves from {a:.3g} V to {b:.3g} V, not a {edge} edge of about "
                           f"{abs(v1 - v0):.3g} V: cannot take the time origin from it (give --t-edge)",
                           source=capture.source, column=col)
    _, tc = first_crossing(t, sgn * v, sgn * 0.5 * (a + b))
    if ts is None or tc is None:  # pragma: no cover (both cross by construction)
        raise CaptureError("the driver channel never crosses its middle level", source=capture.source, column=col)
    return tc - ts


def judge_capture(design, capture, driver: str, edge: str, *, channels: dict | None = None,
                  t_edge: float | None = None, levels: str = "design", remove_offset: bool = False,
                  guardband: float = 0.0, noise: float | None = None, allow_partial: bool = False,
                  sim=None) -> JudgeReport:
    """Judge every receiver channel of ``capture`` (a :class:`budget.capture.Capture`).

    Parameters
    ----------
    design : Design
        With the unit's measured values applied, if any (scalar values).
    driver : str
        The driving tap; edge: "rise" or "fall".
    channels : {column: tap}, optional
        Explicit mapping; columns named like taps need none.
    t_edge : float [s], optional
        Time in the capture at which the driver's edge starts (default: from a
        captured driver channel, else flight times are not available).
    levels : "design" or "capture"
        Where V_lo / V_hi come from (module docstring).
    remove_offset : bool
        Shift each trace so its pre-edge level equals the design's DC level.
    guardband : float [V]
        Subtracted from every margin and rating headroom.
    noise : float [V], optional
        Noise sigma to use instead of the estimate (0 = no hysteresis).
    allow_partial : bool
        Judge a trace whose window cuts the edge (result marked partial, fails).
    sim : Waveforms, optional
        The design's simulation for this driver and edge (computed if None).
    """
    from .capture import judge_waveform
    from .report import si
    from .simulate import simulate

    if edge not in ("rise", "fall"):
        raise ArgumentError(f"edge must be 'rise' or 'fall', got {edge!r}")
    if levels not in LEVELS:
        raise ArgumentError(f"levels must be one of {', '.join(LEVELS)}, got {levels!r}")
    for name, x in (("guardband", guardband), ("noise", noise)):
        if x is not None and not (math.isfinite(x) and x >= 0):
            raise ArgumentError(f"{name} must be a finite voltage >= 0, got {x!r}")
    if t_edge is not None and not math.isfinite(t_edge):
        raise ArgumentError(f"t_edge must be finite, got {t_edge!r}")
    driving_part(design, driver)
    receivers, drv_col, ignored = map_channels(design, capture, driver, channels)
    if sim is None:
        sim = simulate(design, driver, edge)
    notes = []
    if ignored:
        notes.append(f"columns not mapped to a tap, ignored: {', '.join(ignored)}")
    if t_edge is not None:
        origin = f"--t-edge: the driver's edge starts at {si(t_edge, 's')} in the capture"
    elif drv_col is not None:
        t_edge = driver_edge_time(design, capture, drv_col, driver, edge, sim)
        origin = (f"from the driver channel {drv_col!r}: its middle-level crossing aligned with the simulated "
                  f"driver pin's; the driver's edge starts at {si(t_edge, 's')} in the capture")
    else:
        origin = ("not available: no --t-edge and the driver's pin is not captured; flight times are not "
                  "reported")
        notes.append("flight times not available (no time origin: give --t-edge or capture the driver's pin)")
    rising = edge == "rise"
    ramp = ramp_duration(design, edge)
    t = capture.t
    rows, judgements = [], []
    for col, tap in receivers.items():
        part = design.parts[design.tap(tap).part]
        k = sim.index(tap)
        d_lo, d_hi = float(sim.v_low[k]), float(sim.v_high[k])
        entry = float(part.vil if rising else part.vih)
        v = np.array(capture[col], dtype=float)
        i_entry, t_entry, pre, tail = _levels_of(t, v, rising, ramp, entry)
        if i_entry is None:
            side = "VIL" if rising else "VIH"
            raise CaptureError(f"the trace ({v.min():.4g} .. {v.max():.4g} V) never reaches {side} = {entry:.4g} V: "
                               "the window misses the edge (or the channel is not this receiver)",
                               source=capture.source, column=col)
        start_level = d_lo if rising else d_hi
        offset = float(np.median(pre)) - start_level if pre.size else None
        if remove_offset:
            if offset is None:
                raise CaptureError("--remove-offset needs pre-edge samples (the capture starts less than one "
                                   "ramp before the edge)", source=capture.source, column=col)
            v = v - offset
            pre = pre - offset
            tail = tail - offset
        if noise is not None:
            sigma, sigma_from = float(noise), "given"
        elif pre.size >= MIN_PRE_EDGE:
            sigma, sigma_from = robust_sigma(pre), f"{pre.size} pre-edge samples"
        else:
            sigma, sigma_from = diff_sigma(v), "first differences of the record (few pre-edge samples)"
        if levels == "capture":
            if pre.size < 4:
                raise CaptureError("--levels capture needs pre-edge samples (at least 4 earlier than one ramp "
                                   "before the edge)", source=capture.source, column=col)
            a, b = float(np.median(pre)), float(np.median(tail))
            v_lo, v_hi = (a, b) if rising else (b, a)
            if not v_lo < v_hi:
                raise CaptureError(f"the capture's own levels (start {a:.4g} V, end {b:.4g} V) are not a {edge} "
                                   "edge", source=capture.source, column=col)
        else:
            v_lo, v_hi = d_lo, d_hi
        hyst = NOISE_K * sigma
        t_open = window_opening(t, v, rising, part, v_lo, v_hi, ramp) if sigma > 0 else math.inf
        j = judge_waveform(design, t, v, tap, edge, driver, t_edge=0.0 if t_edge is None else t_edge,
                           v_lo=v_lo, v_hi=v_hi, source=capture.source, hysteresis=hyst, guardband=guardband,
                           t_open=t_open)
        # window: the capture must last after its entry crossing as long as the simulation needs to settle
        js = judge_waveform(design, sim.t, sim.v[:, k], tap, edge, driver, v_lo=d_lo, v_hi=d_hi)
        s_sw = js.metrics.t_switch
        s_end = js.metrics.settle_time if js.metrics.settle_time is not None else float(sim.t[-1])
        need = s_end - s_sw
        have = float(t[-1]) - t_entry
        partial = have < need
        if partial and not allow_partial:
            raise CaptureError(f"the trace ends {have * 1e9:.3g} ns after it first reaches "
                               f"{'VIL' if rising else 'VIH'}, but the simulation of this receiver needs "
                               f"{need * 1e9:.3g} ns to settle: the window cuts the edge; capture a longer window "
                               "(or --allow-partial to judge what is there, as a partial result that cannot pass)",
                               source=capture.source, column=col)
        row = _row(j, col, tap, driver, edge, t_edge)
        row.update({"offset": offset, "noise_sigma": sigma, "noise_from": sigma_from, "hysteresis": hyst,
                    "levels_from": levels, "partial": partial, "record_after_entry": have,
                    "needed_after_entry": need})
        if partial:
            row["pass"] = False
            row["violations"] = row["violations"] + [PARTIAL]
        rows.append(row)
        judgements.append(j)
    worst = _worst(design, rows, judgements, guardband)
    settings = {"levels": levels, "remove_offset": bool(remove_offset), "guardband": float(guardband),
                "noise_k": NOISE_K, "noise_given": noise, "t_edge": t_edge, "time_origin": origin,
                "allow_partial": bool(allow_partial),
                "channels": {c: tp for c, tp in receivers.items()}, "driver_channel": drv_col}
    return JudgeReport(design=design.bus.name, source=str(design.source), capture=capture.source, driver=driver,
                       edge=edge, results=rows, worst=worst, settings=settings, notes=notes,
                       capture_notes=list(capture.notes))


def _opt(x):
    return None if x is None or not math.isfinite(float(x)) else float(x)


def _row(j, col, tap, driver, edge, t_edge) -> dict:
    """A result row; times from the driver's ramp start when t_edge [s] is known, else in the capture's time."""
    m = j.metrics
    rising = edge == "rise"
    swing = abs(j.v_hi - j.v_lo)
    timed = t_edge is not None
    shift = t_edge if timed else 0.0

    def rel(x):
        return None if x is None else x - shift
    return {
        "channel": col, "receiver": tap, "driver": driver, "edge": edge, "corner": "measured",
        "v_lo": j.v_lo, "v_hi": j.v_hi,
        "t_switch": rel(m.t_switch), "t_valid": rel(m.t_valid),
        "flight_min": m.flight_min if timed else None, "flight_max": m.flight_max if timed else None,
        "overshoot": m.overshoot, "undershoot": m.undershoot, "ringback": m.ringback,
        "monotonic": m.monotonic, "settle_time": rel(m.settle_time),
        "time_base": "from the driver's ramp start" if timed else "the capture's own time axis",
        "margin_high": _opt(m.margin) if rising else None, "margin_low": None if rising else _opt(m.margin),
        "v_peak": m.v_peak, "v_trough": m.v_trough, "pass": j.passed, "violations": list(j.violations),
        "analysis": "capture", "margin_percent_of_swing": _opt(100.0 * m.margin / swing) if swing > 0 else None,
        "headroom": _opt(j.headroom), "limit": mk.LIMIT_NAMES[j.limit],
        "flight_times": "measured" if timed else "not available (no time origin)",
    }


def _worst(design, rows, judgements, guardband) -> dict:
    from .report import worst_summary

    bits = np.array([0 if r["pass"] else 1 for r in rows])
    head = np.array([-math.inf if r["headroom"] is None else r["headroom"] for r in rows], dtype=float)
    i = int(mk.worst_along(bits, head))
    row, j = rows[i], judgements[i]
    part = design.parts[design.tap(row["receiver"]).part]
    v_max = None if part.v_max is None else float(part.v_max) - guardband
    v_min = None if part.v_min is None else float(part.v_min) + guardband
    w = worst_summary(row, j.limit, v_max, v_min, float(design.noise_budget.min_margin))
    if row.get("partial"):
        w["metric"], w["value"], w["limit"] = "window", None, "the capture must cover the edge until it settles"
    return {"channel": row["channel"], **w}


# ---------------------------------------------------------------------------
# text

def judge_text(rep: JudgeReport) -> str:
    from .report import ns, volts

    s = rep.settings
    out = [f"busbudget judge: {rep.design} ({rep.source})",
           f"capture {rep.capture}: driver {rep.driver}, {rep.edge} edge",
           f"levels from the {s['levels']}" + (", probe offset removed" if s["remove_offset"] else "")
           + f"; guardband {s['guardband']:.3f} V; fall-back hysteresis {s['noise_k']:g} x noise sigma",
           f"time origin: {s['time_origin']}", ""]
    margin = "margin_high" if rep.edge == "rise" else "margin_low"
    headers = ("channel", "receiver", margin, "overshoot", "undershoot", "ringback", "settle", "flight",
               "offset", "noise", "status")
    rows = []
    for r in rep.results:
        flight = "-" if r["flight_min"] is None else f"{ns(r['flight_min'])}..{ns(r['flight_max'])}"
        status = "ok" if r["pass"] else "FAIL: " + ", ".join(r["violations"])
        rows.append((r["channel"], r["receiver"], volts(r[margin]), volts(r["overshoot"], False),
                     volts(r["undershoot"], False), volts(r["ringback"]), ns(r["settle_time"]), flight,
                     "-" if r["offset"] is None else f"{r['offset'] * 1e3:+.1f} mV",
                     f"{r['noise_sigma'] * 1e3:.1f} mV", status))
    widths = [max(len(h), *(len(x[i]) for x in rows)) for i, h in enumerate(headers)]
    out.append("  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip())
    for x in rows:
        out.append("  ".join(c.ljust(w) for c, w in zip(x, widths)).rstrip())
    w = rep.worst
    value = w["value"]
    value = f"{value:+.3f}" if isinstance(value, (int, float)) and not isinstance(value, bool) else str(value)
    out += ["", f"worst: {w['channel']} ({w['receiver']}) {w['metric']} = {value}; headroom "
                f"{volts(w['headroom'])} ({w['limit']})"]
    for m in rep.measured:
        out.append(f"measured: {m['path']} = {m['given']} ({m['origin']})")
    for b in rep.out_of_box:
        out.append(f"OUT OF TOLERANCE BOX: {b['path']} = {b['value']:.4g} (box {b['min']:.4g} .. {b['max']:.4g})")
    for n in rep.notes:
        out.append(f"note: {n}")
    out.append(f"verdict: {rep.verdict.upper()}")
    out.append("Assumes: " + " ".join(ASSUMPTIONS))
    return "\n".join(out) + "\n"
