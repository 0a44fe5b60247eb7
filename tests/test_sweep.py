"""Batch sweeps: identical to one-at-a-time evaluation, to the single-waveform path, and on a dask cluster."""
from __future__ import annotations

import numpy as np
import pytest

import budget
from budget.errors import ArgumentError, DesignError
from budget.metrics import edge_metrics
from budget.sweep import sweep


@pytest.fixture(scope="module")
def design():
    return budget.example("backplane")


@pytest.fixture(scope="module")
def variants():
    rng = np.random.default_rng(7)
    n = 71  # more than two 32-variant kernel blocks, the last one partial
    return {
        "lines.backplane.z0": rng.uniform(46.0, 54.0, n),
        "parts.card_xcvr.c_pin": rng.uniform(2.0e-12, 3.5e-12, n),
        "segment.3.length": rng.uniform(0.024, 0.026, n),
    }


def test_batch_equals_one_at_a_time_bit_for_bit(design, variants):
    kw = dict(drivers=["SLOT1", "SLOT5"], edges=("rise", "fall"), dt=14e-12, t_stop=12e-9)
    batch = sweep(design, variants, **kw)
    n = len(next(iter(variants.values())))
    for i in range(n):
        one = sweep(design, {k: v[i:i + 1] for k, v in variants.items()}, **kw)
        np.testing.assert_array_equal(one.metrics[0], batch.metrics[i])
        np.testing.assert_array_equal(one.bits[0], batch.bits[i])
    # chunking does not change anything either
    chunked = sweep(design, variants, chunk=5, **kw)
    np.testing.assert_array_equal(chunked.metrics, batch.metrics)


def test_sweep_agrees_with_simulate_and_metrics_api(design):
    """Two code paths (batched kernel vs waveform + metrics API) give the same numbers."""
    dt, t_stop = 14e-12, 12e-9
    r = sweep(design, drivers=["SLOT3"], edges=("fall",), dt=dt, t_stop=t_stop)
    w = budget.simulate(design, "SLOT3", "fall", dt=dt, t_stop=t_stop)
    part = design.parts["card_xcvr"]
    alloc_v = 0.060
    for j, rcv in enumerate(r.receivers):
        if rcv == "SLOT3":
            assert np.isnan(r.margin[0, 0, 0, j])
            continue
        k = w.index(rcv)
        v_lo, v_hi = w.v_low[k], w.v_high[k]
        m = edge_metrics(w.t, w[rcv], edge="fall", v_lo=v_lo, v_hi=v_hi, vil=part.vil, vih=part.vih,
                         settle_band=0.05, allocation=alloc_v + 0.03 * (v_hi - v_lo))
        assert r.margin[0, 0, 0, j] == m.margin
        assert r.metrics[0, 0, 0, j, 1] == m.t_valid  # t_valid
        assert r.levels[0, 0, 0, j, 0] == v_lo and r.levels[0, 0, 0, j, 1] == v_hi


def test_sweep_keep_margin_is_the_same_as_keep_all(design, variants):
    a = sweep(design, variants, drivers=["SLOT2"], edges=("rise",))
    b = sweep(design, variants, drivers=["SLOT2"], edges=("rise",), keep="margin")
    assert b.metrics is None and b.levels is None
    np.testing.assert_array_equal(a.margin, b.margin)
    np.testing.assert_array_equal(a.passed, b.passed)
    np.testing.assert_array_equal(a.worst_margin, b.worst_margin)


def test_sweep_progress_is_reported(design, variants):
    seen = []
    sweep(design, variants, drivers=["SLOT2"], edges=("rise",), chunk=32, progress=lambda d, n: seen.append((d, n)))
    assert seen == [(32, 71), (64, 71), (71, 71)]


BAD = [
    ("unknown-path", dict(values={"lines.nope.z0": [50.0]}), DesignError, "lines.nope.z0"),
    ("non-physical", dict(values={"lines.backplane.z0": [50.0, -1.0]}), DesignError, "positive"),
    ("ragged", dict(values={"lines.backplane.z0": [50.0], "parts.card_xcvr.c_pin": [1e-12, 2e-12]}),
     ArgumentError, "entries"),
    ("empty", dict(values={"lines.backplane.z0": []}), ArgumentError, "empty"),
    ("2-d", dict(values={"lines.backplane.z0": [[50.0]]}), ArgumentError, "1-D"),
    ("bad-edge", dict(edges=("up",)), ArgumentError, "edge"),
    ("bad-keep", dict(keep="some"), ArgumentError, "keep"),
    ("bad-driver", dict(drivers=["SLOT9"]), ArgumentError, "SLOT9"),
    ("bad-chunk", dict(chunk=0), ArgumentError, "chunk"),
]


@pytest.mark.parametrize("kwargs,exc,needle", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_sweep_rejects_bad_arguments(design, kwargs, exc, needle):
    with pytest.raises(exc, match=needle):
        sweep(design, **kwargs)


@pytest.mark.cluster
def test_dask_cluster_gives_the_local_result_bit_for_bit(design, variants):
    distributed = pytest.importorskip("distributed")
    kw = dict(drivers=["SLOT1", "SLOT8"], edges=("rise", "fall"), chunk=6)
    local = sweep(design, variants, **kw)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        remote = sweep(design, variants, client=client, **kw)
    np.testing.assert_array_equal(local.metrics, remote.metrics)
    np.testing.assert_array_equal(local.bits, remote.bits)
