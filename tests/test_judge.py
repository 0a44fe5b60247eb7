"""busbudget judge: engine waveforms dressed as bench captures give the clean metrics within stated tolerances.

Stated tolerances (module docstring of budget.judge): a noisy capture's margin is never higher than
the clean waveform's by more than one noise sigma plus 0.5 % of the swing (resampling and offset
removal), and not lower by more than 6 sigma plus 0.5 % of the swing; overshoot and undershoot are
within the same band, mirrored (noise peaks add to them).
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

import budget
from budget.capture import Capture, read_capture
from budget.cli import main
from budget.judge import NOISE_K, judge_capture

ENGINE_NOISE = 0.006      # [V] rms, about 0.25 % of the 2.5 V swing (a good scope at full bandwidth)


def engine_sim(name, driver, edge):
    d = budget.example(name)
    return d, budget.simulate(d, driver, edge)


def with_pretrigger(w, taps, pre):
    """The engine's waveforms with ``pre`` seconds of flat starting level before the ramp (t < 0)."""
    n = int(pre / w.dt)
    t = np.concatenate([w.dt * np.arange(-n, 0), w.t])
    return t, {tap: np.concatenate([np.full(n, w[tap][0]), w[tap]]) for tap in taps}


def bench(w, taps, *, dt=20e-12, pre=5e-9, t_ramp=0.8e-9, noise=ENGINE_NOISE, offset=0.010, seed=0):
    """A bench record: the ramp starts at t_ramp of the record (trigger elsewhere), pre-trigger from -pre,
    a grid not aligned with the engine's, Gaussian noise and a probe offset on every receiver channel."""
    rng = np.random.default_rng(seed)
    t = -pre + dt * np.arange(int((pre + t_ramp + w.t[-1]) / dt)) + 0.37 * dt
    out = {}
    for k, tap in enumerate(taps):
        v = np.interp(t - t_ramp, w.t, w[tap], left=w[tap][0], right=w[tap][-1])
        off = 0.0 if tap == w.driver else offset * (-1) ** k
        out[tap] = v + off + rng.normal(0.0, noise, t.shape)
    return t, out


def write_dialect(path, t, channels, dialect):
    names = list(channels)
    if dialect == "comma-ns-mV":
        head = ["Time (ns)"] + [f"{n} (mV)" for n in names]
        rows = [[f"{x * 1e9:.5f}"] + [f"{channels[n][i] * 1e3:.2f}" for n in names] for i, x in enumerate(t)]
        text = "# demo scope export\n" + ",".join(head) + "\n" + "\n".join(",".join(r) for r in rows)
    elif dialect == "semicolon-decimal-comma":
        head = ["Time [s]"] + [f"{n} [V]" for n in names]
        rows = [[f"{x:.6e}"] + [f"{channels[n][i]:.5f}" for n in names] for i, x in enumerate(t)]
        text = "Sample Interval;2,0E-11\n" + ";".join(head) + "\n" + "\n".join(
            ";".join(r).replace(".", ",") for r in rows)
    elif dialect == "tab-units-line":
        head = ["time"] + names
        units = ["us"] + ["V"] * len(names)
        rows = [[f"{x * 1e6:.8f}"] + [f"{channels[n][i]:.5f}" for n in names] for i, x in enumerate(t)]
        text = "\t".join(head) + "\n" + "\t".join(units) + "\n" + "\n".join("\t".join(r) for r in rows)
    else:  # pragma: no cover
        raise AssertionError(dialect)
    path.write_text(text + "\n")
    return path


def margin_of(row):
    return row["margin_high"] if row["edge"] == "rise" else row["margin_low"]


def test_clean_engine_waveform_judged_as_capture_gives_checks_numbers():
    """No noise, judged on the engine's own grid (plus flat pre-trigger samples): exactly the evaluation
    kernel's numbers (check --nominal)."""
    d = budget.example("short-bus")
    rep = budget.check(d, nominal=True).to_json()
    for edge in ("rise", "fall"):
        w = budget.simulate(d, "CTRL", edge)
        # flat pre-trigger samples change no metric, and give a noise estimate of exactly 0
        cap = Capture.from_arrays(*with_pretrigger(w, ("CTRL", "MEM1", "MEM2", "MEM3"), 2e-9))
        found = judge_capture(d, cap, "CTRL", edge, sim=w)
        assert found.settings["time_origin"].startswith("from the driver channel")
        assert found.settings["t_edge"] == pytest.approx(0.0, abs=0.1e-12)   # detected from the driver pin
        j = judge_capture(d, cap, "CTRL", edge, sim=w, t_edge=0.0)
        for row in j.results:
            assert row["noise_sigma"] == 0.0
            ref = next(r for r in rep["results"] if r["receiver"] == row["receiver"] and r["edge"] == edge)
            for key in ("margin_high", "margin_low", "overshoot", "undershoot", "ringback", "v_peak", "v_trough",
                        "monotonic", "pass", "headroom"):
                assert row[key] == ref[key], key
            for key in ("t_switch", "t_valid", "flight_min", "flight_max", "settle_time"):
                assert row[key] == pytest.approx(ref[key], abs=1e-15), key


