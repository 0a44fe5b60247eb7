"""busbudget correlate (does the model describe this unit?), run records written by the commands, demo data."""
from __future__ import annotations

import hashlib
import json

import pytest

import budget
from budget.cli import main
from budget.examples import capture_path, example_path
from budget.records import read_records

CHANNELS_0042 = ["--channel", "CH1=CTRL", "--channel", "CH2=MEM1", "--channel", "CH3=MEM3"]


def demo(name):
    return str(capture_path(name))


def run(capsys, args):
    rc = main(args)
    cap = capsys.readouterr()
    return rc, cap


def test_correlate_describes_the_unit_whose_values_are_applied(capsys):
    rc, cap = run(capsys, ["correlate", "example:short-bus", "--capture", demo("wren_unit0042_rise.csv"),
                           "--values", demo("wren_unit0042_values.toml"), "--driver", "CTRL", "--edge", "rise",
                           *CHANNELS_0042, "--json"])
    doc = json.loads(cap.out)
    assert rc == 0 and doc["schema"] == "busbudget.correlate/1"
    assert doc["verdict"] == "pass" and doc["describes"] is True
    assert doc["alignment"]["rule"].startswith("driver channel 'CH1'")
    assert [r["receiver"] for r in doc["results"]] == ["MEM1", "MEM3"]
    for r in doc["results"]:
        m = r["metrics"]
        assert set(m) == {"v_lo", "v_hi", "overshoot", "undershoot", "ringback", "margin", "t_switch", "t_valid",
                          "settle_time"}
        assert all(x["within"] for x in m.values() if x["judged"])
        assert m["settle_time"]["judged"] is False
        assert m["v_hi"]["tolerance"] == pytest.approx(0.03 * 2.5)
        assert m["t_switch"]["tolerance"] == pytest.approx(0.10 * 0.8e-9)
        assert r["rms_difference_percent_of_swing"] < 2.0


@pytest.mark.parametrize("values", ["wren_unit0042_values.toml", None])
def test_correlate_a_capture_of_another_unit_does_not_describe_it(capsys, values):
    """Unit 0117 (57 ohm trunk, 11 mm stubs) against the model with unit 0042's values, or the nominal model."""
    args = ["correlate", "example:short-bus", "--capture", demo("wren_unit0117_rise.csv"), "--driver", "CTRL",
            "--edge", "rise", "--json"]
    if values:
        args += ["--values", demo(values)]
    rc, cap = run(capsys, args)
    doc = json.loads(cap.out)
    assert rc == 1 and doc["verdict"] == "fail" and doc["describes"] is False
    assert doc["alignment"]["rule"].startswith("first crossing of 50 % of the swing")
    w = doc["worst"]
    assert w["within"] is False and w["metric"] in ("overshoot", "undershoot", "ringback", "margin", "t_switch",
                                                    "t_valid", "v_lo", "v_hi")


def test_correlate_unit_0117_with_its_own_values_describes_it(capsys):
    rc, cap = run(capsys, ["correlate", "example:short-bus", "--capture", demo("wren_unit0117_rise.csv"),
                           "--values", demo("wren_unit0117_values.csv"), "--driver", "CTRL", "--edge", "rise"])
    assert rc == 0, cap.out
    assert "verdict: PASS: the model describes this unit" in cap.out
    # the alignment rule recovers the trigger offset the demo was made with (1.9 ns), within 5 % of the edge
    rc, cap = run(capsys, ["correlate", "example:short-bus", "--capture", demo("wren_unit0117_rise.csv"),
                           "--values", demo("wren_unit0117_values.csv"), "--driver", "CTRL", "--edge", "rise",
                           "--json"])
    doc = json.loads(cap.out)
    assert doc["alignment"]["capture_time_of_ramp_start"] == pytest.approx(1.9e-9, abs=0.04e-9)


def test_correlate_tolerance_options(capsys):
    base = ["correlate", "example:short-bus", "--capture", demo("wren_unit0042_rise.csv"),
            "--values", demo("wren_unit0042_values.toml"), "--driver", "CTRL", "--edge", "rise", *CHANNELS_0042]
    rc, cap = run(capsys, base + ["--voltage-tolerance", "0.1%", "--json"])
    doc = json.loads(cap.out)
    assert rc == 1 and doc["tolerances"]["voltage"]["fraction"] == pytest.approx(0.001)
    rc, cap = run(capsys, base + ["--time-tolerance", "lots"])
    assert rc == 2 and "percentage" in cap.err


def sha(path):
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()


