"""Solvers (budget.solve, `busbudget solve stub|termination|drops`) and their engine (budget.candidates).

Every answer is verified here with the ordinary check (budget.check.check) re-run at the
answer (passes) and just beyond it (fails) -- independently of the confirmation the
solver does itself.  The termination picker is held to "never worse than any candidate
it tried" and "only values of the chosen series".
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from budget import examples, preferred
from budget.analyses import corner_values, out_of_box
from budget.candidates import moved, score
from budget.check import check
from budget.cli import main
from budget.design_file import load
from budget.redesign import rebuilt
from budget.solve import (best_termination, drops_design, longest_stub, most_drops, smallest_spacing)

SHORT = str(examples.example_path("short-bus"))
ALL = [str(examples.example_path(n)) for n in examples.EXAMPLES] + sorted(
    str(p) for p in (Path(__file__).parent / "designs").glob("*.toml"))


def _check(design, nominal=False):
    return check(design, nominal=True) if nominal else check(design, corners=True)


@pytest.mark.parametrize("path", ALL, ids=lambda p: p.rsplit("/", 1)[-1])
def test_an_unedited_rebuild_is_the_same_design(path):
    d = load(path)
    assert rebuilt(d) == d


def test_moving_a_toleranced_value_moves_its_interval():
    d = load(SHORT)
    lo, hi = d.tolerances["termination.0.r"]
    m = moved(d, {"termination.0.r": 30.0})
    assert m.tolerances["termination.0.r"] == pytest.approx((lo + 8.0, hi + 8.0))
    assert out_of_box(m) == []
    assert m.tolerances["lines.route.z0"] == d.tolerances["lines.route.z0"]


def test_a_batch_of_candidates_scores_as_the_check_does():
    # the design's own values as one candidate among others: the same worst headroom as the check, bit for bit
    d = load(SHORT)
    r = float(d.params["termination.0.r"])
    s = score(d, {"termination.0.r": np.array([15.0, r, 33.0])})
    rep = check(d, corners=True)
    assert s.head[1] == rep.worst["headroom"]
    assert bool(s.failed[1]) == (not rep.passed)
    assert s.worst[1][3] == rep.worst["corner"]
    assert len(s.labels) == 1 + corner_values(d)[2].shape[0]
    # each candidate's variants: the first is its nominal design
    assert s.variant_head.shape == (3, len(s.labels))


def test_a_candidate_scores_the_same_alone_or_in_a_batch():
    # a 1 mm stub is shorter than one time step (lumped pi), a 79 mm one is not: the engine models a line one
    # way for a whole sweep, so score() sweeps them apart; with the same step and window each candidate gives
    # the same bits alone as in the batch
    d = load(SHORT)
    p = "tap.MEM3.stub.length"
    both = score(d, {p: np.array([0.001, 0.079])}, nominal=True)
    for i, x in enumerate((0.001, 0.079)):
        alone = score(d, {p: np.array([x])}, nominal=True, dt=both.dt, t_stop=both.t_stop)
        assert alone.head[0] == both.head[i] and alone.worst[0] == both.worst[i]


def test_longest_stub_passes_at_the_answer_and_fails_just_beyond():
    d = load(SHORT)
    res = longest_stub(d)
    assert res.passes
    paths = [f"tap.{t.name}.stub.length" for t in d.taps if t.stub is not None]
    at = _check(moved(d, {p: res.answer for p in paths}))
    beyond = _check(moved(d, {p: res.beyond for p in paths}))
    assert at.passed and not beyond.passed
    assert at.worst["headroom"] == res.margin_at_answer
    assert beyond.worst["headroom"] == res.margin_beyond
    assert 0 < res.beyond - res.answer <= res.resolution
    # every grid length below the answer passed (no note of a passing run that starts further out)
    assert all(c["passes"] for c in res.candidates if c["length"] <= res.answer)
    assert not any("passing run starts" in n for n in res.notes)


def test_longest_single_stub_nominal():
    d = load(SHORT)
    res = longest_stub(d, tap="MEM3", nominal=True)
    assert res.passes and "nominal design only" == res.analysis
    assert check(moved(d, {"tap.MEM3.stub.length": res.answer}), nominal=True).passed
    assert not check(moved(d, {"tap.MEM3.stub.length": res.beyond}), nominal=True).passed


def _in_series(x, series):
    # x [ohm or F] is a member of the series in some decade
    e = math.floor(math.log10(x) + 1e-9)
    return any(math.isclose(x, v * 10.0 ** e, rel_tol=1e-9) for v in preferred.decade(series)) or \
        any(math.isclose(x, v * 10.0 ** (e - 1), rel_tol=1e-9) for v in preferred.decade(series))


def test_best_termination_is_never_worse_than_a_candidate_it_tried():
    d = load(SHORT)
    res = best_termination(d, series="E12")
    best = res.candidates[0]
    assert best["label"] == res.answer["label"]

    def key(passes, margin):
        return (1 if passes else 0, margin)

    top = key(best["passes"], best["margin"])
    for c in res.candidates:
        if c["over_box"]:
            assert key(c["passes"], c["margin"]) <= top, c["label"]
        else:
            # skipped: its nominal case alone is already no better than the answer's worst case, and a
            # candidate's worst case over the box is never better than its nominal case
            assert key(c["nominal_passes"], c["nominal_margin"]) <= top, c["label"]
        for k, v in c["values"].items():
            if k in ("r", "r_up", "r_down", "c"):
                assert _in_series(v, "E12"), (c["label"], k, v)
    # the answer's margin is the check's at the answer
    assert res.margin_at_answer == best["margin"]
    assert {c["scheme"] for c in res.candidates} == {"parallel", "thevenin", "rc", "series"}


def test_best_termination_rechecked():
    from budget.model import Termination

    d = load(SHORT)
    res = best_termination(d, series="E24", schemes=("series",))
    r = res.answer["values"]["r"]
    assert _in_series(r, "E24")
    tol = {p: b for p, b in d.tolerances.items() if not p.startswith("termination.")}
    redo = rebuilt(d, terminations=[Termination("series", tap="CTRL", r=r)], tolerances=tol)
    rep = _check(redo)
    assert rep.passed == res.passes
    assert rep.worst["headroom"] == pytest.approx(res.margin_at_answer, abs=1e-12)
    margins = [c["margin"] for c in res.candidates if c["over_box"]]
    assert max(margins) == res.candidates[0]["margin"]


def test_drops_at_a_spacing():
    d = load(SHORT)
    res = most_drops(d, 0.03)
    assert res.passes
    assert _check(drops_design(d, res.answer, 0.03)).passed
    assert not _check(drops_design(d, res.answer + 1, 0.03)).passed
    # the devices: the design's taps first, then copies of its receivers in trunk order
    names = [t.name for t in drops_design(d, 6, 0.03).taps]
    assert names == ["CTRL", "MEM1", "MEM2", "MEM3", "MEM1_2", "MEM2_2"]


def test_smallest_spacing_for_a_count():
    # on this series-terminated address bus closer drops only help (the bus tends to a lumped load):
    # every spacing of the range passes, so the answer is the range's lower end, and the check agrees
    d = load(SHORT)
    res = smallest_spacing(d, 4)
    assert res.passes and res.beyond is None
    assert res.answer == min(c["spacing"] for c in res.candidates)
    assert any("whole searched range" in n for n in res.notes)
    assert _check(drops_design(d, 4, res.answer)).passed
    # with more devices the wide spacings fail: the answer is still the end of the passing run that holds
    # the best margin, and it passes the check
    res6 = smallest_spacing(d, 6)
    assert res6.passes and _check(drops_design(d, 6, res6.answer)).passed
    assert not all(c["passes"] for c in res6.candidates)


def test_cli_solve_json_and_exit_codes(capsys):
    code = main(["solve", "stub", "example:short-bus", "--json", "--nominal"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    assert doc["schema"] == "busbudget.solve/1"
    assert {"question", "answer", "margin_at_answer", "margin_beyond", "worst", "candidates"} <= set(doc)
    assert doc["worst"]["receiver"] and doc["margin_at_answer"] >= 0
    # just beyond it fails: on a negative margin or on another violation (then named)
    assert doc["beyond_passes"] is False
    assert doc["margin_beyond"] < 0 or doc["beyond_violations"]
    # a bus that fails on its driver's strength: even two devices fail; exit 1, the best still reported
    failing = str(Path(__file__).parent / "designs" / "failing_ringback.toml")
    code = main(["solve", "drops", failing, "--spacing", "10 cm", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 1 and doc["passes"] is False and doc["answer"] == 2 and doc["margin_at_answer"] < 0


@pytest.mark.slow
def test_backplane_passes_with_the_termination_answer():
    # README worked example: the backplane fails 62 of its 128 corners with its own termination
    d = load(examples.example_path("backplane"))
    assert not check(d).passed
    res = best_termination(d, series="E12")
    assert res.passes and res.margin_at_answer > 0
