"""The bad-input table (issue 13, item 4): every reproducer found by fuzzing, one row each.

Each row is a hostile input to the loader, the command line or the sweep API.  It must
give exit 2 (CLI) or the package's own error (Python API) with a message naming where the
problem came from, no traceback, and within a time bound.  docs/cli.md "Limits and refused
inputs" lists the same rows for users.
"""
from __future__ import annotations

import math
import os
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest

import budget
from budget import limits
from budget.cli import main
from budget.errors import ArgumentError, BusBudgetError, DesignError

DESIGNS = Path(__file__).parent / "designs"
SHIPPED_IBIS = Path(budget.__file__).parent / "examples" / "ibis" / "tansy_tsx33.ibs"
ROBUST = (DESIGNS / "robust.toml").read_text()
SECONDS = 10.0          # per row: generous for a loaded 2-core machine; a hang or a minutes-long run fails it


def _design(tmp_path, text, name="bad.toml"):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def _replace(old, new):
    assert old in ROBUST, old
    return ROBUST.replace(old, new)


def _many_taps(n):
    """A fictional bus of n receivers on one trunk, driven from one end (only for size limits)."""
    head = ROBUST.split("[[segment]]")[0]
    segs = "".join(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "l"\nlength = "1 cm"\n\n'
                   for i in range(n))
    taps = '[[tap]]\nname = "TX"\nnode = "n0"\npart = "src"\n\n' + "".join(
        f'[[tap]]\nname = "R{i}"\nnode = "n{i + 1}"\npart = "dst"\n\n' for i in range(n))
    return head + segs + taps + '[tolerances]\n"lines.l.z0" = "10%"\n"parts.dst.c_pin" = "10%"\n'


def _many_transceivers(n):
    """A fictional bus of n transceivers with 1 cm stubs on a trunk, four toleranced values (16 corners):
    ``check --corners`` would be 17 variants x n drivers x 2 edges of about 2e4 steps x 3n nodes."""
    head = ROBUST.split("[parts.src]")[0]
    part = ('[parts.x]\nrole = "transceiver"\nv_high = "3.3 V"\nv_low = "0 V"\nr_high = "30 ohm"\n'
            'r_low = "30 ohm"\nc_pin = "4 pF"\nl_pkg = "3 nH"\nvih = "2 V"\nvil = "0.8 V"\n\n'
            '[lines.t]\nz0 = "60 ohm"\ndelay = "6.5 ns/m"\n\n')
    segs = "".join(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "t"\nlength = "1 cm"\n\n'
                   for i in range(n - 1))
    taps = "".join(f'[[tap]]\nname = "U{i}"\nnode = "n{i}"\npart = "x"\nstub = {{ line = "t", length = "1 cm" }}\n\n'
                   for i in range(n))
    tol = ('[tolerances]\n"lines.t.z0" = "10%"\n"parts.x.c_pin" = "20%"\n"parts.x.r_high" = "10%"\n'
           '"parts.x.r_low" = "10%"\n')
    return head + part + segs + taps + tol


