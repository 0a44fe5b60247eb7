"""Numba kernels: edge metrics of one sampled waveform (simulated or measured).

Definitions follow the project's metric contract (DEVELOPERS.md, "Metrics").
The ringback and the margin look at the waveform after its *first peak*
past the valid threshold: the running maximum at the first fall-back of more
than 2 % of the swing (for an edge that never falls back, the lowest level
after its last new maximum, i.e. its settled level).  Taking the minimum from
the crossing itself would always give the threshold.

A falling edge is measured as a rising edge of x = -v with mirrored levels, so
one code path serves both edges:

=====================  ==========================  ==========================
quantity               rising edge                 falling edge
=====================  ==========================  ==========================
entry threshold A      VIL                         VIH  (x = -v >= -VIH)
valid threshold B      VIH                         VIL  (x = -v >= -VIL)
final level            V_hi                        V_lo
=====================  ==========================  ==========================

Crossing times are interpolated linearly between samples, so the time grid
may be non-uniform.  No filtering is done here: every sample counts, so noise
on a measured trace counts against the margin (conservative); smoothing is an
explicit, separate step (:func:`moving_average`).
"""
from __future__ import annotations

import math

import numpy as np

from ..jit import kernel

# indices into the metrics vector
T_SWITCH, T_VALID, FLIGHT_MIN, FLIGHT_MAX, OVERSHOOT, UNDERSHOOT, RINGBACK, MONOTONIC, \
    SETTLE_TIME, MARGIN, V_PEAK, V_TROUGH = range(12)
N_METRICS = 12
METRIC_NAMES = ("t_switch", "t_valid", "flight_min", "flight_max", "overshoot", "undershoot", "ringback",
                "monotonic", "settle_time", "margin", "v_peak", "v_trough")

# An edge is non-monotonic when, between its first entry into the threshold
# region and its first arrival at the valid threshold, it falls back by more
# than this fraction of the swing (metric contract).
MONOTONIC_FRACTION = 0.02


@kernel
def _cross(t0, t1, x0, x1, level):
    """Time [s] at which the segment (t0, x0)-(t1, x1) reaches ``level`` (linear)."""
    if x1 == x0:
        return t1
    return t0 + (level - x0) / (x1 - x0) * (t1 - t0)


@kernel
def edge_metrics(t, v, rising, v_lo, v_hi, vil, vih, t_ref, settle_band, alloc, out):
    """Edge metrics of the waveform v(t) at one receiver, written into ``out[N_METRICS]``.

    t [s] strictly increasing (any spacing); v [V]; rising: True for a rising
    edge; v_lo, v_hi [V] DC levels at this pin with the driver low / high;
    vil < vih [V] receiver thresholds; t_ref [s] driver timing reference;
    settle_band [V] half-width of the settling band around the final level;
    alloc [V] sum of budget allocations subtracted from the margin.

    Times that never occur (an edge that never becomes valid, a waveform that
    never settles) are NaN.  ``out[MONOTONIC]`` is 1.0 or 0.0.
    """
    edge_metrics_hyst(t, v, rising, v_lo, v_hi, vil, vih, t_ref, settle_band, alloc, 0.0, math.inf, out)


