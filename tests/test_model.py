"""The model on its own: designs built in Python, with_values, equality, units and plausibility.

The unit and plausibility rules are one table (``RULES``): each row is an input,
the fragments its message must hold and a readable id.  Values that no one
means (1.8 F of pin capacitance, 2 H of package inductance, a 1 km stub on a
1 ns bus, a line faster than light) must be refused with a hint at the likely
unit; the ranges themselves are documented in budget/validation.py.
"""
from __future__ import annotations

import math
import pickle

import numpy as np
import pytest

import budget
from budget import validation
from budget.check import check
from budget.design_file import accepted_keys
from budget.errors import ArgumentError, DesignError
from budget.model import Budget, Bus, Design, Edge, LineType, Part, RefLoad, Segment, Stub, Tap, Termination
from budget.sweep import sweep


def drop_bus(**changes) -> Design:
    """A fictional five-drop bus built in Python: a controller, four loads on stubs, a parallel termination."""
    args = dict(
        bus=Bus(name="python-built five-drop bus"),
        edge=Edge(rise="1 ns", fall=1e-9),
        parts={
            "ctrl": Part(role="transceiver", v_high="3.3 V", v_low=0.0, r_high="20 ohm", r_low="18 ohm",
                         c_pin="3 pF", l_pkg="2 nH", vih="2.0 V", vil="0.8 V",
                         ref_load=RefLoad(r="50 ohm")),
            "load": Part(role="receiver", c_pin="2.5 pF", l_pkg="1 nH", vih="2.0 V", vil="0.8 V",
                         r_in="100 kohm"),
        },
        lines={"trunk": LineType(z0="55 ohm", delay="6.7 ns/m"), "spur": LineType(z0="60 ohm", er_eff=4.0)},
        segments=[Segment("n0", "n1", "trunk", "4 cm"), Segment("n1", "n2", "trunk", "3 cm"),
                  Segment("n2", "n3", "trunk", "3 cm"), Segment("n3", "n4", "trunk", "2.5 cm")],
        taps=[Tap("C", "n0", "ctrl")] + [Tap(f"L{i}", f"n{i}", "load", Stub("spur", "8 mm")) for i in range(1, 5)],
        terminations=[Termination("parallel", node="n4", r="50 ohm", v="1.5 V")],
        tolerances={"lines.trunk.z0": "10%", "parts.load.c_pin": ["2 pF", "3 pF"]},
        noise_budget=Budget(allocations={"crosstalk": "50 mV", "supply_noise": "1%"}),
    )
    args.update(changes)
    return Design(**args)


TOML = """
[bus]
name = "python-built five-drop bus"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.ctrl]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "18 ohm"
c_pin = "3 pF"
l_pkg = "2 nH"
vih = "2.0 V"
vil = "0.8 V"
ref_load = { r = "50 ohm" }
[parts.load]
role = "receiver"
c_pin = "2.5 pF"
l_pkg = "1 nH"
vih = "2.0 V"
vil = "0.8 V"
r_in = "100 kohm"
[lines.trunk]
z0 = "55 ohm"
delay = "6.7 ns/m"
[lines.spur]
z0 = "60 ohm"
er_eff = 4.0
""" + "".join(f"""
[[segment]]
from = "n{i}"
to = "n{i + 1}"
line = "trunk"
length = "{length}"
""" for i, length in enumerate(["4 cm", "3 cm", "3 cm", "2.5 cm"])) + """
[[tap]]
name = "C"
node = "n0"
part = "ctrl"
""" + "".join(f"""
[[tap]]
name = "L{i}"
node = "n{i}"
part = "load"
stub = {{ line = "spur", length = "8 mm" }}
""" for i in range(1, 5)) + """
[[termination]]
node = "n4"
type = "parallel"
r = "50 ohm"
v = "1.5 V"
[tolerances]
"lines.trunk.z0" = "10%"
"parts.load.c_pin" = ["2 pF", "3 pF"]
[budget]
crosstalk = "50 mV"
supply_noise = "1%"
"""


