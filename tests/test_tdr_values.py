"""TDR profile -> measured values for the design's line segments (issue 9, item 4): an engine-generated
TDR trace of a unit whose segment impedances differ from nominal goes through ``tdr --design --port
--values-out`` and ``check --values``, and the changed impedances come back within 1 %."""
from __future__ import annotations

import json

import numpy as np
import pytest

import budget
from budget.check import check
from budget.cli import main
from budget.errors import ArgumentError, CaptureError
from budget.tdr import tdr_profile
from budget.tdr_values import assign_profile
from conftest import accuracy_record

RISE = 0.1e-9                 # 10-90 % rise of the TDR source [s]
RAMP = RISE / 0.8             # its 0-100 % ramp = one cell of round-trip time [s]
DELAY = 6.7e-9                # delay per length of every line [s/m]
# (nominal z0 [ohm], length in round-trip cells): boundaries off the cell grid, as on a real board
SECTIONS = [(50.0, 3.3), (60.0, 4.4), (45.0, 3.6), (55.0, 4.2)]
# the unit: three of the four segments off nominal (within 1 % is the target of issue 9)
UNIT = {"lines.s0.z0": 52.0, "lines.s1.z0": 64.0, "lines.s3.z0": 51.5}


def _lines_and_segments(z0s, cells):
    out = []
    for i, (z, c) in enumerate(zip(z0s, cells)):
        out.append(f'[lines.s{i}]\nz0 = "{z!r} ohm"\ndelay = "{DELAY} s/m"\n')
    for i, c in enumerate(cells):
        out.append(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "s{i}"\nlength = "{c * RAMP / 2 / DELAY!r} m"\n')
    return "".join(out)


def bus_text(sections=SECTIONS):
    """A fictional four-segment bus: a transceiver at n0, receivers at n2 and the far end, 50 ohm there."""
    n = len(sections)
    return ('[bus]\nname = "TDR-assigned test bus"\n[edge]\nrise = "1 ns"\nfall = "1 ns"\n'
            '[parts.x]\nrole = "transceiver"\nv_high = "3.3 V"\nv_low = "0 V"\nr_high = "30 ohm"\nr_low = "30 ohm"\n'
            'c_pin = "3 pF"\nvih = "2.0 V"\nvil = "0.8 V"\n'
            '[parts.r]\nrole = "receiver"\nc_pin = "3 pF"\nvih = "2.0 V"\nvil = "0.8 V"\n'
            + _lines_and_segments([z for z, _ in sections], [c for _, c in sections])
            + '[[tap]]\nname = "U1"\nnode = "n0"\npart = "x"\n'
            + '[[tap]]\nname = "U2"\nnode = "n2"\npart = "r"\n'
            + f'[[tap]]\nname = "U3"\nnode = "n{n}"\npart = "r"\n'
            + f'[[termination]]\nnode = "n{n}"\ntype = "parallel"\nr = "50 ohm"\nv = "1.65 V"\n'
            + '[tolerances]\n"lines.s1.z0" = "10%"\n')


def coupon_capture(z0s, cells, *, far_r=50.0, extra_cells=4.0, tmp_path=None):
    """TDR of the bare board (no devices fitted): a 50 ohm, 0 -> 1 V source at n0, the segments, the far
    end terminated by far_r [ohm] (None: open).  The engine's port voltage, written as a bench CSV."""
    far = "" if far_r is None else (f'[[termination]]\nnode = "n{len(cells)}"\ntype = "parallel"\n'
                                    f'r = "{far_r} ohm"\nv = "0 V"\n')
    text = ('[bus]\nname = "TDR coupon of the test bus"\n[edge]\n'
            f'rise = "{RISE} s"\nfall = "{RISE} s"\n'
            '[parts.tdr]\nrole = "driver"\nv_high = "1 V"\nv_low = "0 V"\nr_high = "50 ohm"\nr_low = "50 ohm"\n'
            'c_pin = "0 pF"\n' + _lines_and_segments(z0s, cells)
            + '[[tap]]\nname = "PORT"\nnode = "n0"\npart = "tdr"\n' + far)
    w = budget.simulate(budget.loads(text), "PORT", "rise", t_stop=(sum(cells) + extra_cells) * RAMP)
    path = tmp_path / "tdr.csv"
    path.write_text("Fictional TDR bench export\nTime (ns),Port (V)\n"
                    + "".join(f"{a * 1e9:.9g},{b:.9g}\n" for a, b in zip(w.t, w["PORT"])))
    return path


TDR_ARGS = ["--source-r", "50 ohm", "--emf", "1 V", "--rise", "100 ps", "--t0", "0 s"]


def _unit_z0s(bus):
    unit = bus.with_values(UNIT)
    return [float(unit.lines[f"s{i}"].z0) for i in range(len(SECTIONS))]


def test_tdr_values_file_recovers_the_units_impedances_through_check(tmp_path, capsys):
    bus_file = tmp_path / "bus.toml"
    bus_file.write_text(bus_text())
    bus = budget.load(bus_file)
    z_unit = _unit_z0s(bus)
    cap = coupon_capture(z_unit, [c for _, c in SECTIONS], tmp_path=tmp_path)
    values = tmp_path / "unit.toml"
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "U1",
                 "--values-out", str(values)]) == 0
    out = capsys.readouterr().out
    assert "segment #4 (n3-n4)" in out and "lines.s1.z0" in out
    code = main(["check", str(bus_file), "--values", str(values), "--nominal", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code in (0, 1)
    got = {m["path"]: m["value"] for m in doc["measured"]}
    assert set(got) == {f"lines.s{i}.z0" for i in range(4)}
    for i, z in enumerate(z_unit):
        assert got[f"lines.s{i}.z0"] == pytest.approx(z, rel=0.01), i
    worst = max(abs(got[f"lines.s{i}.z0"] / z - 1) for i, z in enumerate(z_unit))
    accuracy_record(f"tdr -> values file -> check --values, 4 off-grid segments (engine trace): worst "
                    f"{100 * worst:.2g} % per segment")
    # the check with the values file is the check of the unit's design
    ref = check(bus.with_values(got), nominal=True).to_json()
    assert doc["verdict"] == ref["verdict"] and doc["worst"] == ref["worst"]


def coupon_text(z0s, cells, far_r=50.0):
    far = "" if far_r is None else (f'[[termination]]\nnode = "n{len(cells)}"\ntype = "parallel"\n'
                                    f'r = "{far_r} ohm"\nv = "0 V"\n')
    return ('[bus]\nname = "TDR coupon of the test bus"\n[edge]\n'
            f'rise = "{RISE} s"\nfall = "{RISE} s"\n'
            '[parts.tdr]\nrole = "driver"\nv_high = "1 V"\nv_low = "0 V"\nr_high = "50 ohm"\nr_low = "50 ohm"\n'
            'c_pin = "0 pF"\n' + _lines_and_segments(z0s, cells)
            + '[[tap]]\nname = "PORT"\nnode = "n0"\npart = "tdr"\n' + far)


def test_values_from_the_scikit_rf_port_waveform_within_one_percent():
    """The outside oracle: the coupon's port voltage computed in the frequency domain by scikit-rf
    (tests/skrf_reference.py, exact uniform lines, no engine code) assigns the same impedances."""
    from skrf_reference import reference_waveforms

    bus = budget.loads(bus_text())
    z_unit = _unit_z0s(bus)
    cells = [c for _, c in SECTIONS]
    coupon = budget.loads(coupon_text(z_unit, cells))
    ref = reference_waveforms(coupon, "PORT", "rise", t_end=(sum(cells) + 4) * RAMP)
    prof = tdr_profile(ref.t, ref.v[:, 0], source_r=50.0, emf=1.0, ramp=RAMP, t0=0.0)
    a = assign_profile(bus, prof, "U1")
    worst = max(abs(a.values[f"lines.s{i}.z0"] / z - 1) for i, z in enumerate(z_unit))
    accuracy_record(f"tdr -> values, 4 off-grid segments (scikit-rf trace): worst {100 * worst:.2g} % per segment")
    assert worst < 0.01


def test_match_by_order_and_json(tmp_path, capsys):
    bus_file = tmp_path / "bus.toml"
    bus_file.write_text(bus_text())
    z_unit = _unit_z0s(budget.load(bus_file))
    cap = coupon_capture(z_unit, [c for _, c in SECTIONS], tmp_path=tmp_path, far_r=None)   # bare board, open end
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "n0", "--match", "order",
                 "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    dv = doc["design_values"]
    assert dv["port"] == "n0" and dv["match"] == "order" and len(dv["pieces"]) == 4
    for i, z in enumerate(z_unit):
        # a segment's mean includes the cell that straddles its boundary: within 3 % (budget.tdr, measured)
        assert dv["values"][f"lines.s{i}.z0"] == pytest.approx(z, rel=0.03)
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "U1", "--values-out", "-"]) == 0
    text = capsys.readouterr().out
    assert text.startswith("# ") and '"lines.s1.z0" = "' in text and "Line pieces" not in text


