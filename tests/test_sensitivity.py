"""Sensitivities of the worst headroom (budget.sensitivity, `busbudget sensitivity`).

Three checks: a DC-limited bus whose worst margin is a resistive divider (closed
form, docs/references.md A3), central differences of full checks re-run at the
shifted values (budget.check.check on budget.candidates.moved), and the CLI's JSON.
"""
from __future__ import annotations

import json
import math

import pytest

from budget import examples, step_accuracy
from budget.candidates import moved
from budget.check import check
from budget.cli import main
from budget.design_file import load, loads
from budget.errors import ArgumentError
from budget.netlist import EDGES
from budget.sensitivity import REL_STEP, sensitivities
from budget.sweep import plan

# A driver at one end of an electrically short line (33 ps against a 5 ns edge: reflections are
# smeared out), parallel-terminated at the receiver: the falling edge settles cleanly at V_lo = Vt * r_low / (r_low + Rt), so its margin is
# VIL - V_lo - crosstalk and the worst headroom is that of the falling edge.
DIVIDER = """
[bus]
name = "divider test link"
[edge]
rise = "5 ns"
fall = "5 ns"
[parts.src]
role = "driver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "1 pF"
[parts.dst]
role = "receiver"
c_pin = "1 pF"
vih = "2.0 V"
vil = "0.8 V"
[lines.l]
z0 = "50 ohm"
delay = "6.7 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l"
length = "5 mm"
[[tap]]
name = "TX"
node = "a"
part = "src"
[[tap]]
name = "RX"
node = "b"
part = "dst"
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "1.65 V"
[budget]
crosstalk = "50 mV"
"""


def test_dc_limited_margin_follows_the_resistive_divider():
    # docs/references.md A3 (the divider V = Vs * Z0/(Z0 + Rs), here at DC: Rt in place of Z0):
    # V_lo = Vt r/(r + Rt); W = VIL - V_lo - 50 mV
    # dW/dr_low = -Vt Rt/(r + Rt)^2, dW/dRt = Vt r/(r + Rt)^2, dW/dVt = -r/(r + Rt)
    d = loads(DIVIDER)
    res = sensitivities(d, paths=["parts.src.r_low", "termination.0.r", "termination.0.v"])
    vt, r, rt = 1.65, 20.0, 50.0
    assert res.worst["edge"] == "fall"
    # the edge rings a few mV around its DC level after the trough (the pins' capacitance with the line's
    # inductance), so W sits within 5 mV (0.2 % of the swing) of the divider and its derivatives within 1 %
    assert res.worst["headroom"] == pytest.approx(0.8 - vt * r / (r + rt) - 0.05, abs=5e-3)
    got = {row["path"]: row for row in res.rows}
    expected = {"parts.src.r_low": -vt * rt / (r + rt) ** 2, "termination.0.r": vt * r / (r + rt) ** 2,
                "termination.0.v": -r / (r + rt)}
    for path, value in expected.items():
        assert got[path]["d_worst"] == pytest.approx(value, rel=1e-2), path
        assert got[path]["smooth"], path
        assert got[path]["cost_over_box"] is None        # no tolerance: ranked after the toleranced ones
    # r_high sets only the falling edge's starting level, not V_lo: W hardly moves with it
    d_high = sensitivities(d, paths=["parts.src.r_high"]).rows[0]["d_worst"]
    assert abs(d_high) < 0.02 * abs(expected["parts.src.r_low"])


def _full_check_difference(design, row):
    p, h = row["path"], row["step"]
    up = check(moved(design, {p: row["value"] + h}), corners=True).worst["headroom"]
    down = check(moved(design, {p: row["value"] - h}), corners=True).worst["headroom"]
    return (up - down) / (2 * h)


# values that set the largest step tried (the L-C resonance of the pins): the full check at the
# shifted value may model the pins on another grid, which moves W by a few tenths of a per cent of the swing
STEP_SETTING = ("c_pin", "l_pkg")


@pytest.mark.parametrize("name", ["short-bus", "marginal"])
def test_derivatives_agree_with_central_differences_of_full_checks(name, monkeypatch):
    path = examples.example_path("short-bus") if name == "short-bus" else "tests/designs/marginal_bus.toml"
    d = load(path)
    res = sensitivities(d, paths=["tap.MEM1.stub.length"])
    # The check picks its step by an accuracy estimate on the envelope (budget.step_accuracy), which any
    # value can move by a step of the h0/2^(k/2) ladder: that jump (~1 mV) would swamp a 1 % difference.
    # The derivative is defined at a fixed step, so the full checks here keep the nominal design's.
    _, dts, _ = plan(d, {}, EDGES)
    monkeypatch.setattr(step_accuracy, "choose",
                        lambda env, edge, flatten: step_accuracy.StepChoice(dts[edge], dts[edge], math.nan, False))
    assert len(res.rows) == 6
    for row in res.rows:
        fd = _full_check_difference(d, row)
        if row["path"].rsplit(".", 1)[1] in STEP_SETTING:
            # the check's own time step differs at x +- h: 10 % of the derivative
            assert row["d_worst"] == pytest.approx(fd, rel=0.10), row["path"]
        else:
            # the same variants and the same time step: the same numbers
            assert row["d_worst"] == pytest.approx(fd, rel=1e-9, abs=1e-12), row["path"]
    # ranked by the margin each tolerance costs over its interval
    costs = [r["cost_over_box"] for r in res.rows if r["cost_over_box"] is not None]
    assert costs == sorted(costs, reverse=True)
    assert res.rows[-1]["path"] == "tap.MEM1.stub.length"


def test_kinks_are_marked_where_one_sided_differences_disagree(monkeypatch):
    # the backplane's worst case sits on knife edges of the margin definition (docs/metrics.md): W's
    # slope changes sign within a 1 % move of a resistance; such rows say they are not smooth
    d = load(examples.example_path("backplane"))
    res = sensitivities(d)
    kinked = [r for r in res.rows if not r["smooth"]]
    assert kinked, "no row marked not smooth on the backplane"
    _, dts, _ = plan(d, {}, EDGES)
    monkeypatch.setattr(step_accuracy, "choose",
                        lambda env, edge, flatten: step_accuracy.StepChoice(dts[edge], dts[edge], math.nan, False))
    for r in kinked:
        assert abs(r["d_forward"] - r["d_backward"]) > 0.25 * max(abs(r["d_forward"]), abs(r["d_backward"]))
    # the central difference is still that of full checks at the same step (the kink is in W itself)
    r = kinked[0]
    assert r["d_worst"] == pytest.approx(_full_check_difference(d, r), rel=1e-9)
    assert r["step"] == pytest.approx(REL_STEP * abs(r["value"]))


def test_cli_json(capsys):
    code = main(["sensitivity", "example:short-bus", "--json", "--path", "tap.MEM1.stub.length"])
    out = capsys.readouterr().out
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "busbudget.sensitivity/1"
    assert [r["rank"] for r in doc["sensitivities"]] == list(range(1, 7))
    assert {"path", "d_worst", "d_nominal", "cost_over_box", "per_percent", "smooth"} <= set(doc["sensitivities"][0])
    code = main(["sensitivity", "example:short-bus", "--nominal"])
    assert code == 0 and "ranked by" in capsys.readouterr().out


def test_bad_paths_are_refused():
    d = load(examples.example_path("short-bus"))
    with pytest.raises(ArgumentError, match="no numeric value"):
        sensitivities(d, paths=["parts.nope.c_pin"])
    with pytest.raises(ArgumentError, match="list of dotted paths"):
        sensitivities(d, paths="lines.route.z0")
