"""Engine waveforms against closed-form transmission-line results (docs/references.md section A).

Every check value carries its source beside it.  Set-up common to all cases:
a fast edge (10-90 % = 10 ps, so the linear ramp lasts 12.5 ps), an explicit
1 ps time step, lines of one-way delay TD = 1 ns or so (10 ns/m, a slow cable,
so every length given in the cases as "1.0" is 1 ns: 10 cm), ideal probes ("probe" part: c_pin = 0, no r_in, no l_pkg, so the die
node is the bus node itself).  Plateau values are read over the middle half
of each plateau (away from the 12.5 ps transitions) and must lie within
0.5 % of the step of the closed form (TOL_OF_STEP); the worst error of each
test is printed in the pytest terminal summary.
"""
from __future__ import annotations

from fractions import Fraction as F

import numpy as np
import pytest

import budget

from conftest import accuracy_record

TOL_OF_STEP = 0.005   # brief: plateau error below 0.5 % of the step [-]
TD = 1e-9             # one-way delay of the unit-length lines (10 cm at 10 ns/m) [s]
RAMP = 12.5e-12       # 0-100 % ramp = 10-90 % time / 0.8 (docs/references.md D3) [s]


def header(name, *, rs, v_high=1.0, r_low=None, v_low=0.0, t_stop="13 ns", c_probe="0 pF", dt="1 ps"):
    """Design-file text shared by the cases: bus, edge, a driver part "src" and an ideal "probe".

    rs [ohm] driver resistance (both states unless r_low is given), v_high /
    v_low [V] open-circuit levels, c_probe the probe's pin capacitance, dt the time step.
    """
    r_low = rs if r_low is None else r_low
    return f"""
[bus]
name = "closed form: {name}"
dt = "{dt}"
t_stop = "{t_stop}"

[edge]
rise = "10 ps"
fall = "10 ps"

[parts.src]
role = "driver"
v_high = "{v_high!r} V"
v_low = "{v_low!r} V"
r_high = "{rs!r} ohm"
r_low = "{r_low!r} ohm"
c_pin = "0 pF"

[parts.probe]
role = "receiver"
c_pin = "{c_probe}"
vih = "0.7 V"
vil = "0.3 V"
"""


def line(name, z0):
    return f"""
[lines.{name}]
z0 = "{z0!r} ohm"
delay = "10 ns/m"
"""


def segment(a, b, ln, length_ns):
    """A segment whose one-way delay is length_ns [ns] (10 cm per ns at 10 ns/m)."""
    return f"""
[[segment]]
from = "{a}"
to = "{b}"
line = "{ln}"
length = "{length_ns / 10!r} m"
"""


def tap(name, node, part="probe", stub=None):
    s = f"""
[[tap]]
name = "{name}"
node = "{node}"
part = "{part}"
"""
    if stub is not None:
        s += f'stub = {{ line = "{stub[0]}", length = "{stub[1] / 10!r} m" }}\n'
    return s


def parallel(node, r, v=0.0):
    return f"""
[[termination]]
node = "{node}"
type = "parallel"
r = "{r!r} ohm"
v = "{v!r} V"
"""


def plateau(w, name, t0, t1):
    """Samples [V] of tap ``name`` over the middle half of the interval t0..t1 [s]."""
    a, b = t0 + 0.25 * (t1 - t0), t1 - 0.25 * (t1 - t0)
    sel = (w.t >= a) & (w.t <= b)
    assert sel.sum() >= 10
    return w[name][sel]


class Worst:
    """Keeps the worst plateau error of one test, in units of the step."""

    def __init__(self, label, step):
        self.label, self.step, self.value, self.failures = label, float(step), 0.0, []

    def check(self, samples, expected, what):
        err = float(np.max(np.abs(np.asarray(samples) - float(expected)))) / abs(self.step)
        self.value = max(self.value, err)
        if err > TOL_OF_STEP:
            self.failures.append(f"{what}: expected {float(expected):.6g}, error {100 * err:.3g} % of the step")

    def done(self):
        accuracy_record(f"closed form {self.label:38s} worst plateau error {100 * self.value:.2g} % of step")
        assert not self.failures, "\n".join(self.failures)


