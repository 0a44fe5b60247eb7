"""The space-time picture (budget.along): voltage inside every line from its travelling waves.

Layers: consistency with the engine (line ends = the engine's node voltages,
pins = budget.simulate bit for bit, the engine's own results untouched);
closed forms (a matched line delays the launched ramp; the mid-point of an
open-ended line follows the lattice diagram); the scikit-rf frequency-domain
reference (a line split in two at a probe node); the CLI.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

import budget
from budget.along import _record_every_node, along, trunk_runs
from budget.estimates import bounce_table
from budget.netlist import flatten

from conftest import accuracy_record
from skrf_reference import reference_waveforms

DESIGNS = Path(__file__).parent / "designs"

# One driver (r_high = r_low = RS behind a 0 -> 1 V ramp) and one line to a bare far end.
ONE_LINE = """
[bus]
name = "test bus: one line"
{window}

[edge]
rise = "{rise}"
fall = "{rise}"

[parts.src]
role = "driver"
v_high = "1 V"
v_low = "0 V"
r_high = "{rs} ohm"
r_low = "{rs} ohm"
c_pin = "0 pF"

[parts.probe]
role = "receiver"
c_pin = "0 pF"
vih = "0.7 V"
vil = "0.3 V"

[lines.l]
z0 = "50 ohm"
delay = "5 ns/m"

[[segment]]
from = "a"
to = "b"
line = "l"
length = "{length}"

[[tap]]
name = "TX"
node = "a"
part = "src"

[[tap]]
name = "RX"
node = "b"
part = "probe"
{termination}
"""
MATCHED_END = """
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "0 V"
"""


def _ramp(t, t_ramp):
    return np.clip(t / t_ramp, 0.0, 1.0)


# ---- consistency with the engine ---------------------------------------------------------

LOSSY_LUMPED = """
[bus]
name = "test bus: lossy trunk, lumped and lossless stubs"

[edge]
rise = "0.8 ns"
fall = "0.6 ns"

[parts.x]
role = "transceiver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "28 ohm"
r_low = "22 ohm"
c_pin = "3 pF"
l_pkg = "1.5 nH"
vih = "2.0 V"
vil = "0.8 V"

[lines.trunk]
z0 = "52 ohm"
delay = "6.8 ns/m"
r_dc = "90 ohm/m"

[lines.card]
z0 = "62 ohm"
delay = "7 ns/m"

[[segment]]
from = "n0"
to = "n1"
line = "trunk"
length = "6 cm"

[[segment]]
from = "n2"
to = "n1"
line = "trunk"
length = "4 cm"

[[tap]]
name = "A"
node = "n0"
part = "x"
stub = { line = "card", length = "1.5 cm" }

[[tap]]
name = "B"
node = "n1"
part = "x"
stub = { line = "card", length = "0.8 mm" }

[[tap]]
name = "C"
node = "n2"
part = "x"

[[termination]]
node = "n2"
type = "thevenin"
r_up = "110 ohm"
r_down = "90 ohm"
v_up = "3.3 V"

