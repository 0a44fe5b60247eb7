"""Flattening a design, for one driving tap and one edge, into the flat arrays the kernels take.

Every device sits as (a contract): bus node -- stub line (optional) -- series
termination R (optional) -- pad -- package inductance (optional) -- die.  The
die node carries c_pin and r_in; the driver acts on the die node.

Elements of the flat netlist:

- ``line``: a lossless line section solved by the method of characteristics
  (Branin 1967): each end is a conductance 1/z0 with a history current
  delayed by the one-way delay ``td`` (which must be >= the time step).
- ``res``, ``cap``, ``ind``: lumped R, C and L (node b = -1 means ground).
- ``src``: a Norton source, resistance r to a fixed voltage v.
- the driver: on its die node, the Norton blend of its two states.

How each line becomes elements (lossless section, lumped pi, or lossless
sections with the series loss lumped between them), and the time step and
window, are decided in :mod:`budget.line_model`; :attr:`Netlist.notes` says
which lines were lumped.  The kernels take the result as two structures,
:attr:`Netlist.topology` and :attr:`Netlist.values`
(:mod:`budget.kernels.inputs`).

All values may be numpy arrays over a batch of variants (see
:meth:`budget.Design.with_values`); structural choices (lumped or not, number
of sections, ring lengths) are made once for the whole batch.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .edges import EDGES, FALL, RISE, ramp_time
from .errors import ArgumentError, DesignError
from .limits import MAX_BLOCK_VALUES, MAX_STEPS
from .graph import reverse_cuthill_mckee, union_roots
from .kernels.inputs import Topology, Values
from .line_model import (LOSS_SECTION_FRACTION, LUMPABLE_RAMP_FRACTION, STEPS_PER_LC_PERIOD,  # noqa: F401
                         STEPS_PER_RAMP, choose_dt, default_t_stop, envelope_range, line_delays,
                         model_line)
from .line_model import vmax as _vmax
from .line_model import vmin as _vmin
from .model import Design
from .roles import driving_part
from . import step_accuracy

# Re-exported for the modules that import them from here.
__all__ = ["EDGES", "RISE", "FALL", "Netlist", "choose_dt", "default_t_stop", "flatten", "line_delays",
           "ramp_time", "tolerance_envelope", "STEPS_PER_RAMP", "STEPS_PER_LC_PERIOD",
           "LOSS_SECTION_FRACTION", "LUMPABLE_RAMP_FRACTION"]


@dataclass
class Netlist:
    """One bus flattened for one driver and one edge (see module docstring).

    ``topology`` (:class:`~budget.kernels.inputs.Topology`: int64 arrays, fixed
    per structure) and ``values`` (:class:`~budget.kernels.inputs.Values`:
    float64 arrays ``[n_items, n_variants]``, dt, n_steps) are what the kernels
    take.  Node numbers are grouped so that each cluster (nodes joined by lumped
    series elements) is contiguous: ``cl_start[c]:cl_start[c+1]``.
    """
    topology: Topology
    values: Values
    node_names: list
    n_variants: int
    taps: tuple
    driver: str
    edge: str
    notes: list = field(default_factory=list)
    devices: object = None   # budget.kernels.nonlinear.Devices when the design has IBIS parts, else None

    @property
    def dt(self) -> float:
        """Time step [s]."""
        return self.values.dt

    @property
    def n_steps(self) -> int:
        """Number of samples of the time axis."""
        return self.values.n_steps

    @property
    def n_nodes(self) -> int:
        return self.topology.n_nodes

    @property
    def out_node(self) -> np.ndarray:
        """Die node of every tap, in ``taps`` order."""
        return self.topology.out_node

    @property
    def t(self) -> np.ndarray:
        """Time axis [s]: t = 0 is the start of the driver's ramp."""
        return np.arange(self.n_steps) * self.dt


class _Builder:
    def __init__(self, n):
        self.n = n  # variants
        self.names = []
        self.index = {}
        self.lines, self.res, self.caps, self.inds, self.srcs = [], [], [], [], []

    def node(self, name):
        if name not in self.index:
            self.index[name] = len(self.names)
            self.names.append(name)
        return self.index[name]

    def v(self, x):
        if isinstance(x, (float, int)):
            return np.full(self.n, float(x))
        return np.broadcast_to(np.asarray(x, dtype=float), (self.n,))

    def line(self, a, b, z0, td):
        self.lines.append((a, b, self.v(z0), self.v(td)))

    def r(self, a, b, r):
        self.res.append((a, b, self.v(r)))

    def c(self, a, b, c):
        self.caps.append((a, b, self.v(c)))

    def l(self, a, b, l):  # noqa: E743
        self.inds.append((a, b, self.v(l)))

    def src(self, a, r, v):
        self.srcs.append((a, self.v(r), self.v(v)))


