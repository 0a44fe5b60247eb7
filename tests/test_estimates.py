"""Quick estimates (budget.estimates): loaded lines, reflection coefficients, bounce tables.

Check values carry their source; "docs/references.md Xn" is the project's list of published check
values, quoted with the original source.  The loaded-line estimate is also
compared with the transient engine on a densely loaded trunk.
"""
from __future__ import annotations

import math
from fractions import Fraction as F

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import budget
from budget import estimates
from budget.errors import ArgumentError
from budget.estimates import bounce_table, discontinuities, loaded_line, loaded_lines, reflection

from conftest import accuracy_record

INCH = 0.0254
PF = 1e-12


# ---------------------------------------------------------------------------
# (a) loaded line: docs/references.md C1-C4

def test_brief_example_c1():
    # docs/references.md C1 (TI SCBA015A; Johnson & Graham 1993 section 4.4.3.1; numbers derived):
    # 50 ohm, 6.7 ns/m, 5 pF every 20 mm -> C0 134 pF/m, Cd 250 pF/m, factor 1.692829, 29.5363 ohm, 11.3420 ns/m
    ll = loaded_line(50.0, 6.7e-9, 5e-12, 0.020)
    assert ll.c0 == pytest.approx(134e-12, rel=1e-12)
    assert ll.cd == pytest.approx(250e-12, rel=1e-12)
    assert ll.factor == pytest.approx(1.692829, abs=5e-7)
    assert ll.z0_loaded == pytest.approx(29.5363, abs=5e-5)
    assert ll.delay_loaded == pytest.approx(11.3420e-9, abs=5e-14)


def test_ti_scba015a_figure_2():
    # docs/references.md C2 (TI SCBA015A Fig. 2, seen secondhand): L' = 6 nH/cm, C0' = 0.6 pF/cm (100 ohm, 6 ns/m),
    # 20 pF per module every 2 cm.  Recomputed 23.7915 ohm, 25.2190 ns/m; printed 25 ohm (~5 %), 25 ns/m (~1 %).
    z0, delay = math.sqrt(6e-7 / 60e-12), math.sqrt(6e-7 * 60e-12)   # B1: Z0 = sqrt(L/C), t_pd = sqrt(LC)
    assert (z0, delay) == (pytest.approx(100.0, rel=1e-12), pytest.approx(6e-9, rel=1e-12))
    ll = loaded_line(z0, delay, 20e-12, 0.02)
    assert ll.z0_loaded == pytest.approx(23.7915, abs=5e-5)
    assert ll.delay_loaded == pytest.approx(25.2190e-9, abs=5e-14)
    assert ll.z0_loaded == pytest.approx(25.0, rel=0.05)               # as printed
    assert ll.delay_loaded == pytest.approx(25e-9, rel=0.01)


def test_ti_szza016b_backplane():
    # docs/references.md C3 (TI SZZA016B, seen secondhand): Z0 95 ohm, C0 2.40 pF/in, t_pd 230 ps/in; per card
    # 14.3647 pF at 0.94 in (printed 14.36) -> factor 95/35 = 2.714286 (printed 2.71), Z0(eff) 35 ohm.
    # The note's C0 and t_pd disagree by 0.9 % (230/95 = 2.421 pF/in): the delay given here is the one
    # that makes C0 = 2.40 pF/in, and the note's t_pd(eff) uses 230 ps/in times the factor.
    c0 = 2.40e-12 / INCH
    ll = loaded_line(95.0, 95.0 * c0, 14.3647e-12, 0.94 * INCH)
    assert ll.cd == pytest.approx(15.2816e-12 / INCH, rel=1e-4)        # printed 15.28 pF/in
    assert ll.factor == pytest.approx(2.714286, rel=1e-5)
    assert ll.z0_loaded == pytest.approx(35.0, rel=1e-5)
    tpd_eff = 230e-12 * ll.factor                                       # [s/in]
    assert tpd_eff == pytest.approx(624.3e-12, abs=0.05e-12)            # printed 624.3 ps/in
    assert 17.92 * tpd_eff == pytest.approx(11.2e-9, abs=0.05e-9)        # flight, printed 11.2 ns


