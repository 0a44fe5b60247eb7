"""The automatic time step chosen by accuracy (budget/step_accuracy.py).

The estimate is checked against the outside world: the error it predicts for the chosen
step is compared with the true error against the scikit-rf frequency-domain reference
(tests/skrf_reference.py), and the order of convergence it assumes (h^2, Richardson
extrapolation: L. F. Richardson, "The deferred approach to the limit", Phil. Trans. R. Soc.
A 226, 1927) is measured on a bus.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

import budget
from budget import step_accuracy as sa
from budget.netlist import auto_step, flatten, tolerance_envelope
from budget.sweep import plan

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from conftest import accuracy_record  # noqa: E402

pytest.importorskip("skrf")
import test_reference_skrf as ref  # noqa: E402

REFERENCE_BUS = HERE.parent / "benchmarks" / "reference_8drop.toml"


@pytest.mark.parametrize("key", ["lossy", "star", "known:lossy_sectioned_trunk", "benchmark-reference"])
def test_estimated_error_tracks_the_true_error(key):
    if key == "benchmark-reference":
        design = budget.load(REFERENCE_BUS)
    elif key.startswith("known:"):
        design = budget.load(HERE / "designs" / "known_misses" / f"{key[6:]}.toml")
    else:
        design = ref._design(key)
    driver = design.drivers[0]
    choice = auto_step(tolerance_envelope(design), "rise")
    assert choice.verified and choice.error <= sa.TARGET_ERROR
    err, cross, w, _ = ref.compare(design, driver, "rise")
    assert w.dt == choice.dt
    true = float(err.max())
    accuracy_record(f"step estimate {key:30s} dt {choice.dt * 1e12:6.2f} ps (rules' largest "
                    f"{choice.h0 * 1e12:6.2f} ps): estimated {100 * choice.error:.3f} %, true {100 * true:.3f} % "
                    "of swing vs scikit-rf")
    assert true <= ref.MAX_ERR_OF_SWING
    assert np.nanmax(cross) <= ref.MAX_CROSSING_OF_RISE
    # the estimate is a model of the error: within a factor 2 either way of the truth
    assert 0.5 <= choice.error / true <= 2.0


def test_the_error_shrinks_as_the_square_of_the_step():
    """d(h, h/2) / d(h/2, h/4) on the reference bus at the rules' largest step: 4 for a second-order
    error, 2 for a first-order one.  The estimate 4/3 d(h) <= 0.5 % keeps the true error
    d(h) / (1 - 1/ratio) under 1 % for any ratio >= 1.6."""
    design = budget.load(REFERENCE_BUS)
    env = tolerance_envelope(design)
    h0 = auto_step(env, "rise").h0
    runs = [sa._run(flatten, env, "U1", "rise", h0 / 2 ** k) for k in range(3)]
    ratio = sa.difference(runs[0], runs[1]) / sa.difference(runs[1], runs[2])
    accuracy_record(f"step estimate: convergence ratio d(h)/d(h/2) on the 8-drop reference bus {ratio:.2f} "
                    "(2 first order, 4 second order)")
    assert 1.6 <= ratio <= 8.0


def test_every_variant_shares_the_step_of_its_tolerance_box():
    design = budget.load(REFERENCE_BUS)
    w = budget.simulate(design, "U1", "rise")
    _env, dts, _ = plan(design, {}, ("rise",))
    assert w.dt == dts["rise"]
    corner = design.with_values({p: lo for p, (lo, _hi) in design.tolerances.items()})
    assert budget.simulate(corner, "U1", "rise").dt == w.dt


def test_a_design_step_is_used_as_given():
    design = budget.loads(ref.TEST_DESIGNS["star"].replace("[bus]", '[bus]\ndt = "7 ps"', 1))
    assert budget.simulate(design, design.drivers[0], "rise").dt == pytest.approx(7e-12, rel=1e-12)


def test_an_unmet_estimate_is_said(monkeypatch):
    monkeypatch.setattr(sa, "TARGET_ERROR", 1e-12)
    monkeypatch.setattr(sa, "_CHOICES", {})
    design = ref._design("star")
    w = budget.simulate(design, design.drivers[0], "rise")
    assert any("step estimate did not reach" in n for n in w.notes)
    assert w.dt == pytest.approx(auto_step(tolerance_envelope(design), "rise").h0 / 16, rel=1e-12)
