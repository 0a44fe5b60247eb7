"""`busbudget waves`: the CSV contract (header t then one column per tap, one row per step from t = 0)."""
from __future__ import annotations

import csv
import subprocess
import sys

import numpy as np
import pytest

import budget
from budget.cli import main


def test_waves_csv_matches_the_api(tmp_path):
    out = tmp_path / "w.csv"
    assert main(["waves", "example:short-bus", "--driver", "CTRL", "--edge", "fall", "--csv", str(out)]) == 0
    with open(out, newline="") as fh:
        rows = list(csv.reader(fh))
    design = budget.example("short-bus")
    w = budget.simulate(design, "CTRL", "fall")
    assert rows[0] == ["t", *design.tap_names]
    data = np.array(rows[1:], dtype=float)
    assert data.shape == (len(w.t), 1 + len(design.taps))
    assert data[0, 0] == 0.0
    np.testing.assert_allclose(data[:, 0], w.t, rtol=1e-8, atol=1e-20)
    np.testing.assert_allclose(data[:, 1:], w.v, rtol=1e-8, atol=1e-12)
    # the first row is the DC state before the edge: the driver's high level (falling edge)
    np.testing.assert_allclose(data[0, 1:], w.v_high, rtol=1e-8)


def test_waves_options_and_stdout(capsys):
    assert main(["waves", "example:short-bus", "--driver", "CTRL", "--edge", "rise", "--csv", "-",
                 "--dt", "5 ps", "--t-stop", "2 ns"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].startswith("t,CTRL")
    assert len(lines) == 1 + 401  # 0 .. 2 ns in 5 ps steps


BAD_ARGS = [
    ("unknown-driver", ["--driver", "NOPE", "--edge", "rise"], "unknown tap 'NOPE'"),
    ("receiver-cannot-drive", ["--driver", "MEM1", "--edge", "rise"], "cannot drive"),
    ("bad-edge", ["--driver", "CTRL", "--edge", "up"], "invalid choice"),
    ("bad-dt-unit", ["--driver", "CTRL", "--edge", "rise", "--dt", "5 ohm"], "time"),
]


@pytest.mark.parametrize("args,needle", [b[1:] for b in BAD_ARGS], ids=[b[0] for b in BAD_ARGS])
def test_waves_bad_arguments_exit_2_without_output(tmp_path, capsys, args, needle):
    out = tmp_path / "w.csv"
    code = main(["waves", "example:short-bus", *args, "--csv", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert needle in err
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []  # no temporary file left behind either


def test_waves_to_missing_folder_is_bad_input(tmp_path, capsys):
    code = main(["waves", "example:short-bus", "--driver", "CTRL", "--edge", "rise",
                 "--csv", str(tmp_path / "no" / "w.csv")])
    assert code == 2
    assert "does not exist" in capsys.readouterr().err


def test_console_script_runs_in_a_subprocess(tmp_path):
    out = tmp_path / "w.csv"
    proc = subprocess.run([sys.executable, "-m", "budget.cli", "waves", "example:short-bus", "--driver", "CTRL",
                           "--edge", "rise", "--csv", str(out)], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert out.read_text().startswith("t,CTRL,MEM1,MEM2,MEM3\n")
