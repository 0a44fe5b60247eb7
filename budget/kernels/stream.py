"""Numba kernels: the edge metrics computed sample by sample inside the time loop (sweeps).

The same definitions as :func:`budget.kernels.metrics.edge_metrics_hyst`
(hysteresis 0, no latest window opening: the metric contract), rewritten as
one update per time step of a state kept per (receiver, variant lane):
running extremes, the first entry into the threshold region, the first
arrival at the valid threshold, the monotonic check, the ringback window
(first peak, lowest level after it), the last valid crossing and the last
entry into the settle band.  No waveform is stored and none is transposed.

Every expression is the one :func:`~budget.kernels.metrics.edge_metrics_hyst`
evaluates, in the same order, on the same numbers (time t_i = i dt, the
previous sample kept as x = sgn v), so the metrics are equal to the last bit
(tested on every bundled and test design, both edges, nominal and corners:
``tests/test_stream_metrics.py``).

Layout: parameters ``mp[P_*, rcv, lane]`` (set once per block by
:func:`stream_start`) and state ``ms[S_*, rcv, lane]``; flags are 0.0 / 1.0.

Early end of a block (``settled_final``): a (receiver, lane) is taken as
*final* when it is valid, inside its settle band, and no sample of the last
guard time changed any of its metric states (extremes, crossings, the
ringback window, the settle entry).  The
argument that a settled bus stays there is in docs/metrics.md ("When a sweep
ends a window early").
"""
from __future__ import annotations

import math

from ..jit import kernel
from .metrics import (FLIGHT_MAX, FLIGHT_MIN, MARGIN, MONOTONIC, MONOTONIC_FRACTION, OVERSHOOT, RINGBACK,
                      SETTLE_TIME, T_SWITCH, T_VALID, UNDERSHOOT, V_PEAK, V_TROUGH, _cross)

# parameters per (receiver, lane)
P_SGN, P_A, P_B, P_XEND, P_FALL, P_LO, P_HI, P_VLO, P_VHI, P_TREF, P_ALLOC, P_MIRROR, P_MIRC = range(13)
N_PARAMS = 13
# state per (receiver, lane)
S_XPREV, S_VPEAK, S_VTROUGH, S_XMAX, S_TSWITCH, S_VALID, S_VALID_SINCE, S_SETTLE_SINCE, S_MIN_AFTER, \
    S_PEAK, S_FALLEN, S_RUN_MAX, S_MONO, S_TRANSIT, S_CHANGED = range(15)
N_STATE = 15



@kernel(inline="always")
def stream_params(mp, r, bb, rising, v_lo, v_hi, vil, vih, t_ref, settle_band, alloc, mirror, mirror_sum):
    """Set the parameters of metric stream r, lane bb: levels v_lo, v_hi [V], thresholds vil, vih [V],
    t_ref [s], settle_band [V] (half-width), alloc [V] (as for edge_metrics).

    mirror: the stream takes mirror_sum - v [V] instead of the pin voltage v: the
    other edge of a linear bus (mirror_sum = V_lo + V_hi at that pin, see
    budget.kernels.evaluate.evaluate_chunk_both); the same for every lane of a stream.
    """
    if rising:
        a_th = vil
        b_th = vih
        x_end = v_hi
        x_start = v_lo
        sgn = 1.0
    else:
        a_th = -vih
        b_th = -vil
        x_end = -v_lo
        x_start = -v_hi
        sgn = -1.0
    swing = abs(x_end - x_start)
    mp[P_SGN, r, bb] = sgn
    mp[P_A, r, bb] = a_th
    mp[P_B, r, bb] = b_th
    mp[P_XEND, r, bb] = x_end
    mp[P_FALL, r, bb] = MONOTONIC_FRACTION * swing + 0.0
    mp[P_LO, r, bb] = x_end - settle_band
    mp[P_HI, r, bb] = x_end + settle_band
    mp[P_VLO, r, bb] = v_lo
    mp[P_VHI, r, bb] = v_hi
    mp[P_TREF, r, bb] = t_ref
    mp[P_ALLOC, r, bb] = alloc
    mp[P_MIRROR, r, bb] = 1.0 if mirror else 0.0
    mp[P_MIRC, r, bb] = mirror_sum


