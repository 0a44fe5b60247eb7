"""The C library end to end: build libbusbudget.so, compile C programs, run them, compare with Python.

The module builds the library into a temporary directory with the documented
command (``python cexport/build.py --out DIR``), compiles the rig example and
the C test programs (``cexport/tests/``) with the system C compiler, runs them
in subprocesses and compares every number they print (``%.17g``, which reads
back as the same double) with the Python API on the same inputs, with ``==``.
The Python side of the comparison is recomputed here from ``budget.sweep`` /
``budget.simulate`` results, not through ``budget.capi``.
"""
from __future__ import annotations

import importlib.util
import json
import math
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import budget
from budget import capi
from budget.analyses import out_of_box
from budget.check import check
from budget.kernels import metrics as mk
from budget.sweep import sweep

pytestmark = pytest.mark.cexport

ROOT = Path(__file__).resolve().parents[1]
CEXPORT = ROOT / "cexport"
SHORT = budget.example_path("short-bus")       # CTRL drives MEM1..MEM3 (receivers)
BACKPLANE = budget.example_path("backplane")   # SLOT1..SLOT8, all transceivers
CC = os.environ.get("CC") or shutil.which("cc") or shutil.which("gcc")
CFLAGS = ["-std=c99", "-D_POSIX_C_SOURCE=200809L", "-Wall", "-Wextra", "-Werror", "-pedantic"]
RUN_TIMEOUT = 300   # s; a cold numba cache makes the first C process compile the kernels