# ---------------------------------------------------------------------------
# lattice diagrams

# docs/references.md A4 (lattice method as in W. R. Blood Jr., MECL System Design Handbook, 4th ed.,
# Motorola HB205, 1988, ch. 7; numbers derived, exact rationals): Rs = 25, Z0 = 50, open end, 1 V.
A4_LOAD = [F(4, 3), F(8, 9), F(28, 27), F(80, 81), F(244, 243), F(728, 729)]          # t = 1,3,..,11 TD
A4_SOURCE = [F(2, 3), F(10, 9), F(26, 27), F(82, 81), F(242, 243), F(730, 729)]       # t = 0,2,..,10 TD
# docs/references.md A5 (same source; numbers derived): Rs = 10, Z0 = 50, RL = 200 ohm to 0 V, 1 V step.
A5_LOAD = [F(4, 3), F(4, 5), F(76, 75), F(116, 125), F(1804, 1875), F(2964, 3125)]
A5_SOURCE = [F(5, 6), F(1), F(14, 15), F(24, 25), F(356, 375), F(596, 625)]
A5_FINAL = F(20, 21)   # Vs RL/(Rs + RL) = 200/210


# dt = 1 ps makes TD a whole number of steps; 0.77 ps does not (the engine interpolates the delay)
@pytest.mark.parametrize("dt", ["1 ps", "0.77 ps"])
@pytest.mark.parametrize("case", ["A4", "A5"])
def test_lattice_plateaus(case, dt):
    if case == "A4":
        text = header("A4 lattice", rs=25.0, dt=dt) + line("l50", 50.0) + segment("a", "b", "l50", 1.0) \
            + tap("SRC", "a", "src") + tap("END", "b")
        load, source = A4_LOAD, A4_SOURCE
    else:
        text = header("A5 lattice", rs=10.0, dt=dt) + line("l50", 50.0) + segment("a", "b", "l50", 1.0) \
            + tap("SRC", "a", "src") + tap("END", "b") + parallel("b", 200.0)
        load, source = A5_LOAD, A5_SOURCE
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    worst = Worst(f"{case} lattice (docs/references.md {case}), dt {dt}", 1.0)
    worst.check(plateau(w, "END", 0, TD), 0.0, "load before the first arrival")
    for k, v in enumerate(load):          # load plateau from (2k+1) TD to (2k+3) TD
        worst.check(plateau(w, "END", (2 * k + 1) * TD + RAMP, (2 * k + 3) * TD), v, f"load at {2 * k + 1} TD")
    for k, v in enumerate(source):        # source-end plateau from 2k TD to (2k+2) TD
        worst.check(plateau(w, "SRC", 2 * k * TD + RAMP, (2 * k + 2) * TD), v, f"source end at {2 * k} TD")
    if case == "A5":
        assert abs(w.v_end[w.index("END")] - float(A5_FINAL)) < 1e-9
    worst.done()


# docs/references.md A6: W. D. Stevenson Jr., Elements of Power System Analysis, 4th ed., McGraw-Hill 1982,
# ch. 5, Example 5.6 (p. 119), seen secondhand in the FOSSEE Scilab textbook companion:
# 120 V DC step, Zc = 30 ohm, zero source impedance, receiving end ZR = 90 or 10 ohm.
# Receiving-end voltage at t = 1, 3, 5, 7, 9 T.  The companion *assumes* Zs = 0; an ideal
# source is modelled here as r_high = r_low = 1 micro-ohm (Gamma_S = -1 + 7e-8).
A6 = {90.0: [180.0, 90.0, 135.0, 112.5, 123.75], 10.0: [60.0, 90.0, 105.0, 112.5, 116.25]}


