"""The work bound of ``check`` (issue 13: "1,000 taps with --corners runs for minutes"): the work is
estimated before the first simulation and a check above budget.limits.MAX_WORK is refused, naming the
estimate, the limit and the ways out, unless long runs are allowed."""
from __future__ import annotations

import time

import pytest

import budget
from budget import limits
from budget.check import check
from budget.cli import main
from budget.errors import ArgumentError
from budget.sweep import sweep
from budget.workload import estimate_work
from test_bad_inputs import ROBUST, _many_transceivers


@pytest.fixture(scope="module")
def robust():
    return budget.loads(ROBUST, source="robust.toml")


def _no_simulation(monkeypatch):
    """Make any simulation fail loudly: a refused check must not start one (neither the sweep's
    batched evaluation nor the step's accuracy estimate, which simulates the tolerance envelope)."""
    import budget.run_blocks
    import budget.sweep

    def boom(*args, **kwargs):
        raise AssertionError("a simulation was started")
    monkeypatch.setattr(budget.sweep, "evaluate_chunk", boom)
    monkeypatch.setattr(budget.run_blocks, "run_netlist", boom)


def test_estimate_uses_the_sweeps_own_step_window_and_netlist(robust):
    """The estimate's steps are the sweep's window / step, its nodes those of the flattened netlist."""
    from budget.netlist import flatten

    res = sweep(robust)
    w = estimate_work(robust, 33)
    for e in ("rise", "fall"):
        assert w.steps[e] == int(res.t_stop[e] / res.dt[e] + 1e-9) + 1
        assert w.nodes[e] == flatten(robust, "TX", e).n_nodes
    assert w.simulations == 33 * 1 * 2
    assert w.node_steps == sum(33 * w.steps[e] * w.nodes[e] for e in ("rise", "fall"))


@pytest.mark.parametrize("name", sorted(budget.EXAMPLES))
def test_largest_step_estimate_is_a_lower_bound_of_the_chosen_steps_work(name):
    """The estimate without simulation (largest step tried) never exceeds the estimate at the chosen step."""
    d = budget.example(name)
    low, full = estimate_work(d, 3, largest_step=True), estimate_work(d, 3)
    assert low.node_steps <= full.node_steps
    assert all(low.steps[e] <= full.steps[e] for e in full.steps)


def test_work_grows_with_taps_as_drivers_times_nodes():
    """Doubling the transceivers doubles drivers and nodes (and lengthens the window): at least 4x the work."""
    small = budget.loads(_many_transceivers(16))
    large = budget.loads(_many_transceivers(32))
    assert estimate_work(large, 1).node_steps >= 4 * estimate_work(small, 1).node_steps


def test_check_above_max_work_is_refused_before_any_simulation(robust, monkeypatch):
    per_variant = estimate_work(robust, 1).node_steps
    _no_simulation(monkeypatch)
    with pytest.raises(ArgumentError) as info:
        check(robust, corners=True, max_work=10 * per_variant)   # 33 variants needed, 10 fit
    msg = str(info.value)
    assert "max_work" in msg and "--allow-long" in msg and "--nominal" in msg
    assert "--monte-carlo N with N at most 9" in msg     # 10 variants fit: the nominal and 9 samples


def test_check_within_max_work_runs_and_none_lifts_the_bound(robust):
    per_variant = estimate_work(robust, 1).node_steps
    a = check(robust, corners=True, max_work=33 * per_variant)     # exactly fits
    b = check(robust, corners=True, max_work=None)
    assert a.to_json()["results"] == b.to_json()["results"]
    with pytest.raises(ArgumentError, match="max_work"):
        check(robust, max_work=0)


def test_cli_large_transceiver_bus_with_corners_is_refused_in_seconds(tmp_path, monkeypatch, capsys):
    """512 transceivers, 16 corners: 5.6e11 node-steps (half an hour or more on 2 cores); exit 2 at once."""
    path = tmp_path / "long.toml"
    path.write_text(_many_transceivers(512))
    _no_simulation(monkeypatch)
    t0 = time.monotonic()
    code = main(["check", str(path), "--corners"])
    elapsed = time.monotonic() - t0
    err = capsys.readouterr().err
    assert code == 2, err
    assert "node-steps" in err and "MAX_WORK" in err and "512 drivers" in err
    # refused on the lower bound (the largest step the accuracy estimate would try), found without simulating
    est = estimate_work(budget.load(path), 17, largest_step=True)
    assert est.node_steps > limits.MAX_WORK
    assert f"{est.node_steps:.3g} node-steps" in err
    # a lower bound cannot promise that the nominal alone fits: --nominal is offered with that caveat or not at all
    assert "at least" in err
    assert "--nominal (the nominal design alone)" not in err
    assert "may still be above the limit" in err or "even the nominal design is above it" in err
    assert elapsed < 10
    # allowed, the same check gets past the bound and starts simulating (here: the stand-in that fails)
    code = main(["check", str(path), "--corners", "--allow-long", "--no-progress"])
    err = capsys.readouterr().err
    assert code == 3 and "a simulation was started" in err