def _build_module():
    spec = importlib.util.spec_from_file_location("cexport_build", CEXPORT / "build.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


BUILD = _build_module()
HEADER_TEXT = (CEXPORT / "busbudget.h").read_text(encoding="utf-8")
CONST = BUILD.constants(HEADER_TEXT)


def same(a: float, b: float) -> bool:
    """Bit-for-bit equality of two doubles, NaN equal to NaN."""
    return (math.isnan(a) and math.isnan(b)) or a == b


def child_env(**extra) -> dict:
    """The environment for a C program: ours, minus settings that would redirect the runtime."""
    env = {k: v for k, v in os.environ.items() if k not in ("BUSBUDGET_PYTHON", "PYTHONHOME")}
    env.update(extra)
    return env


def run(exe: Path, *args, env=None, expect: int | None = 0) -> subprocess.CompletedProcess:
    proc = subprocess.run([str(exe), *map(str, args)], capture_output=True, text=True,
                          timeout=RUN_TIMEOUT, env=env or child_env())
    if expect is not None:
        assert proc.returncode == expect, (f"{exe.name} {args} exited {proc.returncode}\n"
                                           f"stdout:\n{proc.stdout[-3000:]}\nstderr:\n{proc.stderr[-3000:]}")
    return proc


# ---------------------------------------------------------------------------
# fixtures: build once, compile once

@pytest.fixture(scope="module")
def libdir(tmp_path_factory) -> Path:
    assert CC, "no C compiler found (set CC); the C library tests need one"
    out = tmp_path_factory.mktemp("libbusbudget")
    proc = subprocess.run([sys.executable, str(CEXPORT / "build.py"), "--out", str(out)],
                          capture_output=True, text=True, timeout=RUN_TIMEOUT)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert (out / "libbusbudget.so").is_file() and (out / "busbudget.h").is_file()
    return out


@pytest.fixture(scope="module")
def programs(libdir) -> dict:
    sources = {"rig_check": CEXPORT / "examples" / "rig_check.c",
               "rig_unit": CEXPORT / "examples" / "rig_unit.c",
               "api_probe": CEXPORT / "tests" / "api_probe.c",
               "threads": CEXPORT / "tests" / "threads.c"}
    exes = {}
    for name, src in sources.items():
        exe = libdir / name
        cmd = [CC, *CFLAGS, f"-I{libdir}", str(src), f"-L{libdir}", "-lbusbudget", f"-Wl,-rpath,{libdir}",
               "-pthread", "-lm", "-o", str(exe)]
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
        assert proc.returncode == 0, f"{' '.join(cmd)}\n{proc.stderr}"
        exes[name] = exe
    return exes


# ---------------------------------------------------------------------------
# the header and the exports

def test_header_is_the_single_source(libdir):
    assert (libdir / "busbudget.h").read_bytes() == (CEXPORT / "busbudget.h").read_bytes()
    nm = shutil.which("nm")
    assert nm, "nm (binutils) is needed to list the library's exports"
    out = subprocess.run([nm, "-D", "--defined-only", str(libdir / "libbusbudget.so")],
                         capture_output=True, text=True, check=True).stdout
    exported = {line.split()[-1] for line in out.splitlines() if line.split()[1] in "TDB"}
    api = {name for name in exported if name.startswith("bb_")}
    assert api == set(BUILD.functions(HEADER_TEXT))
    # besides the API: cffi's module init and the interpreter starter (see cexport/build.py)
    assert exported - api == {f"PyInit_{BUILD.MODULE}", BUILD.START_PYTHON}


def test_every_function_has_a_comment():
    lines = HEADER_TEXT.splitlines()
    names = BUILD.functions(HEADER_TEXT)
    assert len(names) >= 15
    for name in names:
        i = next(k for k, line in enumerate(lines) if re.match(rf"int {name}\(", line))
        assert lines[i - 1].rstrip().endswith("*/"), f"{name} has no comment right above it"


def test_status_codes_never_use_zero_for_success():
    status = {n: CONST[n] for n in capi.STATUS_NAMES}
    assert status["BB_NOT_STARTED"] == 0
    assert status["BB_OK"] > 0 and status["BB_FAIL"] > 0
    assert all(v < 0 for n, v in status.items() if n.startswith("BB_ERR_"))
    assert len(set(status.values())) == len(status), "status codes must be distinct"
    header_status = re.search(r"enum bb_status \{(.*?)\};", BUILD.api_declarations(HEADER_TEXT), re.S).group(1)
    assert set(re.findall(r"BB_\w+", header_status)) == set(capi.STATUS_NAMES)


def test_violation_bits_match_the_kernels():
    for name, bit in {**capi.VIOLATION_BITS, **capi.LIMIT_CODES}.items():
        assert CONST[name] == bit, name


# ---------------------------------------------------------------------------
# one worst case: text report, JSON, sweep and bb_check agree on every bundled and test design

ALL_DESIGNS = [budget.example_path(n) for n in budget.EXAMPLES] + sorted((ROOT / "tests" / "designs").glob("*.toml"))
LIMIT_OF_METRIC = {"margin_high": "BB_LIMIT_MARGIN", "margin_low": "BB_LIMIT_MARGIN",
                   "overshoot": "BB_LIMIT_V_MAX", "undershoot": "BB_LIMIT_V_MIN"}


@pytest.mark.parametrize("design_file", ALL_DESIGNS, ids=[p.stem for p in ALL_DESIGNS])
def test_report_json_sweep_and_c_name_the_same_worst_case(programs, design_file):
    design = budget.load(design_file)
    report = check(design, nominal=True)
    w = report.worst
    doc = report.to_json()
    text = report.text()
    # the JSON and the text say what the report object says
    assert {k: doc["worst"][k] for k in ("driver", "receiver", "edge", "metric")} == \
        {k: w[k] for k in ("driver", "receiver", "edge", "metric")}
    assert f"receiver {w['receiver']} when {w['driver']} drives, {w['edge']} edge, nominal: {w['metric']} =" in text
    # the sweep API
    r = sweep(design)
    assert r.worst_index(0) == (w["driver"], w["edge"], w["receiver"])
    assert float(r.worst_headroom[0]) == pytest.approx(w["headroom"], abs=1e-12)
    # the C library
    got = parse_check(run(programs["api_probe"], "check", design_file).stdout)
    names = design.tap_names
    _, _, _, drv, rcv, edge, *_, head, limit, _ = got["check"]
    assert (names[int(drv)], names[int(rcv)], ("rise", "fall")[int(edge)]) == (w["driver"], w["receiver"], w["edge"])
    assert same(float(head), float(r.worst_headroom[0]))
    if w["metric"] in LIMIT_OF_METRIC:
        assert int(limit) == CONST[LIMIT_OF_METRIC[w["metric"]]]
    else:   # a non-headroom violation names the worst case: the headroom is still positive
        assert w["headroom"] >= 0 and w["violations"]


@pytest.mark.skipif(shutil.which("g++") is None, reason="no C++ compiler to check the header with")
def test_header_compiles_as_cpp(libdir):
    proc = subprocess.run(["g++", "-fsyntax-only", "-Wall", "-Werror", "-x", "c++", f"-I{libdir}", "-"],
                          input='#include "busbudget.h"\nint main() { bb_result r; return bb_check(1, &r); }\n',
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr


def test_runtime_starts_and_reports_version(programs):
    out = run(programs["api_probe"], "init").stdout
    assert f"version {CONST['BB_OK']} {CONST['BB_API_VERSION']} {budget.__version__}" in out
    assert f"header-api {CONST['BB_API_VERSION']}" in out
    assert f"runtime-info {CONST['BB_OK']}" in out
    assert str(Path(budget.__file__).parent) in out        # where the package came from


# ---------------------------------------------------------------------------
# numbers: C against Python, bit for bit

def parse_check(stdout: str) -> dict:
    out = {"set": {}, "taps": [], "rmargin": {}, "table": {}, "param": {}, "oob": []}
    for line in stdout.splitlines():
        f = line.split()
        if f[0] == "set":
            out["set"][f[1]] = float(f[2])
            assert int(f[3]) == CONST["BB_OK"]
        elif f[0] == "settext":        # bb_set_text: the value as text with its unit
            out["set"][f[1]] = " ".join(f[3:])
            assert int(f[2]) == CONST["BB_OK"]
        elif f[0] == "check":
            out["check"] = f[1:]
        elif f[0] == "tap":
            out["taps"].append(f[2])
        elif f[0] == "rmargin":
            out["rmargin"][int(f[1])] = float(f[2])
        elif f[0] == "table":
            out["table"][int(f[1])] = float(f[2])
        elif f[0] == "param":
            out["param"][f[1]] = float(f[2])
        elif f[0] == "oob-count":
            out["oob_count"] = int(f[1])
        elif f[0] == "oob":
            out["oob"].append({"path": f[1], "value": float(f[2]), "min": float(f[3]), "max": float(f[4])})
    return out


CHECK_CASES = [
    pytest.param(SHORT, ["lines.route.z0=47.5", "parts.hub_ctrl.r_high=21.5"], id="short-bus-pass"),
    # both outside the box (z0 40.5..49.5 ohm, termination 5 % of its nominal): flagged, still evaluated
    pytest.param(SHORT, ["lines.route.z0=55", "termination.0.r=2"], id="short-bus-fail-out-of-box"),
    pytest.param(BACKPLANE, ["lines.backplane.z0=52.5", "tap.SLOT3.stub.length=0.031"], id="backplane"),
    # bb_set_text: values with units, case-insensitive where unambiguous; Python reads the same text
    pytest.param(SHORT, ["lines.route.z0=47.5 Ohm", "parts.mem_load.c_pin=2.2 pf", "segment.1.length=25 mm",
                         "parts.hub_ctrl.r_high=21.5"], id="short-bus-unit-text"),
]


@pytest.mark.parametrize("design_file, settings", CHECK_CASES)
def test_check_and_margins_match_python(programs, design_file, settings):
    got = parse_check(run(programs["api_probe"], "check", design_file, *settings).stdout)
    design = budget.load(design_file).with_values(got["set"])
    r = sweep(design)
    names = design.tap_names
    n = len(names)

    (rc, passed, worst, drv, rcv, edge, n_cases, n_failing, violations, drv_name, rcv_name, head, limit,
     n_oob) = got["check"]
    assert int(rc) == (CONST["BB_OK"] if r.passed[0] else CONST["BB_FAIL"])
    assert int(passed) == int(r.passed[0])
    assert same(float(worst), float(r.worst_margin[0]))
    w_drv, w_edge, w_rcv = r.worst_index(0)
    assert (int(drv), int(rcv), int(edge)) == (names.index(w_drv), names.index(w_rcv), ("rise", "fall").index(w_edge))
    assert (drv_name, rcv_name) == (w_drv, w_rcv)
    assert same(float(head), float(r.worst_headroom[0]))
    assert 0 <= int(limit) <= 2
    assert int(n_oob) == got["oob_count"] == len(got["oob"]) == len(out_of_box(design))
    assert got["oob"] == out_of_box(design)
    valid = np.broadcast_to(r.valid[:, None, :], r.margin.shape[1:])
    assert int(n_cases) == valid.sum()
    assert int(n_failing) == np.count_nonzero(r.bits[0][valid])
    assert int(violations) == np.bitwise_or.reduce(r.bits[0][valid])

    assert got["taps"] == list(names)
    # the full table, indexed [driver tap, edge, receiver tap]; NaN where no such case
    expected = np.full((n, 2, n), np.nan)
    for i, d in enumerate(r.drivers):
        for j, e in enumerate(r.edges):
            for k, c in enumerate(r.receivers):
                if c != d:
                    expected[names.index(d), ("rise", "fall").index(e), names.index(c)] = r.margin[0, i, j, k]
    assert len(got["table"]) == 2 * n * n
    for idx, value in got["table"].items():
        assert same(value, expected.flat[idx]), f"table[{idx}]"
    for k in range(n):
        col = expected[:, :, k][~np.isnan(expected[:, :, k])]
        assert same(got["rmargin"][k], float(col.min()) if col.size else math.nan), f"receiver {names[k]}"
    assert got["param"] == {p: float(v) for p, v in design.params.items()}


@pytest.mark.parametrize("design_file, driver, edge, tap, settings", [
    pytest.param(SHORT, "CTRL", "fall", "MEM3", ["lines.route.z0=47.5"], id="short-bus-fall"),
    pytest.param(BACKPLANE, "SLOT1", "rise", "SLOT8", [], id="backplane-rise"),
])
def test_waveform_matches_python(programs, design_file, driver, edge, tap, settings):
    out = run(programs["api_probe"], "wave", design_file, driver, edge, tap, *settings).stdout.splitlines()
    sets = {f[1]: float(f[2]) for f in (line.split() for line in out) if f[0] == "set"}
    start = next(i for i, line in enumerate(out) if line.startswith("wave "))
    n = int(out[start].split()[1])
    tv = np.array([[float(x) for x in line.split()] for line in out[start + 1:start + 1 + n]])
    design = budget.load(design_file).with_values(sets) if sets else budget.load(design_file)
    w = budget.simulate(design, driver, edge)
    assert n == w.t.shape[0]
    assert np.array_equal(tv[:, 0], w.t)
    assert np.array_equal(tv[:, 1], w[tap])


def test_batch_matches_python(programs):
    args = ["batch", SHORT, 24, "lines.route.z0", 35, 65, "termination.0.r", 0.5, 27]
    out = run(programs["api_probe"], *args).stdout.splitlines()
    values: dict[str, dict[int, float]] = {}
    worst, passed, rc = {}, {}, None
    for f in (line.split() for line in out):
        if f[0] == "value":
            values.setdefault(f[2], {})[int(f[1])] = float(f[3])
        elif f[0] == "variant":
            worst[int(f[1])], passed[int(f[1])] = float(f[2]), int(f[3])
        elif f[0] == "batch":
            rc = int(f[1])
    cols = {p: np.array([v[i] for i in range(24)]) for p, v in values.items()}
    r = sweep(budget.load(SHORT), cols, keep="margin")
    assert [worst[i] for i in range(24)] == list(r.worst_margin)
    assert [passed[i] for i in range(24)] == [int(x) for x in r.passed]
    assert 0 < sum(passed.values()) < 24, "the range should hold passing and failing variants"
    assert rc == CONST["BB_FAIL"]


# ---------------------------------------------------------------------------
# bad input: every case the C program tries, with the status it must get

ERROR_CASES = [
    # (case name in api_probe.c, expected status, text the message must contain)
    ("open_file_null_path", "BB_ERR_NULL", "path"),
    ("open_file_null_handle", "BB_ERR_NULL", "design"),
    ("open_file_missing", "BB_ERR_FILE", "/nonexistent/board.toml"),
    ("open_file_nonphysical", "BB_ERR_DESIGN", "z0"),
    ("open_text_null", "BB_ERR_NULL", "toml"),
    ("open_text_not_toml", "BB_ERR_DESIGN", "TOML"),
    ("open_text_incomplete", "BB_ERR_DESIGN", "edge"),
    ("open_text_not_utf8", "BB_ERR_DESIGN", "UTF-8"),
    ("close_twice", "BB_ERR_HANDLE", "not open"),
    ("close_never_opened", "BB_ERR_HANDLE", "987654"),
    ("set_after_close", "BB_ERR_HANDLE", "not open"),
    ("check_handle_zero", "BB_ERR_HANDLE", "handle 0"),
    ("set_null_path", "BB_ERR_NULL", "path"),
    ("set_unknown_path", "BB_ERR_PATH", "lines.route.zz"),
    ("set_nan", "BB_ERR_VALUE", "finite"),
    ("set_infinite", "BB_ERR_VALUE", "finite"),
    ("set_negative_z0", "BB_ERR_VALUE", "positive"),
    ("set_zero_length", "BB_ERR_VALUE", "length"),
    ("get_unknown_path", "BB_ERR_PATH", "parts.nobody.c_pin"),
    ("get_null_value", "BB_ERR_NULL", "value"),
    ("param_count_null", "BB_ERR_NULL", "count"),
    ("param_name_out_of_range", "BB_ERR_ARGUMENT", "100000"),
    ("param_name_small_buffer", "BB_ERR_SIZE", "bytes"),
    ("tap_count_null", "BB_ERR_NULL", "count"),
    ("tap_name_negative_index", "BB_ERR_ARGUMENT", "-1"),
    ("tap_name_null_buffer", "BB_ERR_NULL", "buf"),
    ("check_null_result", "BB_ERR_NULL", "result"),
    ("receiver_margins_null", "BB_ERR_NULL", "margins"),
    ("receiver_margins_wrong_count", "BB_ERR_SIZE", "n_taps = 4"),
    ("margin_table_wrong_count", "BB_ERR_SIZE", "= 32"),
    ("out_of_box_count_null", "BB_ERR_NULL", "count"),
    ("out_of_box_null_path", "BB_ERR_NULL", "path"),
    ("out_of_box_index_out_of_range", "BB_ERR_ARGUMENT", "0 value(s) outside"),
    ("waveform_null_n_samples", "BB_ERR_NULL", "n_samples"),
    ("waveform_null_driver", "BB_ERR_NULL", "driver"),
    ("waveform_null_arrays", "BB_ERR_NULL", "is NULL"),
    ("waveform_unknown_driver", "BB_ERR_ARGUMENT", "U99"),
    ("waveform_receiver_cannot_drive", "BB_ERR_ARGUMENT", "cannot drive"),
    ("waveform_bad_edge", "BB_ERR_ARGUMENT", "edge"),
    ("waveform_unknown_tap", "BB_ERR_ARGUMENT", "MEM9"),
    ("waveform_small_capacity", "BB_ERR_SIZE", "capacity is 16"),
    ("batch_null_paths", "BB_ERR_NULL", "paths"),
    ("batch_null_path_entry", "BB_ERR_NULL", "paths[0]"),
    ("batch_null_values", "BB_ERR_NULL", "values"),
    ("batch_null_worst", "BB_ERR_NULL", "worst_margin"),
    ("batch_zero_paths", "BB_ERR_SIZE", "n_paths"),
    ("batch_zero_variants", "BB_ERR_SIZE", "n_variants"),
    ("batch_unknown_path", "BB_ERR_PATH", "lines.route.zz"),
    ("batch_duplicate_path", "BB_ERR_ARGUMENT", "more than once"),
    ("batch_nan_value", "BB_ERR_VALUE", "variant 1"),
    ("batch_negative_z0", "BB_ERR_VALUE", "positive"),
    ("version_small_text", "BB_ERR_SIZE", "bytes"),
    ("runtime_info_null", "BB_ERR_NULL", "buf"),
    ("runtime_info_small", "BB_ERR_SIZE", "bytes"),
    ("last_error_small_buffer", "BB_ERR_SIZE", "/"),      # the message, cut to 1 byte
    ("last_error_null", "BB_ERR_NULL", "-"),
    ("set_implausible_c_pin", "BB_ERR_VALUE", "did you mean 3.1 pF?"),
    ("set_huge_c_pin", "BB_ERR_VALUE", "not a plausible pin capacitance"),
    ("set_text_null_path", "BB_ERR_NULL", "path"),
    ("set_text_null_value", "BB_ERR_NULL", "value"),
    ("set_text_unknown_path", "BB_ERR_PATH", "lines.route.zz"),
    ("set_text_wrong_unit", "BB_ERR_VALUE", "resistance"),
    ("set_text_ambiguous_unit", "BB_ERR_VALUE", "milli"),
    ("set_text_expression", "BB_ERR_VALUE", "no expressions"),
    ("set_text_implausible", "BB_ERR_VALUE", "did you mean 2 nH?"),
    ("success_keeps_message", "BB_OK", "z0: must be positive"),
    # API version 3
    ("tolerance_count_null", "BB_ERR_NULL", "count"),
    ("tolerance_null_path", "BB_ERR_NULL", "path"),
    ("tolerance_index_out_of_range", "BB_ERR_ARGUMENT", "has 5 entries"),
    ("tolerance_small_buffer", "BB_ERR_SIZE", "bytes"),
    ("reset_closed_handle", "BB_ERR_HANDLE", "not open"),
    ("log_nothing_yet", "BB_ERR_ARGUMENT", "no bb_check or bb_judge"),
    ("log_null_path", "BB_ERR_NULL", "log_path"),
    ("log_null_serial", "BB_ERR_NULL", "serial"),
    ("log_empty_serial", "BB_ERR_ARGUMENT", "serial must be a non-empty string"),
    ("log_serial_control_character", "BB_ERR_ARGUMENT", "control characters"),
    ("log_directory", "BB_ERR_FILE", "is a directory"),
    ("log_cannot_open", "BB_ERR_FILE", "/nonexistent-dir/bench.jsonl: cannot open the log"),
    ("log_disk_full", "BB_ERR_RECORD", "the disk is full; the log is unchanged"),
    ("log_after_reset", "BB_ERR_ARGUMENT", "since it was opened or reset"),
    ("judge_null_driver", "BB_ERR_NULL", "driver"),
    ("judge_null_receiver", "BB_ERR_NULL", "receiver"),
    ("judge_null_t", "BB_ERR_NULL", "argument t is NULL"),
    ("judge_null_result", "BB_ERR_NULL", "result"),
    ("judge_one_sample", "BB_ERR_SIZE", "n_samples is 1"),
    ("judge_huge_count", "BB_ERR_SIZE", "20000000"),
    ("judge_unknown_receiver", "BB_ERR_ARGUMENT", "MEM9"),
    ("judge_receiver_is_driver", "BB_ERR_ARGUMENT", "is the driver"),
    ("judge_driver_cannot_drive", "BB_ERR_ARGUMENT", "MEM2"),
    ("judge_bad_edge", "BB_ERR_ARGUMENT", "edge"),
    ("judge_negative_guardband", "BB_ERR_ARGUMENT", "guardband"),
    ("judge_infinite_t_edge", "BB_ERR_ARGUMENT", "t_edge"),
    ("judge_misses_edge", "BB_ERR_CAPTURE", "never reaches VIL"),
    ("judge_nan_sample", "BB_ERR_CAPTURE", "sample 3 is nan"),
    ("judge_time_repeated", "BB_ERR_CAPTURE", "<capture from C>"),
    ("judge_window_cuts_edge", "BB_ERR_CAPTURE", "the window cuts the edge"),
    ("batch_too_many_variants", "BB_ERR_SIZE", "n_variants is 10000001"),
    ("batch_size_max_variants", "BB_ERR_SIZE", "MAX_BATCH_VARIANTS"),
    ("batch_too_many_paths", "BB_ERR_SIZE", "n_paths is 1000"),
]


@pytest.fixture(scope="module")
def error_run(programs, tmp_path_factory):
    bad = tmp_path_factory.mktemp("designs") / "negative_z0.toml"
    text = SHORT.read_text(encoding="utf-8")
    assert 'z0 = "45 ohm"' in text
    bad.write_text(text.replace('z0 = "45 ohm"', 'z0 = "-45 ohm"'), encoding="utf-8")
    out = run(programs["api_probe"], "errors", SHORT, bad).stdout
    cases = {}
    for line in out.splitlines():
        if line.startswith("case "):
            _, name, status, *message = line.split(" ")
            cases[name] = (int(status), " ".join(message))
    return out, cases


def test_error_table_covers_every_case_and_code(error_run):
    _, cases = error_run
    assert set(cases) == {name for name, _, _ in ERROR_CASES}
    codes = {code for _, code, _ in ERROR_CASES}
    # BB_ERR_INTERNAL means a bug, so no input can provoke it: see test_unexpected_exceptions_are_internal.
    # BB_ERR_SIMULATION: the values that broke the numerics (a c_pin of 1e300 F) are now refused as
    # implausible when set, so no input reaches it from C (status_of still maps SimulationError to it)
    assert {n for n in capi.STATUS_NAMES if n.startswith("BB_ERR_")} - codes == {"BB_ERR_INTERNAL",
                                                                                 "BB_ERR_SIMULATION"}


def test_impossible_batch_counts_leave_the_buffers_untouched(error_run):
    """bb_batch refuses an impossible count with BB_ERR_SIZE before it writes the caller's buffers."""
    out, cases = error_run
    flags = {f[1]: int(f[2]) for f in (line.split() for line in out.splitlines()) if f[0] == "untouched"}
    assert flags == {"batch_too_many_variants": 1, "batch_size_max_variants": 1, "batch_too_many_paths": 1}


@pytest.mark.parametrize("name, code, text", ERROR_CASES, ids=[c[0] for c in ERROR_CASES])
def test_bad_input_from_c(error_run, name, code, text):
    _, cases = error_run
    status, message = cases[name]
    assert status == CONST[code], f"{name}: got {status}, message {message!r}"
    assert text in message
    assert message.strip(), "an error must come with a message (and a success keeps the last one)"


def test_failed_set_leaves_the_design_unchanged(error_run):
    out, _ = error_run
    assert "unchanged lines.route.z0 45\n" in out


def test_unexpected_exceptions_are_internal():
    status, message = capi.status_of(ZeroDivisionError("boom"))
    assert status == "BB_ERR_INTERNAL" and "ZeroDivisionError: boom" in message
    assert capi.status_of(budget.SimulationError("x"))[0] == "BB_ERR_SIMULATION"
    assert capi.status_of(budget.ArgumentError("x"))[0] == "BB_ERR_ARGUMENT"


# ---------------------------------------------------------------------------
# threads

def test_threads_get_the_sequential_results(programs):
    out = run(programs["threads"], SHORT).stdout.splitlines()
    summary = next(line.split() for line in out if line.startswith("summary"))
    threads, iterations, mismatches, error_mismatches = map(int, summary[1:])
    assert threads >= 4 and iterations >= 3
    assert (mismatches, error_mismatches) == (0, 0)
    design = budget.load(SHORT)
    refs = [line.split() for line in out if line.startswith("ref ")]
    assert len(refs) == threads * iterations
    for _, _, _, z0, worst in refs:
        r = sweep(design.with_values({"lines.route.z0": float(z0)}))
        assert same(float(worst), float(r.worst_margin[0])), f"z0={z0}"
    batches: dict[int, list] = {}
    for _, k, _, z0, worst in (line.split() for line in out if line.startswith("batch ")):
        batches.setdefault(int(k), []).append((float(z0), float(worst)))
    for rows in batches.values():
        r = sweep(design, {"lines.route.z0": np.array([z for z, _ in rows])}, keep="margin")
        assert [w for _, w in rows] == list(r.worst_margin)
    shared = float(next(line.split()[1] for line in out if line.startswith("shared ")))
    assert same(shared, float(sweep(design).worst_margin[0]))


# ---------------------------------------------------------------------------
# the rig example

def test_rig_example_passes(programs):
    proc = run(programs["rig_check"], SHORT, "lines.route.z0=47.9", "parts.hub_ctrl.r_high=21.5", expect=0)
    r = sweep(budget.load(SHORT).with_values({"lines.route.z0": 47.9, "parts.hub_ctrl.r_high": 21.5}))
    assert bool(r.passed[0])
    assert "verdict: PASS" in proc.stdout
    assert f"worst margin: {r.worst_margin[0]:.4f} V" in proc.stdout


def test_rig_example_fails_with_exit_1(programs):
    proc = run(programs["rig_check"], SHORT, "lines.route.z0=55", "termination.0.r=2", expect=1)
    unit = budget.load(SHORT).with_values({"lines.route.z0": 55.0, "termination.0.r": 2.0})
    r = sweep(unit)
    assert not bool(r.passed[0])
    assert "verdict: FAIL" in proc.stdout
    assert f"worst margin: {r.worst_margin[0]:.4f} V" in proc.stdout
    drv, edge, rcv = r.worst_index(0)
    assert (f"worst case: driver {drv}, receiver {rcv}, {'rising' if edge == 'rise' else 'falling'} edge, "
            f"headroom {r.worst_headroom[0]:.4f} V") in proc.stdout
    # both measured values lie outside the design's box: evaluated, and said so
    flagged = [line for line in proc.stdout.splitlines() if line.startswith("outside the tolerance box: ")]
    assert [line.split()[4] for line in flagged] == [o["path"] for o in out_of_box(unit)]
    assert [o["path"] for o in out_of_box(unit)] == ["lines.route.z0", "termination.0.r"]


@pytest.mark.parametrize("args, text", [
    pytest.param(["/nonexistent/board.toml", "a=1", "b=2"], "cannot open", id="missing-file"),
    pytest.param([SHORT, "lines.route.zz=45", "termination.0.r=2"], "lines.route.zz", id="unknown-path"),
    pytest.param([SHORT, "lines.route.z0=-45", "termination.0.r=2"], "positive", id="non-physical"),
    pytest.param([SHORT, "lines.route.z0", "termination.0.r=2"], "PATH=VALUE", id="not-a-measurement"),
])
def test_rig_example_bad_input_exits_2(programs, args, text):
    proc = run(programs["rig_check"], *args, expect=2)
    assert text in proc.stderr


# ---------------------------------------------------------------------------
# the runtime cannot start: every call returns 0, which no caller may read as success

def _empty_env(tmp_path) -> str:
    """python of a fresh virtual environment without busbudget (nor cffi's backend)."""
    env_dir = tmp_path / "empty-env"
    base = getattr(sys, "_base_executable", sys.executable)
    subprocess.run([base, "-m", "venv", "--without-pip", str(env_dir)], check=True, timeout=120)
    return str(env_dir / "bin" / "python")


@pytest.mark.parametrize("setting, stderr_text", [
    pytest.param("empty-env", "has no cffi (importing _cffi_backend", id="environment-without-the-package"),
    pytest.param("BUSBUDGET_PYTHON=/nonexistent/bin/python", "is not an executable file", id="python-missing"),
    pytest.param("PYTHONHOME=/nonexistent", "holds no Python", id="pythonhome-without-stdlib"),
])
def test_runtime_not_started_reads_as_failure(programs, tmp_path, setting, stderr_text):
    """The runtime cannot start: every call returns 0 (BB_NOT_STARTED), the host process lives on.

    (Without the library's own start-up checks a PYTHONHOME without a standard
    library makes CPython exit the whole host process.)
    """
    name, value = ("BUSBUDGET_PYTHON", _empty_env(tmp_path)) if setting == "empty-env" else setting.split("=")
    env = child_env(**{name: value})
    _not_started(programs, env, stderr_text)     # one line on stderr, the reason in bb_last_error
    proc = run(programs["api_probe"], "check", SHORT, env=env, expect=3)
    assert "not-started bb_open_file" in proc.stdout
    proc = run(programs["rig_check"], SHORT, "lines.route.z0=47.9", "termination.0.r=27", env=env, expect=2)
    assert "did not start" in proc.stderr
    run(programs["threads"], SHORT, env=env, expect=3)


def test_package_hidden_reads_as_failure(programs, tmp_path):
    """A module search path that shadows busbudget: the init code fails and says why."""
    fake = tmp_path / "shadow" / "budget"
    fake.mkdir(parents=True)
    (fake / "__init__.py").write_text('raise ImportError("busbudget hidden by the test")\n')
    env = child_env(PYTHONPATH=str(fake.parent))
    proc = _not_started(programs, env, "cannot import the busbudget package")
    assert "busbudget hidden by the test" in proc.stderr


# ---------------------------------------------------------------------------
# read-only installs: the compiled-kernel cache goes where NUMBA_CACHE_DIR says

@pytest.mark.slow
def test_kernel_cache_directory_is_configurable(programs, tmp_path):
    """With NUMBA_CACHE_DIR set, the library compiles into (and later loads from) that directory.

    That is what a read-only install needs.  (The tests run as a user that may
    write anywhere, so the package directory itself is not made read-only here.)
    """
    cache = tmp_path / "kernel-cache"
    env = child_env(NUMBA_CACHE_DIR=str(cache))
    proc = run(programs["api_probe"], "init", env=env)
    assert f"NUMBA_CACHE_DIR {cache}" in proc.stdout
    got = parse_check(run(programs["api_probe"], "check", SHORT, env=env).stdout)
    assert same(float(got["check"][2]), float(sweep(budget.load(SHORT)).worst_margin[0]))
    assert list(cache.rglob("*.nbi")), "no kernel cache index written to NUMBA_CACHE_DIR"


# ---------------------------------------------------------------------------
# API version 3: tolerance box, reset, judge, log -- compared with Python to the bit (%a / float.hex)

def hexfloat(text: str) -> float:
    """A double printed by C's %a ("nan" and "inf" included)."""
    return float(text) if text.lstrip("-") in ("nan", "inf") else float.fromhex(text)


def same_bits(a: float, b: float) -> bool:
    """The same IEEE double, bit for bit (NaN equal to NaN)."""
    return float(a).hex() == float(b).hex() or (math.isnan(a) and math.isnan(b))


def read_log(path: Path) -> list:
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]


def cli(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "budget.cli", *map(str, args)], capture_output=True, text=True,
                          timeout=RUN_TIMEOUT, env=child_env())