_ENVELOPES: dict = {}


def tolerance_envelope(design: Design, values=None) -> Design:
    """A 2-variant design spanning the tolerance box, the current values and ``values``.

    Variant 0 holds every toleranced or swept value at its minimum, variant 1
    at its maximum.  The automatic time step, window and line modelling are
    chosen from it, so they never depend on which variants share a batch.
    Without tolerances or ``values`` the design itself is returned.
    """
    paths = set(design.tolerances) | set(values or ())
    if not paths:
        return design
    key = None
    if not values and design.batch_size is None:
        key = (id(design.structure), tuple(design.params.values()))
        hit = _ENVELOPES.get(key)
        if hit is not None and hit[0] is design.structure:
            return hit[1]
    span = {}
    for p in paths:
        lo = hi = None
        for x in ([design.params[p]] + ([values[p]] if values and p in values else [])):
            lo = _vmin(x) if lo is None else min(lo, _vmin(x))
            hi = _vmax(x) if hi is None else max(hi, _vmax(x))
        if p in design.tolerances:
            lo, hi = min(lo, design.tolerances[p][0]), max(hi, design.tolerances[p][1])
        span[p] = np.array([lo, hi])
    span = _geometry_corners(design, span)
    # every value here is a validated nominal, a validated tolerance limit or a validated swept value:
    # no second check (the envelope only sets the time step, window and line modelling)
    env = design._with_values_trusted(span)
    if key is not None:
        if len(_ENVELOPES) > 64:
            _ENVELOPES.clear()
        _ENVELOPES[key] = (design.structure, env)
    return env


MAX_ENVELOPE_GEOMETRY = 10   # toleranced geometry values whose every corner the envelope holds (2**10 variants)


def _geometry_corners(design: Design, span: dict) -> dict:
    """The envelope's spans with every corner of the toleranced geometry values (design files'
    ``geometry`` lines), when there are two or more.

    z0 and delay of a cross-section are not monotonic in all its dimensions together (a microstrip's
    z0 rises with h and falls with w), so all-minimum / all-maximum would miss their extremes; the
    corners catch them (the formulas are monotonic in each dimension over a tolerance range).  Other
    values alternate minimum / maximum, so their extremes stay in the envelope.
    """
    geo = [p for p in span if ".geometry." in p][:MAX_ENVELOPE_GEOMETRY]
    if len(geo) < 2:
        return span
    n = 2 ** len(geo)
    codes = (np.arange(n)[:, None] >> np.arange(len(geo))[None, :]) & 1
    out = {p: np.resize(a, n) for p, a in span.items()}
    for j, p in enumerate(geo):
        out[p] = np.where(codes[:, j] == 1, span[p][1], span[p][0])
    return out


def auto_step(env: Design, edge: str):
    """The automatic time step of the envelope design ``env`` for ``edge``, chosen by its estimated
    accuracy (:mod:`budget.step_accuracy`; the design's ``bus.dt`` if it gives one)."""
    return step_accuracy.choose(env, edge, flatten)   # flatten passed in: step_accuracy sits below this module