def test_ti_gtlp_figure_8_and_scea019():
    # docs/references.md C4 (TI GTLP note Fig. 8, seen secondhand): 50 ohm, 4.10 pF/in, 205 ps/in; Ct 10.9625 pF
    # every 0.875 in -> printed Cd 12.53 pF/in, t_pd' 412.85 ps/in, Z0' 24.8 / 24.83 ohm.  With Ct = 10.9625
    # exactly: Cd 12.52857, t_pd' 412.85, Z0' 24.828 -- every printed digit.  (docs/references.md C4's own
    # recomputation, Cd 12.5257 and 412.81, used Ct = 10.96.)
    ll = loaded_line(50.0, 205e-12 / INCH, 10.9625e-12, 0.875 * INCH)
    assert ll.c0 == pytest.approx(4.10e-12 / INCH, rel=1e-12)
    assert ll.cd * INCH == pytest.approx(12.53e-12, abs=5e-15)
    assert ll.delay_loaded * INCH == pytest.approx(412.85e-12, abs=5e-15)
    assert ll.z0_loaded == pytest.approx(24.83, abs=5e-3)
    # docs/references.md C4, TI SCEA019 Q8: 12.0 pF per card at 1 in pitch -> Cd = 472.44 pF/m (printed 472)
    assert loaded_line(50.0, 205e-12 / INCH, 12e-12, INCH).cd == pytest.approx(472.44e-12, abs=5e-15)


@given(z0=st.floats(10.0, 200.0), delay=st.floats(3e-9, 1e-8), c=st.floats(0.0, 2e-11),
       p=st.floats(1e-3, 0.2))
def test_loading_keeps_inductance_and_adds_capacitance(z0, delay, c, p):
    # the loads add shunt C and leave the series L alone: L' = Z0' t_pd' = Z0 t_pd and
    # C' = t_pd'/Z0' = C0 + Cd (docs/references.md B1, C1 Johnson & Graham's form)
    ll = loaded_line(z0, delay, c, p)
    assert ll.z0_loaded * ll.delay_loaded == pytest.approx(z0 * delay, rel=1e-12)
    assert ll.delay_loaded / ll.z0_loaded == pytest.approx(delay / z0 + c / p, rel=1e-12)
    assert ll.z0_loaded <= z0 and ll.delay_loaded >= delay


def _dense_trunk(n, rs, rt=None, stub=None):
    """n taps of a 5 pF transceiver every 20 mm on a 50 ohm, 6.7 ns/m trunk; optional far-end termination."""
    text = f"""
[bus]
name = "dense trunk (test)"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.xcvr]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "{rs!r} ohm"
r_low = "{rs!r} ohm"
c_pin = "5 pF"
vih = "2.0 V"
vil = "0.8 V"
[lines.trunk]
z0 = "50 ohm"
delay = "6.7 ns/m"
[lines.drop]
z0 = "60 ohm"
delay = "6.7 ns/m"
"""
    for i in range(n - 1):
        text += f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "trunk"\nlength = "20 mm"\n'
    for i in range(n):
        text += f'[[tap]]\nname = "U{i}"\nnode = "n{i}"\npart = "xcvr"\n'
        if stub:
            text += f'stub = {{ line = "drop", length = "{stub}" }}\n'
    if rt is not None:
        text += f'[[termination]]\nnode = "n{n - 1}"\ntype = "parallel"\nr = "{rt!r} ohm"\nv = "0 V"\n'
    return budget.loads(text, source="dense_trunk.toml")


def test_loaded_lines_of_a_uniform_trunk_is_the_textbook_estimate():
    report = loaded_lines(_dense_trunk(16, 30.0))
    assert len(report.segments) == 15 and [ln.name for ln in report.lines] == ["trunk"]
    book = loaded_line(50.0, 6.7e-9, 5e-12, 0.020)          # docs/references.md C1
    for seg in (*report.segments, *report.lines):
        assert seg.loaded.z0_loaded == pytest.approx(book.z0_loaded, rel=1e-12)
        assert seg.loaded.delay_loaded == pytest.approx(book.delay_loaded, rel=1e-12)
    assert report.lines[0].flight == pytest.approx(0.3 * book.delay_loaded, rel=1e-12)
    assert report.lines[0].section_fraction == pytest.approx(0.02 * book.delay_loaded / 1e-9)
    assert report.segments[0].short_enough is False     # 227 ps per section > 1 ns / 6 (docs/references.md C5(a))


