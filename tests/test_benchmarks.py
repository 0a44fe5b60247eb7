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


@pytest.mark.slow
def test_benchmark_runs_on_a_tiny_case(bench):
    res = bench.run("smoke", log=lambda m: None)
    for key in ("sims_per_s_per_core", "sims_per_s_all_cores", "mc_s", "peak_rss_mb", "cold_start_s"):
        assert res[key] > 0 and math.isfinite(res[key]), key
    assert set(res["scaling"]) == {"4", "8"}
    assert res["skrf_ratio"] is None or res["skrf_ratio"] > 0
    json.dumps(res)  # the --json output is one serialisable object
    table = bench.table(res)
    assert "sims/s, one core" in table and "cold start" in table


def test_ibis_speed_benchmark_runs(capsys):
    """benchmarks/ibis_speed.py measures both engines on the same 8-drop bus (timing not judged here)."""
    spec = importlib.util.spec_from_file_location("ibis_speed", ROOT / "benchmarks" / "ibis_speed.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.main(["--repeat", "1", "--variants", "2"])
    out = capsys.readouterr().out
    assert "8-drop reference bus" in out and out.count("x\n") == 2