@kernel
def edge_metrics_hyst(t, v, rising, v_lo, v_hi, vil, vih, t_ref, settle_band, alloc, hysteresis, t_open, out):
    """:func:`edge_metrics` with the fall-back detection widened by ``hysteresis`` [V] and a latest window opening.

    A fall-back (which opens the ringback window and marks a non-monotonic
    edge) is a drop of more than 2 % of the swing *plus* ``hysteresis`` below
    the running maximum.  0 gives the metric contract exactly (simulated
    waveforms); measured traces pass a multiple of their noise sigma so that
    noise alone does not open the window on the rising edge
    (:mod:`budget.judge`).  Every sample still counts in the minimum, so noise
    lowers the margin, never raises it.

    t_open [s]: the ringback window opens at the latest at the first sample at
    or after t_open (once the valid threshold is reached), taking in the
    samples since the last new maximum; math.inf = only the fall-back rule.
    """
    n = t.shape[0]
    sgn = 1.0 if rising else -1.0
    if rising:
        a_th = vil
        b_th = vih
        x_end = v_hi
        x_start = v_lo
    else:
        a_th = -vih
        b_th = -vil
        x_end = -v_lo
        x_start = -v_hi
    swing = abs(x_end - x_start)
    fall_back = MONOTONIC_FRACTION * swing + hysteresis

    v_peak = -math.inf
    v_trough = math.inf
    x_max = -math.inf
    t_switch = math.nan
    first_valid = -1
    valid_since = math.nan
    settle_since = math.nan
    min_after = math.inf
    peak = -math.inf
    fallen = False
    run_max = -math.inf
    monotonic = True
    in_transit = False
    hi_band = x_end + settle_band
    lo_band = x_end - settle_band
    for i in range(n):
        x = sgn * v[i]
        if v[i] > v_peak:
            v_peak = v[i]
        if v[i] < v_trough:
            v_trough = v[i]
        if x > x_max:
            x_max = x
        # first entry into the threshold region
        if math.isnan(t_switch) and x >= a_th:
            t_switch = t[0] if i == 0 else _cross(t[i - 1], t[i], sgn * v[i - 1], x, a_th)
            in_transit = True
        # first arrival at the valid threshold ends the transit
        if first_valid < 0 and x >= b_th:
            first_valid = i
            in_transit = False
        if in_transit:
            if x > run_max:
                run_max = x
            if run_max - x > fall_back:
                monotonic = False
        # ringback window: from the first peak after becoming valid (the running
        # maximum at the first fall-back of more than 2 % of the swing), or, for an
        # edge that never falls back, from its last new maximum
        if first_valid >= 0:
            if not fallen and t[i] >= t_open:
                fallen = True
            if fallen:
                if x < min_after:
                    min_after = x
            elif x > peak:
                peak = x
                min_after = x
            else:
                if x < min_after:
                    min_after = x
                if peak - x > fall_back:
                    fallen = True
        # valid from the last upward crossing of the valid threshold
        if x < b_th:
            valid_since = math.nan
        elif i == 0:
            valid_since = t[0]
        elif sgn * v[i - 1] < b_th:
            valid_since = _cross(t[i - 1], t[i], sgn * v[i - 1], x, b_th)
        # settled from the last entry into the band around the final level
        if x < lo_band or x > hi_band:
            settle_since = math.nan
        elif i == 0:
            settle_since = t[0]
        elif math.isnan(settle_since):
            xp = sgn * v[i - 1]
            level = hi_band if xp > hi_band else lo_band
            settle_since = _cross(t[i - 1], t[i], xp, x, level)

    out[T_SWITCH] = t_switch
    out[T_VALID] = valid_since
    out[FLIGHT_MIN] = t_switch - t_ref
    out[FLIGHT_MAX] = valid_since - t_ref
    out[OVERSHOOT] = v_peak - v_hi
    out[UNDERSHOOT] = v_lo - v_trough
    out[RINGBACK] = (min_after - b_th) if first_valid >= 0 else math.nan
    out[MONOTONIC] = 1.0 if monotonic else 0.0
    out[SETTLE_TIME] = settle_since
    # margin: lowest level after first becoming valid (never above the final DC level),
    # or, for an edge that never becomes valid, its highest level (a negative margin)
    held = min_after if first_valid >= 0 else x_max
    out[MARGIN] = min(held, x_end) - b_th - alloc
    out[V_PEAK] = v_peak
    out[V_TROUGH] = v_trough


@kernel
def first_peak_time(t, v, rising, vih, vil, fall_back):
    """Time [s] of the first peak of v(t) after it first reaches the valid threshold.

    The first peak is the running maximum (of x = v, or -v for a falling edge)
    at the first fall-back of more than ``fall_back`` [V] below it, as in
    :func:`edge_metrics_hyst`; math.inf when the trace never becomes valid or
    never falls back.  Used on a smoothed copy of a measured trace.
    """
    sgn = 1.0 if rising else -1.0
    b_th = vih if rising else -vil
    valid = False
    peak = -math.inf
    t_peak = math.inf
    for i in range(t.shape[0]):
        x = sgn * v[i]
        if not valid:
            if x >= b_th:
                valid = True
            else:
                continue
        if x > peak:
            peak = x
            t_peak = t[i]
        elif peak - x > fall_back:
            return t_peak
    return math.inf


