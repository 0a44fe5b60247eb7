"""IEC 60063 preferred values (budget.preferred), against the published lists (docs/references.md F1-F3)."""
from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from budget import preferred
from budget.errors import ArgumentError

# docs/references.md F1 (IEC 60063:2015, list seen secondhand): the complete E24 decade
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5,
       8.2, 9.1)
# docs/references.md F2 (IEC 60063:2015, seen secondhand): the complete E96 decade, x 1/100
E96 = tuple(v / 100 for v in (
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154, 158, 162, 165, 169,
    174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294,
    301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453, 464, 475, 487, 499, 511,
    523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665, 681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887,
    909, 931, 953, 976))


def test_e24_e12_e6_lists():
    assert preferred.decade("E24") == E24
    assert preferred.decade("E12") == E24[::2]        # F1: E12 = every second E24 value
    assert preferred.decade("E6") == E24[::4]         # F1: E6 = every second E12 value
    assert preferred.decade("E6") == (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)


def test_e24_uses_the_table_not_the_formula():
    # docs/references.md F1: round(10**(i/24), 2 s.f.) gives 2.6 2.9 3.2 3.5 3.8 4.2 4.6 8.3 where E24 has
    # 2.7 3.0 3.3 3.6 3.9 4.3 4.7 8.2 (8 values)
    formula = tuple(round(10 ** (i / 24), 1) for i in range(24))
    differ = [(f, e) for f, e in zip(formula, E24) if f != e]
    assert [e for _, e in differ] == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]
    assert [f for f, _ in differ] == [2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6, 8.3]


def test_e96_e48_lists():
    assert preferred.decade("E96") == E96
    assert preferred.decade("E48") == E96[::2]        # F2: E48 = every second E96 value


def test_e192_has_920_where_the_formula_gives_919():
    # docs/references.md F2: E48 and E96 equal round(100 x 10**(i/n)); E192's one exception is i = 185: 920 (formula 919)
    e192 = preferred.decade("E192")
    assert len(e192) == 192
    assert e192[185] == 9.20 and round(100 * 10 ** (185 / 192)) == 919
    others = [i for i in range(192) if round(e192[i] * 100) != round(100 * 10 ** (i / 192))]
    assert others == [185]
    assert e192[::2] == E96


def test_step_ratios():
    # docs/references.md F2: E24 steps 1.0667-1.1538 (ideal 1.10069), E96 1.0177-1.0301 (ideal 1.02428)
    for series, decade_, lo, hi in (("E24", E24, 1.0667, 1.1538), ("E96", E96, 1.0177, 1.0301)):
        vals = list(decade_) + [10.0]
        ratios = [b / a for a, b in zip(vals, vals[1:])]
        assert min(ratios) == pytest.approx(lo, abs=5e-5) and max(ratios) == pytest.approx(hi, abs=5e-5)


@pytest.mark.parametrize("value, series, expected", [
    (54, "E24", 56), (54, "E96", 53.6),     # docs/references.md F3 (common practice; arithmetic derived)
    (60, "E24", 62), (60, "E96", 60.4),
    (120, "E24", 120), (120, "E96", 121),   # 120 is not an E96 value
    (65, "E24", 68), (65, "E96", 64.9),
    (49.9, "E96", 49.9),
    (127, "E24", 130), (127, "E96", 127),
    (35, "E24", 36),                        # F3: series termination 50 - 15 = 35 -> E24 36
    (110, "E24", 110), (91.667, "E24", 91),  # F3: Thevenin pair 110/91.667 -> E24 110/91
    (0.047e-6, "E12", 0.047e-6), (3.3e3, "E6", 3.3e3), (1e-12, "E24", 1e-12),
])
def test_nearest_picks(value, series, expected):
    assert preferred.nearest(value, series) == pytest.approx(expected, rel=1e-12)


def test_nearest_is_in_ratio_not_linear():
    # geometric midpoint of 10 and 11 is sqrt(110) = 10.488: 10.49 is linearly nearer 10, in ratio nearer 11
    assert preferred.nearest(10.49, "E24") == 11
    assert preferred.nearest(10.48, "E24") == 10


def test_thevenin_pick_from_f3():
    # docs/references.md F3: E24 110/91 ohm -> 49.8010 ohm parallel, Vtt = 3.3 x 91/201 = 1.49403 V
    r1, r2 = preferred.nearest(110.0, "E24"), preferred.nearest(91.667, "E24")
    assert r1 * r2 / (r1 + r2) == pytest.approx(49.8010, abs=5e-5)
    assert 3.3 * r2 / (r1 + r2) == pytest.approx(1.49403, abs=5e-6)


def test_values_between():
    assert preferred.values_between(45, 130, "E12") == (47.0, 56.0, 68.0, 82.0, 100.0, 120.0)
    assert preferred.values_between(47, 47, "E6") == (47.0,)
    assert preferred.values_between(48, 49, "E24") == ()
    assert len(preferred.values_between(10, 99.9, "E96")) == 96


@given(value=st.floats(min_value=1e-140, max_value=1e140), series=st.sampled_from(preferred.SERIES))
def test_nearest_is_a_member_within_half_a_step(value, series):
    got = preferred.nearest(value, series)
    lo, hi = preferred.neighbours(value, series)
    assert got in (lo, hi) and lo <= value * (1 + 1e-12) and hi >= value * (1 - 1e-12)
    # no other member of the series is nearer in ratio
    near = preferred.values_between(value / 1.6, value * 1.6, series)
    assert all(abs(math.log(value / got)) <= abs(math.log(value / c)) + 1e-12 for c in near)


INVALID = [
    ("unknown-series", lambda: preferred.nearest(50, "E3x"), "unknown preferred-number series 'E3x'; series are: E6"),
    ("zero", lambda: preferred.nearest(0, "E24"), "value must be a positive finite number"),
    ("negative", lambda: preferred.nearest(-5, "E24"), "value must be a positive finite number"),
    ("nan", lambda: preferred.nearest(float("nan"), "E24"), "positive finite"),
    ("string", lambda: preferred.nearest("50 ohm", "E24"), "value must be a number"),
    ("too-small", lambda: preferred.nearest(1e-250, "E24"), "outside the supported range"),
    ("too-large", lambda: preferred.values_between(1, 1e200, "E6"), "hi = 1e+200 is outside the supported range"),
    ("reversed-range", lambda: preferred.values_between(100, 10, "E24"), "lo (100) must not exceed hi (10)"),
    ("series-not-str", lambda: preferred.values_between(1, 10, 24), "unknown preferred-number series 24"),
]


@pytest.mark.parametrize("call, message", [c[1:] for c in INVALID], ids=[c[0] for c in INVALID])
def test_invalid_input(call, message):
    with pytest.raises(ArgumentError, match=None) as info:
        call()
    assert message in str(info.value)
