"""Engine pin waveforms against the independent scikit-rf frequency-domain reference.

Accuracy target (docs/metrics.md): for every tap and both edges, the max
abs error is <= 1 % of that tap's swing |v_end - v_start|, and the 50 %
crossing time is within 2 % of the 10-90 % rise (or fall) time.  The
reference (tests/skrf_reference.py) solves the same circuit exactly in the
frequency domain: lines as distributed RLGC two-ports from scikit-rf, no
lumping, no sectioning.  The measured worst figures are printed in the pytest
terminal summary ("accuracy vs scikit-rf").

The designs below are fictional test buses, each aimed at one part of the
engine: (i) stubs shorter than the automatic time step (lumped pi, lossless
and lossy), series and Thevenin terminations; (ii) a trunk whose series loss
matters (12.8 ohm in all), lossy stubs, package inductance, parallel and RC
terminations; (iii) a star: one node with four segments.  The bundled examples
are checked too, with r_low set equal to r_high where a part has them
different (the reference needs a time-invariant driver).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import budget
from skrf_reference import SETTLE_TOL, line_y, reference_waveforms

from conftest import accuracy_record

MAX_ERR_OF_SWING = 0.01        # docs/metrics.md accuracy target [-]
MAX_CROSSING_OF_RISE = 0.02    # docs/metrics.md accuracy target [-]
MAX_REF_TRUNCATION = 1e-3      # the reference's own error budget, a tenth of the target [-]

# (i) stubs of 1.2-1.5 mm (about 8-9 ps) under a 1 ns / 0.7 ns edge: the automatic step
# (a fraction of the 1.25 ns / 0.875 ns ramp, 20-40 ps) is longer, so they are lumped.
SHORT_STUBS = """
[bus]
name = "test bus: stubs shorter than the step"

[edge]
rise = "1.0 ns"
fall = "0.7 ns"

[parts.ctl]
role = "transceiver"
v_high = "3.3 V"
v_low = "0.1 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "2 pF"
vih = "2.0 V"
vil = "0.8 V"

[parts.rx]
role = "receiver"
c_pin = "3 pF"
r_in = "10 kohm"
vih = "2.0 V"
vil = "0.8 V"

[lines.main]
z0 = "55 ohm"
delay = "6.9 ns/m"

[lines.drop]
z0 = "70 ohm"
er_eff = 3.2
r_dc = "150 ohm/m"

[[segment]]
from = "a"
to = "b"
line = "main"
length = "3 cm"

[[segment]]
from = "b"
to = "c"
line = "main"
length = "2.2 cm"

[[segment]]
from = "c"
to = "d"
line = "main"
length = "4 cm"

[[tap]]
name = "CTL"
node = "a"
part = "ctl"

[[tap]]
name = "R1"
node = "b"
part = "rx"
stub = { line = "drop", length = "1.5 mm" }

[[tap]]
name = "R2"
node = "c"
part = "rx"
stub = { line = "drop", length = "1.5 mm" }

[[tap]]
name = "X"
node = "d"
part = "ctl"
stub = { line = "main", length = "1.2 mm" }

[[termination]]
type = "series"
tap = "CTL"
r = "33 ohm"

[[termination]]
node = "d"
type = "thevenin"
r_up = "110 ohm"
r_down = "91.667 ohm"
v_up = "3.3 V"
"""

# (ii) series loss that matters: 4 x 8 cm at 40 ohm/m = 12.8 ohm on a 50 ohm trunk,
# lossy stubs, package inductance, parallel and RC terminations.
LOSSY = """
[bus]
name = "test bus: lossy trunk"

[edge]
rise = "0.5 ns"
fall = "0.5 ns"

[parts.xcvr]
role = "transceiver"
v_high = "2.5 V"
v_low = "0 V"
r_high = "15 ohm"
r_low = "15 ohm"
c_pin = "2 pF"
l_pkg = "1.5 nH"
vih = "1.7 V"
vil = "0.7 V"

[lines.trunk]
z0 = "50 ohm"
delay = "7 ns/m"
r_dc = "40 ohm/m"

[lines.spur]
z0 = "65 ohm"
delay = "7 ns/m"
r_dc = "60 ohm/m"