# id -> (design text or None, argv after the design path, fragments every message must contain)
CLI_ROWS = {
    "toml-integer-too-big": (_replace('delay = "6.7 ns/m"', "er_eff = 1" + "0" * 400), ["check"],
                             ["er_eff", "too large"]),
    "toml-deep-nesting": (ROBUST + "\n[budget.extra]\nx = " + "[" * 50_000 + "]" * 50_000 + "\n", ["check"],
                          ["TOML"]),
    "monte-carlo-huge": (ROBUST, ["check", "--monte-carlo", "1000000000000"], ["--monte-carlo", "at most"]),
    "z0-power-expression": (_replace('z0 = "50 ohm"', 'z0 = "9**9**9 ohm"'), ["check"], ["[lines.l] z0"]),
    "dt-power-expression": (ROBUST, ["waves", "--driver", "TX", "--edge", "rise", "--csv", "-",
                                     "--dt", "9**9**9 s"], ["--dt"]),
    "tolerance-crosses-threshold": (_replace('"lines.l.z0" = "10%"', '"lines.l.z0" = "10%"\n'
                                             '"parts.dst.vil" = ["0 V", "2.1 V"]'), ["check"],
                                    ["[tolerances]", "parts.dst.vil"]),
    "delay-faster-than-light": (_replace('delay = "6.7 ns/m"', 'delay = "5 ns/km"'), ["check"],
                                ["[lines.l] delay"]),
    "stub-astronomical": (_replace('part = "dst"', 'part = "dst"\nstub = { line = "l", length = "1.797e308 m" }'),
                          ["check"], ["stub", "length"]),
    "z0-unit-without-number": (_replace('z0 = "50 ohm"', 'z0 = "ohm"'), ["check"], ["[lines.l] z0"]),
    "tap-name-nul": (_replace('name = "RX"', 'name = "R\\u0000X"'), ["check"], ["tap", "name"]),
    "tap-name-escape": (_replace('name = "RX"', 'name = "R\\u001b[31mX"'), ["check"], ["tap", "name"]),
    "steps-times-taps-too-many": (ROBUST, ["waves", "--driver", "TX", "--edge", "rise", "--csv", "-",
                                           "--dt", "1 fs", "--t-stop", "19.9 ns"], ["steps", "at most"]),
    "design-is-a-device": (None, ["check", "/dev/zero"], ["/dev/zero", "not a regular file"]),
    "values-file-is-a-device": (ROBUST, ["check", "--values", "/dev/zero"], ["/dev/zero", "not a regular file"]),
    "capture-is-a-device": (ROBUST, ["judge", "--capture", "/dev/zero", "--driver", "TX", "--edge", "rise"],
                            ["/dev/zero", "not a regular file"]),
    "geometry-and-z0": (_replace('delay = "6.7 ns/m"', 'geometry = { kind = "microstrip", w = "0.3 mm", '
                                 'h = "0.2 mm", t = "35 um", er = 4.3 }'), ["check"],
                        ["[lines.l] z0", "not both"]),
    "geometry-missing-dimension": (_replace('z0 = "50 ohm"\ndelay = "6.7 ns/m"', 'geometry = { kind = "coax", '
                                            'd = "0.5 mm", er = 2.1 }'), ["check"],
                                   ["[lines.l.geometry] D", "missing key"]),
    "geometry-unknown-kind": (_replace('z0 = "50 ohm"\ndelay = "6.7 ns/m"', 'geometry = { kind = "waveguide" }'),
                              ["check"], ["[lines.l.geometry] kind", "unknown cross-section kind", "microstrip"]),
    "geometry-pair-in-single-ended": (_replace('z0 = "50 ohm"\ndelay = "6.7 ns/m"', 'geometry = { kind = '
                                               '"edge_coupled_microstrip", w = "0.2 mm", s = "0.2 mm", h = "0.15 mm", '
                                               't = "35 um", er = 4.3 }'), ["check"],
                                      ["[lines.l.geometry] kind", "coupled pair"]),
    "explain-unknown-receiver": (ROBUST, ["explain", "--receiver", "NOPE"], ["--receiver", "NOPE", "receivers"]),
    "thousand-taps-corners": (_many_taps(1000), ["check", "--corners"], ["taps", "at most"]),
    # design aids (busbudget solve ..., busbudget sensitivity); a two-word command is written "solve stub"
    "solve-stub-without-stubs": (ROBUST, ["solve stub"], ["no tap has a stub"]),
    "solve-stub-unknown-tap": (ROBUST, ["solve stub", "--tap", "NOPE"], ["unknown tap 'NOPE'"]),
    "solve-stub-negative-range": (ROBUST, ["solve stub", "--longest", "-1 cm"], ["--longest"]),
    "solve-drops-one-device": (ROBUST, ["solve drops", "--count", "1"], ["--count", "from 2"]),
    "solve-drops-negative-spacing": (ROBUST, ["solve drops", "--spacing", "-1 cm"], ["--spacing"]),
    "solve-drops-both-questions": (ROBUST, ["solve drops", "--spacing", "1 cm", "--count", "3"], ["--count"]),
    "solve-termination-unknown-series": (ROBUST, ["solve termination", "--series", "E7"], ["--series"]),
    "sensitivity-unknown-path": (ROBUST, ["sensitivity", "--path", "lines.nope.z0"], ["--path", "lines.nope.z0"]),
    # parts from IBIS files (issue 11): the file, its lines and the corner are named
    "ibis-file-is-dev-zero": (_replace("[parts.dst]", '[parts.ib]\nibis = { file = "/dev/zero", model = "m" }\n\n'
                                       "[parts.dst]"), ["check"], ["[parts.ib] ibis.file", "not a regular file"]),
    "ibis-file-malformed": (_replace("[parts.dst]", f'[parts.ib]\nibis = {{ file = "{SHIPPED_IBIS}", model = "x" }}\n\n'
                                     "[parts.dst]"), ["check"], ["[parts.ib] ibis.model", "no [Model] 'x'"]),
    "ibis-corner-between": (_replace("[parts.dst]", f'[parts.ib]\nibis = {{ file = "{SHIPPED_IBIS}", '
                                     'model = "tsx33_io" }\n\n[parts.dst]'),
                            ["check", "--set", "parts.ib.ibis.corner=0.5"], ["parts.ib.ibis.corner", "IBIS corner"]),
    # found by benchmarks/fuzz.py (2026-12-03): 1e11 arrivals grew memory without bound
    "bounce-too-many-arrivals": (None, ["bounce", "1e308", "50", "25 ohm", "-n", "100000000000", "--step", "0"],
                                 ["-n", "MAX_BOUNCES"]),
    # 2**40 corners would be built before the work bound: the raised corner limit has a ceiling
    "max-corners-beyond-the-ceiling": (ROBUST, ["check", "--corners", "--max-corners", "1099511627776"],
                                       ["--max-corners", "MAX_CORNERS_RAISED"]),
    # 5.6e11 node-steps: tens of minutes if it ran; refused up front (tests/test_work_bound.py shows no simulation starts)
    "transceivers-corners-too-much-work": (_many_transceivers(512), ["check", "--corners"],
                                           ["node-steps", "MAX_WORK", "--nominal", "--allow-long"]),
}