RIG_SETTINGS = ["lines.route.z0=47.5", "parts.mem_load.c_pin=2.2 pF", "termination.0.r=22.4"]


def test_tolerance_box_reset_and_check_record_match_python_and_the_cli(programs, tmp_path):
    log = tmp_path / "bench.jsonl"
    out = run(programs["api_probe"], "rig", SHORT, log, "WREN-0042", *RIG_SETTINGS).stdout.splitlines()
    design = budget.load(SHORT)
    # the tolerance box: the one budget.Design holds (and check varies), to the bit
    box = [(f[1], hexfloat(f[2]), hexfloat(f[3])) for f in (line.split() for line in out) if f[0] == "tolerance"]
    assert int(next(line.split()[1] for line in out if line.startswith("tolerance-count"))) == len(box)
    assert [p for p, _, _ in box] == list(design.tolerances)
    for p, lo, hi in box:
        assert same_bits(lo, design.tolerances[p][0]) and same_bits(hi, design.tolerances[p][1]), p
    # the check with the measured values
    unit = design.with_values({"lines.route.z0": 47.5, "parts.mem_load.c_pin": "2.2 pF", "termination.0.r": 22.4})
    check_set = next(line.split() for line in out if line.startswith("check-set"))
    assert same_bits(hexfloat(check_set[2]), float(sweep(unit).worst_margin[0]))
    # bb_reset: every value back to the file's, and the check is the nominal one
    reset = {f[1]: hexfloat(f[2]) for f in (line.split() for line in out) if f[0] == "reset-param"}
    assert reset.keys() == design.params.keys()
    assert all(same_bits(reset[p], float(v)) for p, v in design.params.items())
    assert int(next(line.split()[1] for line in out if line.startswith("log-after-reset"))) == CONST["BB_ERR_ARGUMENT"]
    check_reset = next(line.split() for line in out if line.startswith("check-reset"))
    nominal = sweep(design)
    assert same_bits(hexfloat(check_reset[2]), float(nominal.worst_margin[0]))
    # the record: the Python API's nominal check of the unit, in the CLI's record format
    (rec,) = read_log(log)
    from budget.records import hash_inputs, make_record, margins_by_receiver, sha256_file
    doc = check(unit, nominal=True).to_json()
    expect = make_record(serial="WREN-0042", command="check", verdict=doc["verdict"],
                         design_sha256=sha256_file(SHORT), inputs_sha256=hash_inputs(settings=RIG_SETTINGS),
                         worst=doc["worst"], margins=margins_by_receiver(doc["results"]), time=rec["time"])
    assert rec == json.loads(json.dumps(expect))
    # `busbudget check --nominal --set ... --log --serial` writes the same record; only its numbers may differ
    # by the discretisation, because the CLI narrows the tolerance box to the measured values (the box sets
    # the time step), while bb_check evaluates the design as bb_set left it
    cli_log = tmp_path / "cli.jsonl"
    proc = cli("check", "--nominal", SHORT, *[a for s in RIG_SETTINGS for a in ("--set", s)], "--log", cli_log,
               "--serial", "WREN-0042", "--json")
    assert proc.returncode == 0, proc.stderr
    (cli_rec,) = read_log(cli_log)
    for key in ("schema", "serial", "command", "design_sha256", "inputs_sha256", "verdict", "tool_version"):
        assert rec[key] == cli_rec[key], key
    for key in ("driver", "receiver", "edge", "corner", "metric", "limit", "violations", "analysis"):
        assert rec["worst"][key] == cli_rec["worst"][key], key
    assert rec["margins"].keys() == cli_rec["margins"].keys()
    for name, m in rec["margins"].items():
        # within the engine's accuracy target, 1 % of the 2.5 V swing (docs/metrics.md, "Accuracy target")
        assert m == pytest.approx(cli_rec["margins"][name], abs=0.025), name
    r_unit = sweep(unit)
    for k, name in enumerate(r_unit.receivers):    # worst margin per receiver over drivers and edges
        col = r_unit.margin[0, :, :, k][r_unit.valid[:, k]]
        assert same_bits(rec["margins"][name], float(col.min())), name