def test_stub_capacitance_counts_as_load():
    # a 10 mm, 60 ohm, 6.7 ns/m stub adds its line capacitance 0.01 * 6.7e-9 / 60 = 1.1167 pF (docs/references.md B1)
    design = _dense_trunk(4, 30.0, stub="10 mm")
    ctap = estimates.tap_capacitance(design)
    assert ctap["U1"] == pytest.approx(5e-12 + 0.01 * 6.7e-9 / 60.0, rel=1e-12)
    assert loaded_lines(design).lines[0].loaded.cd == pytest.approx(ctap["U1"] / 0.02, rel=1e-12)


def _crossing(t, v, level):
    i = int(np.argmax(v >= level))
    return t[i - 1] + (level - v[i - 1]) * (t[i] - t[i - 1]) / (v[i] - v[i - 1])


def test_loaded_line_estimate_against_the_engine():
    # 16 taps at 20 mm (docs/references.md C1's line), driver and far-end termination matched to the loaded
    # impedance.  Tolerance 3 % on the flight: the estimate is the continuum (low-frequency) limit of
    # the periodic loading; each 20 mm section is 227 ps against a 1 ns edge, so the ladder slows and
    # ripples the edge and moves its 50 % crossing by a few per cent of the flight at most.
    est = loaded_line(50.0, 6.7e-9, 5e-12, 0.020)
    w = budget.simulate(_dense_trunk(16, est.z0_loaded, est.z0_loaded), "U0", "rise")
    near = _crossing(w.t, w["U0"], 0.5 * w.v_high[0])
    far = _crossing(w.t, w["U15"], 0.5 * w.v_high[15])
    flight = loaded_lines(_dense_trunk(16, 30.0)).lines[0].flight          # 15 sections = 0.3 m
    err = (far - near) / flight - 1
    accuracy_record(f"loaded-line flight estimate vs engine (16 x 5 pF at 20 mm): {err:+.2%} (tolerance 3 %)")
    assert abs(err) < 0.03
    # the unloaded line would be 41 % early: the check can tell the two apart
    assert abs((far - near) / (0.3 * 6.7e-9) - 1) > 0.3


def test_loaded_impedance_sets_the_launched_step():
    # Far end open, strong driver (20 ohm): the first step at the driver's pin is the divider
    # 3.3 V * Z0'/(Z0' + 20) (docs/references.md A3 with Z0' from C1) = 1.9676 V; the unloaded 50 ohm would give 2.357 V.
    # Read as the mean over 1..6 ns after the 50 % crossing (before the far-end echo at 2 x 3.4 ns);
    # tolerance 2 % (ripple of the discrete loads around the continuum value).
    est = loaded_line(50.0, 6.7e-9, 5e-12, 0.020)
    w = budget.simulate(_dense_trunk(16, 20.0), "U0", "rise", t_stop=12e-9)
    expected = 3.3 * est.z0_loaded / (est.z0_loaded + 20.0)
    t50 = _crossing(w.t, w["U0"], 0.5 * expected)
    window = (w.t > t50 + 1e-9) & (w.t < t50 + 6e-9)
    err = w["U0"][window].mean() / expected - 1
    accuracy_record(f"loaded-line launched step vs engine: {err:+.2%} (tolerance 2 %)")
    assert abs(err) < 0.02
    assert abs(w["U0"][window].mean() / (3.3 * 50 / 70) - 1) > 0.1


# ---------------------------------------------------------------------------
# (b) reflection coefficients at discontinuities: docs/references.md A1, A2, A8, A9, A10

@pytest.mark.parametrize("z0, zl, gamma", [
    (50, 65, 15 / 115),     # docs/references.md A1 (Blood 1988 ch. 7 prints +0.13)
    (50, 100, 1 / 3), (25, 100, 0.6), (50, 5, -45 / 55), (50, 25, -1 / 3),   # A1
    (50, math.inf, 1.0), (50, 0.0, -1.0), (50, 50, 0.0),                    # open, short, matched
])
def test_reflection_coefficient(z0, zl, gamma):
    assert reflection(z0, zl) == pytest.approx(gamma, rel=1e-12, abs=1e-15)


