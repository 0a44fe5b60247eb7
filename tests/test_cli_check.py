"""`busbudget check` end to end: exit codes 0 pass / 1 fail / 2 bad input / 3 internal error, text, JSON,
files, what the default covers, progress."""
from __future__ import annotations

import importlib
import io
import json
import re
import os
import subprocess
import sys
from pathlib import Path

import pytest

from budget.cli import main
from budget.progress import ProgressBar

DESIGNS = Path(__file__).parent / "designs"
ROBUST = str(DESIGNS / "robust.toml")
OVERSHOOT = str(DESIGNS / "failing_overshoot.toml")


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_bundled_example_passes_nominally_with_exit_0(capsys):
    code, out, err = run(capsys, "check", "example:backplane", "--nominal")
    assert code == 0
    assert "VERDICT: PASS" in out and "Kestrel eight-slot backplane" in out
    assert out.count("(nominal design only)") == 1        # the verdict line says what was covered
    assert ">> " in out                                   # the worst receiver is marked
    assert err == ""


def test_default_covers_every_corner_and_says_so(capsys):
    # short bus: 5 toleranced values, one driver: 32 corners x 1 driver x 2 edges = 64 simulations
    code, out, _ = run(capsys, "check", "example:short-bus", "--json")
    doc = json.loads(out)
    assert doc["schema"] == "busbudget.check/1"
    assert doc["analyses"]["corners"]["variants"] == 32 and doc["analyses"]["corners"]["default"]
    cov = doc["coverage"]
    assert cov["all_corners"] and cov["corners"] == cov["corners_in_box"] == 32 and cov["note"] is None
    assert code == (0 if doc["verdict"] == "pass" else 1)
    code, out, _ = run(capsys, "check", "example:short-bus")
    verdict = next(line for line in out.splitlines() if line.startswith("VERDICT"))
    assert verdict.endswith("(nominal and all 32 tolerance corners)")


def test_box_too_big_for_the_default_is_reported_not_covered(capsys, monkeypatch):
    import budget.analyses
    monkeypatch.setattr(budget.analyses, "DEFAULT_MAX_SIMULATIONS", 16)   # robust: 32 x 1 x 2 = 64
    code, out, _ = run(capsys, "check", ROBUST)
    assert code == 0
    assert "NOT COVERED: the tolerance box has 32 corners, i.e. 64 simulations" in out
    assert "--corners" in out and "--monte-carlo N" in out
    assert "(nominal design only; the tolerance box was not covered)" in out
    code, out, _ = run(capsys, "check", ROBUST, "--json")
    cov = json.loads(out)["coverage"]
    assert cov["corners"] == 0 and cov["corners_in_box"] == 32 and not cov["all_corners"]
    assert "--monte-carlo N" in cov["note"]
    code, out, _ = run(capsys, "check", ROBUST, "--corners")          # --corners still runs them all
    assert "32 corners" in out and "NOT COVERED" not in out


def test_nominal_and_corners_exclude_each_other(capsys):
    code, out, err = run(capsys, "check", ROBUST, "--nominal", "--corners")
    assert code == 2 and "not allowed with argument" in err
    code, out, err = run(capsys, "check", ROBUST, "--nominal", "--monte-carlo", "5")
    assert code == 2 and "nominal design alone" in err


INTERNAL = [
    ("zero-division", ZeroDivisionError("division by zero")),
    ("plain-value-error", ValueError("not from busbudget")),
    ("os-error", OSError("raised inside the engine")),
]


@pytest.mark.parametrize("exc", [i[1] for i in INTERNAL], ids=[i[0] for i in INTERNAL])
def test_internal_errors_exit_3_with_one_line(capsys, monkeypatch, exc):
    check_module = importlib.import_module("budget.check")   # budget.check is also the function

    def broken(*args, **kwargs):
        raise exc
    monkeypatch.setattr(check_module, "check", broken)
    monkeypatch.delenv("BUSBUDGET_DEBUG", raising=False)
    code, out, err = run(capsys, "check", ROBUST)
    assert code == 3 and out == ""
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith(f"busbudget: internal error: {type(exc).__name__}: ")
    assert "report it" in err
    monkeypatch.setenv("BUSBUDGET_DEBUG", "1")
    code, _, err = run(capsys, "check", ROBUST)
    assert code == 3 and "Traceback" in err


def test_package_errors_still_exit_2(capsys, monkeypatch):
    from budget.errors import SimulationError

    def broken(*args, **kwargs):
        raise SimulationError("the nodal matrix is singular at node n3")
    monkeypatch.setattr(importlib.import_module("budget.check"), "check", broken)
    code, out, err = run(capsys, "check", ROBUST)
    assert code == 2 and err == "busbudget: error: the nodal matrix is singular at node n3\n"


def test_failing_design_exits_1_and_names_the_case(capsys):
    code, out, err = run(capsys, "check", OVERSHOOT)
    assert code == 1
    assert "VERDICT: FAIL - FAST -> FAR, rise edge, nominal: overshoot" in out


def test_robust_design_exits_0_across_corners(capsys):
    code, out, _ = run(capsys, "check", ROBUST, "--corners")
    assert code == 0
    assert "32 corners" in out and "VERDICT: PASS" in out


def test_json_to_stdout_is_the_versioned_document(capsys):
    code, out, _ = run(capsys, "check", OVERSHOOT, "--json")
    assert code == 1
    doc = json.loads(out)
    assert doc["schema"] == "busbudget.check/1"
    assert doc["verdict"] == "fail"
    assert (doc["worst"]["driver"], doc["worst"]["receiver"], doc["worst"]["edge"]) == ("FAST", "FAR", "rise")
    assert "NaN" not in out and "Infinity" not in out


