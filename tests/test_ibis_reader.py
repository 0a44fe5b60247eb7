"""The IBIS reader against the standard's rules (budget/ibis.py), and a table of malformed files.

Rules from the IBIS specification's "General syntax rules and guidelines" (IBIS Open Forum,
version 4.2, 2006, section 3; docs/references.md H1), BIRD 78.1 (2003: line length counted up to
the comment character) and the reflector note on scale letters (B. Ross, 27 Nov 1996: T G M k m
u n p f, case-sensitive, trailing unit letters ignored).
"""
from __future__ import annotations

import math

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from budget import ibis
from budget.ibis import IbisError, number

SHIPPED = Path(ibis.__file__).parent / "examples" / "ibis" / "tansy_tsx33.ibs"

GOOD = """\
[IBIS Ver]      3.2
[File Name]     tiny.ibs
[Notes]         A note that goes on
                over two lines.
[Component]     TINY1
[Manufacturer]  Nobody (fictional)
[Package]
R_pkg   0.2     NA      0.3
L_pkg   3nH     2.5nH   3.5nH
C_pkg   0.5p    0.4p    0.6p
[Pin]  signal_name  model_name  R_pin  L_pin  C_pin
1      D0           drv         0.25   2.9nH  0.45pF
2      D1           rcv         NA     NA     NA
[Model]         drv
Model_type      I/O
Vinl = 0.8
Vinh = 2.0V
C_comp          3pF  2.5pF  3.5pF
[Voltage Range] 3.3  3.0  3.6
[Pulldown]
-3.3    -100m   -80m    -120m
0       0       0       0
3.3     100m    80m     120m
[Pullup]
-3.3    100m    80m     120m
0       0       0       0
3.3     -100m   -80m    -120m
[GND Clamp]
-3.3    -1      NA      NA
0       0       NA      NA
[POWER Clamp]
-3.3    1       NA      NA
0       0       NA      NA
[Ramp]
dV/dt_r  1.0/0.5n   0.8/0.7n   1.2/0.3n
dV/dt_f  1.0/0.5n   NA         NA
R_load = 50
[Rising Waveform]
R_fixture = 50
V_fixture = 0
0n      0       0       0
1n      1.5     1.4     1.6
[Model]         rcv
Model_type      Input
Vinl = 0.8
Vinh = 2.0
C_comp          2p   NA   NA
[GND Clamp Reference]   0     0     0
[POWER Clamp Reference] 3.3   3.0   3.6
[GND Clamp]
-1      -10m    NA      NA
0       0       NA      NA
[End]
"""


def test_good_file_read_fully():
    f = ibis.reads(GOOD, source="tiny.ibs")
    assert f.version == "3.2"
    comp = f.component("TINY1")
    assert comp.manufacturer == "Nobody (fictional)"
    assert comp.r_pkg == ibis.Triple(0.2, 0.2, 0.3)           # NA min -> typ
    assert comp.l_pkg.max == pytest.approx(3.5e-9)
    assert comp.pins["1"] == ("D0", "drv", (0.25, pytest.approx(2.9e-9), pytest.approx(0.45e-12)))
    assert comp.pins["2"][2] == (None, None, None)
    m = f.model("drv")
    assert m.model_type == "I/O" and m.can_drive and m.can_receive
    assert (m.vinl, m.vinh) == (0.8, 2.0)
    assert m.c_comp.min == pytest.approx(2.5e-12)
    assert m.rail("pullup", "min") == 3.0 and m.rail("gnd_clamp", "max") == 0.0
    np.testing.assert_allclose(m.pulldown.at("max"), [-0.12, 0, 0.12])
    np.testing.assert_allclose(m.gnd_clamp.at("max"), [-1, 0])   # NA column -> typ
    assert m.ramp.dt_r.min == pytest.approx(0.7e-9) and m.ramp.dv_f.max == 1.0 and m.ramp.r_load == 50
    assert m.rising[0].r_fixture == 50 and m.rising[0].table.x[-1] == pytest.approx(1e-9)
    r = f.model("rcv")
    assert not r.can_drive and r.can_receive
    assert r.rail("power_clamp", "max") == 3.6


@pytest.mark.parametrize("text, value", [
    ("2.5p", 2.5e-12), ("3.3V", 3.3), ("1M", 1e6), ("1m", 1e-3), ("4.7nH", 4.7e-9), ("10k", 1e4),
    ("2T", 2e12), ("3G", 3e9), ("5u", 5e-6), ("7f", 7e-15), ("1e-3", 1e-3), ("-.5", -0.5),
    ("1.5e-9s", 1.5e-9), ("50ohm", 50.0), ("+2mA", 2e-3),
])
def test_numbers_scale_letters(text, value):
    # IBIS: M is mega and m milli (case-sensitive); letters after the scale letter are units
    assert number(text) == pytest.approx(value, rel=1e-12)


def test_keywords_case_and_underscores():
    text = GOOD.replace("[GND Clamp]\n-3.3    -1", "[gnd_clamp]\n-3.3    -1").replace("[Model]         rcv",
                                                                                      "[MODEL]         rcv")
    text = text.replace("Model_type      Input", "model_TYPE      Input")
    f = ibis.reads(text)
    assert f.model("rcv").model_type == "Input"
    assert f.model("drv").gnd_clamp is not None


