"""Lines from geometry in design files: ``[lines.NAME] geometry = { kind = ..., ... }``.

A geometry line must behave exactly like the same line written with the z0 and delay its
formula gives (bit for bit, nominal and over a batch of variants), its dimensions take
tolerances, measured values and sweeps like any other value, and bad geometry is refused
naming the file, table and key.  Check values: docs/references.md B3 (coaxial line, Pozar
2012 Table 2.1) and scikit-rf's own coaxial medium as an outside oracle.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

import budget
from budget import geometry
from budget.check import check
from budget.design_file import loads
from budget.errors import DesignError
from budget.model import Design, LineType
from budget.sweep import sweep

DESIGNS = Path(__file__).parent / "designs"
GEO_PATH = DESIGNS / "geometry_bus.toml"
GEO_TEXT = GEO_PATH.read_text()
TRUNK = 'geometry = { kind = "microstrip", w = "0.36 mm", h = "0.2 mm", t = "35 um", er = 4.3 }'
DROP = 'geometry = { kind = "microstrip", w = "0.2 mm", h = "0.2 mm", t = "35 um", er = 4.3 }'
NO_TOLERANCES = re.sub(r"\[tolerances\]\n(.*\n)*?\n", "", GEO_TEXT)
# as the file writes them (unit strings read by the same parser, so the same floats)
TRUNK_DIMS = dict(w="0.36 mm", h="0.2 mm", t="35 um", er=4.3)
DROP_DIMS = dict(w="0.2 mm", h="0.2 mm", t="35 um", er=4.3)


def written_out(text: str, dims_trunk=TRUNK_DIMS, dims_drop=DROP_DIMS) -> str:
    """The design text with both geometry lines replaced by the z0 and delay budget.geometry.line gives."""
    for old, dims in ((TRUNK, dims_trunk), (DROP, dims_drop)):
        cs = geometry.line("microstrip", **dims)
        text = text.replace(old, f"z0 = {cs.z0!r}\ndelay = {cs.delay!r}", 1)
    return text


def _same_sweeps(a, b):
    for key in ("margin", "bits", "headroom", "metrics", "levels"):
        x, y = getattr(a, key), getattr(b, key)
        assert np.array_equal(x, y, equal_nan=True), key
    assert a.dt == b.dt and a.t_stop == b.t_stop


def test_the_test_design_loads_with_derived_lines():
    d = budget.load(GEO_PATH)
    cs = geometry.line("microstrip", **TRUNK_DIMS)
    assert d.lines["trunk"].z0 == cs.z0 and d.lines["trunk"].delay == cs.delay
    assert d.lines["trunk"].er_eff == cs.er_eff
    assert d.lines["drop"].r_dc == 2.0
    assert dict(d.lines["trunk"].geometry) == {"kind": "microstrip", **cs.dims}
    assert "lines.trunk.geometry.w" in d.params and "lines.trunk.z0" not in d.params
    # a narrower strip is a higher impedance (Hammerstad & Jensen 1980, docs/references.md B6)
    assert d.lines["drop"].z0 > d.lines["trunk"].z0


def test_geometry_design_equals_the_design_written_with_its_z0_and_delay():
    geo = loads(NO_TOLERANCES, source="geo.toml")
    plain = loads(written_out(NO_TOLERANCES), source="plain.toml")
    _same_sweeps(sweep(geo), sweep(plain))
    w_geo = budget.simulate(geo, "H1", "rise")
    w_plain = budget.simulate(plain, "H1", "rise")
    assert np.array_equal(w_geo.v, w_plain.v)


def test_a_batch_of_geometry_variants_equals_the_batch_of_their_z0_and_delay():
    # every corner of (trunk w, trunk h, drop w), derived per variant in one numpy pass, against z0 and
    # delay from budget.geometry.line one variant at a time
    geo = loads(NO_TOLERANCES, source="geo.toml")
    plain = loads(written_out(NO_TOLERANCES), source="plain.toml")
    codes = np.array([[i >> k & 1 for k in range(3)] for i in range(8)])
    tw = np.where(codes[:, 0], 0.396e-3, 0.324e-3)
    th = np.where(codes[:, 1], 0.22e-3, 0.18e-3)
    dw = np.where(codes[:, 2], 0.22e-3, 0.18e-3)
    res_geo = sweep(geo, {"lines.trunk.geometry.w": tw, "lines.trunk.geometry.h": th,
                          "lines.drop.geometry.w": dw})
    z_t, d_t, z_d, d_d = [], [], [], []
    for i in range(8):
        ct = geometry.line("microstrip", w=tw[i], h=th[i], t="35 um", er=4.3)
        cd = geometry.line("microstrip", w=dw[i], h="0.2 mm", t="35 um", er=4.3)
        z_t.append(ct.z0), d_t.append(ct.delay), z_d.append(cd.z0), d_d.append(cd.delay)
    res_plain = sweep(plain, {"lines.trunk.z0": np.array(z_t), "lines.trunk.delay": np.array(d_t),
                              "lines.drop.z0": np.array(z_d), "lines.drop.delay": np.array(d_d)})
    _same_sweeps(res_geo, res_plain)


def test_tolerance_on_a_dimension_moves_z0_as_the_formula_says():
    d = budget.load(GEO_PATH)
    lo, hi = d.tolerances["lines.trunk.geometry.w"]
    assert (lo, hi) == pytest.approx((0.324e-3, 0.396e-3), rel=1e-12)       # "10%"
    rep = check(d, corners=True)
    seen = 0
    for label, var in rep.variants.items():
        vals = var["values"]
        if not vals:
            continue
        dims = {k: vals.get(f"lines.trunk.geometry.{k}", d.params[f"lines.trunk.geometry.{k}"]) for k in TRUNK_DIMS}
        corner = d.with_values(vals)
        assert corner.lines["trunk"].z0 == geometry.line("microstrip", **dims).z0
        seen += 1
    assert seen >= 1
    # wider strip: lower z0, more of the field in the dielectric (higher er_eff): HJ80, docs/references.md B6
    wide, narrow = d.with_values({"lines.trunk.geometry.w": hi}), d.with_values({"lines.trunk.geometry.w": lo})
    assert wide.lines["trunk"].z0 < d.lines["trunk"].z0 < narrow.lines["trunk"].z0
    assert wide.lines["trunk"].er_eff > narrow.lines["trunk"].er_eff


COAX = ('[lines.cable]\ngeometry = { kind = "coax", d = "0.81 mm", D = "2.95 mm", er = 2.25 }\n')


def _coax_design(extra_tol=""):
    text = NO_TOLERANCES.replace("[lines.trunk]", COAX + "\n[lines.trunk]", 1)
    text = text.replace('line = "trunk"\nlength = "5 cm"', 'line = "cable"\nlength = "5 cm"', 1)
    return loads(text + extra_tol, source="coax.toml")


def test_coax_line_in_a_design_matches_the_published_value_and_scikit_rf():
    d = _coax_design()
    # docs/references.md B3 (Pozar 2012 Table 2.1; number derived with the exact eta0): 51.6653 ohm
    assert d.lines["cable"].z0 == pytest.approx(51.6653, abs=5e-5)
    assert d.lines["cable"].delay == pytest.approx(1.5 / 299_792_458.0, rel=1e-12)     # B2: sqrt(2.25)/c
    skrf = pytest.importorskip("skrf")
    freq = skrf.Frequency(1, 1, 1, unit="MHz")
    for D in (2.6e-3, 2.95e-3, 3.3e-3):
        ref = skrf.media.Coaxial(frequency=freq, Dint=0.81e-3, Dout=D, epsilon_r=2.25, tan_delta=0.0, sigma=1e30)
        z_ref = complex(np.asarray(ref.z0_characteristic).ravel()[0]).real
        assert d.with_values({"lines.cable.geometry.D": D}).lines["cable"].z0 == pytest.approx(z_ref, rel=1e-9)


def test_coax_tolerance_moves_z0_by_the_log_law():
    # Z0 = eta0/(2 pi sqrt(er)) ln(D/d) (docs/references.md B3): D +10 % adds 60/1.5 * ln(1.1) ohm
    d = _coax_design('[tolerances]\n"lines.cable.geometry.D" = "10%"\n')
    batch = d.with_values({"lines.cable.geometry.D": np.array([2.95e-3, 1.1 * 2.95e-3])})
    z = batch.lines["cable"].z0
    assert z[1] - z[0] == pytest.approx(geometry.ETA0 / (2 * np.pi * 1.5) * np.log(1.1), rel=1e-9)


def test_differential_design_takes_the_differential_impedance():
    text = NO_TOLERANCES.replace('[bus]\n', '[bus]\nsignaling = "differential"\n', 1)
    pair = 'geometry = { kind = "edge_coupled_microstrip", w = "0.2 mm", s = "0.2 mm", h = "0.15 mm", t = "35 um", er = 4.3 }'
    text = text.replace(TRUNK, pair, 1).replace(DROP, pair, 1)
    d = loads(text, source="diff.toml")
    cs = geometry.line("edge_coupled_microstrip", w=0.2e-3, s=0.2e-3, h=0.15e-3, t=35e-6, er=4.3)
    assert d.lines["trunk"].z0 == cs.z_diff == 2 * cs.z_odd
    assert d.lines["trunk"].delay == cs.delay          # the odd (differential) mode's


def test_out_of_range_geometry_is_a_warning_in_the_report_not_a_refusal():
    thick = GEO_TEXT.replace('t = "35 um", er = 4.3 }', 't = "0.3 mm", er = 4.3 }', 1)   # t/w 0.83, t/h 1.5
    d = loads(thick, source="thick.toml")                 # filterwarnings=error: nothing is raised
    rep = check(d, nominal=True)
    assert any("[lines.trunk] geometry" in w and "t/h" in w for w in rep.warnings)
    assert rep.to_json()["warnings"] == rep.warnings
    assert "warnings (results still given" in rep.text()
    assert check(budget.load(GEO_PATH), nominal=True).warnings == []


def test_a_box_corner_outside_the_range_is_warned_too():
    # nominal t/h = 0.95 is inside HJ80's range; the 10 % tolerance on h takes it to 1.06 at a corner
    text = GEO_TEXT.replace('t = "35 um", er = 4.3 }', 't = "0.19 mm", er = 4.3 }', 1)
    rep = check(loads(text, source="corner.toml"), nominal=True)
    assert any("t/h" in w and "variants" in w for w in rep.warnings)


def test_python_constructor_and_view_round_trip():
    d = budget.load(GEO_PATH)
    again = Design(bus=d.bus, edge=d.edge, parts={n: p for n, p in d.parts.items()}, lines=d.lines,
                   segments=d.segments, taps=d.taps, terminations=d.terminations)
    assert again.lines["trunk"].z0 == d.lines["trunk"].z0
    with pytest.raises(DesignError, match=r"\[lines.trunk\] z0: give either geometry or z0"):
        Design(bus=d.bus, edge=d.edge, parts=dict(d.parts), segments=d.segments, taps=d.taps,
               lines={**d.lines, "trunk": LineType(z0="50 ohm", geometry={"kind": "microstrip", **TRUNK_DIMS})})
    built = Design(bus=d.bus, edge=d.edge, parts=dict(d.parts), segments=d.segments, taps=d.taps,
                   lines={**d.lines, "trunk": LineType(geometry={"kind": "microstrip", **TRUNK_DIMS})})
    assert built.lines["trunk"].z0 == d.lines["trunk"].z0


def test_measured_dimension_and_sweep_path():
    d = budget.load(GEO_PATH)
    m = d.with_values({"lines.trunk.geometry.w": "0.4 mm"})
    assert m.lines["trunk"].z0 == geometry.line("microstrip", **{**TRUNK_DIMS, "w": "0.4 mm"}).z0
    with pytest.raises(DesignError, match=r"lines.trunk.geometry.h: must be positive \(got 0, variant 1\)"):
        d.with_values({"lines.trunk.geometry.h": [0.2e-3, 0.0]})


BAD = {
    "geometry-and-z0": (TRUNK + '\nz0 = "50 ohm"', r"\[lines.trunk\] z0: give either geometry"),
    "geometry-and-er_eff": (TRUNK + "\ner_eff = 3.0", r"\[lines.trunk\] er_eff: give either geometry"),
    "missing-dimension": ('geometry = { kind = "microstrip", w = "0.36 mm", t = "35 um", er = 4.3 }',
                          r"\[lines.trunk.geometry\] h: missing key; kind 'microstrip' takes: w, h, t, er"),
    "unknown-kind": ('geometry = { kind = "slotline", w = "1 mm" }',
                     r"\[lines.trunk.geometry\] kind: unknown cross-section kind 'slotline'"),
    "no-kind": ('geometry = { w = "1 mm" }', r"\[lines.trunk.geometry\] kind: missing key"),
    "key-of-another-kind": (TRUNK[:-2] + ', b = "1 mm" }', r"\[lines.trunk.geometry\] b: unknown key"),
    "pair-in-single-ended": ('geometry = { kind = "edge_coupled_stripline", w = "0.2 mm", s = "0.2 mm", '
                             'b = "0.5 mm", t = "0", er = 4 }', r"\[lines.trunk.geometry\] kind: kind 'edge_coupled_stripline' describes a coupled pair"),
    "length-without-unit": (TRUNK.replace('"0.36 mm"', '"0.36"'), r"\[lines.trunk.geometry\] w: '0.36' has no unit"),
    "not-a-length": (TRUNK.replace('"0.36 mm"', '"0.36 ohm"'), r"\[lines.trunk.geometry\] w: '0.36 ohm' is not a length"),
    "negative-width": (TRUNK.replace('"0.36 mm"', '"-0.36 mm"'), r"\[lines.trunk.geometry\] w: must be positive"),
    "er-below-one": (TRUNK.replace("er = 4.3", "er = 0.5"), r"\[lines.trunk.geometry\] er: must be at least 1"),
    "shield-inside-conductor": ('geometry = { kind = "coax", d = "3 mm", D = "1 mm", er = 2.1 }',
                                r"\[lines.trunk.geometry\] D: D \(shield inside diameter\) must exceed d"),
    "strip-thicker-than-spacing": ('geometry = { kind = "stripline", w = "0.2 mm", b = "0.3 mm", t = "0.4 mm", er = 4 }',
                                   r"\[lines.trunk.geometry\] t: t \(strip thickness\) must be less than b"),
    "impedance-not-plausible": ('geometry = { kind = "coax", d = "1 mm", D = "1.0001 mm", er = 2.1 }',
                                r"\[lines.trunk.geometry\] d: this coax geometry gives z0 = 0.00\d+ ohm"),
    "not-a-table": ('geometry = "microstrip"', r"\[lines.trunk.geometry\]: expected a table"),
}


@pytest.mark.parametrize("case", BAD, ids=list(BAD))
def test_bad_geometry_is_refused_naming_file_table_and_key(case):
    new, pattern = BAD[case]
    with pytest.raises(DesignError, match=r"^bad\.toml: " + pattern):
        loads(NO_TOLERANCES.replace(TRUNK, new, 1), source="bad.toml")


def test_a_tolerance_that_breaks_the_geometry_names_the_tolerance():
    text = NO_TOLERANCES.replace(TRUNK, 'geometry = { kind = "stripline", w = "0.2 mm", b = "0.5 mm", '
                                        't = "0.4 mm", er = 4 }', 1)
    text = text.replace("[budget]", '[tolerances]\n"lines.trunk.geometry.t" = "30%"\n\n[budget]', 1)
    with pytest.raises(DesignError, match=r"\[tolerances\] lines.trunk.geometry.t: .*must be less than b"):
        loads(text, source="tol.toml")


def test_c_library_layer_sets_and_batches_geometry_values():
    """bb_set / bb_batch (budget.capi, the layer the C library calls) on a geometry path: z0 and delay
    follow, and the answers equal the Python API's."""
    from budget import capi

    h = capi.open_text(GEO_TEXT, source="rig.toml")
    try:
        assert "lines.trunk.geometry.w" in capi.param_names(h)
        capi.set_value(h, "lines.trunk.geometry.w", 0.4e-3)
        ref = budget.load(GEO_PATH).with_values({"lines.trunk.geometry.w": 0.4e-3})
        assert capi.design_of(h).lines["trunk"].z0 == ref.lines["trunk"].z0
        assert capi.check(h).worst_margin == float(sweep(ref).worst_margin[0])
        w = np.array([[0.33e-3], [0.36e-3], [0.39e-3]])
        margins, passed = capi.batch(h, ["lines.trunk.geometry.w"], w)
        expect = sweep(ref, {"lines.trunk.geometry.w": w[:, 0]}, keep="margin")
        assert np.array_equal(margins, expect.worst_margin) and np.array_equal(passed, expect.passed)
        with pytest.raises(capi.CallFailed) as info:
            capi.set_value(h, "lines.trunk.geometry.h", -1.0)
        assert info.value.status == "BB_ERR_VALUE" and "lines.trunk.geometry.h" in str(info.value)
    finally:
        capi.close(h)