def test_records_of_check_judge_and_correlate(tmp_path, capsys):
    log = tmp_path / "bench.jsonl"
    values = demo("wren_unit0042_values.toml")
    capture = demo("wren_unit0042_rise.csv")
    common = ["--values", values, "--set", "parts.mem_load.c_pin=2.2 pF", "--log", str(log), "--serial", "WREN-0042"]
    rc1, _ = run(capsys, ["check", "example:short-bus", "--nominal", *common])
    rc2, _ = run(capsys, ["judge", "example:short-bus", "--capture", capture, "--driver", "CTRL", "--edge", "rise",
                          *CHANNELS_0042, *common])
    rc3, _ = run(capsys, ["correlate", "example:short-bus", "--capture", capture, "--driver", "CTRL", "--edge",
                          "rise", *CHANNELS_0042, *common])
    assert (rc1, rc2, rc3) == (0, 0, 0)
    got = read_records(log)
    assert not got.problems
    assert [r["command"] for r in got.records] == ["check", "judge", "correlate"]
    setting = hashlib.sha256(b"parts.mem_load.c_pin=2.2 pF\n").hexdigest()
    for r in got.records:
        assert r["schema"] == "busbudget.record/1" and r["serial"] == "WREN-0042" and r["verdict"] == "pass"
        assert r["design_sha256"] == sha(example_path("short-bus"))
        assert r["inputs_sha256"][values] == sha(values)
        assert r["inputs_sha256"]["--set"] == setting
        assert r["tool_version"] == budget.__version__
    assert set(got.records[0]["margins"]) == {"MEM1", "MEM2", "MEM3"}
    for r in got.records[1:]:
        assert r["inputs_sha256"][capture] == sha(capture)
        assert set(r["margins"]) == {"MEM1", "MEM3"} and all(m > 0.3 for m in r["margins"].values())
    assert got.records[1]["worst"]["channel"] in ("CH2", "CH3")


def test_a_failing_judge_records_fail(tmp_path, capsys):
    log = tmp_path / "bench.jsonl"
    rc, _ = run(capsys, ["judge", "example:short-bus", "--capture", demo("wren_unit0042_rise.csv"), "--driver",
                         "CTRL", "--edge", "rise", *CHANNELS_0042, "--guardband", "0.8 V", "--log", str(log),
                         "--serial", "WREN-0042"])
    assert rc == 1
    rec = read_records(log).records[0]
    assert rec["verdict"] == "fail" and all(m < 0 for m in rec["margins"].values())


@pytest.mark.parametrize("command", ["judge", "correlate"])
def test_log_and_serial_go_together(tmp_path, capsys, command):
    log = tmp_path / "bench.jsonl"
    rc, cap = run(capsys, [command, "example:short-bus", "--capture", demo("wren_unit0042_rise.csv"), "--driver",
                           "CTRL", "--edge", "rise", *CHANNELS_0042, "--log", str(log)])
    assert rc == 2 and "--log and --serial must be given together" in cap.err and not log.exists()


def test_demo_data_are_reproduced_by_their_script(tmp_path):
    """The shipped demo files are exactly what make.py writes (fixed seeds)."""
    import importlib.util

    from budget.examples import CAPTURES, captures_dir

    spec = importlib.util.spec_from_file_location("make_demo", captures_dir() / "make.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.main(tmp_path, quiet=True)
    for name in CAPTURES:
        assert (tmp_path / name).read_bytes() == capture_path(name).read_bytes(), name


def test_demo_tdr_trace_gives_the_coupon_sections(capsys):
    """The bundled TDR trace through `busbudget tdr`: the 40 mm trunk at 47.5 ohm and the 20 mm one at 48.5 ohm
    within 1 %, and the open end at the coupon's length (7.6 cm)."""
    rc, cap = run(capsys, ["tdr", demo("wren_trunk_tdr.csv"), "--source-r", "50 ohm", "--emf", "250 mV",
                           "--er-eff", "3.6", "--json"])
    doc = json.loads(cap.out)
    assert rc == 0
    segs = doc["segments"]
    longest = sorted(segs, key=lambda s: s["t_end"] - s["t_start"], reverse=True)[:2]
    zs = sorted(s["z"] for s in longest)
    assert zs[0] == pytest.approx(47.5, rel=0.01) and zs[1] == pytest.approx(48.5, rel=0.01)
    assert min(s["z"] for s in segs if s["z"] is not None) < 45.0      # the 41 ohm neck shows


def test_judge_lists_measured_values_and_flags_out_of_box(capsys):
    rc, cap = run(capsys, ["judge", "example:short-bus", "--capture", demo("wren_unit0042_rise.csv"), "--driver",
                           "CTRL", "--edge", "rise", *CHANNELS_0042, "--values", demo("wren_unit0042_values.toml"),
                           "--set", "parts.hub_ctrl.r_high=30 ohm", "--json"])
    doc = json.loads(cap.out)
    assert rc == 0
    assert [m["path"] for m in doc["measured"]] == ["lines.route.z0", "parts.hub_ctrl.r_low", "termination.0.r",
                                                    "parts.hub_ctrl.r_high"]
    assert [b["path"] for b in doc["out_of_box"]] == ["parts.hub_ctrl.r_high"]
    assert any("overrides" in n for n in doc["notes"])