[[termination]]
type = "series"
tap = "A"
r = "15 ohm"
"""


def _engine_nodes(design, driver, edge, aw):
    net = flatten(design, driver, edge, dt=aw.dt, t_stop=float(aw.t[-1]))
    v_rec, _, _ = _record_every_node(net)
    return net, v_rec, {name: i for i, name in enumerate(net.node_names)}


@pytest.mark.parametrize("which, driver, edge", [
    ("example:short-bus", "CTRL", "rise"), ("example:backplane", "SLOT4", "fall"),
    ("example:fieldbus", None, "rise"), ("lossy-lumped", "A", "rise"), ("lossy-lumped", "C", "fall")])
def test_line_ends_are_the_engines_node_voltages(which, driver, edge):
    design = budget.loads(LOSSY_LUMPED) if which == "lossy-lumped" else budget.example(which.split(":")[1])
    driver = driver or design.taps[0].name
    aw = along(design, driver, edge)
    net, v_rec, idx = _engine_nodes(design, driver, edge, aw)
    swing = float(np.max(np.abs(aw.v_end - aw.v_start)))
    models = set()
    worst = 0.0
    for b in aw.bands:
        rows = aw.v[slice(*b.rows)]
        models.add(b.model)
        if b.kind == "pin":
            continue
        if b.model == "lumped":
            # a pi model has only its end nodes: the engine's values, copied
            assert np.array_equal(rows[0], v_rec[:, idx[b.start]]) and np.array_equal(rows[-1], v_rec[:, idx[b.end]])
            continue
        if b.model == "lossless":
            ends = [(0, idx[b.start]), (-1, idx[b.end])]
        else:
            # every lossless section's own end nodes (the loss is lumped between them)
            label = (f"segment #{b.index + 1} ({b.start}-{b.end})" if b.kind == "segment" else f"tap {b.tap} stub")
            n = sum(1 for name in idx if name.startswith(f"{label}:s") and name.endswith("a"))
            assert n >= 1
            x = aw.x[slice(*b.rows)]
            bounds = np.flatnonzero(np.diff(x) == 0)           # a section's end b and the next one's end a
            firsts = np.concatenate(([0], bounds + 1))
            lasts = np.concatenate((bounds, [len(x) - 1]))
            assert len(firsts) == n
            ends = [(int(i), idx[f"{label}:s{k}a"]) for k, i in enumerate(firsts)]
            ends += [(int(i), idx[f"{label}:s{k}b"]) for k, i in enumerate(lasts)]
        for row, node in ends:
            worst = max(worst, float(np.max(np.abs(rows[row] - v_rec[:, node]))))
    assert worst <= 1e-12 * swing, worst
    # the pins are the engine's waveforms, bit for bit
    w = budget.simulate(design, driver, edge)
    assert np.array_equal(w.t, aw.t)
    for tap in design.taps:
        assert np.array_equal(aw.v[aw.rows(f"pin {tap.name}")][0], w[tap.name])
    if which == "lossy-lumped":
        assert {"lossless", "sections", "lumped", "node"} <= models


def test_recording_every_node_leaves_the_engines_results_unchanged():
    # the only difference from an ordinary run is the list of recorded nodes
    design = budget.loads(LOSSY_LUMPED)
    w = budget.simulate(design, "B", "rise")
    net = flatten(design, "B", "rise", dt=w.dt, t_stop=float(w.t[-1]))
    v_rec, dc, status = _record_every_node(net)
    assert np.array_equal(v_rec[:, net.out_node], w.v)
    assert np.array_equal(dc[0, net.out_node], w.v_start) and np.array_equal(dc[1, net.out_node], w.v_end)


def test_lossless_sections_are_equipotential_at_dc_and_start_there():
    # A lossless line carries no DC voltage drop (lines are shorts at DC): before the
    # edge every point sits at its start level, and late in a settled window every
    # point of a lossless section is at its end level.  Common practice.
    design = budget.example("backplane")
    aw = along(design, "SLOT1", "rise")
    swing = float(np.max(np.abs(aw.v_end - aw.v_start)))
    assert np.max(np.abs(aw.v[:, 0] - aw.v_start)) <= 1e-12 * swing
    assert np.max(np.abs(aw.v[:, -1] - aw.v_end)) <= 0.005 * swing   # simulate's settling rule


# ---- closed forms ------------------------------------------------------------------------

def test_matched_line_delays_the_launched_ramp():
    # Source Rs = Z0 = 50 ohm, far end 50 ohm to 0 V: the launched wave is half the
    # EMF (docs/references.md A3, the source divider, SCBA015A Eq. 3) and a matched
    # line only delays it: v(x, t) = 0.5 * ramp(t - x * delay) (Branin 1967;
    # D. M. Pozar, Microwave Engineering, 4th ed. 2012, section 2.1 -- from memory).
    # TD = 0.53 ns is not a whole number of steps, so the interpolation is exercised.
    text = ONE_LINE.format(window='t_stop = "3 ns"', rise="0.2 ns", rs=50, length="10.6 cm",
                           termination=MATCHED_END)
    design = budget.loads(text)
    aw = along(design, "TX", "rise")
    r = aw.rows("segment a-b")
    x, v = aw.x[r], aw.v[r]
    assert len(x) > 10
    t_ramp = 0.2e-9 / 0.8
    exact = 0.5 * _ramp(aw.t[None, :] - x[:, None] * 5e-9, t_ramp)
    err = float(np.max(np.abs(v - exact)))
    accuracy_record(f"along, matched line vs the delayed ramp: max error {100 * err / 0.5:.3g} % of the swing")
    assert err <= 0.002 * 0.5, err        # the engine's own step error on a ramp, well inside its 1 % target


def test_open_line_mid_point_follows_the_lattice_diagram():
    # Rs = 25, Z0 = 50, open far end, 1 V step: docs/references.md A4 (lattice method,
    # Blood 1988 ch. 7; exact rationals from budget.estimates.bounce_table).  The point
    # halfway along sees each wave half a delay after it leaves an end, so between
    # passes (at 0.5, 1.5, 2.5 ... TD) it holds the sum of the waves that have passed:
    # 2/3, 4/3, 10/9, 8/9, 26/27, 28/27 ... (derived from A4's waves).
    td = 1e-9
    text = ONE_LINE.format(window='t_stop = "12.5 ns"', rise="40 ps", rs=25, length="20 cm", termination="")
    design = budget.loads(text)
    aw = along(design, "TX", "rise")
    r = aw.rows("segment a-b")
    mid = int(np.argmin(np.abs(aw.x[r] - 0.1)))
    assert abs(aw.x[r][mid] - 0.1) <= 0.2 / 399     # the nearest point: 1.25 ps of travel from the middle
    v_mid = aw.v[r][mid]
    table = bounce_table(25, 50, None, 1, n=6)
    passes = []                                      # (time the wave passes the middle [TD], wave [V])
    for row in table.rows:
        passes.append((row.t + 0.5, float(row.reflected)))
    worst = 0.0
    level = 0.0
    for k, (t_pass, wave) in enumerate(passes[:-1]):
        level += wave
        t_probe = (t_pass + 0.5) * td                # halfway to the next pass, well after the 50 ps ramp
        got = float(np.interp(t_probe, aw.t, v_mid))
        worst = max(worst, abs(got - level))
    assert worst <= 1e-6, worst      # exact on the plateaus: piecewise-linear waves, lossless line
    accuracy_record(f"along, open-line mid-point vs the lattice (A4): max error {100 * worst:.3g} % of the step")
    # and the ends follow A4 too: the open end doubles the first wave to 4/3 V
    assert abs(float(np.interp(1.5 * td, aw.t, aw.v[r][-1])) - 4 / 3) <= 0.002


# ---- the scikit-rf reference: a line split in two at a probe node ------------------------

SPLIT = """
[bus]
name = "test bus: probe inside the first segment"
t_stop = "14 ns"

