"""budget.strategies and budget.testing: argument handling, what the strategies draw, how they
shrink, and that assert_margin names the same worst case as the check."""
from __future__ import annotations

import math
import pickle
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.errors import InvalidArgument

import budget
from budget.errors import ArgumentError
from budget.strategies import JIT_PROFILE, buses, jit_settings, mirrored_buses, variants
from budget.testing import Variant, assert_margin, variant, worst_case

DESIGNS = Path(__file__).parent / "designs"
SHORT = budget.example("short-bus")
STUB = "tap.MEM2.stub.length"


def _find(strategy, condition, max_examples=2000):
    """The minimal example of ``strategy`` satisfying ``condition`` (hypothesis.find, JIT profile)."""
    from hypothesis import find

    return find(strategy, condition, settings=settings(jit_settings(max_examples=max_examples, database=None,
                                                                    derandomize=True),
                                                       suppress_health_check=list(HealthCheck)))


# ---------------------------------------------------------------------------
# every rejected argument, in one table

def _draw(strategy):
    strategy.validate()


BAD = [
    ("variants: not a design", lambda: _draw(variants("short_bus.toml")), "takes a Design"),
    ("variants: within not a mapping", lambda: _draw(variants(SHORT, within=[(1, 2)])), "must be a mapping"),
    ("variants: unknown path", lambda: _draw(variants(SHORT, within={"tap.NOPE.stub.length": (0, 1)})),
     "is not a numeric value"),
    ("variants: lo above hi", lambda: _draw(variants(SHORT, within={STUB: ("25 mm", "5 mm")})), "is above hi"),
    ("variants: wrong unit", lambda: _draw(variants(SHORT, within={STUB: ("5 V", "25 V")})), "not a length"),
    ("variants: not a pair", lambda: _draw(variants(SHORT, within={STUB: "5 mm"})), "must be a pair"),
    ("variants: three ends", lambda: _draw(variants(SHORT, within={STUB: (1, 2, 3)})), "must be a pair"),
    ("variants: boolean end", lambda: _draw(variants(SHORT, within={STUB: (True, 2)})), "must be a number"),
    ("variants: non-physical interval", lambda: _draw(variants(SHORT, within={STUB: ("-5 mm", "5 mm")})),
     "non-physical"),
    ("buses: min_taps < 2", lambda: _draw(buses(min_taps=1)), "at least 2 taps"),
    ("buses: min_taps > max_taps", lambda: _draw(buses(min_taps=5, max_taps=3)), "is above max_taps"),
    ("buses: float taps", lambda: _draw(buses(max_taps=4.0)), "must be an integer"),
    ("buses: unknown signaling", lambda: _draw(buses(signaling="quad")), "single-ended, differential"),
    ("mirrored_buses: no even count", lambda: _draw(mirrored_buses(min_taps=3, max_taps=3)), "no even tap count"),
    ("assert_margin: unknown analysis", lambda: assert_margin(SHORT, analysis="monte-carlo"),
     "nominal, corners, default"),
    ("assert_margin: negative at_least", lambda: assert_margin(SHORT, at_least=-0.1), ">= 0 V"),
    ("assert_margin: at_least in ohm", lambda: assert_margin(SHORT, at_least="5 ohm"), "at_least"),
    ("assert_margin: at_least boolean", lambda: assert_margin(SHORT, at_least=True), "must be a voltage"),
    ("assert_margin: at_least NaN", lambda: assert_margin(SHORT, at_least=math.nan), "finite"),
    ("assert_margin: empty list", lambda: assert_margin([]), "empty list"),
    ("assert_margin: not a design", lambda: assert_margin("short_bus.toml"), "takes a Design"),
    ("assert_margin: list of other designs", lambda: assert_margin([SHORT, budget.example("fieldbus")]),
     "is not a variant of"),
]


@pytest.mark.parametrize("call, fragment", [pytest.param(c, f, id=i) for i, c, f in BAD])
def test_invalid_arguments_are_rejected_with_a_clear_message(call, fragment):
    with pytest.raises(ArgumentError) as info:
        call()
    assert fragment in str(info.value)


def test_strategy_argument_errors_are_hypothesis_invalid_argument_at_draw_time():
    for strategy in (buses(min_taps=9, max_taps=3), variants(SHORT, within={"nope": (0, 1)})):
        # building the strategy does not fail; a test drawing from it does
        @given(strategy)
        def draws(_):
            pass

        with pytest.raises(InvalidArgument):
            draws()


def test_jit_profile_is_registered():
    profile = settings.get_profile(JIT_PROFILE)
    assert profile.deadline is None and HealthCheck.too_slow in profile.suppress_health_check
    assert jit_settings(max_examples=7).max_examples == 7 and jit_settings().deadline is None


# ---------------------------------------------------------------------------
# variants

WITHIN = {STUB: ("5 mm", "25 mm"), "lines.route.z0": (40.0, "50 ohm")}