def test_comment_char_changes():
    text = GOOD.replace("[Component]     TINY1",
                        "[Comment Char] #_char\n# a comment in the new style | with a bar\n"
                        "[Component]     TINY1   # trailing comment")
    f = ibis.reads(text)
    assert "TINY1" in f.components
    # after the change, '|' is ordinary text again: a '|' comment is now an error (data before keyword...)
    bad = GOOD.replace("[Pulldown]\n", "[Comment Char] #_char\n[Pulldown]\n| not a comment any more\n")
    with pytest.raises(IbisError, match=r"line 22: \[Pulldown\]: a table row has voltage"):
        ibis.reads(bad)


def test_line_length_counts_up_to_comment():
    long_comment = "| " + "x" * 2000
    f = ibis.reads(GOOD.replace("[End]", long_comment + "\n[End]"))
    assert f.version == "3.2"
    with pytest.raises(IbisError, match=r"line 3: \[Notes\]: line has 1045 characters before any comment; the standard allows at most 1024"):
        ibis.reads(GOOD.replace("[Notes]         A note", "[Notes]         " + "y" * 1009 + " A note"))


def test_shipped_file_reads_and_regenerates(tmp_path):
    f = ibis.read(SHIPPED)
    m = f.model("tsx33_io")
    assert m.model_type == "I/O" and len(m.rising) == 2 and len(m.falling) == 2
    assert f.component("TSX33").l_pkg.typ == pytest.approx(4e-9)
    # pullup data is rail-relative: at Vtable = 0 (output at Vcc) no current flows
    assert np.interp(0.0, m.pullup.x, m.pullup.at("typ")) == pytest.approx(0.0, abs=1e-12)


def _bad(old, new):
    assert old in GOOD, old
    return GOOD.replace(old, new, 1)


