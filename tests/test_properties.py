"""Physics the engine must obey on any bus: property-based tests (hypothesis).

The strategy ``bus_texts`` writes random, valid design files: a trunk of 2-5
taps (Z0 30-120 ohm, 5-8 ns/m, 1-30 cm segments, optionally lossy), optional
stubs (1 mm - 5 cm, so some are shorter than the time step and get lumped),
random pin capacitance, package inductance and input resistance, random end
terminations (none, parallel, Thevenin, RC) and an optional series
termination at the driver.  The properties:

- linearity in the source levels (scaling every source voltage by k scales
  every waveform by k; adding c to every source adds c where no resistor
  returns to ground);
- convergence of the late waveform to the DC operating point, computed by an
  independent resistive solve (tests/skrf_reference.py, not the engine);
- causality: a pin does not move before the wave can have reached it;
- passivity / energy: the bus never returns more energy to the driver than
  it received, and no pin capacitor holds more energy than the driver has
  delivered; DC levels obey the maximum principle of resistive networks.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

import budget
from skrf_reference import build_circuit, dc_levels

T_WINDOW = 8e-9   # fixed simulation window of the linearity and energy properties [s]


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
    can_drive, levels = [], {}
    for i in range(n):
        role = "transceiver" if i == 0 or draw(st.booleans()) else "receiver"
        # c_pin 0 (an ideal probe) or 0.5-5 pF: a tiny c_pin behind l_pkg would force a tiny step
        c_pin = draw(st.one_of(st.just(0.0), fl(0.5e-12, 5e-12)))
        p = [f'[parts.p{i}]\nrole = "{role}"\nc_pin = {_f(c_pin)}\n']
        if role == "transceiver":
            v_low = draw(fl(-1.0, 1.0))
            levels[i] = (v_low, v_low + draw(fl(0.5, 3.5)))
            p.append(f"v_low = {_f(v_low)}\nv_high = {_f(levels[i][1])}\n"
                     f"r_high = {_f(draw(fl(5, 60)))}\nr_low = {_f(draw(fl(5, 60)))}\n")
            can_drive.append(f"T{i}")
        # thresholds 2.0 V / 0.8 V where the first transceiver's levels (and a transceiver's own) straddle
        # them, else at 70 % / 30 % of that swing: every receiver can see both levels (thresholds the
        # bus cannot reach are refused at load)
        lo, hi = levels.get(i, levels[0])
        if lo < 0.8 and hi > 2.0:
            p.append('vih = "2.0 V"\nvil = "0.8 V"\n')
        else:
            p.append(f"vih = {_f(lo + 0.7 * (hi - lo))}\nvil = {_f(lo + 0.3 * (hi - lo))}\n")
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


def _level_paths(design):
    """Source voltages and receiver thresholds: moved together, every level stays reachable.

    Thresholds do not enter the waveforms; they move along only so that the
    changed design stays valid (a threshold the bus cannot reach is refused).
    """
    return _source_paths(design) + [f"parts.{n}.{k}" for n, p in design.parts.items() if p.can_receive
                                    for k in ("vih", "vil")]


def _source_paths(design):
    """Dotted paths of every source voltage in ``design`` (driver levels, termination voltages)."""
    paths = []
    for name, part in design.parts.items():
        if part.can_drive:
            paths += [f"parts.{name}.v_high", f"parts.{name}.v_low"]
    for tm in design.terminations:
        if tm.type == "parallel":
            paths.append(f"termination.{tm.index}.v")
        elif tm.type == "thevenin":
            paths.append(f"termination.{tm.index}.v_up")
    return paths


edges = st.sampled_from(["rise", "fall"])


# ---------------------------------------------------------------------------
# linearity

@given(bus=bus_texts(), edge=edges, k=st.floats(0.1, 5.0))
def test_scaling_every_source_scales_every_waveform(bus, edge, k):
    text, driver = bus
    d = budget.loads(text)
    dk = d.with_values({p: k * d.params[p] for p in _level_paths(d)})
    w = budget.simulate(d, driver=driver, edge=edge, t_stop=T_WINDOW)
    wk = budget.simulate(dk, driver=driver, edge=edge, t_stop=T_WINDOW)
    scale = max(np.max(np.abs(w.v)), 1e-3)
    np.testing.assert_allclose(wk.v, k * w.v, rtol=0, atol=1e-9 * k * scale)
    np.testing.assert_allclose(wk.v_end, k * w.v_end, rtol=0, atol=1e-9 * k * scale)


@given(bus=bus_texts(grounded=False), edge=edges, c=st.floats(-2.0, 2.0))
def test_shifting_every_source_shifts_every_waveform(bus, edge, c):
    # With no resistor returned to ground, the node voltages + c solve the shifted
    # network: resistors, lines and inductors see the same differences, capacitors
    # to ground (c_pin, RC terminations) the same dv/dt.
    text, driver = bus
    d = budget.loads(text)
    dc_ = d.with_values({p: d.params[p] + c for p in _level_paths(d)})
    w = budget.simulate(d, driver=driver, edge=edge, t_stop=T_WINDOW)
    wc = budget.simulate(dc_, driver=driver, edge=edge, t_stop=T_WINDOW)
    scale = max(np.max(np.abs(w.v)), abs(c), 1.0)
    np.testing.assert_allclose(wc.v, w.v + c, rtol=0, atol=1e-9 * scale)


# ---------------------------------------------------------------------------
# convergence to the DC operating point

def _independent_dc(design, driver, edge):
    """DC die-node levels [V] (start, end) from the resistive solve in tests/skrf_reference.py."""
    c = build_circuit(design, driver, edge)
    return dc_levels(c, c.v0, c.r0)[c.die], dc_levels(c, c.v1, c.r1)[c.die]


def _slowest_time(design):
    """A generous settling window [s]: 60 x all line delays + 30 RC-termination time constants + 10 ns."""
    td = sum(design.lines[s.line].delay * s.length for s in design.segments)
    td += sum(design.lines[t.stub.line].delay * t.stub.length for t in design.taps if t.stub)
    tau = max([tm.r * tm.c for tm in design.terminations if tm.type == "rc"], default=0.0)
    return 60 * td + 30 * tau + 10e-9


@given(bus=bus_texts(), edge=edges)
def test_late_waveform_converges_to_the_dc_operating_point(bus, edge):
    # A lightly damped bus (a 5 ohm driver on an open 120 ohm line loses 8 % a round
    # trip) may need many round trips: the window is doubled, up to 8 x, until the
    # pins are within 1 % of the swing of the DC levels.  Not converging by then, or
    # converging to another level, fails.
    text, driver = bus
    d = budget.loads(text)
    v_start, v_end = _independent_dc(d, driver, edge)
    swing = max(float(np.max(np.abs(v_end - v_start))), 1e-6)
    t_stop = _slowest_time(d)
    for _ in range(4):
        w = budget.simulate(d, driver=driver, edge=edge, t_stop=t_stop)
        late = np.max(np.abs(w.v[-1] - v_end)) / swing
        if late < 0.01:
            break
        t_stop *= 2
    # the engine's own DC levels agree with the independent solve
    np.testing.assert_allclose(w.v_start, v_start, rtol=0, atol=1e-9 * swing + 1e-12)
    np.testing.assert_allclose(w.v_end, v_end, rtol=0, atol=1e-9 * swing + 1e-12)
    # the first sample is the start state, the last has settled onto the end state
    np.testing.assert_allclose(w.v[0], v_start, rtol=0, atol=1e-9 * swing + 1e-12)
    assert late < 0.01, f"{100 * late:.3g} % of the swing from the DC level after {w.t[-1]:.3g} s"


# ---------------------------------------------------------------------------
# causality

def _path_delays(design, driver):
    """Per tap: (sum of line delays [s], list of line delays [s]) on the path from the driver's die.

    The generated buses are trunks n0 - n1 - ... (a chain), so the path is unique.
    """
    order = {}
    for s in design.segments:
        order.setdefault(s.a, len(order))
        order.setdefault(s.b, len(order))
    seg = {(s.a, s.b): design.lines[s.line].delay * s.length for s in design.segments}
    chain = sorted(order, key=order.get)
    dtap = design.tap(driver)

    def stub(t):
        return [design.lines[t.stub.line].delay * t.stub.length] if t.stub else []

    out = []
    for t in design.taps:
        i, j = sorted((chain.index(dtap.node), chain.index(t.node)))
        lines = [seg[(chain[m], chain[m + 1])] for m in range(i, j)]
        if t.name != driver:
            lines += stub(dtap) + stub(t)
        out.append(lines)
    return out


@given(bus=bus_texts(lossy=False), edge=edges)
def test_no_pin_moves_before_the_wave_can_arrive(bus, edge):
    # Physics: nothing reaches a pin before the shortest sum of line delays from the
    # driver (lumped parts add no delay).  Discretisation allowance: the engine delays
    # a line by whole steps and interpolates the fraction with a 4-point stencil that
    # reaches one sample newer than the delay, so a line may deliver its first (tiny)
    # precursor up to two steps early, and a line shorter than a step is lumped (no
    # delay).  Hence the bound: sum over the path of max(TD - 2 dt, 0).
    # Lossless lines only: a lossy line is split into sections, each with that allowance.
    text, driver = bus
    d = budget.loads(text)
    w = budget.simulate(d, driver=driver, edge=edge, t_stop=T_WINDOW)
    swing = max(float(np.max(np.abs(w.v_end - w.v_start))), 1e-6)
    checked = 0
    for k, lines in enumerate(_path_delays(d, driver)):
        if w.taps[k] == driver:
            continue
        t_min = sum(max(td - 2 * w.dt, 0.0) for td in lines)
        quiet = w.t < t_min
        moved = np.max(np.abs(w.v[quiet, k] - w.v[0, k]), initial=0.0)
        assert moved <= 1e-9 * swing, (f"tap {w.taps[k]} moved {moved:.3g} V before {t_min * 1e12:.4g} ps "
                                       f"(path delays {[round(x * 1e12, 3) for x in lines]} ps)")
        checked += int(quiet.sum() > 1)
    # and the bound is not empty: the far end of the trunk has a path of at least 1 cm
    assume(checked > 0)


def test_causality_bound_is_tight_enough_to_fail():
    """The waves do arrive: on a 30 cm line the far pin moves within 4 steps after the bound."""
    text = """
