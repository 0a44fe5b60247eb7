"""IBIS buses against an independent numerical reference: a stiff ODE solver on fine LC ladders.

The reference shares nothing with the engine but the device equations (budget/ibis_devices.py,
numpy; the engine uses its own numba copy in budget/kernels/nonlinear.py): every line is a
ladder of lumped L-C sections (section delay under 3 ps), the packages are inductors, the
node equations C dv/dt = -sum(i) and L di/dt = v_a - v_b are integrated by scipy's Radau
(implicit Runge-Kutta, order 5) with a sparse Jacobian pattern.  The engine uses the method of
characteristics and the trapezoidal rule.  Issue 11 asks for agreement within 1 % of the
swing on at least two multi-drop designs; measured errors are printed.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq
from scipy.sparse import lil_matrix

import budget
from budget.ibis_devices import device_current, switching
from budget.simulate import simulate

from ibis_fixtures import design_text, shipped_variant

SECTION_DELAY = 3e-12   # [s] largest delay of one ladder section


class Ladder:
    """Nodes with capacitance, inductors between nodes, shunt elements (devices, Norton sources)."""

    def __init__(self):
        self.cap = []          # [F] per node
        self.ind = []          # (a, b, L [H])
        self.shunt = {}        # node -> list of functions f(v, t) = current leaving the node [A]
        self.names = {}

    def node(self, name=None):
        self.cap.append(0.0)
        k = len(self.cap) - 1
        if name is not None:
            self.names[name] = k
        return k

    def named(self, name):
        return self.names[name] if name in self.names else self.node(name)

    def line(self, a, b, z0, td):
        n = max(8, math.ceil(td / SECTION_DELAY))
        l_sec, c_sec = z0 * td / n, td / (z0 * n)
        prev = a
        for k in range(n):
            nxt = b if k == n - 1 else self.node()
            self.ind.append((prev, nxt, l_sec))
            self.cap[prev] += c_sec / 2
            self.cap[nxt] += c_sec / 2
            prev = nxt

    def rhs(self, t, y):
        nv = len(self.cap)
        v = y[:nv]
        i = y[nv:]
        dv = np.zeros(nv)
        a = self._a
        b = self._b
        np.subtract.at(dv, a, i)
        np.add.at(dv, b, i)
        for n, fs in self.shunt.items():
            for f in fs:
                dv[n] -= f(v[n], t)
        dv /= self._c
        di = (v[a] - v[b]) / self._l
        return np.concatenate([dv, di])

    def prepare(self):
        self._a = np.array([x[0] for x in self.ind])
        self._b = np.array([x[1] for x in self.ind])
        self._l = np.array([x[2] for x in self.ind])
        self._c = np.array(self.cap)
        assert np.all(self._c > 0), "every node needs a capacitance"
        nv, ni = len(self.cap), len(self.ind)
        pat = lil_matrix((nv + ni, nv + ni))
        for k, (a, b, _) in enumerate(self.ind):
            pat[a, nv + k] = pat[b, nv + k] = 1
            pat[nv + k, a] = pat[nv + k, b] = 1
        for n in range(nv):
            pat[n, n] = 1
        return pat.tocsr()

    def dc(self, t0):
        """DC start: every node at one voltage V (lines and inductors short), inductor currents along the tree."""
        nv = len(self.cap)

        def total(v):
            return sum(f(v, t0) for fs in self.shunt.values() for f in fs)
        v_dc = brentq(total, -3.0, 7.0, xtol=1e-14)
        leave = np.zeros(nv)
        for n, fs in self.shunt.items():
            leave[n] = sum(f(v_dc, t0) for f in fs)
        # the inductors form a tree (a bus without loops): currents from the leaves inwards
        adj = [[] for _ in range(nv)]
        for k, (a, b, _) in enumerate(self.ind):
            adj[a].append((k, b, +1))
            adj[b].append((k, a, -1))
        root = 0
        order, parent = [root], {root: None}
        for u in order:
            for k, w, s in adj[u]:
                if w not in parent:
                    parent[w] = (u, k, s)
                    order.append(w)
        sub = leave.copy()
        cur = np.zeros(len(self.ind))
        for u in reversed(order[1:]):
            p, k, s = parent[u]
            cur[k] = s * sub[u]       # flows p -> u: along the inductor's a -> b when s = +1
            sub[p] += sub[u]
        return np.concatenate([np.full(nv, v_dc), cur])


def build(design, driver, edge):
    """The ladder of ``design`` with tap ``driver`` driving ``edge``; returns (ladder, die node per tap)."""
    lad = Ladder()
    for s in design.segments:
        lt = design.lines[s.line]
        lad.line(lad.named(s.a), lad.named(s.b), lt.z0, lt.delay * s.length)
    dies = {}
    for tap in design.taps:
        part = design.parts[tap.part]
        at = lad.named(tap.node)
        if tap.stub is not None:
            lt = design.lines[tap.stub.line]
            end = lad.node()
            lad.line(at, end, lt.z0, lt.delay * tap.stub.length)
            at = end
        if part.ibis is not None:
            ip = part.ibis
            assert max(ip.package["r"]) == 0 and max(ip.package["c"]) == 0
            l_pkg = ip.package["l"][0]
            c_die = ip.model.c_comp.typ
        else:
            l_pkg, c_die = part.l_pkg, part.c_pin
        die = lad.node()
        lad.ind.append((at, die, l_pkg))
        lad.cap[die] += c_die
        dies[tap.name] = die
        fs = lad.shunt.setdefault(die, [])
        if part.ibis is not None:
            m = part.ibis.model
            if tap.name == driver:
                sw = switching(m, edge, "typ", part.ibis.switching)
                fs.append(lambda v, t, m=m, sw=sw: float(device_current(
                    m, v, "typ", np.interp(t, sw.t, sw.ku), np.interp(t, sw.t, sw.kd))))
            else:
                fs.append(lambda v, t, m=m: float(device_current(m, v, "typ")))
        elif tap.name == driver:
            lo, hi = (part.v_low, part.r_low), (part.v_high, part.r_high)
            (v0, r0), (v1, r1) = (lo, hi) if edge == "rise" else (hi, lo)
            tr = design.edge.rise / 0.8 if edge == "rise" else design.edge.fall / 0.8

            def lin(v, t, v0=v0, r0=r0, v1=v1, r1=r1, tr=tr):
                s = min(max(t / tr, 0.0), 1.0)
                return ((1 - s) / r0 + s / r1) * v - ((1 - s) * v0 / r0 + s * v1 / r1)
            fs.append(lin)
    for term in design.terminations:
        assert term.type == "parallel"
        lad.shunt.setdefault(lad.names[term.node], []).append(lambda v, t, r=term.r, vt=term.v: (v - vt) / r)
    return lad, dies


def reference(design, driver, edge, t):
    lad, dies = build(design, driver, edge)
    pat = lad.prepare()
    y0 = lad.dc(0.0)
    sol = solve_ivp(lad.rhs, (0.0, t[-1]), y0, method="Radau", t_eval=t, rtol=1e-7, atol=1e-10,
                    jac_sparsity=pat, max_step=20e-12)
    assert sol.success, sol.message
    return {name: sol.y[k] for name, k in dies.items()}


@pytest.fixture(scope="module")
def ibs(tmp_path_factory):
    d = tmp_path_factory.mktemp("ref")
    (d / "t.ibs").write_text(shipped_variant(l_pkg="2n"))
    return d


LINEAR_DRIVER = """[parts.ctl]
role = "driver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "24 ohm"
r_low = "20 ohm"
c_pin = "3 pF"
l_pkg = "2 nH"
"""

CASES = {
    # IBIS driver (two-waveform switching), two IBIS receivers on stubs, an idle IBIS transceiver
    "ibis-driver-4-drop": dict(
        segments=(("n0", "n1", "8 cm"), ("n1", "n2", "5 cm"), ("n2", "n3", "5 cm")),
        taps=(("U1", "n0", "drv", None), ("U2", "n1", "rcv", "2 cm"), ("U3", "n2", "rcv", "1.5 cm"),
              ("U4", "n3", "drv", None)), extra="", driver="U1"),
    # linear driver, five clamped IBIS receivers, far-end parallel termination
    "linear-driver-6-drop": dict(
        segments=(("n0", "n1", "6 cm"), ("n1", "n2", "3 cm"), ("n2", "n3", "3 cm"), ("n3", "n4", "3 cm"),
                  ("n4", "n5", "3 cm")),
        taps=(("U0", "n0", "ctl", None), ("R1", "n1", "rcv", "1 cm"), ("R2", "n2", "rcv", "1 cm"),
              ("R3", "n3", "rcv", "1 cm"), ("R4", "n4", "rcv", "1 cm"), ("R5", "n5", "rcv", None)),
        extra='[[termination]]\nnode = "n5"\ntype = "parallel"\nr = "100 ohm"\nv = "1.65 V"\n' + LINEAR_DRIVER,
        driver="U0"),
}


@pytest.mark.parametrize("edge", ["rise", "fall"])
@pytest.mark.parametrize("case", sorted(CASES))
def test_against_ladder_ode(ibs, case, edge, record_property):
    c = CASES[case]
    (ibs / f"{case}.toml").write_text(design_text("t.ibs", segments=c["segments"], taps=c["taps"], extra=c["extra"],
                                                  rise="0.6 ns"))
    design = budget.load(ibs / f"{case}.toml")
    w = simulate(design, c["driver"], edge, t_stop=12e-9)
    ref = reference(design, c["driver"], edge, w.t)
    swing = float(np.max(np.abs(w.v_end - w.v_start)))
    err = max(float(np.max(np.abs(w[tap] - ref[tap]))) for tap in w.taps) / swing
    record_property("max_error_of_swing", err)
    print(f"\n{case} {edge}: max error {100 * err:.3f} % of the {swing:.3f} V swing")
    assert err < 0.01