@kernel
def ramp_crossing(t_ramp, v0, r0, v1, r1, r_load, v_load, c_load, level, n_sub):
    """Time [s] at which the driver's Norton blend into a reference load crosses ``level`` [V].

    The driver goes from state 0 (v0 [V] behind r0 [ohm]) to state 1 over a
    linear ramp of t_ramp [s]; the load is r_load [ohm] to v_load [V] in
    parallel with c_load [F].  Integrated with the trapezoidal rule on
    n_sub steps per ramp, for up to 20 ramp times plus 20 load time constants.
    Returns NaN if the level is never crossed.
    """
    g_l = 1.0 / r_load
    tau = c_load / (1.0 / r0 + g_l) + c_load / (1.0 / r1 + g_l)
    t_end = 20.0 * t_ramp + 20.0 * tau
    dt = t_ramp / n_sub
    n = int(t_end / dt) + 2
    # start from the DC state of state 0
    v = (v0 / r0 + v_load * g_l) / (1.0 / r0 + g_l)
    v_fin = (v1 / r1 + v_load * g_l) / (1.0 / r1 + g_l)
    rising = v_fin > v
    if (v >= level) == rising:
        return 0.0
    gc = 2.0 * c_load / dt
    jc = gc * v
    for k in range(1, n):
        t = k * dt
        s = t / t_ramp
        if s > 1.0:
            s = 1.0
        g = (1.0 - s) / r0 + s / r1
        i_s = (1.0 - s) * v0 / r0 + s * v1 / r1
        v_new = (i_s + v_load * g_l + jc) / (g + g_l + gc)
        jc = 2.0 * gc * v_new - jc
        if (v_new >= level) == rising:
            return _cross(t - dt, t, v, v_new, level)
        v = v_new
    return math.nan


@kernel
def moving_average(t, v, window, out):
    """Centred moving average of v(t) over ``window`` [s] on any time grid (trapezoidal areas)."""
    n = t.shape[0]
    # cumulative trapezoidal integral
    cum = np.empty(n)
    cum[0] = 0.0
    for i in range(1, n):
        cum[i] = cum[i - 1] + 0.5 * (v[i] + v[i - 1]) * (t[i] - t[i - 1])
    lo = 0
    hi = 0
    for i in range(n):
        a = t[i] - 0.5 * window
        b = t[i] + 0.5 * window
        if a < t[0]:
            a = t[0]
        if b > t[n - 1]:
            b = t[n - 1]
        while lo < n - 1 and t[lo + 1] <= a:
            lo += 1
        while hi < n - 1 and t[hi] < b:
            hi += 1
        if b <= a:
            out[i] = v[i]
            continue
        out[i] = (_integral_to(t, v, cum, hi, b) - _integral_to(t, v, cum, lo, a)) / (b - a)


@kernel
def _integral_to(t, v, cum, k, x):
    """Integral of the piecewise-linear v from t[0] to x, where t[k-1] < x <= t[k] or k is the bracket."""
    n = t.shape[0]
    j = k
    while j > 0 and t[j] > x:
        j -= 1
    if j >= n - 1:
        return cum[n - 1]
    dtj = t[j + 1] - t[j]
    f = (x - t[j]) / dtj if dtj > 0 else 0.0
    vx = v[j] + f * (v[j + 1] - v[j])
    return cum[j] + 0.5 * (v[j] + vx) * (x - t[j])


# ---------------------------------------------------------------------------
# violations: the one pass/fail rule, shared by check, sweeps and the C library

VIOL_MARGIN = 1          # margin below the required minimum
VIOL_NEVER_VALID = 2     # the edge never becomes valid (t_valid undefined)
VIOL_OVER_MAX = 4        # v_peak above the part's absolute maximum v_max
VIOL_UNDER_MIN = 8       # v_trough below the part's absolute minimum v_min
VIOL_NON_MONOTONIC = 16  # the edge falls back inside the threshold region
VIOL_NOT_SETTLED = 32    # never settles into the settle band within the window
VIOLATION_NAMES = ((VIOL_MARGIN, "margin below minimum"), (VIOL_NEVER_VALID, "never valid"),
                   (VIOL_OVER_MAX, "above absolute maximum"), (VIOL_UNDER_MIN, "below absolute minimum"),
                   (VIOL_NON_MONOTONIC, "non-monotonic edge"), (VIOL_NOT_SETTLED, "not settled in window"))


@kernel
def violation_bits(m, v_max, v_min, min_margin):
    """Bit set of VIOL_* for a metrics vector m; v_max / v_min [V] (+-inf when the part gives none)."""
    bits = 0
    if not m[MARGIN] >= min_margin:
        bits |= VIOL_MARGIN
    if math.isnan(m[T_VALID]):
        bits |= VIOL_NEVER_VALID
    if m[V_PEAK] > v_max:
        bits |= VIOL_OVER_MAX
    if m[V_TROUGH] < v_min:
        bits |= VIOL_UNDER_MIN
    if m[MONOTONIC] < 0.5:
        bits |= VIOL_NON_MONOTONIC
    if math.isnan(m[SETTLE_TIME]):
        bits |= VIOL_NOT_SETTLED
    return bits


def violation_list(bits: int) -> list:
    """Names of the violations in a VIOL_* bit set."""
    return [name for bit, name in VIOLATION_NAMES if bits & bit]


