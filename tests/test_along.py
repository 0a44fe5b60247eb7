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
{stub}

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


def test_interior_points_match_scikit_rf_with_the_lines_split_there():
    # The engine's interior voltages of the unsplit 12 cm segment and of R1's 2.5 cm
    # stub, against the scikit-rf frequency-domain reference (tests/skrf_reference.py)
    # of the same bus with both lines split there and a probe (no load) on each new
    # node.  R1 has no package L and no series R, so its pin may sit at the end of the
    # split stub (a segment and a tap on the end node).  Tolerance: the engine's
    # accuracy target, 1 % of the swing (docs/metrics.md).
    whole = budget.loads(SPLIT.format(
        first='[[segment]]\nfrom = "n0"\nto = "n1"\nline = "main"\nlength = "12 cm"',
        stub='stub = { line = "drop", length = "2.5 cm" }', probe=""))
    aw = along(whole, "TX", "rise")
    r, rs = aw.rows("segment n0-n1"), aw.rows("stub R1")
    j, js = len(aw.x[r]) // 3, len(aw.x[rs]) // 2
    xj, xs = float(aw.x[r][j]), float(aw.x[rs][js])
    assert 0 < xj < 0.12 and 0 < xs < 0.025
    split = budget.loads(SPLIT.format(
        first=f'[[segment]]\nfrom = "n0"\nto = "m"\nline = "main"\nlength = {xj!r}\n\n'
              f'[[segment]]\nfrom = "m"\nto = "n1"\nline = "main"\nlength = {0.12 - xj!r}\n\n'
              f'[[segment]]\nfrom = "n1"\nto = "s"\nline = "drop"\nlength = {xs!r}\n\n'
              f'[[segment]]\nfrom = "s"\nto = "e"\nline = "drop"\nlength = {0.025 - xs!r}',
        stub="", probe='[[tap]]\nname = "PROBE"\nnode = "m"\npart = "probe"\n\n'
                       '[[tap]]\nname = "PROBE2"\nnode = "s"\npart = "probe"').replace(
        'name = "R1"\nnode = "n1"', 'name = "R1"\nnode = "e"'))
    ref = reference_waveforms(split, "TX", "rise", t_end=float(aw.t[-1]), step=aw.dt / 4)
    assert ref.truncation_estimate <= 1e-3
    at = ref.at(aw.t)
    for rows, i, probe, what in ((r, j, "PROBE", "point inside the trunk segment"),
                                 (rs, js, "PROBE2", "point inside the stub"),
                                 (None, None, "R1", "R1's pin behind the split stub")):
        k = ref.taps.index(probe)
        got = aw.v[aw.rows("pin R1")][0] if rows is None else aw.v[rows][i]
        swing = abs(ref.v_end[k] - ref.v_start[k])
        err = float(np.max(np.abs(got - at[:, k]))) / swing
        accuracy_record(f"along, {what} vs scikit-rf (line split there): max error {100 * err:.3g} % of the swing")
        assert err <= 0.01, (what, err)
        if rows is not None:   # the point is really inside: its waveform is neither end's
            ends = aw.v[rows][[0, -1]]
            assert min(float(np.max(np.abs(got - e))) for e in ends) > 0.02 * swing


# ---- layout ------------------------------------------------------------------------------

def test_trunk_runs_cut_a_star_at_its_junction_and_keep_a_chain_whole():
    chain = trunk_runs(budget.example("backplane"))
    assert len(chain) == 1 and chain[0].nodes[0] == "s1" and chain[0].nodes[-1] == "s8"
    assert math.isclose(chain[0].offsets[-1], 7 * 0.025)
    lossy = trunk_runs(budget.loads(LOSSY_LUMPED))          # n0-n1, then n1 <- n2 walked backwards
    assert len(lossy) == 1 and lossy[0].nodes == ("n0", "n1", "n2") and lossy[0].segments[1] == (1, True)
    # a third segment at n1 makes it a junction: three branches, each from an end or the junction
    star = budget.loads(LOSSY_LUMPED.replace('[[tap]]\nname = "A"', '[[segment]]\nfrom = "n1"\nto = "n3"\n'
                                             'line = "card"\nlength = "3 cm"\n\n[[tap]]\nname = "A"', 1))
    runs = trunk_runs(star)
    assert sorted(r.nodes for r in runs) == [("n0", "n1"), ("n1", "n2"), ("n1", "n3")]
    aw = along(star, "C", "rise")
    assert [b.name for b in aw.bands if b.kind == "segment"] == ["segment n0-n1", "segment n2-n1", "segment n1-n3"]


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


# ---- properties (hypothesis): causality inside every line ---------------------------------

def _bus_distances(design, driver, allowance):
    """Least sum of max(TD - allowance, 0) [s] from the driver's die to every bus node (Dijkstra over the
    segments in both directions, entered through the driver's stub; lumped parts add no delay)."""
    import heapq

    def late(td):
        return max(td - allowance, 0.0)

    adj = {}
    for s in design.segments:
        w = late(float(design.lines[s.line].delay * s.length))
        adj.setdefault(s.a, []).append((s.b, w))
        adj.setdefault(s.b, []).append((s.a, w))
    dtap = design.tap(driver)
    start = late(float(design.lines[dtap.stub.line].delay * dtap.stub.length)) if dtap.stub else 0.0
    dist = {dtap.node: start}
    heap = [(start, dtap.node)]
    while heap:
        x, n = heapq.heappop(heap)
        if x > dist[n]:
            continue
        for m, w in adj.get(n, []):
            if x + w < dist.get(m, math.inf):
                dist[m] = x + w
                heapq.heappush(heap, (x + w, m))
    return dist