[edge]
rise = "0.6 ns"
fall = "0.6 ns"

[parts.tx]
role = "driver"
v_high = "3.0 V"
v_low = "0.2 V"
r_high = "30 ohm"
r_low = "30 ohm"
c_pin = "2 pF"

[parts.rx]
role = "receiver"
c_pin = "3 pF"
r_in = "20 kohm"
vih = "2.0 V"
vil = "0.8 V"

[parts.probe]
role = "receiver"
c_pin = "0 pF"
vih = "2.0 V"
vil = "0.8 V"

[lines.main]
z0 = "50 ohm"
delay = "6.6 ns/m"

[lines.drop]
z0 = "65 ohm"
delay = "7.1 ns/m"

{first}

[[segment]]
from = "n1"
to = "n2"
line = "main"
length = "8 cm"

[[tap]]
name = "TX"
node = "n0"
part = "tx"

[[tap]]
name = "R1"
node = "n1"
part = "rx"
stub = {{ line = "drop", length = "2.5 cm" }}

[[tap]]
name = "R2"
node = "n2"
part = "rx"

{probe}

[[termination]]
node = "n2"
type = "parallel"
r = "75 ohm"
v = "1.2 V"
"""


def test_interior_point_matches_scikit_rf_with_the_line_split_there():
    # The engine's interior voltage of the unsplit 12 cm segment at x, against the
    # scikit-rf frequency-domain reference (tests/skrf_reference.py) of the same bus
    # with the segment split at x and a probe (no load) on the new node.  Tolerance:
    # the engine's accuracy target, 1 % of the swing (docs/metrics.md).
    whole = budget.loads(SPLIT.format(
        first='[[segment]]\nfrom = "n0"\nto = "n1"\nline = "main"\nlength = "12 cm"', probe=""))
    aw = along(whole, "TX", "rise")
    r = aw.rows("segment n0-n1")
    x = aw.x[r]
    j = len(x) // 3
    xj = float(x[j])
    split = budget.loads(SPLIT.format(
        first=f'[[segment]]\nfrom = "n0"\nto = "m"\nline = "main"\nlength = {xj!r}\n\n'
              f'[[segment]]\nfrom = "m"\nto = "n1"\nline = "main"\nlength = {0.12 - xj!r}',
        probe='[[tap]]\nname = "PROBE"\nnode = "m"\npart = "probe"'))
    ref = reference_waveforms(split, "TX", "rise", t_end=float(aw.t[-1]), step=aw.dt / 4)
    assert ref.truncation_estimate <= 1e-3
    got = aw.v[r][j]
    want = ref.at(aw.t)[:, ref.taps.index("PROBE")]
    swing = abs(ref.v_end[ref.taps.index("PROBE")] - ref.v_start[ref.taps.index("PROBE")])
    err = float(np.max(np.abs(got - want))) / swing
    accuracy_record(f"along, interior point vs scikit-rf (line split there): max error {100 * err:.3g} % of the swing")
    assert err <= 0.01, err
    # the point is really inside: its waveform is neither end's
    ends = aw.v[r][[0, -1]]
    assert min(float(np.max(np.abs(got - e))) for e in ends) > 0.05 * swing


# ---- layout ------------------------------------------------------------------------------

def test_trunk_runs_cut_a_star_at_its_junction_and_keep_a_chain_whole():
    chain = trunk_runs(budget.example("backplane"))
    assert len(chain) == 1 and chain[0].nodes[0] == "s1" and chain[0].nodes[-1] == "s8"
    assert math.isclose(chain[0].offsets[-1], 7 * 0.025)
    lossy = trunk_runs(budget.loads(LOSSY_LUMPED))          # n0-n1, then n1 <- n2 walked backwards
    assert len(lossy) == 1 and lossy[0].nodes == ("n0", "n1", "n2") and lossy[0].segments[1] == (1, True)


# ---- exports and the command line --------------------------------------------------------

def test_json_and_csv_exports(tmp_path):
    design = budget.example("short-bus")
    aw = along(design, "CTRL", "rise")
    aw.write(tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text())
    assert doc["schema"] == "busbudget.along/1" and doc["driver"] == "CTRL" and len(doc["t"]) == aw.t.size
    names = [b["name"] for b in doc["bands"]]
    assert names[:3] == ["segment ctrl-m1", "segment m1-m2", "segment m2-m3"] and "stub MEM2" in names
    b = doc["bands"][names.index("pin MEM3")]
    assert np.array_equal(np.array(b["v"][0]), budget.simulate(design, "CTRL", "rise")["MEM3"])
    aw.write(tmp_path / "a.csv")
    lines = (tmp_path / "a.csv").read_text().splitlines()
    header = lines[0].split(",")
    assert header[0] == "t" and len(header) == 1 + aw.v.shape[0] and len(lines) == 1 + aw.t.size
    assert header[1] == "segment ctrl-m1 @ 0 mm"
    row = np.array(lines[5].split(","), dtype=float)
    assert np.allclose(row[1:], aw.v[:, 4], rtol=1e-8, atol=1e-12)


PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def test_plot_along_command_writes_png_and_data(tmp_path, capsys):
    pytest.importorskip("matplotlib")
    from budget.cli import main

    png, data = tmp_path / "a.png", tmp_path / "a.json"
    assert main(["plot", "example:backplane", "--along", "--driver", "SLOT3", "--edge", "fall",
                 "--out", str(png), "--data", str(data), "--t-stop", "6 ns"]) == 0
    assert png.read_bytes()[:8] == PNG_MAGIC and png.stat().st_size > 20_000
    doc = json.loads(data.read_text())
    assert doc["edge"] == "fall" and doc["driver"] == "SLOT3"
    out = capsys.readouterr().out
    assert f"wrote {png}" in out and f"wrote {data}" in out


BAD = [
    ("no-driver", ["--along", "--edge", "rise", "--out", "{tmp}/a.png"], "--driver and --edge"),
    ("with-map", ["--along", "--map", "--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/a.png"],
     "--along and --map"),
    ("with-receiver", ["--along", "--driver", "CTRL", "--edge", "rise", "--receiver", "MEM1", "--out", "{tmp}/a.png"],
     "--receiver"),
    ("data-suffix", ["--along", "--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/a.png", "--data", "{tmp}/a.txt"],
     "use .json or .csv"),
    ("data-without-along", ["--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/a.png", "--data", "{tmp}/a.json"],
     "--data"),
    ("bad-window", ["--along", "--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/a.png", "--t-stop", "0 ns"],
     "--t-stop"),
    ("receiver-only-driver", ["--along", "--driver", "MEM1", "--edge", "rise", "--out", "{tmp}/a.png"],
     "cannot drive"),
]


@pytest.mark.parametrize("args, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_along_requests_exit_2_and_write_nothing(capsys, tmp_path, args, message):
    pytest.importorskip("matplotlib")
    from budget.cli import main

    argv = ["plot", "example:short-bus"] + [a.replace("{tmp}", str(tmp_path)) for a in args]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err, err
    assert list(tmp_path.iterdir()) == []
