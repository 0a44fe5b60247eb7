"""Impedance profile from a TDR step response by layer peeling (dynamic deconvolution).

The port voltage v(t) of a TDR source (open-circuit EMF step of height E [V] behind
a resistance R [ohm], with a finite linear rise of 0-100 % duration t_r) driving a
lossless non-uniform line is peeled layer by layer, so that the multiple reflections
between impedance steps are accounted for instead of reading rho = (Z - Z0)/(Z + Z0)
off each sample.

Method (discrete layer peeling of a cascade of equal-delay sections; the Schur /
layer-peeling recursion, A. M. Bruckstein and T. Kailath, "Inverse scattering for
discrete transmission-line models", SIAM Review 29(3), 1987 -- from memory):

1. Waves at the port referred to R: the incident wave is a = (v + R i)/2 = e/2 and the
   reflected wave b = (v - R i)/2 = v - e/2 (i = (e - v)/R), with the levels taken
   relative to the port's DC level before the edge.
2. The line is modelled as sections of equal round-trip delay ``cell``
   (default and minimum: t_r).  Because the edge is a linear ramp no longer than one
   cell, the port voltage sampled at t0 + (t_r + cell)/2 + n*cell equals the response
   to an *ideal* step on that cell grid (exact when the impedance steps fall on cell
   boundaries; otherwise a step is smeared over one cell).  This is how the finite
   rise time is handled: no deconvolution, at the price of a resolution of one cell
   in round-trip time, i.e. about t_r/2 in one-way delay.
3. Layer k: the first arrival of the forward wave A_k[0] and of the backward wave
   B_k[0] give the reflection coefficient r_k = B_k[0]/A_k[0] (deeper layers answer
   one round trip later).  The waves are carried through the interface with the
   lossless chain matrix  A' = (A - r B)/(1 - r),  B' = (B - r A)/(1 - r)  and through
   the section (in a frame that moves with the forward wave: B shifts one cell
   earlier).  Z_{k+1} = Z_k (1 + r_k)/(1 - r_k), starting from Z_0 = R.

Accuracy (tests/test_tdr.py, measured): impedance steps on the cell grid come back to
rounding error from the engine's waveforms (both are exact for lossless lines on a
common grid); steps off the grid leave one cell of intermediate impedance and an
after-effect of up to about 2 % in the next cell, cells one cell or more from a step
are within 0.5 % (engine and scikit-rf waveforms alike).  A discontinuity shorter than
one cell cannot show its impedance (a half-cell 30 ohm section between 50 ohm lines
reads 38 ohm) but keeps its electrical size: the integral of ln(Z/Z0) over round-trip
time within a few %.

Segments: walking from the port, a new segment starts where a cell's impedance
differs from the running segment's mean by more than ``tolerance`` (default 2 %)
of that mean; a segment's z is the mean of its cells.  A step that falls inside a
cell therefore shows as a one-cell segment of intermediate impedance.

Assumptions (stated in every report): lossless line (series loss makes the profile
creep upward along the line), a linear edge of known or estimated start and duration,
a port with no parasitic capacitance or inductance, single mode (a differential
trace gives the differential impedance).  Peeling stops at a reflection coefficient
beyond +-END_RHO (an open or a short: nothing behind it can be seen).  The result is
an estimate; confirm against the board's impedance coupons and the fabricator's data.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import ArgumentError, CaptureError
from .jit import kernel

SCHEMA = "busbudget.tdr/1"
END_RHO = 0.9          # |r| beyond this ends the profile (impedance ratio 19:1): an open or a short
SEGMENT_TOLERANCE = 0.02   # a new segment starts where Z leaves the segment's mean by more than 2 %
# |rho| may exceed 1 by this much at an open or a short (measurement noise) before it is called impossible
PASSIVE_SLACK = 0.05
C0 = 299_792_458.0      # speed of light in vacuum [m/s] (SI definition)


# ---------------------------------------------------------------------------
# the textbook single-reflection formulas (one interface, no multiple reflections)

def reflection_coefficient(z, z0):
    """Voltage reflection coefficient [-] of impedance z [ohm] seen from a line of z0 [ohm].

    rho = (Z - Z0)/(Z + Z0) (e.g. D. M. Pozar, Microwave Engineering, 4th ed., 2012, sec. 2.3).
    """
    return (z - z0) / (z + z0)


def impedance_from_rho(rho, z0):
    """Impedance [ohm] that reflects rho [-] on a line of z0 [ohm]: Z = Z0 (1 + rho)/(1 - rho)."""
    return z0 * (1.0 + rho) / (1.0 - rho)


# ---------------------------------------------------------------------------
# kernel

@kernel
def peel_layers(a, b, r_port, end_rho, rho, z):
    """Layer peeling (see module docstring); a, b [V] port waves on the cell grid.

    rho[k] [-]: reflection coefficient of interface k (0 = at the port, R -> Z_1);
    z[k] [ohm]: impedance of the section behind interface k.  Returns the number of
    interfaces found; stops after an |rho| > end_rho (z = inf for an open, 0 for a short).
    """
    n = a.shape[0]
    fa = a.copy()
    fb = b.copy()
    zk = r_port
    for k in range(n):
        m = n - k
        if fa[0] == 0.0 or not math.isfinite(fa[0]) or not math.isfinite(fb[0]):
            return k
        r = fb[0] / fa[0]
        rho[k] = r
        if abs(r) > end_rho:
            z[k] = math.inf if r > 0 else 0.0
            return k + 1
        zk = zk * (1.0 + r) / (1.0 - r)
        z[k] = zk
        g = 1.0 / (1.0 - r)
        for j in range(m):
            aj = fa[j]
            bj = fb[j]
            fa[j] = (aj - r * bj) * g
            fb[j] = (bj - r * aj) * g
        # the backward wave behind interface k reaches interface k+1 one cell earlier
        for j in range(m - 1):
            fb[j] = fb[j + 1]
    return n


# ---------------------------------------------------------------------------
# Python API

@dataclass(frozen=True)
class Segment:
    """A run of near-constant impedance: z [ohm] (mean), round-trip times [s], positions [m] or None."""
    z: float
    t_start: float
    t_end: float
    x_start: float | None
    x_end: float | None

    def as_dict(self) -> dict:
        return {"z": self.z, "t_start": self.t_start, "t_end": self.t_end,
                "x_start": self.x_start, "x_end": self.x_end}


@dataclass(frozen=True)
class Profile:
    """Impedance profile: section k spans round-trip time t[k] .. t[k] + cell from the port.

    t [s] round-trip time of each section's start; z [ohm]; rho [-] reflection
    coefficient at each section's start; x [m] one-way distance (None without a
    delay); segments; end: None, or ("open" | "short", round-trip time [s]).
    """
    t: np.ndarray
    z: np.ndarray
    rho: np.ndarray
    x: np.ndarray | None
    cell: float
    ramp: float
    t0: float
    source_r: float
    emf: float
    delay: float | None
    segments: tuple
    end: tuple | None = None
    notes: tuple = field(default_factory=tuple)

    @property
    def resolution(self) -> float:
        """One-way delay resolution [s] (half a cell)."""
        return 0.5 * self.cell

    def to_json(self) -> dict:
        """The busbudget.tdr/1 document (SI units; non-finite impedances written as null)."""
        def num(v):
            return float(v) if math.isfinite(v) else None
        doc = {"schema": SCHEMA, "t": [float(v) for v in self.t], "z": [num(v) for v in self.z]}
        if self.x is not None:
            doc["x"] = [float(v) for v in self.x]
        doc["segments"] = [{k: (num(v) if isinstance(v, float) else v) for k, v in s.as_dict().items()}
                           for s in self.segments]
        doc.update({"source_r": self.source_r, "emf": self.emf, "delay": self.delay, "cell": self.cell,
                    "resolution": self.resolution, "ramp": self.ramp, "t0": self.t0,
                    "end": None if self.end is None else {"kind": self.end[0], "t": self.end[1]},
                    "notes": list(self.notes)})
        return doc

    def text(self) -> str:
        """Segments as a table for people, with the model's assumptions."""
        rows = [("#", "round trip from", "to", "distance from", "to", "Z")]
        for i, s in enumerate(self.segments, 1):
            xs = "-" if s.x_start is None else f"{s.x_start * 1e3:.1f} mm"
            xe = "-" if s.x_end is None else f"{s.x_end * 1e3:.1f} mm"
            z = "open" if s.z == math.inf else ("short" if s.z == 0 else f"{s.z:.2f} ohm")
            rows.append((str(i), f"{s.t_start * 1e9:.3f} ns", f"{s.t_end * 1e9:.3f} ns", xs, xe, z))
        w = [max(len(r[i]) for r in rows) for i in range(6)]
        out = ["  ".join(c.rjust(w[i]) for i, c in enumerate(r)) for r in rows]
        out.append(f"resolution: {self.cell * 1e12:.0f} ps round trip ({self.resolution * 1e12:.0f} ps one way); "
                   f"edge 0-100 % {self.ramp * 1e12:.0f} ps from t = {self.t0 * 1e9:.3f} ns; "
                   f"source {self.source_r:g} ohm, EMF step {self.emf:g} V")
        out += [f"note: {n}" for n in self.notes]
        out.append("Estimate from a lossless layer-peeling model; confirm with impedance coupons, "
                   "the fabricator's data and the applicable standards.")
        return "\n".join(out) + "\n"