@kernel(inline="always")
def stream_start(mp, ms, r, bb, v0):
    """State of receiver r, lane bb after the first sample v0 [V] at t = 0 (edge_metrics' i == 0)."""
    x = mp[P_SGN, r, bb] * v0
    a_th = mp[P_A, r, bb]
    b_th = mp[P_B, r, bb]
    ms[S_XPREV, r, bb] = x
    ms[S_VPEAK, r, bb] = v0 if v0 > -math.inf else -math.inf
    ms[S_VTROUGH, r, bb] = v0 if v0 < math.inf else math.inf
    ms[S_XMAX, r, bb] = x if x > -math.inf else -math.inf
    entered = x >= a_th
    ms[S_TSWITCH, r, bb] = 0.0 if entered else math.nan
    valid = x >= b_th
    ms[S_VALID, r, bb] = 1.0 if valid else 0.0
    transit = entered and not valid
    ms[S_TRANSIT, r, bb] = 1.0 if transit else 0.0
    ms[S_RUN_MAX, r, bb] = x if (transit and x > -math.inf) else -math.inf
    ms[S_MONO, r, bb] = 1.0
    # ringback window: the first valid sample is a new peak
    ms[S_FALLEN, r, bb] = 0.0
    ms[S_PEAK, r, bb] = x if (valid and x > -math.inf) else -math.inf
    ms[S_MIN_AFTER, r, bb] = x if (valid and x > -math.inf) else math.inf
    ms[S_VALID_SINCE, r, bb] = math.nan if x < b_th else 0.0
    in_band = not (x < mp[P_LO, r, bb] or x > mp[P_HI, r, bb])
    ms[S_SETTLE_SINCE, r, bb] = 0.0 if in_band else math.nan
    ms[S_CHANGED, r, bb] = 0.0


@kernel(inline="always")
def stream_step(mp, ms, r, bb, vi, t_prev, t):
    """Add the sample vi [V] at time t [s] (previous sample at t_prev [s]) to stream r, lane bb.

    The branches of edge_metrics_hyst's loop body for i >= 1, in its order;
    ms[S_CHANGED] keeps the time of the last sample that changed any metric state.
    """
    x = mp[P_SGN, r, bb] * vi
    xp = ms[S_XPREV, r, bb]
    a_th = mp[P_A, r, bb]
    b_th = mp[P_B, r, bb]
    fall_back = mp[P_FALL, r, bb]
    ch = False
    if vi > ms[S_VPEAK, r, bb]:
        ms[S_VPEAK, r, bb] = vi
        ch = True
    if vi < ms[S_VTROUGH, r, bb]:
        ms[S_VTROUGH, r, bb] = vi
        ch = True
    if x > ms[S_XMAX, r, bb]:
        ms[S_XMAX, r, bb] = x
        ch = True
    # first entry into the threshold region
    if math.isnan(ms[S_TSWITCH, r, bb]) and x >= a_th:
        ms[S_TSWITCH, r, bb] = _cross(t_prev, t, xp, x, a_th)
        ms[S_TRANSIT, r, bb] = 1.0
        ch = True
    # first arrival at the valid threshold ends the transit
    valid = ms[S_VALID, r, bb] > 0.5
    if not valid and x >= b_th:
        valid = True
        ms[S_VALID, r, bb] = 1.0
        ms[S_TRANSIT, r, bb] = 0.0
        ch = True
    if ms[S_TRANSIT, r, bb] > 0.5:
        if x > ms[S_RUN_MAX, r, bb]:
            ms[S_RUN_MAX, r, bb] = x
            ch = True
        if ms[S_RUN_MAX, r, bb] - x > fall_back:
            ms[S_MONO, r, bb] = 0.0
    # ringback window (first peak past the valid threshold, lowest level after it)
    if valid:
        if ms[S_FALLEN, r, bb] > 0.5:
            if x < ms[S_MIN_AFTER, r, bb]:
                ms[S_MIN_AFTER, r, bb] = x
                ch = True
        elif x > ms[S_PEAK, r, bb]:
            ms[S_PEAK, r, bb] = x
            ms[S_MIN_AFTER, r, bb] = x
            ch = True
        else:
            if x < ms[S_MIN_AFTER, r, bb]:
                ms[S_MIN_AFTER, r, bb] = x
                ch = True
            if ms[S_PEAK, r, bb] - x > fall_back:
                ms[S_FALLEN, r, bb] = 1.0
                ch = True
    # valid from the last upward crossing of the valid threshold
    if x < b_th:
        if not math.isnan(ms[S_VALID_SINCE, r, bb]):
            ch = True
        ms[S_VALID_SINCE, r, bb] = math.nan
    elif xp < b_th:
        ms[S_VALID_SINCE, r, bb] = _cross(t_prev, t, xp, x, b_th)
        ch = True
    # settled from the last entry into the band around the final level
    hi_band = mp[P_HI, r, bb]
    lo_band = mp[P_LO, r, bb]
    if x < lo_band or x > hi_band:
        if not math.isnan(ms[S_SETTLE_SINCE, r, bb]):
            ch = True
        ms[S_SETTLE_SINCE, r, bb] = math.nan
    elif math.isnan(ms[S_SETTLE_SINCE, r, bb]):
        level = hi_band if xp > hi_band else lo_band
        ms[S_SETTLE_SINCE, r, bb] = _cross(t_prev, t, xp, x, level)
        ch = True
    if ch:
        ms[S_CHANGED, r, bb] = t
    ms[S_XPREV, r, bb] = x