# ---------------------------------------------------------------------------
# headroom and "worst": the one ranking rule, shared by check, sweeps, plots and the C library
#
# The headroom [V] of one (variant, driver, edge, receiver) is the smallest of
#   margin - min_margin,  v_max - v_peak (if the part gives v_max),  v_trough - v_min (if it gives v_min);
# negative headroom is a violation (VIOL_MARGIN, VIOL_OVER_MAX or VIOL_UNDER_MIN).  The *worst* of
# several results: one with any violation before one without, then the lowest headroom, then the
# first in order (variant, driver, edge, receiver) -- see :func:`worst_along`.

LIMIT_MARGIN = 0     # the headroom is margin - min_margin
LIMIT_V_MAX = 1      # ... v_max - v_peak
LIMIT_V_MIN = 2      # ... v_trough - v_min
LIMIT_NAMES = ("margin", "v_max", "v_min")


@kernel
def headroom_terms(m, v_max, v_min, min_margin):
    """(headroom [V], LIMIT_* of the term that sets it) for a metrics vector m.

    v_max / v_min [V] are +-inf when the part gives none; min_margin [V].  On a
    tie the earlier term (margin, then v_max, then v_min) is named.  Never NaN: an
    undefined margin counts as -inf (a violation anyway).
    """
    h = m[MARGIN] - min_margin
    if math.isnan(h):
        h = -math.inf
    which = LIMIT_MARGIN
    hi = v_max - m[V_PEAK]
    if hi < h:
        h = hi
        which = LIMIT_V_MAX
    lo = m[V_TROUGH] - v_min
    if lo < h:
        h = lo
        which = LIMIT_V_MIN
    return h, which


@kernel
def headroom(m, v_max, v_min, min_margin):
    """Headroom [V] of a metrics vector m (see :func:`headroom_terms`)."""
    return headroom_terms(m, v_max, v_min, min_margin)[0]


def worse(bits_a, head_a, bits_b, head_b):
    """Elementwise: is result a strictly worse than result b?  (violation first, then lower headroom [V]).

    NaN headroom (no such case) is never worse than anything; ties are not worse,
    so the result met first stays the worst.
    """
    va = np.asarray(bits_a) != 0
    vb = np.asarray(bits_b) != 0
    ha = np.asarray(head_a, dtype=float)
    hb = np.asarray(head_b, dtype=float)
    hb = np.where(np.isnan(hb), np.inf, hb)
    return ~np.isnan(ha) & ((va & ~vb) | ((va == vb) & (ha < hb)))


def worst_along(bits, head, axis=0):
    """Index along ``axis`` of the worst result by the rule above (NaN headroom: no case, never chosen
    unless there is nothing else; ties: the lowest index)."""
    bits = np.asarray(bits)
    head = np.asarray(head, dtype=float)
    exists = ~np.isnan(head)
    viol = (bits != 0) & exists
    cand = np.where(np.any(viol, axis=axis, keepdims=True), viol, exists)
    key = np.where(cand, head, np.inf)
    idx = np.argmin(key, axis=axis)
    # all candidates at +inf headroom: argmin gave index 0, take the first candidate instead
    first = np.argmax(cand, axis=axis)
    picked = np.take_along_axis(cand, np.expand_dims(idx, axis), axis=axis).squeeze(axis)
    return np.where(picked, idx, first)


@kernel
def ref_times(t_ramp, v0, r0, v1, r1, has_load, r_load, v_load, c_load, v_meas, has_meas, out):
    """Driver timing reference t_ref [s] for each variant (arrays over variants).

    Without a reference load: the time the ideal open-circuit ramp v0 -> v1
    crosses v_meas (default: its midpoint).  With one: the time the driver's
    Norton blend into r_load || c_load to v_load crosses v_meas (default: the
    midpoint of the two DC levels into that load).
    """
    for b in range(t_ramp.shape[0]):
        if has_load:
            g = 1.0 / r_load[b]
            a0 = (v0[b] / r0[b] + v_load[b] * g) / (1.0 / r0[b] + g)
            a1 = (v1[b] / r1[b] + v_load[b] * g) / (1.0 / r1[b] + g)
            level = v_meas[b] if has_meas else 0.5 * (a0 + a1)
            out[b] = ramp_crossing(t_ramp[b], v0[b], r0[b], v1[b], r1[b], r_load[b], v_load[b], c_load[b],
                                   level, 200)
        else:
            level = v_meas[b] if has_meas else 0.5 * (v0[b] + v1[b])
            out[b] = t_ramp[b] * (level - v0[b]) / (v1[b] - v0[b])
