"""Independent frequency-domain reference for pin waveforms, built on scikit-rf.

This is the outside oracle for the transient engine (docs/metrics.md,
"Accuracy target").  It shares nothing with the engine but the Design model
objects: it reads ``design.lines``, ``design.segments``, ``design.taps``,
``design.parts``, ``design.terminations`` and ``design.edge`` and never imports
``budget.netlist`` or ``budget.kernels``.

Scope
-----
The driving part must have ``r_high == r_low``: the driver is then one voltage
source v_s(t) behind a fixed resistance r, and the whole bus is a linear
time-invariant network.  (With r_high != r_low the engine's Norton blend makes
the driver's conductance change during the ramp, which no single transfer
function describes.)  Designs with array values (batches) are not accepted.

Method
------
1. Circuit, written here from the device-chain contract, docs/design-file.md:
   bus node -- stub line (optional) -- series termination R (optional) -- pad --
   l_pkg (optional) -- die; the die carries c_pin and r_in to ground and the
   driver's source.  Terminations: parallel r to v; thevenin r_up to v_up and
   r_down to ground; rc = r in series with c to ground; series = the R above.
2. Lines (every segment and every stub, however short): one exact uniform
   RLGC line with G' = 0, L' = z0 * delay, C' = delay / z0 per metre
   (docs/references.md B1) and R' = r_dc, so
   ``gamma = sqrt((R' + jwL')(jwC'))`` and ``Zc = sqrt((R' + jwL')/(jwC'))``
   (telegrapher's equations; D. M. Pozar, *Microwave Engineering*, 4th ed.,
   Wiley 2012, section 2.1 -- from memory).  The two-port is made by
   ``skrf.media.DefinedGammaZ0(frequency, z0=Zc, gamma=gamma).line(length, "m")``
   and turned into Y parameters by scikit-rf (``Network.y``).  No sections, no
   lumping: the loss is distributed exactly, and a line shorter than any time
   step is still a line here.
3. Lumped parts as admittances: R -> 1/R, L -> 1/(jwL), C -> jwC, rc
   termination -> 1/(R + 1/(jwC)), driver -> 1/r.  Nodal analysis Y(jw) V = I
   at every frequency gives the die-node transfer functions
   H(jw) = V_die / V_s.
4. DC levels: a separate resistive nodal solve with the driver in its start
   and end states (lossless lines and inductors are shorts -- their nodes are
   merged --, a lossy line is r_dc * length, capacitors are open).
5. Time domain: the source is taken as a periodic trapezoid of period T: the
   driver's linear ramp 0 -> 1 over t_ramp = (10-90 % time) / 0.8 starting at
   t = 0, held to T/2, then the same ramp back down.  Its Fourier series has
   only the mean 1/2 and odd harmonics,
   ``X_k = 2 (1 - exp(-j w_k t_ramp)) / (T t_ramp (j w_k)^2)``, w_k = 2 pi k/T,
   so H is never needed at f = 0 except as the DC solution H(0).  The
   periodic steady state y(t) = H(0)/2 + 2 Re sum_k H(jw_k) X_k exp(j w_k t)
   (response of an LTI network to a Fourier series; A. V. Oppenheim,
   A. S. Willsky, *Signals and Systems*, 2nd ed., 1997, ch. 3 -- from memory)
   is summed exactly at the requested uniform time grid by the chirp-z
   transform (scipy.signal.czt).  For 0 <= t < T/2 it equals the response to
   a single edge, up to what has not settled by T/2.
   Pin voltage = v_start + (v_1 - v_0) * y(t).
   T is stretched by an irrational factor so that no harmonic lands exactly on
   a half-wave resonance of a lossless line (where its Y parameters are
   infinite).

Accuracy (each run measures its own and reports it; the tests assert on it)
-----------------------------------------------------------------------------
- Unsettled residue: ``settle_residual`` = max over taps and over the last
  tenth of the first half period of |y - H(0)| / |H(0)|; T/2 is doubled
  until it is below ``SETTLE_TOL`` (1e-3).  The residue adds at most that
  fraction of the swing to the early waveform.
- Truncation of the series at f_max: the Fourier sum of a ramp response
  converges as 1/f_max (the input's coefficients fall as 1/k^2), bounded by
  max|H| / (pi^2 t_ramp f_max).  ``truncation_estimate`` is the largest
  difference, in units of each tap's swing, between the sums to f_max and to
  f_max/2 (the error of the f_max sum is about half of it).  f_max starts at
  F_MAX_START / t_ramp (50 / t_ramp) and doubles, up to F_MAX_LIMIT / t_ramp,
  until the estimate is below TRUNCATION_TOL (2e-4).
- The series is summed exactly at the grid points (chirp-z, ~1e-13); between
  grid points :meth:`Reference.at` interpolates linearly.  Callers comparing
  with the engine pass ``step`` = engine step / 4, so engine times are grid
  points.
- scikit-rf's line Y parameters agree with the closed form
  Y11 = 1/(Zc tanh(gamma l)), Y12 = -1/(Zc sinh(gamma l)) to ~1e-13
  (checked in tests/test_reference_skrf.py).
Measured on the project's test designs (tests/test_reference_skrf.py):
truncation estimate <= 2e-4 and settle residue <= 1e-3 of the swing, i.e. the
reference is good to about 0.1 % of the swing, ten times tighter than the
engine's 1 % target.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import skrf
from scipy.signal import czt
from skrf.media import DefinedGammaZ0

# Unsettled residue allowed before T/2, as a fraction of each tap's DC transfer H(0) [-].
SETTLE_TOL = 1e-3
# Highest harmonic f_max: starts at F_MAX_START / t_ramp and doubles, up to
# F_MAX_LIMIT / t_ramp, until the truncation estimate is below TRUNCATION_TOL [-].
F_MAX_START = 50.0
F_MAX_LIMIT = 800.0
TRUNCATION_TOL = 2e-4
# Time grid: at least this many points across the ramp [-].
GRID_PER_RAMP = 200
# T/2 is stretched by this irrational factor (see module docstring, step 5) [-].
_STRETCH = 1.0 + math.sqrt(2.0) / 97.0
# frequencies per batched nodal solve (memory: chunk x n x n complex)
_CHUNK = 512


@dataclass(frozen=True)
class Reference:
    """Reference pin waveforms of every tap for one driver and one edge.

    t [s] fine time grid from 0 (start of the driver's ramp) to t_end; v [V]
    ``[len(t), n_taps]`` in ``taps`` order; v_start / v_end [V] DC levels of
    every die node in the driver's start / end state; settle_residual and
    truncation_estimate [-] are the self-checks described in the module
    docstring; f_max [Hz] and period [s] are the Fourier series used.
    """
    t: np.ndarray
    v: np.ndarray
    taps: tuple
    v_start: np.ndarray
    v_end: np.ndarray
    settle_residual: float
    truncation_estimate: float
    f_max: float
    period: float

    def at(self, t) -> np.ndarray:
        """Reference voltages [V] at times t [s] (linear interpolation), ``[len(t), n_taps]``."""
        t = np.asarray(t, dtype=float)
        if t.min() < 0 or t.max() > self.t[-1] * (1 + 1e-12):
            raise ValueError(f"times must lie in [0, {self.t[-1]:g}] s")
        return np.stack([np.interp(t, self.t, self.v[:, k]) for k in range(self.v.shape[1])], axis=1)

    def __getitem__(self, tap: str) -> np.ndarray:
        return self.v[:, self.taps.index(tap)]


# ---------------------------------------------------------------------------
# circuit built from the Design model (device-chain contract, docs/design-file.md)

@dataclass
class _Circuit:
    nodes: list            # names; ground is -1
    lines: list            # (a, b, z0 [ohm], delay [s/m], r_dc [ohm/m], length [m])
    res: list              # (a, b, r [ohm])
    ind: list              # (a, b, l [H])
    cap: list              # (a, b, c [F])
    rc: list               # (a, r [ohm], c [F])   series R-C from a to ground
    srcs: list             # (a, r [ohm], v [V])   fixed Thevenin sources (terminations)
    die: list              # die node of every tap, in design.taps order
    drv: int               # driver's die node
    r0: float              # driver's source resistance before the edge [ohm]
    r1: float              # driver's source resistance after the edge [ohm]
    v0: float              # source voltage before the edge [V]
    v1: float              # source voltage after the edge [V]
    t_ramp: float          # 0-100 % ramp time [s]

    @property
    def r_drv(self) -> float:
        """The driver's (time-invariant) source resistance [ohm]."""
        if self.r0 != self.r1:
            raise ValueError(f"the reference needs r_high == r_low for the driver (got {self.r0:g} and "
                             f"{self.r1:g} ohm): only then is the bus time-invariant")
        return self.r0


def _scalar(x, what):
    a = np.asarray(x, dtype=float)
    if a.ndim != 0:
        raise ValueError(f"the scikit-rf reference takes scalar designs; {what} is an array")
    return float(a)


def build_circuit(design, driver: str, edge: str) -> _Circuit:
    """Circuit of ``design`` with tap ``driver`` driving ``edge`` ("rise" or "fall")."""
    if edge not in ("rise", "fall"):
        raise ValueError(f"edge must be 'rise' or 'fall', got {edge!r}")
    index = {}

    def node(name):
        if name not in index:
            index[name] = len(index)
        return index[name]

    for s in design.segments:
        node(s.a)
        node(s.b)
    for tp in design.taps:
        node(tp.node)

    def line_of(name, length, label):
        lt = design.lines[name]
        return (_scalar(lt.z0, f"{label} z0"), _scalar(lt.delay, f"{label} delay"),
                _scalar(lt.r_dc, f"{label} r_dc"), _scalar(length, f"{label} length"))

    lines, res, ind, cap, rc, srcs, die = [], [], [], [], [], [], []
    for s in design.segments:
        lines.append((node(s.a), node(s.b)) + line_of(s.line, s.length, f"segment {s.index}"))
    series_r = {tm.tap: _scalar(tm.r, "series r") for tm in design.terminations if tm.type == "series"}
    drv = None
    dtap = None
    for tp in design.taps:
        part = design.parts[tp.part]
        at = node(tp.node)
        if tp.stub is not None:
            end = node(("stub", tp.name))
            lines.append((at, end) + line_of(tp.stub.line, tp.stub.length, f"tap {tp.name} stub"))
            at = end
        if tp.name in series_r:
            pad = node(("pad", tp.name))
            res.append((at, pad, series_r[tp.name]))
            at = pad
        l_pkg = _scalar(part.l_pkg, "l_pkg")
        if l_pkg > 0:
            d = node(("die", tp.name))
            ind.append((at, d, l_pkg))
            at = d
        c_pin = _scalar(part.c_pin, "c_pin")
        if c_pin > 0:
            cap.append((at, -1, c_pin))
        r_in = _scalar(part.r_in, "r_in")
        if math.isfinite(r_in):
            res.append((at, -1, r_in))
        die.append(at)
        if tp.name == driver:
            drv, dtap = at, tp
    if drv is None:
        raise ValueError(f"no tap named {driver!r}")
    for tm in design.terminations:
        if tm.type == "parallel":
            srcs.append((node(tm.node), _scalar(tm.r, "r"), _scalar(tm.v, "v")))
        elif tm.type == "thevenin":
            srcs.append((node(tm.node), _scalar(tm.r_up, "r_up"), _scalar(tm.v_up, "v_up")))
            res.append((node(tm.node), -1, _scalar(tm.r_down, "r_down")))
        elif tm.type == "rc":
            rc.append((node(tm.node), _scalar(tm.r, "r"), _scalar(tm.c, "c")))
        elif tm.type != "series":
            raise ValueError(f"unknown termination type {tm.type!r}")
    dpart = design.parts[dtap.part]
    r_hi, r_lo = _scalar(dpart.r_high, "r_high"), _scalar(dpart.r_low, "r_low")
    v_hi, v_lo = _scalar(dpart.v_high, "v_high"), _scalar(dpart.v_low, "v_low")
    (v0, r0), (v1, r1) = ((v_lo, r_lo), (v_hi, r_hi)) if edge == "rise" else ((v_hi, r_hi), (v_lo, r_lo))
    t_1090 = _scalar(design.edge.rise if edge == "rise" else design.edge.fall, "edge")
    names = [None] * len(index)
    for k, i in index.items():
        names[i] = k
    return _Circuit(nodes=names, lines=lines, res=res, ind=ind, cap=cap, rc=rc, srcs=srcs, die=die,
                    drv=drv, r0=r0, r1=r1, v0=v0, v1=v1, t_ramp=t_1090 / 0.8)


# ---------------------------------------------------------------------------
# DC operating point

def dc_levels(c: _Circuit, v_source: float, r_source: float) -> np.ndarray:
    """DC voltage [V] of every node with the driver's source at v_source [V] behind r_source [ohm]."""
    n = len(c.nodes)
    parent = list(range(n))

    def find(x):
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    conductances = []  # (a, b, g)
    for a, b, z0, delay, r_dc, length in c.lines:
        if r_dc > 0:
            conductances.append((a, b, 1.0 / (r_dc * length)))
        else:
            parent[find(a)] = find(b)        # lossless line: a DC short
    for a, b, _l in c.ind:
        parent[find(a)] = find(b)            # inductor: a DC short
    conductances += [(a, b, 1.0 / r) for a, b, r in c.res]
    roots = sorted({find(i) for i in range(n)})
    gid = {r: k for k, r in enumerate(roots)}
    m = len(roots)
    G = np.zeros((m, m))
    I = np.zeros(m)
    for a, b, g in conductances:
        i = gid[find(a)]
        G[i, i] += g
        if b >= 0:
            j = gid[find(b)]
            G[j, j] += g
            G[i, j] -= g
            G[j, i] -= g
    for a, r, v in c.srcs + [(c.drv, r_source, v_source)]:
        i = gid[find(a)]
        G[i, i] += 1.0 / r
        I[i] += v / r
    if np.linalg.matrix_rank(G) < m:
        raise ValueError("the DC operating point is undefined (part of the network floats)")
    x = np.linalg.solve(G, I)
    return np.array([x[gid[find(i)]] for i in range(n)])


# ---------------------------------------------------------------------------
# frequency domain

def line_y(f, z0, delay, r_dc, length) -> np.ndarray:
    """Y parameters [S] ``[nf, 2, 2]`` of a uniform RLC line at frequencies f [Hz] > 0, by scikit-rf.

    z0 [ohm] lossless characteristic impedance, delay [s/m], r_dc [ohm/m]
    series resistance, length [m].  L' = z0 delay, C' = delay / z0 (docs/references.md B1).
    """
    f = np.asarray(f, dtype=float)
    w = 2 * np.pi * f
    z_ser = r_dc + 1j * w * (z0 * delay)
    y_sh = 1j * w * (delay / z0)
    gamma = np.sqrt(z_ser * y_sh)   # principal branch: Re >= 0 (a wave decays as it travels)
    zc = np.sqrt(z_ser / y_sh)      # principal branch: Re > 0
    media = DefinedGammaZ0(frequency=skrf.Frequency.from_f(f, unit="Hz"), z0=zc, gamma=gamma)
    return media.line(length, unit="m").y


def _signature(c: _Circuit):
    """Everything in ``c`` that the transfer functions depend on (not the edge)."""
    return (tuple(c.lines), tuple(c.res), tuple(c.ind), tuple(c.cap), tuple(c.rc),
            tuple((a, r) for a, r, _v in c.srcs), tuple(c.die), c.drv, c.r_drv, len(c.nodes))


_LINE_Y_CACHE: dict = {}
_H_CACHE: dict = {}
_CACHE_LIMIT = 16


def _remember(cache, key, value):
    if len(cache) >= _CACHE_LIMIT:
        cache.pop(next(iter(cache)))
    cache[key] = value
    return value


def transfer(c: _Circuit, f) -> np.ndarray:
    """Die-node transfer functions H(j 2 pi f) = V_die / V_source [-], ``[nf, n_taps]`` (f > 0 [Hz])."""
    f = np.asarray(f, dtype=float)
    n = len(c.nodes)
    die = np.asarray(c.die)
    out = np.empty((f.size, die.size), dtype=complex)
    fkey = (f.size, float(f[0]), float(f[-1]))
    line_ys = []
    for (_a, _b, *values) in c.lines:   # identical lines (same type and length) share one skrf call
        key = (tuple(values), fkey)
        y2 = _LINE_Y_CACHE.get(key)
        line_ys.append(y2 if y2 is not None else _remember(_LINE_Y_CACHE, key, line_y(f, *values)))
    for lo in range(0, f.size, _CHUNK):
        hi = min(f.size, lo + _CHUNK)
        w = 2 * np.pi * f[lo:hi]
        Y = np.zeros((hi - lo, n, n), dtype=complex)

        def stamp(a, b, y):
            Y[:, a, a] += y
            if b >= 0:
                Y[:, b, b] += y
                Y[:, a, b] -= y
                Y[:, b, a] -= y

        for (a, b, *_), y2 in zip(c.lines, line_ys):
            y2 = y2[lo:hi]
            Y[:, a, a] += y2[:, 0, 0]
            Y[:, a, b] += y2[:, 0, 1]
            Y[:, b, a] += y2[:, 1, 0]
            Y[:, b, b] += y2[:, 1, 1]
        for a, b, r in c.res:
            stamp(a, b, np.full(w.shape, 1.0 / r, dtype=complex))
        for a, b, ell in c.ind:
            stamp(a, b, 1.0 / (1j * w * ell))
        for a, b, cap in c.cap:
            stamp(a, b, 1j * w * cap)
        for a, r, cap in c.rc:
            stamp(a, -1, 1.0 / (r + 1.0 / (1j * w * cap)))
        for a, r, _v in c.srcs:
            stamp(a, -1, np.full(w.shape, 1.0 / r, dtype=complex))
        stamp(c.drv, -1, np.full(w.shape, 1.0 / c.r_drv, dtype=complex))
        rhs = np.zeros((hi - lo, n, 1), dtype=complex)
        rhs[:, c.drv, 0] = 1.0 / c.r_drv     # Norton current of a 1 V source behind r_drv
        V = np.linalg.solve(Y, rhs)[:, :, 0]
        out[lo:hi] = V[:, die]
    if not np.all(np.isfinite(out)):
        raise FloatingPointError("non-finite transfer function (a line at exact resonance?)")
    return out


def _odd_harmonics(c: _Circuit, period, k_max):
    """(k, H) for the odd harmonics k = 1, 3, ... <= k_max of 1/period [s]; cached across edges."""
    key = (_signature(c), period, k_max)
    hit = _H_CACHE.get(key)
    if hit is None:
        k = np.arange(1, k_max + 1, 2)
        hit = _remember(_H_CACHE, key, (k, transfer(c, k / period)))
    return hit


def _series_at(Ck, h0, period, t0, step, m):
    """y(t0 + n step), n < m, of y = h0/2 + 2 Re sum_k Ck[k] exp(j 2 pi k t / period) [-].

    Summed by the chirp-z transform (L. R. Rabiner, R. W. Schafer, C. M. Rader,
    "The chirp z-transform algorithm", IEEE Trans. Audio Electroacoust. 17(2),
    1969 -- from memory; scipy.signal.czt), which evaluates the sum exactly on
    any uniform time grid in O((K + m) log(K + m)).
    """
    z = czt(Ck, m=m, w=np.exp(2j * np.pi * step / period), a=np.exp(-2j * np.pi * t0 / period), axis=0)
    return h0 / 2 + 2 * z.real


def reference_waveforms(design, driver: str, edge: str, *, t_end: float, step: float | None = None,
                        f_max: float | None = None, max_doublings: int = 5) -> Reference:
    """Reference die-node waveforms of every tap at t = 0, step, 2 step, ... <= t_end [s].

    design: a scalar Design whose driving part has r_high == r_low; driver:
    tap name; edge: "rise" or "fall"; t_end [s]: end of the window wanted;
    step [s]: time grid (default t_ramp / GRID_PER_RAMP; the series is summed
    exactly at every grid point); f_max [Hz]: highest harmonic (default:
    F_MAX_START / t_ramp, doubled up to F_MAX_LIMIT / t_ramp until the
    truncation estimate is below TRUNCATION_TOL).  The half period T/2 starts
    at 2 t_end (stretched, see module docstring) and is doubled up to
    ``max_doublings`` times until the network has settled to SETTLE_TOL;
    otherwise ValueError.
    """
    c = build_circuit(design, driver, edge)
    r = c.r_drv   # raises unless r_high == r_low
    v_start = dc_levels(c, c.v0, r)[c.die]
    v_end = dc_levels(c, c.v1, r)[c.die]
    # DC transfer per volt of source, by superposition of the two DC solutions
    dv = c.v1 - c.v0
    h0 = (v_end - v_start) / dv
    step = float(step) if step is not None else c.t_ramp / GRID_PER_RAMP
    m = int(math.floor(t_end / step + 1e-9)) + 1
    t_half = 2.0 * t_end * _STRETCH
    fixed_fmax = f_max is not None
    f_max = f_max if fixed_fmax else F_MAX_START / c.t_ramp
    for _ in range(max_doublings + 1):
        period = 2 * t_half
        k_max = int(f_max * period)
        k, H = _odd_harmonics(c, period, k_max)
        wk = 2 * np.pi * k / period
        X = 2 * (1 - np.exp(-1j * wk * c.t_ramp)) / (period * c.t_ramp * (1j * wk) ** 2)
        Ck = np.zeros((k_max + 1, h0.size), dtype=complex)
        Ck[k] = H * X[:, None]
        y = _series_at(Ck, h0, period, 0.0, step, m)
        Ck_half = Ck.copy()
        Ck_half[k_max // 2 + 1:] = 0
        trunc = float(np.max(np.abs(y - _series_at(Ck_half, h0, period, 0.0, step, m)) / np.abs(h0)))
        if trunc > TRUNCATION_TOL and not fixed_fmax and f_max * 2 <= F_MAX_LIMIT / c.t_ramp * (1 + 1e-9):
            f_max *= 2
            continue
        # what has not settled in the last tenth of the first half period
        n_tail = 2001
        tail = _series_at(Ck, h0, period, 0.9 * t_half, 0.1 * t_half / (n_tail - 1), n_tail - 1)
        settle = float(np.max(np.abs(tail - h0) / np.abs(h0)))
        if settle <= SETTLE_TOL:
            break
        t_half *= 2
    else:
        raise ValueError(f"the network has not settled after T/2 = {t_half / 2:g} s "
                         f"(residue {settle:.2g} of the DC transfer)")
    return Reference(t=np.arange(m) * step, v=v_start + dv * y, taps=tuple(tp.name for tp in design.taps),
                     v_start=v_start, v_end=v_end, settle_residual=settle, truncation_estimate=trunc,
                     f_max=f_max, period=period)


__all__ = ["Reference", "build_circuit", "dc_levels", "line_y", "transfer", "reference_waveforms",
           "SETTLE_TOL", "F_MAX_START", "F_MAX_LIMIT", "TRUNCATION_TOL",
           "GRID_PER_RAMP"]