@given(z_line=st.floats(1.0, 500.0), z_load=st.floats(0.1, 1e5))
def test_power_balance(z_line, z_load):
    # docs/references.md A2: reflected plus transmitted power equals the incident power, Gamma^2 + T^2 Z0/ZL = 1
    g = reflection(z_line, z_load)
    assert g * g + (1 + g) ** 2 * z_line / z_load == pytest.approx(1.0, rel=1e-9)
    assert -1.0 <= g <= 1.0


def _tbus(z_stub, *, term="", probe_c="0 pF", driver_r="5 ohm", far=""):
    """Driver D on node a -- 10 cm of 50 ohm -- node m (tap R1 on a stub of z_stub) -- 10 cm -- node b (tap R2)."""
    return budget.loads(f"""
[bus]
name = "tee (test)"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.drv]
role = "driver"
v_high = "1 V"
v_low = "0 V"
r_high = "{driver_r}"
r_low = "{driver_r}"
c_pin = "0 pF"
[parts.rx]
role = "receiver"
c_pin = "{probe_c}"
vih = "0.7 V"
vil = "0.3 V"
[lines.trunk]
z0 = "50 ohm"
delay = "5 ns/m"
[lines.stub]
z0 = "{z_stub!r} ohm"
delay = "5 ns/m"
[[segment]]
from = "a"
to = "m"
line = "trunk"
length = "10 cm"
[[segment]]
from = "m"
to = "b"
line = "trunk"
length = "10 cm"
[[tap]]
name = "D"
node = "a"
part = "drv"
[[tap]]
name = "R1"
node = "m"
part = "rx"
stub = {{ line = "stub", length = "2 cm" }}
[[tap]]
name = "R2"
node = "b"
part = "rx"
{far}
{term}
""", source="tee.toml")


def _find(records, where, on_prefix):
    hits = [r for r in records if r.where == where and r.arriving_on.startswith(on_prefix)]
    assert len(hits) == 1, (where, on_prefix, records)
    return hits[0]


@pytest.mark.parametrize("z_stub, gamma, trans, gamma_stub", [
    (50.0, -1 / 3, 2 / 3, -1 / 3),    # docs/references.md A9 (derived from A1): Z0 = Zs = 50
    (75.0, -0.25, 0.75, -0.5),        # A9: Zs = 75 -> Zpar 30; from the stub: (25 - 75)/(25 + 75)
    (100.0, -0.2, 0.8, -0.6),         # A9: Zs = 100
])
def test_mid_trunk_tap(z_stub, gamma, trans, gamma_stub):
    recs = discontinuities(_tbus(z_stub))
    on_trunk = _find(recs, "node m", "segment 0")
    assert on_trunk.gamma == pytest.approx(gamma, rel=1e-12)
    assert on_trunk.transmission == pytest.approx(trans, rel=1e-12)
    assert on_trunk.z_load == pytest.approx(50.0 * z_stub / (50.0 + z_stub), rel=1e-12)
    assert _find(recs, "node m", "stub R1").gamma == pytest.approx(gamma_stub, rel=1e-12)