BAD = [
    ("empty", "", "no IBIS keywords"),
    ("not-first", _bad("[IBIS Ver]      3.2\n", "[File Name] x.ibs\n[IBIS Ver] 3.2\n"),
     r"line 1: \[File Name\]: the file must start with \[IBIS Ver\]"),
    ("version", _bad("3.2", "three"), r"line 1: \[IBIS Ver\]: version 'three'"),
    ("no-end", GOOD.replace("[End]\n", ""), "does not end with"),
    ("after-end", GOOD + "[Model] x\n", r"line 54: \[Model\]: keyword after \[End\]"),
    ("unclosed", _bad("[Pulldown]", "[Pulldown"), r"line 20: keyword without a closing"),
    ("data-first", "junk\n" + GOOD, "line 1: data before the first keyword"),
    ("bad-number", _bad("3.3     100m    80m ", "3.3     1OOm    80m "),
     r"line 23: \[Pulldown\]: table entry '1OOm': 'OOm' is neither a scale letter"),
    ("typ-na", _bad("-120m\n0       0       0", "-120m\n0       NA      0"),
     r"line 22: \[Pulldown\]: table entry: the typ entry may not be NA"),
    ("short-row", _bad("3.3     100m    80m     120m", "3.3     100m    80m"),
     r"line 23: \[Pulldown\]: a table row has voltage, typ, min and max \(4 entries\), got 3"),
    ("dup-voltage", _bad("-120m\n0       0       0", "-120m\n-3.3    0       0"),
     r"\[Pulldown\]: voltage -3.3 appears twice"),
    ("time-back", _bad("1n      1.5", "-1n     1.5"), r"line 42: \[Rising Waveform\]: time must increase"),
    ("one-row", _bad("[POWER Clamp]\n-3.3    1       NA      NA\n", "[POWER Clamp]\n"), r"line 31: \[POWER Clamp\]: a table needs"),
    ("pkg-missing", _bad("C_pkg   0.5p    0.4p    0.6p\n", ""), r"line 7: \[Package\]: C_pkg is missing"),
    ("pkg-negative", _bad("R_pkg   0.2", "R_pkg   -0.2"), r"line 8: \[Package\]: R_pkg may not be negative"),
    ("pkg-two", _bad("R_pkg   0.2     NA      0.3", "R_pkg   0.2     NA"),
     r"line 8: \[Package\]: R_pkg: expected typ, min and max \(3 entries\), got 2"),
    ("pin-header", _bad("signal_name  model_name", "signal  model"), r"line 11: \[Pin\]: the header must read"),
    ("pin-row", _bad("1      D0           drv         0.25   2.9nH  0.45pF", "1 D0 drv 0.25"),
     r"line 12: \[Pin\]: a pin row has 6 entries"),
    ("model-type", _bad("Model_type      I/O", "Model_type      Bidirectional"),
     r"line 15: \[Model\]: Model_type 'Bidirectional' is not one"),
    ("no-model-type", _bad("Model_type      I/O\n", ""), r"line 14: \[Model\]: model 'drv': Model_type is missing"),
    ("no-c-comp", _bad("C_comp          3pF  2.5pF  3.5pF\n", ""), r"model 'drv': C_comp is missing"),
    ("no-rails", _bad("[GND Clamp Reference]   0     0     0\n", ""),
     r"line 43: \[Model\]: model 'rcv': \[GND Clamp\] needs \[Voltage Range\] or \[GND Clamp Reference\]"),
    ("meg", _bad("L_pkg   3nH", "L_pkg   3meg"), r"line 9: \[Package\]: L_pkg '3meg': 'eg' is neither"),
    ("no-ramp", GOOD.replace("[Ramp]\ndV/dt_r  1.0/0.5n   0.8/0.7n   1.2/0.3n\ndV/dt_f  1.0/0.5n   NA         NA\n"
                             "R_load = 50\n", ""), r"model 'drv': a I/O model needs \[Ramp\]"),
    ("no-pullup", GOOD.replace("[Pullup]\n-3.3    100m    80m     120m\n0       0       0       0\n"
                               "3.3     -100m   -80m    -120m\n", ""), r"needs \[Pullup\] and \[Pulldown\]"),
    ("ramp-form", _bad("1.0/0.5n   0.8/0.7n", "1.0-0.5n   0.8/0.7n"),
     r"line 35: \[Ramp\]: dV/dt_r: expected dV/dt such as 1.2/0.5n, got '1.0-0.5n'"),
    ("ramp-zero", _bad("1.0/0.5n   0.8/0.7n", "1.0/0n   0.8/0.7n"), r"line 35: \[Ramp\]: dV/dt_r: dV and dt must"),
    ("ramp-missing", _bad("dV/dt_f  1.0/0.5n   NA         NA\n", ""), r"line 34: \[Ramp\]: dV/dt_f is missing"),
    ("ramp-word", _bad("R_load = 50", "R_lode = 50"), r"line 37: \[Ramp\]: expected dV/dt_r, dV/dt_f or R_load"),
    ("fixture-missing", _bad("R_fixture = 50\n", ""), r"line 38: \[Rising Waveform\]: R_fixture is missing"),
    ("fixture-unknown", _bad("R_fixture = 50", "R_fixture = 50\nQ_fixture = 1"),
     r"line 40: \[Rising Waveform\]: unknown fixture parameter 'Q_fixture'"),
    ("fixture-zero", _bad("R_fixture = 50", "R_fixture = 0"), r"\[Rising Waveform\]: R_fixture must be positive"),
    ("comment-char", _bad("[Component]", "[Comment Char] #char\n[Component]"),
     r"line 5: \[Comment Char\]: expected a comment character followed by '_char'"),
    ("dup-model", _bad("[Model]         rcv", "[Model]         drv"), r"model 'drv' is defined twice"),
    ("dup-table", _bad("[Pullup]", "[Pulldown]"), r"line 24: \[Pulldown\]: model 'drv' has this table twice"),
    ("non-ascii", GOOD.replace("Nobody", "N\u00f6body"), "line 6: character 0xC3 is not allowed"),
    ("vinh-empty", _bad("Vinh = 2.0V", "Vinh ="), r"line 17: \[Model\]: Vinh has no value"),
    ("range-na", _bad("[Voltage Range] 3.3", "[Voltage Range] NA"), r"\[Voltage Range\]: voltage: the typ entry"),
]


@pytest.mark.parametrize("text, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_malformed_files(text, message):
    data = text.encode("utf-8")
    with pytest.raises(IbisError, match=message) as err:
        ibis.reads(data, source="tiny.ibs")
    assert str(err.value).startswith("tiny.ibs")


def test_missing_and_directory(tmp_path):
    with pytest.raises(IbisError, match="cannot read the file"):
        ibis.read(tmp_path / "nope.ibs")
    with pytest.raises(IbisError, match="is a directory"):
        ibis.read(tmp_path)


def test_unknown_names_listed():
    f = ibis.reads(GOOD)
    with pytest.raises(IbisError, match=r"no \[Model\] named 'drvx'; the file has: drv, rcv"):
        f.model("drvx")
    with pytest.raises(IbisError, match=r"no \[Component\] named 'X'; the file has: TINY1"):
        f.component("X")


def test_make_script_reproduces_shipped_file(tmp_path):
    import shutil
    script = SHIPPED.parent / "make.py"
    copy = tmp_path / "make.py"
    shutil.copy(script, copy)
    subprocess.run([sys.executable, str(copy)], check=True, cwd=tmp_path, timeout=300)
    # The same text, and the same numbers to the printed precision: the tails of the V-T tables sit
    # at round-off (5.34883e-13 V vs 5.34884e-13 V on another CPU: scipy's ODE solver and numpy's
    # SIMD paths differ in the last bits), so a number may differ in its last digit, by at most
    # 1e-5 relative or 1e-12 absolute (V, A: far below any table's resolution).
    made, shipped = (tmp_path / "tansy_tsx33.ibs").read_text().split(), SHIPPED.read_text().split()
    assert len(made) == len(shipped)
    for a, b in zip(made, shipped):
        if a != b:
            assert math.isclose(float(a), float(b), rel_tol=1e-5, abs_tol=1e-12), (a, b)