def test_profile_shorter_than_the_path_exits_2(tmp_path, capsys):
    bus_file = tmp_path / "bus.toml"
    bus_file.write_text(bus_text())
    cells = [c for _, c in SECTIONS]
    cap = coupon_capture(_unit_z0s(budget.load(bus_file)), cells, tmp_path=tmp_path, extra_cells=-6.0)
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "U1"]) == 2
    err = capsys.readouterr().err
    assert "tdr.csv" in err and "not covered" in err and "segment #4" in err


def test_more_segments_than_the_profile_shows_exits_2(tmp_path, capsys):
    """Two adjacent segments of one impedance on the unit read as one profile segment: matching by order
    cannot tell them apart (matching by delay can)."""
    bus_file = tmp_path / "bus.toml"
    bus_file.write_text(bus_text())
    cells = [c for _, c in SECTIONS]
    cap = coupon_capture([50.0, 60.0, 60.0, 55.0], cells, tmp_path=tmp_path)
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "U1", "--match", "order"]) == 2
    err = capsys.readouterr().err
    assert "segment(s) of near-constant impedance" in err and "4 piece(s)" in err and "--match delay" in err
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), "--port", "U1", "--json"]) == 0
    vals = json.loads(capsys.readouterr().out)["design_values"]["values"]
    assert vals["lines.s2.z0"] == pytest.approx(60.0, rel=0.01)