@pytest.mark.parametrize("case", CLI_ROWS, ids=list(CLI_ROWS))
def test_cli_bad_input_exits_2_with_a_message(case, tmp_path, capsys):
    text, argv, fragments = CLI_ROWS[case]
    cmd, rest = argv[0].split(), argv[1:]
    if text is not None:
        rest = [_design(tmp_path, text)] + rest
    t0 = time.monotonic()
    code = main([*cmd, *rest])
    elapsed = time.monotonic() - t0
    out, err = capsys.readouterr()
    assert code == 2, (code, err[-2000:])
    assert "Traceback" not in err and "internal error" not in err
    for frag in fragments:
        assert frag in err, (frag, err)
    assert len(err) < 2000, len(err)
    assert elapsed < SECONDS


def test_error_messages_list_at_most_a_dozen_names(tmp_path, capsys):
    # a tap on a node that does not exist, in a design of 300 nodes: the message names some nodes, not all
    text = _many_taps(300).replace('name = "R7"\nnode = "n8"', 'name = "R7"\nnode = "nowhere"')
    code = main(["check", _design(tmp_path, text), "--nominal"])
    err = capsys.readouterr().err
    assert code == 2 and "nowhere" in err
    assert len(err) < 1500, len(err)


def test_closed_stdout_gives_no_traceback(tmp_path):
    path = _design(tmp_path, ROBUST)
    proc = subprocess.run([sys.executable, "-m", "budget.cli", "check", path, "--nominal"],
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, timeout=120,
                          close_fds=True, preexec_fn=lambda: os.close(1))
    assert "Traceback" not in proc.stderr and "internal error" not in proc.stderr, proc.stderr
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    assert "standard output" in proc.stderr


# ---------------------------------------------------------------------------
# output files: never replace a device, a fifo, a directory or a symlink; respect the umask

def _special(tmp_path, kind, suffix=""):
    p = tmp_path / f"target-{kind}{suffix}"
    if kind == "fifo":
        os.mkfifo(p)
    elif kind == "directory":
        p.mkdir()
    elif kind == "symlink":
        victim = tmp_path / "victim.txt"
        victim.write_text("keep me\n")
        p.symlink_to(victim)
    elif kind == "device":
        if os.geteuid() != 0:
            pytest.skip("creating a device node needs root")
        os.mknod(p, 0o600 | stat.S_IFCHR, os.makedev(1, 3))   # a private copy of the null device
    return p


def _kind(p):
    st = os.lstat(p)
    return (stat.S_IFMT(st.st_mode), st.st_rdev)


OUT_OPTIONS = {
    "check-out": lambda d, o: ["check", d, "--nominal", "--out", o],
    "waves-csv": lambda d, o: ["waves", d, "--driver", "TX", "--edge", "rise", "--csv", o],
}


