"""Non-linear IBIS buffers in the engine (budget/kernels/nonlinear.py): linear limit, Bergeron plateaus, designs.

Outside references: the Bergeron load-line method (docs/references.md H3: intersections of lines of
slope +/-1/Z0 with the I-V curves; e.g. the method as given in the classic logic-family design
handbooks), solved here by root finding on the same I-V tables; the linear engine itself for a
resistive IBIS model.  The ODE reference on LC ladders is in tests/test_ibis_reference.py.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

import budget
from budget.errors import DesignError, SimulationError
from budget.ibis import read
from budget.ibis_devices import device_current, switching
from budget.simulate import simulate
from budget.sweep import sweep

from ibis_fixtures import SHIPPED, design_text, shipped_variant, straight_line_ibis

LINEAR_TWIN = """[bus]
name = "linear twin"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.drv]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "26 ohm"
r_low = "22 ohm"
c_pin = "4 pF"
l_pkg = "4 nH"
vih = "2 V"
vil = "0.8 V"
[parts.rcv]
role = "receiver"
c_pin = "3 pF"
l_pkg = "4 nH"
vih = "2 V"
vil = "0.8 V"
[lines.trunk]
z0 = "50 ohm"
delay = "6.7 ns/m"
"""

SEGS = (("n0", "n1", "8 cm"), ("n1", "n2", "5 cm"), ("n2", "n3", "5 cm"))
TAPS = (("U1", "n0", "drv", None), ("U2", "n1", "rcv", "2 cm"), ("U3", "n2", "rcv", "1.5 cm"),
        ("U4", "n3", "drv", None))


def _twin_text():
    out = [LINEAR_TWIN]
    for a, b, length in SEGS:
        out.append(f'[[segment]]\nfrom = "{a}"\nto = "{b}"\nline = "trunk"\nlength = "{length}"\n')
    for name, node, part, stub in TAPS:
        out.append(f'[[tap]]\nname = "{name}"\nnode = "{node}"\npart = "{part}"\n')
        if stub:
            out.append(f'stub = {{ line = "trunk", length = "{stub}" }}\n')
    return "\n".join(out)


@pytest.fixture(scope="module")
def linear_pair(tmp_path_factory):
    d = tmp_path_factory.mktemp("lin")
    (d / "lin.ibs").write_text(straight_line_ibis())
    (d / "ibis.toml").write_text(design_text("lin.ibs", driver_model="lin_io", receiver_model="lin_in",
                                             segments=SEGS, taps=TAPS))
    (d / "linear.toml").write_text(_twin_text())
    return budget.load(d / "ibis.toml"), budget.load(d / "linear.toml")


@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_resistive_ibis_model_reproduces_linear_engine(linear_pair, edge):
    """Straight-line I-V tables and a linear [Ramp] are the linear driver: same waveforms (issue 11)."""
    d_ibis, d_lin = linear_pair
    a = simulate(d_ibis, "U1", edge, dt=20e-12, t_stop=30e-9)
    b = simulate(d_lin, "U1", edge, dt=20e-12, t_stop=30e-9)
    assert a.v.shape == b.v.shape
    swing = 3.3
    # the engines differ only in how they solve the buffers' nodes (Sherman-Morrison in the linear
    # one; Newton and the exact segment walk with a stamped conductance here), so the bits differ;
    # measured 0.7-1.5e-10 V (5e-11 of the swing)
    assert np.max(np.abs(a.v - b.v)) < 1e-9
    assert np.max(np.abs(a.v - b.v)) < 1e-9 * swing
    np.testing.assert_allclose(a.v_end, b.v_end, atol=1e-12)


def test_resistive_ibis_model_same_margins(linear_pair):
    d_ibis, d_lin = linear_pair
    sa = sweep(d_ibis, dt=20e-12, t_stop=30e-9)
    sb = sweep(d_lin, dt=20e-12, t_stop=30e-9)
    ok = sa.valid[None, :, None, :] & np.ones(sa.margin.shape, bool)
    np.testing.assert_allclose(sa.margin[ok], sb.margin[ok], atol=1e-8)
    assert (sa.bits == sb.bits).all()


# ---------------------------------------------------------------------------
# Bergeron load line (docs/references.md H3)

@pytest.fixture(scope="module")
def bergeron(tmp_path_factory):
    d = tmp_path_factory.mktemp("berg")
    (d / "t.ibs").write_text(shipped_variant(c_comp_zero=True, no_package=True, ramp_dt="0.05n"))
    text = design_text("t.ibs", segments=(("n0", "n1", "45 cm"),), switching="ramp",
                       taps=(("U1", "n0", "drv", None), ("U2", "n1", "rcv", None)))
    (d / "b.toml").write_text(text)
    return budget.load(d / "b.toml"), read(d / "t.ibs")


def _plateaus(f, z0, n):
    """Bergeron diagram of driver -- lossless line Z0 -- receiver, from the starting DC point."""
    drv, rcv, v0 = f["drv"], f["rcv"], f["v0"]
    # v_k alternate driver end (k even) and receiver end (k odd); i = current toward the receiver
    v, i = v0, 0.0
    out = []
    for k in range(n):
        if k % 2 == 0:   # at the driver: v - v_prev = +Z0 (i - i_prev), i = -i_drv(v) (out of the buffer)
            vn = brentq(lambda x: (x - v) - z0 * (-drv(x) - i), -5, 10)
            i = -drv(vn)
        else:            # at the receiver: v - v_prev = -Z0 (i - i_prev), i = i_rcv(v)
            vn = brentq(lambda x: (x - v) + z0 * (rcv(x) - i), -5, 10)
            i = rcv(vn)
        v = vn
        out.append(v)
    return out


@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_bergeron_plateaus(bergeron, edge):
    design, f = bergeron
    m_io, m_in = f.model("tsx33_io"), f.model("tsx33_in")
    sw = switching(m_io, edge, "typ", "ramp")
    ku1, kd1 = sw.ku[-1], sw.kd[-1]
    ku0, kd0 = sw.ku[0], sw.kd[0]
    w = simulate(design, "U1", edge, dt=5e-12, t_stop=25e-9)
    v0 = w.v_start[0]
    # the DC start by root finding: driver in its starting state against the receiver's clamps
    v0_ref = brentq(lambda x: device_current(m_io, x, "typ", ku0, kd0) + device_current(m_in, x, "typ"), -2, 6)
    assert v0 == pytest.approx(v0_ref, abs=1e-6)
    fns = {"drv": lambda x: float(device_current(m_io, x, "typ", ku1, kd1)),
           "rcv": lambda x: float(device_current(m_in, x, "typ")), "v0": v0}
    td = 0.45 * 6.7e-9
    plateaus = _plateaus(fns, 50.0, 6)
    swing = abs(w.v_end[0] - w.v_start[0])
    errors = []
    for k, vp in enumerate(plateaus):
        tap = "U1" if k % 2 == 0 else "U2"
        # plateau k holds from k TD to (k + 2) TD at its end of the line; sample it late, after the switching
        t_mid = (k + 1) * td - 0.3 * td if k else 0.7 * td
        sim = np.interp(t_mid, w.t, w[tap])
        errors.append(abs(sim - vp) / swing)
    assert max(errors) < 0.005, (plateaus, errors)
    # the clamps matter here: the open-end plateau is not the linear doubling (measured 2.8 % of the swing)
    assert abs(plateaus[1] - (2 * plateaus[0] - v0)) > 0.02 * swing


# ---------------------------------------------------------------------------
# design files with IBIS parts

@pytest.fixture(scope="module")
def shipped_bus(tmp_path_factory):
    d = tmp_path_factory.mktemp("ship")
    (d / "tansy_tsx33.ibs").write_bytes(SHIPPED.read_bytes())
    text = design_text("tansy_tsx33.ibs", segments=SEGS, taps=TAPS,
                       extra='[tolerances]\n"parts.drv.ibis.corner" = ["min", "max"]\n"lines.trunk.z0" = "10%"\n')
    (d / "bus.toml").write_text(text)
    return d / "bus.toml"


def test_values_from_model_and_overrides(shipped_bus, tmp_path):
    d = budget.load(shipped_bus)
    p = d.parts["drv"]
    assert p.role == "transceiver" and p.ibis.model_name == "tsx33_io"
    assert p.c_pin == pytest.approx(4e-12) and p.l_pkg == pytest.approx(4e-9)
    assert (p.vil, p.vih) == (0.8, 2.0)
    assert d.parts["rcv"].role == "receiver"
    assert d.params["parts.drv.ibis.corner"] == 0.0
    assert d.tolerances["parts.drv.ibis.corner"] == (-1.0, 1.0)
    text = shipped_bus.read_text().replace('switching = "auto" }', 'switching = "auto", corner = "max" }\nvih = "2.2 V"')
    (tmp_path / "tansy_tsx33.ibs").write_bytes(SHIPPED.read_bytes())
    (tmp_path / "o.toml").write_text(text)
    d2 = budget.load(tmp_path / "o.toml")
    assert d2.parts["drv"].vih == 2.2 and d2.params["parts.drv.ibis.corner"] == 1.0
    assert d2.parts["drv"].c_pin == pytest.approx(4.4e-12)


def test_corners_differ_and_batch_matches_single(shipped_bus):
    d = budget.load(shipped_bus)
    r = sweep(d, {"parts.drv.ibis.corner": np.array([-1.0, 0.0, 1.0])}, drivers=["U1"], edges=["rise"])
    over = r.metrics[:, 0, 0, :, :]
    # fast-strong (max) overshoots more than slow-weak (min) at the far transceiver
    from budget.kernels.metrics import OVERSHOOT
    k = r.receivers.index("U4")
    assert over[2, k, OVERSHOOT] > over[0, k, OVERSHOOT]
    one = sweep(d.with_values({"parts.drv.ibis.corner": "max"}), drivers=["U1"], edges=["rise"],
                dt=r.dt["rise"], t_stop=r.t_stop["rise"])
    np.testing.assert_array_equal(one.metrics[0], r.metrics[2])


def test_check_runs_corners(shipped_bus):
    from budget.check import check
    rep = check(budget.load(shipped_bus))
    assert rep.verdict in ("pass", "fail")
    doc = rep.to_json() if hasattr(rep, "to_json") else None
    assert doc is None or "results" in doc


BAD = [
    ("no-file", 'ibis = { file = "nope.ibs", model = "tsx33_io" }', r"\[parts.drv\] ibis.file: IBIS file: .*nope.ibs"),
    ("no-model", 'ibis = { file = "tansy_tsx33.ibs", model = "zz" }',
     r"\[parts.drv\] ibis.model: no \[Model\] 'zz'"),
    ("bad-corner", 'ibis = { file = "tansy_tsx33.ibs", model = "tsx33_io", corner = "fast" }',
     r"\[parts.drv\] ibis.corner: 'fast' is not an IBIS corner"),
    ("linear-key", 'ibis = { file = "tansy_tsx33.ibs", model = "tsx33_io" }\nr_high = "20 ohm"',
     r"\[parts.drv\] r_high: unknown key; allowed keys here: c_pin, ibis, l_pkg"),
    ("unknown-key", 'ibis = { file = "tansy_tsx33.ibs", model = "tsx33_io", colour = "red" }',
     r"\[parts.drv.ibis\] colour: unknown key"),
    ("input-drives", 'ibis = { file = "tansy_tsx33.ibs", model = "tsx33_in" }\nrole = "driver"',
     r"\[parts.drv\] role: IBIS model 'tsx33_in' \(Model_type Input\) cannot drive"),
    ("switching", 'ibis = { file = "tansy_tsx33.ibs", model = "tsx33_io", switching = "magic" }',
     r"ibis.switching: 'magic' is not one of"),
    ("pin", 'ibis = { file = "tansy_tsx33.ibs", pin = "99" }', r"ibis.pin: no pin '99'"),
]


@pytest.mark.parametrize("part, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_ibis_parts(tmp_path, part, message):
    (tmp_path / "tansy_tsx33.ibs").write_bytes(SHIPPED.read_bytes())
    text = design_text("tansy_tsx33.ibs")
    head, _, rest = text.partition("[parts.drv]\n")
    _, _, rest = rest.partition("\n")
    (tmp_path / "d.toml").write_text(head + "[parts.drv]\n" + part + "\n" + rest)
    with pytest.raises(DesignError, match=message):
        budget.load(tmp_path / "d.toml")


def test_malformed_ibis_file_exits_2(tmp_path):
    import subprocess
    import sys
    (tmp_path / "bad.ibs").write_text(SHIPPED.read_text().replace("[Pulldown]\n", "[Pulldown]\n1 2 3\n", 1))
    (tmp_path / "d.toml").write_text(design_text("bad.ibs"))
    r = subprocess.run([sys.executable, "-m", "budget.cli", "check", str(tmp_path / "d.toml")],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 2, r.stderr
    assert "bad.ibs: line" in r.stderr and "[Pulldown]: a table row has voltage" in r.stderr
    assert r.stdout == ""


def test_corner_path_values(shipped_bus):
    d = budget.load(shipped_bus)
    assert d.with_values({"parts.drv.ibis.corner": "min"}).params["parts.drv.ibis.corner"] == -1.0
    with pytest.raises(DesignError, match="IBIS corner"):
        d.with_values({"parts.drv.ibis.corner": 0.5})


# ---------------------------------------------------------------------------
# the bundled example, end to end

EXAMPLE = SHIPPED.parent / "tansy_bus.toml"
EXAMPLE_LINEAR = SHIPPED.parent / "tansy_bus_linear.toml"


def _check_json(path):
    import json
    import subprocess
    import sys
    r = subprocess.run([sys.executable, "-m", "budget.cli", "check", str(path), "--json"], capture_output=True,
                       text=True, timeout=600)
    return r.returncode, json.loads(r.stdout)


def test_bundled_example_against_its_linear_twin():
    rc_i, doc_i = _check_json(EXAMPLE)
    rc_l, doc_l = _check_json(EXAMPLE_LINEAR)
    assert (rc_i, rc_l) == (1, 1)      # both fail on margin: an unterminated six-drop bus (README)
    assert doc_i["assumptions"][0].startswith("Parts from IBIS files: xcvr (taps S1, S2, S3, S4, S5, S6)")
    assert doc_l["assumptions"][0].startswith("Linear driver model")
    over_i = max(r["overshoot"] for r in doc_i["results"])
    over_l = max(r["overshoot"] for r in doc_l["results"])
    under_i = max(r["undershoot"] for r in doc_i["results"])
    under_l = max(r["undershoot"] for r in doc_l["results"])
    # the clamp diodes cut overshoot and undershoot (README: to about a third)
    assert over_i < 0.5 * over_l and under_i < 0.5 * under_l
    assert not any("below absolute minimum" in r["violations"] for r in doc_i["results"])
    assert any("below absolute minimum" in r["violations"] for r in doc_l["results"])


def test_waves_command_with_ibis_parts(tmp_path):
    import subprocess
    import sys
    out = tmp_path / "w.csv"
    r = subprocess.run([sys.executable, "-m", "budget.cli", "waves", str(EXAMPLE), "--driver", "S1", "--edge", "rise",
                        "--csv", str(out)], capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    head = out.read_text().splitlines()[0]
    assert head == "t,S1,S2,S3,S4,S5,S6"


def test_two_waveform_extraction_recovers_the_generating_coefficients():
    """make.py integrated the V-T tables from known Ku(t), Kd(t) (scipy Radau); extraction gets them back."""
    import importlib.util
    spec = importlib.util.spec_from_file_location("tsx_make", SHIPPED.parent / "make.py")
    mk = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mk)
    m = read(SHIPPED).model("tsx33_io")
    for edge in ("rise", "fall"):
        for corner in ("typ", "min", "max"):
            sw = switching(m, edge, corner, "waveforms")
            want = np.array([mk.coefficients(t, corner, edge == "rise") for t in sw.t])
            # away from the table ends (one-sided differences there): measured 0.07-1.3 % of the full
            # coefficient, largest at the fast corner (0.8 ns switching sampled every 50 ps: dV/dt by
            # central differences); 2 % allowed
            inner = slice(2, -2)
            assert np.max(np.abs(sw.ku[inner] - want[inner, 0])) < 0.02
            assert np.max(np.abs(sw.kd[inner] - want[inner, 1])) < 0.02


def test_pin_row_gives_model_and_package(tmp_path):
    """ibis.pin: the [Pin] row names the model and its R_pin, L_pin, C_pin replace [Package] (IBIS [Pin])."""
    (tmp_path / "tansy_tsx33.ibs").write_bytes(SHIPPED.read_bytes())
    text = design_text("tansy_tsx33.ibs").replace('ibis = { file = "tansy_tsx33.ibs", model = "tsx33_io", '
                                                  'switching = "auto" }',
                                                  'ibis = { file = "tansy_tsx33.ibs", pin = "2" }')
    (tmp_path / "p.toml").write_text(text)
    d = budget.load(tmp_path / "p.toml")
    p = d.parts["drv"]
    assert p.ibis.model_name == "tsx33_io" and p.ibis.pin == "2"
    assert p.l_pkg == pytest.approx(4.2e-9)                       # L_pin of pin 2, not L_pkg 4.0 nH
    assert p.ibis.package["r"] == (0.31, 0.31, 0.31) and p.ibis.package["c"][0] == pytest.approx(0.62e-12)
    w = simulate(d, "U1", "rise", t_stop=10e-9)
    assert np.isfinite(w.v).all()


OPEN_DRAIN = """[IBIS Ver] 5.1
[Component] OD1
[Manufacturer] Nobody (fictional)
[Package]
R_pkg 0 0 0
L_pkg 2n NA NA
C_pkg 0 0 0
[Model] od
Model_type I/O_open_drain
Vinl = 0.8
Vinh = 2.0
C_comp 3p NA NA
[Voltage Range] 3.3 NA NA
[Pulldown]
-5 -0.5 NA NA
0 0 NA NA
10 1 NA NA
[Ramp]
dV/dt_r 1.0/0.6n NA NA
dV/dt_f 1.0/0.6n NA NA
[End]
"""

OD_BUS = """[bus]
name = "open-drain bus"
[edge]
rise = "0.8 ns"
fall = "0.8 ns"
{part}
[lines.t]
z0 = "50 ohm"
delay = "6.7 ns/m"
[[segment]]
from = "a"
to = "b"
line = "t"
length = "10 cm"
[[tap]]
name = "A"
node = "a"
part = "x"
[[tap]]
name = "B"
node = "b"
part = "x"
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "3.3 V"
"""


@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_open_drain_model_matches_a_linear_driver_that_lets_go(tmp_path, edge):
    """An Open_drain model (10 ohm straight-line pull-down, no pull-up) = a linear driver whose high
    state is 1e12 ohm (3 pA at 3.3 V: below the comparison tolerance)."""
    (tmp_path / "od.ibs").write_text(OPEN_DRAIN)
    (tmp_path / "i.toml").write_text(OD_BUS.format(part='[parts.x]\nibis = { file = "od.ibs", model = "od" }'))
    (tmp_path / "l.toml").write_text(OD_BUS.format(part='[parts.x]\nrole = "transceiver"\nv_high = "3.3 V"\n'
                                                   'v_low = "0 V"\nr_high = "1e12 ohm"\nr_low = "10 ohm"\n'
                                                   'c_pin = "3 pF"\nl_pkg = "2 nH"\nvih = "2 V"\nvil = "0.8 V"'))
    a = simulate(budget.load(tmp_path / "i.toml"), "A", edge, dt=10e-12, t_stop=20e-9)
    b = simulate(budget.load(tmp_path / "l.toml"), "A", edge, dt=10e-12, t_stop=20e-9)
    assert np.max(np.abs(a.v - b.v)) < 1e-6
    assert a.v_end[1] == pytest.approx(3.3 if edge == "rise" else 3.3 * 10 / 60, abs=1e-6)
