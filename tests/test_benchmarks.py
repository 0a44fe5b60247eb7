"""Smoke test of benchmarks/run.py: its measuring logic on a tiny case (numbers are not judged here)."""
from __future__ import annotations

import importlib.util
import json
import math
from pathlib import Path

import pytest

import budget

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def bench():
    spec = importlib.util.spec_from_file_location("bench_run", ROOT / "benchmarks" / "run.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


@pytest.mark.parametrize("n", [4, 8, 16, 32, 64])
def test_generated_n_drop_buses_are_valid(bench, n):
    d = budget.loads(bench.n_drop_text(n))
    assert len(d.taps) == n and len(d.segments) == n - 1
    assert d.tolerances == budget.load(bench.REFERENCE).tolerances


def test_the_8_drop_generator_reproduces_the_reference_file(bench):
    a, b = budget.load(bench.REFERENCE), budget.loads(bench.n_drop_text(8))
    assert a.params == b.params


def test_reference_bus_passes_nominally_and_fails_some_corners(bench):
    """The benchmark times a realistic design: clean at nominal, marginal at some tolerance corners."""
    from budget.analyses import corner_values
    from budget.sweep import sweep

    d = budget.load(bench.REFERENCE)
    assert sweep(d, drivers=list(d.drivers), edges=("rise", "fall")).passed.all()
    corners = sweep(d, corner_values(d)[0], drivers=["U1"], edges=("rise", "fall"), keep="margin")
    assert 0.0 < float((~corners.passed).mean()) < 1.0


def test_long_bus_is_32_nodes_over_200_m_with_128_corners(bench):
    from budget.analyses import corner_count

    d = budget.loads(bench.long_bus_text())
    assert len(d.taps) == 32 and len(d.segments) == 31
    assert sum(s.length for s in d.segments) == pytest.approx(200.0, rel=1e-12)
    assert corner_count(d) == 128


def test_lean_fd_solve_matches_the_oracle_and_the_engine(bench):
    """The baseline is a correct solve: benchmarks/fd_lean.py against the scikit-rf oracle
    (tests/skrf_reference.py) and the engine's DC levels, on the nominal reference bus."""
    pytest.importorskip("skrf")
    import sys

    import numpy as np
    sys.path.insert(0, str(ROOT / "tests"))
    from skrf_reference import reference_waveforms

    import fd_lean

    d = budget.load(bench.REFERENCE)
    w = budget.simulate(d, "U1", "rise")
    t_end = float(w.t[-1])
    ref = reference_waveforms(d, "U1", "rise", t_end=t_end, step=w.dt / 4)
    t, v, v0, v1 = fd_lean.waveforms(d, "U1", "rise", t_window=bench.FD_WINDOW * t_end, n_points=1024,
                                     window="none")
    np.testing.assert_allclose(v0, w.v_start, rtol=0, atol=1e-9)
    np.testing.assert_allclose(v1, w.v_end, rtol=0, atol=1e-9)
    keep = t <= t_end
    err = np.max(np.abs(v[keep] - ref.at(t[keep])), axis=0) / np.abs(w.v_end - w.v_start)
    assert err.max() <= 0.01
    # and the comparison is not blind: too few points miss by far more
    t, v, _, _ = fd_lean.waveforms(d, "U1", "rise", t_window=bench.FD_WINDOW * t_end, n_points=128, window="none")
    keep = t <= t_end
    coarse = np.max(np.abs(v[keep] - ref.at(t[keep])), axis=0) / np.abs(w.v_end - w.v_start)
    assert coarse.max() > 3 * err.max()


@pytest.mark.slow
def test_benchmark_runs_on_a_tiny_case(bench):
    res = bench.run("smoke", log=lambda m: None)
    for key in ("sims_per_s_per_core", "sims_per_s_all_cores", "mc_s", "peak_rss_mb", "cold_start_s",
                "cold_compile_s", "fd_lean_ratio", "mc_sims_per_s", "first_call_after_warm_s"):
        assert res[key] > 0 and math.isfinite(res[key]), key
    assert res["mc_sims"] == 2 * res["mc_variants"]
    assert res["cold_compile_detail"]["compiled"] > 0
    assert set(res["scaling"]) == {"4", "8"}
    assert res["scaling_128_over_8"] is None
    assert res["reference_bus"]["nominal_passes"] and 0 < res["reference_bus"]["corner_failure_fraction"] < 1
    assert res["skrf_ratio"] is None or res["skrf_ratio"] > 0
    json.dumps(res)  # the --json output is one serialisable object
    table = bench.table(res)
    assert "sims/s, one core" in table and "first call" in table and "lean FD solve" in table


def test_ibis_speed_benchmark_runs(capsys):
    """benchmarks/ibis_speed.py measures both engines on the same 8-drop bus (timing not judged here)."""
    spec = importlib.util.spec_from_file_location("ibis_speed", ROOT / "benchmarks" / "ibis_speed.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.main(["--repeat", "1", "--variants", "2"])
    out = capsys.readouterr().out
    assert "8-drop reference bus" in out and out.count("x\n") == 2
