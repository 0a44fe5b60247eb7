"""Design-file loading: every validation rule, through the API and the CLI.

Each rejected case names what the message must contain: the file, the table and
the key (docs/design-file.md).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

import budget
from budget.cli import main
from budget.errors import DesignError

BASE = """
[bus]
name = "test bus"
signaling = "single-ended"

[edge]
rise = "1 ns"
fall = "1 ns"

[parts.xcvr]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "3 pF"
l_pkg = "2 nH"
vih = "2.0 V"
vil = "0.8 V"

[parts.rx]
role = "receiver"
c_pin = "2 pF"
vih = "2.0 V"
vil = "0.8 V"

[lines.trunk]
z0 = "50 ohm"
delay = "6.7 ns/m"

[[segment]]
from = "n0"
to = "n1"
line = "trunk"
length = "5 cm"

[[segment]]
from = "n1"
to = "n2"
line = "trunk"
length = "5 cm"

[[tap]]
name = "U1"
node = "n0"
part = "xcvr"

[[tap]]
name = "U2"
node = "n2"
part = "rx"
stub = { line = "trunk", length = "1 cm" }

[[termination]]
node = "n2"
type = "parallel"
r = "50 ohm"
v = "1.65 V"

[tolerances]
"lines.trunk.z0" = "10%"