def test_line_ends_terminations_and_drivers():
    # far end b: R2 has no stub, no r_in, c_pin 0 -> open, Gamma = +1, T = 2 (docs/references.md A1)
    recs = discontinuities(_tbus(50.0))
    end = _find(recs, "node b", "segment 1")
    assert (end.gamma, end.transmission, end.z_load) == (1.0, 2.0, math.inf)
    assert end.to_json()["z_load"] is None
    # the device end of R1's stub: an open pin (c_pin open under the resistive rule)
    assert _find(recs, "device end of stub R1", "stub R1").gamma == 1.0
    # the driver D on node a: a wave coming back sees 5 ohm -> -45/55 (docs/references.md A1, handbook -0.82)
    assert _find(recs, "driver D (high) at node a", "segment 0").gamma == pytest.approx(-45 / 55, rel=1e-12)
    # parallel 65 ohm at b: (65 - 50)/(65 + 50) (docs/references.md A1, Blood 1988: +0.13)
    term = '[[termination]]\nnode = "b"\ntype = "parallel"\nr = "65 ohm"\nv = "0.5 V"\n'
    assert _find(discontinuities(_tbus(50.0, term=term)), "node b", "segment 1").gamma == \
        pytest.approx(15 / 115, rel=1e-12)
    # Thevenin 100/100 = 50 ohm and RC (R = 50 ohm, C a short during the edge): matched, Gamma = 0
    for t in ('type = "thevenin"\nr_up = "100 ohm"\nr_down = "100 ohm"\nv_up = "1 V"',
              'type = "rc"\nr = "50 ohm"\nc = "100 pF"'):
        term = f'[[termination]]\nnode = "b"\n{t}\n'
        assert _find(discontinuities(_tbus(50.0, term=term)), "node b", "segment 1").gamma == pytest.approx(0.0,
                                                                                                        abs=1e-15)


def test_series_termination_adds_to_the_device_and_the_driver():
    # a 45 ohm series resistor at the driver (a series-terminated source): 5 + 45 = 50 ohm -> Gamma = 0
    term = '[[termination]]\ntype = "series"\ntap = "D"\nr = "45 ohm"\n'
    recs = discontinuities(_tbus(50.0, term=term))
    assert _find(recs, "driver D (low) at node a", "segment 0").gamma == pytest.approx(0.0, abs=1e-15)


def test_pin_capacitance_time_constant():
    # docs/references.md A10 (derived; Bogatin 2009 rule from memory): a 2 pF pin on a matched 50 ohm through line
    # sees Z0/2 -> tau = 50 ps.  Here node m carries R1 directly (no stub) between two 50 ohm segments;
    # the wave arriving on segment 0 sees segment 1 (50 ohm) and the pin.
    design = budget.loads(_TEE_NO_STUB, source="through.toml")
    rec = _find(discontinuities(design), "node m", "segment 0")
    assert rec.tau == pytest.approx(50e-12, rel=1e-12)
    assert rec.gamma == pytest.approx(0.0, abs=1e-15)     # the capacitor is open under the resistive rule


_TEE_NO_STUB = """
[bus]
name = "through line (test)"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.drv]
role = "driver"
v_high = "1 V"
v_low = "0 V"
r_high = "50 ohm"
r_low = "50 ohm"
c_pin = "0 pF"
[parts.rx]
role = "receiver"
c_pin = "2 pF"
vih = "0.7 V"
vil = "0.3 V"
[lines.trunk]
z0 = "50 ohm"
delay = "5 ns/m"
[[segment]]
from = "a"
to = "m"
line = "trunk"
length = "10 cm"
[[segment]]
from = "m"
to = "b"
line = "trunk"
length = "10 cm"
[[tap]]
name = "D"
node = "a"
part = "drv"
[[tap]]
name = "R1"
node = "m"
part = "rx"
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "0 V"
"""


@pytest.mark.parametrize("name", budget.EXAMPLES)
def test_bundled_examples_are_passive(name):
    # every discontinuity of a passive network reflects at most the incident wave, and T = 1 + Gamma
    recs = discontinuities(budget.example(name))
    assert recs
    for r in recs:
        assert -1.0 <= r.gamma <= 1.0 and r.transmission == pytest.approx(1.0 + r.gamma)
        assert r.tau >= 0.0


def test_star_split():
    # docs/references.md A8: one 50 ohm line into 2 x 50 ohm -> Z 25, Gamma -1/3, T 2/3
    text = _TEE_NO_STUB.replace('[[tap]]\nname = "R1"\nnode = "m"\npart = "rx"\n', "") + """
[[segment]]
from = "m"
to = "c"
line = "trunk"
length = "5 cm"
[[tap]]
name = "R1"
node = "c"
part = "rx"
"""
    rec = _find(discontinuities(budget.loads(text, source="star.toml")), "node m", "segment 0")
    assert rec.gamma == pytest.approx(-1 / 3, rel=1e-12) and rec.transmission == pytest.approx(2 / 3, rel=1e-12)


# ---------------------------------------------------------------------------
# (c) bounce tables: docs/references.md A4-A7