@given(v=variants(SHORT, within=WITHIN))
def test_variants_stay_inside_within_and_change_nothing_else(v):
    assert isinstance(v, Variant) and v.nominal is SHORT
    assert 5e-3 <= v.params[STUB] <= 25e-3 and 40.0 <= v.params["lines.route.z0"] <= 50.0
    assert set(v.changes) <= set(WITHIN)
    for p, x in SHORT.params.items():
        if p not in WITHIN:
            assert v.params[p] == x


@given(v=variants(SHORT))
def test_variants_stay_inside_the_tolerance_box(v):
    assert set(v.changes) <= set(SHORT.tolerances)
    assert budget.analyses.out_of_box(v) == []


def test_variants_shrink_to_the_nominal_design():
    assert _find(variants(SHORT), lambda v: True).changes == {}
    # a nominal value outside `within` shrinks to the nearest end (4 mm nominal -> 5 mm)
    v = _find(variants(SHORT, within={STUB: ("5 mm", "25 mm")}), lambda v: True)
    assert v.params[STUB] == pytest.approx(5e-3)
    # a condition on one value leaves the others nominal
    v = _find(variants(SHORT), lambda v: v.params["lines.route.z0"] > 48.0)
    assert list(v.changes) == ["lines.route.z0"]


def test_both_ends_of_every_interval_are_drawn_often():
    box = SHORT.tolerances
    seen = {}

    @settings(jit_settings(max_examples=100, derandomize=True, database=None))
    @given(v=variants(SHORT))
    def draw(v):
        for p, (lo, hi) in box.items():
            for end, x in (("min", lo), ("max", hi)):
                seen[p, end] = seen.get((p, end), 0) + (v.params[p] == x)

    draw()
    # each end about a quarter of the draws (one side in two, at the end in two)
    assert min(seen.values()) >= 5 and len(seen) == 2 * len(box), seen


def test_variant_prints_as_one_line_and_pickles():
    v = variant(SHORT, {STUB: 0.02})
    assert repr(v) == "<variant of 'Wren address bus': tap.MEM2.stub.length = 20 mm (nominal 4 mm)>"
    back = pickle.loads(pickle.dumps(v))
    assert isinstance(back, Variant) and back.changes == v.changes and back.params[STUB] == 0.02


@settings(max_examples=5)
@given(d=mirrored_buses(max_taps=4))
def test_drawn_buses_pickle_with_their_text_and_mirror(d):
    back = pickle.loads(pickle.dumps(d))
    assert back.text == d.text and back.mirror == d.mirror and back.params == d.params


# ---------------------------------------------------------------------------
# buses

@given(d=buses(max_taps=8))
def test_drawn_buses_are_usable_designs(d):
    assert 2 <= len(d.taps) <= 8
    assert d.drivers and any(r != d.drivers[0] for r in d.receivers)
    assert budget.loads(d.text).params == d.params      # the text is the design
    assert repr(d).startswith('budget.loads("""')


@given(d=buses(min_taps=3, max_taps=4, signaling="differential"))
def test_buses_respect_their_arguments(d):
    assert 3 <= len(d.taps) <= 4 and d.bus.signaling == "differential"


def test_buses_shrink_to_a_small_daisy_chain():
    d = _find(buses(), lambda d: True)
    assert len(d.taps) == 2 and len(d.segments) == 1 and not d.terminations
    assert all(t.stub is None for t in d.taps) and len(d.parts) == 1


FEATURES = {
    "ring": lambda d: len(d.segments) >= len(d.nodes),
    "tree": lambda d: any(sum(n in (s.a, s.b) for s in d.segments) >= 3 for n in d.nodes),
    "shared node": lambda d: len({t.node for t in d.taps}) < len(d.taps),
    "stub": lambda d: any(t.stub for t in d.taps),
    "lossy line": lambda d: any(ln.r_dc > 0 for ln in d.lines.values()),
    "er_eff line": lambda d: "er_eff" in d.delay_keys.values(),
    "single-ended": lambda d: d.bus.signaling == "single-ended",
    "differential": lambda d: d.bus.signaling == "differential",
    "receiver-only part": lambda d: any(p.role == "receiver" for p in d.parts.values()),
    "driver-only part": lambda d: any(p.role == "driver" for p in d.parts.values()),
    "package inductance": lambda d: any(p.l_pkg > 0 for p in d.parts.values()),
    "input resistance": lambda d: any(math.isfinite(p.r_in) for p in d.parts.values()),
    "timing reference load": lambda d: any(p.ref_load for p in d.parts.values()),
    "absolute limits": lambda d: any(p.v_max is not None for p in d.parts.values()),
    **{f"{k} termination": (lambda k: lambda d: any(t.type == k for t in d.terminations))(k)
       for k in ("parallel", "thevenin", "rc", "series")},
    "tolerances": lambda d: bool(d.tolerances),
    "budget allocations": lambda d: bool(d.budget.allocations),
}


