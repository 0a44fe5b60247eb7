"""Margin anatomy (budget.anatomy, busbudget explain): DC level + reflection + allocations = margin.

The sum is a real check: the parts come from the result's DC levels, ringback
and overshoot, the margin from the kernel's own minimum; they agree to
round-off on every bundled and test design, for every result.  The DC
remedies are compared with the voltage divider worked by hand (Ohm's law,
common practice) and verified by re-running the check at the answer.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import budget
from budget.anatomy import anatomy, dc_remedies, report_anatomy
from budget.check import check
from budget.cli import main

DESIGNS = Path(__file__).parent / "designs"
ALL = [(f"example:{n}", budget.example(n)) for n in budget.EXAMPLES] + \
      [(p.name, budget.load(p)) for p in sorted(DESIGNS.glob("*.toml"))]
ROUND_OFF = 1e-12   # [V]: three subtractions of volt-sized numbers


@pytest.fixture(scope="module")
def reports():
    return {name: (d, check(d)) for name, d in ALL}


@pytest.mark.parametrize("name", [n for n, _ in ALL])
def test_parts_add_up_to_the_margin_for_every_result(name, reports):
    design, report = reports[name]
    assert report.results
    for row in report.results:
        a = report_anatomy(design, report.variants, row, remedies=False)
        assert a.total() == pytest.approx(a.margin, abs=ROUND_OFF), row
        assert a.reflection <= 0.0 and a.allocations <= 0.0
        # the DC part is the settled level against the threshold, nothing else
        part = design.parts[design.tap(row["receiver"]).part]
        vals = report.variants.get(row["corner"], {}).get("values", {})
        vih = vals.get(f"parts.{part.name}.vih", part.vih)
        vil = vals.get(f"parts.{part.name}.vil", part.vil)
        assert a.dc == (row["v_hi"] - vih if row["edge"] == "rise" else vil - row["v_lo"])
        # a passing margin is never called limited, a failing one always is
        margin_ok = a.margin >= a.min_margin
        assert (a.limited_by is None) == margin_ok


@pytest.mark.parametrize("name", [n for n, _ in ALL])
def test_the_reports_worst_case_carries_its_anatomy(name, reports):
    design, report = reports[name]
    doc = report.to_json()
    a, w = doc["anatomy"], doc["worst"]
    assert (a["driver"], a["receiver"], a["edge"], a["corner"]) == (w["driver"], w["receiver"], w["edge"], w["corner"])
    assert a["margin"] == w["margin"]
    assert a["dc"] + a["reflection"] + a["allocations"] == pytest.approx(a["margin"], abs=ROUND_OFF)
    assert sum(t["value"] for t in a["allocation_terms"]) == pytest.approx(-a["allocations"], abs=ROUND_OFF)
    assert "margin anatomy" in report.text()
    json.dumps(doc, allow_nan=False)


# ---------------------------------------------------------------------------
# a design that fails on its DC level alone

# tests/designs/dc_limited.toml, by hand (Ohm's law, common practice): two 40 ohm parallel
# terminations to 1.3 V are 20 ohm to 1.3 V; a 40 ohm driver pulling low gives
# v_lo = 1.3 * 40 / (40 + 20) = 0.8667 V, above VIL = 0.8 V; with the 50 mV crosstalk
# allocation the pin must reach 0.75 V.
V_T, R_T, R_DRV, NEED = 1.3, 20.0, 40.0, 0.75
R_DRV_NEEDED = NEED * R_T / (V_T - NEED)           # v_lo = 1.3 R / (R + 20) = 0.75  ->  27.27 ohm
R_T_NEEDED = 2 * (V_T * R_DRV / NEED - R_DRV)      # each of the two terminations: 58.67 ohm


def test_dc_limited_design_is_named_as_such(reports):
    design, report = reports["dc_limited.toml"]
    a = report.to_json()["anatomy"]
    assert a["limited_by"] == "dc" and a["dc_only"]
    assert a["settled"] == pytest.approx(V_T * R_DRV / (R_DRV + R_T), rel=1e-9)
    assert a["clean_margin"] < a["min_margin"]
    text = report.text()
    assert text.count("fails on the DC level alone") == 1
    assert "stronger driver" in text and "weaker termination" in text


def test_dc_remedies_match_the_divider_by_hand(reports):
    design, report = reports["dc_limited.toml"]
    rem = report.to_json()["anatomy"]["dc_remedies"]
    assert rem["driver"]["key"] == "r_low" and rem["driver"]["value"] == R_DRV
    # on the passing side of the answer, within the solver's 0.3 % grid
    assert R_DRV_NEEDED * 0.996 <= rem["driver"]["needed"] <= R_DRV_NEEDED
    for t in rem["termination"]["needed"]:
        assert R_T_NEEDED <= t["needed"] <= R_T_NEEDED * 1.004
    assert rem["shortfall"] == pytest.approx(V_T * R_DRV / (R_DRV + R_T) - NEED, rel=1e-9)


def _clean_margin_at(design, values, driver, receiver, edge):
    d = design.with_values(values)
    rep = check(d, nominal=True)
    row = rep.rows(driver=driver, receiver=receiver, edge=edge)[0]
    return anatomy(d, row).clean_margin


def test_dc_remedies_pass_at_the_answer_and_fail_just_beyond(reports):
    design, report = reports["dc_limited.toml"]
    a = report.to_json()["anatomy"]
    rem = a["dc_remedies"]
    case = (a["driver"], a["receiver"], a["edge"])
    r = rem["driver"]["needed"]
    assert _clean_margin_at(design, {"parts.weak_xcvr.r_low": r}, *case) >= 0
    assert _clean_margin_at(design, {"parts.weak_xcvr.r_low": r * 1.01}, *case) < 0
    s = rem["termination"]["scale"]
    assert _clean_margin_at(design, {"termination.0.r": 40 * s, "termination.1.r": 40 * s}, *case) >= 0
    assert _clean_margin_at(design, {"termination.0.r": 40 * s / 1.01, "termination.1.r": 40 * s / 1.01},
                            *case) < 0


def test_stub_length_never_moves_the_dc_part():
    """Lossless lines are shorts at DC: however long the stub, the DC part is the same and the case stays
    DC-limited (the reason the report says stub lengths cannot fix it)."""
    design = budget.load(DESIGNS / "dc_limited.toml")
    parts = []
    for length in ("1 mm", "1 cm", "6 cm"):
        rep = check(design.with_values({"tap.N2.stub.length": length}), nominal=True)
        row = rep.rows(driver="N3", receiver="N2", edge="fall")[0]
        a = anatomy(design, row)
        parts.append(a.dc)
        assert a.limited_by == "dc"
    assert np.ptp(parts) < 1e-12


def test_remedies_refuse_a_case_that_is_not_dc_limited(reports):
    design, report = reports["example:short-bus"]
    row = report.rows()[0]
    a = anatomy(design, row)
    assert a.limited_by != "dc"
    with pytest.raises(budget.errors.ArgumentError, match="DC level alone"):
        dc_remedies(design, a)


def test_backplane_says_reflections_dominate(reports):
    design, report = reports["example:backplane"]
    a = report.to_json()["anatomy"]
    assert not report.passed
    assert a["limited_by"] == "reflection" and a["largest_loss"] == "reflection"
    assert -a["reflection"] > a["dc"] > 0        # the settled level is fine; the excursion eats it
    assert "dc_remedies" not in a
    assert "limited by reflections" in report.text()


# ---------------------------------------------------------------------------
# busbudget explain

def test_explain_shows_every_case_of_a_receiver(capsys):
    code = main(["explain", "example:backplane", "--receiver", "SLOT4", "--json", "--no-progress"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 1 and doc["schema"] == "busbudget.explain/1" and doc["verdict"] == "fail"
    assert len(doc["cases"]) == 7 * 2                      # every other slot drives, both edges
    assert {c["receiver"] for c in doc["cases"]} == {"SLOT4"}
    for c in doc["cases"]:
        assert c["dc"] + c["reflection"] + c["allocations"] == pytest.approx(c["margin"], abs=ROUND_OFF)
    worst = doc["cases"][doc["worst"]]
    assert min(c["margin"] for c in doc["cases"]) == worst["margin"]


def test_explain_text_names_the_dc_failure(capsys):
    code = main(["explain", str(DESIGNS / "dc_limited.toml"), "--driver", "N1", "--edge", "rise"])
    out = capsys.readouterr().out
    assert code == 1
    assert "DC level" in out and "fails on the DC level alone" in out and "what reaches it" in out


def test_explain_of_a_passing_selection_exits_0(capsys):
    assert main(["explain", "example:short-bus", "--nominal", "--receiver", "MEM3"]) == 0
    assert "VERDICT: PASS" in capsys.readouterr().out