BAD_OPTIONS = [
    ("port-inside-the-bus", ["--port", "U2"], "both directions"),
    ("port-unknown", ["--port", "U9"], "neither a tap nor a node"),
    ("design-without-port", [], "--design and --port go together"),
]


@pytest.mark.parametrize("extra,needle", [b[1:] for b in BAD_OPTIONS], ids=[b[0] for b in BAD_OPTIONS])
def test_bad_port_options_exit_2(tmp_path, capsys, extra, needle):
    bus_file = tmp_path / "bus.toml"
    bus_file.write_text(bus_text())
    cap = coupon_capture([z for z, _ in SECTIONS], [c for _, c in SECTIONS], tmp_path=tmp_path)
    assert main(["tdr", str(cap), *TDR_ARGS, "--design", str(bus_file), *extra]) == 2
    assert needle in capsys.readouterr().err


def test_shared_line_type_gets_the_mean_and_a_note(tmp_path):
    """Two segments of one line type measured apart: one value (their cell-weighted mean), and a note."""
    text = bus_text().replace('line = "s2"', 'line = "s0"')
    bus = budget.loads(text)
    cap = coupon_capture([50.0, 60.0, 53.0, 55.0], [c for _, c in SECTIONS], tmp_path=tmp_path)
    c = budget.capture.read_capture(str(cap))
    prof = tdr_profile(c.t, c[c.names[0]], source_r=50.0, emf=1.0, ramp=RAMP, t0=0.0)
    a = assign_profile(bus, prof, "U1")
    z = {p.label: p for p in a.pieces}
    assert z["segment #1 (n0-n1)"].z == pytest.approx(50.0, rel=0.01)
    assert z["segment #3 (n2-n3)"].z == pytest.approx(53.0, rel=0.01)
    w1, w3 = z["segment #1 (n0-n1)"].cells, z["segment #3 (n2-n3)"].cells
    assert a.values["lines.s0.z0"] == pytest.approx((w1 * z["segment #1 (n0-n1)"].z + w3 * z["segment #3 (n2-n3)"].z)
                                                    / (w1 + w3), rel=1e-12)
    assert any("give each segment its own [lines] table" in n for n in a.notes)
    with pytest.raises(ArgumentError, match="match must be one of"):
        assign_profile(bus, prof, "U1", match="nearest")


def test_walk_stops_at_a_branch_with_a_note(tmp_path):
    text = bus_text() + '[[segment]]\nfrom = "n2"\nto = "b1"\nline = "s0"\nlength = "2 cm"\n' \
                        '[[tap]]\nname = "B1"\nnode = "b1"\npart = "r"\n'
    bus = budget.loads(text)
    cap = coupon_capture([z for z, _ in SECTIONS], [c for _, c in SECTIONS], tmp_path=tmp_path)
    c = budget.capture.read_capture(str(cap))
    prof = tdr_profile(c.t, c[c.names[0]], source_r=50.0, emf=1.0, ramp=RAMP, t0=0.0)
    a = assign_profile(bus, prof, "U1")
    assert [p.label for p in a.pieces] == ["segment #1 (n0-n1)", "segment #2 (n1-n2)"]
    assert any("branches at node 'n2'" in n for n in a.notes)
    with pytest.raises(CaptureError, match="less than one cell"):
        short = budget.loads(bus_text([(50.0, 0.4), (60.0, 4.0)]))
        assign_profile(short, prof, "U1")