def test_json_with_tolerance_analyses(capsys):
    code, out, _ = run(capsys, "check", ROBUST, "--json", "--corners", "--monte-carlo", "50", "--seed", "4")
    assert code == 0
    doc = json.loads(out)
    mc = doc["analyses"]["monte_carlo"]
    assert mc["variants"] == 50 and mc["seed"] == 4 and mc["failed"] == 0
    assert mc["wilson_95"][0] == 0.0 and 0 < mc["wilson_95"][1] < 0.1
    assert doc["analyses"]["corners"]["variants"] == 32
    assert {r["analysis"] for r in doc["results"]} == {"nominal", "corners", "monte_carlo"}


def test_out_writes_the_report_and_prints_a_verdict_line(capsys, tmp_path):
    target = tmp_path / "report.json"
    code, out, _ = run(capsys, "check", OVERSHOOT, "--json", "--out", str(target))
    assert code == 1
    assert out.startswith("FAIL: worst FAST -> FAR rise nominal")
    assert json.loads(target.read_text())["verdict"] == "fail"
    text = tmp_path / "report.txt"
    assert run(capsys, "check", ROBUST, "--out", str(text))[0] == 0
    assert "VERDICT: PASS" in text.read_text()


# ---------------------------------------------------------------------------
# bad input: exit 2, one message naming file, table and key, nothing written

BROKEN = [
    ("negative-z0", ('z0 = "50 ohm"', 'z0 = "-50 ohm"'), r"robust.toml: \[lines.l\] z0: must be positive"),
    ("unknown-key", ('c_pin = "3 pF"', 'c_pin = "3 pF"\ncolour = "red"'), r"\[parts.dst\] colour: unknown key"),
    ("wrong-unit", ('c_pin = "3 pF"', 'c_pin = "3 ohm"'), r"\[parts.dst\] c_pin: .* not a capacitance"),
    ("tolerance-path", ('"lines.l.z0" = "10%"', '"lines.nope.z0" = "10%"'), r"\[tolerances\] lines.nope.z0"),
    ("tap-node", ('node = "far"', 'node = "faraway"'), r"\[tap RX\] node: .*faraway"),
    ("negative-allocation", ('crosstalk = "100 mV"', 'crosstalk = "-100 mV"'),
     r"\[budget\] crosstalk: an allocation cannot be negative"),
    ("not-toml", ("[bus]", "[bus"), r"robust.toml: not valid TOML"),
]


@pytest.mark.parametrize("edit, message", [b[1:] for b in BROKEN], ids=[b[0] for b in BROKEN])
def test_broken_design_exits_2_naming_file_table_key(capsys, tmp_path, edit, message):
    src = Path(ROBUST).read_text()
    assert edit[0] in src
    bad = tmp_path / "robust.toml"
    bad.write_text(src.replace(edit[0], edit[1], 1))
    target = tmp_path / "out.json"
    code, out, err = run(capsys, "check", str(bad), "--json", "--out", str(target))
    assert code == 2
    assert out == ""
    assert err.startswith("busbudget: error: ")

    assert re.search(message, err), err
    assert not target.exists()
    assert list(tmp_path.iterdir()) == [bad]          # no temporary file left behind


BAD_ARGS = [
    ("missing-file", ["check", "no/such/design.toml"], "cannot read"),
    ("unknown-example", ["check", "example:nope"], "unknown example"),
    ("negative-count", ["check", ROBUST, "--monte-carlo", "-5"], "must be 0 or more"),
    ("count-not-a-number", ["check", ROBUST, "--monte-carlo", "many"], "whole number"),
    ("bad-distribution", ["check", ROBUST, "--monte-carlo", "5", "--distribution", "gauss"], "invalid choice"),
    ("no-tolerances", ["check", OVERSHOOT, "--corners"], r"\[tolerances\]"),
    ("too-many-corners", ["check", "example:backplane", "--corners", "--max-corners", "100"],
     "--monte-carlo"),
]


@pytest.mark.parametrize("argv, message", [b[1:] for b in BAD_ARGS], ids=[b[0] for b in BAD_ARGS])
def test_bad_arguments_exit_2(capsys, argv, message):
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert out == ""

    assert re.search(message, err), err


# ---------------------------------------------------------------------------
# the real console script, and the progress bar

@pytest.mark.slow
def test_console_script_exit_codes_and_quiet_stderr(tmp_path):
    exe = Path(sys.executable).with_name("busbudget")
    if not exe.exists():
        pytest.skip("console script not installed next to the interpreter")
    env = dict(os.environ)
    ok = subprocess.run([str(exe), "check", ROBUST, "--corners", "--monte-carlo", "20", "--seed", "1"],
                        capture_output=True, text=True, env=env, timeout=300)
    assert ok.returncode == 0, ok.stderr
    assert ok.stderr == ""                              # not a terminal: no progress bar
    bad = subprocess.run([str(exe), "check", OVERSHOOT, "--json"], capture_output=True, text=True, env=env,
                         timeout=300)
    assert bad.returncode == 1
    assert json.loads(bad.stdout)["verdict"] == "fail"


class FakeTerminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_bar_draws_only_on_a_terminal():
    quiet = io.StringIO()
    with ProgressBar("x", stream=quiet) as bar:
        for i in range(11):
            bar(i, 10)
    assert quiet.getvalue() == ""
    tty = FakeTerminal()
    with ProgressBar("check", stream=tty, interval=0.0) as bar:
        for i in range(11):
            bar(i, 10)
    drawn = tty.getvalue()
    assert "\r" in drawn and "10/10" in drawn and drawn.endswith("\n")
    assert "[" + "#" * 30 + "]" in drawn
