"""A lean frequency-domain solve of a bus: the baseline a user would write instead (numpy only).

Not part of the package: the benchmark times it per variant beside the engine.  The
method is textbook circuit analysis:

- dense nodal admittance matrix per complex frequency s; a lossless line of
  impedance z0 and delay td between nodes a and b adds its exact two-port Y
  parameters, Y11 = Y22 = coth(s td) / z0, Y12 = Y21 = -csch(s td) / z0
  (telegrapher's equations; e.g. D. M. Pozar, "Microwave Engineering", 4th ed.,
  2012, Table 4.2 -- from memory); lumped C, L, R add sC, 1/(sL), 1/R;
- the driver is a Thevenin source r behind v_lo + (v_hi - v_lo) ramp(t)
  (time-invariant: r_high == r_low); its ramp's transform is
  (1 - exp(-s T)) / (s^2 T);
- damped-Laplace points s_k = sigma + j 2 pi k / T_w with sigma T_w = ln(1/eps)
  (the aliased copies of the response are weighted by eps), and one inverse FFT:
  v(t_n) e^(-sigma t_n) = irfft of V(s_k) (the numerical inverse Laplace
  transform of L. M. Wedepohl, "Power system transients: errors incurred in the
  numerical inversion of the Laplace transform", Proc. 26th Midwest Symp. on
  Circuits and Systems, 1983 -- from memory), with a Hann window on k against
  Gibbs ringing;
- DC levels from the conductance network with lines and inductors shorted.

Supported designs: lossless lines (r_dc = 0), parallel terminations, parts with
c_pin, l_pkg, r_in, drivers with r_high == r_low: the benchmark's buses.
"""
from __future__ import annotations

import math

import numpy as np

EPS_ALIAS = 1e-4     # weight of the first aliased copy of the response


def _f(x) -> float:
    return float(np.asarray(x))


def circuit(design, driver: str):
    """(n_nodes, lines [(a, b, z0 [ohm], td [s])], shunt-free elements, DC sources) of a design.

    Returns dict with: n, lines, caps [(a, c)], inds [(a, b, l)], conds [(a, b or -1, g)],
    sources [(a, g, v)] (a conductance g to a fixed voltage v), driver node, die nodes per tap.
    """
    idx: dict = {}

    def node(name):
        return idx.setdefault(name, len(idx))

    lines, caps, inds, conds, sources = [], [], [], [], []
    for seg in design.segments:
        lt = design.lines[seg.line]
        if _f(lt.r_dc or 0.0) != 0.0:
            raise NotImplementedError("lean FD solve: lossy lines are not supported")
        lines.append((node(seg.a), node(seg.b), _f(lt.z0), _f(lt.delay) * _f(seg.length)))
    die = {}
    for tap in design.taps:
        part = design.parts[tap.part]
        at = node(tap.node)
        if tap.stub is not None:
            lt = design.lines[tap.stub.line]
            end = node(f"{tap.name}:stub")
            lines.append((at, end, _f(lt.z0), _f(lt.delay) * _f(tap.stub.length)))
            at = end
        l_pkg = _f(part.l_pkg or 0.0)
        if l_pkg > 0:
            d = node(f"{tap.name}:die")
            inds.append((at, d, l_pkg))
            at = d
        die[tap.name] = at
        if _f(part.c_pin or 0.0) > 0:
            caps.append((at, _f(part.c_pin)))
        if part.r_in is not None and math.isfinite(_f(part.r_in)):
            conds.append((at, -1, 1.0 / _f(part.r_in)))
    for term in design.terminations:
        if term.type != "parallel":
            raise NotImplementedError(f"lean FD solve: {term.type} terminations are not supported")
        sources.append((node(term.node), 1.0 / _f(term.r), _f(term.v)))
    part = design.parts[design.tap(driver).part]
    if _f(part.r_high) != _f(part.r_low):
        raise NotImplementedError("lean FD solve: a driver with r_high != r_low is time-varying")
    return dict(n=len(idx), lines=lines, caps=caps, inds=inds, conds=conds, sources=sources,
                drv=die[driver], r_drv=_f(part.r_high), die=die, part=part)