[[segment]]
from = "n1"
to = "n2"
line = "trunk"
length = "8 cm"

[[segment]]
from = "n2"
to = "n3"
line = "trunk"
length = "8 cm"

[[segment]]
from = "n3"
to = "n4"
line = "trunk"
length = "8 cm"

[[segment]]
from = "n4"
to = "n5"
line = "trunk"
length = "8 cm"

[[tap]]
name = "A"
node = "n1"
part = "xcvr"
stub = { line = "spur", length = "1 cm" }

[[tap]]
name = "B"
node = "n2"
part = "xcvr"
stub = { line = "spur", length = "2 cm" }

[[tap]]
name = "C"
node = "n4"
part = "xcvr"
stub = { line = "spur", length = "1.5 cm" }

[[tap]]
name = "D"
node = "n5"
part = "xcvr"

[[termination]]
node = "n1"
type = "parallel"
r = "50 ohm"
v = "1.25 V"

[[termination]]
node = "n5"
type = "rc"
r = "50 ohm"
c = "47 pF"
"""

# (iii) a star: node "hub" joins four segments (feed and three arms).
STAR = """
[bus]
name = "test bus: star split"

[edge]
rise = "0.8 ns"
fall = "0.8 ns"

[parts.drv]
role = "driver"
v_high = "1.8 V"
v_low = "0 V"
r_high = "12 ohm"
r_low = "12 ohm"
c_pin = "1.5 pF"

[parts.node]
role = "transceiver"
v_high = "1.8 V"
v_low = "0 V"
r_high = "25 ohm"
r_low = "25 ohm"
c_pin = "2.5 pF"
l_pkg = "1 nH"
vih = "1.17 V"
vil = "0.63 V"

[parts.rx]
role = "receiver"
c_pin = "1 pF"
vih = "1.17 V"
vil = "0.63 V"

[lines.arm]
z0 = "60 ohm"
delay = "6.5 ns/m"

[lines.feed]
z0 = "45 ohm"
delay = "6.5 ns/m"

[[segment]]
from = "src"
to = "hub"
line = "feed"
length = "5 cm"

[[segment]]
from = "hub"
to = "e1"
line = "arm"
length = "4 cm"

[[segment]]
from = "hub"
to = "e2"
line = "arm"
length = "6 cm"

[[segment]]
from = "hub"
to = "e3"
line = "arm"
length = "3 cm"

[[tap]]
name = "DRV"
node = "src"
part = "drv"

[[tap]]
name = "N1"
node = "e1"
part = "node"

[[tap]]
name = "R2"
node = "e2"
part = "rx"
stub = { line = "arm", length = "1 cm" }

[[tap]]
name = "R3"
node = "e3"
part = "rx"

[[tap]]
name = "N4"
node = "hub"
part = "node"
stub = { line = "arm", length = "0.8 cm" }

[[termination]]
type = "series"
tap = "DRV"
r = "20 ohm"

[[termination]]
node = "e2"
type = "parallel"
r = "60 ohm"
v = "0.9 V"

[[termination]]
node = "e3"
type = "rc"
r = "60 ohm"
c = "20 pF"
"""

TEST_DESIGNS = {"short-stubs": SHORT_STUBS, "lossy": LOSSY, "star": STAR}


def _time_invariant(design):
    """``design`` with r_low := r_high for every part that drives (a no-op where equal)."""
    values = {}
    for name, part in design.parts.items():
        if part.can_drive and part.r_low != part.r_high:
            values[f"parts.{name}.r_low"] = part.r_high
    return design.with_values(values) if values else design


def _design(key):
    if key in TEST_DESIGNS:
        return budget.loads(TEST_DESIGNS[key], source=f"<{key}>")
    return _time_invariant(budget.example(key))


def first_crossing(t, v, level, rising):
    """First time [s] at which v crosses ``level`` [V] in the edge's direction (linear interpolation)."""
    above = v >= level if rising else v <= level
    idx = np.flatnonzero(above)
    if idx.size == 0:
        return np.nan
    i = idx[0]
    if i == 0:
        return t[0]
    v0, v1 = v[i - 1], v[i]
    return t[i - 1] + (level - v0) / (v1 - v0) * (t[i] - t[i - 1])


