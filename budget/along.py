"""The voltage along the bus against time, for one driver and one edge (the space-time picture).

:func:`along` runs the ordinary transient engine (the same flattened netlist,
time step and window as :func:`budget.simulate`) with every node recorded, then
fills in the inside of every line from its travelling waves
(:mod:`budget.kernels.along`; Branin 1967): nothing of the engine's time loop is
changed or repeated, and the pin waveforms it returns are the engine's, bit for bit.

What each piece of the bus becomes:

- a lossless segment or stub: one line section, sampled inside at about one
  point per time step of travel (``points_per_step``);
- a lossy one (``r_dc``): the engine's lossless sections with the series loss
  lumped between them (:func:`budget.line_model.model_line`); each section is
  sampled inside, so a small voltage step appears at every lumped resistor;
- a line shorter than the time step, which the engine lumps as a pi (C/2, L,
  C/2): only its two end nodes exist, so its band has two points;
- every tap's die node (its pin waveform) as a band of one point, kind ``pin``.

The result (:class:`AlongWaves`) holds the arrays (positions, t, v[x, t],
labels) and writes them as JSON (schema ``busbudget.along/1``) or CSV; the
picture is :func:`budget.along_figure.along_figure`.  The same model
assumptions as every result of busbudget apply (linear driver, lossless or
lumped-loss lines, differential mode only): estimates, to confirm by
measurement and with the part makers' data.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np

from .errors import ArgumentError
from .files import write_atomically
from .kernels import transient as tk
from .kernels.along import interior_voltages, replay_line_waves
from .limits import MAX_BLOCK_VALUES
from .model import Design

SCHEMA = "busbudget.along/1"
# Points inside a line section per time step of travel (the picture then resolves a
# wave in space as finely as the engine does in time).
POINTS_PER_STEP = 1.0
# At most this many points per line section, however long it is.
MAX_POINTS_PER_SECTION = 400
NOTE = ("Estimates from a linear model (two-state linear driver, lossless or lumped-loss lines, "
        "differential mode only for differential buses); confirm by measurement and with the part "
        "makers' data; the applicable standards and the responsible engineer decide.")


@dataclass(frozen=True)
class Band:
    """One piece of the bus in :class:`AlongWaves`: a segment, a stub or a pin.

    name: ``"segment A-B"`` (with ``" #i"`` when two segments join the same
    nodes), ``"stub TAP"`` or ``"pin TAP"``; kind: ``"segment"``, ``"stub"`` or
    ``"pin"``; start, end: what sits at x = 0 and at x = length (bus node
    names; for a stub the bus node and ``"TAP:stub"``, its device end; for a
    pin ``"TAP:die"`` twice); length [m]; model: ``"lossless"``, ``"sections"``
    (lossy, n lossless sections), ``"lumped"`` (pi model: ends only) or ``"node"``
    (a pin); rows: first and one-past-last row of ``AlongWaves.v``; tap: the
    tap of a stub or pin (else None); index: the segment's index in the design
    (else None).
    """
    name: str
    kind: str
    start: str
    end: str
    length: float
    model: str
    rows: tuple
    tap: str | None = None
    index: int | None = None


@dataclass(frozen=True)
class AlongWaves:
    """Voltage along every segment and stub, and at every pin, against time.

    t [s]: the engine's time axis (t = 0 at the start of the driver's ramp);
    v [V]: ``[n_points, n_t]``; x [m]: each point's distance from its band's
    start; band [n_points]: index into ``bands``; labels [n_points]: ``"BAND @
    x mm"``; v_start, v_end [V] [n_points]: DC levels of every point in the
    driver's starting and final state; dt [s] the time step; notes: the
    engine's notes (lumped lines, extended windows).
    """
    t: np.ndarray
    v: np.ndarray
    x: np.ndarray
    band: np.ndarray
    labels: tuple
    bands: tuple
    v_start: np.ndarray
    v_end: np.ndarray
    design: str
    driver: str
    edge: str
    dt: float
    notes: tuple = ()

    def rows(self, name: str) -> slice:
        """Rows of ``v`` of the band called ``name``."""
        for b in self.bands:
            if b.name == name:
                return slice(*b.rows)
        raise ArgumentError(f"no band {name!r}; bands are: {', '.join(b.name for b in self.bands)}")

    def to_json(self) -> dict:
        """One JSON document (schema busbudget.along/1), SI units: t [s], x and length [m], v [V]."""
        bands = []
        for b in self.bands:
            r = slice(*b.rows)
            bands.append({"name": b.name, "kind": b.kind, "start": b.start, "end": b.end, "length": b.length,
                          "model": b.model, "tap": b.tap, "x": self.x[r].tolist(),
                          "v_start": self.v_start[r].tolist(), "v_end": self.v_end[r].tolist(),
                          "v": self.v[r].tolist()})
        return {"schema": SCHEMA, "design": self.design, "driver": self.driver, "edge": self.edge,
                "dt": self.dt, "t": self.t.tolist(), "bands": bands, "notes": list(self.notes), "note": NOTE}

    def write(self, path) -> None:
        """Write the arrays to ``path``: ``.json`` (:meth:`to_json`) or ``.csv`` (header ``t`` then one
        column per point, named by its label; one row per time step), atomically."""
        suffix = str(path).lower().rsplit(".", 1)[-1] if "." in str(path) else ""
        if suffix == "json":
            body = json.dumps(self.to_json(), allow_nan=False) + "\n"
            write_atomically(path, lambda fh: fh.write(body))
        elif suffix == "csv":
            def write(fh):
                fh.write(",".join(["t"] + [_csv_field(s) for s in self.labels]) + "\n")
                np.savetxt(fh, np.column_stack([self.t, self.v.T]), delimiter=",", fmt="%.9e")
            write_atomically(path, write)
        else:
            raise ArgumentError(f"{path}: unknown data format; use .json or .csv")


def _csv_field(s: str) -> str:
    return '"' + s.replace('"', '""') + '"' if any(c in s for c in ',"\n') else s


# -- which flat line sections belong to which segment or stub -------------------------

def _line_pieces(design: Design, net) -> list:
    """For every segment (design order) then every stub (tap order): (kind, name, a, b, length, model,
    sections, tap, index), sections a list of flat line indices in order from a to b.

    The flat netlist (:func:`budget.netlist.flatten`) adds lines in this order:
    one section for a lossless line, n sections with nodes ``"LABEL:s{k}a"``,
    ``"LABEL:s{k}b"`` for a lossy one, none for a lumped one.
    """
    idx = {name: i for i, name in enumerate(net.node_names)}
    topo, td = net.topology, net.values.line_td[:, 0]
    items = []
    seen = {}
    for s in design.segments:
        seen[(s.a, s.b)] = seen.get((s.a, s.b), 0) + 1
    for s in design.segments:
        name = f"segment {s.a}-{s.b}" + (f" #{s.index + 1}" if seen[(s.a, s.b)] > 1 else "")
        items.append(("segment", name, s.a, s.b, design.lines[s.line], float(s.length),
                      f"segment #{s.index + 1} ({s.a}-{s.b})", None, s.index))
    for tap in design.taps:
        if tap.stub is not None:
            items.append(("stub", f"stub {tap.name}", tap.node, f"{tap.name}:stub", design.lines[tap.stub.line],
                          float(tap.stub.length), f"tap {tap.name} stub", tap.name, None))
    out, p = [], 0
    nl = topo.line_a.shape[0]
    for kind, name, a, b, lt, length, label, tap, index in items:
        want = float(lt.delay) * length
        if f"{label}:s0a" in idx:
            secs = []
            while f"{label}:s{len(secs)}a" in idx:
                k = p + len(secs)
                if not (k < nl and topo.line_a[k] == idx[f"{label}:s{len(secs)}a"]
                        and topo.line_b[k] == idx[f"{label}:s{len(secs)}b"]):
                    raise RuntimeError(f"along: the sections of {label} are not where the netlist puts them")
                secs.append(k)
            model = "sections"
        elif p < nl and topo.line_a[p] == idx[a] and topo.line_b[p] == idx[b] and math.isclose(td[p], want,
                                                                                             rel_tol=1e-9):
            secs, model = [p], "lossless"
        else:
            secs, model = [], "lumped"
        if secs and not math.isclose(float(np.sum(td[secs])), want, rel_tol=1e-9):
            raise RuntimeError(f"along: the delay of {label} does not match its netlist sections")
        p += len(secs)
        out.append((kind, name, idx[a], idx[b], a, b, length, model, secs, tap, index))
    if p != nl:
        raise RuntimeError(f"along: {nl - p} line sections of the netlist belong to no segment or stub")
    return out


# -- the run --------------------------------------------------------------------------

def _record_every_node(net):
    """Run the engine on ``net`` (one variant) recording every node: (v_rec [n_steps, n_nodes] [V],
    dc [2, n_nodes] [V], status [1]).  The same call as every simulation
    (:func:`budget.simulate.run_netlist`); only the list of recorded nodes differs."""
    from dataclasses import replace

    from .simulate import run_netlist

    every = replace(net, topology=net.topology._replace(out_node=np.arange(net.n_nodes, dtype=np.int64)))
    waves, dc, status = run_netlist(every)
    return waves[:, :, 0], dc[:, :, 0], status


def _dc_waves(net):
    """DC waves (w0_a, w0_b) [A] of every line section in the starting state, as the engine starts them:
    w_a = v_a/Z0 + i, w_b = v_b/Z0 - i, i the DC current into end a (:func:`transient.dc_state`)."""
    topo, vals = net.topology, net.values
    v = np.empty(topo.n_nodes)
    li = np.empty(topo.line_a.shape[0])
    ii = np.empty(topo.ind_a.shape[0])
    band = np.empty(max(1, topo.n_dc * (topo.dc_bw + 1)))
    rhs = np.empty(max(1, topo.n_dc))
    acc = np.empty(topo.n_nodes)
    tk.dc_state(0, vals.drv_v0[0], vals.drv_r0[0], topo, vals, v, li, ii, band, rhs, acc)
    z = vals.line_z0[:, 0]
    return v[topo.line_a] / z + li, v[topo.line_b] / z - li


def _history_weights(net):
    """The engine's interpolation taps of every line section (as run_block sets them up for one variant)."""
    vals = net.values
    nl = net.topology.line_a.shape[0]
    x = vals.line_td[:, 0] / vals.dt
    q = np.maximum(np.floor(x + 1e-9).astype(np.int64), 1).reshape(nl, 1)
    fr = np.maximum(0.0, x - q[:, 0]).reshape(nl, 1)
    qmin = np.empty(nl, dtype=np.int64)
    ntap = np.empty(nl, dtype=np.int64)
    tap_off = np.zeros(nl + 1, dtype=np.int64)
    wts = tk._lagrange_weights(np.ascontiguousarray(q), np.ascontiguousarray(fr), 1, qmin, ntap, tap_off)
    return qmin, ntap, tap_off, wts


