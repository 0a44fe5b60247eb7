"""The budget check: margins against published interface levels, failing and robust buses, the report.

Standards rows use a lumped link (driver and receiver on one node, no line):
after the edge the pin settles exactly at the driver's DC level into its load,
so each margin must equal the standard's noise margin, NMH = VOH - VIH and
NML = VIL - VOL (J. F. Wakerly, *Digital Design: Principles and Practices*,
3rd ed., 2000, section 3.5 -- from memory; docs/references.md E8), or for a
differential receiver |VID| - |threshold|.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

import budget
from budget.analyses import out_of_box
from budget.check import RESULT_KEYS, SCHEMA, check
from budget.errors import ArgumentError
from budget.kernels import metrics as mk
from budget.metrics import edge_metrics
from budget.sweep import sweep

DESIGNS = Path(__file__).parent / "designs"


def lumped(voh, vol, r_out, vih, vil, *, signaling="single-ended", term_r=None, budget_table="",
           tolerances=""):
    """A driver D and a receiver R on one node; optional parallel termination term_r [ohm] to 0 V."""
    term = "" if term_r is None else f"""
[[termination]]
node = "n"
type = "parallel"
r = "{term_r} ohm"
v = "0 V"
"""
    return f"""
[bus]
name = "lumped {signaling} link"
signaling = "{signaling}"
t_stop = "20 ns"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.drv]
role = "driver"
v_high = "{voh!r} V"
v_low = "{vol!r} V"
r_high = "{r_out!r} ohm"
r_low = "{r_out!r} ohm"
c_pin = "1 pF"
[parts.rx]
role = "receiver"
c_pin = "2 pF"
vih = "{vih!r} V"
vil = "{vil!r} V"
[[tap]]
name = "D"
node = "n"
part = "drv"
[[tap]]
name = "R"
node = "n"
part = "rx"
{term}
{tolerances}
{budget_table}
"""


# ---------------------------------------------------------------------------
# published interface levels -> noise margins

# (id, open-circuit VOH [V], VOL [V], r_out [ohm], termination [ohm] or None, VIH, VIL, signaling,
#  expected margin high [V], margin low [V])
STANDARDS = [
    # docs/references.md E5: JEDEC JESD8C LVTTL, VOH 2.4 / VOL 0.4 V, VIH 2.0 / VIL 0.8 V -> 0.4 / 0.4 V
    # (limits from memory; 2.0/0.8 and 2.4/0.4 V seen secondhand in TI datasheets)
    ("LVTTL JESD8C", 2.4, 0.4, 20.0, None, 2.0, 0.8, "single-ended", 0.4, 0.4),
    # docs/references.md E5: JESD8C LVCMOS at VDD = 3.0 V, VOH = VDD - 0.2 V, VOL 0.2 V -> 0.8 / 0.6 V
    ("LVCMOS 3.3 V JESD8C at VDD 3.0 V", 2.8, 0.2, 20.0, None, 2.0, 0.8, "single-ended", 0.8, 0.6),
    # docs/references.md E6: JEDEC JESD8-5 2.5 V CMOS at 1 mA, VOH 2.0 / VOL 0.4, VIH 1.7 / VIL 0.7 -> 0.3 / 0.3 V
    ("2.5 V CMOS JESD8-5 at 1 mA", 2.0, 0.4, 20.0, None, 1.7, 0.7, "single-ended", 0.3, 0.3),
    # docs/references.md E7: JEDEC JESD8-7 1.8 V at VDD 1.65 V: VIH 0.65 VDD = 1.0725, VIL 0.35 VDD = 0.5775,
    # VOH = VDD - 0.45 = 1.2, VOL 0.45 -> 0.1275 / 0.1275 V
    ("1.8 V JESD8-7 at VDD 1.65 V", 1.2, 0.45, 20.0, None, 1.0725, 0.5775, "single-ended", 0.1275, 0.1275),
    # docs/references.md E9: PCI 3.3 V signalling, VIH 0.5 Vcc, VIL 0.3 Vcc, VOH 0.9 Vcc, VOL 0.1 Vcc at Vcc = 3.3 V
    # (seen secondhand) -> 2.97 - 1.65 = 1.32 V, 0.99 - 0.33 = 0.66 V
    ("PCI 3.3 V", 2.97, 0.33, 20.0, None, 1.65, 0.99, "single-ended", 1.32, 0.66),
    # docs/references.md E1: TIA/EIA-485-A, |VOD| >= 1.5 V into 54 ohm (3 V open circuit behind 54 ohm here),
    # receiver thresholds +-200 mV -> 1.5 - 0.2 = 1.3 V both ways (seen secondhand)
    ("RS-485 TIA/EIA-485-A", 3.0, -3.0, 54.0, 54.0, 0.2, -0.2, "differential", 1.3, 1.3),
    # docs/references.md E3: ISO 11898-2 CAN, dominant VDiff >= 1.5 V into 60 ohm, recessive VDiff <= 0.05 V
    # (from memory), receiver dominant above 0.9 V, recessive below 0.5 V -> 0.6 V and 0.45 V
    ("CAN ISO 11898-2", 3.0, 0.1, 60.0, 60.0, 0.9, 0.5, "differential", 0.6, 0.45),
]


@pytest.mark.parametrize("row", STANDARDS, ids=[s[0] for s in STANDARDS])
def test_margins_equal_the_published_noise_margins(row):
    _, voh, vol, r_out, term, vih, vil, signaling, nmh, nml = row
    report = check(budget.loads(lumped(voh, vol, r_out, vih, vil, signaling=signaling, term_r=term)))
    rise = report.rows(edge="rise")[0]
    fall = report.rows(edge="fall")[0]
    assert rise["margin_high"] == pytest.approx(nmh, abs=1e-9)
    assert fall["margin_low"] == pytest.approx(nml, abs=1e-9)
    assert rise["margin_low"] is None and fall["margin_high"] is None
    assert report.passed and report.verdict == "pass"


def test_allocations_in_volts_and_percent_of_swing_come_off_the_margin():
    # LVTTL link (NMH = 0.4 V, docs/references.md E5), swing 2.4 - 0.4 = 2.0 V:
    # 100 mV crosstalk + 5 % of 2.0 V supply noise leave 0.4 - 0.1 - 0.1 = 0.2 V.
    table = '[budget]\ncrosstalk = "100 mV"\nsupply_noise = "5%"\nmin_margin = "150 mV"\n'
    report = check(budget.loads(lumped(2.4, 0.4, 20.0, 2.0, 0.8, budget_table=table)))
    assert report.rows(edge="rise")[0]["margin_high"] == pytest.approx(0.2, abs=1e-9)
    assert report.rows(edge="rise")[0]["margin_percent_of_swing"] == pytest.approx(10.0, abs=1e-6)
    assert report.passed                                   # 0.2 V >= 0.15 V required
    assert report.worst["headroom"] == pytest.approx(0.05, abs=1e-9)
    tight = check(budget.loads(lumped(2.4, 0.4, 20.0, 2.0, 0.8,
                                      budget_table=table.replace("150 mV", "250 mV"))))
    assert not tight.passed
    assert tight.worst["headroom"] == pytest.approx(-0.05, abs=1e-9)
    assert tight.worst["metric"] in ("margin_high", "margin_low")


# ---------------------------------------------------------------------------
# failing and robust buses name the right case

def test_overshoot_beyond_the_absolute_maximum_names_driver_receiver_edge():
    report = check(budget.load(DESIGNS / "failing_overshoot.toml"))
    assert not report.passed and report.verdict == "fail"
    w = report.worst
    assert (w["driver"], w["receiver"], w["edge"], w["corner"]) == ("FAST", "FAR", "rise", "nominal")
    assert w["metric"] == "overshoot"
    assert "above absolute maximum" in w["violations"]
    # the far end of an open line driven through 5 ohm nearly doubles the 3.3 V step
    # (docs/references.md A4 lattice: V1 = 3.3 * 50/55 = 3.0 V, Gamma_L = +1 -> about 6 V)
    row = report.rows(driver="FAST", receiver="FAR", edge="rise")[0]
    assert 5.0 < row["v_peak"] < 6.6
    assert w["headroom"] == pytest.approx(4.6 - row["v_peak"])
    # that is the only failing case
    failing = {(r["driver"], r["receiver"], r["edge"]) for r in report.results if not r["pass"]}
    assert failing == {("FAST", "FAR", "rise")}


def test_ringback_into_the_threshold_band_names_driver_receiver_edge():
    report = check(budget.load(DESIGNS / "failing_ringback.toml"))
    w = report.worst
    assert not report.passed
    assert (w["driver"], w["receiver"], w["edge"]) == ("FAST", "FAR", "fall")
    assert w["metric"] == "margin_low"
    row = report.rows(driver="FAST", receiver="FAR", edge="fall")[0]
    assert row["ringback"] < 0                       # re-entered VIL..VIH
    assert row["v_peak"] < 7.0 and row["v_trough"] > -4.0   # no rating involved
    assert "margin below minimum" in row["violations"]
    failing = {(r["driver"], r["receiver"], r["edge"]) for r in report.results if not r["pass"]}
    assert failing == {("FAST", "FAR", "fall")}


def test_robust_link_passes_nominally_and_at_every_corner():
    report = check(budget.load(DESIGNS / "robust.toml"), corners=True)
    assert report.passed
    assert report.analyses["corners"]["variants"] == 2 ** 5
    assert report.analyses["corners"]["failed"] == 0
    assert report.worst["headroom"] > 0.05


def test_never_valid_edge_is_a_violation_and_never_nan():
    # VOH 2.4 V behind 20 ohm into 50 ohm to 0 V settles at 2.4 * 50 / 70 = 1.714 V, below VIH 2.0 V:
    # the rising edge never becomes valid.  (A driver whose own v_high is below VIH is refused at load.)
    report = check(budget.loads(lumped(2.4, 0.4, 20.0, 2.0, 0.8, term_r=50.0)))
    rise = report.rows(edge="rise")[0]
    assert rise["t_valid"] is None and rise["flight_max"] is None and rise["ringback"] is None
    assert "never valid" in rise["violations"] and not rise["pass"]
    assert rise["margin_high"] == pytest.approx(2.4 * 50 / 70 - 2.0, abs=1e-6)
    assert not report.passed
    text = report.text()
    assert "never" in text and "nan" not in text.lower()
    json.dumps(report.to_json(), allow_nan=False)   # raises on NaN or inf


# ---------------------------------------------------------------------------
# the report object and the JSON contract

def test_results_carry_the_contract_keys_one_per_driver_receiver_edge_corner():
    design = budget.load(DESIGNS / "failing_overshoot.toml")
    report = check(design)
    pairs = [(d, r) for d in design.drivers for r in design.receivers if r != d]
    assert len(report.results) == 2 * len(pairs)
    keys = {(r["driver"], r["receiver"], r["edge"], r["corner"]) for r in report.results}
    assert len(keys) == len(report.results)
    for r in report.results:
        assert set(RESULT_KEYS) <= set(r)
        assert (r["margin_high"] is None) == (r["edge"] == "fall")
        assert (r["margin_low"] is None) == (r["edge"] == "rise")
        assert isinstance(r["monotonic"], bool) and isinstance(r["pass"], bool)
    doc = report.to_json()
    assert doc["schema"] == SCHEMA == "busbudget.check/1"
    assert doc["design"] == "overshoot test bus"
    assert doc["verdict"] == "fail"
    assert set(doc["worst"]) >= {"driver", "receiver", "edge", "corner", "metric", "value"}
    assert "estimates" in doc["safety"].lower() and doc["assumptions"]
    json.loads(json.dumps(doc, allow_nan=False))


def test_tolerance_analyses_list_only_the_worst_variant_per_case():
    design = budget.load(DESIGNS / "robust.toml")
    report = check(design, corners=True, monte_carlo=40, seed=2)
    for analysis in ("nominal", "corners", "monte_carlo"):
        rows = report.rows(analysis=analysis)
        assert len(rows) == 2                       # one receiver x two edges
    assert {r["corner"] for r in report.rows(analysis="corners")} <= {f"corner {i}" for i in range(1, 33)}
    for r in report.results:
        assert r["corner"] in report.variants        # every named variant has its values
    doc = report.to_json()
    assert "not listed" in doc["results_note"]
    # the listed corner is the worst corner for that edge (no violation anywhere here, so: no
    # corner has less headroom; the headroom itself is checked against its definition in
    # test_worst_case_is_the_same_in_check_and_sweep_on_robust_link)
    from budget.check import corner_values
    vals, _, _ = corner_values(design)
    every = sweep(design, vals)
    assert every.passed.all()
    j = every.receivers.index("RX")
    for r in report.rows(analysis="corners"):
        head = every.headroom[:, 0, every.edges.index(r["edge"]), j]
        assert r["headroom"] == head.min()
        assert r["corner"] == f"corner {int(np.argmin(head)) + 1}"


def test_nominal_check_agrees_with_sweep_and_with_simulate_plus_metrics():
    # Three code paths, one answer: check(), sweep() and simulate() + edge_metrics().
    design = budget.load(DESIGNS / "stub_resonance.toml")
    report = check(design)
    direct = sweep(design)
    w = budget.simulate(design, "D", "rise")
    j = w.index("R1")
    v_lo, v_hi = float(w.v_low[j]), float(w.v_high[j])
    t_ref = 0.5 * design.edge.rise / 0.8           # ideal ramp reaches 50 % half way (docs/references.md D3)
    m = edge_metrics(w.t, w["R1"], edge="rise", v_lo=v_lo, v_hi=v_hi, vil=0.8, vih=2.0, t_ref=t_ref)
    row = report.rows(edge="rise")[0]
    assert row["margin_high"] == pytest.approx(direct.margin[0, 0, 0, direct.receivers.index("R1")], abs=1e-12)
    assert row["margin_high"] == pytest.approx(m.margin, abs=1e-9)
    assert row["t_valid"] == pytest.approx(m.t_valid, abs=1e-15)
    assert row["flight_min"] == pytest.approx(m.flight_min, abs=1e-15)
    assert row["v_peak"] == pytest.approx(m.v_peak, abs=1e-9)


def test_text_report_names_the_worst_case_and_states_assumptions():
    report = check(budget.load(DESIGNS / "failing_overshoot.toml"))
    text = report.text()
    assert "VERDICT: FAIL" in text
    assert ">> FAR" in text                                 # the worst receiver is marked
    assert "FAST -> FAR, rise edge" in text
    for phrase in ("Linear driver model", "differential mode", "crosstalk", "measurement", "datasheets",
                   "responsible engineer"):
        assert phrase.lower() in text.lower(), phrase
    assert "nan" not in text.lower()
    ok = check(budget.load(DESIGNS / "robust.toml")).text()
    assert "VERDICT: PASS" in ok


def test_bundled_backplane_passes_nominally():
    report = budget.check(budget.example("backplane"), nominal=True)
    assert report.passed
    assert 0.0 < report.worst["headroom"] < 0.5
    assert len(report.results) == 8 * 7 * 2
    assert report.coverage["summary"] == "nominal design only" and report.coverage["corners"] == 0
    assert "(nominal design only)" in report.text()


@pytest.mark.slow
def test_bundled_backplane_fails_by_default_because_the_default_covers_the_box():
    # 7 toleranced values: 128 corners x 8 drivers x 2 edges = 2048 simulations, within the default
    # limit, so the default check evaluates them; the nominal design passes, 62 corners do not.
    report = budget.check(budget.example("backplane"))
    assert not report.passed
    assert report.analyses["corners"]["variants"] == 128 and report.analyses["corners"]["default"]
    assert report.analyses["corners"]["failed"] == 62
    assert report.analyses["nominal"]["failed"] == 0
    assert report.coverage["all_corners"] and report.coverage["summary"] == "nominal and all 128 tolerance corners"
    assert report.worst["analysis"] == "corners" and report.worst["headroom"] < 0
    assert "(nominal and all 128 tolerance corners)" in report.text()


def test_measured_values_outside_the_box_are_evaluated_and_flagged():
    # robust.toml: z0 50 ohm +-10 % -> box 45..55 ohm; a unit measured at 58 ohm is outside it,
    # one at 46 ohm inside.
    design = budget.load(DESIGNS / "robust.toml")
    assert out_of_box(design) == []
    unit = design.with_values({"lines.l.z0": 58.0, "parts.dst.c_pin": 4e-12})
    assert out_of_box(unit) == [{"path": "lines.l.z0", "value": 58.0, "min": pytest.approx(45.0),
                                 "max": pytest.approx(55.0)}]
    report = check(unit, nominal=True)
    doc = report.to_json()
    assert [o["path"] for o in doc["out_of_box"]] == ["lines.l.z0"]
    assert doc["out_of_box"][0]["value"] == 58.0
    text = report.text()
    assert "values outside the tolerance box" in text
    assert "lines.l.z0 = 58 ohm, box 45 ohm .. 55 ohm" in text
    # the value is used as given, not clipped to the box
    assert report.rows(edge="rise")[0]["margin_high"] == pytest.approx(
        float(sweep(unit).margin[0, 0, 0, 0]), abs=0)
    inside = check(design.with_values({"lines.l.z0": 46.0}), nominal=True)
    assert inside.out_of_box == [] and "outside the tolerance box" not in inside.text()
    lo, hi = design.tolerances["lines.l.z0"]
    assert out_of_box(design.with_values({"lines.l.z0": lo * (1 - 1e-13)})) == []   # rounding: inside
    assert len(out_of_box(design.with_values({"lines.l.z0": lo * (1 - 1e-6)}))) == 1
    assert len(out_of_box(design.with_values({"lines.l.z0": hi * (1 + 1e-6)}))) == 1


def test_worst_case_is_the_same_in_check_and_sweep_on_robust_link():
    # Before the one rule, check named TX->RX rise (undershoot, +0.500 V) and the sweep
    # TX->RX fall (margin, +0.535 V).  The undershoot limit is the closer one:
    # v_trough - v_min = 0 - (-0.5) = 0.5 V < margin_low 0.535 V.
    design = budget.load(DESIGNS / "robust.toml")
    report = check(design, nominal=True)
    r = sweep(design)
    w = report.worst
    assert r.worst_index(0) == (w["driver"], w["edge"], w["receiver"]) == ("TX", "rise", "RX")
    assert w["metric"] == "undershoot"
    assert float(r.worst_headroom[0]) == pytest.approx(w["headroom"], abs=1e-15)
    # headroom by its definition, from the sweep's own metrics
    m = r.metrics[0, 0, :, 0, :]
    by_hand = np.minimum.reduce([m[:, mk.MARGIN] - 0.0, 4.6 - m[:, mk.V_PEAK], m[:, mk.V_TROUGH] + 0.5])
    np.testing.assert_array_equal(r.headroom[0, 0, :, 0], by_hand)


ALL_DESIGNS = [budget.example_path(n) for n in budget.EXAMPLES] + sorted(DESIGNS.glob("*.toml"))


@pytest.mark.parametrize("path", ALL_DESIGNS, ids=[p.stem for p in ALL_DESIGNS])
def test_default_check_and_one_flat_sweep_name_the_same_worst_case(path):
    # The check keeps a worst result per analysis and (driver, edge, receiver), then picks the
    # bus-level worst; one sweep over [nominal, corner 1, ...] with the flat rule must agree.
    # (The same against the C library: tests/test_cexport.py.)
    from budget.check import corner_values
    design = budget.load(path)
    report = check(design)
    vals, _, codes = corner_values(design)
    n = codes.shape[0] if vals else 0
    assert report.coverage["corners"] == n
    flat = sweep(design, {p: np.concatenate(([design.params[p]], a)) for p, a in vals.items()} or None)
    v = flat.worst_variant()
    assert report.worst["corner"] == ("nominal" if v == 0 else f"corner {v}")
    assert flat.worst_index(v) == (report.worst["driver"], report.worst["edge"], report.worst["receiver"])
    assert report.worst["headroom"] == pytest.approx(float(flat.worst_headroom[v]), abs=1e-12)
    assert report.passed == bool(flat.passed.all())


@pytest.mark.parametrize("bits, head, expected", [
    ([0, 0, 0], [0.3, 0.1, 0.2], 1),                 # lowest headroom
    ([0, 16, 0], [0.1, 0.4, 0.2], 1),                # a violation before any headroom
    ([1, 1, 0], [-0.2, -0.3, 0.0], 1),               # among violations, lowest headroom
    ([0, 0, 0], [0.1, 0.1, 0.1], 0),                 # ties: the first
    ([0, 0, 0], [np.nan, 0.2, np.nan], 1),           # NaN: no such case
    ([0, 0], [np.inf, np.inf], 0),
], ids=["lowest", "violation-first", "violations-by-headroom", "tie-first", "nan-skipped", "all-inf"])
def test_worst_rule(bits, head, expected):
    assert int(mk.worst_along(np.array(bits), np.array(head))) == expected


def test_differential_report_says_so():
    report = check(budget.loads(lumped(3.0, -3.0, 54.0, 0.2, -0.2, signaling="differential", term_r=54.0)))
    assert "differential" in report.text()
    assert report.to_json()["signaling"] == "differential"


# ---------------------------------------------------------------------------
# invalid arguments: one table

BAD = [
    ("monte-carlo-negative", dict(monte_carlo=-1), "monte_carlo"),
    ("monte-carlo-bool", dict(monte_carlo=True), "monte_carlo"),
    ("monte-carlo-float", dict(monte_carlo=10.5), "monte_carlo"),
    ("seed-negative", dict(seed=-3), "seed"),
    ("seed-text", dict(seed="7"), "seed"),
    ("unknown-distribution", dict(monte_carlo=5, distribution="gauss"), "uniform, normal"),
    ("max-corners-zero", dict(corners=True, max_corners=0), "max_corners"),
    ("generations-zero", dict(search=True, search_generations=0), "search_generations"),
    ("progress-not-callable", dict(progress=3), "progress"),
    ("nominal-with-corners", dict(nominal=True, corners=True), "nominal design alone"),
    ("nominal-with-monte-carlo", dict(nominal=True, monte_carlo=5), "nominal design alone"),
    ("nominal-with-search", dict(nominal=True, search=True), "nominal design alone"),
    ("corners-not-bool", dict(corners="yes"), "corners must be True, False or None"),
    ("nominal-not-bool", dict(nominal=1), "nominal must be True or False"),
]


@pytest.mark.parametrize("kwargs, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_invalid_arguments_are_rejected(kwargs, message):
    design = budget.load(DESIGNS / "robust.toml")
    with pytest.raises(ArgumentError, match=message):
        check(design, **kwargs)


@pytest.mark.parametrize("kwargs", [dict(corners=True), dict(monte_carlo=10), dict(search=True)],
                         ids=["corners", "monte-carlo", "search"])
def test_tolerance_analyses_need_a_tolerance_table(kwargs):
    design = budget.loads(lumped(2.4, 0.4, 20.0, 2.0, 0.8))
    with pytest.raises(ArgumentError, match=r"\[tolerances\]"):
        check(design, **kwargs)


def test_check_rejects_batched_designs_and_other_objects():
    design = budget.load(DESIGNS / "robust.toml")
    with pytest.raises(ArgumentError, match="scalar"):
        check(design.with_values({"lines.l.z0": np.array([45.0, 55.0])}))
    with pytest.raises(ArgumentError, match="Design"):
        check(str(DESIGNS / "robust.toml"))


def test_margins_never_nan_even_when_nothing_switches():
    # 2.4 V behind 20 ohm into 5 ohm to 0 V settles at 0.48 V, below VIL: no edge at all at the receiver.
    report = check(budget.loads(lumped(2.4, 0.0, 20.0, 2.0, 0.8, term_r=5.0)))
    rise = report.rows(edge="rise")[0]
    assert rise["t_switch"] is None and rise["flight_min"] is None
    assert math.isfinite(rise["margin_high"]) and rise["margin_high"] < 0
    assert not report.passed
    json.dumps(report.to_json(), allow_nan=False)
    assert mk.N_METRICS == 12