def test_lattice_a4_exact():
    # docs/references.md A4 (lattice method, Blood 1988 ch. 7; numbers derived): Rs 25, Z0 50, open end, 1 V
    t = bounce_table(25, 50, None, 1, 6, exact=True)
    assert (t.gamma_source, t.gamma_load, t.v_launch, t.v_final) == (F(-1, 3), 1, F(2, 3), 1)
    assert t.at("load") == [F(4, 3), F(8, 9), F(28, 27), F(80, 81), F(244, 243), F(728, 729)]
    assert t.at("source") == [F(2, 3), F(10, 9), F(26, 27), F(82, 81), F(242, 243), F(730, 729), F(2186, 2187)]
    assert [r.t for r in t.rows if r.end == "load"] == [1, 3, 5, 7, 9, 11]


def test_lattice_a5_exact_and_float():
    # docs/references.md A5: Rs 10, Z0 50, RL 200, 1 V step
    t = bounce_table(10, 50, 200, 1, 6, exact=True)
    assert (t.gamma_source, t.gamma_load, t.v_launch, t.v_final) == (F(-2, 3), F(3, 5), F(5, 6), F(20, 21))
    assert t.at("load") == [F(4, 3), F(4, 5), F(76, 75), F(116, 125), F(1804, 1875), F(2964, 3125)]
    assert t.at("source") == [F(5, 6), 1, F(14, 15), F(24, 25), F(356, 375), F(596, 625), F(8924, 9375)]
    f = bounce_table(10.0, 50.0, 200.0, 1.0, 6)
    assert f.at("load") == pytest.approx([float(x) for x in t.at("load")], rel=1e-14)


@pytest.mark.parametrize("zr, expected", [
    (90, [180, 90, 135, 112.5, 123.75]),   # docs/references.md A6: Stevenson 1982 Example 5.6 (seen secondhand), Zs = 0
    (10, [60, 90, 105, 112.5, 116.25]),
])
def test_lattice_stevenson_example_5_6(zr, expected):
    t = bounce_table(0, 30, zr, 120, 5, exact=True)
    assert t.at("load") == expected and t.v_final == 120


def test_lattice_blood_example_2_driver_cuts_off():
    # docs/references.md A7 (Blood 1988 ch. 7 "Example 2", seen secondhand): V'OH 1.22 V, Ro 5, Z0 50, RL 100 to 0 V.
    # The output cuts off (open source); the launched wave is -Idc Z0, Idc = 1.22/(5 + 100) = 11.619 mA.
    idc = 1.22 / 105
    assert idc == pytest.approx(11.6e-3, abs=0.05e-3)                   # printed 11.6 mA
    t = bounce_table(None, 50, 100, launch=-idc * 50, v_initial=1.22 * 100 / 105, n=3)
    assert -t.v_launch == pytest.approx(0.58, abs=0.005)                 # printed 0.58 V
    assert -t.rows[1].reflected == pytest.approx(0.193, abs=0.001)        # printed 193 mV (0.19365: truncated)
    assert t.at("load")[0] == pytest.approx(0.387, abs=0.0005)            # printed 0.387 V
    assert t.at("load")[0] - 0.305 == pytest.approx(0.082, abs=0.0005)    # undershoot, printed 82 mV
    assert t.v_final == pytest.approx(0.0, abs=1e-12)                     # driver off: RL pulls to 0 V


def test_bounce_table_arrivals_are_bounded():
    """n is refused above budget.limits.MAX_BOUNCES at once (1e11 arrivals grew memory without bound)."""
    from budget import limits
    assert len(bounce_table(25.0, 50.0, 75.0, 1.0, limits.MAX_BOUNCES).rows) == 2 * limits.MAX_BOUNCES + 1
    with pytest.raises(ArgumentError, match="MAX_BOUNCES"):
        bounce_table(25.0, 50.0, 75.0, 1.0, 10 ** 11)