def _capture(design, driver, edge, receiver, *, dt=20e-12, pre=2e-9, shift=1.3e-9, noise=0.0, offset=0.0,
             seed=7, stop=None):
    """A bench-like capture of the engine's waveform: resampled, pre-trigger samples, time origin at a trigger
    ``shift`` after the ramp start, Gaussian noise [V rms] and a probe offset [V]."""
    w = budget.simulate(design, driver, edge)
    stop = float(w.t[-1]) if stop is None else stop
    t_sim = np.arange(-pre, stop, dt)
    v = np.interp(t_sim, w.t, w[receiver], left=float(w[receiver][0]))
    v = v + offset + np.random.default_rng(seed).normal(0.0, noise, t_sim.size) if noise or offset else v
    return t_sim - shift, v, -shift    # capture time axis, volts, t_edge on that axis


JUDGE_CASES = [
    # (driver, edge, receiver, noise [V rms], offset [V], guardband [V], t_edge known)
    pytest.param("CTRL", "rise", "MEM3", 0.0, 0.0, 0.0, True, id="clean-rise-timed"),
    pytest.param("CTRL", "fall", "MEM1", 0.008, 0.012, 0.02, False, id="noisy-fall-offset-guardband"),
    pytest.param("CTRL", "rise", "MEM2", 0.004, -0.01, 0.05, True, id="noisy-rise-timed-guardband"),
]