def test_a_variant_gives_the_same_bits_alone_or_in_a_batch():
    d = budget.load(GEO_PATH)
    w = np.random.default_rng(7).uniform(0.32e-3, 0.40e-3, 257)
    h = np.random.default_rng(8).uniform(0.18e-3, 0.22e-3, 257)
    batch = d.with_values({"lines.trunk.geometry.w": w, "lines.trunk.geometry.h": h}).lines["trunk"]
    for i in range(0, 257, 16):
        one = d.with_values({"lines.trunk.geometry.w": float(w[i]), "lines.trunk.geometry.h": float(h[i])})
        assert one.lines["trunk"].z0 == batch.z0[i] and one.lines["trunk"].delay == batch.delay[i]
        assert geometry.line("microstrip", w=w[i], h=h[i], t="35 um", er=4.3).z0 == batch.z0[i]


def test_the_envelope_spans_every_corner_of_the_geometry_box():
    # z0 falls with w and rises with h (HJ80): all-minimum / all-maximum would miss both extremes
    from budget.line_model import envelope_range
    from budget.netlist import tolerance_envelope

    d = budget.load(GEO_PATH)
    z_lo, z_hi, d_lo, d_hi, _, _ = envelope_range(tolerance_envelope(d).lines["trunk"])
    box = d.tolerances
    for w in box["lines.trunk.geometry.w"]:
        for h in box["lines.trunk.geometry.h"]:
            for er in box["lines.trunk.geometry.er"]:
                lt = d.with_values({"lines.trunk.geometry.w": w, "lines.trunk.geometry.h": h,
                                    "lines.trunk.geometry.er": er}).lines["trunk"]
                assert z_lo <= lt.z0 <= z_hi and d_lo <= lt.delay <= d_hi
    narrow_thick = d.with_values({"lines.trunk.geometry.w": box["lines.trunk.geometry.w"][0],
                                  "lines.trunk.geometry.h": box["lines.trunk.geometry.h"][1]}).lines["trunk"].z0
    assert narrow_thick > d.with_values({p: box[p][1] for p in box}).lines["trunk"].z0
