"""Does the model describe this unit?  Measured against predicted metrics (``busbudget correlate``).

The design, with the unit's measured values applied, is simulated for the same
driver and edge as the capture; both the capture and the simulated pin
waveforms go through the same metric kernel, and each metric is compared with
a stated tolerance.

Rules
-----
Measured side
    :func:`budget.judge.judge_capture` with the capture's **own levels**
    (``levels="capture"``: V_lo, V_hi from its settled start and end), so a
    probe offset shows up once, in the level comparison, and not again in
    every metric; noise handling as in :mod:`budget.judge`.
Predicted side
    :func:`budget.simulate.simulate` of the design with the measured values,
    judged with its DC levels (the metric contract exactly).
Alignment in time
    The capture's time origin is arbitrary (a trigger).  When the driver's pin
    is captured the two are aligned on it (its middle-level crossing, as in
    ``judge``); otherwise on the first crossing of 50 % of the swing at the
    first receiver channel in the file (each waveform between its own levels).
    Times are then compared in the simulation's time base (t = 0 at the start
    of the driver's ramp).
Tolerances (defaults; :data:`DEFAULT_TOLERANCES`)
    levels V_lo, V_hi: 3 % of the swing; overshoot, undershoot, ringback and
    margin: 5 % of the swing; t_switch and t_valid: 10 % of the edge's 10-90 %
    time.  The settle time is shown but not judged (the last exit from the
    settle band jumps by a whole ringing period for a small change of level).
    The rms difference of the aligned waveforms is shown, in % of the swing.
Verdict
    The model describes the unit when every judged metric of every channel is
    within its tolerance (exit 0), else not (exit 1).  The tolerances say how
    closely a lossless linear model can be expected to follow a real unit;
    they are common practice choices, to be set by the responsible engineer.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import ArgumentError
from .limits import listed

SCHEMA = "busbudget.correlate/1"
DEFAULT_TOLERANCES = {"level": 0.03, "voltage": 0.05, "time": 0.10}
VOLTAGE_METRICS = ("overshoot", "undershoot", "ringback", "margin")
TIME_METRICS = ("t_switch", "t_valid")
SHOWN_ONLY = ("settle_time",)


@dataclass
class CorrelateReport:
    """Result of :func:`correlate`: per channel, measured vs predicted metrics with tolerances."""
    design: str
    source: str
    capture: str
    driver: str
    edge: str
    results: list
    alignment: dict
    tolerances: dict
    worst: dict
    judge: object
    notes: list = field(default_factory=list)
    measured: list = field(default_factory=list)
    out_of_box: list = field(default_factory=list)

    @property
    def describes(self) -> bool:
        return all(r["describes"] for r in self.results)

    @property
    def verdict(self) -> str:
        return "pass" if self.describes else "fail"

    def to_json(self) -> dict:
        return {"schema": SCHEMA, "design": self.design, "source": self.source, "capture": self.capture,
                "driver": self.driver, "edge": self.edge, "verdict": self.verdict, "describes": self.describes,
                "worst": self.worst, "results": self.results, "alignment": self.alignment,
                "tolerances": self.tolerances, "measured": self.measured, "out_of_box": self.out_of_box,
                "notes": self.notes,
                "verdict_note": "pass: every judged metric of every channel is within its tolerance, i.e. the "
                                "model describes this unit; fail: it does not"}

    def text(self) -> str:
        return correlate_text(self)


def _crossing(t, v, rising, level):
    from .judge import first_crossing

    sgn = 1.0 if rising else -1.0
    return first_crossing(t, sgn * np.asarray(v), sgn * level)[1]


def correlate(design, capture, driver: str, edge: str, *, channels: dict | None = None,
              tolerances: dict | None = None, noise: float | None = None, sim=None) -> CorrelateReport:
    """Measured (``capture``) against predicted (``design`` simulated) metrics; see the module docstring.

    design: with the unit's measured values applied; tolerances: {"level",
    "voltage", "time"} fractions [-] (of the swing, the swing, the 10-90 %
    edge time) overriding :data:`DEFAULT_TOLERANCES`; noise [V]: noise sigma
    instead of the estimate.
    """
    from .capture import judge_waveform
    from .judge import driver_edge_time, judge_capture
    from .simulate import simulate

    tol = dict(DEFAULT_TOLERANCES)
    for k, x in (tolerances or {}).items():
        if k not in tol:
            raise ArgumentError(f"unknown tolerance {k!r}; tolerances are: {listed(tol)}")
        if x is None:
            continue
        if not (math.isfinite(x) and x >= 0):
            raise ArgumentError(f"tolerance {k!r} must be a finite fraction >= 0, got {x!r}")
        tol[k] = float(x)
    if sim is None:
        sim = simulate(design, driver, edge)
    rising = edge == "rise"
    # the capture judged in its own time base; alignment first (flight times then come out aligned too)
    from .judge import map_channels

    receivers, drv_col, _ = map_channels(design, capture, driver, channels)
    if drv_col is not None:
        shift = driver_edge_time(design, capture, drv_col, driver, edge, sim)
        rule = (f"driver channel {drv_col!r}: its middle-level crossing aligned with the simulated driver pin's")
    else:
        col = next(iter(receivers))
        tap = receivers[col]
        k = sim.index(tap)
        s_lo, s_hi = float(sim.v_low[k]), float(sim.v_high[k])
        first = judge_capture(design, capture, driver, edge, channels=channels, levels="capture", noise=noise,
                              t_edge=0.0, sim=sim)
        row0 = next(r for r in first.results if r["channel"] == col)
        c_mid = 0.5 * (row0["v_lo"] + row0["v_hi"])
        tc = _crossing(capture.t, capture[col], rising, c_mid)
        ts = _crossing(sim.t, sim.v[:, k], rising, 0.5 * (s_lo + s_hi))
        shift = tc - ts
        rule = f"first crossing of 50 % of the swing at the first receiver channel {col!r} ({tap})"
    rep = judge_capture(design, capture, driver, edge, channels=channels, levels="capture", noise=noise,
                        t_edge=shift, sim=sim)
    edge_time = float(design.edge.rise if rising else design.edge.fall)
    results = []
    worst = None
    for row in rep.results:
        tap = row["receiver"]
        k = sim.index(tap)
        s_lo, s_hi = float(sim.v_low[k]), float(sim.v_high[k])
        js = judge_waveform(design, sim.t, sim.v[:, k], tap, edge, driver, v_lo=s_lo, v_hi=s_hi)
        pm = js.metrics
        swing = abs(s_hi - s_lo)
        margin_key = "margin_high" if rising else "margin_low"
        measured = {"v_lo": row["v_lo"], "v_hi": row["v_hi"], "overshoot": row["overshoot"],
                    "undershoot": row["undershoot"], "ringback": row["ringback"], "margin": row[margin_key],
                    "t_switch": row["t_switch"], "t_valid": row["t_valid"], "settle_time": row["settle_time"]}
        predicted = {"v_lo": s_lo, "v_hi": s_hi, "overshoot": pm.overshoot, "undershoot": pm.undershoot,
                     "ringback": pm.ringback, "margin": pm.margin, "t_switch": pm.t_switch,
                     "t_valid": pm.t_valid, "settle_time": pm.settle_time}
        metrics = {}
        for name in measured:
            if name in ("v_lo", "v_hi"):
                limit, of = tol["level"] * swing, "level"
            elif name in VOLTAGE_METRICS:
                limit, of = tol["voltage"] * swing, "voltage"
            elif name in TIME_METRICS:
                limit, of = tol["time"] * edge_time, "time"
            else:
                limit, of = None, None
            a, b = measured[name], predicted[name]
            diff = None if a is None or b is None else a - b
            if limit is None:
                within = None
            elif a is None and b is None:
                within = True
            else:
                within = diff is not None and abs(diff) <= limit
            metrics[name] = {"measured": a, "predicted": b, "difference": diff, "tolerance": limit,
                             "within": within, "judged": limit is not None}
            if limit is not None:
                ratio = math.inf if diff is None else (abs(diff) / limit if limit > 0 else
                                                       (0.0 if diff == 0 else math.inf))
                cand = {"channel": row["channel"], "driver": driver, "receiver": tap, "edge": edge, "metric": name,
                        "value": diff,
                        "measured": a, "predicted": b, "difference": diff, "tolerance": limit,
                        "ratio": None if math.isinf(ratio) else ratio, "within": within}
                if worst is None or ratio > worst[0]:
                    worst = (ratio, cand)
        rms = _rms_difference(capture.t - shift, capture[row["channel"]], sim.t, sim.v[:, k], swing)
        describes = all(m["within"] for m in metrics.values() if m["judged"])
        results.append({"channel": row["channel"], "receiver": tap, "driver": driver, "edge": edge,
                        "describes": describes, "metrics": metrics,
                        "rms_difference_percent_of_swing": rms,
                        # the measured margins under the contract's keys (records use them)
                        "margin_high": row["margin_high"], "margin_low": row["margin_low"],
                        "noise_sigma": row["noise_sigma"]})
    tolerances_doc = {
        "level": {"fraction": tol["level"], "of": "swing", "applies_to": ["v_lo", "v_hi"]},
        "voltage": {"fraction": tol["voltage"], "of": "swing", "applies_to": list(VOLTAGE_METRICS)},
        "time": {"fraction": tol["time"], "of": "10-90 % edge time", "edge_time": edge_time,
                 "applies_to": list(TIME_METRICS)},
        "shown_not_judged": list(SHOWN_ONLY) + ["rms_difference_percent_of_swing"],
    }
    notes = list(rep.notes)
    return CorrelateReport(design=design.bus.name, source=str(design.source), capture=capture.source,
                           driver=driver, edge=edge, results=results,
                           alignment={"rule": rule, "capture_time_of_ramp_start": shift},
                           tolerances=tolerances_doc, worst=worst[1], judge=rep, notes=notes)


def _rms_difference(tc, vc, ts, vs, swing):
    """rms of capture - simulation [% of swing] over the overlap of the two time bases (simulation interpolated)."""
    m = (tc >= ts[0]) & (tc <= ts[-1])
    if np.count_nonzero(m) < 2 or swing <= 0:
        return None
    d = vc[m] - np.interp(tc[m], ts, vs)
    return float(100.0 * np.sqrt(np.mean(d * d)) / swing)


def correlate_text(rep: CorrelateReport) -> str:
    from .report import si

    out = [f"busbudget correlate: {rep.design} ({rep.source})",
           f"capture {rep.capture}: driver {rep.driver}, {rep.edge} edge",
           f"aligned on: {rep.alignment['rule']} (the driver's ramp starts at "
           f"{si(rep.alignment['capture_time_of_ramp_start'], 's')} in the capture)",
           "tolerances: levels {:.3g} % of swing; overshoot/undershoot/ringback/margin {:.3g} % of swing; "
           "t_switch/t_valid {:.3g} % of the edge time ({}); settle time shown, not judged".format(
               100 * rep.tolerances["level"]["fraction"], 100 * rep.tolerances["voltage"]["fraction"],
               100 * rep.tolerances["time"]["fraction"], si(rep.tolerances["time"]["edge_time"], "s")), ""]
    for r in rep.results:
        out.append(f"{r['channel']} ({r['receiver']}): "
                   + ("describes" if r["describes"] else "DOES NOT DESCRIBE")
                   + (f"; rms difference {r['rms_difference_percent_of_swing']:.2f} % of swing"
                      if r["rms_difference_percent_of_swing"] is not None else ""))
        rows = [("metric", "measured", "predicted", "difference", "tolerance", "")]
        for name, m in r["metrics"].items():
            unit = "s" if name in TIME_METRICS + SHOWN_ONLY else "V"
            rows.append((name, si(m["measured"], unit) if m["measured"] is not None else "never",
                         si(m["predicted"], unit) if m["predicted"] is not None else "never",
                         si(m["difference"], unit), "+-" + si(m["tolerance"], unit) if m["judged"] else "shown",
                         "" if not m["judged"] else ("ok" if m["within"] else "OUTSIDE")))
        widths = [max(len(x[i]) for x in rows) for i in range(len(rows[0]))]
        for x in rows:
            out.append("  " + "  ".join(c.ljust(w) for c, w in zip(x, widths)).rstrip())
        out.append("")
    w = rep.worst
    out.append(f"largest difference against its tolerance: {w['channel']} ({w['receiver']}) {w['metric']}")
    for m in rep.measured:
        out.append(f"measured value: {m['path']} = {m['given']} ({m['origin']})")
    for b in rep.out_of_box:
        out.append(f"OUT OF TOLERANCE BOX: {b['path']} = {b['value']:.4g} (box {b['min']:.4g} .. {b['max']:.4g})")
    for n in rep.notes:
        out.append(f"note: {n}")
    out.append("verdict: " + ("PASS: the model describes this unit" if rep.describes else
                              "FAIL: the model does not describe this unit"))
    out.append("The comparison is an estimate: confirm by measurement and with the part makers' data.")
    return "\n".join(out) + "\n"