def flatten(design: Design, driver: str, edge: str, *, dt: float | None = None,
            t_stop: float | None = None, envelope: Design | None = None) -> Netlist:
    """Flatten ``design`` with tap ``driver`` driving an ``edge`` (RISE or FALL).

    dt [s] and t_stop [s] override the design's own and the automatic choice.
    ``envelope`` (same structure, values covering a whole sweep) makes the
    automatic choices (time step, window, lumped or not, loss sections);
    default: :func:`tolerance_envelope`, so the nominal design, every corner,
    sample and measured unit inside the tolerance box get the same netlist.
    """
    if edge not in EDGES:
        raise ArgumentError(f"edge must be one of {', '.join(EDGES)}, got {edge!r}")
    dpart = driving_part(design, driver)
    n = design.batch_size or 1
    env = envelope if envelope is not None else tolerance_envelope(design)
    if dt is None:
        step = auto_step(env, edge)
        dt, notes_step = step.dt, ([step.note] if step.note else [])
    else:
        dt, notes_step = float(dt), []
    if t_stop is None:
        t_stop = design.bus.t_stop if design.bus.t_stop is not None else default_t_stop(env, edge)
    t_stop = _vmax(t_stop)
    if not (dt > 0 and t_stop > dt):
        raise ArgumentError(f"need 0 < dt < t_stop, got dt={dt:g} s, t_stop={t_stop:g} s")
    n_steps = int(math.floor(t_stop / dt + 1e-9)) + 1
    if n_steps > MAX_STEPS:
        raise ArgumentError(f"{n_steps} time steps (t_stop {t_stop:g} s / dt {dt:g} s); at most {MAX_STEPS} steps "
                            "(budget.limits.MAX_STEPS): shorten t_stop or lengthen dt")
    from .kernels.transient import LANES   # variants the kernel holds at once

    block = n_steps * len(design.taps) * min(n, LANES)
    if block > MAX_BLOCK_VALUES:
        raise ArgumentError(f"{n_steps} time steps x {len(design.taps)} taps x {min(n, LANES)} variants = {block} "
                            f"samples in one block; at most {MAX_BLOCK_VALUES} (budget.limits.MAX_BLOCK_VALUES): "
                            "shorten t_stop or lengthen dt")

    b = _Builder(n)
    notes = list(notes_step)
    t_ramp_edge = ramp_time(design, edge)
    for name in design.nodes:
        b.node(name)

    # envelope ranges as plain floats: (min, max) of z0 [ohm], delay [s/m], r_dc [ohm/m] per line type
    env_lines = {name: envelope_range(lt) for name, lt in env.lines.items()}

    def add_line(a, bnode, line_name, length, env_length, label):
        # the modelling itself (lossless, lumped pi or loss sections) is budget.line_model's
        notes.extend(model_line(b, a, bnode, design.lines[line_name], length, env_lines[line_name], env_length,
                                dt, t_ramp_edge, label, source=design.source, table=f"lines.{line_name}"))

    for s in design.segments:
        add_line(b.node(s.a), b.node(s.b), s.line, s.length, env.segments[s.index].length,
                 f"segment #{s.index + 1} ({s.a}-{s.b})")

    series = {t.tap: t for t in design.terminations if t.type == "series"}
    out_nodes = []
    drv_node = -1
    ibis_specs = []     # IBIS parts: (tap, die node, part, corners, driving) -- budget.ibis_netlist
    for tap, etap in zip(design.taps, env.taps):
        part = design.parts[tap.part]
        at = b.node(tap.node)
        if tap.stub is not None:
            end = b.node(f"{tap.name}:stub")
            add_line(at, end, tap.stub.line, tap.stub.length, etap.stub.length, f"tap {tap.name} stub")
            at = end
        if tap.name in series:
            pad = b.node(f"{tap.name}:pad")
            b.r(at, pad, series[tap.name].r)
            at = pad
        if part.ibis is not None:
            from . import ibis_netlist
            at = ibis_netlist.chain(b, design, tap, part, at, ibis_specs, tap.name == driver)
            out_nodes.append(at)
            if tap.name == driver:
                drv_node = at
            continue
        l_pkg = np.asarray(part.l_pkg, dtype=float)
        if _vmax(l_pkg) > 0:
            if _vmin(l_pkg) <= 0:
                raise DesignError("l_pkg is zero in some variants and positive in others; give it a small "
                                  "positive minimum", source=design.source, table=f"parts.{part.name}", key="l_pkg")
            die = b.node(f"{tap.name}:die")
            b.l(at, die, l_pkg)
            at = die
        if _vmax(part.c_pin) > 0:
            b.c(at, -1, part.c_pin)
        if np.all(np.isfinite(part.r_in)):
            b.r(at, -1, part.r_in)
        out_nodes.append(at)
        if tap.name == driver:
            drv_node = at

    for term in design.terminations:
        if term.type == "parallel":
            b.src(b.node(term.node), term.r, term.v)
        elif term.type == "thevenin":
            b.src(b.node(term.node), term.r_up, term.v_up)
            b.r(b.node(term.node), -1, term.r_down)
        elif term.type == "rc":
            mid = b.node(f"termination #{term.index + 1}:rc")
            b.r(b.node(term.node), mid, term.r)
            b.c(mid, -1, term.c)

    # driver states: the edge goes from state 0 to state 1
    lo = (dpart.v_low, dpart.r_low)
    hi = (dpart.v_high, dpart.r_high)
    (v0, r0), (v1, r1) = (lo, hi) if edge == RISE else (hi, lo)

    if not ibis_specs:
        return _assemble(b, design, drv_node, out_nodes, v0, r0, v1, r1, ramp_time(design, edge), dt,
                         n_steps, driver, edge, notes)
    # a design with IBIS parts: placeholder sources for the devices, the non-linear kernel's Devices
    from . import ibis_netlist
    src_index = ibis_netlist.add_placeholders(b, ibis_specs)
    linear_driver = dpart.ibis is None
    if not linear_driver:       # the buffer is the driver: no linear source (1/inf = 0 in every stamp)
        v0 = v1 = 0.0
        r0 = r1 = math.inf
    old_names = list(b.names)
    net = _assemble(b, design, drv_node, out_nodes, v0, r0, v1, r1, ramp_time(design, edge), dt, n_steps, driver,
                    edge, notes)
    net.devices = ibis_netlist.devices(net, old_names, ibis_specs, src_index, design, driver, edge, linear_driver)
    return net