NOISE_PROPERTY_GRID = {"short-bus": 1.5209170034901045e-11, "backplane": 2.4836470664490254e-11}   # [s]


@pytest.mark.parametrize("name,driver", [("short-bus", "CTRL"), ("backplane", None)])
@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_noise_never_raises_the_margin_by_more_than_one_sigma(name, driver, edge):
    """Property over 25 noise seeds: noise on an engine waveform never makes a margin better than the clean
    one's by more than 1 sigma (the rule only ever opens the ringback window earlier; raw samples judged)."""
    d = budget.example(name)
    driver = driver or d.drivers[0]
    # The bounds below (1 sigma, -8 sigma, the 35 % sigma estimate) were set over these 25 seeds on
    # these grids (the automatic steps when the test was written); the statistics of 25 seeds x the
    # receivers depend on the samples per ns, so the grid is fixed here rather than automatic.
    w = budget.simulate(d, driver, edge, dt=NOISE_PROPERTY_GRID[name])
    taps = [r for r in d.receivers if r != driver]
    t, clean = with_pretrigger(w, taps, 3e-9)
    ref = judge_capture(d, Capture.from_arrays(t, clean), driver, edge, sim=w, t_edge=0.0)
    swing = abs(ref.results[0]["v_hi"] - ref.results[0]["v_lo"])
    sigma = 0.006 * swing
    rng = np.random.default_rng(2024)
    excess = []
    for _ in range(25):
        noisy = {k: v + rng.normal(0.0, sigma, v.shape) for k, v in clean.items()}
        rep = judge_capture(d, Capture.from_arrays(t, noisy), driver, edge, sim=w, t_edge=0.0)
        for a, b in zip(rep.results, ref.results):
            excess.append((margin_of(a) - margin_of(b)) / sigma)
            assert a["hysteresis"] == pytest.approx(NOISE_K * a["noise_sigma"])
            assert a["noise_sigma"] == pytest.approx(sigma, rel=0.35)
    assert max(excess) <= 1.0
    assert min(excess) >= -8.0    # and not absurdly pessimistic


def test_without_the_noise_rule_noise_opens_the_window_on_the_rising_edge():
    """The contract's 2 % rule alone on a noisy trace (--noise 0) gives margins far too low; the rule fixes it."""
    d = budget.example("short-bus")
    w = budget.simulate(d, "CTRL", "rise", dt=NOISE_PROPERTY_GRID["short-bus"])   # grid fixed: see above
    t, clean = with_pretrigger(w, ["MEM1"], 3e-9)
    ref = margin_of(judge_capture(d, Capture.from_arrays(t, clean), "CTRL", "rise", sim=w).results[0])
    rng = np.random.default_rng(5)
    plain, aware = [], []
    for _ in range(200):
        cap = Capture.from_arrays(t, {"MEM1": clean["MEM1"] + rng.normal(0.0, 0.015, t.shape)})
        plain.append(margin_of(judge_capture(d, cap, "CTRL", "rise", sim=w, noise=0.0).results[0]))
        aware.append(margin_of(judge_capture(d, cap, "CTRL", "rise", sim=w).results[0]))
    assert min(plain) < ref - 0.1          # the window opened while the edge was still rising
    assert min(aware) > ref - 6 * 0.015 and max(aware) <= ref + 0.015