@kernel(inline="always")
def settled_final(ms, r, bb, t, guard):
    """True when stream r, lane bb is taken as final at time t [s]: it has become valid
    (t_switch and t_valid set), sits inside its settle band, and no sample of the
    last guard [s] changed any of its metric states (see docs/metrics.md, "When a
    sweep ends a window early", for why a bus settled that long stays so)."""
    return (ms[S_VALID, r, bb] > 0.5 and not math.isnan(ms[S_TSWITCH, r, bb])
            and not math.isnan(ms[S_VALID_SINCE, r, bb]) and not math.isnan(ms[S_SETTLE_SINCE, r, bb])
            and t - ms[S_CHANGED, r, bb] >= guard)


@kernel
def stream_finish(mp, ms, r, bb, out):
    """Write the metrics of receiver r, lane bb into out[N_METRICS] (edge_metrics' final block)."""
    t_switch = ms[S_TSWITCH, r, bb]
    valid_since = ms[S_VALID_SINCE, r, bb]
    t_ref = mp[P_TREF, r, bb]
    valid = ms[S_VALID, r, bb] > 0.5
    b_th = mp[P_B, r, bb]
    x_end = mp[P_XEND, r, bb]
    min_after = ms[S_MIN_AFTER, r, bb]
    out[T_SWITCH] = t_switch
    out[T_VALID] = valid_since
    out[FLIGHT_MIN] = t_switch - t_ref
    out[FLIGHT_MAX] = valid_since - t_ref
    out[OVERSHOOT] = ms[S_VPEAK, r, bb] - mp[P_VHI, r, bb]
    out[UNDERSHOOT] = mp[P_VLO, r, bb] - ms[S_VTROUGH, r, bb]
    out[RINGBACK] = (min_after - b_th) if valid else math.nan
    out[MONOTONIC] = 1.0 if ms[S_MONO, r, bb] > 0.5 else 0.0
    out[SETTLE_TIME] = ms[S_SETTLE_SINCE, r, bb]
    held = min_after if valid else ms[S_XMAX, r, bb]
    out[MARGIN] = min(held, x_end) - b_th - mp[P_ALLOC, r, bb]
    out[V_PEAK] = ms[S_VPEAK, r, bb]
    out[V_TROUGH] = ms[S_VTROUGH, r, bb]