@pytest.fixture(scope="module")
def bus() -> Design:
    return drop_bus()


# ---------------------------------------------------------------------------
# a design built in Python

def test_python_design_checks_and_margin_moves_the_right_way(bus):
    assert bus.source == "<python>" and len(bus.taps) == 5 and bus.drivers == ("C",)
    assert bus.parts["load"].c_pin == pytest.approx(2.5e-12)
    assert bus.lines["spur"].delay == pytest.approx(2 / 299_792_458.0)     # docs/references.md B2: sqrt(4)/c
    assert bus.tolerances["parts.load.c_pin"] == pytest.approx((2e-12, 3e-12))
    before = check(bus)
    assert before.passed, before.text()
    # a weaker driver into the 50 ohm / 1.5 V termination: the high level settles at
    # 1.5 + 1.8 * 50 / (50 + 60) = 2.32 V instead of 1.5 + 1.8 * 50 / 70 = 2.79 V, so the
    # high margin shrinks by about the 0.47 V the level drops
    weak = bus.with_values({"parts.ctrl.r_high": "60 ohm"})
    assert weak.parts["ctrl"].r_high == 60.0
    after = check(weak)
    m0 = min(r["margin_high"] for r in before.results if r["edge"] == "rise")
    m1 = min(r["margin_high"] for r in after.results if r["edge"] == "rise")
    assert 0.3 < m0 - m1 < 0.7, (m0, m1)
    assert not after.passed and after.worst["edge"] == "rise"


def test_file_reader_gives_the_same_design_as_python(bus):
    from_file = budget.loads(TOML, source="five.toml")
    assert from_file == bus and hash(from_file) == hash(bus)
    assert from_file.params == bus.params and list(from_file.params) == list(bus.params)
    assert from_file.source == "five.toml"


def test_constructor_errors_name_table_and_key_like_the_file():
    parts = drop_bus().parts
    cases = [
        (dict(parts={**parts, "load": Part(role="receiver", c_pin="-2 pF", vih="2 V", vil="0.8 V")},
              tolerances={}), "<python>: [parts.load] c_pin: cannot be negative"),
        (dict(parts={**parts, "drv": Part(role="driver", c_pin="1 pF")}), "[parts.drv] v_high: missing key"),
        (dict(parts={**parts, "load": "a part"}), "[parts.load]: expected a Part"),
        (dict(taps=[Tap("C", "n0", "ctrl"), Tap("U9", "n1", "nobody")]), "[tap U9] part: no part 'nobody'"),
        (dict(lines={"trunk": LineType(z0="55 ohm")}), "[lines.trunk]: give exactly one of 'delay'"),
        (dict(terminations=[Termination("series", node="n4", tap="C", r="10 ohm")]),
         "[termination #1] node: unknown key"),
        (dict(edge=Edge(rise="1 ns", fall=None)), "[edge] fall: missing key"),
    ]
    for change, needle in cases:
        with pytest.raises(DesignError) as info:
            drop_bus(**change)
        assert needle in str(info.value), (needle, str(info.value))
    with pytest.raises(DesignError, match=r"^board\.py: \[parts.load\] c_pin"):
        drop_bus(parts={**parts, "load": Part(role="receiver", c_pin=1.8, vih="2 V", vil="0.8 V")},
                 tolerances={}, source="board.py")


def test_noise_budget_field_and_its_alias(bus):
    assert bus.budget is bus.noise_budget
    assert bus.noise_budget.allocations["crosstalk"] == (pytest.approx(0.05), "V")
    assert bus.noise_budget.allocations["supply_noise"] == (pytest.approx(0.01), "swing")
    alias = drop_bus(noise_budget=None, budget=Budget(allocations={"crosstalk": "50 mV", "supply_noise": "1%"}))
    assert alias == bus
    with pytest.raises(ArgumentError):
        drop_bus(budget=Budget())