@pytest.mark.parametrize("driver, edge, receiver, noise, offset, guardband, timed", JUDGE_CASES)
def test_judge_and_its_record_match_python_and_the_cli(programs, tmp_path, driver, edge, receiver, noise, offset,
                                                       guardband, timed):
    from budget.capture import Capture
    from budget.judge import judge_capture
    from budget.records import hash_inputs, sha256_bytes, sha256_file

    design = budget.load(SHORT).with_values({"lines.route.z0": 47.5})
    t, v, t_edge = _capture(design, driver, edge, receiver, noise=noise, offset=offset)
    capture = tmp_path / "capture.hex"
    capture.write_text("".join(f"{a.hex()} {b.hex()}\n" for a, b in zip(t.tolist(), v.tolist())))
    log = tmp_path / "bench.jsonl"
    out = run(programs["api_probe"], "judge", SHORT, driver, edge, receiver, repr(guardband),
              repr(t_edge) if timed else "nan", capture, log, "WREN-0117", "lines.route.z0=47.5").stdout
    got = {}
    for line in out.splitlines():
        f = line.split()
        if f[0] == "judge":
            status, n = int(f[1]), int(f[2])
        elif f[0] == "ints":
            got.update(zip(("passed", "violations", "limit", "monotonic"), map(int, f[1:])))
        elif len(f) == 2 and f[0] not in ("set", "log"):
            got[f[0]] = hexfloat(f[1])
    assert n == t.size
    rep = judge_capture(design, Capture.from_arrays(t, {receiver: v}, source="<capture from C>"), driver, edge,
                        guardband=guardband, t_edge=t_edge if timed else None)
    (row,) = rep.to_json()["results"]
    assert status == (CONST["BB_OK"] if row["pass"] else CONST["BB_FAIL"])
    assert got["passed"] == int(row["pass"]) and got["monotonic"] == int(row["monotonic"])
    assert got["violations"] == sum(bit for bit, name in mk.VIOLATION_NAMES if name in row["violations"])
    assert got["limit"] == ("margin", "v_max", "v_min").index(row["limit"])
    expect = {k: row[k] for k in ("headroom", "v_lo", "v_hi", "overshoot", "undershoot", "ringback", "v_peak",
                                  "v_trough", "t_switch", "t_valid", "settle_time", "flight_min", "flight_max",
                                  "offset", "noise_sigma", "hysteresis")}
    expect["margin"] = row["margin_high"] if edge == "rise" else row["margin_low"]
    for k, x in expect.items():
        assert same_bits(got[k], math.nan if x is None else x), f"{k}: C {got[k]!r}, Python {x!r}"
    assert timed == (not math.isnan(got["flight_min"]))
    # the record: as `busbudget judge` writes it (the capture hashed as arrays instead of a file)
    (rec,) = read_log(log)
    assert rec["command"] == "judge" and rec["serial"] == "WREN-0117"
    assert rec["design_sha256"] == sha256_file(SHORT)
    arrays = sha256_bytes(t.astype("<f8").tobytes() + v.astype("<f8").tobytes())
    assert rec["inputs_sha256"] == {**hash_inputs(settings=["lines.route.z0=47.5"]), "<capture from C>": arrays}
    csv = tmp_path / "capture.csv"
    csv.write_text(f"time,{receiver}\n" + "".join(f"{a!r},{b!r}\n" for a, b in zip(t.tolist(), v.tolist())))
    cli_log = tmp_path / "cli.jsonl"
    proc = cli("judge", SHORT, "--capture", csv, "--driver", driver, "--edge", edge, "--guardband", guardband,
               *([f"--t-edge={t_edge!r}"] if timed else []), "--set", "lines.route.z0=47.5",
               "--log", cli_log, "--serial", "WREN-0117")
    assert proc.returncode in (0, 1), proc.stderr
    (cli_rec,) = read_log(cli_log)
    for key in ("schema", "serial", "command", "design_sha256", "verdict", "worst", "margins", "tool_version"):
        assert rec[key] == cli_rec[key], key
    assert cli_rec["inputs_sha256"]["--set"] == rec["inputs_sha256"]["--set"]