def estimate_edge(t, v, *, source: str = "<arrays>"):
    """Start t0 [s] and 0-100 % duration [s] of the first edge of a TDR port voltage.

    Rule: the first pulse of |dv/dt| that reaches 20 % of its largest value is the
    edge; it spans the samples where the pulse stays above 10 % of its own peak.
    The equivalent linear ramp has the edge's swing (level after the pulse minus
    level before it) and the median slope of the pulse's core (samples above half its
    peak); it is centred on the edge's 50 % crossing.  An edge that runs into the
    first reflection reads wrong: give ``ramp`` and ``t0`` then.
    """
    dv = np.gradient(v, t)
    mag = np.abs(dv)
    top = float(mag.max())
    if not top > 0:
        raise CaptureError("the port voltage never changes: no TDR edge in the capture", source=source)
    i = int(np.flatnonzero(mag >= 0.2 * top)[0])
    while i + 1 < mag.size and mag[i + 1] >= mag[i]:
        i += 1
    peak = mag[i]
    lo = i
    while lo > 0 and mag[lo - 1] >= 0.1 * peak:
        lo -= 1
    hi = i
    while hi + 1 < mag.size and mag[hi + 1] >= 0.1 * peak:
        hi += 1
    if lo == 0:
        raise CaptureError("the capture starts after the edge began: the baseline is unknown "
                           "(capture some samples before the edge, or give t0)", source=source)
    if hi + 1 >= v.size:
        raise CaptureError("the capture ends inside the first edge", source=source)
    v_before = v[lo - 1]
    v_after = v[hi + 1]
    swing = v_after - v_before
    core = mag[lo:hi + 1]
    slope = float(np.median(core[core >= 0.5 * peak]))
    rise = abs(swing) / slope
    # 50 % crossing of the edge, interpolated
    u = (v[lo:hi + 2] - v_before) / swing
    j = int(np.flatnonzero(u >= 0.5)[0])
    if j == 0:
        t_mid = t[lo]
    else:
        t_mid = t[lo + j - 1] + (0.5 - u[j - 1]) / (u[j] - u[j - 1]) * (t[lo + j] - t[lo + j - 1])
    return float(t_mid - 0.5 * rise), float(rise)