# A crossing time is only defined to a fraction of the edge time where the waveform
# passes the level briskly.  Where the reference lingers within 1 % of the swing of the
# 50 % level (the amplitude target) for longer than a quarter of the edge time -- a
# plateau close to 50 %, as a series-terminated or reflected-wave bus makes -- a 1 %
# amplitude error may move the first crossing by more than the edge time.  Such crossings
# are counted and reported, not compared; the fixed test designs must have none.
LINGER_BAND = 0.01      # [-] of the swing
LINGER_LIMIT = 0.25     # [-] of the edge time


def lingers_near(t, v, level, swing, t_edge, rising):
    """True if v stays within LINGER_BAND * swing of ``level`` for > LINGER_LIMIT * t_edge in total
    up to one edge time after its first crossing (t [s], v [V], level [V], swing [V], t_edge [s])."""
    tc = first_crossing(t, v, level, rising)
    stop = (tc if np.isfinite(tc) else t[-1]) + t_edge
    sel = (t <= stop) & (np.abs(v - level) <= LINGER_BAND * abs(swing))
    return sel.sum() * (t[1] - t[0]) > LINGER_LIMIT * t_edge


def compare(design, driver, edge):
    """Per tap: error / swing, crossing error / edge time (nan where ill-conditioned), and (w, ref)."""
    w = budget.simulate(design, driver=driver, edge=edge)
    # reference summed exactly on a grid four times finer than the engine's (engine times included)
    ref = reference_waveforms(design, driver, edge, t_end=float(w.t[-1]), step=w.dt / 4)
    # the reference's own error budget (a failure here is the oracle's, not the engine's)
    if not (ref.truncation_estimate < MAX_REF_TRUNCATION and ref.settle_residual <= SETTLE_TOL):
        raise RuntimeError(f"reference not accurate enough: truncation {ref.truncation_estimate:.2g}, "
                           f"settle residue {ref.settle_residual:.2g}")
    swing = np.abs(w.v_end - w.v_start)
    # the DC levels: two independent resistive solves must agree to rounding
    np.testing.assert_allclose(w.v_start, ref.v_start, rtol=0, atol=1e-9 * swing.max())
    np.testing.assert_allclose(w.v_end, ref.v_end, rtol=0, atol=1e-9 * swing.max())
    err = np.max(np.abs(w.v - ref.at(w.t)), axis=0) / swing
    t_edge = design.edge.rise if edge == "rise" else design.edge.fall
    rising = edge == "rise"
    cross = []
    for k, tap in enumerate(w.taps):
        level = 0.5 * (w.v_start[k] + w.v_end[k])
        if lingers_near(ref.t, ref.v[:, k], level, swing[k], t_edge, rising):
            cross.append(np.nan)
            continue
        te = first_crossing(w.t, w.v[:, k], level, rising)
        tr = first_crossing(ref.t, ref.v[:, k], level, rising)
        cross.append(abs(te - tr) / t_edge)
    return err, np.array(cross), w, ref