def test_design_is_frozen_and_pickles(bus):
    with pytest.raises(AttributeError):
        bus.source = "x"  # type: ignore[misc]
    with pytest.raises(TypeError):
        bus.params["lines.trunk.z0"] = 1.0  # type: ignore[index]
    again = pickle.loads(pickle.dumps(bus))
    assert again == bus and again.with_values({"lines.trunk.z0": 50.0}).lines["trunk"].z0 == 50.0


# ---------------------------------------------------------------------------
# with_values

def test_with_values_takes_unit_strings_floats_and_arrays(bus):
    assert bus.with_values({"lines.trunk.z0": "37 ohm"}).lines["trunk"].z0 == 37.0
    assert bus.with_values({"parts.load.c_pin": "1.8 pF"}).parts["load"].c_pin == pytest.approx(1.8e-12)
    assert bus.with_values({"parts.load.c_pin": 1.8e-12}).parts["load"].c_pin == 1.8e-12
    b = bus.with_values({"lines.trunk.z0": np.array([45.0, 50.0, 55.0]), "parts.load.c_pin": ["2 pF", "2.5 pF",
                                                                                            "3 pF"]})
    assert b.batch_size == 3
    np.testing.assert_allclose(b.parts["load"].c_pin, [2e-12, 2.5e-12, 3e-12])
    assert bus.with_values({"lines.trunk.z0": 50.0}, source="measured unit 7").source == "measured unit 7"


def test_with_values_evaluates_only_the_rules_of_changed_paths(bus, monkeypatch):
    seen = []
    real = validation.evaluate
    monkeypatch.setattr(validation, "evaluate", lambda rule, P: (seen.append(rule), real(rule, P))[1])
    bus.with_values({"lines.trunk.z0": "50 ohm"})
    assert seen and all("lines.trunk.z0" in r.paths for r in seen)
    assert len(seen) < len(bus.structure.rules) / 5


def test_sweep_validates_a_batch_once_not_per_chunk(bus, monkeypatch):
    calls = []
    real = Design.with_values
    monkeypatch.setattr(Design, "with_values", lambda self, *a, **k: (calls.append(1), real(self, *a, **k))[1])
    r = sweep(bus, {"lines.trunk.z0": np.linspace(50, 60, 6)}, chunk=2, edges=("rise",))
    assert r.n_variants == 6 and len(calls) == 1


def test_batch_with_one_bad_variant_names_it(bus):
    with pytest.raises(DesignError) as info:
        bus.with_values({"parts.load.c_pin": np.array([2e-12, 3e-12, 1.8])})
    msg = str(info.value)
    assert "[values] parts.load.c_pin" in msg and "variant 2" in msg and "did you mean 1.8 pF?" in msg


# ---------------------------------------------------------------------------
# equality and hashing

def test_equal_designs_are_equal_and_hash_equal(bus):
    same = drop_bus()
    assert same == bus and hash(same) == hash(bus) and len({same, bus}) == 1
    changed = bus.with_values({"lines.trunk.z0": 56.0})
    assert changed != bus
    assert changed.with_values({"lines.trunk.z0": 55.0}) == bus
    assert hash(changed.with_values({"lines.trunk.z0": 55.0})) == hash(bus)
    # the source label is provenance, not content
    assert bus.with_values({}, source="another name") == bus
    # -0.0 and 0.0 are the same value
    assert bus.with_values({"parts.ctrl.v_low": -0.0}) == bus
    assert hash(bus.with_values({"parts.ctrl.v_low": -0.0})) == hash(bus)


def test_batch_designs_compare_without_raising(bus):
    a = bus.with_values({"lines.trunk.z0": np.array([50.0, 55.0])})
    b = bus.with_values({"lines.trunk.z0": np.array([50.0, 55.0])})
    c = bus.with_values({"lines.trunk.z0": np.array([50.0, 56.0])})
    assert a == b and hash(a) == hash(b)
    assert a != c and a != bus
    assert a.params == b.params and a.params != c.params
    assert a.lines["trunk"] == b.lines["trunk"] and a.lines["trunk"] != c.lines["trunk"]