@pytest.mark.parametrize("zr", sorted(A6))
def test_stevenson_example_5_6(zr):
    text = header(f"A6 ZR={zr:g}", rs=1e-6, v_high=120.0) + line("l30", 30.0) + segment("a", "b", "l30", 1.0) \
        + tap("SRC", "a", "src") + tap("RCV", "b") + parallel("b", zr)
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    worst = Worst(f"A6 Stevenson Ex. 5.6, ZR = {zr:g} ohm", 120.0)
    for k, v in enumerate(A6[zr]):
        worst.check(plateau(w, "RCV", (2 * k + 1) * TD + RAMP, (2 * k + 3) * TD), v, f"receiving end at {2 * k + 1} T")
    # the source end is pinned at 120 V by the ideal source after its ramp
    worst.check(plateau(w, "SRC", RAMP, 10 * TD), 120.0, "sending end")
    worst.done()


# ---------------------------------------------------------------------------
# reflection coefficients: matched, open, short (docs/references.md A1: Gamma = (ZL - Z0)/(ZL + Z0);
# open -> +1, short -> -1, matched -> 0; Blood 1988 ch. 7 seen secondhand, Pozar 2012 section 2.3
# from memory).  A matched 50 ohm source launches 1/2 V (docs/references.md A3, TI SCBA015A Eq. 3), so
# the source end reads 1/2 (1 + Gamma) after one round trip and the far end (1 + Gamma)/2.

@pytest.mark.parametrize("end, gamma", [("matched", 0.0), ("open", 1.0), ("short", -1.0)])
def test_end_reflection(end, gamma):
    text = header(f"A1 {end} end", rs=50.0) + line("l50", 50.0) + segment("a", "b", "l50", 1.0) \
        + tap("SRC", "a", "src") + tap("END", "b")
    if end == "matched":
        text += parallel("b", 50.0)
    elif end == "short":
        text += parallel("b", 1e-3)   # 1 milliohm to 0 V: Gamma = -0.99996
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    worst = Worst(f"A1 {end} end, Gamma = {gamma:+g}", 1.0)
    worst.check(plateau(w, "SRC", RAMP, 2 * TD), 0.5, "launched wave (A3)")
    worst.check(plateau(w, "SRC", 2 * TD + RAMP, 6 * TD), 0.5 * (1 + gamma), "source end after one round trip")
    worst.check(plateau(w, "END", TD + RAMP, 6 * TD), 0.5 * (1 + gamma), "far end")
    worst.done()


# docs/references.md A2: voltage transmission coefficient T = 1 + Gamma = 2 ZL/(ZL + Z0) (Pozar 2012
# section 2.3, from memory; numbers derived).  A 30 ohm line into a 120 ohm line: T = 240/150 = 1.6;
# the open end of the 120 ohm line doubles it: 3.2 x the launched wave.  With a 1 ohm source the
# launched wave is 30/31 V (A3), so the open end reaches 3.2 x 30/31 = 3.0968 V from a 1 V source:
# a box like [-V, 2V] is not a law of line networks (see tests/test_properties.py).

def test_impedance_step_up_transmission():
    text = header("A2 step-up", rs=1.0, t_stop="4 ns") + line("low", 30.0) + line("high", 120.0) \
        + segment("a", "m", "low", 1.0) + segment("m", "b", "high", 1.0) \
        + tap("SRC", "a", "src") + tap("JOIN", "m") + tap("OPEN", "b")
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    v_launch = 30.0 / 31.0
    worst = Worst("A2 step-up 30 -> 120 ohm, T = 1.6", 1.0)
    worst.check(plateau(w, "JOIN", TD + RAMP, 3 * TD), 1.6 * v_launch, "junction (T = 1.6)")
    worst.check(plateau(w, "OPEN", 2 * TD + RAMP, 4 * TD), 3.2 * v_launch, "open end (2 T)")
    worst.done()


# ---------------------------------------------------------------------------
# docs/references.md A8: one line feeding N identical lines: Gamma = (Z2/N - Z1)/(Z2/N + Z1), T = 1 + Gamma
# (Pozar 2012 section 2.3, from memory; 50 into 2 x 50 -> T = 2/3 derived there, N = 3 derived
# here from the same formula: Gamma = -1/2, T = 1/2).  Branch ends matched, matched source.

