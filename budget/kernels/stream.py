"""Numba kernels: the edge metrics computed sample by sample inside the time loop (sweeps).

The same definitions as :func:`budget.kernels.metrics.edge_metrics_hyst`
(hysteresis 0, no latest window opening: the metric contract), rewritten as
one update per time step of a state kept per (receiver, variant lane):
running extremes, the first entry into the threshold region, the first
arrival at the valid threshold, the monotonic check, the ringback window
(first peak, lowest level after it), the last valid crossing and the last
entry into the settle band.  No waveform is stored and none is transposed.

Every value is the one :func:`~budget.kernels.metrics.edge_metrics_hyst`
computes, by the same expressions on the same numbers (time t_i = i dt, the
previous sample kept as x = sgn v), so the metrics are equal to the last bit
(tested on every bundled and test design, both edges, nominal and corners:
``tests/test_stream_metrics.py``).

Branch-free: each update is a select per lane (no data-dependent branch),
and a crossing is kept as its step and the two samples around it, the
interpolation (a division) done once at the end by :func:`stream_finish`
with the same expression and operands; so the lane loops vectorise.

Layout: parameters ``mp[stream, P_*, lane]`` (set once per block by
:func:`stream_params`) and state ``ms[stream, S_*, lane]``, the lane axis
innermost and the rows of one stream adjacent (constant distances the
compiler can prove apart); flags are 0.0 / 1.0, steps -1.0 for "none".

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

# parameters per (stream, lane)
P_SGN, P_A, P_B, P_XEND, P_FALL, P_LO, P_HI, P_VLO, P_VHI, P_TREF, P_ALLOC, P_MIRROR, P_MIRC = range(13)
N_PARAMS = 13
# state per (stream, lane); *_STEP: step of an event (-1: none), *_X0, *_X1: the samples around it
S_XPREV, S_VPEAK, S_VTROUGH, S_XMAX, S_SW_STEP, S_SW_X0, S_SW_X1, S_VALID, S_TRANSIT, S_RUN_MAX, S_MONO, \
    S_PEAK, S_MIN_AFTER, S_FALLEN, S_VS_STEP, S_VS_X0, S_VS_X1, S_ST_STEP, S_ST_X0, S_ST_X1, S_CHANGED = range(21)
N_STATE = 21


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
    mp[r, P_SGN, bb] = sgn
    mp[r, P_A, bb] = a_th
    mp[r, P_B, bb] = b_th
    mp[r, P_XEND, bb] = x_end
    mp[r, P_FALL, bb] = MONOTONIC_FRACTION * swing + 0.0
    mp[r, P_LO, bb] = x_end - settle_band
    mp[r, P_HI, bb] = x_end + settle_band
    mp[r, P_VLO, bb] = v_lo
    mp[r, P_VHI, bb] = v_hi
    mp[r, P_TREF, bb] = t_ref
    mp[r, P_ALLOC, bb] = alloc
    mp[r, P_MIRROR, bb] = 1.0 if mirror else 0.0
    mp[r, P_MIRC, bb] = mirror_sum


@kernel(inline="always")
def stream_start(mp, ms, r, bb, v0):
    """State of stream r, lane bb after the first sample v0 [V] at t = 0 (edge_metrics' i == 0)."""
    x = mp[r, P_SGN, bb] * v0
    a_th = mp[r, P_A, bb]
    b_th = mp[r, P_B, bb]
    ms[r, S_XPREV, bb] = x
    ms[r, S_VPEAK, bb] = v0 if v0 > -math.inf else -math.inf
    ms[r, S_VTROUGH, bb] = v0 if v0 < math.inf else math.inf
    ms[r, S_XMAX, bb] = x if x > -math.inf else -math.inf
    entered = x >= a_th
    ms[r, S_SW_STEP, bb] = 0.0 if entered else -1.0
    ms[r, S_SW_X0, bb] = x
    ms[r, S_SW_X1, bb] = x
    valid = x >= b_th
    ms[r, S_VALID, bb] = 1.0 if valid else 0.0
    transit = entered and not valid
    ms[r, S_TRANSIT, bb] = 1.0 if transit else 0.0
    ms[r, S_RUN_MAX, bb] = x if (transit and x > -math.inf) else -math.inf
    ms[r, S_MONO, bb] = 1.0
    # ringback window: the first valid sample is a new peak
    ms[r, S_FALLEN, bb] = 0.0
    ms[r, S_PEAK, bb] = x if (valid and x > -math.inf) else -math.inf
    ms[r, S_MIN_AFTER, bb] = x if (valid and x > -math.inf) else math.inf
    ms[r, S_VS_STEP, bb] = -1.0 if x < b_th else 0.0
    ms[r, S_VS_X0, bb] = x
    ms[r, S_VS_X1, bb] = x
    out_band = x < mp[r, P_LO, bb] or x > mp[r, P_HI, bb]
    ms[r, S_ST_STEP, bb] = -1.0 if out_band else 0.0
    ms[r, S_ST_X0, bb] = x
    ms[r, S_ST_X1, bb] = x
    ms[r, S_CHANGED, bb] = 0.0


@kernel(inline="always")
def stream_step(mp, ms, r, bb, vi, stepf, t):
    """Add the sample vi [V] of step stepf (a float, t = stepf dt [s]) to stream r, lane bb.

    edge_metrics_hyst's loop body for i >= 1 as selects, in its order;
    ms[S_CHANGED] keeps the time of the last sample that changed any metric state.
    """
    x = mp[r, P_SGN, bb] * vi
    xp = ms[r, S_XPREV, bb]
    a_th = mp[r, P_A, bb]
    b_th = mp[r, P_B, bb]
    fall_back = mp[r, P_FALL, bb]
    # running extremes
    vpk = ms[r, S_VPEAK, bb]
    vtr = ms[r, S_VTROUGH, bb]
    xmx = ms[r, S_XMAX, bb]
    up = vi > vpk
    down = vi < vtr
    xup = x > xmx
    ms[r, S_VPEAK, bb] = vi if up else vpk
    ms[r, S_VTROUGH, bb] = vi if down else vtr
    ms[r, S_XMAX, bb] = x if xup else xmx
    # first entry into the threshold region
    sw = ms[r, S_SW_STEP, bb]
    enter = sw < 0.0 and x >= a_th
    ms[r, S_SW_STEP, bb] = stepf if enter else sw
    ms[r, S_SW_X0, bb] = xp if enter else ms[r, S_SW_X0, bb]
    ms[r, S_SW_X1, bb] = x if enter else ms[r, S_SW_X1, bb]
    transit = ms[r, S_TRANSIT, bb] > 0.5 or enter
    # first arrival at the valid threshold ends the transit
    was_valid = ms[r, S_VALID, bb] > 0.5
    new_valid = not was_valid and x >= b_th
    valid = was_valid or new_valid
    transit = transit and not new_valid
    ms[r, S_VALID, bb] = 1.0 if valid else 0.0
    ms[r, S_TRANSIT, bb] = 1.0 if transit else 0.0
    rmx = ms[r, S_RUN_MAX, bb]
    rup = transit and x > rmx
    rmx = x if rup else rmx
    ms[r, S_RUN_MAX, bb] = rmx
    ms[r, S_MONO, bb] = 0.0 if (transit and rmx - x > fall_back) else ms[r, S_MONO, bb]
    # ringback window (first peak past the valid threshold, lowest level after it)
    fallen = ms[r, S_FALLEN, bb] > 0.5
    peak = ms[r, S_PEAK, bb]
    mna = ms[r, S_MIN_AFTER, bb]
    new_peak = valid and not fallen and x > peak
    lower = valid and not new_peak and x < mna
    fall_now = valid and not fallen and not new_peak and peak - x > fall_back
    ms[r, S_PEAK, bb] = x if new_peak else peak
    ms[r, S_MIN_AFTER, bb] = x if (new_peak or lower) else mna
    ms[r, S_FALLEN, bb] = 1.0 if (fallen or fall_now) else 0.0
    # valid from the last upward crossing of the valid threshold
    vs = ms[r, S_VS_STEP, bb]
    below = x < b_th
    cross_b = not below and xp < b_th
    ms[r, S_VS_STEP, bb] = -1.0 if below else (stepf if cross_b else vs)
    ms[r, S_VS_X0, bb] = xp if cross_b else ms[r, S_VS_X0, bb]
    ms[r, S_VS_X1, bb] = x if cross_b else ms[r, S_VS_X1, bb]
    # settled from the last entry into the band around the final level
    st = ms[r, S_ST_STEP, bb]
    out_band = x < mp[r, P_LO, bb] or x > mp[r, P_HI, bb]
    enter_band = not out_band and st < 0.0
    ms[r, S_ST_STEP, bb] = -1.0 if out_band else (stepf if enter_band else st)
    ms[r, S_ST_X0, bb] = xp if enter_band else ms[r, S_ST_X0, bb]
    ms[r, S_ST_X1, bb] = x if enter_band else ms[r, S_ST_X1, bb]
    ch = (up or down or xup or enter or new_valid or rup or new_peak or lower or fall_now
          or (below and vs >= 0.0) or cross_b or (out_band and st >= 0.0) or enter_band)
    ms[r, S_CHANGED, bb] = t if ch else ms[r, S_CHANGED, bb]
    ms[r, S_XPREV, bb] = x


@kernel(inline="always")
def settled_final(ms, r, bb, t, guard):
    """True when stream r, lane bb is taken as final at time t [s]: it has become valid
    (t_switch and t_valid set), sits inside its settle band, and no sample of the
    last guard [s] changed any of its metric states (see docs/metrics.md, "When a
    sweep ends a window early", for why a bus settled that long stays so)."""
    return (ms[r, S_VALID, bb] > 0.5 and ms[r, S_SW_STEP, bb] >= 0.0 and ms[r, S_VS_STEP, bb] >= 0.0
            and ms[r, S_ST_STEP, bb] >= 0.0 and t - ms[r, S_CHANGED, bb] >= guard)


@kernel
def _event_time(step, x0, x1, level, dt):
    """Time [s] of an event kept as (step, samples x0 before and x1 at it): t[0] at step 0, NaN for none,
    else the linear crossing between (step-1) dt and step dt (edge_metrics' _cross, same operands)."""
    if step < 0.0:
        return math.nan
    if step == 0.0:
        return 0.0
    i = int(step)
    return _cross((i - 1) * dt, i * dt, x0, x1, level)


@kernel
def stream_finish(mp, ms, r, bb, dt, out):
    """Write the metrics of stream r, lane bb into out[N_METRICS] (edge_metrics' final block); dt [s]."""
    b_th = mp[r, P_B, bb]
    x_end = mp[r, P_XEND, bb]
    t_switch = _event_time(ms[r, S_SW_STEP, bb], ms[r, S_SW_X0, bb], ms[r, S_SW_X1, bb], mp[r, P_A, bb], dt)
    valid_since = _event_time(ms[r, S_VS_STEP, bb], ms[r, S_VS_X0, bb], ms[r, S_VS_X1, bb], b_th, dt)
    hi_band = mp[r, P_HI, bb]
    x0 = ms[r, S_ST_X0, bb]
    level = hi_band if x0 > hi_band else mp[r, P_LO, bb]
    settle_since = _event_time(ms[r, S_ST_STEP, bb], x0, ms[r, S_ST_X1, bb], level, dt)
    t_ref = mp[r, P_TREF, bb]
    valid = ms[r, S_VALID, bb] > 0.5
    min_after = ms[r, S_MIN_AFTER, bb]
    out[T_SWITCH] = t_switch
    out[T_VALID] = valid_since
    out[FLIGHT_MIN] = t_switch - t_ref
    out[FLIGHT_MAX] = valid_since - t_ref
    out[OVERSHOOT] = ms[r, S_VPEAK, bb] - mp[r, P_VHI, bb]
    out[UNDERSHOOT] = mp[r, P_VLO, bb] - ms[r, S_VTROUGH, bb]
    out[RINGBACK] = (min_after - b_th) if valid else math.nan
    out[MONOTONIC] = 1.0 if ms[r, S_MONO, bb] > 0.5 else 0.0
    out[SETTLE_TIME] = settle_since
    held = min_after if valid else ms[r, S_XMAX, bb]
    out[MARGIN] = min(held, x_end) - b_th - mp[r, P_ALLOC, bb]
    out[V_PEAK] = ms[r, S_VPEAK, bb]
    out[V_TROUGH] = ms[r, S_VTROUGH, bb]