# ---------------------------------------------------------------------------
# the key schema

def test_accepted_keys_labels_and_the_loader_uses_them():
    keys = accepted_keys()
    assert set(keys) == {"", "bus", "edge", "parts.driver", "parts.receiver", "parts.transceiver",
                         "parts.ref_load", "parts.ibis_part", "parts.ibis", "lines", "segment", "tap", "tap.stub",
                         "termination.parallel", "termination.thevenin", "termination.rc", "termination.series",
                         "budget", *(f"lines.geometry.{kind}" for kind in budget.geometry.KINDS)}
    assert "geometry" in keys["lines"]
    for role in ("driver", "receiver", "transceiver"):
        assert {"role", "c_pin"} <= keys[f"parts.{role}"]
    # a timing reference load belongs to a part that drives
    assert "ref_load" in keys["parts.driver"] and "ref_load" in keys["parts.transceiver"]
    assert "ref_load" not in keys["parts.receiver"]
    for typ in ("parallel", "thevenin", "rc", "series"):
        assert "type" in keys[f"termination.{typ}"]
    keys["bus"].add("colour")           # a copy: the loader's schema is untouched
    with pytest.raises(DesignError) as info:
        budget.loads(TOML.replace('[bus]\n', '[bus]\ncolour = "red"\n'))
    assert ", ".join(sorted(accepted_keys()["bus"])) in str(info.value)


# ---------------------------------------------------------------------------
# units and plausibility: one table