def _assemble(b: _Builder, design, drv_node, out_nodes, v0, r0, v1, r1, t_ramp, dt, n_steps,
              driver, edge, notes) -> Netlist:
    n0 = len(b.names)
    # clusters: nodes joined by lumped two-node elements (lines decouple them within a step)
    pairs = [(a, c) for a, c, *_ in b.res] + [(a, c) for a, c, *_ in b.caps] + [(a, c) for a, c, *_ in b.inds]
    roots = union_roots(n0, pairs)
    groups = {}
    for i in range(n0):
        groups.setdefault(roots[i], []).append(i)
    order = [i for g in groups.values() for i in g]
    newidx = np.empty(n0, dtype=np.int64)
    newidx[order] = np.arange(n0)
    cl_sizes = [len(g) for g in groups.values()]
    cl_start = np.concatenate([[0], np.cumsum(cl_sizes)]).astype(np.int64)
    cl_moff = np.concatenate([[0], np.cumsum([m * m for m in cl_sizes])]).astype(np.int64)

    def ren(x):
        return int(newidx[x]) if x >= 0 else -1

    def arr(items, k):
        return np.array([ren(it[k]) for it in items], dtype=np.int64)

    def vals(items, k):
        if not items:
            return np.zeros((0, b.n))
        return np.ascontiguousarray(np.stack([it[k] for it in items]))

    line_a, line_b = arr(b.lines, 0), arr(b.lines, 1)
    res_a, res_b = arr(b.res, 0), arr(b.res, 1)
    cap_a, cap_b = arr(b.caps, 0), arr(b.caps, 1)
    ind_a, ind_b = arr(b.inds, 0), arr(b.inds, 1)
    src_node = np.array([ren(s[0]) for s in b.srcs], dtype=np.int64)
    names = [b.names[i] for i in order]

    # DC: lines (lossless sections) and inductors are shorts; merge their nodes.
    shorts = [(int(line_a[k]), int(line_b[k])) for k in range(len(line_a))] + \
             [(int(ind_a[k]), int(ind_b[k])) for k in range(len(ind_a))]
    droots = union_roots(n0, shorts)
    dc_groups = {}
    for i in range(n0):
        dc_groups.setdefault(droots[i], []).append(i)
    group_list = list(dc_groups.values())
    gid = np.empty(n0, dtype=np.int64)
    for g, members in enumerate(group_list):
        gid[members] = g
    # Reverse Cuthill-McKee ordering of the DC groups keeps the conductance matrix banded
    # (a trunk with stubs has a bandwidth of a few); the banded Cholesky is then O(n).
    dc_map, dc_bw = _rcm_map(len(group_list), gid, res_a, res_b)
    # Spanning forest of the shorts, leaves first, to recover their DC currents from KCL.
    tree_kind, tree_elem, tree_child, tree_parent = _short_tree(n0, line_a, line_b, ind_a, ind_b)

    ring_len = np.zeros(len(b.lines), dtype=np.int64)
    line_td = vals(b.lines, 3)
    for k in range(len(b.lines)):
        ring_len[k] = int(math.floor(_vmax(line_td[k]) / dt + 1e-9)) + 4  # cubic stencil reaches q + 2

    if drv_node < 0:
        raise RuntimeError("driver node not found")  # unreachable: flatten checked the tap
    topology = Topology(
        n_nodes=n0, cl_start=cl_start, cl_moff=cl_moff,
        line_a=line_a, line_b=line_b, res_a=res_a, res_b=res_b, cap_a=cap_a, cap_b=cap_b,
        ind_a=ind_a, ind_b=ind_b, src_node=src_node, drv_node=ren(drv_node),
        out_node=np.array([ren(x) for x in out_nodes], dtype=np.int64),
        dc_map=dc_map, n_dc=len(group_list), dc_bw=dc_bw,
        tree_kind=tree_kind, tree_elem=tree_elem, tree_child=tree_child, tree_parent=tree_parent,
        ring_len=ring_len)
    values = Values(
        line_z0=vals(b.lines, 2), line_td=line_td, res_r=vals(b.res, 2), cap_c=vals(b.caps, 2),
        ind_l=vals(b.inds, 2), src_r=vals(b.srcs, 1), src_v=vals(b.srcs, 2),
        drv_v0=b.v(v0).copy(), drv_v1=b.v(v1).copy(), drv_r0=b.v(r0).copy(), drv_r1=b.v(r1).copy(),
        t_ramp=b.v(t_ramp).copy(), dt=float(dt), n_steps=int(n_steps))
    return Netlist(topology=topology, values=values, node_names=names, n_variants=b.n,
                   taps=design.tap_names, driver=driver, edge=edge, notes=notes)


