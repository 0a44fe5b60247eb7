"""IBIS parts in the flat netlist: their package chain and the kernel's :class:`~budget.kernels.nonlinear.Devices`.

Chain of an IBIS part (the device contract: bus node -- stub -- series R -- pad -- package -- die):
pad -- C_pkg to ground at the pad -- R_pkg -- L_pkg -- die; the die carries C_comp (or the part's
c_pin), r_in if the part gives one, and the buffer (a device of :mod:`budget.kernels.nonlinear`,
its placeholder Norton source on the die node).  Values at each variant's corner.
"""
from __future__ import annotations

import numpy as np

from .errors import DesignError
from .ibis import CORNERS
from .ibis_devices import TABLES, corner_index, device_current, switching
from .kernels.nonlinear import KMAX, Devices

G_STAMP = 0.02   # [S] conductance stamped at each device's die node in the transient (any positive value works)

# derived tables per model (the model object is kept in the value, so its id is not reused while cached)
_CACHE: dict = {}


def _cached(key, model, make):
    hit = _CACHE.get(key)
    if hit is None:
        if len(_CACHE) > 512:
            _CACHE.clear()
        hit = _CACHE[key] = (model, make())
    return hit[1]


def _switching(model, edge, corner, method, source):
    return _cached(("sw", id(model), edge, corner, method), model,
                   lambda: switching(model, edge, corner, method, source=source))


def corners_of(design, part) -> np.ndarray:
    """Corner column per variant (0 typ, 1 min, 2 max) of an IBIS part."""
    n = design.batch_size or 1
    return np.broadcast_to(corner_index(design.params[f"parts.{part.name}.ibis.corner"]), (n,)).copy()


def _per_corner(values, cidx):
    return np.asarray(values, dtype=float)[cidx]


def chain(b, design, tap, part, at, specs, is_driver):
    """Add an IBIS part's package and die after node ``at``; returns the die node. Appends the device to specs."""
    ip = part.ibis
    keys = design.structure.part_keys[part.name]
    cidx = corners_of(design, part)
    c_pkg = _per_corner(ip.package["c"], cidx)
    r_pkg = _per_corner(ip.package["r"], cidx)
    l_pkg = part.l_pkg if "l_pkg" in keys else _per_corner(ip.package["l"], cidx)
    if np.max(c_pkg) > 0:
        b.c(at, -1, c_pkg)
    if np.max(r_pkg) > 0:
        nxt = b.node(f"{tap.name}:pkg")
        b.r(at, nxt, r_pkg)
        at = nxt
    l_pkg = np.asarray(l_pkg, dtype=float)
    if np.max(l_pkg) > 0:
        if np.min(l_pkg) <= 0:
            raise DesignError("l_pkg is zero in some variants and positive in others; give it a small positive "
                              "minimum", source=design.source, table=f"parts.{part.name}", key="l_pkg")
        die = b.node(f"{tap.name}:die")
        b.l(at, die, l_pkg)
        at = die
    c_die = part.c_pin if "c_pin" in keys else _per_corner([ip.model.c_comp.at(c) for c in CORNERS], cidx)
    if np.max(c_die) > 0:
        b.c(at, -1, c_die)
    if "r_in" in keys:
        b.r(at, -1, part.r_in)
    specs.append((tap.name, at, part, cidx, is_driver))
    return at


def add_placeholders(b, specs):
    """One placeholder Norton source per device (r = 1/G_STAMP, v = 0); returns their src indices."""
    out = []
    for _, node, _, _, _ in specs:
        out.append(len(b.srcs))
        b.src(node, 1.0 / G_STAMP, 0.0)
    return out