@pytest.mark.parametrize("n_branches, t_expected", [(2, F(2, 3)), (3, F(1, 2))])
def test_star_split_transmission(n_branches, t_expected):
    text = header(f"A8 star N={n_branches}", rs=50.0, t_stop="6 ns") + line("l50", 50.0) \
        + segment("a", "hub", "l50", 1.0) + tap("SRC", "a", "src") + tap("HUB", "hub")
    for i in range(n_branches):
        text += segment("hub", f"e{i}", "l50", 1.0) + tap(f"E{i}", f"e{i}") + parallel(f"e{i}", 50.0)
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    worst = Worst(f"A8 star split N = {n_branches}", 1.0)
    v_inc = 0.5
    worst.check(plateau(w, "HUB", TD + RAMP, 5 * TD), float(t_expected) * v_inc, "hub (T x incident)")
    for i in range(n_branches):
        worst.check(plateau(w, f"E{i}", 2 * TD + RAMP, 5 * TD), float(t_expected) * v_inc, f"branch end {i}")
    worst.check(plateau(w, "SRC", 2 * TD + RAMP, 5 * TD), float(t_expected) * v_inc, "source end (1 + Gamma)")
    worst.done()


# docs/references.md A9 (derived from A1 at a T junction): wave on trunk Z0 meets stub Zs in parallel with
# the continuing trunk: T = 2 Zs/(Z0 + 2 Zs); the wave returning from the stub sees Z0/2:
# Gamma_stub = (Z0/2 - Zs)/(Z0/2 + Zs).  Examples printed in A9: Zs = 50 -> T 2/3, Gamma_stub -1/3;
# Zs = 75 -> T 0.75; Zs = 100 -> T 0.8 (Gamma_stub -0.5 and -0.6 derived from the same formula).
# Here the stub is a tap's open stub of 0.4 ns, the trunk is matched at both ends.

@pytest.mark.parametrize("zs, t_exp, g_stub", [(50.0, F(2, 3), F(-1, 3)), (75.0, F(3, 4), F(-1, 2)),
                                               (100.0, F(4, 5), F(-3, 5))])
def test_mid_trunk_tap(zs, t_exp, g_stub):
    text = header(f"A9 tap Zs={zs:g}", rs=50.0, t_stop="5 ns") + line("trunk", 50.0) + line("stub", zs) \
        + segment("a", "m", "trunk", 1.0) + segment("m", "b", "trunk", 1.0) + parallel("b", 50.0) \
        + tap("SRC", "a", "src") + tap("JUNCTION", "m") + tap("STUBEND", "m", stub=("stub", 0.4))
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    worst = Worst(f"A9 mid-trunk tap Zs = {zs:g} ohm", 1.0)
    v_t = float(t_exp) * 0.5
    worst.check(plateau(w, "JUNCTION", TD + RAMP, 1.8 * TD), v_t, "junction before the stub echo")
    # the open stub end doubles the transmitted wave (Gamma = +1, A1)
    worst.check(plateau(w, "STUBEND", 1.4 * TD + RAMP, 2.2 * TD), 2 * v_t, "open stub end")
    # the stub echo (v_t) enters the junction with 1 + Gamma_stub
    worst.check(plateau(w, "JUNCTION", 1.8 * TD + RAMP, 2.6 * TD), v_t * (2 + float(g_stub)),
                "junction after the stub echo")
    # the reflection -Z0/(Z0 + 2 Zs) x 1/2 reaches the matched source end after 2 TD
    gamma = -50.0 / (50.0 + 2 * zs)
    worst.check(plateau(w, "SRC", 2 * TD + RAMP, 2.8 * TD), 0.5 * (1 + gamma), "source end")
    worst.done()