def test_log_from_several_threads_keeps_every_record_whole(programs, tmp_path):
    """4 C threads x 25 bb_log calls into one log: 100 whole records, each with its thread's numbers."""
    log = tmp_path / "shared.jsonl"
    out = run(programs["api_probe"], "logthreads", SHORT, log, 4, 25).stdout
    assert out.split() == [x for i in range(4) for x in ("thread", str(i), "0")]
    lines = log.read_bytes().split(b"\n")
    assert lines[-1] == b"" and len(lines) == 101           # every record ends its line
    recs = [json.loads(line) for line in lines[:-1]]
    design = budget.load(SHORT)
    for i in range(4):
        mine = [r for r in recs if r["serial"] == f"T{i}"]
        assert len(mine) == 25
        r = sweep(design.with_values({"lines.route.z0": 44.0 + i}))
        assert all(same_bits(min(m["margins"].values()), float(r.worst_margin[0])) for m in mine)


# ---------------------------------------------------------------------------
# a relocatable build: SONAME, $ORIGIN run path, pkg-config

def _readelf(lib: Path) -> str:
    readelf = shutil.which("readelf")
    assert readelf, "readelf (binutils) is needed to read the library's dynamic section"
    return subprocess.run([readelf, "-d", str(lib)], capture_output=True, text=True, check=True).stdout