def test_buses_cover_every_feature_of_the_file_format():
    seen = set()

    @settings(jit_settings(max_examples=300, derandomize=True, database=None))
    @given(d=buses())
    def draw(d):
        seen.update(name for name, has in FEATURES.items() if has(d))

    draw()
    assert seen == set(FEATURES), f"never drawn: {sorted(set(FEATURES) - seen)}"


@given(d=mirrored_buses(max_taps=8))
def test_mirrored_buses_map_every_tap_to_an_image(d):
    assert len(d.taps) % 2 == 0 and set(d.mirror) == set(d.tap_names)
    for t in d.taps:
        image = d.tap(d.mirror[t.name])
        assert d.mirror[image.name] == t.name and image.part == t.part
        assert (image.stub is None) == (t.stub is None)


@settings(max_examples=5)
@given(d=buses(max_taps=5))
def test_drawn_buses_run_through_the_check(d):
    report = budget.check(d)
    assert report.worst["driver"] in d.drivers
    assert np.isfinite(report.worst["headroom"])


# ---------------------------------------------------------------------------
# assert_margin and the package's one worst-case rule

CASES = [(name, budget.example(name)) for name in ("short-bus", "backplane", "fieldbus")] + \
    [(p.stem, budget.load(p)) for p in sorted(DESIGNS.glob("*.toml"))]


@pytest.mark.parametrize("analysis, check_kwargs", [("nominal", {"nominal": True}), ("corners", {"corners": True}),
                                                    ("default", {})])
@pytest.mark.parametrize("name, design", CASES, ids=[c[0] for c in CASES])
def test_worst_case_is_the_checks_worst_case(name, design, analysis, check_kwargs):
    if analysis == "corners" and len(budget.analyses.varied_paths(design)) > 8:
        pytest.skip("more than 256 corners")
    if analysis == "corners" and not budget.analyses.varied_paths(design):
        with pytest.raises(ArgumentError, match="needs \\[tolerances\\]"):
            worst_case(design, analysis=analysis)
        with pytest.raises(ArgumentError):
            budget.check(design, **check_kwargs)
        return
    ours = worst_case(design, analysis=analysis)
    theirs = budget.check(design, **check_kwargs).worst
    for key in ("driver", "receiver", "edge", "metric", "violations"):
        assert ours[key] == theirs[key], key
    assert ours["headroom"] == pytest.approx(theirs["headroom"], abs=1e-12)


def test_assert_margin_passes_and_returns_the_worst_case():
    case = assert_margin(SHORT, at_least="100 mV")
    assert case["headroom"] >= 0.1 and case["changes"] == {}
    assert assert_margin(SHORT, at_least=0.1)["headroom"] == case["headroom"]


def test_assert_margin_names_the_failing_case():
    design = budget.load(DESIGNS / "failing_ringback.toml")
    with pytest.raises(AssertionError) as info:
        assert_margin(design)
    case = worst_case(design)
    msg = str(info.value)
    assert f"driver {case['driver']} -> receiver {case['receiver']}, {case['edge']} edge" in msg
    assert f"metric: {case['metric']} = " in msg and "fails:" in msg


def test_assert_margin_lists_changed_values_and_corner_extremes():
    v = variant(SHORT, {STUB: 0.025})
    with pytest.raises(AssertionError) as info:
        assert_margin(v, at_least="300 mV", analysis="corners")
    msg = str(info.value)
    assert "below the required 300 mV" in msg
    assert "tap.MEM2.stub.length = 25 mm (nominal 4 mm)" in msg
    assert "tolerance corner: " in msg and "lines.route.z0 = " in msg


@settings(max_examples=5)
@given(batch=st.lists(variants(SHORT), min_size=2, max_size=8))
def test_a_batch_of_variants_is_one_sweep_with_the_same_worst_case(batch):
    # inside the tolerance box the time step and window come from the box alone, so the
    # batched sweep gives every variant exactly the numbers it gets alone
    together = worst_case(batch)
    alone = [worst_case(v) for v in batch]
    assert together["evaluated"] == len(batch)
    assert together["headroom"] == min(c["headroom"] for c in alone)


def test_strategies_is_the_only_module_importing_hypothesis():
    """hypothesis is an optional extra: no other module of the package may import it."""
    import ast

    users = set()
    for path in Path(budget.__file__).parent.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else \
                [node.module or ""] if isinstance(node, ast.ImportFrom) else []
            if any(n == "hypothesis" or n.startswith("hypothesis.") for n in names):
                users.add(path.name)
    assert users == {"strategies.py"}


def test_variants_of_a_variant_keep_its_changes():
    base = variant(SHORT, {STUB: 0.02})
    v = _find(variants(base, within={"tap.MEM3.stub.length": ("5 mm", "6 mm")}), lambda v: True)
    assert v.nominal is SHORT and v.params[STUB] == 0.02 and v.params["tap.MEM3.stub.length"] == 0.005