def devices(net, old_names, specs, src_index, design, driver, edge, linear_driver) -> Devices:
    """The kernel's device arrays for a flattened netlist (nodes renumbered as in ``net``)."""
    where = {name: i for i, name in enumerate(net.node_names)}
    n = net.n_variants
    topo = net.topology
    tabs, tab_ids = [], {}
    dev_node, dev_drive, dev_tab, dev_rail, dev_corner = [], [], [], [], []
    drive_part = None
    for (tap, node, part, cidx, is_driver) in specs:
        m = part.ibis.model
        dev_node.append(where[old_names[node]])
        dev_drive.append(1 if is_driver else 0)
        ids = []
        for which in TABLES:
            tab = getattr(m, which)
            if tab is None:
                ids.append(-1)
                continue
            key = (id(tab),)
            if key not in tab_ids:
                tab_ids[key] = len(tabs)
                tabs.append(tab)
            ids.append(tab_ids[key])
        dev_tab.append(ids)
        dev_rail.append([[m.rail(w, c) if getattr(m, w) is not None else 0.0 for c in CORNERS] for w in TABLES])
        dev_corner.append(cidx)
        if is_driver:
            drive_part = part
    tab_off = np.zeros(len(tabs) + 1, dtype=np.int64)
    for i, tab in enumerate(tabs):
        tab_off[i + 1] = tab_off[i] + tab.x.shape[0]
    tab_x = np.concatenate([t.x for t in tabs]) if tabs else np.zeros(1)
    tab_y = np.concatenate([t.y for t in tabs], axis=1) if tabs else np.zeros((3, 1))
    # switching coefficients of the driving device, per corner
    if drive_part is not None:
        sw = [_switching(drive_part.ibis.model, edge, c, drive_part.ibis.switching, drive_part.ibis.path)
              for c in CORNERS]
    else:
        sw = []
    nk = max([s.t.shape[0] for s in sw] + [1])
    k_t, k_u, k_d = np.zeros((3, nk)), np.zeros((3, nk)), np.zeros((3, nk))
    k_n = np.ones(3, dtype=np.int64)
    for c, s in enumerate(sw):
        m_ = s.t.shape[0]
        k_t[c, :m_], k_u[c, :m_], k_d[c, :m_] = s.t, s.ku, s.kd
        k_n[c] = m_
    # each device's whole current at rest, per corner: its tables summed on the union of their breakpoints
    # (a sum of piecewise-linear functions is piecewise linear there; beyond the ends every table is
    # extended along its end segment, so the sum is too)
    whole = np.zeros((len(specs), 3), dtype=np.int64)
    k_end = np.array([s.t[-1] for s in sw] if sw else [0.0, 0.0, 0.0])
    extra_x, extra_y = [], []
    n_tab = len(tabs)
    for di, (tap, node, part, cidx, is_driver) in enumerate(specs):
        m = part.ibis.model
        for c, corner in enumerate(CORNERS):
            ku, kd = (sw[c].ku[-1], sw[c].kd[-1]) if is_driver else (0.0, 0.0)
            vx, vy = _cached(("whole", id(m), corner, float(ku), float(kd)), m,
                             lambda m=m, corner=corner, ku=ku, kd=kd: _whole(m, corner, ku, kd))
            whole[di, c] = n_tab + len(extra_x)
            extra_x.append(vx)
            extra_y.append(np.vstack([vy, vy, vy]))
    if extra_x:
        offs = [tab_off[-1]]
        for vx in extra_x:
            offs.append(offs[-1] + vx.shape[0])
        tab_off = np.concatenate([tab_off, np.array(offs[1:], dtype=np.int64)])
        tab_x = np.concatenate([tab_x[:tab_off[n_tab]]] + extra_x)
        tab_y = np.concatenate([tab_y[:, :tab_off[n_tab]]] + extra_y, axis=1)
    # Newton groups: the devices (and a linear driver) by cluster
    cl_start = topo.cl_start
    items = list(range(len(specs))) + ([-1] if linear_driver else [])
    nodes = [dev_node[i] if i >= 0 else int(topo.drv_node) for i in items]
    cl = [int(np.searchsorted(cl_start, x, side="right") - 1) for x in nodes]
    groups = {}
    for it, c in zip(items, cl):
        groups.setdefault(c, []).append(it)
    grp_cl = np.array(list(groups), dtype=np.int64)
    grp_start = np.zeros(len(groups) + 1, dtype=np.int64)
    grp_item = []
    for g, (c, its) in enumerate(groups.items()):
        if len(its) > KMAX:
            raise DesignError(f"{len(its)} IBIS buffers joined by lumped parts alone (no line between them); at most "
                              f"{KMAX}", source=design.source, table="tap")
        grp_item += its
        grp_start[g + 1] = grp_start[g] + len(its)
    return Devices(
        dev_node=np.array(dev_node, dtype=np.int64), dev_src=np.array(src_index, dtype=np.int64),
        dev_drive=np.array(dev_drive, dtype=np.int64), dev_tab=np.array(dev_tab, dtype=np.int64).reshape(-1, 4),
        dev_rail=np.array(dev_rail, dtype=float).reshape(-1, 4, 3),
        dev_corner=np.ascontiguousarray(np.array(dev_corner, dtype=np.int64).reshape(-1, n)),
        dev_g0=np.full((len(specs), n), G_STAMP), tab_off=tab_off, tab_x=np.ascontiguousarray(tab_x),
        tab_y=np.ascontiguousarray(tab_y), k_t=k_t, k_u=k_u, k_d=k_d, k_n=k_n, lin_drv=1 if linear_driver else 0,
        grp_start=grp_start, grp_item=np.array(grp_item, dtype=np.int64), grp_cl=grp_cl,
        dev_whole=whole, k_end=k_end)


def _whole(m, corner, ku, kd):
    """(v [V], i [A]) of a model's whole current at fixed ku, kd on the union of its tables' breakpoints."""
    pts = []
    for w in TABLES:
        tab = getattr(m, w)
        if tab is None:
            continue
        rail = m.rail(w, corner)
        pts.append(rail - tab.x if w in ("pullup", "power_clamp") else rail + tab.x)
    vx = np.unique(np.concatenate(pts)) if pts else np.array([-1.0, 1.0])
    if vx.shape[0] < 2:
        vx = np.array([vx[0] - 1.0, vx[0] + 1.0])
    return vx, device_current(m, vx, corner, ku, kd)


def switching_times(design, edge) -> tuple:
    """(shortest, longest) 0-100 % switching time [s] of the design's IBIS drivers over their corners; (inf, 0) if none.

    The time between 5 % and 95 % of the coefficient's change, / 0.9 (a linear ramp's 0-100 % time).
    """
    lo, hi = np.inf, 0.0
    for name, ip in design.structure.ibis.items():
        if not ip.model.can_drive:
            continue
        corners = set(CORNERS[int(i)] for i in np.atleast_1d(corner_index(design.params[f"parts.{name}.ibis.corner"])))
        box = design.tolerances.get(f"parts.{name}.ibis.corner")
        if box is not None:
            corners |= {CORNERS[int(corner_index(box[0]))], CORNERS[int(corner_index(box[1]))]}
        for c in corners:
            s = _switching(ip.model, edge, c, ip.switching, ip.path)
            k = s.ku if edge == "rise" else s.kd
            k0, k1 = k[0], k[-1]
            if k1 == k0:
                continue
            f = (k - k0) / (k1 - k0)
            t5 = s.t[np.argmax(f >= 0.05)]
            t95 = s.t[np.argmax(f >= 0.95)]
            span = max(t95 - t5, s.t[1] - s.t[0]) / 0.9
            lo, hi = min(lo, span), max(hi, s.t[-1])
    return lo, hi