def _check_causality(design, driver, edge):
    """Every point of the bus keeps its start level until a wave can have reached it (see the test)."""
    aw = along(design, driver, edge, t_stop=6e-9)
    allowance = 2 * aw.dt
    dist = _bus_distances(design, driver, allowance)
    swing = max(float(np.max(np.abs(aw.v_end - aw.v_start))), 1e-6)
    quiet_points = 0
    for b in aw.bands:
        if b.kind == "pin":
            continue
        xi = aw.x[slice(*b.rows)] / b.length
        line = design.lines[design.tap(b.tap).stub.line] if b.kind == "stub" else \
            design.lines[design.segments[b.index].line]
        td = float(line.delay) * b.length
        d_a = dist.get(b.start, math.inf)
        if b.kind == "stub" and b.tap == driver:
            d_b = 0.0                                 # the driver sits at the device end of its own stub
        else:
            d_b = dist.get(b.end, math.inf) if b.kind == "segment" else math.inf
        for i, f in enumerate(xi):
            t_min = min(d_a + max(f * td - allowance, 0.0), d_b + max((1 - f) * td - allowance, 0.0))
            quiet = aw.t < t_min
            row = aw.v[b.rows[0] + i]
            moved = float(np.max(np.abs(row[quiet] - row[0]), initial=0.0))
            assert moved <= 1e-9 * swing, f"{aw.labels[b.rows[0] + i]} moved {moved:.3g} V before {t_min:.4g} s"
            quiet_points += int(quiet.sum() > 1)
    return quiet_points


def _lossless(design):
    return design.with_values({p: 0.0 for p in design.params if p.startswith("lines.") and p.endswith(".r_dc")})


def test_causality_check_is_tight_enough_to_fail():
    # The waves do arrive: at the far end of the 20 cm open line of the lattice test the
    # voltage has moved by half the step within 4 steps after the bound.
    design = budget.loads(ONE_LINE.format(window='t_stop = "3 ns"', rise="0.2 ns", rs=25, length="20 cm",
                                          termination=""))
    assert _check_causality(design, "TX", "rise") > 0
    aw = along(design, "TX", "rise", t_stop=3e-9)
    far = aw.v[aw.rows("segment a-b")][-1]
    t_bound = 1e-9 - 2 * aw.dt
    assert float(np.interp(t_bound + 4 * aw.dt + 0.25e-9, aw.t, far)) > 0.5 * (2 / 3)


try:
    from hypothesis import event, given
    from hypothesis import strategies as st

    from budget.strategies import buses
except ImportError:     # pragma: no cover - hypothesis is a test dependency
    given = None

if given is not None:
    @given(bus=buses(max_taps=5).flatmap(lambda d: st.tuples(st.just(d), st.sampled_from(d.drivers))),
           edge=st.sampled_from(["rise", "fall"]))
    def test_no_point_of_any_line_moves_before_a_wave_can_reach_it(bus, edge):
        # Physics: a voltage change travels along a line at the line's speed; nothing inside a
        # line moves before the shortest sum of delays from the driver to that point (lumped
        # parts add none).  Allowance: the engine and the interior interpolation read up to two
        # samples newer than a delay (4-point stencil), so each line may bring its first tiny
        # precursor two steps early -- the bound is the least sum of max(TD - 2 dt, 0).  Lossless
        # lines only (a lossy line is several sections, each with that allowance).
        design, driver = bus
        event(f"points with a quiet time: {'some' if _check_causality(_lossless(design), driver, edge) else 'none'}")


def test_sizes_beyond_the_block_limit_are_refused_before_the_run(monkeypatch):
    import budget.along as mod
    from budget.errors import ArgumentError

    design = budget.example("short-bus")
    monkeypatch.setattr(mod, "MAX_BLOCK_VALUES", 10_000)
    with pytest.raises(ArgumentError, match=r"MAX_BLOCK_VALUES"):
        along(design, "CTRL", "rise")
    with pytest.raises(ArgumentError, match="points_per_step"):
        along(budget.example("short-bus"), "CTRL", "rise", points_per_step=0)


def test_figure_names_nodes_taps_and_chains():
    pytest.importorskip("matplotlib")
    import matplotlib.pyplot as plt

    from budget.along_figure import along_figure, shown_window

    design = budget.example("backplane")
    aw = along(design, "SLOT2", "rise")
    fig = along_figure(design, "SLOT2", "rise", waves=aw)
    trunk, taps = fig.axes[0], fig.axes[1]
    labels = [t.get_text() for t in trunk.get_yticklabels()]
    assert labels[0] == "s1 [SLOT1] 0 mm" and labels[-1] == "s8 [SLOT8] 175 mm"
    tap_labels = [t.get_text() for t in taps.get_yticklabels()]
    assert tap_labels[1] == "SLOT2 (driver): stub 10 mm, pin" and len(tap_labels) == 8
    # drawn until the whole bus has settled to within 5 % of the swing (plus 10 %), inside the window
    t_show = shown_window(aw)
    assert 0 < t_show <= aw.t[-1]
    assert trunk.get_xlim()[1] == pytest.approx(t_show * 1e9, rel=0.01)
    late = aw.t > t_show
    swing = float(np.max(np.abs(aw.v_end - aw.v_start)))
    assert np.max(np.abs(aw.v[:, late] - aw.v_end[:, None])) <= 0.05 * swing
    plt.close(fig)
