"""Unit tests of budget.line_model: how a line becomes elements, and the time-step / window policy."""
from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

import budget
from budget import line_model as lm
from budget.edges import EDGES, FALL, RISE, ramp_time
from budget.errors import DesignError


def near(x, rel=1e-12):
    """pytest.approx without its absolute tolerance (1e-12 would swallow picoseconds and picofarads)."""
    return pytest.approx(x, rel=rel, abs=0)


class Recorder:
    """A netlist builder that only records what model_line adds (values as floats or arrays)."""

    def __init__(self, n_nodes=2):
        self.names = [f"n{i}" for i in range(n_nodes)]
        self.lines, self.res, self.caps, self.inds = [], [], [], []

    def node(self, name):
        self.names.append(name)
        return len(self.names) - 1

    def line(self, a, b, z0, td):
        self.lines.append((a, b, z0, td))

    def r(self, a, b, r):
        self.res.append((a, b, r))

    def c(self, a, b, c):
        self.caps.append((a, b, c))

    def l(self, a, b, l):  # noqa: E743
        self.inds.append((a, b, l))


def line_type(z0=50.0, delay=6.7e-9, r_dc=0.0):
    """z0 [ohm], delay [s/m], r_dc [ohm/m]."""
    return SimpleNamespace(z0=z0, delay=delay, r_dc=r_dc)


def model(lt, length, dt, t_ramp=1e-9):
    out = Recorder()
    notes = lm.model_line(out, 0, 1, lt, length, lm.envelope_range(lt), length, dt, t_ramp, "test line",
                          source="<t>", table="lines.t")
    return out, notes


def test_edge_names_are_the_contract_strings():
    # docs/design-file.md: the design file and the JSON name the edges "rise" and "fall"
    assert (RISE, FALL) == ("rise", "fall") and EDGES == (RISE, FALL)


def test_ramp_time_is_the_10_90_time_over_0_8():
    # docs/references.md D3 (linear ramp geometry, common practice): 1 ns 10-90 -> 1.25 ns 0-100
    d = budget.example("short-bus")
    assert float(ramp_time(d, RISE)) == near(float(d.edge.rise) * 1.25, rel=1e-15)
    assert float(ramp_time(d, FALL)) == near(float(d.edge.fall) * 1.25, rel=1e-15)


@pytest.mark.parametrize("td_min, r_max, dt, kind", [
    (10e-12, 0.0, 20e-12, lm.LUMPED),       # shorter than the step: lumped, lossless or not
    (10e-12, 1.0, 20e-12, lm.LUMPED),
    (20e-12, 0.0, 20e-12, lm.LOSSLESS),     # exactly one step: a line
    (1e-9, 0.0, 20e-12, lm.LOSSLESS),
    (1e-9, 0.5, 20e-12, lm.SECTIONS),
], ids=["short", "short-lossy", "one-step", "long", "long-lossy"])
def test_line_kind(td_min, r_max, dt, kind):
    assert lm.line_kind(td_min, r_max, dt) == kind


@pytest.mark.parametrize("r_max, z0, td_min, dt, expect", [
    (5.0, 50.0, 1e-9, 10e-12, (10, 10)),     # R/z0 = 0.1 -> 0.1 / 0.01 = 10 sections wanted and granted
    (5.0, 50.0, 1e-9, 200e-12, (5, 10)),     # only 5 steps of delay: 5 sections
    (100.0, 50.0, 10e-9, 1e-12, (64, 200)),  # capped at MAX_LOSS_SECTIONS
    (0.01, 50.0, 1e-9, 10e-12, (1, 1)),      # tiny loss: one section
], ids=["wanted", "step-limited", "capped", "one"])
def test_loss_sections(r_max, z0, td_min, dt, expect):
    assert lm.loss_sections(r_max, z0, td_min, dt) == expect


def test_lossless_line_is_one_moc_section():
    out, notes = model(line_type(), 0.15, 10e-12)
    assert out.lines == [(0, 1, 50.0, near(6.7e-9 * 0.15, rel=1e-15))]
    assert not (out.res or out.caps or out.inds or notes)


def test_short_line_is_a_lumped_pi():
    # 1 mm of 50 ohm, 6.7 ns/m: TD = 6.7 ps < dt = 10 ps.
    # docs/references.md B1 (C = t_pd / Z0, L = t_pd Z0): C = 134 fF in two halves, L = 335 pH.
    out, notes = model(line_type(), 1e-3, 10e-12)
    assert not out.lines and not out.res
    assert [(a, b) for a, b, _ in out.caps] == [(0, -1), (1, -1)]
    for _, _, c in out.caps:
        assert c == near(134e-15 / 2, rel=1e-12)
    assert [(a, b) for a, b, _ in out.inds] == [(0, 1)]
    assert out.inds[0][2] == near(335e-12, rel=1e-12)
    assert len(notes) == 1 and "lumped pi" in notes[0] and "test line" in notes[0]


def test_short_lossy_line_puts_r_in_series_with_l():
    out, _ = model(line_type(r_dc=10.0), 1e-3, 10e-12)
    (a, mid, r), = out.res
    (m2, b, _), = out.inds
    assert (a, b) == (0, 1) and mid == m2 == 2 and r == near(10.0 * 1e-3)
    assert out.names[2] == "test line:mid"