def dc_levels(c, v_drv: float) -> np.ndarray:
    """Node voltages [V] at DC with the driver's source at v_drv [V] (lines, inductors shorted)."""
    parent = list(range(c["n"]))

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i
    for a, b, *_ in c["lines"] + c["inds"]:
        parent[root(a)] = root(b)
    groups = sorted({root(i) for i in range(c["n"])})
    gi = {g: k for k, g in enumerate(groups)}
    m = len(groups)
    g_mat = np.zeros((m, m))
    rhs = np.zeros(m)
    for a, b, g in c["conds"]:
        ia = gi[root(a)]
        g_mat[ia, ia] += g
        if b >= 0:
            ib = gi[root(b)]
            g_mat[ib, ib] += g
            g_mat[ia, ib] -= g
            g_mat[ib, ia] -= g
    for a, g, v in c["sources"] + [(c["drv"], 1.0 / c["r_drv"], v_drv)]:
        ia = gi[root(a)]
        g_mat[ia, ia] += g
        rhs[ia] += g * v
    v = np.linalg.solve(g_mat, rhs)
    return np.array([v[gi[root(i)]] for i in range(c["n"])])


def step_response(c, s: np.ndarray, out: np.ndarray) -> np.ndarray:
    """Node voltages [V s] at the ``out`` nodes per complex frequency ``s`` [1/s] for a unit-volt
    change of the driver's source with transform 1 (multiply by the source's transform)."""
    n, k = c["n"], s.shape[0]
    y = np.zeros((k, n, n), dtype=complex)
    for a, b, z0, td in c["lines"]:
        x = s * td
        e2 = np.exp(-2 * x)
        y11 = (1 + e2) / (1 - e2) / z0          # coth(x) / z0
        y12 = -2 * np.exp(-x) / (1 - e2) / z0   # -csch(x) / z0
        y[:, a, a] += y11
        y[:, b, b] += y11
        y[:, a, b] += y12
        y[:, b, a] += y12
    for a, cap in c["caps"]:
        y[:, a, a] += s * cap
    for a, b, ind in c["inds"]:
        g = 1 / (s * ind)
        y[:, a, a] += g
        y[:, b, b] += g
        y[:, a, b] -= g
        y[:, b, a] -= g
    for a, b, g in c["conds"]:
        y[:, a, a] += g
        if b >= 0:
            y[:, b, b] += g
            y[:, a, b] -= g
            y[:, b, a] -= g
    for a, g, _v in c["sources"]:
        y[:, a, a] += g
    d = c["drv"]
    y[:, d, d] += 1 / c["r_drv"]
    rhs = np.zeros((k, n), dtype=complex)
    rhs[:, d] = 1 / c["r_drv"]
    v = np.linalg.solve(y, rhs[:, :, None])[:, :, 0]
    return v[:, out]


def waveforms(design, driver: str, edge: str, *, t_window: float, n_points: int, taps=None, window="hann"):
    """(t [s], v [n_points, n_taps] [V], v_start, v_end) of the pin waveforms by the lean solve.

    t_window [s]: the window of one inverse transform (its period; the response must have
    settled well before it ends); n_points: samples of the inverse FFT (n_points // 2 + 1
    complex frequencies are solved)."""
    c = circuit(design, driver)
    part = c["part"]
    rising = edge == "rise"
    v0, v1 = (_f(part.v_low), _f(part.v_high)) if rising else (_f(part.v_high), _f(part.v_low))
    t_edge = _f(design.edge.rise if rising else design.edge.fall) / 0.8     # 0-100 % ramp
    taps = list(taps or [t.name for t in design.taps])
    out = np.array([c["die"][t] for t in taps])
    sigma = math.log(1 / EPS_ALIAS) / t_window
    k = np.arange(n_points // 2 + 1)
    s = sigma + 2j * math.pi * k / t_window
    ramp = (1 - np.exp(-s * t_edge)) / (s * s * t_edge)
    h = step_response(c, s, out) * ramp[:, None]
    x = k / k[-1]
    win = {"hann": 0.5 * (1 + np.cos(math.pi * x)), "lanczos": np.sinc(x), "none": np.ones_like(x)}[window]
    t = np.arange(n_points) * (t_window / n_points)
    y = np.fft.irfft(h * win[:, None], n=n_points, axis=0) * (n_points / t_window)
    v_start = dc_levels(c, v0)[out]
    v_end = dc_levels(c, v1)[out]
    return t, v_start + (v1 - v0) * y * np.exp(sigma * t)[:, None], v_start, v_end