def _rcm_map(n_groups, gid, res_a, res_b):
    """Map nodes to DC unknowns ordered by reverse Cuthill-McKee; return (map, bandwidth)."""
    key = (n_groups, gid.tobytes(), res_a.tobytes(), res_b.tobytes())
    hit = _GRAPH_CACHE.get(("rcm", key))
    if hit is None:
        hit = _GRAPH_CACHE[("rcm", key)] = _rcm_map_uncached(n_groups, gid, res_a, res_b)
        _trim_cache()
    return hit


_GRAPH_CACHE: dict = {}


def _trim_cache(limit: int = 256):
    """Keep the structural cache small (designs that share a topology reuse its entries)."""
    while len(_GRAPH_CACHE) > limit:
        _GRAPH_CACHE.pop(next(iter(_GRAPH_CACHE)))


def _rcm_map_uncached(n_groups, gid, res_a, res_b):
    ra, rb = [], []
    for a, c in zip(res_a, res_b):
        if c >= 0 and gid[a] != gid[c]:
            ra += [gid[a], gid[c]]
            rb += [gid[c], gid[a]]
    ra += list(range(n_groups))
    rb += list(range(n_groups))
    perm = np.asarray(reverse_cuthill_mckee(n_groups, zip(ra, rb)), dtype=np.int64)
    pos = np.empty(n_groups, dtype=np.int64)
    pos[perm] = np.arange(n_groups)
    bw = 0
    for a, c in zip(ra, rb):
        bw = max(bw, abs(int(pos[a]) - int(pos[c])))
    node_map = pos[gid].astype(np.int64)
    return node_map, bw


def _short_tree(n0, line_a, line_b, ind_a, ind_b):
    """Leaf-first list of spanning-forest edges over the DC shorts (kind 0 line, 1 inductor)."""
    key = ("tree", n0, line_a.tobytes(), line_b.tobytes(), ind_a.tobytes(), ind_b.tobytes())
    hit = _GRAPH_CACHE.get(key)
    if hit is None:
        hit = _GRAPH_CACHE[key] = _short_tree_uncached(n0, line_a, line_b, ind_a, ind_b)
        _trim_cache()
    return hit


def _short_tree_uncached(n0, line_a, line_b, ind_a, ind_b):
    adj = [[] for _ in range(n0)]
    for k in range(len(line_a)):
        adj[line_a[k]].append((0, k, int(line_b[k])))
        adj[line_b[k]].append((0, k, int(line_a[k])))
    for k in range(len(ind_a)):
        adj[ind_a[k]].append((1, k, int(ind_b[k])))
        adj[ind_b[k]].append((1, k, int(ind_a[k])))
    seen = np.zeros(n0, dtype=bool)
    edges = []
    for root in range(n0):
        if seen[root] or not adj[root]:
            continue
        seen[root] = True
        queue = [root]
        while queue:
            u = queue.pop(0)
            for kind, k, w in adj[u]:
                if not seen[w]:
                    seen[w] = True
                    edges.append((kind, k, w, u))
                    queue.append(w)
    edges.reverse()  # BFS order reversed: every child's subtree is done before its own edge
    a = np.array(edges, dtype=np.int64).reshape(-1, 4)
    return (np.ascontiguousarray(a[:, 0]), np.ascontiguousarray(a[:, 1]),
            np.ascontiguousarray(a[:, 2]), np.ascontiguousarray(a[:, 3]))
