"""Tolerance analyses: corners, Monte Carlo with its Wilson interval, and the worst-case search."""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import binomtest, truncnorm

import budget
from budget.check import MAX_CORNERS, check, corner_values, sample_values, wilson_interval
from budget.errors import ArgumentError, DesignError
from budget.sweep import sweep

DESIGNS = Path(__file__).parent / "designs"

# A lumped LVTTL-style link (driver and receiver on one node, no load): the
# pin settles exactly at VOH = 2.4 V, so margin_high = 2.4 - VIH - 0.2 V of
# allocations.  With VIH drawn uniformly from [1.9, 2.3] V the rising edge fails
# exactly when VIH > 2.2 V: a known failure probability of 0.1/0.4 = 0.25.
KNOWN_RATE = """
[bus]
name = "known-rate link"
t_stop = "20 ns"
[edge]
rise = "1 ns"
fall = "1 ns"
[parts.drv]
role = "driver"
v_high = "2.4 V"
v_low = "0.4 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "1 pF"
[parts.rx]
role = "receiver"
c_pin = "2 pF"
vih = "2.0 V"
vil = "0.8 V"
[[tap]]
name = "D"
node = "n"
part = "drv"
[[tap]]
name = "R"
node = "n"
part = "rx"
[tolerances]
"parts.rx.vih" = ["1.9 V", "2.3 V"]
[budget]
crosstalk = "200 mV"
"""


# ---------------------------------------------------------------------------
# Wilson score interval

# docs/references.md G1 (Newcombe 1998 examples, printed to 4 dp; Wilson 1927)
NEWCOMBE = [(81, 263, 0.2553, 0.3662), (15, 148, 0.0624, 0.1605), (0, 20, 0.0, 0.1611), (1, 29, 0.0061, 0.1718)]


@pytest.mark.parametrize("k, n, lo, hi", NEWCOMBE, ids=[f"{k}/{n}" for k, n, *_ in NEWCOMBE])
def test_wilson_interval_matches_newcombe_printed_values(k, n, lo, hi):
    a, b = wilson_interval(k, n)
    assert a == pytest.approx(lo, abs=5e-5) and b == pytest.approx(hi, abs=5e-5)


@pytest.mark.parametrize("k, n", [(10, 100), (0, 100), (5, 1000), (3, 10000), (81, 263), (100, 100), (1, 1)])
def test_wilson_interval_matches_scipy(k, n):
    ref = binomtest(k, n).proportion_ci(0.95, method="wilson")
    a, b = wilson_interval(k, n)
    assert a == pytest.approx(ref.low, rel=1e-12, abs=1e-15)
    assert b == pytest.approx(ref.high, rel=1e-12, abs=1e-15)


def test_wilson_upper_limit_at_zero_failures():
    # docs/references.md G1: for k = 0 the upper limit is z^2/(n + z^2), z = 1.959963985
    z = 1.959963985
    assert wilson_interval(0, 300)[1] == pytest.approx(z * z / (300 + z * z), rel=1e-9)


def test_wilson_interval_covers_about_95_percent():
    # The interval's defining property, checked by simulation with numpy's binomial draws.
    rng = np.random.default_rng(0)
    for p, n in ((0.03, 500), (0.25, 400)):
        ks = rng.binomial(n, p, 3000)
        covered = np.mean([lo <= p <= hi for lo, hi in (wilson_interval(int(k), n) for k in ks)])
        assert 0.93 <= covered <= 0.97, (p, n, covered)


@pytest.mark.parametrize("k, n", [(-1, 10), (11, 10), (0, 0), (1.5, 10)], ids=["k<0", "k>n", "n=0", "k-float"])
def test_wilson_interval_rejects_bad_counts(k, n):
    with pytest.raises(ArgumentError):
        wilson_interval(k, n)


# ---------------------------------------------------------------------------
# corners

def test_corners_are_every_combination_of_the_extremes():
    design = budget.example("backplane")
    vals, paths, codes = corner_values(design)
    assert len(paths) == 7 and codes.shape == (128, 7)
    rows = {tuple(vals[p][i] for p in paths) for i in range(128)}
    assert len(rows) == 128
    for j, p in enumerate(paths):
        lo, hi = design.tolerances[p]
        assert set(vals[p]) == {lo, hi}
        assert np.all((vals[p] == hi) == (codes[:, j] == 1))


