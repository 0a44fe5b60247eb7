"""Metrics computed inside the time loop, early window ends and the mirrored edge vs the reference path.

The reference path is the former one: waveforms stored per block, transposed,
then ``edge_metrics`` on each (``evaluate_chunk_reference``), every edge
simulated over its whole window.  Over every bundled design (budget.example)
and every tests/designs/*.toml, every driver, both edges, nominal and corners:

- metrics in the loop, whole window: equal to the last bit;
- plus the early end of settled blocks: equal to the last bit (the metrics were
  final when the block ended);
- plus the falling edge as the mirror of the rising one (linear buses): equal
  to round-off, MIRROR_ROUND_OFF of the swing in voltages and of the rise time
  in times, violation bits equal.
"""
from __future__ import annotations

import itertools
import math
import sys
from pathlib import Path

import numpy as np
import pytest

import budget
from budget import sweep as sw
from budget.kernels import evaluate as ev
from budget.kernels import metrics as mk
from budget.early_end import settle_guard
from budget.edges import ramp_time
from budget.netlist import FALL, RISE, flatten

ROOT = Path(__file__).resolve().parent.parent
MAX_CORNERS = 64
# Round-off of the mirrored falling edge: V_lo + V_hi - v_rise(t) against a simulated
# fall differs by a few ulps of the node voltages per step; measured worst 2e-13 of the
# swing on the bundled and test designs (this bound leaves room for other machines).
MIRROR_ROUND_OFF = 1e-9


def _designs():
    for name in budget.EXAMPLES:
        yield f"example:{name}", budget.example(name)
    for path in sorted((ROOT / "tests" / "designs").glob("*.toml")):
        d = budget.load(path)
        if not d.structure.ibis:    # IBIS buses run the non-linear kernel (tests/test_ibis_engine.py)
            yield f"tests/designs/{path.name}", d


DESIGNS = list(_designs())


def _corners(design):
    paths = sorted(design.tolerances)
    if not paths:
        return design
    corners = list(itertools.islice(itertools.product((0, 1), repeat=len(paths)), MAX_CORNERS))
    vals = {}
    for i, p in enumerate(paths):
        lo, hi = design.tolerances[p]
        vals[p] = np.array([float(design.params[p])] + [(lo, hi)[c[i]] for c in corners])
    return design.with_values(vals)


def _reference(design, driver, edge, dt, t_stop, env):
    n = design.batch_size or 1
    net = flatten(design, driver, edge, dt=dt, t_stop=t_stop, envelope=env)
    receivers, rcv_out, (vil, vih, vmax, vmin, av, af) = sw._kernel_inputs(design, driver, edge, n)
    t_ref = sw.t_ref_of(design, driver, edge, n)
    out = (np.empty((n, len(receivers), mk.N_METRICS)), np.empty((n, len(receivers)), dtype=np.int64),
           np.empty((n, len(receivers))), np.empty((n, len(receivers), 2)))
    status = np.empty(n, dtype=np.int64)
    ev.evaluate_chunk_reference(net.topology, net.values, edge == RISE, rcv_out, vil, vih, vmax, vmin, av, af,
                                float(design.budget.settle_band), float(design.budget.min_margin), t_ref,
                                *out, status)
    return (receivers,) + out


def _same(a, b):
    return all(np.array_equal(x, y, equal_nan=True) for x, y in zip(a[1:], b[1:])) and a[0] == b[0]


