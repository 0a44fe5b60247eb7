"""Edge metrics on synthetic waveforms whose answers are worked out by hand.

Every waveform here is piecewise linear with its corners on samples, so the
kernel's linear interpolation is exact and every crossing time can be
computed on paper: a segment from (t0, v0) to (t1, v1) reaches level L at
t0 + (L - v0)/(v1 - v0) (t1 - t0).  The metric definitions are the contract
of docs/metrics.md (ringback and margin measured after the first peak past
the valid threshold, as budget/kernels/metrics.py documents).

Unless a test says otherwise: V_lo = 0 V, V_hi = 3 V (swing 3 V), VIL = 0.8 V,
VIH = 2.0 V, settle band 5 % of the swing (0.15 V), no allocations; times in ns.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from budget.errors import ArgumentError
from budget.kernels import metrics as mk
from budget.metrics import edge_metrics, smooth

NS = 1e-9
LEVELS = dict(v_lo=0.0, v_hi=3.0, vil=0.8, vih=2.0)


def m_of(t_ns, v, edge="rise", **kw):
    args = dict(LEVELS)
    args.update(kw)
    return edge_metrics(np.asarray(t_ns, float) * NS, np.asarray(v, float), edge=edge, **args)


def approx_ns(x):
    return pytest.approx(x * NS, rel=1e-12, abs=1e-24)


# ---------------------------------------------------------------------------
# rising edge

def test_clean_ramp_every_metric():
    # 0 V until 1 ns, linear to 3 V at 2 ns, flat after.
    m = m_of([0, 1, 2, 3, 10], [0, 0, 3, 3, 3], t_ref=1.5 * NS)
    assert m.t_switch == approx_ns(1 + 0.8 / 3)            # reaches VIL
    assert m.t_valid == approx_ns(1 + 2.0 / 3)             # reaches VIH, stays
    assert m.flight_min == approx_ns(1 + 0.8 / 3 - 1.5)    # t_switch - t_ref
    assert m.flight_max == approx_ns(1 + 2.0 / 3 - 1.5)    # t_valid - t_ref
    assert m.overshoot == 0.0 and m.undershoot == 0.0
    assert m.ringback == pytest.approx(1.0)                # never falls back: settled 3 V - VIH
    assert m.monotonic is True
    assert m.settle_time == approx_ns(1 + 2.85 / 3)        # enters 3 V - 0.15 V
    assert m.margin == pytest.approx(1.0)                  # min(3, V_hi) - VIH
    assert (m.v_peak, m.v_trough) == (3.0, 0.0)


def test_overshoot_and_ringback_reentering_the_threshold_band():
    # 0 -> 4 V (1 V overshoot) -> 1.5 V (back inside VIL..VIH) -> 3 V.
    m = m_of([0, 1, 2, 3, 4, 10], [0, 0, 4, 1.5, 3, 3])
    assert m.t_switch == approx_ns(1 + 0.8 / 4)
    # valid from the *last* upward crossing of VIH: 1.5 V at 3 ns -> 3 V at 4 ns
    assert m.t_valid == approx_ns(3 + 0.5 / 1.5)
    assert m.overshoot == pytest.approx(1.0)
    assert m.ringback == pytest.approx(1.5 - 2.0)          # negative: re-entered the band
    assert m.margin == pytest.approx(1.5 - 2.0)
    assert m.monotonic is True                              # the dip comes after VIH was reached
    assert m.settle_time == approx_ns(3 + (2.85 - 1.5) / 1.5)
    bits = mk.violation_bits(np.array(_vector(m)), 3.6, -0.5, 0.0)
    assert bits == mk.VIOL_MARGIN | mk.VIOL_OVER_MAX       # 4 V peak above a 3.6 V rating
    assert mk.violation_list(bits) == ["margin below minimum", "above absolute maximum"]


def test_ringback_is_measured_after_the_first_peak_not_from_the_crossing():
    # Crosses VIH at 1.5 ns, peaks at 3.6 V, rings down to 2.4 V, settles at 3 V.
    m = m_of([0, 1, 2, 3, 4, 10], [0, 0, 3.6, 2.4, 3.0, 3.0])
    assert m.ringback == pytest.approx(2.4 - 2.0)
    assert m.margin == pytest.approx(2.4 - 2.0)
    assert m.overshoot == pytest.approx(0.6)


def test_margin_never_exceeds_the_dc_level():
    # Overshoots and stays above V_hi within the window: the margin uses V_hi.
    m = m_of([0, 1, 2, 10], [0, 0, 3.3, 3.3])
    assert m.margin == pytest.approx(3.0 - 2.0)
    assert m.ringback == pytest.approx(3.3 - 2.0)


def test_allocations_come_off_the_margin():
    base = m_of([0, 1, 2, 10], [0, 0, 3, 3])
    less = m_of([0, 1, 2, 10], [0, 0, 3, 3], allocation=0.25)
    assert less.margin == pytest.approx(base.margin - 0.25)
    assert less.ringback == base.ringback                  # ringback is before the budget


def test_non_monotonic_edge():
    # Falls back 0.2 V (more than 2 % of the 3 V swing = 0.06 V) inside VIL..VIH.
    m = m_of([0, 1, 2, 3, 4, 10], [0, 0, 1.5, 1.3, 3, 3])
    assert m.monotonic is False
    assert m.t_switch == approx_ns(1 + 0.8 / 1.5)
    assert m.t_valid == approx_ns(3 + 0.7 / 1.7)
    bits = mk.violation_bits(np.array(_vector(m)), math.inf, -math.inf, 0.0)
    assert bits == mk.VIOL_NON_MONOTONIC


def test_small_wiggle_inside_the_band_is_still_monotonic():
    # A 0.04 V step back is below the 2 % of swing (0.06 V) limit.
    m = m_of([0, 1, 2, 3, 4, 10], [0, 0, 1.5, 1.46, 3, 3])
    assert m.monotonic is True


def test_fall_back_below_vil_is_not_counted_as_non_monotonic():
    # The dip happens before the edge enters the threshold region.
    m = m_of([0, 1, 2, 3, 4, 10], [0, 0, 0.6, 0.3, 3, 3])
    assert m.monotonic is True


def test_never_valid_edge():
    # Stalls at 1.8 V, inside the band: never valid, never settled.
    m = m_of([0, 1, 2, 10], [0, 0, 1.8, 1.8])
    assert m.t_switch == approx_ns(1 + 0.8 / 1.8)
    assert m.t_valid is None and m.flight_max is None
    assert m.ringback is None
    assert m.settle_time is None
    assert m.margin == pytest.approx(1.8 - 2.0)            # highest level reached - VIH
    bits = mk.violation_bits(np.array(_vector(m)), math.inf, -math.inf, 0.0)
    assert bits == mk.VIOL_MARGIN | mk.VIOL_NEVER_VALID | mk.VIOL_NOT_SETTLED


def test_valid_then_falls_back_for_good_is_never_valid():
    m = m_of([0, 1, 2, 3, 10], [0, 0, 2.5, 1.5, 1.5])
    assert m.t_valid is None
    assert m.ringback == pytest.approx(1.5 - 2.0)
    assert m.margin == pytest.approx(1.5 - 2.0)


def test_edge_that_never_switches():
    m = m_of([0, 1, 10], [0, 0.5, 0.5])
    assert m.t_switch is None and m.t_valid is None and m.flight_min is None
    assert m.margin == pytest.approx(0.5 - 2.0)


# ---------------------------------------------------------------------------
# falling edge (mirror)

def test_falling_edge_by_hand():
    # 3 V until 1 ns, down to -1 V at 2 ns (1 V undershoot), back up to 1.2 V at
    # 3 ns (above VIL = 0.8 V: re-entered the band), settles at 0 V from 4 ns.
    m = m_of([0, 1, 2, 3, 4, 10], [3, 3, -1, 1.2, 0, 0], edge="fall", t_ref=1.0 * NS)
    assert m.t_switch == approx_ns(1 + (3 - 2.0) / 4)      # first at or below VIH
    assert m.t_valid == approx_ns(3 + (1.2 - 0.8) / 1.2)   # last crossing down through VIL
    assert m.flight_min == approx_ns(0.25)
    assert m.undershoot == pytest.approx(1.0)               # V_lo - min(v)
    assert m.overshoot == pytest.approx(0.0)
    assert m.ringback == pytest.approx(-(1.2 - 0.8))        # mirrored: VIL - max(v after the trough)
    assert m.margin == pytest.approx(0.8 - 1.2)             # margin_low = VIL - max(v) after first VIL
    assert m.settle_time == approx_ns(3 + (1.2 - 0.15) / 1.2)
    assert m.monotonic is True


def test_falling_edge_is_the_mirror_of_a_rising_edge():
    # v_fall(t) = 3 - v_rise(t) with mirrored thresholds gives the same metrics.
    t = [0, 1, 2, 3, 3.5, 4, 10]
    v = np.array([0, 0, 1.5, 1.3, 3.7, 2.6, 3.0])
    r = m_of(t, v, edge="rise")
    f = m_of(t, 3.0 - v, edge="fall", vil=3.0 - 2.0, vih=3.0 - 0.8)
    for key in ("t_switch", "t_valid", "ringback", "monotonic", "settle_time", "margin"):
        assert getattr(f, key) == pytest.approx(getattr(r, key), rel=1e-12), key
    assert f.undershoot == pytest.approx(r.overshoot)
    assert f.monotonic is False


def test_non_monotonic_falling_edge():
    m = m_of([0, 1, 2, 3, 4, 10], [3, 3, 1.5, 1.7, 0, 0], edge="fall")
    assert m.monotonic is False


def test_never_valid_falling_edge():
    m = m_of([0, 1, 2, 10], [3, 3, 1.0, 1.0], edge="fall")
    assert m.t_valid is None
    assert m.margin == pytest.approx(0.8 - 1.0)


# ---------------------------------------------------------------------------
# time grids, noise and the helpers

def test_non_uniform_grid_gives_the_same_crossings():
    # The same piecewise-linear edge as test_overshoot..., sampled on a random
    # non-uniform grid that keeps the corners: every metric is unchanged.
    corners_t = np.array([0, 1, 2, 3, 4, 10.0])
    corners_v = np.array([0, 0, 4, 1.5, 3, 3.0])
    rng = np.random.default_rng(7)
    extra = np.sort(rng.uniform(0, 10, 300))
    t = np.unique(np.concatenate([corners_t, extra]))
    v = np.interp(t, corners_t, corners_v)
    a = m_of(corners_t, corners_v)
    b = m_of(t, v)
    for key in ("t_switch", "t_valid", "overshoot", "ringback", "settle_time", "margin", "v_peak"):
        assert getattr(b, key) == pytest.approx(getattr(a, key), rel=1e-9, abs=1e-15), key


def test_noise_counts_against_the_margin_until_smoothed():
    # A clean edge to 3 V plus +-0.1 V of alternating noise after it settles:
    # every sample counts, so the margin loses the full 0.1 V (conservative);
    # an explicit moving average over two samples removes the noise again.
    t = np.arange(0, 200) * 0.05                     # ns, uniform 50 ps
    v = np.clip((t - 1.0) * 3.0, 0.0, 3.0)
    noise = np.where(np.arange(t.size) % 2 == 0, 0.1, -0.1)
    noisy = v + np.where(t > 3.0, noise, 0.0)
    clean = m_of(t, v)
    raw = m_of(t, noisy)
    assert clean.margin == pytest.approx(1.0)
    assert raw.margin == pytest.approx(1.0 - 0.1, abs=1e-12)
    filtered = smooth(t * NS, noisy, 2 * 0.05 * NS)
    assert m_of(t, filtered).margin == pytest.approx(1.0, abs=0.011)


def test_smooth_keeps_a_straight_line_on_any_grid():
    # A centred moving average of a linear function is the function itself
    # (away from the ends), whatever the sample spacing.
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(0, 10e-9, 400))
    v = 0.3e9 * t + 0.1
    out = smooth(t, v, 0.5e-9)
    inner = (t > 0.5e-9 + t[0]) & (t < t[-1] - 0.5e-9)
    assert np.allclose(out[inner], v[inner], rtol=0, atol=1e-9)


def test_kernel_matches_its_pure_python_form():
    # JIT vs interpreted parity on random waveforms (one source of truth).
    rng = np.random.default_rng(11)
    for k in range(20):
        n = int(rng.integers(5, 80))
        t = np.cumsum(rng.uniform(0.01, 1.0, n)) * NS
        v = np.cumsum(rng.normal(0.1, 0.6, n))
        rising = bool(k % 2)
        a, b = np.empty(mk.N_METRICS), np.empty(mk.N_METRICS)
        args = (t, v, rising, 0.0, 3.0, 0.8, 2.0, 0.3 * NS, 0.15, 0.05)
        mk.edge_metrics(*args, a)
        mk.edge_metrics.py_func(*args, b)
        assert np.array_equal(a, b, equal_nan=True)


def test_violation_bits_each_rule():
    base = np.array(_vector(m_of([0, 1, 2, 10], [0, 0, 3, 3])))
    assert mk.violation_bits(base, math.inf, -math.inf, 0.0) == 0
    assert mk.violation_bits(base, math.inf, -math.inf, 1.5) == mk.VIOL_MARGIN     # 1.0 V < 1.5 V required
    assert mk.violation_bits(base, 2.9, -math.inf, 0.0) == mk.VIOL_OVER_MAX        # 3 V peak > 2.9 V
    assert mk.violation_bits(base, math.inf, 0.1, 0.0) == mk.VIOL_UNDER_MIN        # 0 V trough < 0.1 V


def test_ideal_ramp_timing_reference():
    # No reference load: the open-circuit ramp 0 -> 3.3 V over 1.25 ns (a 1 ns
    # 10-90 % edge / 0.8, docs/references.md D3) crosses 1.65 V half way.
    out = np.empty(1)
    one = lambda x: np.array([float(x)])  # noqa: E731
    mk.ref_times(one(1.25e-9), one(0), one(20), one(3.3), one(20), False, one(1), one(0), one(0),
                 one(0), False, out)
    assert out[0] == pytest.approx(0.625e-9, rel=1e-12)


def test_reference_load_timing_reference_against_rc_closed_form():
    # Equal output resistances r: the driver is a ramp source behind r, so the
    # load r_l || c_l sees a ramp behind R_th = r r_l/(r + r_l), tau = R_th c_l.
    # A ramp of duration T into a first-order lag reaches half its final value at
    # t* solving t - tau (1 - exp(-t/tau)) = T/2 (valid while t* <= T); solved with brentq.
    from scipy.optimize import brentq

    r, r_l, c_l, T = 25.0, 50.0, 5e-12, 1.25e-9
    tau = r * r_l / (r + r_l) * c_l
    t_star = brentq(lambda t: t - tau * (1 - math.exp(-t / tau)) - T / 2, 0, T)
    assert t_star < T
    out = np.empty(1)
    one = lambda x: np.array([float(x)])  # noqa: E731
    mk.ref_times(one(T), one(0), one(r), one(3.3), one(r), True, one(r_l), one(0), one(c_l),
                 one(0), False, out)
    assert out[0] == pytest.approx(t_star, rel=1e-3)


# ---------------------------------------------------------------------------
# invalid input: one table

BAD = [
    ("t-not-increasing", dict(t=[0, 2, 1, 3]), "strictly increasing"),
    ("t-repeated", dict(t=[0, 1, 1, 3]), "strictly increasing"),
    ("nan-sample", dict(v=[0, math.nan, 3, 3]), "finite"),
    ("shape-mismatch", dict(v=[0, 3, 3]), "one length"),
    ("one-sample", dict(t=[0], v=[0]), "at least two"),
    ("thresholds-swapped", dict(vil=2.0, vih=0.8), "vil < vih"),
    ("levels-swapped", dict(v_lo=3.0, v_hi=0.0), "v_lo < v_hi"),
    ("bad-edge", dict(edge="up"), "'rise' or 'fall'"),
    ("nan-threshold", dict(vih=math.nan), "finite"),
]


@pytest.mark.parametrize("change, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_invalid_input_is_rejected_with_a_reason(change, message):
    args = dict(t=[0, 1, 2, 3], v=[0, 0, 3, 3], edge="rise", **LEVELS)
    args.update(change)
    t = np.asarray(args.pop("t"), float) * NS
    v = np.asarray(args.pop("v"), float)
    with pytest.raises(ArgumentError, match=message):
        edge_metrics(t, v, **args)


@pytest.mark.parametrize("window", [0.0, -1e-9, math.nan], ids=["zero", "negative", "nan"])
def test_smooth_rejects_a_bad_window(window):
    with pytest.raises(ArgumentError, match="window"):
        smooth([0, 1e-9, 2e-9], [0, 1, 2], window)


def _vector(m):
    """EdgeMetrics back to the kernel's vector layout (None -> NaN)."""
    nan = math.nan
    return [nan if m.t_switch is None else m.t_switch, nan if m.t_valid is None else m.t_valid,
            nan if m.flight_min is None else m.flight_min, nan if m.flight_max is None else m.flight_max,
            m.overshoot, m.undershoot, nan if m.ringback is None else m.ringback, 1.0 if m.monotonic else 0.0,
            nan if m.settle_time is None else m.settle_time, m.margin, m.v_peak, m.v_trough]