def _drivers(design, key):
    # every driver position in the small test buses; the 8- and 10-node examples
    # take the two ends and one inner position to keep the file fast
    drv = list(design.drivers)
    if len(drv) > 4:
        drv = [drv[0], drv[len(drv) // 2], drv[-1]]
    return drv


@pytest.mark.parametrize("key", list(TEST_DESIGNS) + list(budget.EXAMPLES))
def test_engine_matches_skrf_reference(key):
    design = _design(key)
    worst_err, worst_cross, worst_at = 0.0, 0.0, None
    failures = []
    for driver in _drivers(design, key):
        for edge in ("rise", "fall"):
            err, cross, w, ref = compare(design, driver, edge)
            assert not np.isnan(cross).any(), f"ill-conditioned 50 % crossing in a fixed test design: {w.taps}"
            for k, tap in enumerate(w.taps):
                if err[k] > MAX_ERR_OF_SWING or not cross[k] <= MAX_CROSSING_OF_RISE:
                    failures.append(f"driver {driver} {edge} tap {tap}: error {100 * err[k]:.3g} % of swing, "
                                    f"crossing {100 * cross[k]:.3g} % of the edge time")
            if err.max() > worst_err:
                worst_err, worst_at = float(err.max()), f"{driver}/{edge}/{w.taps[int(err.argmax())]}"
            worst_cross = max(worst_cross, float(np.nanmax(cross)))
    accuracy_record(f"skrf {key:12s} worst error {100 * worst_err:.3f} % of swing ({worst_at}), "
                    f"worst 50 % crossing {100 * worst_cross:.3f} % of rise time")
    assert not failures, "\n".join(failures)


def test_short_stubs_are_lumped_and_said_so():
    design = _design("short-stubs")
    w = budget.simulate(design, driver="CTL", edge="rise")
    lumped = [n for n in w.notes if "lumped pi" in n]
    # the three stubs (1.5 mm lossy, 1.2 mm lossless: 8-9 ps) are shorter than the 0-100 %
    # ramp / 128 (9.8 ps), so they may be lumped, and below the step
    assert w.dt > 10e-12
    assert len(lumped) == 3, w.notes
    for tap in ("R1", "R2", "X"):
        assert any(f"tap {tap} stub" in n for n in lumped), w.notes


def test_lossy_trunk_loss_matters():
    """The lossy test bus really exercises loss: DC levels and waveforms move by > 5 % of the swing."""
    design = _design("lossy")
    lossless = design.with_values({"lines.trunk.r_dc": 1e-9, "lines.spur.r_dc": 1e-9})
    w = budget.simulate(design, driver="D", edge="rise")
    w0 = budget.simulate(lossless, driver="D", edge="rise", t_stop=float(w.t[-1]))
    swing = np.abs(w0.v_end - w0.v_start)
    assert np.max(np.abs(w.v_end - w0.v_end) / swing) > 0.05
    n = min(len(w.t), len(w0.t))
    assert np.max(np.abs(w.v[:n] - w0.v[:n]) / swing) > 0.05


def test_star_has_a_node_with_four_segments():
    design = _design("star")
    count = {}
    for s in design.segments:
        for n in (s.a, s.b):
            count[n] = count.get(n, 0) + 1
    assert count["hub"] == 4


def test_comparison_can_fail():
    """A 5 % error in one trunk impedance is caught: the comparison is not blind."""
    design = _design("star")
    wrong = design.with_values({"lines.arm.z0": 63.0})
    w = budget.simulate(wrong, driver="DRV", edge="rise")
    ref = reference_waveforms(design, "DRV", "rise", t_end=float(w.t[-1]), step=w.dt / 4)
    swing = np.abs(ref.v_end - ref.v_start)
    err = np.max(np.abs(w.v - ref.at(w.t)), axis=0) / swing
    assert err.max() > MAX_ERR_OF_SWING


def test_skrf_line_matches_telegrapher_closed_form():
    """scikit-rf's two-port of a lossy line, as the reference uses it, against the closed form.

    Y11 = 1/(Zc tanh(gamma l)), Y12 = -1/(Zc sinh(gamma l)) for a uniform line
    (Pozar 2012, ch. 4 two-port tables -- from memory).
    """
    f = np.array([1e6, 1e8, 1.3e9, 7.7e9])
    z0, delay, r_dc, length = 50.0, 6.7e-9, 40.0, 0.12
    y = line_y(f, z0, delay, r_dc, length)
    w = 2 * np.pi * f
    zs, ys = r_dc + 1j * w * z0 * delay, 1j * w * delay / z0
    g, zc = np.sqrt(zs * ys), np.sqrt(zs / ys)
    np.testing.assert_allclose(y[:, 0, 0], 1 / (zc * np.tanh(g * length)), rtol=1e-10)
    np.testing.assert_allclose(y[:, 1, 1], 1 / (zc * np.tanh(g * length)), rtol=1e-10)
    np.testing.assert_allclose(y[:, 0, 1], -1 / (zc * np.sinh(g * length)), rtol=1e-10)


def test_reference_refuses_a_time_varying_driver():
    design = _design("star").with_values({"parts.drv.r_low": 10.0})
    with pytest.raises(ValueError, match="r_high == r_low"):
        reference_waveforms(design, "DRV", "rise", t_end=5e-9)


def test_reference_reproduces_lattice_a5():
    """The reference itself against docs/references.md A5 (lattice, Rs = 10, Z0 = 50, RL = 200, 1 V).

    Load plateaus 4/3, 4/5, 76/75, 116/125 at t = 1, 3, 5, 7 TD; source end
    5/6, 1, 14/15 at 0, 2, 4 TD (exact rationals, derived from the lattice
    method of Blood 1988 ch. 7).  A 100 ps edge keeps the series short; plateaus
    are read over their middle half.
    """
    text = """
[bus]
name = "reference check: A5 lattice"
[edge]
rise = "100 ps"
fall = "100 ps"
[parts.src]
role = "driver"
v_high = "1 V"
v_low = "0 V"
r_high = "10 ohm"
r_low = "10 ohm"
c_pin = "0 pF"
[parts.probe]
role = "receiver"
c_pin = "0 pF"
vih = "0.7 V"
vil = "0.3 V"
[lines.l50]
z0 = "50 ohm"
delay = "10 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l50"
length = "10 cm"
[[tap]]
name = "SRC"
node = "a"
part = "src"
[[tap]]
name = "END"
node = "b"
part = "probe"
[[termination]]
node = "b"
type = "parallel"
r = "200 ohm"
v = "0 V"
"""
    design = budget.loads(text)
    ref = reference_waveforms(design, "SRC", "rise", t_end=9e-9, step=5e-12)
    td, ramp = 1e-9, 125e-12

    def mid(name, t0, t1):
        a, b = t0 + ramp + 0.25 * (t1 - t0 - ramp), t1 - 0.25 * (t1 - t0 - ramp)
        sel = (ref.t >= a) & (ref.t <= b)
        return ref[name][sel]

    worst = 0.0
    for k, v in enumerate([4 / 3, 4 / 5, 76 / 75, 116 / 125]):
        worst = max(worst, np.max(np.abs(mid("END", (2 * k + 1) * td, (2 * k + 3) * td) - v)))
    for k, v in enumerate([5 / 6, 1.0, 14 / 15]):
        worst = max(worst, np.max(np.abs(mid("SRC", 2 * k * td, (2 * k + 2) * td) - v)))
    accuracy_record(f"skrf reference itself vs docs/references.md A5 lattice: worst plateau error {100 * worst:.4f} % of step")
    assert worst < 0.002


# ---------------------------------------------------------------------------
# Former accuracy misses of the engine, found by the random comparison below; each is a
# minimal fictional bus.  A and C missed the 1 % target with linear interpolation of
# line history (1.82 % and 2.25 %) and pass since the engine interpolates with a 4-point
# Lagrange stencil; B (a short ringing line lumped because the design fixes a coarse
# step) is the documented limit of lumping and stays a strict xfail.  With the automatic
# step the same line is no longer lumped (test_automatic_step_keeps_a_ringing_line).

_REPRO_HEAD = """
[bus]
name = "{name}"
{dt}
[edge]
rise = "{rise}"
fall = "{rise}"

[parts.drv]
role = "driver"
v_high = "1 V"
v_low = "0 V"
r_high = "{rs} ohm"
r_low = "{rs} ohm"
c_pin = "0 pF"

[parts.rx]
role = "receiver"
c_pin = "0 pF"
vih = "0.7 V"
vil = "0.3 V"
"""

# (A) Fractional-delay interpolation on a lightly damped bus: 5 ohm driver, three 1 cm
# (50 ps) pieces of open 30 ohm line, 0.3 ns edge.  Automatic step 11.7 ps: 4.27 steps
# per line, every round trip goes through six linear interpolations.  Measured: 1.82 % of
# the swing (1.03 % at half the step; 0.011 % at 10 or 12.5 ps, where 50 ps is a whole
# number of steps).
REPRO_INTERPOLATION = _REPRO_HEAD.format(name="miss A: interpolated delays, ringing", dt="", rise="0.3 ns",
                                         rs=5) + """
[lines.l]
z0 = "30 ohm"
delay = "5 ns/m"

[[segment]]
from = "a"
to = "b"
line = "l"
length = "1 cm"

[[segment]]
from = "b"
to = "c"
line = "l"
length = "1 cm"

[[segment]]
from = "c"
to = "d"
line = "l"
length = "1 cm"

[[tap]]
name = "D"
node = "a"
part = "drv"

[[tap]]
name = "R1"
node = "b"
part = "rx"

[[tap]]
name = "R2"
node = "c"
part = "rx"

[[tap]]
name = "R3"
node = "d"
part = "rx"
"""

# (B) A lumped short line that rings: 5 ohm driver, 0.97 cm (48.5 ps) of open 30 ohm line,
# 1.28 ns edge, step 50 ps: the line becomes one pi section.  The real line rings at
# 1/(4 TD) = 5.2 GHz with about 2 % of the swing (Gamma_S = -0.71); the pi section cannot.
# Measured: 2.00 % (1.78 % at 100 ps, 2.05 % at 200 ps; 0.011 % at a 48.5 ps step where
# the line is kept).
REPRO_LUMPED = _REPRO_HEAD.format(name="miss B: lumped ringing line", dt='dt = "50 ps"', rise="1.28 ns",
                                  rs=5) + """
[lines.l]
z0 = "30 ohm"
delay = "5 ns/m"

[[segment]]
from = "a"
to = "b"
line = "l"
length = "0.97 cm"

[[tap]]
name = "D"
node = "a"
part = "drv"

[[tap]]
name = "R"
node = "b"
part = "rx"
"""

# (C) Sectioned loss: 36 cm of 30 ohm line at 21 ohm/m (7.6 ohm), 18 ohm driver, matched
# far end, 1.17 ns edge.  26 sections of 100.5 ps at a 45.7 ps step: each section
# interpolates its own fraction, and the corners of the edge diffuse.  Measured: 2.25 %
# (1.29 / 0.54 / 0.30 % at 1/2, 1/4, 1/8 of the step; 0.013 % when the section delay is
# a whole number of steps, e.g. dt = 50.26 ps; 0.013 % for the same line without loss).
REPRO_SECTIONS = _REPRO_HEAD.format(name="miss C: sectioned lossy line", dt="", rise="1.17 ns", rs=18) + """
[lines.l]
z0 = "30 ohm"
delay = "7.26 ns/m"
r_dc = "21 ohm/m"

[[segment]]
from = "a"
to = "b"
line = "l"
length = "36 cm"

[[tap]]
name = "D"
node = "a"
part = "drv"

[[tap]]
name = "R"
node = "b"
part = "rx"

[[termination]]
node = "b"
type = "parallel"
r = "30 ohm"
v = "0 V"
"""


def _check_repro(text):
    design = budget.loads(text)
    err, cross, w, ref = compare(design, "D", "rise")
    accuracy_record(f"skrf former miss {design.bus.name:38s} error {100 * err.max():.3f} % of swing")
    assert err.max() <= MAX_ERR_OF_SWING
    assert np.nanmax(cross) <= MAX_CROSSING_OF_RISE
    return w


@pytest.mark.parametrize("text", [REPRO_INTERPOLATION, REPRO_SECTIONS],
                         ids=["A-interpolated-delays", "C-sectioned-loss"])
def test_former_accuracy_miss(text):
    _check_repro(text)


@pytest.mark.xfail(strict=True, raises=AssertionError,
                   reason="a design-fixed step coarser than a ringing line's delay forces a lumped pi")
def test_lumped_ringing_line_at_a_fixed_coarse_step():
    _check_repro(REPRO_LUMPED)


# Former known misses of the rule-based step (tests/designs/known_misses/), found by the
# random-bus search below; both converge when the step is halved, so they were
# step-resolution errors, not model errors, and the step chosen by accuracy
# (budget/step_accuracy.py) brings both within the target:
#  D  a lossy trunk lumped in 24 loss sections: each section's fractional-delay interpolation
#     adds a little dispersion, and 24 of them in cascade exceeded 1 % (1.07 %) at a ramp/32
#     step; the accuracy-chosen step (ramp/64) leaves 0.28 %;
#  E  a 94 ohm stub with a 1 pF pin on a 31 ohm trunk rings at about 1.2 GHz with a high Q;
#     at about 10 samples a period the phase error grew over the 13 ns it keeps ringing
#     (1.54 %); the accuracy-chosen step (37 ps, rising edge) leaves 0.26 %.
KNOWN_MISSES = sorted((Path(__file__).parent / "designs" / "known_misses").glob("*.toml"))
# where the automatic step leaves a known miss [-] of the swing, and how far halving the step brings it
KNOWN_MISS_LIMIT = 0.02
HALVED_STEP_LIMIT = 0.005


def _known_miss(path):
    design = budget.load(path)
    err, cross, w, ref = compare(design, "T0", "rise")
    accuracy_record(f"skrf known miss {design.bus.name[:36]:36s} error {100 * err.max():.3f} % of swing")
    return design, err, w, ref


@pytest.mark.slow
@pytest.mark.parametrize("path", KNOWN_MISSES, ids=[p.stem for p in KNOWN_MISSES])
def test_known_accuracy_miss_is_bounded_and_converges(path):
    design, err, w, ref = _known_miss(path)
    assert err.max() <= KNOWN_MISS_LIMIT
    t_end = float(w.t[-1])
    half = budget.simulate(design, "T0", "rise", dt=w.dt / 2, t_stop=t_end)
    keep = half.t <= t_end
    err_half = np.max(np.abs(half.v[keep] - ref.at(half.t[keep])), axis=0) / np.abs(half.v_end - half.v_start)
    assert err_half.max() <= HALVED_STEP_LIMIT


@pytest.mark.slow
@pytest.mark.parametrize("path", KNOWN_MISSES, ids=[p.stem for p in KNOWN_MISSES])
def test_known_accuracy_miss_at_the_target(path):
    _design_, err, _w, _ref = _known_miss(path)
    assert err.max() <= MAX_ERR_OF_SWING


def test_automatic_step_keeps_a_ringing_line():
    """Miss B with the automatic step: the 48.5 ps line is longer than T/128, so it is not lumped."""
    w = _check_repro(REPRO_LUMPED.replace('dt = "50 ps"', ""))
    assert w.dt <= 48.5e-12 * (1 + 1e-9)
    assert not any("lumped pi" in n for n in w.notes)


# ---------------------------------------------------------------------------
# Random buses (daisy chains of 2-5 taps, the earlier strategy of tests/test_properties.py,
# with r_low := r_high) against
# the reference: the search that found the misses above.  Derandomised, but hypothesis also
# draws number literals from the project's own loaded modules, so which buses it meets
# changes when the code (or the set of modules loaded before it) changes: the bound must
# hold for any physical bus, not for one fixed list.  No shrinking: a failing example is
# printed as found.

from hypothesis import Phase, assume, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


def _f(x):
    return repr(float(x))


@st.composite
def bus_texts(draw, *, grounded=True, lossy=True):
    """A random valid design file (TOML text) and the name of a tap that can drive.

    grounded=False leaves out every resistor to ground (r_in, Thevenin r_down),
    so that a common shift of all source voltages shifts every node.
    lossy=False makes every line lossless.
    """
    n = draw(st.integers(2, 5))
    fl = lambda lo, hi: st.floats(lo, hi, allow_nan=False, allow_infinity=False)  # noqa: E731
    rise, fall = draw(fl(0.3e-9, 2e-9)), draw(fl(0.3e-9, 2e-9))
    out = [f'[bus]\nname = "random bus"\n\n[edge]\nrise = {_f(rise)}\nfall = {_f(fall)}\n']
    r_dc = lambda: draw(st.one_of(st.just(0.0), fl(1.0, 60.0))) if lossy else 0.0  # noqa: E731
    out.append(f"[lines.trunk]\nz0 = {_f(draw(fl(30, 120)))}\ndelay = {_f(draw(fl(5e-9, 8e-9)))}\n"
               f"r_dc = {_f(r_dc())}\n")
    out.append(f"[lines.spur]\nz0 = {_f(draw(fl(30, 120)))}\ndelay = {_f(draw(fl(5e-9, 8e-9)))}\n"
               f"r_dc = {_f(r_dc())}\n")
    for i in range(n - 1):
        out.append(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "trunk"\n'
                   f"length = {_f(draw(fl(0.01, 0.3)))}\n")
    can_drive = []
    for i in range(n):
        role = "transceiver" if i == 0 or draw(st.booleans()) else "receiver"
        # c_pin 0 (an ideal probe) or 0.5-5 pF: a tiny c_pin behind l_pkg would force a tiny step
        c_pin = draw(st.one_of(st.just(0.0), fl(0.5e-12, 5e-12)))
        p = [f'[parts.p{i}]\nrole = "{role}"\nc_pin = {_f(c_pin)}\n']
        if role == "transceiver":
            # levels straddle the 0.8/2.0 V thresholds: the loader refuses thresholds a part
            # (or the whole bus) can never reach
            v_low = draw(fl(-1.0, 0.5))
            p.append(f"v_low = {_f(v_low)}\nv_high = {_f(draw(fl(2.5, 4.0)))}\n"
                     f"r_high = {_f(draw(fl(5, 60)))}\nr_low = {_f(draw(fl(5, 60)))}\n")
            can_drive.append(f"T{i}")
        p.append('vih = "2.0 V"\nvil = "0.8 V"\n')
        if draw(st.booleans()):
            p.append(f"l_pkg = {_f(draw(fl(0.3e-9, 3e-9)))}\n")
        if grounded and draw(st.booleans()):
            p.append(f"r_in = {_f(draw(fl(1e3, 1e5)))}\n")
        out.append("".join(p))
        stub = ""
        if draw(st.booleans()):
            stub = f'stub = {{ line = "spur", length = {_f(draw(fl(0.001, 0.05)))} }}\n'
        out.append(f'[[tap]]\nname = "T{i}"\nnode = "n{i}"\npart = "p{i}"\n{stub}')
    kinds = ["none", "parallel", "rc"] + (["thevenin"] if grounded else [])
    for node in ("n0", f"n{n - 1}"):
        kind = draw(st.sampled_from(kinds))
        if kind == "parallel":
            out.append(f'[[termination]]\nnode = "{node}"\ntype = "parallel"\nr = {_f(draw(fl(20, 200)))}\n'
                       f"v = {_f(draw(fl(-1.0, 3.0)))}\n")
        elif kind == "rc":
            out.append(f'[[termination]]\nnode = "{node}"\ntype = "rc"\nr = {_f(draw(fl(20, 200)))}\n'
                       f"c = {_f(draw(fl(1e-12, 50e-12)))}\n")
        elif kind == "thevenin":
            out.append(f'[[termination]]\nnode = "{node}"\ntype = "thevenin"\nr_up = {_f(draw(fl(50, 300)))}\n'
                       f"r_down = {_f(draw(fl(50, 300)))}\nv_up = {_f(draw(fl(0.0, 3.3)))}\n")
    driver = draw(st.sampled_from(can_drive))
    if draw(st.booleans()):
        out.append(f'[[termination]]\ntype = "series"\ntap = "{driver}"\nr = {_f(draw(fl(5, 40)))}\n')
    return "\n".join(out), driver




@pytest.mark.slow
@settings(max_examples=25, derandomize=True, phases=[Phase.explicit, Phase.generate], database=None)
@given(bus=bus_texts(), edge=st.sampled_from(["rise", "fall"]))
def test_random_buses_match_reference(bus, edge):
    text, driver = bus
    design = _time_invariant(budget.loads(text))
    try:
        err, cross, w, ref = compare(design, driver, edge)
    except ValueError as exc:          # the reference could not settle (a very high-Q bus)
        assume("not settled" not in str(exc))
        raise
    # The random search meets buses like the known misses above (high-Q ringing, long chains of
    # loss sections): it holds them to the known-miss bound and records any past the 1 % target.
    if err.max() > MAX_ERR_OF_SWING:
        accuracy_record(f"skrf random bus past the 1 % target: {100 * err.max():.3f} % of swing "
                        f"(bound {100 * KNOWN_MISS_LIMIT:.0f} %)")
    assert err.max() <= KNOWN_MISS_LIMIT, f"error {100 * err.max():.3g} % of swing; notes {w.notes}"
    assert not np.nanmax(cross, initial=0.0) > MAX_CROSSING_OF_RISE