def test_zero_tolerances_do_not_multiply_corners():
    text = KNOWN_RATE.replace('[tolerances]\n', '[tolerances]\n"parts.rx.c_pin" = "0%"\n')
    vals, paths, codes = corner_values(budget.loads(text))
    assert paths == ["parts.rx.vih"] and codes.shape == (2, 1)


def test_too_many_corners_are_refused_with_a_way_forward():
    lines = "\n".join(f'"segment.{i}.length" = "10%"' for i in range(7))
    extra = lines + '\n"tap.SLOT1.stub.length" = "10%"\n"tap.SLOT2.stub.length" = "10%"\n' \
        '"tap.SLOT3.stub.length" = "10%"\n"tap.SLOT4.stub.length" = "10%"\n' \
        '"tap.SLOT5.stub.length" = "10%"\n'
    text = budget.example_path("backplane").read_text().replace("[tolerances]\n", "[tolerances]\n" + extra)
    design = budget.loads(text, source="big.toml")
    assert 2 ** len(design.tolerances) > MAX_CORNERS
    with pytest.raises(ArgumentError, match=r"--monte-carlo.*--search") as err:
        check(design, corners=True)
    assert "big.toml" in str(err.value) and "4,096" in str(err.value)
    with pytest.raises(ArgumentError, match="limit of 64"):
        corner_values(budget.example("backplane"), max_corners=64)


# ---------------------------------------------------------------------------
# Monte Carlo

def test_monte_carlo_counts_exactly_the_failing_samples_and_covers_the_known_rate():
    design = budget.loads(KNOWN_RATE)
    n, seed = 2000, 5
    report = check(design, monte_carlo=n, seed=seed)
    mc = report.analyses["monte_carlo"]
    # the same draws, reproduced from the seed: a sample fails exactly when VIH > 2.2 V
    vih = sample_values(design, n, np.random.default_rng(seed))["parts.rx.vih"]
    assert mc["failed"] == int(np.count_nonzero(vih > 2.2))
    lo, hi = mc["wilson_95"]
    assert lo <= 0.25 <= hi                       # the true rate is inside the interval
    assert hi - lo < 0.045                        # and the interval is informative
    assert mc["failure_probability"] == pytest.approx(mc["failed"] / n)
    assert (lo, hi) == pytest.approx(wilson_interval(mc["failed"], n), rel=1e-12)
    assert mc["seed"] == seed and mc["distribution"] == "uniform"
    assert not report.passed
    worst = report.rows(analysis="monte_carlo", edge="rise")[0]
    drawn = report.variants[worst["corner"]]["values"]["parts.rx.vih"]
    assert drawn == pytest.approx(vih.max())      # the worst sample is the highest threshold


def test_monte_carlo_is_reproducible_with_a_seed():
    design = budget.load(DESIGNS / "robust.toml")
    a = json.dumps(check(design, monte_carlo=60, seed=11).to_json(), sort_keys=True)
    b = json.dumps(check(design, monte_carlo=60, seed=11).to_json(), sort_keys=True)
    c = json.dumps(check(design, monte_carlo=60, seed=12).to_json(), sort_keys=True)
    assert a == b
    assert a != c


def test_monte_carlo_without_a_seed_reports_the_one_it_drew():
    design = budget.loads(KNOWN_RATE)
    first = check(design, monte_carlo=50)
    seed = first.analyses["monte_carlo"]["seed"]
    assert isinstance(seed, int)
    again = check(design, monte_carlo=50, seed=seed)
    assert again.analyses["monte_carlo"]["failed"] == first.analyses["monte_carlo"]["failed"]


def test_samples_stay_in_the_box_and_follow_their_distribution():
    design = budget.example("fieldbus")
    rng = np.random.default_rng(1)
    uni = sample_values(design, 20000, rng, "uniform")
    nor = sample_values(design, 20000, rng, "normal")
    for p, (lo, hi) in design.tolerances.items():
        for vals in (uni[p], nor[p]):
            assert vals.min() >= lo and vals.max() <= hi
        # uniform: standard deviation (hi - lo)/sqrt(12)
        assert uni[p].std() == pytest.approx((hi - lo) / math.sqrt(12), rel=0.03)
        # normal with the interval as +-3 sigma, truncated there (scipy.stats.truncnorm as the oracle)
        assert nor[p].std() == pytest.approx(truncnorm.std(-3, 3, scale=(hi - lo) / 6), rel=0.03)
        assert nor[p].mean() == pytest.approx(0.5 * (lo + hi), abs=0.01 * (hi - lo))