@pytest.mark.parametrize("kind", ["fifo", "directory", "symlink", "device"])
@pytest.mark.parametrize("option", OUT_OPTIONS, ids=list(OUT_OPTIONS))
def test_output_never_replaces_a_special_file(option, kind, tmp_path, capsys):
    target = _special(tmp_path, kind)
    before = _kind(target)
    code = main(OUT_OPTIONS[option](_design(tmp_path, ROBUST), str(target)))
    err = capsys.readouterr().err
    assert code == 2, err
    assert str(target) in err
    assert _kind(target) == before
    if kind == "symlink":
        assert (tmp_path / "victim.txt").read_text() == "keep me\n"
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".target")]


@pytest.mark.parametrize("kind", ["fifo", "symlink"])
def test_plot_out_never_replaces_a_special_file(kind, tmp_path, capsys):
    pytest.importorskip("matplotlib")
    target = _special(tmp_path, kind, ".png")
    before = _kind(target)
    code = main(["plot", _design(tmp_path, ROBUST), "--driver", "TX", "--edge", "rise", "--out", str(target)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert str(target) in err
    assert _kind(target) == before


def test_written_files_respect_the_umask(tmp_path, capsys):
    out = tmp_path / "report.txt"
    old = os.umask(0o027)
    try:
        code = main(["check", _design(tmp_path, ROBUST), "--nominal", "--out", str(out)])
    finally:
        os.umask(old)
    assert code == 0, capsys.readouterr().err
    assert stat.S_IMODE(os.stat(out).st_mode) == 0o640


# ---------------------------------------------------------------------------
# the sweep API: the package's ArgumentError naming the argument

SWEEP_ROWS = {
    "values-strings": (dict(values={"lines.l.z0": ["fifty", "sixty"]}), "values['lines.l.z0']"),
    "chunk-not-whole": (dict(chunk=2.5), "chunk"),
    "t-stop-infinite": (dict(t_stop=math.inf), "t_stop"),
    "dt-nan": (dict(dt=math.nan), "dt"),
    "values-key-none": (dict(values={None: [50.0, 55.0]}), "values"),
    "drivers-empty": (dict(drivers=[]), "drivers is empty"),
    "drivers-a-string": (dict(drivers="TX"), "drivers"),
}


@pytest.fixture(scope="module")
def robust_design():
    return budget.loads(ROBUST, source="robust.toml")


@pytest.mark.parametrize("case", SWEEP_ROWS, ids=list(SWEEP_ROWS))
def test_sweep_bad_argument_is_an_argument_error(case, robust_design):
    from budget.sweep import sweep

    kwargs, fragment = SWEEP_ROWS[case]
    t0 = time.monotonic()
    with pytest.raises(ArgumentError) as info:
        sweep(robust_design, **kwargs)
    assert fragment in str(info.value)
    assert time.monotonic() - t0 < SECONDS


def test_sweep_refuses_a_huge_block_before_allocating(robust_design):
    from budget.sweep import sweep

    with pytest.raises(ArgumentError, match="steps"):
        sweep(robust_design, dt=1e-15, t_stop=2e-8)


# ---------------------------------------------------------------------------
# the loader: hostile values refused when loaded, naming file, table and key

LOADER_ROWS = {
    "stub-length-dbl-max": (_replace('part = "dst"', 'part = "dst"\nstub = { line = "l", length = 1.797e308 }'),
                            "length"),
    "er-eff-huge-int": (_replace('delay = "6.7 ns/m"', "er_eff = 1" + "0" * 400), "er_eff"),
    "z0-denormal": (_replace('z0 = "50 ohm"', "z0 = 5e-324"), "z0"),
    "tap-name-control": (_replace('name = "RX"', 'name = "R\\tX"'), "name"),
    "tap-name-20k-characters": (_replace('name = "RX"', 'name = "' + "R" * 20_000 + '"'), "MAX_NAME_CHARS"),
    "key-20k-characters": (_replace("[bus]\n", '[bus]\n"' + "k" * 20_000 + '" = 1\n'), "characters"),
    "termination-type-a-table": (_replace('type = "series"', 'type = { a = 1 }'), "[termination #1] type"),
    "tolerance-path-20k-characters": (_replace('"lines.l.z0" = "10%"', '"' + "x" * 20_000 + '" = "10%"'),
                                      "tolerances"),
}


@pytest.mark.parametrize("case", LOADER_ROWS, ids=list(LOADER_ROWS))
def test_loader_refuses_hostile_values(case):
    text, fragment = LOADER_ROWS[case]
    with pytest.raises(DesignError) as info:
        budget.loads(text, source="hostile.toml")
    assert "hostile.toml" in str(info.value) and fragment in str(info.value)
    assert len(str(info.value)) < 1500


def test_limits_are_stated_in_one_module():
    for name in ("MAX_TAPS", "MAX_NODES", "MAX_NAME_CHARS", "MAX_BATCH_VARIANTS", "MAX_STEPS", "MAX_BLOCK_VALUES", "MAX_MONTE_CARLO", "MAX_FILE_BYTES",
                 "MAX_NAMES_LISTED"):
        assert isinstance(getattr(limits, name), int) and getattr(limits, name) > 0
        assert name in limits.__doc__
    doc = (Path(__file__).resolve().parents[1] / "docs" / "cli.md").read_text(encoding="utf-8")
    section = doc.split("## Limits and refused inputs", 1)[1]
    for name in (n for n in dir(limits) if n.startswith("MAX_")):
        value = getattr(limits, name)
        shown = f"{value // (1024 * 1024)} MiB" if name == "MAX_FILE_BYTES" else f"{value:,}"
        assert f"| `{name}` | {shown} |" in section, name
    assert issubclass(ArgumentError, BusBudgetError)


# ---------------------------------------------------------------------------
# the C library's Python layer (budget.capi; the status names of cexport/busbudget.h).  The built
# library itself is exercised by tests/test_cexport.py; these rows need no compiler.

C_OPEN_ROWS = {
    "c-design-integer-too-big": _replace('delay = "6.7 ns/m"', "er_eff = 1" + "0" * 400),
    "c-design-deep-nesting": ROBUST + "\n[budget.extra]\nx = " + "[" * 50_000 + "]" * 50_000 + "\n",
    "c-design-termination-type-a-table": _replace('type = "series"', 'type = { a = 1 }'),   # was BB_ERR_INTERNAL
}


@pytest.mark.parametrize("case", C_OPEN_ROWS, ids=list(C_OPEN_ROWS))
def test_c_bad_design_text_is_a_design_status(case):
    from budget import capi

    with pytest.raises(capi.CallFailed) as info:
        capi.open_text(C_OPEN_ROWS[case], source="rig.toml")
    assert info.value.status == "BB_ERR_DESIGN" and "rig.toml" in str(info.value)


C_SET_ROWS = {
    "c-set-z0-dbl-max": ("lines.l.z0", 1.7976931348623157e308),
    "c-set-z0-denormal": ("lines.l.z0", 5e-324),
    "c-set-length-1e300": ("segment.0.length", 1e300),
    "c-set-delay-dbl-max": ("lines.l.delay", 1.7976931348623157e308),
}


@pytest.mark.parametrize("case", C_SET_ROWS, ids=list(C_SET_ROWS))
def test_c_set_implausible_value_is_refused_at_set(case):
    from budget import capi

    path, value = C_SET_ROWS[case]
    h = capi.open_text(ROBUST, source="rig.toml")
    try:
        before = capi.get_value(h, path)
        with pytest.raises(capi.CallFailed) as info:
            capi.set_value(h, path, value)
        assert info.value.status == "BB_ERR_VALUE" and path in str(info.value)
        assert len(str(info.value)) < 400
        assert capi.get_value(h, path) == before   # the design is unchanged
    finally:
        capi.close(h)


@pytest.mark.parametrize("n_paths, n_variants, fragment", [(1, 2 ** 62, "MAX_BATCH_VARIANTS"),
                                                      (10_000, 1, "parameters")],
                         ids=["variants-huge", "paths-too-many"])
def test_c_batch_impossible_count_is_a_size_status(n_paths, n_variants, fragment):
    from budget import capi

    h = capi.open_text(ROBUST, source="rig.toml")
    try:
        with pytest.raises(capi.CallFailed) as info:
            capi.batch_counts(h, n_paths, n_variants)
        assert info.value.status == "BB_ERR_SIZE" and fragment in str(info.value)
    finally:
        capi.close(h)