@pytest.mark.parametrize("name,design", DESIGNS, ids=[n for n, _ in DESIGNS])
def test_fused_metrics_equal_reference(name, design):
    d = _corners(design)
    env, dts, tss = sw.plan(d, {}, (RISE, FALL))
    mirrored = 0
    for driver in d.drivers:
        ref = {e: _reference(d, driver, e, dts[e], tss[e], env) for e in (RISE, FALL)}
        for e in (RISE, FALL):
            whole = sw.evaluate(d, driver, e, dt=dts[e], t_stop=tss[e], envelope=env)
            assert _same(whole, ref[e]), f"{name} {driver} {e}: metrics in the loop differ from the reference"
            guard = settle_guard(env, e)
            early = sw.evaluate(d, driver, e, dt=dts[e], t_stop=tss[e], envelope=env, guard=guard)
            assert _same(early, ref[e]), f"{name} {driver} {e}: the early window end changed a metric"
        if dts[RISE] != dts[FALL] or tss[RISE] != tss[FALL]:
            continue
        both = sw.evaluate_both(d, driver, dt=dts[RISE], t_stop=tss[RISE], envelope=env,
                                guard=settle_guard(env, RISE))
        if both is None:
            continue
        mirrored += 1
        assert _same(both[RISE], ref[RISE]), f"{name} {driver}: rising edge of the mirrored run differs"
        _, m, bits, head, lv = both[FALL]
        _, m0, bits0, head0, lv0 = ref[FALL]
        assert np.array_equal(lv, lv0) and np.array_equal(bits, bits0)
        swing = np.abs(lv0[..., 1] - lv0[..., 0])[..., None]
        t_rise = float(np.max(ramp_time(d, FALL)))
        volts = [mk.OVERSHOOT, mk.UNDERSHOOT, mk.RINGBACK, mk.MARGIN, mk.V_PEAK, mk.V_TROUGH]
        times = [mk.T_SWITCH, mk.T_VALID, mk.FLIGHT_MIN, mk.FLIGHT_MAX, mk.SETTLE_TIME]
        np.testing.assert_array_equal(np.isnan(m), np.isnan(m0))
        dv = np.nan_to_num(np.abs(m[..., volts] - m0[..., volts]) / swing)
        dt_ = np.nan_to_num(np.abs(m[..., times] - m0[..., times]) / t_rise)
        assert dv.max() <= MIRROR_ROUND_OFF and dt_.max() <= MIRROR_ROUND_OFF, (name, driver, dv.max(), dt_.max())
        np.testing.assert_array_equal(m[..., mk.MONOTONIC], m0[..., mk.MONOTONIC])
        assert np.nanmax(np.abs(head - head0) / swing[..., 0]) <= MIRROR_ROUND_OFF
    # which designs are linear in their driver is a property of the design files
    linear = all(float(np.max(np.abs(np.asarray(d.parts[d.tap(t).part].r_high)
                                     - np.asarray(d.parts[d.tap(t).part].r_low)))) == 0 for t in d.drivers)
    if linear and dts[RISE] == dts[FALL]:
        assert mirrored == len(d.drivers)


def test_sweep_shortcuts_agree():
    """sweep(shortcuts=True) and shortcuts=False give the same margins, bits and metrics."""
    d = budget.example("fieldbus")
    rng = np.random.default_rng(5)
    vals = {p: rng.uniform(lo, hi, 40) for p, (lo, hi) in d.tolerances.items()}
    fast = sw.sweep(d, vals)
    slow = sw.sweep(d, vals, shortcuts=False)
    np.testing.assert_array_equal(fast.bits, slow.bits)
    np.testing.assert_allclose(fast.metrics, slow.metrics, rtol=0, atol=1e-15)


def test_early_end_saves_steps_on_a_settling_bus():
    """A long, well-terminated field bus settles early in its window: the early end must stop blocks."""
    d = budget.example("fieldbus")
    env, dts, tss = sw.plan(d, {}, (RISE,))
    n = 1
    net = flatten(d, d.drivers[0], RISE, dt=dts[RISE], t_stop=tss[RISE], envelope=env)
    receivers, rcv_out, (vil, vih, vmax, vmin, av, af) = sw._kernel_inputs(d, d.drivers[0], RISE, n)
    t_ref = sw.t_ref_of(d, d.drivers[0], RISE, n)
    outs = [np.empty((n, len(receivers), mk.N_METRICS)), np.empty((n, len(receivers)), dtype=np.int64),
            np.empty((n, len(receivers))), np.empty((n, len(receivers), 2)), np.empty(n, dtype=np.int64)]
    whole = ev.evaluate_chunk(net.topology, net.values, True, rcv_out, vil, vih, vmax, vmin, av, af,
                              float(d.budget.settle_band), float(d.budget.min_margin), t_ref, *outs, math.inf)
    early = ev.evaluate_chunk(net.topology, net.values, True, rcv_out, vil, vih, vmax, vmin, av, af,
                              float(d.budget.settle_band), float(d.budget.min_margin), t_ref, *outs,
                              settle_guard(env, RISE))
    assert whole == net.n_steps
    print(f"fieldbus nominal: {early} of {whole} steps", file=sys.stderr)
    assert early < whole