def test_normal_distribution_runs_end_to_end():
    report = check(budget.loads(KNOWN_RATE), monte_carlo=400, seed=3, distribution="normal")
    mc = report.analyses["monte_carlo"]
    assert mc["distribution"] == "normal" and "3 sigma" in mc["distribution_note"]
    # P(VIH > 2.2 V) for a normal with mean 2.1 V and sigma 0.4/6 V truncated at +-3 sigma:
    # 1.5 sigma above the mean
    p = (truncnorm.sf(1.5, -3, 3))
    lo, hi = mc["wilson_95"]
    assert lo <= p <= hi


def test_a_non_physical_tolerance_box_is_bad_input():
    # VIH may fall to 0.5 V, below VIL = 0.8 V: some samples are not a receiver at all.
    text = KNOWN_RATE.replace('["1.9 V", "2.3 V"]', '["0.5 V", "2.3 V"]')
    with pytest.raises(DesignError, match=r"odd.toml: \[tolerances\] parts.rx.vih: .*non-physical.*above vil"):
        check(budget.loads(text, source="odd.toml"), monte_carlo=200, seed=1)


# ---------------------------------------------------------------------------
# worst-case search

def test_search_finds_the_interior_worst_case_that_every_corner_misses():
    # stub_resonance.toml: a receiver stub of 1..6 cm and a +-5 % termination.
    # A fine grid over the stub length (termination at both ends) shows the
    # margin dipping inside the interval; the corners cannot see the dip.
    design = budget.load(DESIGNS / "stub_resonance.toml")
    lengths = np.linspace(0.01, 0.06, 101)
    grid_min = np.inf
    for r in (47.5, 52.5):
        res = sweep(design, {"tap.R1.stub.length": lengths, "termination.0.r": np.full(101, r)})
        worst = res.worst_margin
        grid_min = min(grid_min, worst.min())
        assert worst.argmin() not in (0, 100)          # the grid's minimum is inside the interval
        assert worst.min() < min(worst[0], worst[-1]) - 0.1

    report = check(design, search=True, seed=3, search_generations=10)
    s = report.analyses["search"]
    corner = report.analyses["corners"]["worst_headroom"]
    assert report.analyses["corners"]["default"]          # the default check covers the 4 corners
    started = check(design, corners=False, search=True, seed=3, search_generations=10)
    assert not started.analyses["corners"]["requested"]  # corners still run as the search's start
    assert started.analyses["search"]["worst_headroom"] == s["worst_headroom"]
    assert s["worst_headroom"] < corner - 0.1             # clearly worse than every corner
    assert s["worst_headroom"] == pytest.approx(grid_min, abs=0.015)
    found = report.variants[s["worst_found"]]["values"]["tap.R1.stub.length"]
    assert 0.015 < found < 0.055
    assert report.worst["corner"] == s["worst_found"]


def test_search_never_reports_less_than_the_worst_corner():
    # A monotonic, matched link: the worst corner is already the worst case.
    report = check(budget.load(DESIGNS / "robust.toml"), corners=True, search=True, seed=1,
                   search_generations=3)
    s = report.analyses["search"]
    assert s["worst_headroom"] <= report.analyses["corners"]["worst_headroom"] + 1e-9
    assert s["generations"] <= 3
    assert s["variants"] <= s["population"] * 4


def test_progress_counts_up_to_the_total():
    calls = []
    check(budget.load(DESIGNS / "robust.toml"), corners=True, monte_carlo=30, seed=1,
          progress=lambda done, total: calls.append((done, total)))
    assert calls and calls[-1][0] == calls[-1][1] == 1 + 32 + 30
    done = [c[0] for c in calls]
    assert done == sorted(done)


def test_a_non_physical_tolerance_box_is_rejected_when_the_file_is_read():
    text = KNOWN_RATE.replace('["1.9 V", "2.3 V"]', '["0.5 V", "2.3 V"]')
    with pytest.raises(DesignError, match=r"\[tolerances\]"):
        budget.loads(text)