[budget]
crosstalk = "100 mV"
supply_noise = "5%"
"""


def edit(old: str, new: str) -> str:
    assert old in BASE, old
    return BASE.replace(old, new, 1)


def test_base_design_loads_with_si_values():
    d = budget.loads(BASE, source="base.toml")
    assert d.lines["trunk"].z0 == 50.0
    assert d.lines["trunk"].delay == pytest.approx(6.7e-9)
    assert d.segments[0].length == pytest.approx(0.05)
    assert d.parts["xcvr"].c_pin == pytest.approx(3e-12)
    assert d.parts["rx"].r_in == math.inf           # absent: no input resistance
    assert d.parts["rx"].l_pkg == 0.0               # absent: no package inductance
    assert d.tolerances["lines.trunk.z0"] == pytest.approx((45.0, 55.0))
    assert d.noise_budget.allocations["supply_noise"] == (pytest.approx(0.05), "swing")
    assert d.drivers == ("U1",) and d.receivers == ("U1", "U2")


def test_er_eff_gives_delay_from_the_speed_of_light():
    # docs/references.md B2: t_pd = sqrt(eps_eff)/c; eps 4.0 -> 6.671282 ns/m (exact, c is defined)
    d = budget.loads(edit('delay = "6.7 ns/m"', "er_eff = 4.0"))
    assert d.lines["trunk"].delay == pytest.approx(6.671282e-9, rel=1e-6)


# (id, replaced text, replacement, substrings the message must contain)
BAD = [
    ("not-toml", "[bus]", "[bus", ["bad.toml", "not valid TOML"]),
    ("unknown-top-table", "[budget]", "[budgett]", ["bad.toml", "budgett", "unknown key"]),
    ("unknown-part-key", 'c_pin = "3 pF"', 'c_pin = "3 pF"\nc_pn = "3 pF"', ["[parts.xcvr]", "c_pn"]),
    ("missing-key", 'z0 = "50 ohm"\n', "", ["[lines.trunk]", "z0", "missing"]),
    ("missing-edge", "[edge]\nrise", "[edgy]\nrise", ["edgy"]),
    ("bad-unit", 'z0 = "50 ohm"', 'z0 = "50 ns"', ["[lines.trunk]", "z0", "resistance"]),
    ("unparseable", 'z0 = "50 ohm"', 'z0 = "fifty ohm"', ["[lines.trunk]", "z0", "cannot read"]),
    ("negative-z0", 'z0 = "50 ohm"', 'z0 = "-50 ohm"', ["[lines.trunk]", "z0", "positive"]),
    ("zero-delay", 'delay = "6.7 ns/m"', 'delay = "0 ns/m"', ["[lines.trunk]", "delay", "positive"]),
    ("delay-and-er", 'delay = "6.7 ns/m"', 'delay = "6.7 ns/m"\ner_eff = 4', ["[lines.trunk]", "exactly one"]),
    ("er-below-one", 'delay = "6.7 ns/m"', "er_eff = 0.5", ["er_eff", "at least 1"]),
    ("negative-length", 'length = "5 cm"', 'length = "-5 cm"', ["segment #1", "length", "positive"]),
    ("negative-cpin", 'c_pin = "2 pF"', 'c_pin = "-2 pF"', ["[parts.rx]", "c_pin", "negative"]),
    ("vih-below-vil", 'vih = "2.0 V"\nvil = "0.8 V"\n\n[parts.rx]', 'vih = "0.5 V"\nvil = "0.8 V"\n\n[parts.rx]',
     ["[parts.xcvr]", "vih", "above vil"]),
    ("v-high-below-low", 'v_high = "3.3 V"', 'v_high = "-1 V"', ["[parts.xcvr]", "v_high"]),
    ("bad-role", 'role = "receiver"', 'role = "listener"', ["[parts.rx]", "role", "listener"]),
    ("driver-key-on-receiver", 'role = "receiver"', 'role = "receiver"\nv_high = "3 V"', ["[parts.rx]", "v_high"]),
    ("dangling-line", 'line = "trunk"\nlength = "5 cm"', 'line = "trunc"\nlength = "5 cm"', ["segment #1", "trunc"]),
    ("dangling-part", 'part = "rx"', 'part = "rxx"', ["tap U2", "rxx"]),
    ("dangling-stub-line", 'stub = { line = "trunk"', 'stub = { line = "nope"', ["stub", "nope"]),
    ("tap-on-missing-node", 'node = "n2"\npart = "rx"', 'node = "n9"\npart = "rx"', ["tap U2", "n9"]),
    ("termination-missing-node", 'node = "n2"\ntype = "parallel"', 'node = "n7"\ntype = "parallel"',
     ["termination #1", "n7"]),
    ("unknown-termination-type", 'type = "parallel"', 'type = "diode"', ["termination #1", "diode"]),
    ("termination-missing-r", 'r = "50 ohm"\nv = "1.65 V"', 'v = "1.65 V"', ["termination #1", "r", "missing"]),
    ("duplicate-tap", 'name = "U2"', 'name = "U1"', ["duplicate", "U1"]),
    ("self-loop-segment", 'from = "n1"\nto = "n2"', 'from = "n1"\nto = "n1"', ["segment #2", "different nodes"]),
    ("disconnected", 'from = "n1"\nto = "n2"', 'from = "n3"\nto = "n2"', ["segment", "separate pieces"]),
    ("tolerance-unknown-path", '"lines.trunk.z0" = "10%"', '"lines.trunk.zz" = "10%"', ["tolerances", "lines.trunk.zz"]),
    ("tolerance-min-above-max", '"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = ["60 ohm", "40 ohm"]',
     ["tolerances", "above max"]),
    ("tolerance-nominal-outside", '"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = ["60 ohm", "70 ohm"]',
     ["tolerances", "outside"]),
    ("tolerance-wrong-unit", '"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = ["4 pF", "6 pF"]',
     ["tolerances", "resistance"]),
    ("budget-unknown", 'crosstalk = "100 mV"', 'crosstalks = "100 mV"', ["[budget]", "crosstalks"]),
    ("budget-negative", 'crosstalk = "100 mV"', 'crosstalk = "-100 mV"', ["[budget]", "crosstalk", "negative"]),
    ("budget-wrong-unit", 'crosstalk = "100 mV"', 'crosstalk = "100 ns"', ["[budget]", "crosstalk", "voltage"]),
    ("boolean-quantity", 'c_pin = "2 pF"', "c_pin = true", ["[parts.rx]", "c_pin", "boolean"]),
    ("signaling", 'signaling = "single-ended"', 'signaling = "quad"', ["[bus]", "signaling", "quad"]),
    ("no-taps", "[[tap]]", "[[tapp]]", ["tap"]),
]


@pytest.mark.parametrize("old,new,needles", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_design_is_rejected_with_file_table_and_key(old, new, needles):
    with pytest.raises(DesignError) as info:
        budget.loads(edit(old, new), source="bad.toml")
    msg = str(info.value)
    assert msg.startswith("bad.toml"), msg
    for needle in needles:
        assert needle in msg, (needle, msg)


@pytest.mark.parametrize("old,new,needles", [b[1:] for b in BAD[:12]], ids=[b[0] for b in BAD[:12]])
def test_bad_design_through_the_cli_exits_2_and_writes_nothing(tmp_path, capsys, old, new, needles):
    path = tmp_path / "bad.toml"
    path.write_text(edit(old, new))
    out = tmp_path / "w.csv"
    code = main(["waves", str(path), "--driver", "U1", "--edge", "rise", "--csv", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert not out.exists()
    assert str(path) in err
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1, err
    for needle in needles[1:]:
        assert needle in err, (needle, err)


def test_missing_file_is_a_clear_error(tmp_path):
    with pytest.raises(DesignError, match="cannot read"):
        budget.load(tmp_path / "nope.toml")


def test_with_values_checks_paths_and_physics():
    d = budget.loads(BASE, source="base.toml")
    assert d.with_values({"lines.trunk.z0": 60.0}).lines["trunk"].z0 == 60.0
    assert d.lines["trunk"].z0 == 50.0  # the original is untouched (immutable)
    with pytest.raises(DesignError, match="lines.trunk.z1"):
        d.with_values({"lines.trunk.z1": 60.0})
    with pytest.raises(DesignError, match="positive"):
        d.with_values({"lines.trunk.z0": -1.0})
    with pytest.raises(DesignError, match="positive"):
        d.with_values({"lines.trunk.z0": np.array([50.0, 0.0])})
    with pytest.raises(DesignError, match="length"):
        d.with_values({"lines.trunk.z0": np.array([50.0, 51.0]), "parts.rx.c_pin": np.ones(3) * 1e-12})
    with pytest.raises(DesignError, match="finite"):
        d.with_values({"lines.trunk.z0": math.nan})


def test_design_values_are_read_only():
    d = budget.loads(BASE)
    with pytest.raises(TypeError):
        d.params["lines.trunk.z0"] = 1.0  # type: ignore[index]


def test_design_pickles_for_cluster_workers():
    import pickle

    d = budget.loads(BASE)
    d2 = pickle.loads(pickle.dumps(d))
    assert d2.params == d.params and d2.tap_names == d.tap_names


@pytest.mark.parametrize("name", list(budget.EXAMPLES))
def test_bundled_examples_load(name):
    d = budget.example(name)
    assert len(d.taps) >= 3 and d.drivers and d.receivers


def test_tolerance_box_must_stay_physical():
    text = edit('"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = "10%"\n"parts.rx.c_pin" = ["-1 pF", "3 pF"]')
    with pytest.raises(DesignError) as info:
        budget.loads(text, source="box.toml")
    msg = str(info.value)
    assert "box.toml: [tolerances] parts.rx.c_pin" in msg and "non-physical" in msg


def test_automatic_step_and_window_come_from_the_tolerance_box():
    """The nominal design, a corner and a measured unit inside the box get the same time axis."""
    from budget.netlist import flatten

    d = budget.loads(edit('"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = "10%"\n"parts.xcvr.c_pin" = ["1 pF", "4 pF"]'))
    nets = [flatten(x, "U1", "rise") for x in (d, d.with_values({"parts.xcvr.c_pin": 4e-12}),
                                                 d.with_values({"parts.xcvr.c_pin": 1.5e-12}))]
    assert len({(n.dt, n.n_steps) for n in nets}) == 1
    # a measured value outside the box widens the envelope for that design only
    wide = flatten(d.with_values({"parts.xcvr.c_pin": 0.2e-12}), "U1", "rise")
    assert wide.dt < nets[0].dt