# ---------------------------------------------------------------------------
# docs/references.md A10 (closed form derived there; tau = Z0 C/2 rule in E. Bogatin, Signal and Power
# Integrity - Simplified, 2nd ed., 2009, from memory): a shunt C on a matched through-line sees a
# Thevenin source (V_inc, Z0/2), tau = Z0 C/2; Z0 = 50, C = 2 pF -> tau = 50 ps.
# For a linear ramp of duration Tr the node follows the RC low-pass response, after the ramp
# v = V_inc [1 - (tau/Tr)(exp(Tr/tau) - 1) exp(-t/tau)] (t from the wave's arrival; derived here by
# convolving the step response 1 - exp(-t/tau) with the ramp).
#
# RC termination at an open end (derived the same way from the line's Thevenin source 2 V_inc
# behind Z0, docs/references.md A3): the step response is V_inc (2 - exp(-t/tau)) with tau = (Z0 + R) C.

def _after_ramp(t, tau, tr, final, jump):
    """final - jump (tau/tr)(exp(tr/tau) - 1) exp(-t/tau): ramp response of final - jump exp(-t/tau)."""
    return final - jump * (tau / tr) * np.expm1(tr / tau) * np.exp(-t / tau)


def test_shunt_capacitor_time_constant():
    text = header("A10 shunt C", rs=50.0, t_stop="3 ns") + line("l50", 50.0) \
        + segment("a", "m", "l50", 1.0) + segment("m", "b", "l50", 1.0) + parallel("b", 50.0) \
        + tap("SRC", "a", "src") + tap("C2P", "m", "cap") + tap("END", "b")
    text = text.replace('[parts.probe]', '[parts.cap]\nrole = "receiver"\nc_pin = "2 pF"\nvih = "0.7 V"\n'
                        'vil = "0.3 V"\n\n[parts.probe]')
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    tau = 50.0 * 2e-12 / 2          # A10: 50 ps
    worst = Worst("A10 2 pF shunt, tau = Z0 C/2 = 50 ps", 0.5)
    sel = (w.t >= TD + RAMP) & (w.t <= TD + 12 * tau)
    expected = _after_ramp(w.t[sel] - TD, tau, RAMP, 0.5, 0.5)
    assert expected.size > 100
    worst.check(w["C2P"][sel] - expected, 0.0, "node voltage after the ramp")
    # the far end sees the same low-passed wave one TD later (matched line)
    sel2 = (w.t >= 2 * TD + RAMP) & (w.t <= 2 * TD + 12 * tau)
    worst.check(w["END"][sel2] - _after_ramp(w.t[sel2] - 2 * TD, tau, RAMP, 0.5, 0.5), 0.0, "far end")
    worst.done()


def test_rc_termination_time_constant():
    text = header("RC termination", rs=50.0, t_stop="8 ns") + line("l50", 50.0) \
        + segment("a", "b", "l50", 1.0) + tap("SRC", "a", "src") + tap("END", "b") + """
[[termination]]
node = "b"
type = "rc"
r = "50 ohm"
c = "10 pF"
"""
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    tau = (50.0 + 50.0) * 10e-12     # (Z0 + R) C = 1 ns
    worst = Worst("RC termination, tau = (Z0 + R) C = 1 ns", 1.0)
    sel = (w.t >= TD + RAMP) & (w.t <= TD + 6 * tau)
    worst.check(w["END"][sel] - _after_ramp(w.t[sel] - TD, tau, RAMP, 1.0, 0.5), 0.0, "far end")
    worst.done()


# ---------------------------------------------------------------------------
# docs/references.md A7: W. R. Blood Jr., MECL System Design Handbook, 4th ed., 1988, ch. 7, "Example 2"
# (seen secondhand): V'OH = 1.22 V behind Ro = 5 ohm, Z0 = 50, RL = 100 ohm to 0 V; on the falling
# edge the output cuts off (modelled as r_low = 1 Gohm), launching -Idc Z0.
# Printed: Idc 11.6 mA, V1 0.58 V, V_B(TD) 0.387 V; exact: 0.58095 V and 0.38730 V.