# (id, values for with_values, path the message must name, fragments the message must hold)
RULES = [
    ("cpin-forgot-pico", {"parts.load.c_pin": 1.8}, "parts.load.c_pin", ["1.8 F", "did you mean 1.8 pF?"]),
    ("cpin-farad-text", {"parts.load.c_pin": "3.1 F"}, "parts.load.c_pin", ["did you mean 3.1 pF?"]),
    ("lpkg-henry", {"parts.ctrl.l_pkg": "2 H"}, "parts.ctrl.l_pkg", ["package inductance", "did you mean 2 nH?"]),
    ("stub-1km-on-1ns", {"tap.L2.stub.length": "1 km"}, "tap.L2.stub.length",
     ["one-way delay", "times the 1 ns edge", "did you mean"]),
    ("segment-1km-on-1ns", {"segment.0.length": 1000.0}, "segment.0.length", ["times the 1 ns edge"]),
    ("faster-than-light", {"lines.trunk.delay": "5 ns/km"}, "lines.trunk.delay",
     ["faster than light", "did you mean 5 ns/m?"]),
    ("er-below-one", {"lines.spur.er_eff": 0.5}, "lines.spur.er_eff", ["at least 1"]),
    ("z0-kilo", {"lines.trunk.z0": "50 kohm"}, "lines.trunk.z0", ["characteristic impedance", "did you mean 50 ohm?"]),
    ("rin-milliohm", {"parts.load.r_in": "1 mohm"}, "parts.load.r_in", ["input resistance", "did you mean 1 Mohm?"]),
    ("voltage-kilo", {"parts.ctrl.v_high": "3.3 kV"}, "parts.ctrl.v_high", ["did you mean 3.3 V?"]),
    ("edge-seconds", {"edge.rise": 1}, "edge.rise", ["edge time", "did you mean 1 ns?"]),
    ("vih-above-every-level", {"parts.load.vih": "3.4 V"}, "parts.load.vih", ["vih", "can never see a high"]),
    ("vil-below-every-level", {"parts.load.vil": "-0.1 V"}, "parts.load.vil", ["vil", "can never see a low"]),
    ("own-vih-above-own-high", {"termination.0.v": "4.5 V", "parts.ctrl.vih": "3.4 V"}, "parts.ctrl.vih",
     ["own v_high"]),
    ("own-vil-below-own-low", {"termination.0.v": "-1 V", "parts.ctrl.vil": "-0.1 V"}, "parts.ctrl.vil",
     ["own v_low"]),
    ("ambiguous-MOHM", {"parts.load.r_in": "1 MOHM"}, "parts.load.r_in", ["ambiguous", "milliohm", "megaohm"]),
    ("ambiguous-mv", {"parts.load.vih": "2000 mv"}, "parts.load.vih", ["ambiguous", "mV", "MV"]),
    ("ambiguous-MM", {"segment.0.length": "40 MM"}, "segment.0.length", ["ambiguous", "mm", "Mm"]),
    ("expression", {"lines.trunk.z0": "9**9**9 ohm"}, "lines.trunk.z0", ["no expressions"]),
    ("product", {"lines.trunk.z0": "5*10 ohm"}, "lines.trunk.z0", ["no expressions"]),
    ("long-text", {"lines.trunk.z0": "5" * 100_000 + " ohm"}, "lines.trunk.z0", ["at most 64"]),
    ("huge-exponent", {"lines.trunk.z0": "1e400 ohm"}, "lines.trunk.z0", ["too large"]),
    ("huge-integer", {"lines.trunk.z0": 10 ** 400}, "lines.trunk.z0", ["too large"]),
    ("unit-without-number", {"lines.trunk.z0": "ohm"}, "lines.trunk.z0", ["expected a number"]),
    ("number-without-unit-text", {"lines.trunk.z0": "50"}, "lines.trunk.z0", ["has no unit"]),
    ("wrong-dimension", {"lines.trunk.z0": "50 ns"}, "lines.trunk.z0", ["not a resistance"]),
    ("unknown-unit", {"lines.trunk.z0": "50 furlong"}, "lines.trunk.z0", ["unknown unit 'furlong'"]),
    ("boolean", {"lines.trunk.z0": True}, "lines.trunk.z0", ["got True"]),
    ("nan", {"lines.trunk.z0": math.nan}, "lines.trunk.z0", ["finite"]),
    ("negative", {"lines.trunk.z0": "-50 ohm"}, "lines.trunk.z0", ["must be positive"]),
    ("unknown-path", {"lines.trunk.z1": "50 ohm"}, "lines.trunk.z1", ["no numeric value at this path"]),
    ("array-of-2d", {"lines.trunk.z0": np.ones((2, 2))}, "lines.trunk.z0", ["1-D"]),
]


@pytest.mark.parametrize("values, path, needles", [r[1:] for r in RULES], ids=[r[0] for r in RULES])
def test_unit_and_plausibility_rules(bus, values, path, needles):
    with pytest.raises(DesignError) as info:
        bus.with_values(values)
    msg = str(info.value)
    assert msg.startswith(f"<python>: [values] {path}"), msg
    for needle in needles:
        assert needle in msg, (needle, msg)
    assert "pint" not in msg.lower() and "Traceback" not in msg and len(msg) < 600


# spellings that must read the same value (case-insensitive where unambiguous)
SAME = [
    ("capacitance", ["2.2 pF", "2.2 pf", "2.2 PF", "2.2pF", "2200 fF"]),
    ("resistance", ["40 ohm", "40 Ohm", "40 OHM", "40 \u03a9", "40 \u2126", "40 ohms", "0.04 kohm", "0.04 kOhm",
                    "0.04 KOHM", "0.04 k\u03a9"]),
    ("time", ["1.5 ns", "1.5 NS", "1500 ps", "1500 PS", "0.0015 us", "0.0015 \u00b5s"]),
    ("voltage", ["1.2 V", "1200 mV", "1.2 v", "1.2 volt"]),
    ("length", ["25.4 mm", "1 inch", "1000 mil", "2.54 cm"]),
    ("delay_per_length", ["6.7 ns/m", "6.7 NS/M", "0.0067 ns/mm", "6.7 ps/mm"]),
]