def tdr_profile(t, v, *, source_r: float, emf: float, ramp: float | None = None, t0: float | None = None,
                cell: float | None = None, delay: float | None = None, er_eff: float | None = None,
                tolerance: float = SEGMENT_TOLERANCE, source: str = "<arrays>") -> Profile:
    """Impedance profile from a TDR port voltage by layer peeling.

    Parameters
    ----------
    t, v : arrays [s], [V]
        Port voltage (incident plus reflected) vs time, strictly increasing time,
        including some samples before the edge (the pre-edge level is the baseline).
    source_r : float [ohm]
        TDR source resistance.
    emf : float [V]
        Open-circuit step height of the source (sign gives the edge direction).
    ramp, t0 : float [s], optional
        0-100 % duration and start of the linear edge (a 10-90 % rise time is
        0.8 ramp); estimated from the capture when not given (:func:`estimate_edge`).
    cell : float [s], optional
        Round-trip duration of one section (>= ramp; default ramp).
    delay : float [s/m], optional / er_eff : float [-], optional
        Delay per length, or effective permittivity (delay = sqrt(er_eff)/c), for the
        distance axis.
    tolerance : float [-]
        Segment rule: a new segment starts where Z differs from the running segment's
        mean by more than this fraction.
    source : str
        Name of the capture in error messages.
    """
    t = np.asarray(t, dtype=float)
    v = np.asarray(v, dtype=float)
    for name, x in (("source_r", source_r), ("emf", emf)):
        if not isinstance(x, (int, float)) or isinstance(x, bool) or not math.isfinite(x):
            raise ArgumentError(f"{name} must be a finite number, got {x!r}")
    if not source_r > 0:
        raise ArgumentError(f"source_r must be a positive resistance [ohm], got {source_r!r}")
    if emf == 0:
        raise ArgumentError("emf must be a non-zero step [V]")
    if delay is not None and er_eff is not None:
        raise ArgumentError("give delay or er_eff, not both")
    if er_eff is not None:
        if not (math.isfinite(er_eff) and er_eff >= 1):
            raise ArgumentError(f"er_eff must be at least 1, got {er_eff!r}")
        delay = math.sqrt(er_eff) / C0
    if delay is not None and not (math.isfinite(delay) and delay > 0):
        raise ArgumentError(f"delay must be a positive delay per length [s/m], got {delay!r}")
    if not (0 < tolerance < 1):
        raise ArgumentError(f"tolerance must be between 0 and 1, got {tolerance!r}")
    if t.ndim != 1 or t.shape != v.shape or t.size < 4:
        raise CaptureError("need a 1-D time axis and port voltage of one length, at least 4 samples", source=source)
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(v))) or np.any(np.diff(t) <= 0):
        raise CaptureError("time must increase strictly and every sample must be finite", source=source)
    notes = []
    if ramp is None or t0 is None:
        t0_est, rise_est = estimate_edge(t, v, source=source)
        if ramp is None:
            ramp = rise_est
            notes.append(f"edge duration estimated from the capture: {ramp * 1e12:.1f} ps (0-100 %)")
        if t0 is None:
            if t0_est < t[0] - 0.5 * (t[1] - t[0]):
                raise CaptureError("the capture starts after the edge began: the baseline is unknown "
                                   "(capture some samples before the edge, or give t0)", source=source)
            t0 = max(t0_est, float(t[0]))
            notes.append(f"edge start estimated from the capture: t = {t0 * 1e9:.4f} ns")
    if not (math.isfinite(ramp) and ramp > 0):
        raise ArgumentError(f"ramp must be a positive time [s], got {ramp!r}")
    if cell is None:
        cell = ramp
    if not (math.isfinite(cell) and cell > 0):
        raise ArgumentError(f"cell must be a positive time [s], got {cell!r}")
    if cell < ramp * (1 - 1e-9):
        raise ArgumentError(f"cell ({cell * 1e12:.1f} ps) shorter than the edge ({ramp * 1e12:.1f} ps): "
                            "the edge must fit in one section")
    if not t[0] <= t0 < t[-1]:
        raise CaptureError(f"the edge start t0 = {t0:g} s is outside the capture "
                           f"({t[0]:g} .. {t[-1]:g} s)", source=source)
    pre = v[t <= t0]
    if pre.size == 0:
        raise CaptureError("no samples before the edge: the baseline is unknown", source=source)
    base = float(np.mean(pre[-max(1, min(pre.size, 16)):]))
    first = t0 + 0.5 * (ramp + cell)
    n = int(math.floor((t[-1] - first) / cell + 1e-9)) + 1
    if n < 1:
        raise CaptureError(f"the capture ends {(t[-1] - t0) * 1e9:.3g} ns after the edge starts: "
                           "too short for one section", source=source)
    ts = first + cell * np.arange(n)
    vs = np.interp(ts, t, v) - base
    a = np.full(n, 0.5 * emf)
    b = vs - 0.5 * emf
    rho = np.full(n, np.nan)
    z = np.full(n, np.nan)
    k = peel_layers(a, b, float(source_r), END_RHO, rho, z)
    if k == 0:
        raise CaptureError("no layer could be peeled (no incident wave)", source=source)
    rho, z = rho[:k], z[:k]
    if abs(rho[-1]) > 1.0 + PASSIVE_SLACK:
        raise CaptureError(f"reflection coefficient {rho[-1]:+.3f} at {cell * (k - 1) * 1e9:.3f} ns round trip is "
                           "beyond +-1, impossible for a passive line: check the source resistance, the EMF "
                           "step and the edge timing", source=source)
    tt = cell * np.arange(k)
    end = None
    if abs(rho[-1]) > END_RHO:
        end = ("open" if rho[-1] > 0 else "short", float(tt[-1]))
        notes.append(f"{end[0]} at {tt[-1] * 1e9:.3f} ns round trip (reflection {rho[-1]:+.3f}); "
                     "the profile ends there")
    if np.any(z[np.isfinite(z)] <= 0):
        raise CaptureError("the peeled impedance turns negative: check --source-r, --emf and the edge timing",
                           source=source)
    x = None if delay is None else tt / (2.0 * delay)
    segments = find_segments(tt, z, cell, delay, tolerance)
    return Profile(t=tt, z=z, rho=rho, x=x, cell=float(cell), ramp=float(ramp), t0=float(t0),
                   source_r=float(source_r), emf=float(emf), delay=delay, segments=tuple(segments), end=end,
                   notes=tuple(notes))


def find_segments(t, z, cell, delay, tolerance):
    """Runs of near-constant impedance, in order from the port (rule in :func:`tdr_profile`)."""
    segs = []
    start, total, count = 0, 0.0, 0
    for i, zi in enumerate(z):
        if count and math.isfinite(zi) and abs(zi - total / count) <= tolerance * (total / count):
            total += zi
            count += 1
            continue
        if count:
            segs.append((start, i, total / count))
        start, total, count = i, zi, 1
        if not math.isfinite(zi):
            segs.append((i, i + 1, zi))
            count = 0
            start = i + 1
    if count:
        segs.append((start, len(z), total / count))
    out = []
    for s, e, zm in segs:
        t_s, t_e = float(t[s]), float(t[s] + cell * (e - s))
        out.append(Segment(z=float(zm), t_start=t_s, t_end=t_e,
                           x_start=None if delay is None else t_s / (2 * delay),
                           x_end=None if delay is None else t_e / (2 * delay)))
    return out