def _moved_build(libdir: Path, dest: Path) -> Path:
    """The build directory copied elsewhere as a whole (library, link, header, pkg-config file)."""
    dest.mkdir()
    for name in ("libbusbudget.so.3", "busbudget.h", "busbudget.pc"):
        shutil.copy2(libdir / name, dest / name)
    (dest / "libbusbudget.so").symlink_to("libbusbudget.so.3")
    return dest


def test_library_has_a_soname_and_an_origin_run_path(libdir):
    dyn = _readelf(libdir / "libbusbudget.so.3")
    assert "Library soname: [libbusbudget.so.3]" in dyn
    run_path = re.search(r"Library (?:runpath|rpath): \[(.*?)\]", dyn).group(1).split(":")
    assert run_path[0] == "$ORIGIN", run_path          # a libpython next to the library comes first
    assert os.readlink(libdir / "libbusbudget.so") == "libbusbudget.so.3"


@pytest.mark.skipif(shutil.which("pkg-config") is None, reason="no pkg-config")
def test_moved_build_links_with_pkg_config_and_runs(libdir, tmp_path):
    moved = _moved_build(libdir, tmp_path / "rig-sdk")
    env = child_env(PKG_CONFIG_PATH=str(moved))
    flags = subprocess.run(["pkg-config", "--cflags", "--libs", "busbudget"], capture_output=True, text=True,
                           env=env, check=True).stdout.split()
    assert f"-I{moved}" in flags and f"-L{moved}" in flags and "-lbusbudget" in flags
    exe = tmp_path / "rig"
    proc = subprocess.run([CC, *CFLAGS, str(CEXPORT / "examples" / "rig_check.c"), *flags, "-o", str(exe)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    ldd = subprocess.run(["ldd", str(exe)], capture_output=True, text=True, check=True).stdout
    assert f"libbusbudget.so.3 => {moved}/libbusbudget.so.3" in ldd, ldd   # the copy, not the build
    proc = run(exe, SHORT, "lines.route.z0=47.9", "parts.hub_ctrl.r_high=21.5", expect=0)
    r = sweep(budget.load(SHORT).with_values({"lines.route.z0": 47.9, "parts.hub_ctrl.r_high": 21.5}))
    assert f"worst margin: {r.worst_margin[0]:.4f} V" in proc.stdout


# ---------------------------------------------------------------------------
# start-up failures: no kill, one line on stderr, every call BB_NOT_STARTED, the reason kept

def _not_started(programs, env, reason: str) -> subprocess.CompletedProcess:
    """Run `api_probe init` in ``env``: the runtime must not start, and say ``reason`` everywhere."""
    proc = run(programs["api_probe"], "init", env=env, expect=3)
    out = proc.stdout.splitlines()
    assert out[0].startswith(f"version {CONST['BB_NOT_STARTED']} -1")
    last = next(line for line in out if line.startswith("last-error "))
    info = next(line for line in out if line.startswith("runtime-info-not-started "))
    assert last.split()[1] == info.split()[1] == str(CONST["BB_NOT_STARTED"])
    assert reason in last and reason in info, proc.stdout
    assert next(line for line in out if line.startswith("other-calls")) == f"other-calls {CONST['BB_NOT_STARTED']}"
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("libbusbudget: the runtime did not start"), proc.stderr
    assert reason in lines[0] and "Traceback" not in proc.stderr
    return proc


def _libpython() -> Path:
    import sysconfig
    name = sysconfig.get_config_var("INSTSONAME") or sysconfig.get_config_var("LDLIBRARY")
    path = Path(sysconfig.get_config_var("LIBDIR")) / name
    assert path.is_file(), path
    return path


def _bare_tree(tmp_path: Path, stdlib_version: str | None = None) -> Path:
    """A copied python executable in a tree without this Python's standard library (another X.Y's if asked)."""
    tree = tmp_path / "bare-python"
    (tree / "bin").mkdir(parents=True)
    shutil.copy2(os.path.realpath(getattr(sys, "_base_executable", sys.executable)), tree / "bin" / "python")
    if stdlib_version:
        lib = tree / "lib" / f"python{stdlib_version}"
        lib.mkdir(parents=True)
        (lib / "os.py").write_text("# the landmark of a standard library, not a real one\n")
    return tree


def test_copied_libpython_without_a_standard_library_is_not_fatal(libdir, tmp_path):
    """A rig bundle with libpython copied next to the library, pointed at a tree without the standard library."""
    moved = _moved_build(libdir, tmp_path / "bundle")
    shutil.copy2(_libpython(), moved / _libpython().name)
    exe = moved / "api_probe"
    proc = subprocess.run([CC, *CFLAGS, f"-I{moved}", str(CEXPORT / "tests" / "api_probe.c"), f"-L{moved}",
                           "-lbusbudget", f"-Wl,-rpath,{moved}", "-pthread", "-lm", "-o", str(exe)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    ldd = subprocess.run(["ldd", str(exe)], capture_output=True, text=True, check=True).stdout
    assert f"{_libpython().name} => {moved}/{_libpython().name}" in ldd, ldd     # the copy, through $ORIGIN
    progs = {"api_probe": exe}
    tree = _bare_tree(tmp_path)
    _not_started(progs, child_env(BUSBUDGET_PYTHON=str(tree / "bin" / "python")),
                 f"has no Python {sys.version_info.major}.{sys.version_info.minor} standard library")
    _not_started(progs, child_env(PYTHONHOME=str(tree)), "holds no Python")
    # and with a sane environment the copied libpython serves
    out = run(exe, "init").stdout
    assert out.startswith(f"version {CONST['BB_OK']} {CONST['BB_API_VERSION']}")


def test_python_version_mismatch_names_both_versions(programs, tmp_path):
    built = f"{sys.version_info.major}.{sys.version_info.minor}"
    # a virtual environment of another Python (its pyvenv.cfg says which)
    venv = tmp_path / "venv-other"
    (venv / "bin").mkdir(parents=True)
    (venv / "bin" / "python").symlink_to(os.path.realpath(getattr(sys, "_base_executable", sys.executable)))
    (venv / "pyvenv.cfg").write_text(f"home = {Path(sys.base_prefix) / 'bin'}\nversion = 3.99.2\n")
    proc = _not_started(programs, child_env(BUSBUDGET_PYTHON=str(venv / "bin" / "python")), "Python version mismatch")
    assert "Python 3.99.2 environment" in proc.stderr and f"built for Python {built}" in proc.stderr
    # an installation tree of another Python, as BUSBUDGET_PYTHON and as PYTHONHOME
    tree = _bare_tree(tmp_path, stdlib_version="3.99")
    proc = _not_started(programs, child_env(BUSBUDGET_PYTHON=str(tree / "bin" / "python")), "Python version mismatch")
    assert "Python 3.99 installation" in proc.stderr and f"built for Python {built}" in proc.stderr
    proc = _not_started(programs, child_env(PYTHONHOME=str(tree)), "Python version mismatch")
    assert "standard library of Python 3.99" in proc.stderr and f"built for Python {built}" in proc.stderr


def test_unwritable_kernel_cache_says_set_numba_cache_dir(programs, tmp_path):
    """No writable cache directory at all (a read-only install): the message says what to do."""
    blocker = tmp_path / "a-file"
    blocker.write_text("not a directory\n")
    # only the NUMBA_CACHE_DIR locator, pointed below a regular file: nowhere to write
    env = child_env(NUMBA_CACHE_DIR=str(blocker / "cache"), NUMBA_CACHE_LOCATOR_CLASSES="UserProvidedCacheLocator")
    _not_started(programs, env, "set NUMBA_CACHE_DIR to a writable directory")


def test_missing_package_is_named(programs, tmp_path):
    """A dependency that is not installed in the environment found: its name in the message."""
    shadow = tmp_path / "shadow" / "numba"
    shadow.mkdir(parents=True)
    (shadow / "__init__.py").write_text('raise ModuleNotFoundError("No module named \'numba\'", name="numba")\n')
    _not_started(programs, child_env(PYTHONPATH=str(shadow.parent)), "has no package 'numba'")


def _cache_lines(text: str) -> list:
    return re.findall(r"^kernel cache (\S+) \((\w+)\)$", text, flags=re.M)


def _numba_view(env) -> list:
    """numba's own choice of cache directory for the kernels, asked in a fresh Python with the same environment."""
    code = ("import budget.capi, budget.kernels.metrics as m\n"
            "d = [o for o in vars(m).values() if getattr(o, '_cache', None) is not None][0]\n"
            "print(d._cache._cache_path, type(d._cache._impl.locator).__name__)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120,
                         check=True).stdout.split()
    return [(out[0], out[1])]


def test_runtime_info_names_the_cache_numba_uses(programs, tmp_path):
    # unset: numba's in-tree cache next to the kernels (this checkout is writable)
    env = child_env()
    env.pop("NUMBA_CACHE_DIR", None)
    dirs = _cache_lines(run(programs["api_probe"], "init", env=env).stdout)
    assert dirs == _numba_view(env)
    assert list(Path(dirs[0][0]).glob("*.nbi")), "no kernel index where bb_runtime_info says the cache is"
    # set: a directory under NUMBA_CACHE_DIR, where the kernels are then written
    cache = tmp_path / "kernel-cache"
    env = child_env(NUMBA_CACHE_DIR=str(cache))
    dirs = _cache_lines(run(programs["api_probe"], "init", env=env).stdout)
    assert dirs == _numba_view(env) and dirs[0][0].startswith(str(cache) + os.sep)
    # set but not writable: numba falls back, and the info says so instead of naming the unused directory
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    env = child_env(NUMBA_CACHE_DIR=str(blocker / "cache"))
    out = run(programs["api_probe"], "init", env=env).stdout
    assert _cache_lines(out) == _numba_view(env) and not _cache_lines(out)[0][0].startswith(str(blocker))
    assert f"NUMBA_CACHE_DIR {blocker / 'cache'} is not used" in out


def test_rig_unit_example_checks_judges_and_logs(programs, tmp_path):
    """The documented rig program (docs/production-line.md): check, judge a capture, two records, reset."""
    from budget.capture import Capture
    from budget.judge import judge_capture

    unit = budget.load(SHORT).with_values({"lines.route.z0": 47.6, "termination.0.r": 22.4})
    t, v, _ = _capture(unit, "CTRL", "rise", "MEM3", noise=0.004, offset=0.003)
    capture = tmp_path / "unit0042_mem3.txt"
    capture.write_text("".join(f"{a!r} {b!r}\n" for a, b in zip(t.tolist(), v.tolist())))
    log = tmp_path / "bench.jsonl"
    proc = run(programs["rig_unit"], SHORT, log, "WREN-0042", capture, "CTRL", "rise", "MEM3",
               "lines.route.z0=47.6 ohm", "termination.0.r=22.4", expect=0)
    r = sweep(unit)
    assert f"budget check: PASS, worst margin {r.worst_margin[0]:.4f} V" in proc.stdout
    rep = judge_capture(unit, Capture.from_arrays(t, {"MEM3": v}), "CTRL", "rise", guardband=0.010)
    assert f"captured edge at MEM3: PASS, margin {rep.results[0]['margin_high']:.4f} V" in proc.stdout
    assert [rec["command"] for rec in read_log(log)] == ["check", "judge"]
    assert all(rec["serial"] == "WREN-0042" and rec["verdict"] == "pass" for rec in read_log(log))
    boxes = [line for line in proc.stdout.splitlines() if line.startswith("tolerance box: ")]
    assert [b.split()[2] for b in boxes] == list(budget.load(SHORT).tolerances)