def test_bounce_table_text():
    text = bounce_table(25, 50, None, 1, 2, exact=True).text()
    assert "gamma_source = -1/3, gamma_load = +1" in text and "final = +1 V" in text
    rows = text.splitlines()[2:]
    assert rows[1].split() == ["1", "load", "2/3", "2/3", "4/3"]
    assert rows[2].split() == ["2", "source", "2/3", "-2/9", "10/9"]
    with pytest.raises(ArgumentError, match="end must be"):
        bounce_table(25, 50, None).at("middle")


@given(rs=st.integers(0, 200), z0=st.integers(10, 150), rl=st.integers(1, 10_000))
def test_lattice_converges_to_the_dc_divider(rs, z0, rl):
    # DC convergence: the load voltage tends to Vs RL/(Rs + RL), and after k + 1 arrivals it is
    # exactly V_final (1 - (Gs Gl)^(k+1)) (docs/references.md A4 closed form, exact rationals)
    t = bounce_table(rs, z0, rl, 1, 12, exact=True)
    final = F(rl, rs + rl)
    assert t.v_final == final
    k = t.gamma_source * t.gamma_load
    assert t.at("load") == [final * (1 - k ** (i + 1)) for i in range(12)]


INVALID = [
    ("loaded-zero-z0", lambda: loaded_line(0, 6.7e-9, 5e-12, 0.02), "z0 must be a positive finite number"),
    ("loaded-negative-c", lambda: loaded_line(50, 6.7e-9, -1e-12, 0.02), "c_load must be a non-negative"),
    ("loaded-zero-spacing", lambda: loaded_line(50, 6.7e-9, 5e-12, 0), "spacing must be a positive"),
    ("loaded-string", lambda: loaded_line("50 ohm", 6.7e-9, 5e-12, 0.02), "z0 must be a number"),
    ("bounce-open-source", lambda: bounce_table(None, 50, 100), "an open source (rs = inf) launches nothing"),
    ("bounce-negative-rl", lambda: bounce_table(10, 50, -5), "rl must be a non-negative finite resistance"),
    ("bounce-zero-z0", lambda: bounce_table(10, 0, 50), "z0 must be a positive finite resistance"),
    ("bounce-open-z0", lambda: bounce_table(10, math.inf, 50), "z0 cannot be open"),
    ("bounce-bad-n", lambda: bounce_table(10, 50, 50, n=0), "n must be a whole number >= 1"),
    ("bounce-exact-float", lambda: bounce_table(10.5, 50, 50, exact=True), "exact=True needs int or Fraction"),
    ("bounce-nan-step", lambda: bounce_table(10, 50, 50, float("nan")), "v_step must be a finite number"),
]


@pytest.mark.parametrize("call, message", [c[1:] for c in INVALID], ids=[c[0] for c in INVALID])
def test_invalid_input(call, message):
    with pytest.raises(ArgumentError) as info:
        call()
    assert message in str(info.value)


def test_batch_design_is_rejected():
    design = _dense_trunk(3, 30.0).with_values({"lines.trunk.z0": np.array([45.0, 55.0])})
    with pytest.raises(ArgumentError, match="scalar values"):
        loaded_lines(design)
    with pytest.raises(ArgumentError, match="scalar values"):
        discontinuities(design)


# ---------------------------------------------------------------------------
# `busbudget estimate`

def test_cli_estimate_text(capsys):
    from budget.cli import main

    code = main(["estimate", "example:backplane"])
    out, err = capsys.readouterr()
    assert code == 0 and err == ""
    assert "Loaded lines" in out and "Reflection coefficients" in out and "not a simulation" in out
    row = next(ln for ln in out.splitlines() if ln.strip().startswith("line backplane"))
    expected = loaded_lines(budget.example("backplane")).lines[0]
    assert float(row.split()[6]) == pytest.approx(expected.loaded.z0_loaded, abs=0.05)   # Z0' column [ohm]


def test_cli_estimate_json(capsys):
    import json

    from budget.cli import main

    code = main(["estimate", "example:fieldbus", "--json"])
    out, _ = capsys.readouterr()
    assert code == 0
    doc = json.loads(out)
    design = budget.example("fieldbus")
    assert doc["schema"] == "busbudget.estimate/1" and doc["design"] == design.bus.name
    recs = discontinuities(design)
    assert [d["gamma"] for d in doc["discontinuities"]] == pytest.approx([r.gamma for r in recs], rel=1e-12)
    assert doc["loaded_lines"]["lines"][0]["z0_loaded"] == pytest.approx(
        loaded_lines(design).lines[0].loaded.z0_loaded, rel=1e-12)