def along(design: Design, driver: str, edge: str = "rise", *, dt: float | None = None,
          t_stop: float | None = None, points_per_step: float = POINTS_PER_STEP) -> AlongWaves:
    """Voltage along every segment and stub, and at every pin, when tap ``driver`` drives an ``edge``.

    design: a scalar Design (:func:`budget.load`); driver: the driving tap;
    edge: "rise" or "fall"; dt [s], t_stop [s]: as :func:`budget.simulate`
    (default: the design's own or the automatic step and window, extended until
    the pins settle); points_per_step [-]: points inside a line section per
    time step of its delay (at least the two ends, at most
    MAX_POINTS_PER_SECTION).  Returns :class:`AlongWaves`.
    """
    from .netlist import flatten
    from .simulate import check_status, simulate

    if design.batch_size is not None:
        raise ArgumentError("along() takes a design with scalar values; use budget.sweep for arrays")
    if not (isinstance(points_per_step, (int, float)) and not isinstance(points_per_step, bool)
            and math.isfinite(points_per_step) and 0 < points_per_step <= 16):
        raise ArgumentError(f"points_per_step must be a number in (0, 16], got {points_per_step!r}")
    # the pins' window (and its extensions) exactly as budget.simulate chooses it
    pins = simulate(design, driver, edge, dt=dt, t_stop=t_stop)
    net = flatten(design, driver, edge, dt=pins.dt, t_stop=float(pins.t[-1]))
    if net.n_steps != pins.t.size:
        raise RuntimeError("along: the netlist's time axis differs from the pins'")
    pieces = _line_pieces(design, net)
    n_pts = 0
    for *_, model, secs, _tap, _i in pieces:
        n_pts += 2 if model == "lumped" else sum(_section_points(net, k, points_per_step) for k in secs)
    n_pts += len(design.taps)
    for what, count in (("nodes", net.n_nodes), ("points", n_pts)):
        if count * net.n_steps > MAX_BLOCK_VALUES:
            raise ArgumentError(f"{net.n_steps} time steps x {count} {what} = {count * net.n_steps} samples; at most "
                                f"{MAX_BLOCK_VALUES} (budget.limits.MAX_BLOCK_VALUES): shorten t_stop, lengthen dt "
                                "or lower points_per_step")
    v_rec, dc, status = _record_every_node(net)
    check_status(status, net, design)
    w0_a, w0_b = _dc_waves(net)
    qmin, ntap, tap_off, wts = _history_weights(net)
    nl = net.topology.line_a.shape[0]
    w_a = np.empty((net.n_steps, nl))
    w_b = np.empty((net.n_steps, nl))
    replay_line_waves(np.ascontiguousarray(v_rec), net.topology.line_a, net.topology.line_b,
                      1.0 / net.values.line_z0[:, 0], w0_a, w0_b, qmin, ntap, tap_off, wts, w_a, w_b)

    v_rows, x_rows, start_rows, end_rows, band_of, labels, bands = [], [], [], [], [], [], []

    def add(band_info, x, v, v0, v1):
        i = len(bands)
        r0 = sum(len(a) for a in x_rows)
        x_rows.append(np.asarray(x, dtype=float))
        v_rows.append(v)
        start_rows.append(v0)
        end_rows.append(v1)
        band_of.append(np.full(len(x), i, dtype=np.int64))
        labels.extend(f"{band_info['name']} @ {xx * 1e3:.4g} mm" for xx in x)
        bands.append(Band(rows=(r0, r0 + len(x)), **band_info))

    for kind, name, ia, ib, a, b, length, model, secs, tap, index in pieces:
        info = dict(name=name, kind=kind, start=a, end=b, length=length, model=model, tap=tap, index=index)
        if model == "lumped":
            add(info, [0.0, length], v_rec[:, [ia, ib]].T.copy(), dc[0, [ia, ib]], dc[1, [ia, ib]])
            continue
        total = float(np.sum(net.values.line_td[secs, 0]))
        xs, vs, v0s, v1s = [], [], [], []
        done = 0.0
        for k in secs:
            td = float(net.values.line_td[k, 0])
            m = _section_points(net, k, points_per_step)
            xi = np.linspace(0.0, 1.0, m)
            out = np.empty((m, net.n_steps))
            interior_voltages(w_a, w_b, w0_a, w0_b, k, float(net.values.line_z0[k, 0]), td / net.dt, xi, out)
            xs.append((done + xi * td) / total * length)
            vs.append(out)
            # a lossless section is a short at DC: both ends and every point inside share one level
            v0s.append(np.full(m, dc[0, net.topology.line_a[k]]))
            v1s.append(np.full(m, dc[1, net.topology.line_a[k]]))
            done += td
        add(info, np.concatenate(xs), np.vstack(vs), np.concatenate(v0s), np.concatenate(v1s))
    for j, tap in enumerate(design.taps):
        die = int(net.out_node[j])
        add(dict(name=f"pin {tap.name}", kind="pin", start=f"{tap.name}:die", end=f"{tap.name}:die", length=0.0,
                 model="node", tap=tap.name, index=None),
            [0.0], pins.v[:, j][None, :].copy(), dc[0, [die]], dc[1, [die]])
    return AlongWaves(t=pins.t, v=np.vstack(v_rows), x=np.concatenate(x_rows), band=np.concatenate(band_of),
                      labels=tuple(labels), bands=tuple(bands), v_start=np.concatenate(start_rows),
                      v_end=np.concatenate(end_rows), design=design.bus.name or design.source, driver=driver,
                      edge=edge, dt=pins.dt, notes=pins.notes)