[bus]
name = "causality check"
[edge]
rise = "0.5 ns"
fall = "0.5 ns"
[parts.p]
role = "transceiver"
v_high = "1 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "0 pF"
vih = "0.7 V"
vil = "0.3 V"
[lines.l]
z0 = "50 ohm"
delay = "6.3 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l"
length = "0.3 m"
[[tap]]
name = "A"
node = "a"
part = "p"
[[tap]]
name = "B"
node = "b"
part = "p"
"""
    d = budget.loads(text)
    w = budget.simulate(d, driver="A", edge="rise", t_stop=3e-9)
    (lines_b,) = [ln for k, ln in enumerate(_path_delays(d, "A")) if w.taps[k] == "B"]
    t_min = sum(max(td - 2 * w.dt, 0.0) for td in lines_b)
    first = w.t[np.flatnonzero(np.abs(w["B"] - w["B"][0]) > 1e-9)[0]]
    assert t_min <= first <= t_min + 4 * w.dt


# ---------------------------------------------------------------------------
# passivity and energy

def driver_energy(design, w):
    """Energy [J] delivered since t = 0 into the bus at the driver's die node, per sample.

    The driver is the Norton blend of docs/design-file.md (parts): with s(t) = min(t/t_ramp, 1),
    G(t) = (1-s)/r0 + s/r1 and I(t) = (1-s) v0/r0 + s v1/r1; it injects
    i(t) = I(t) - G(t) v(t) into the die node.  Everything else (lines, R, L, C,
    terminations) is a linear time-invariant passive network with constant sources,
    in its DC state at t = 0, so its increments (dv, di) from that state obey
    W(t) = int_0^t dv di dt >= 0 (passivity) and W(t) >= stored energy of the
    increments >= C dv_k(t)^2 / 2 for every capacitor C (energy balance).
    The integral uses interval means of v and i, which is exact for the
    trapezoidal capacitor (C/2 (v_n^2 - v_{n-1}^2) per step).
    """
    part = design.parts[design.tap(w.driver).part]
    lo, hi = (part.v_low, part.r_low), (part.v_high, part.r_high)
    (v0, r0), (v1, r1) = (lo, hi) if w.edge == "rise" else (hi, lo)
    t_ramp = (design.edge.rise if w.edge == "rise" else design.edge.fall) / 0.8
    s = np.minimum(w.t / t_ramp, 1.0)
    v = w[w.driver]
    i = (1 - s) * v0 / r0 + s * v1 / r1 - ((1 - s) / r0 + s / r1) * v
    dv, di = v - v[0], i - i[0]
    p_mid = 0.25 * (dv[1:] + dv[:-1]) * (di[1:] + di[:-1])
    return np.concatenate([[0.0], np.cumsum(p_mid) * w.dt])


def energy_violations(design, w, *, rel_tol=1e-6):
    """Messages for every breach of W(t) >= 0 and C dv^2/2 <= W(t) (see :func:`driver_energy`)."""
    W = driver_energy(design, w)
    swing = float(np.max(np.abs(w.v_end - w.v_start))) or 1.0
    part = design.parts[design.tap(w.driver).part]
    # tolerance: rel_tol of the energy scale swing^2 / r x window (rounding, not physics)
    scale = swing ** 2 / min(part.r_high, part.r_low) * w.t[-1]
    msgs = []
    if W.min() < -rel_tol * scale:
        msgs.append(f"the bus returned {-W.min():.3g} J more than it received (t = {w.t[W.argmin()]:.3g} s)")
    for k, tp in enumerate(design.taps):
        c = design.parts[tp.part].c_pin
        if c > 0:
            stored = 0.5 * c * (w.v[:, k] - w.v[0, k]) ** 2
            excess = stored - W
            if excess.max() > rel_tol * scale:
                msgs.append(f"pin {tp.name} stores {stored[excess.argmax()]:.3g} J while only "
                            f"{W[excess.argmax()]:.3g} J were delivered (t = {w.t[excess.argmax()]:.3g} s)")
    return msgs


@given(bus=bus_texts(), edge=edges)
def test_bus_is_passive_and_pin_energy_is_bounded(bus, edge):
    text, driver = bus
    d = budget.loads(text)
    w = budget.simulate(d, driver=driver, edge=edge, t_stop=T_WINDOW)
    assert not energy_violations(d, w)


@given(bus=bus_texts(), edge=edges)
def test_dc_levels_obey_the_maximum_principle(bus, edge):
    # A resistive network's node voltages are weighted means of its source voltages
    # (ground counts as a 0 V source when a resistor returns to it): no DC level lies
    # outside [min, max] of the sources (discrete maximum principle).
    text, driver = bus
    d = budget.loads(text)
    w = budget.simulate(d, driver=driver, edge=edge, t_stop=2e-9)
    sources = [d.params[p] for p in _source_paths(d) if p.startswith("termination")]
    part = d.parts[d.tap(driver).part]
    sources += [part.v_high, part.v_low]
    if any(math.isfinite(d.parts[t.part].r_in) for t in d.taps) or \
            any(tm.type == "thevenin" for tm in d.terminations):
        sources.append(0.0)
    lo, hi = min(sources), max(sources)
    eps = 1e-9 * (hi - lo)
    for levels in (w.v_start, w.v_end):
        assert np.all(levels >= lo - eps) and np.all(levels <= hi + eps)


ENERGY_CHECK_BUS = """
[bus]
name = "energy check"
[edge]
rise = "0.5 ns"
fall = "0.5 ns"
[parts.p]
role = "transceiver"
v_high = "1 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "20 ohm"
c_pin = "3 pF"
vih = "0.7 V"
vil = "0.3 V"
[lines.l]
z0 = "50 ohm"
delay = "6.3 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l"
length = "0.1 m"
[[tap]]
name = "A"
node = "a"
part = "p"
[[tap]]
name = "B"
node = "b"
part = "p"
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "0 V"
"""


def test_energy_check_can_fail():
    """The energy bounds catch what an unstable or active model would produce.

    The capacitor bound is loose for ordinary overshoot (the driver keeps
    delivering energy into the terminations), but an oscillation that grows,
    a pin swinging ten times too far, or a driver pin pushed above its own
    source all break it.
    """
    d = budget.loads(ENERGY_CHECK_BUS)
    w = budget.simulate(d, driver="A", edge="rise", t_stop=4e-9)
    assert not energy_violations(d, w)

    def with_pin(k, v_k):
        v = w.v.copy()
        v[:, k] = v_k
        return type(w)(t=w.t, v=v, taps=w.taps, driver=w.driver, edge=w.edge, v_start=w.v_start,
                       v_end=w.v_end, dt=w.dt, notes=w.notes)

    b = w["B"]
    growing = b + 0.02 * np.exp(w.t / 0.4e-9) * np.sin(2 * np.pi * 2e9 * w.t)
    assert any("pin B" in m for m in energy_violations(d, with_pin(1, growing)))
    assert any("pin B" in m for m in energy_violations(d, with_pin(1, b[0] + 10 * (b - b[0]))))
    a = w["A"]
    assert any("returned" in m for m in energy_violations(d, with_pin(0, a[0] + 1.6 * (a - a[0]))))


@pytest.mark.parametrize("bad", ["v_high", "termination"])
def test_linearity_check_can_fail(bad):
    """Changing one source level alone (not all of them) breaks the scaling: the check is not blind."""
    text = budget.example_path("backplane").read_text()
    d = budget.loads(text)
    path = "parts.card_xcvr.v_high" if bad == "v_high" else "termination.0.v"
    d2 = d.with_values({path: 2 * d.params[path]})
    w = budget.simulate(d, driver="SLOT1", edge="rise", t_stop=4e-9)
    w2 = budget.simulate(d2, driver="SLOT1", edge="rise", t_stop=4e-9)
    assert np.max(np.abs(w2.v - 2 * w.v)) > 1e-3