def test_cli_estimate_bad_design_exits_2(capsys, tmp_path):
    from budget.cli import main

    bad = tmp_path / "bad.toml"
    bad.write_text("[bus]\nname = 'x'\n")
    code = main(["estimate", str(bad)])
    out, err = capsys.readouterr()
    assert code == 2 and out == "" and "bad.toml" in err


def test_junction_coefficient_against_the_engine():
    # A matched 50 ohm driver, 10 cm of trunk (0.5 ns), a tee with a 75 ohm, 10 cm open stub and 10 cm more
    # trunk to a matched end.  The wave reflected at the tee comes back to the driver at 1 ns and moves its pin
    # from V1 = 0.5 V to V1 (1 + gamma) (the matched source absorbs it); the echo of the stub's open end
    # arrives only 1 ns later.  gamma from discontinuities(): -0.25 (docs/references.md A9).  Tolerance 0.5 % of the step
    # (the engine's plateau accuracy, tests/test_closed_forms.py).
    text = _TEE_NO_STUB.replace('rise = "1 ns"\nfall = "1 ns"', 'rise = "10 ps"\nfall = "10 ps"') \
        .replace('[bus]\nname = "through line (test)"', '[bus]\nname = "tee (test)"\ndt = "1 ps"\nt_stop = "3 ns"') \
        .replace('c_pin = "2 pF"', 'c_pin = "0 pF"') + """
[lines.spur]
z0 = "75 ohm"
delay = "5 ns/m"
[[tap]]
name = "S"
node = "m"
part = "rx"
stub = { line = "spur", length = "10 cm" }
"""
    design = budget.loads(text, source="tee_engine.toml")
    rec = _find(discontinuities(design), "node m", "segment 0")
    assert rec.gamma == pytest.approx(-0.25, rel=1e-12)          # 50 || 75 = 30 ohm (R1's pin is open)
    w = budget.simulate(design, "D", "rise")
    v = w["D"]
    first = v[(w.t > 0.5e-9) & (w.t < 0.9e-9)].mean()
    echo = v[(w.t > 1.1e-9) & (w.t < 1.9e-9)].mean()
    assert first == pytest.approx(0.5, abs=0.0025)
    err = echo - 0.5 * (1 + rec.gamma)
    accuracy_record(f"junction gamma vs engine (tee, 50 | 75 ohm): {err / 0.5:+.3%} of the step (tolerance 0.5 %)")
    assert abs(err) < 0.0025


def test_cli_bounce(capsys):
    import json

    from budget.cli import main

    assert main(["bounce", "25 ohm", "50", "open", "-n", "2", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    exact = bounce_table(25, 50, None, 1, 2, exact=True)          # docs/references.md A4
    assert doc["schema"] == "busbudget.bounce/1"
    assert [r["voltage"] for r in doc["rows"]] == pytest.approx([float(r.voltage) for r in exact.rows], rel=1e-12)
    assert main(["bounce", "0", "30", "90", "--step", "120 V", "-n", "5"]) == 0     # docs/references.md A6
    out = capsys.readouterr().out
    loads = [float(ln.split()[-1]) for ln in out.splitlines()[2:] if ln.split()[1] == "load"]
    assert loads == pytest.approx([180, 90, 135, 112.5, 123.75], rel=1e-12)


@pytest.mark.parametrize("argv, message", [
    (["bounce", "10", "open", "50"], "bounce: Z0: cannot read 'open'"),
    (["bounce", "10", "50", "-5"], "rl must be a non-negative finite resistance"),
    (["bounce", "10 V", "50", "50"], "bounce: RS: '10 V' is not a resistance"),
    (["bounce", "10", "50", "50", "--step", "3 ohm"], "bounce: --step: '3 ohm' is not a voltage"),
], ids=["open-z0", "negative-load", "wrong-unit", "step-unit"])
def test_cli_bounce_bad_input_exits_2(capsys, argv, message):
    from budget.cli import main

    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert out == "" and message in err