def test_lossy_line_sections_split_r_and_td():
    # 20 cm of 50 ohm, 6.7 ns/m, 20 ohm/m: R = 4 ohm, TD = 1.34 ns; R/z0/0.01 = 8 sections.
    lt = line_type(r_dc=20.0)
    out, notes = model(lt, 0.2, 10e-12)
    n = 8
    assert len(out.lines) == n and len(out.res) == n + 1 and not notes
    rs = [r for _, _, r in out.res]
    assert rs[0] == near(4.0 / n / 2) and rs[-1] == near(4.0 / n / 2)
    assert all(r == near(4.0 / n) for r in rs[1:-1])
    assert sum(rs) == near(4.0, rel=1e-12)
    assert sum(td for *_, td in out.lines) == near(1.34e-9, rel=1e-12)
    # the chain runs a -> R -> line -> R -> ... -> b without a gap
    chain = [0]
    for (ra, rb, _), (la, lb, _, _) in zip(out.res, out.lines):
        assert ra == chain[-1]
        assert la == rb
        chain.append(lb)
    assert out.res[-1][0] == chain[-1] and out.res[-1][1] == 1


def test_too_few_sections_are_noted():
    # 2 cm at 6.7 ns/m = 134 ps with dt 50 ps: 2 sections, 10 wanted (R/z0 = 0.1)
    out, notes = model(line_type(r_dc=250.0), 0.02, 50e-12)
    assert len(out.lines) == 2 and len(notes) == 1 and "2 sections" in notes[0]


def test_values_over_variants_pass_through():
    lt = line_type(z0=np.array([45.0, 55.0]))
    out, _ = model(lt, np.array([0.1, 0.12]), 10e-12)
    (_, _, z0, td), = out.lines
    np.testing.assert_array_equal(z0, [45.0, 55.0])
    np.testing.assert_allclose(td, [0.67e-9, 0.804e-9], rtol=1e-14)


def test_loss_zero_in_some_variants_is_refused_naming_the_key():
    lt = line_type(r_dc=np.array([0.0, 5.0]))
    with pytest.raises(DesignError, match="r_dc") as err:
        model(lt, 0.2, 10e-12)
    assert isinstance(err.value, ValueError) and "lines.t" in str(err.value)


BUS = """
[bus]
name = "line model test bus"
{extra}
[edge]
rise = "1 ns"
fall = "2 ns"
[parts.x]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "30 ohm"
r_low = "30 ohm"
c_pin = "2 pF"
{pkg}
vih = "2 V"
vil = "0.8 V"
[lines.l]
z0 = "50 ohm"
delay = "5 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l"
length = "{length}"
[[tap]]
name = "U1"
node = "a"
part = "x"
[[tap]]
name = "U2"
node = "b"
part = "x"
{term}
"""


def bus(length="10 cm", pkg="", extra="", term=""):
    return budget.loads(BUS.format(length=length, pkg=pkg, extra=extra, term=term))


def test_choose_dt_resolves_the_ramp():
    # 1 ns 10-90 -> 1.25 ns ramp (docs/references.md D3) / STEPS_PER_RAMP
    assert lm.choose_dt(bus(), RISE) == near(1.25e-9 / lm.STEPS_PER_RAMP, rel=1e-14)
    assert lm.choose_dt(bus(), FALL) == near(2.5e-9 / lm.STEPS_PER_RAMP, rel=1e-14)


def test_choose_dt_resolves_the_package_resonance():
    # 2 nH with 2 pF: period 2 pi sqrt(LC) = 0.397 ns, / 8 = 49.7 ps (78.1 ps from the ramp otherwise)
    dt = lm.choose_dt(bus(pkg='l_pkg = "2 nH"'), RISE)
    assert dt == near(2 * math.pi * math.sqrt(2e-9 * 2e-12) / lm.STEPS_PER_LC_PERIOD, rel=1e-12)
    assert dt < 1.25e-9 / lm.STEPS_PER_RAMP


def test_choose_dt_shortens_to_a_line_it_must_not_lump():
    # 5 mm at 5 ns/m = 25 ps: between ramp/128 (9.8 ps) and ramp/16 (78 ps), so dt = TD
    assert lm.choose_dt(bus(length="5 mm"), RISE) == near(25e-12, rel=1e-12)
    # 1 mm = 5 ps < ramp/128: may be lumped, the step stays
    assert lm.choose_dt(bus(length="1 mm"), RISE) == near(1.25e-9 / lm.STEPS_PER_RAMP, rel=1e-14)


def test_choose_dt_takes_the_design_step():
    assert lm.choose_dt(bus(extra='dt = "3 ps"'), RISE) == near(3e-12)


def test_line_delays():
    assert lm.line_delays(bus(length="10 cm")) == [near(0.5e-9, rel=1e-12)]


def test_default_t_stop():
    # 2 ramps + 12 x 0.5 ns of line = 2.5 + 6 ns = 8.5 ns < the 10 ns floor
    assert lm.default_t_stop(bus(), RISE) == near(10e-9)
    # 1 m: 2.5 ns + 12 x 5 ns = 62.5 ns; with an RC termination of 50 ohm x 100 pF: + 10 x 5 ns
    assert lm.default_t_stop(bus(length="1 m"), RISE) == near(62.5e-9, rel=1e-12)
    rc = '[[termination]]\nnode = "b"\ntype = "rc"\nr = "50 ohm"\nc = "100 pF"\n'
    assert lm.default_t_stop(bus(length="1 m", term=rc), RISE) == near(112.5e-9, rel=1e-12)


def test_netlist_keeps_reexporting_the_policy():
    from budget import netlist
    for name in ("EDGES", "RISE", "FALL", "choose_dt", "default_t_stop", "ramp_time", "STEPS_PER_RAMP",
                 "LUMPABLE_RAMP_FRACTION", "LOSS_SECTION_FRACTION", "STEPS_PER_LC_PERIOD"):
        assert hasattr(netlist, name), name
    assert netlist.choose_dt is lm.choose_dt