@pytest.mark.parametrize("dialect", ["comma-ns-mV", "semicolon-decimal-comma", "tab-units-line"])
@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_bench_captures_through_the_cli_give_the_clean_metrics(tmp_path, capsys, dialect, edge):
    """Engine waveforms resampled onto a scope grid, with noise, probe offsets, a trigger that is not the
    ramp start and pre-trigger samples, in three CSV dialects, through `busbudget judge --json`."""
    d, w = engine_sim("short-bus", "CTRL", edge)
    taps = ["CTRL", "MEM1", "MEM2", "MEM3"]
    t, ch = bench(w, taps, seed=hash((dialect, edge)) % 2**32)
    path = write_dialect(tmp_path / "cap.csv", t, ch, dialect)
    rc = main(["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", edge,
               "--remove-offset", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert rc == 0 and doc["schema"] == "busbudget.judge/1" and doc["verdict"] == "pass"
    ref = budget.check(d, nominal=True).to_json()
    swing = 2.5
    sigma = ENGINE_NOISE
    tol_opt, tol_pess = sigma + 0.005 * swing, 6 * sigma + 0.005 * swing
    assert [r["receiver"] for r in doc["results"]] == ["MEM1", "MEM2", "MEM3"]
    for row in doc["results"]:
        want = next(r for r in ref["results"] if r["receiver"] == row["receiver"] and r["edge"] == edge)
        for key in ("channel", "receiver", "edge", "v_lo", "v_hi", "overshoot", "undershoot", "ringback",
                    "margin_high", "margin_low", "monotonic", "settle_time", "pass", "violations"):
            assert key in row
        assert row["offset"] == pytest.approx((1 if row["receiver"] == "MEM2" else -1) * 0.010, abs=0.002)
        m, mw = margin_of(row), margin_of(want)
        assert mw - tol_pess <= m <= mw + tol_opt
        assert want["ringback"] - tol_pess <= row["ringback"] <= want["ringback"] + tol_opt
        for key in ("overshoot", "undershoot"):
            assert want[key] - tol_opt <= row[key] <= want[key] + tol_pess, key
        # the time origin comes from the captured driver pin: flight times as simulated within 5 % of the edge
        for key in ("flight_min", "flight_max"):
            assert row[key] == pytest.approx(want[key], abs=0.05 * 0.8e-9), key
    assert doc["settings"]["driver_channel"] == "CTRL"


def test_guardband_is_subtracted_from_every_margin_and_rating_headroom(tmp_path, capsys):
    d, w = engine_sim("short-bus", "CTRL", "rise")
    t, ch = bench(w, ["CTRL", "MEM1", "MEM3"], seed=3)
    path = write_dialect(tmp_path / "cap.csv", t, ch, "comma-ns-mV")
    docs = []
    for g in ("0", "40 mV"):
        main(["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", "rise",
              "--guardband", g, "--json"])
        docs.append(json.loads(capsys.readouterr().out))
    for a, b in zip(*(doc["results"] for doc in docs)):
        assert b["margin_high"] == pytest.approx(a["margin_high"] - 0.040, abs=1e-12)
        assert b["headroom"] == pytest.approx(a["headroom"] - 0.040, abs=1e-12)
    assert docs[1]["settings"]["guardband"] == pytest.approx(0.040)
    # a guardband larger than the margin fails the unit
    rc = main(["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", "rise",
               "--guardband", "1 V", "--json"])
    assert rc == 1 and json.loads(capsys.readouterr().out)["verdict"] == "fail"


def test_flight_times_need_a_time_origin(tmp_path, capsys):
    d, w = engine_sim("short-bus", "CTRL", "rise")
    t, ch = bench(w, ["MEM1"], t_ramp=1.3e-9, seed=4)
    path = write_dialect(tmp_path / "cap.csv", t, ch, "comma-ns-mV")
    base = ["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", "rise", "--json"]
    assert main(base) == 0
    doc = json.loads(capsys.readouterr().out)
    row = doc["results"][0]
    assert row["flight_min"] is None and row["flight_max"] is None
    assert doc["settings"]["time_origin"].startswith("not available")
    assert main(base + ["--t-edge", "1.3 ns"]) == 0
    row = json.loads(capsys.readouterr().out)["results"][0]
    want = next(r for r in budget.check(d, nominal=True).to_json()["results"]
                if r["receiver"] == "MEM1" and r["edge"] == "rise")
    assert row["flight_min"] == pytest.approx(want["flight_min"], abs=0.04e-9)
    assert row["settle_time"] == pytest.approx(want["settle_time"], abs=0.3e-9)


def test_levels_from_the_capture_and_the_offset_in_the_margin(tmp_path, capsys):
    """By default a probe offset goes into the margin; --remove-offset takes it out; --levels capture
    takes V_lo/V_hi from the record."""
    d, w = engine_sim("short-bus", "CTRL", "rise")
    t, ch = bench(w, ["CTRL", "MEM1"], offset=-0.05, noise=0.002, seed=5)   # MEM1 is k = 1: +50 mV
    path = write_dialect(tmp_path / "cap.csv", t, ch, "comma-ns-mV")
    base = ["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", "rise", "--json"]
    rows = {}
    for extra in ((), ("--remove-offset",), ("--levels", "capture")):
        main(base + list(extra))
        rows[extra] = json.loads(capsys.readouterr().out)["results"][0]
    raw, fixed, own = rows[()], rows[("--remove-offset",)], rows[("--levels", "capture")]
    assert raw["offset"] == pytest.approx(0.05, abs=0.002)
    assert raw["v_lo"] == 0.0 and own["v_lo"] == pytest.approx(0.05, abs=0.002)
    assert own["v_hi"] == pytest.approx(2.55, abs=0.01)
    assert fixed["overshoot"] == pytest.approx(raw["overshoot"] - 0.05, abs=0.003)
    assert own["overshoot"] == pytest.approx(fixed["overshoot"], abs=0.012)


def _engine_csv(w, tap, *, start=None, stop=None):
    t, v = w.t, w[tap]
    keep = np.ones_like(t, dtype=bool)
    if start is not None:
        keep &= t >= start
    if stop is not None:
        keep &= t <= stop
    return "t,MEM1\n" + "\n".join(f"{a:.6e},{b:.6f}" for a, b in zip(t[keep], v[keep])) + "\n"


@pytest.fixture(scope="module")
def rise_wave():
    return budget.simulate(budget.example("short-bus"), "CTRL", "rise")


BAD = [
    # id, capture text (or a builder of the engine waveform), extra args, message
    ("empty", "", [], "empty"),
    ("one-column", "t\n0\n1e-9\n2e-9\n", [], "only one column"),
    ("non-monotonic-time", "t,MEM1\n0,0\n2e-9,1\n1e-9,2\n", [], "time goes back"),
    ("repeated-time", "t,MEM1\n0,0\n1e-9,1\n1e-9,2\n", [], "time repeats"),
    ("nan", "t,MEM1\n0,0\n1e-9,nan\n2e-9,2\n", [], "not a finite number"),
    ("text-in-a-number-column", "t,MEM1\n0,0\n1e-9,high\n2e-9,2\n", [], "'high' is not a number"),
    ("mixed-units-header-and-units-line", "Time (ns),MEM1 (mV)\ns,V\n0,0\n1,2\n", [], "the header says"),
    ("time-unit-on-a-channel", "Time (ns),MEM1 (ns)\n0,0\n1,2\n", [], "is a time"),
    ("window-misses-the-edge", "t,MEM1\n0,0.01\n1e-9,0.02\n2e-9,0.0\n", [], "misses the edge"),
    ("window-starts-inside-the-edge", lambda w: _engine_csv(w, "MEM1", start=1.8e-9), [],
     "starts after the edge began"),
    ("window-cuts-the-edge", lambda w: _engine_csv(w, "MEM1", stop=1.9e-9), [], "the window cuts the edge"),
    ("no-receiver-column", "t,probe\n0,0\n1e-9,2.5\n", [], "no channel maps to a receiving tap"),
    ("unknown-column", "t,MEM1\n0,0\n1e-9,2.5\n", ["--channel", "CH9=MEM2"], "no column 'CH9'"),
    ("unknown-tap", "t,CH1\n0,0\n1e-9,2.5\n", ["--channel", "CH1=MEM9"], "unknown tap 'MEM9'"),
    ("bad-channel-syntax", "t,MEM1\n0,0\n1e-9,2.5\n", ["--channel", "CH1"], "COLUMN=TAP"),
    ("two-columns-one-tap", "t,MEM1,CH2\n0,0,0\n1e-9,2.5,2.5\n", ["--channel", "MEM1=MEM2", "--channel", "CH2=MEM2"],
     "both map to tap"),
    ("driver-cannot-drive", "t,MEM1\n0,0\n1e-9,2.5\n", ["--driver", "MEM2"], "cannot drive"),
]


@pytest.mark.parametrize("text,extra,needle", [c[1:] for c in BAD], ids=[c[0] for c in BAD])
def test_bad_captures_exit_2_with_a_message(tmp_path, capsys, rise_wave, text, extra, needle):
    path = tmp_path / "bad.csv"
    path.write_text(text(rise_wave) if callable(text) else text)
    args = ["judge", "example:short-bus", "--capture", str(path), "--edge", "rise", *extra]
    if "--driver" not in extra:
        args += ["--driver", "CTRL"]
    log = tmp_path / "log.jsonl"
    rc = main(args + ["--log", str(log), "--serial", "U1"])
    cap = capsys.readouterr()
    assert rc == 2, cap.err
    assert needle in cap.err and cap.out == ""
    assert not log.exists()


def test_allow_partial_judges_a_cut_window_as_a_stated_partial_failure(tmp_path, capsys, rise_wave):
    path = tmp_path / "cut.csv"
    path.write_text(_engine_csv(rise_wave, "MEM1", stop=1.9e-9))
    rc = main(["judge", "example:short-bus", "--capture", str(path), "--driver", "CTRL", "--edge", "rise",
               "--allow-partial", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert rc == 1 and doc["verdict"] == "fail"
    row = doc["results"][0]
    assert row["partial"] is True and "window cuts the edge" in row["violations"]
    assert doc["worst"]["metric"] == "window"


def test_judge_text_report(capsys):
    from budget.examples import capture_path

    rc = main(["judge", "example:short-bus", "--capture", str(capture_path("wren_unit0042_rise.csv")),
               "--values", str(capture_path("wren_unit0042_values.toml")), "--driver", "CTRL", "--edge", "rise",
               "--channel", "CH1=CTRL", "--channel", "CH2=MEM1", "--channel", "CH3=MEM3"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "CH2      MEM1" in out and "verdict: PASS" in out and "time origin: from the driver channel 'CH1'" in out
    assert "measured: lines.route.z0 = 47.6 ohm" in out and "estimates" in out


def test_judge_is_fast_enough_for_a_production_line():
    """One judge call (simulation included) on the bundled capture: well under a second on this machine."""
    import time

    from budget.examples import capture_path

    d = budget.example("short-bus")
    cap = read_capture(capture_path("wren_unit0042_rise.csv"))
    judge_capture(d, cap, "CTRL", "rise", channels={"CH1": "CTRL", "CH2": "MEM1", "CH3": "MEM3"})  # JIT warm-up
    t0 = time.perf_counter()
    judge_capture(d, cap, "CTRL", "rise", channels={"CH1": "CTRL", "CH2": "MEM1", "CH3": "MEM3"})
    took = time.perf_counter() - t0
    print(f"one judge call: {took * 1e3:.1f} ms")
    assert took < 2.0 and math.isfinite(took)


# -- properties ---------------------------------------------------------------------

from hypothesis import given, strategies as st  # noqa: E402


@pytest.fixture(scope="module")
def fall_setup():
    d = budget.example("short-bus")
    w = budget.simulate(d, "CTRL", "fall")
    t, clean = with_pretrigger(w, ["MEM1", "MEM2", "MEM3"], 3e-9)
    ref = judge_capture(d, Capture.from_arrays(t, clean), "CTRL", "fall", sim=w, t_edge=0.0)
    return d, w, t, clean, ref


@given(sigma=st.floats(min_value=0.001, max_value=0.04), seed=st.integers(0, 2**32 - 1),
       shift=st.floats(min_value=-20e-9, max_value=20e-9), offset=st.floats(min_value=-0.05, max_value=0.05))
def test_noise_only_lowers_margins_and_the_origin_only_moves_times(fall_setup, sigma, seed, shift, offset):
    """For any noise level (0.04-1.6 % of the swing), seed, trigger shift and probe offset (removed):
    no margin exceeds the clean one by more than one sigma plus the offset estimate's error, and the
    time origin given with --t-edge moves the flight times back exactly."""
    d, w, t, clean, ref = fall_setup
    rng = np.random.default_rng(seed)
    noisy = {k: v + offset + rng.normal(0.0, sigma, v.shape) for k, v in clean.items()}
    rep = judge_capture(d, Capture.from_arrays(t + shift, noisy), "CTRL", "fall", sim=w, t_edge=shift,
                        remove_offset=True)
    n_pre = int(2e-9 / w.dt)          # pre-edge samples of the 3 ns pre-trigger (one ramp before the edge)
    for a, b in zip(rep.results, ref.results):
        assert margin_of(a) <= margin_of(b) + sigma + 4 * sigma / math.sqrt(n_pre)
        assert a["offset"] == pytest.approx(offset, abs=5 * sigma / math.sqrt(n_pre) + 1e-12)
        assert a["flight_min"] == pytest.approx(b["flight_min"], abs=0.1 * 0.8e-9)