def test_ecl_cutoff_falling_edge():
    text = header("A7 ECL cut-off", rs=5.0, v_high=1.22, r_low=1e9, t_stop="2.9 ns") + line("l50", 50.0) \
        + segment("a", "b", "l50", 1.0) + tap("SRC", "a", "src") + tap("B", "b") + parallel("b", 100.0)
    w = budget.simulate(budget.loads(text), driver="SRC", edge="fall")
    i_dc = 1.22 / (5 + 100)
    v_high_b = 1.22 * 100 / 105
    worst = Worst("A7 ECL cut-off (Blood 1988 ex. 2)", v_high_b)
    # near end after the cut-off: V_dc - Idc Z0 = Idc (RL - Z0) ... = 1.16190 - 0.58095
    worst.check(plateau(w, "SRC", RAMP, 2 * TD), v_high_b - i_dc * 50, "near end after cut-off")
    vb = plateau(w, "B", TD + RAMP, 2.9 * TD)
    worst.check(vb, 0.38730, "far end at TD (exact)")
    assert np.all(np.abs(vb - 0.387) <= 0.0005 + 1e-4), "printed 0.387 V"   # printed to 3 digits
    assert abs(i_dc * 1e3 - 11.6) <= 0.05 and abs(i_dc * 50 - 0.58) <= 0.005   # printed values
    worst.done()


# ---------------------------------------------------------------------------
# docs/references.md F3 (arithmetic, common practice): Thevenin termination R1 (to Vcc) || R2 (to 0 V) = Z0,
# Vtt = Vcc R2/(R1 + R2).  Z0 = 50, Vcc = 3.3, Vtt = 1.5 -> R1 = 110.000, R2 = 91.667;
# E24 110/91 -> 49.8010 ohm, 1.49403 V (printed).  The engine's DC levels in the two driver
# states give back the termination's Thevenin equivalent: V = (Vs/Rs + Vtt/Rth)/(1/Rs + 1/Rth).

@pytest.mark.parametrize("r_down, r_th, v_tt, tol_r, tol_v", [
    (91.667, 50.000, 1.5000, 5e-4, 5e-5),    # ideal values, printed to 3 decimals
    (91.0, 49.8010, 1.49403, 5e-5, 5e-6),    # E24 pick, printed 49.8010 ohm, 1.49403 V
])
def test_thevenin_termination_dc_levels(r_down, r_th, v_tt, tol_r, tol_v):
    rs = 25.0
    text = header("F3 thevenin", rs=rs, v_high=3.3, t_stop="4 ns") + line("l50", 50.0) \
        + segment("a", "b", "l50", 1.0) + tap("SRC", "a", "src") + tap("END", "b") + f"""
[[termination]]
node = "b"
type = "thevenin"
r_up = "110 ohm"
r_down = "{r_down!r} ohm"
v_up = "3.3 V"
"""
    w = budget.simulate(budget.loads(text), driver="SRC", edge="rise")
    v_lo, v_hi = w.v_low[w.index("END")], w.v_high[w.index("END")]
    # two states: Vs = 0 and 3.3 V behind Rs.  The difference gives Rs/(Rs + Rth), then Vtt.
    a = (v_hi - v_lo) / 3.3                 # = Rth/(Rs + Rth)
    rth = a * rs / (1 - a)
    vtt = v_lo * (rs + rth) / rs
    assert abs(rth - r_th) <= tol_r
    assert abs(vtt - v_tt) <= tol_v
    # and the waveform settles onto those DC levels (lossless line, no reactances)
    worst = Worst(f"F3 thevenin {r_down:g} ohm: settled level", 3.3)
    worst.check(plateau(w, "END", 3 * TD, 4 * TD), v_hi, "far end after the bounces")
    accuracy_record(f"closed form F3 thevenin r_down {r_down:g}: Rth {rth:.5f} ohm (ref {r_th}), "
                    f"Vtt {vtt:.6f} V (ref {v_tt})")
    worst.done()
