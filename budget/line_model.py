"""How a line becomes kernel elements, and the time-step and window policy: the line/step physics.

A line type (z0 [ohm], delay [s/m], r_dc [ohm/m]) over a length [m] becomes one of:

- a lossless line section solved by the method of characteristics (Branin
  1967), when it has no series loss and is at least one time step long;
- a lumped pi (C/2, L, C/2 with L = z0 TD, C = TD / z0; with loss, R in
  series with L) when it is shorter than the step -- a lumped pi cannot ring
  at the line's quarter-wave frequency, so :func:`choose_dt` never lumps a
  line longer than the ramp / LUMPABLE_RAMP_FRACTION;
- series loss lumped between n lossless sections,
  R/(2n) | TD/n | R/n | ... | TD/n | R/(2n), n chosen so that each lumped
  piece reflects under 0.25 % of a wave and each section is at least one step.

Structural choices (lumped or not, the number of sections) are made from the
tolerance envelope (see :func:`budget.netlist.tolerance_envelope`) so every
variant of a batch shares them.  The window and the largest step worth trying are
chosen here too (the step itself by accuracy: :mod:`budget.step_accuracy`).
"""
from __future__ import annotations

import math

import numpy as np

from .edges import ramp_time
from .errors import DesignError

# -- the largest step worth trying ------------------------------------------------
# The automatic step is chosen by its estimated accuracy (budget/step_accuracy.py): these
# rules only give the largest step it tries, h0, where the error of the method is still in
# its asymptotic (h^2) regime so that a two-step estimate can be trusted.
# Samples across the 0-100 % ramp (10-90 % rise / 0.8 = 0-100 % ramp, linear ramp geometry).
STEPS_PER_RAMP = 16
# Samples per period of the fastest package L - pin C resonance: the trapezoidal rule
# shifts a resonance by about (w dt)^2 / 12 (5 % at 8 samples a period); coarser than
# this the error is no longer a smooth function of the step.
STEPS_PER_LC_PERIOD = 8
# Lumped series loss: sections such that each lumped piece reflects < 0.25 % of a wave,
# i.e. R_section/(4 z0) <= 0.0025.
LOSS_SECTION_FRACTION = 0.01
# Lines may be lumped only if their delay is below the 0-100 % ramp time divided by
# this (their unresolved ringing stays below ~2 TD / (pi T) = 0.5 % of the swing).
LUMPABLE_RAMP_FRACTION = 128
# At most this many lossless sections per lossy line.
MAX_LOSS_SECTIONS = 64

LOSSLESS, LUMPED, SECTIONS = "lossless", "lumped", "sections"


def vmax(x) -> float:
    """Largest value of a scalar or an array over variants."""
    return float(x) if isinstance(x, (float, int)) else float(np.max(x))


def vmin(x) -> float:
    """Smallest value of a scalar or an array over variants."""
    return float(x) if isinstance(x, (float, int)) else float(np.min(x))


# -- time step and window ------------------------------------------------------

def choose_dt(design, edge: str) -> float:
    """Largest automatic time step [s] worth trying for ``edge`` (or the design's ``bus.dt``).

    The step actually used is the largest of h0, h0/sqrt(2), h0/2, ... that meets the
    accuracy estimate of :func:`budget.step_accuracy.choose`; this is h0.  It resolves
    the driver's ramp (STEPS_PER_RAMP samples over its 0-100 % time) and the fastest
    package-inductance resonance (STEPS_PER_LC_PERIOD samples a period).  A line shorter than the step is lumped, which cannot
    ring at its quarter-wave frequency; the corners of a linear ramp of T excite
    that ringing with up to about 2 TD / (pi T) of the swing, so only lines with
    TD < T / LUMPABLE_RAMP_FRACTION may be lumped, and longer ones shorten the
    step to their own delay (at most LUMPABLE_RAMP_FRACTION / STEPS_PER_RAMP = 8x).
    """
    if design.bus.dt is not None:
        return vmin(design.bus.dt)
    t_ramp = vmin(ramp_time(design, edge))
    if design.structure.ibis:   # IBIS drivers switch at their own pace (budget.ibis_netlist)
        from .ibis_netlist import switching_times
        t_ramp = min(t_ramp, switching_times(design, edge)[0])
    dt = t_ramp / STEPS_PER_RAMP
    for tap in design.taps:
        part = design.parts[tap.part]
        l_pkg, c_pin = np.asarray(part.l_pkg), np.asarray(part.c_pin)
        if vmax(l_pkg) > 0 and vmax(c_pin) > 0:
            period = 2 * math.pi * math.sqrt(vmin(l_pkg) * max(vmin(c_pin), 1e-18))
            dt = min(dt, period / STEPS_PER_LC_PERIOD)
    for td in line_delays(design):
        if t_ramp / LUMPABLE_RAMP_FRACTION <= td < dt:
            dt = td
    return dt


def line_delays(design) -> list:
    """Shortest one-way delay [s] of every segment and stub (over variants)."""
    out = [vmin(design.lines[s.line].delay) * vmin(s.length) for s in design.segments]
    out += [vmin(design.lines[t.stub.line].delay) * vmin(t.stub.length) for t in design.taps if t.stub]
    return out