def _section_points(net, k: int, points_per_step: float) -> int:
    """Points (both ends included) along line section k: points_per_step per time step of its delay."""
    steps = float(net.values.line_td[k, 0]) / net.dt
    return int(min(MAX_POINTS_PER_SECTION, max(2, math.ceil(steps * points_per_step - 1e-9) + 1)))


# -- layout of the trunk -----------------------------------------------------------------

@dataclass(frozen=True)
class Run:
    """A chain of segments between two junctions or ends of the trunk, in walking order.

    nodes: the bus nodes met, from the start (len = len(segments) + 1);
    segments: (segment index, reversed) pairs -- reversed when the walk goes
    from the segment's ``to`` node to its ``from`` node; offsets [m]: distance
    of every node in ``nodes`` from the start of the run.
    """
    nodes: tuple
    segments: tuple
    offsets: tuple


def trunk_runs(design: Design) -> tuple:
    """The trunk as chains of segments (:class:`Run`): a daisy chain is one run from its end that comes
    first in the design's node order; a tree or star is cut at every junction (a node with more than two
    segments), each branch one run; a ring is walked once round."""
    inc = {n: [] for n in design.nodes}
    for s in design.segments:
        inc.setdefault(s.a, []).append(s)
        inc.setdefault(s.b, []).append(s)
    used, runs = set(), []

    def walk(start, first):
        nodes, segs, offs = [start], [], [0.0]
        cur, seg = start, first
        while seg is not None:
            used.add(seg.index)
            rev = seg.a != cur
            cur = seg.a if rev else seg.b
            segs.append((seg.index, rev))
            nodes.append(cur)
            offs.append(offs[-1] + float(seg.length))
            nxt = [s for s in inc[cur] if s.index not in used]
            seg = nxt[0] if len(inc[cur]) == 2 and nxt else None
        runs.append(Run(nodes=tuple(nodes), segments=tuple(segs), offsets=tuple(offs)))

    for n in design.nodes:
        if len(inc[n]) != 2:
            for s in inc[n]:
                if s.index not in used:
                    walk(n, s)
    for s in design.segments:           # what is left is a ring
        if s.index not in used:
            walk(s.a, s)
    return tuple(runs)


__all__ = ["along", "AlongWaves", "Band", "Run", "trunk_runs", "SCHEMA", "POINTS_PER_STEP",
           "MAX_POINTS_PER_SECTION"]