@pytest.mark.parametrize("dimension, spellings", SAME, ids=[s[0] for s in SAME])
def test_unit_spellings_read_the_same(dimension, spellings):
    from budget.units import parse_quantity
    values = [parse_quantity(s, dimension) for s in spellings]
    assert values == pytest.approx([values[0]] * len(values), rel=1e-12), dict(zip(spellings, values))


def test_milli_and_mega_are_read_as_written_when_the_case_is_usual():
    from budget.units import parse_quantity
    assert parse_quantity("1 MOhm", "resistance") == 1e6
    assert parse_quantity("1 Mohm", "resistance") == 1e6
    assert parse_quantity("1 mohm", "resistance") == pytest.approx(1e-3)
    assert parse_quantity("2 ms", "time") == pytest.approx(2e-3)
    assert parse_quantity("3 mm", "length") == pytest.approx(3e-3)


# plausibility and units in design files: the same rules, the file's table and key
FILE_RULES = [
    ("cpin-plain-number", 'c_pin = "3 pF"\nl_pkg', "c_pin = 1.8\nl_pkg", "[parts.ctrl] c_pin", "did you mean 1.8 pF?"),
    ("delay-per-km", 'delay = "6.7 ns/m"', 'delay = "5 ns/km"', "[lines.trunk] delay", "faster than light"),
    ("stub-km", 'length = "8 mm" }', 'length = "1 km" }', "[tap.L1.stub] length", "times the 1 ns edge"),
    ("vih-over-levels", 'vih = "2.0 V"\nvil = "0.8 V"\nr_in', 'vih = "3.5 V"\nvil = "0.8 V"\nr_in',
     "[parts.load] vih", "can never see a high"),
    ("tolerance-crosses-vih", '"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = "10%"\n"parts.load.vil" = ["0 V", "2 V"]',
     "[tolerances] parts.load.vil", "non-physical"),
    ("tolerance-implausible", '"lines.trunk.z0" = "10%"', '"lines.trunk.z0" = ["50 ohm", "55 kohm"]',
     "[tolerances] lines.trunk.z0", "not a plausible characteristic impedance"),
    ("huge-toml-integer", "er_eff = 4.0", "er_eff = 1" + "0" * 400, "[lines.spur] er_eff", "too large"),
    ("unit-expression", 'z0 = "55 ohm"', 'z0 = "9**9**9 ohm"', "[lines.trunk] z0", "no expressions"),
    ("nul-in-name", 'name = "L1"', 'name = "L\\u00001"', "[tap #2] name", "NUL"),
    ("deep-nesting", "[bus]\n", "[bus]\nx = " + "[" * 5000 + "]" * 5000 + "\n", "five.toml", "TOML"),
]


@pytest.mark.parametrize("old, new, where, needle", [r[1:] for r in FILE_RULES], ids=[r[0] for r in FILE_RULES])
def test_unit_and_plausibility_rules_in_files(old, new, where, needle):
    assert old in TOML, old
    with pytest.raises(DesignError) as info:
        budget.loads(TOML.replace(old, new, 1), source="five.toml")
    msg = str(info.value)
    assert msg.startswith("five.toml") and where in msg and needle in msg, msg


def test_every_plausibility_range_documents_its_reason():
    for kind, rng in validation.PLAUSIBLE.items():
        assert rng.lo < rng.hi and rng.lo <= rng.typical <= rng.hi, kind
        assert len(rng.reason) > 15, kind
    for key, kind in validation.KEY_KINDS.items():
        assert kind in validation.PLAUSIBLE, key


def test_bundled_and_test_designs_pass_every_plausibility_rule():
    from pathlib import Path
    for name in budget.EXAMPLES:
        budget.example(name)
    for path in sorted((Path(__file__).parent / "designs").glob("*.toml")):
        budget.load(path)