def default_t_stop(design, edge: str) -> float:
    """Simulation window [s] when the design gives none.

    Two ramp times plus twelve times the sum of every line's delay (an upper
    bound on the longest path, so at least six round trips of any path)
    plus ten time constants of the slowest RC termination; at least 10 ns.
    """
    total_td = 0.0
    for s in design.segments:
        total_td += vmax(np.asarray(design.lines[s.line].delay) * s.length)
    for t in design.taps:
        if t.stub is not None:
            total_td += vmax(np.asarray(design.lines[t.stub.line].delay) * t.stub.length)
    tau = 0.0
    for term in design.terminations:
        if term.type == "rc":
            tau = max(tau, vmax(np.asarray(term.r) * term.c))
    t_ramp = vmax(ramp_time(design, edge))
    if design.structure.ibis:   # IBIS drivers: their coefficient tables' span (budget.ibis_netlist)
        from .ibis_netlist import switching_times
        t_ramp = max(t_ramp, switching_times(design, edge)[1])
    return max(2 * t_ramp + 12 * total_td + 10 * tau, 10e-9)


# -- one line --------------------------------------------------------------------

def envelope_range(line_type) -> tuple:
    """(z0_lo, z0_hi [ohm], delay_lo, delay_hi [s/m], r_lo, r_hi [ohm/m]) of a line type over variants."""
    return tuple(f(getattr(line_type, k)) for k in ("z0", "delay", "r_dc") for f in (vmin, vmax))


def line_kind(td_min: float, r_max: float, dt: float) -> str:
    """LUMPED if the shortest delay td_min [s] is below the step dt [s], else LOSSLESS or
    SECTIONS (the largest series resistance r_max [ohm] is positive)."""
    if td_min < dt * (1 - 1e-9):
        return LUMPED
    return SECTIONS if r_max > 0 else LOSSLESS


def loss_sections(r_max: float, z0_min: float, td_min: float, dt: float) -> tuple:
    """(n, wanted) lossless sections for a lossy line: r_max [ohm] total series resistance,
    z0_min [ohm], td_min [s] shortest delay, dt [s] step.

    Wanted: each lumped piece R/n reflects under 0.25 % of a wave, R/(4 n z0) <=
    LOSS_SECTION_FRACTION / 4; granted: at most one section per step of delay and
    MAX_LOSS_SECTIONS, at least one.
    """
    want = math.ceil(r_max / z0_min / LOSS_SECTION_FRACTION)
    n = max(1, min(want, int(td_min / dt * (1 + 1e-9)), MAX_LOSS_SECTIONS))
    return n, want


def model_line(out, a: int, b: int, line_type, length, env_range: tuple, env_length, dt: float, t_ramp,
               label: str, *, source: str = "<design>", table: str | None = None) -> list:
    """Add the elements modelling one line between nodes a and b to ``out``; return notes.

    out: a netlist builder with ``node(name)``, ``line(a, b, z0, td)``,
    ``r(a, b, r)``, ``c(a, b, c)``, ``l(a, b, l)`` (values in [ohm], [s], [F], [H]).
    line_type: its z0 [ohm], delay [s/m], r_dc [ohm/m] (floats or arrays over variants);
    length [m]; env_range: :func:`envelope_range` of the line type over the
    envelope and env_length [m] its length there; dt [s] step; t_ramp [s] the
    0-100 % ramp (for the note on lumping).  label names the line in notes and
    new node names; source, table name it in errors.
    """
    lt = line_type
    z0, td, r_tot = lt.z0, lt.delay * length, lt.r_dc * length  # floats, or arrays over variants
    z0_lo, _, d_lo, _, r_lo, r_hi = env_range
    len_lo, len_hi = vmin(env_length), vmax(env_length)
    etd_min = d_lo * len_lo                  # shortest delay of this line over the envelope [s]
    er_max = r_hi * len_hi                   # largest series resistance [ohm]
    lossy = er_max > 0
    if lossy and min(vmin(r_tot), r_lo * len_lo) <= 0:
        raise DesignError("r_dc is zero in some variants and positive in others; give it a small "
                          "positive minimum", source=source, table=table, key="r_dc")
    notes = []
    kind = line_kind(etd_min, er_max, dt)
    if kind == LUMPED:
        # Electrically short at this step: lumped pi, L = z0 td, C = td / z0 (docs/references.md B1).
        ring = 2 * vmax(td) / (math.pi * vmin(t_ramp)) * 100
        notes.append(f"{label}: delay {vmin(td) * 1e12:.3g} ps is below the time step "
                     f"{dt * 1e12:.3g} ps; modelled as a lumped pi (C/2, L, C/2), which cannot ring "
                     f"at its quarter-wave frequency (up to ~{ring:.2g} % of the swing on a lightly "
                     "damped line)")
        out.c(a, -1, td / z0 / 2)
        out.c(b, -1, td / z0 / 2)
        if lossy:
            mid = out.node(f"{label}:mid")
            out.r(a, mid, r_tot)
            out.l(mid, b, z0 * td)
        else:
            out.l(a, b, z0 * td)
        return notes
    if kind == LOSSLESS:
        out.line(a, b, z0, td)
        return notes
    # Series loss lumped between lossless sections: R/(2n) | td/n | R/n | ... | td/n | R/(2n).
    n_sec, want = loss_sections(er_max, z0_lo, etd_min, dt)
    if n_sec < want:
        notes.append(f"{label}: series loss lumped in {n_sec} sections (accuracy would like {want}); "
                     "expect up to "
                     f"{100 * vmax(r_tot / z0) / n_sec / 4:.2g} % of a wave in spurious reflections")
    prev = a
    for k in range(n_sec):
        x = out.node(f"{label}:s{k}a")
        y = out.node(f"{label}:s{k}b")
        out.r(prev, x, r_tot / n_sec / (2 if k == 0 else 1))
        out.line(x, y, z0, td / n_sec)
        prev = y
    out.r(prev, b, r_tot / n_sec / 2)
    return notes
