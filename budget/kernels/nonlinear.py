"""Numba kernels: DC operating point and transient of a bus with non-linear devices (IBIS buffers).

Entered only when a design has IBIS parts; linear designs never reach this module and keep
the code path of :mod:`budget.kernels.transient` bit for bit.  The set-up kernels of that
module are reused as they are (``dc_state``, ``_start_histories``, ``_cluster_inverses``,
``_lagrange_weights``); the lines, lumped parts and history updates of each step are the same
equations (method of characteristics, Branin 1967; trapezoidal companions, Dommel 1969).

What differs is how the devices enter:

- Each device d sits on a die node with a placeholder Norton source (``src`` entry
  ``dev_src[d]``).  In the transient that source is a fixed conductance g0 (and no current),
  stamped into the cluster matrix once; the device's true current i(v, t) (see
  :mod:`budget.ibis_devices`) enters as the correction i(v) - g0 v.
- A linear driver in a design with devices is handled the same way: its conductance
  G(t) = (1 - s)/r0 + s/r1 and current I(t) enter as the correction (G(t) - 1/r0) v - I(t).
- Per step, after the linear cluster solve v_lin = A^-1 rhs, only the clusters holding a
  device iterate: with the device nodes' block Z of A^-1, x = v_lin[n] - Z r(x),
  r_j(x) = i_j(x_j) - g0_j x_j, solved by Newton's method (Jacobian I + Z diag(i' - g0)),
  each update limited to NEWTON_STEP_LIMIT volts, until every update is below NEWTON_TOL
  volts, at most NEWTON_MAX_ITER iterations (else STATUS_NL_NO_CONVERGENCE); then
  v = v_lin - A^-1[:, n] r(x) on the whole cluster.  The rest of the network is untouched.
- Fast path (exact): a device alone in its cluster and at rest (not driving, or driving after its
  switching table ends) has a current that is one piecewise-linear function of v (its tables
  summed on the union of their breakpoints: ``dev_whole``); the step's equation
  x = v_lin - z (i(x) - g0 x) is then solved exactly on one segment, walking to the neighbouring
  segment while the solution lies outside it (a monotone i(v) has one root, so the walk ends;
  at most NEWTON_MAX_ITER moves, else STATUS_NL_NO_CONVERGENCE).  The segment of each device is
  kept from step to step, so a step costs O(1) per device.
- DC: Newton on the whole network with each device replaced by its tangent Norton
  equivalent (conductance max(i', DC_G_FLOOR), through ``dc_state``'s banded solve), each update
  limited to DC_STEP_LIMIT volts, until every update is below NEWTON_TOL.

The placeholder rows of ``vals.src_r`` / ``vals.src_v`` are owned by this module: the DC
iteration writes them per variant (column b) and leaves them at (1/g0, 0) for the transient.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from ..jit import kernel
from .metrics import N_METRICS, edge_metrics, headroom, violation_bits
from .threads import block_count, over_blocks
from .transient import (LANES, STATUS_CLUSTER_SINGULAR, STATUS_DC_SINGULAR, STATUS_NOT_FINITE, STATUS_OK,
                        _cluster_inverses, _lagrange_weights, _start_histories, dc_state)

STATUS_NL_NO_CONVERGENCE = 4   # Newton on a device cluster (or the DC point) did not converge

NEWTON_TOL = 1e-9            # [V] largest update at convergence
NEWTON_MAX_ITER = 60         # per step and cluster
NEWTON_STEP_LIMIT = 0.5      # [V] largest update per iteration (transient)
DC_STEP_LIMIT = 1.0          # [V] largest update per iteration (DC)
DC_MAX_ITER = 200
DC_G_FLOOR = 1e-9            # [S] smallest tangent conductance of a device in the DC iteration
KMAX = 8                     # devices in one cluster at most (netlist checks it)


class Devices(NamedTuple):
    """Non-linear devices of a flattened bus (built by :func:`budget.netlist.flatten`)."""
    dev_node: np.ndarray     # [n_dev] die node of each device
    dev_src: np.ndarray      # [n_dev] its placeholder src entry
    dev_drive: np.ndarray    # [n_dev] 1 for the driving device (switching coefficients apply)
    dev_tab: np.ndarray      # [n_dev, 4] table id of pullup, pulldown, gnd clamp, power clamp (-1: none)
    dev_rail: np.ndarray     # [n_dev, 4, 3] reference voltage of each table per corner [V]
    dev_corner: np.ndarray   # [n_dev, N] corner column per variant (0 typ, 1 min, 2 max)
    dev_g0: np.ndarray       # [n_dev, N] conductance stamped at the die in the transient [S]
    tab_off: np.ndarray      # [n_tab + 1] offsets into tab_x
    tab_x: np.ndarray        # [total] table abscissae [V] (increasing within a table)
    tab_y: np.ndarray        # [3, total] currents per corner [A]
    k_t: np.ndarray          # [3, nk] switching coefficient times per corner [s]
    k_u: np.ndarray          # [3, nk] Ku
    k_d: np.ndarray          # [3, nk] Kd
    k_n: np.ndarray          # [3] points used per corner
    lin_drv: int             # 1: the driver is linear (vals.drv_*) and enters the Newton as a device
    grp_start: np.ndarray    # [n_grp + 1] items of each cluster that iterates
    grp_item: np.ndarray     # [n_items] device index, or -1 for the linear driver
    grp_cl: np.ndarray       # [n_grp] its cluster
    dev_whole: np.ndarray    # [n_dev, 3] table id of the device's whole current i(v) at rest, per corner
    k_end: np.ndarray        # [3] time after which the switching coefficients are constant [s]


@kernel
def _table(devs, tid, corner, x):
    """(current [A], slope [S]) of table tid at abscissa x [V]: linear, extended along the end segments."""
    o = devs.tab_off[tid]
    n = devs.tab_off[tid + 1] - o
    xs = devs.tab_x
    ys = devs.tab_y
    if x <= xs[o]:
        j = o
    elif x >= xs[o + n - 1]:
        j = o + n - 2
    else:
        lo = o
        hi = o + n - 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if xs[mid] <= x:
                lo = mid
            else:
                hi = mid
        j = lo
    slope = (ys[corner, j + 1] - ys[corner, j]) / (xs[j + 1] - xs[j])
    return ys[corner, j] + slope * (x - xs[j]), slope


@kernel
def coefficients(devs, corner, t):
    """(Ku, Kd) [-] at time t [s] (held at the first / last value outside the table)."""
    n = devs.k_n[corner]
    ts = devs.k_t[corner]
    if t <= ts[0]:
        return devs.k_u[corner, 0], devs.k_d[corner, 0]
    if t >= ts[n - 1]:
        return devs.k_u[corner, n - 1], devs.k_d[corner, n - 1]
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ts[mid] <= t:
            lo = mid
        else:
            hi = mid
    f = (t - ts[lo]) / (ts[lo + 1] - ts[lo])
    return (devs.k_u[corner, lo] + f * (devs.k_u[corner, lo + 1] - devs.k_u[corner, lo]),
            devs.k_d[corner, lo] + f * (devs.k_d[corner, lo + 1] - devs.k_d[corner, lo]))


@kernel
def device_current(devs, d, b, v, ku, kd):
    """(i [A] into device d's buffer, di/dv [S]) at die voltage v [V], coefficients ku, kd, variant b.

    i = ku Ipu(Vpu - v) + kd Ipd(v - Vpd) + Igc(v - Vgc) + Ipc(Vpc - v) (IBIS, currents into the buffer).
    """
    c = devs.dev_corner[d, b]
    i = 0.0
    g = 0.0
    tid = devs.dev_tab[d, 0]
    if tid >= 0 and ku != 0.0:
        y, s = _table(devs, tid, c, devs.dev_rail[d, 0, c] - v)
        i += ku * y
        g -= ku * s
    tid = devs.dev_tab[d, 1]
    if tid >= 0 and kd != 0.0:
        y, s = _table(devs, tid, c, v - devs.dev_rail[d, 1, c])
        i += kd * y
        g += kd * s
    tid = devs.dev_tab[d, 2]
    if tid >= 0:
        y, s = _table(devs, tid, c, v - devs.dev_rail[d, 2, c])
        i += y
        g += s
    tid = devs.dev_tab[d, 3]
    if tid >= 0:
        y, s = _table(devs, tid, c, devs.dev_rail[d, 3, c] - v)
        i += y
        g -= s
    return i, g


@kernel
def _state_coefficients(devs, d, b, final):
    """(Ku, Kd) of device d in the starting (final=False) or final state of the edge."""
    if devs.dev_drive[d] == 0:
        return 0.0, 0.0
    c = devs.dev_corner[d, b]
    if final:
        n = devs.k_n[c]
        return devs.k_u[c, n - 1], devs.k_d[c, n - 1]
    return devs.k_u[c, 0], devs.k_d[c, 0]


@kernel
def dc_state_nl(b, final, v_state, r_state, topo, vals, devs, v_out, line_i, ind_i, band, rhs, acc, x):
    """DC operating point of variant b with the devices in the edge's starting or final state.

    Newton on the whole network: each device as its tangent Norton equivalent in its placeholder
    src entry, solved by :func:`budget.kernels.transient.dc_state`.  x [n_dev] is scratch.
    Fills v_out, line_i, ind_i as dc_state does; returns a STATUS_* code.
    """
    nd = devs.dev_node.shape[0]
    for d in range(nd):   # first pass: devices as their stamp conductance, no current
        vals.src_r[devs.dev_src[d], b] = 1.0 / devs.dev_g0[d, b]
        vals.src_v[devs.dev_src[d], b] = 0.0
    st = dc_state(b, v_state, r_state, topo, vals, v_out, line_i, ind_i, band, rhs, acc)
    if st != STATUS_OK:
        return st
    for d in range(nd):
        x[d] = v_out[devs.dev_node[d]]
    for it in range(DC_MAX_ITER):
        for d in range(nd):
            ku, kd = _state_coefficients(devs, d, b, final)
            i, g = device_current(devs, d, b, x[d], ku, kd)
            if g < DC_G_FLOOR:
                g = DC_G_FLOOR
            vals.src_r[devs.dev_src[d], b] = 1.0 / g
            vals.src_v[devs.dev_src[d], b] = x[d] - i / g
        st = dc_state(b, v_state, r_state, topo, vals, v_out, line_i, ind_i, band, rhs, acc)
        if st != STATUS_OK:
            return st
        worst = 0.0
        for d in range(nd):
            dx = v_out[devs.dev_node[d]] - x[d]
            if not math.isfinite(dx):
                return STATUS_NOT_FINITE
            worst = max(worst, abs(dx))
            if dx > DC_STEP_LIMIT:
                dx = DC_STEP_LIMIT
            elif dx < -DC_STEP_LIMIT:
                dx = -DC_STEP_LIMIT
            x[d] += dx
        if worst < NEWTON_TOL:
            return STATUS_OK
    return STATUS_NL_NO_CONVERGENCE


@kernel
def _item_current(devs, vals, item, b, t, v):
    """(r, dr/dv) of one Newton item: r = i(v) - g0 v for a device, (G(t) - 1/r0) v - I(t) for the linear driver."""
    if item < 0:
        s = t / vals.t_ramp[b]
        if s > 1.0:
            s = 1.0
        g = (1.0 - s) / vals.drv_r0[b] + s / vals.drv_r1[b]
        cur = (1.0 - s) * vals.drv_v0[b] / vals.drv_r0[b] + s * vals.drv_v1[b] / vals.drv_r1[b]
        g0 = 1.0 / vals.drv_r0[b]
        return (g - g0) * v - cur, g - g0
    ku = 0.0
    kd = 0.0
    if devs.dev_drive[item] != 0:
        ku, kd = coefficients(devs, devs.dev_corner[item, b], t)
    i, g = device_current(devs, item, b, v, ku, kd)
    g0 = devs.dev_g0[item, b]
    return i - g0 * v, g - g0


@kernel
def _item_node(topo, devs, item):
    return topo.drv_node if item < 0 else devs.dev_node[item]


@kernel
def _solve_small(J, F, k, dx):
    """Solve the k x k system J dx = F (Gaussian elimination, partial pivoting); False if singular."""
    for c in range(k):
        p = c
        for r in range(c + 1, k):
            if abs(J[r, c]) > abs(J[p, c]):
                p = r
        if not abs(J[p, c]) > 0.0:
            return False
        if p != c:
            for j in range(k):
                tmp = J[c, j]
                J[c, j] = J[p, j]
                J[p, j] = tmp
            tmp = F[c]
            F[c] = F[p]
            F[p] = tmp
        for r in range(c + 1, k):
            f = J[r, c] / J[c, c]
            if f != 0.0:
                for j in range(c, k):
                    J[r, j] -= f * J[c, j]
                F[r] -= f * F[c]
    for c in range(k - 1, -1, -1):
        s = F[c]
        for j in range(c + 1, k):
            s -= J[c, j] * dx[j]
        dx[c] = s / J[c, c]
    return True


@kernel
def _segment(devs, tid, x):
    """Index (from 0) of the segment of table tid that holds x (the end segments beyond the ends)."""
    o = devs.tab_off[tid]
    n = devs.tab_off[tid + 1] - o
    xs = devs.tab_x
    if x <= xs[o]:
        return 0
    if x >= xs[o + n - 1]:
        return n - 2
    lo = o
    hi = o + n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if xs[mid] <= x:
            lo = mid
        else:
            hi = mid
    return lo - o


@kernel
def _walk(devs, tid, corner, z, g0, vlin, seg):
    """Exact root of x - vlin + z (i(x) - g0 x) = 0 for a piecewise-linear i (table tid); returns (x, r, segment).

    Starts at segment ``seg`` and walks to the neighbour while the segment's solution lies outside it;
    r = i(x) - g0 x.  A monotone i needs at most n moves; the segment is -1 when the walk did not settle
    within n + 2 moves (a table with a falling part can make it oscillate).
    """
    o = devs.tab_off[tid]
    n = devs.tab_off[tid + 1] - o
    xs = devs.tab_x
    ys = devs.tab_y
    j = seg
    if j < 0:
        j = 0
    if j > n - 2:
        j = n - 2
    xv = vlin
    a = 0.0
    sl = 0.0
    for it in range(n + 2):
        sl = (ys[corner, o + j + 1] - ys[corner, o + j]) / (xs[o + j + 1] - xs[o + j])
        a = ys[corner, o + j] - sl * xs[o + j]
        xv = (vlin - z * a) / (1.0 + z * (sl - g0))
        if j > 0 and xv < xs[o + j]:
            j -= 1
        elif j < n - 2 and xv > xs[o + j + 1]:
            j += 1
        else:
            return xv, a + (sl - g0) * xv, j
    return xv, a + (sl - g0) * xv, -1


@kernel
def _newton_clusters(b0, B, t, topo, vals, devs, inv, v, xprev, seg, status, Z, J, F, dx, x, r, dr, vlin):
    """The device clusters' Newton solve of one step for every lane (see the module docstring)."""
    cl_start, cl_moff = topo.cl_start, topo.cl_moff
    for gi in range(devs.grp_cl.shape[0]):
        c = devs.grp_cl[gi]
        s0 = cl_start[c]
        m = cl_start[c + 1] - s0
        o = cl_moff[c]
        i0 = devs.grp_start[gi]
        k = devs.grp_start[gi + 1] - i0
        if k == 1 and devs.grp_item[i0] >= 0:
            d = devs.grp_item[i0]
            l0 = devs.dev_node[d] - s0
            for bb in range(B):
                b = b0 + bb
                cn = devs.dev_corner[d, b]
                if devs.dev_drive[d] != 0 and t < devs.k_end[cn]:
                    continue            # switching: the general Newton below
                xv, rv, j = _walk(devs, devs.dev_whole[d, cn], cn, inv[o + l0 * m + l0, bb], devs.dev_g0[d, b],
                                  v[s0 + l0, bb], seg[i0, bb])
                if j < 0:
                    if status[b] == STATUS_OK:
                        status[b] = STATUS_NL_NO_CONVERGENCE
                    j = 0
                seg[i0, bb] = j
                xprev[i0, bb] = xv
                for i in range(m):
                    v[s0 + i, bb] -= inv[o + i * m + l0, bb] * rv
            if devs.dev_drive[d] == 0:
                continue
        for bb in range(B):
            b = b0 + bb
            if k == 1 and devs.grp_item[i0] >= 0:
                d = devs.grp_item[i0]
                if devs.dev_drive[d] == 0 or t >= devs.k_end[devs.dev_corner[d, b]]:
                    continue            # solved by the walk above
            for j in range(k):
                lj = _item_node(topo, devs, devs.grp_item[i0 + j]) - s0
                vlin[j] = v[s0 + lj, bb]
                for l in range(k):
                    ll = _item_node(topo, devs, devs.grp_item[i0 + l]) - s0
                    Z[j, l] = inv[o + lj * m + ll, bb]
                x[j] = xprev[i0 + j, bb]
            done = False
            for it in range(NEWTON_MAX_ITER):
                for j in range(k):
                    r[j], dr[j] = _item_current(devs, vals, devs.grp_item[i0 + j], b, t, x[j])
                for j in range(k):
                    s = x[j] - vlin[j]
                    for l in range(k):
                        s += Z[j, l] * r[l]
                        J[j, l] = Z[j, l] * dr[l]
                    J[j, j] += 1.0
                    F[j] = s
                if not _solve_small(J, F, k, dx):
                    break
                worst = 0.0
                for j in range(k):
                    d = dx[j]
                    if not math.isfinite(d):
                        worst = math.inf
                        break
                    worst = max(worst, abs(d))
                    if d > NEWTON_STEP_LIMIT:
                        d = NEWTON_STEP_LIMIT
                    elif d < -NEWTON_STEP_LIMIT:
                        d = -NEWTON_STEP_LIMIT
                    x[j] -= d
                if not math.isfinite(worst):
                    break
                if worst < NEWTON_TOL:
                    done = True
                    break
            if not done:
                if status[b] == STATUS_OK:
                    status[b] = STATUS_NL_NO_CONVERGENCE
            for j in range(k):
                r[j], dr[j] = _item_current(devs, vals, devs.grp_item[i0 + j], b, t, x[j])
                xprev[i0 + j, bb] = x[j]
            for i in range(m):
                s = 0.0
                for l in range(k):
                    ll = _item_node(topo, devs, devs.grp_item[i0 + l]) - s0
                    s += inv[o + i * m + ll, bb] * r[l]
                v[s0 + i, bb] -= s


@kernel
def run_block_nl(b0, nb, lanes, topo, vals, devs, wave_out, dc_out, status):
    """Simulate variants b0 .. b0+B-1 of a flattened bus with devices (arguments as transient.run_block, plus devs).

    Writes pin waveforms wave_out[step, out, b - b0] [V] when wave_out has n_steps rows, the DC node
    voltages of the start and end states into dc_out[0 or 1, node, b] [V] and a STATUS_* per variant.
    """
    B = len(lanes) if len(lanes) > 0 else nb
    n_nodes = topo.n_nodes
    cl_start = topo.cl_start
    out_node = topo.out_node
    ring_len = topo.ring_len
    nl = topo.line_a.shape[0]
    nc = topo.cap_a.shape[0]
    ni = topo.ind_a.shape[0]
    n_cl = cl_start.shape[0] - 1
    nd = devs.dev_node.shape[0]
    dt = vals.dt
    n_steps = vals.n_steps
    record = wave_out.shape[0] == n_steps

    vdc = np.empty(n_nodes)
    li = np.empty(nl)
    ii = np.empty(ni)
    band = np.empty(max(1, topo.n_dc * (topo.dc_bw + 1)))
    rhs_dc = np.empty(max(1, topo.n_dc))
    acc = np.empty(n_nodes)
    xd = np.empty(max(1, nd))
    mmax = 1
    for c in range(n_cl):
        mmax = max(mmax, cl_start[c + 1] - cl_start[c])
    amat = np.empty(mmax * mmax)
    ainv = np.empty(mmax * mmax)

    ring_off = np.zeros(nl + 1, dtype=np.int64)
    for k in range(nl):
        ring_off[k + 1] = ring_off[k] + 2 * ring_len[k]
    ring = np.empty((ring_off[nl], B))
    q = np.empty((nl, B), dtype=np.int64)
    fr = np.empty((nl, B))
    qmin = np.empty(nl, dtype=np.int64)
    ntap = np.empty(nl, dtype=np.int64)
    tap_off = np.zeros(nl + 1, dtype=np.int64)
    pos = np.zeros(nl, dtype=np.int64)
    gz = np.empty((nl, B))
    inv = np.empty((topo.cl_moff[n_cl], B))
    g_cap = np.empty((nc, B))
    j_cap = np.empty((nc, B))
    g_ind = np.empty((ni, B))
    j_ind = np.empty((ni, B))
    rhs0 = np.zeros((n_nodes, B))
    rhs = np.empty((n_nodes, B))
    v = np.empty((n_nodes, B))
    ha = np.empty((nl, B))
    hb = np.empty((nl, B))
    n_items = devs.grp_item.shape[0]
    xprev = np.empty((max(1, n_items), B))
    seg = np.zeros((max(1, n_items), B), dtype=np.int64)
    Z = np.empty((KMAX, KMAX))
    J = np.empty((KMAX, KMAX))
    F = np.empty(KMAX)
    dx = np.empty(KMAX)
    x = np.empty(KMAX)
    r = np.empty(KMAX)
    dr = np.empty(KMAX)
    vlin = np.empty(KMAX)

    for bb in range(B):
        b = b0 + bb
        # linear driver state (an IBIS driver has r = inf: no linear source at all)
        if devs.lin_drv != 0:
            va, ra, vb, rb = vals.drv_v1[b], vals.drv_r1[b], vals.drv_v0[b], vals.drv_r0[b]
        else:
            va, ra, vb, rb = 0.0, math.inf, 0.0, math.inf
        # the end state, then the start state; the flag a run-time bool, not a literal True / False
        # (a literal would compile dc_state_nl, and what it calls, once for each value)
        final = b >= 0
        st = dc_state_nl(b, final, va, ra, topo, vals, devs, vdc, li, ii, band, rhs_dc, acc, xd)
        for n in range(n_nodes):
            dc_out[1, n, b] = vdc[n]
        st2 = dc_state_nl(b, not final, vb, rb, topo, vals, devs, vdc, li, ii, band, rhs_dc, acc, xd)
        for n in range(n_nodes):
            v[n, bb] = vdc[n]
            dc_out[0, n, b] = vdc[n]
        status[b] = STATUS_OK
        if st == STATUS_NL_NO_CONVERGENCE or st2 == STATUS_NL_NO_CONVERGENCE:
            status[b] = STATUS_NL_NO_CONVERGENCE
        elif st != STATUS_OK or st2 != STATUS_OK:
            status[b] = STATUS_DC_SINGULAR
        # the transient: placeholders back to the stamp conductance g0, no current
        for d in range(nd):
            vals.src_r[devs.dev_src[d], b] = 1.0 / devs.dev_g0[d, b]
            vals.src_v[devs.dev_src[d], b] = 0.0
        _start_histories(b, bb, topo, vals, vdc, li, ii, ring_off, ring, gz, q, fr, g_cap, j_cap, g_ind, j_ind,
                         rhs0)
        if not _cluster_inverses(b, bb, topo, vals, gz, g_cap, g_ind, amat, ainv, inv):
            status[b] = STATUS_CLUSTER_SINGULAR
        for j in range(n_items):
            xprev[j, bb] = vdc[_item_node(topo, devs, devs.grp_item[j])]
            d = devs.grp_item[j]
            if d >= 0:
                seg[j, bb] = _segment(devs, devs.dev_whole[d, devs.dev_corner[d, b]], xprev[j, bb])

    wts = _lagrange_weights(q, fr, B, qmin, ntap, tap_off)
    if record:
        for o in range(out_node.shape[0]):
            for bb in range(B):
                wave_out[0, o, bb] = v[out_node[o], bb]

    line_a, line_b, cap_a, cap_b, ind_a, ind_b = topo.line_a, topo.line_b, topo.cap_a, topo.cap_b, topo.ind_a, topo.ind_b
    cl_moff = topo.cl_moff
    for step in range(1, n_steps):
        t = step * dt
        # 1. delayed line histories (Branin 1967), 4-point Lagrange interpolation
        for k in range(nl):
            o = ring_off[k]
            rl = ring_len[k]
            pos[k] += 1
            if pos[k] == rl:
                pos[k] = 0
            s0 = pos[k] - qmin[k]
            if s0 < 0:
                s0 += rl
            for bb in range(B):
                hb[k, bb] = 0.0
                ha[k, bb] = 0.0
            for j in range(ntap[k]):
                sj = s0 - j
                if sj < 0:
                    sj += rl
                to = tap_off[k] + j
                for bb in range(B):
                    hb[k, bb] += wts[to, bb] * ring[o + sj, bb]
                    ha[k, bb] += wts[to, bb] * ring[o + rl + sj, bb]
        # 2. injections: sources + line histories + J_C - J_L (devices enter in the Newton step)
        for n in range(n_nodes):
            for bb in range(B):
                rhs[n, bb] = rhs0[n, bb]
        for k in range(nl):
            a = line_a[k]
            c = line_b[k]
            for bb in range(B):
                rhs[a, bb] += ha[k, bb]
                rhs[c, bb] += hb[k, bb]
        for k in range(nc):
            a = cap_a[k]
            c = cap_b[k]
            for bb in range(B):
                rhs[a, bb] += j_cap[k, bb]
            if c >= 0:
                for bb in range(B):
                    rhs[c, bb] -= j_cap[k, bb]
        for k in range(ni):
            a = ind_a[k]
            c = ind_b[k]
            for bb in range(B):
                rhs[a, bb] -= j_ind[k, bb]
                rhs[c, bb] += j_ind[k, bb]
        # 3. linear cluster solves v = A_c^-1 rhs
        for c in range(n_cl):
            s0 = cl_start[c]
            m = cl_start[c + 1] - s0
            o = cl_moff[c]
            for i in range(m):
                for bb in range(B):
                    v[s0 + i, bb] = 0.0
                for j in range(m):
                    for bb in range(B):
                        v[s0 + i, bb] += inv[o + i * m + j, bb] * rhs[s0 + j, bb]
        # 4. Newton on the clusters that hold a device (or the linear driver)
        _newton_clusters(b0, B, t, topo, vals, devs, inv, v, xprev, seg, status, Z, J, F, dx, x, r, dr, vlin)
        # 5. waves leaving both ends of every line: w = 2 v / Z0 - h (Branin 1967)
        for k in range(nl):
            o = ring_off[k]
            rl = ring_len[k]
            sl = pos[k]
            a = line_a[k]
            c = line_b[k]
            for bb in range(B):
                ring[o + sl, bb] = 2.0 * v[a, bb] * gz[k, bb] - ha[k, bb]
                ring[o + rl + sl, bb] = 2.0 * v[c, bb] * gz[k, bb] - hb[k, bb]
        # 6. trapezoidal companions (Dommel 1969)
        for k in range(nc):
            a = cap_a[k]
            c = cap_b[k]
            for bb in range(B):
                u = v[a, bb] - (v[c, bb] if c >= 0 else 0.0)
                j_cap[k, bb] = 2.0 * g_cap[k, bb] * u - j_cap[k, bb]
        for k in range(ni):
            a = ind_a[k]
            c = ind_b[k]
            for bb in range(B):
                u = v[a, bb] - v[c, bb]
                j_ind[k, bb] = j_ind[k, bb] + 2.0 * g_ind[k, bb] * u
        if record:
            for o in range(out_node.shape[0]):
                n = out_node[o]
                for bb in range(B):
                    wave_out[step, o, bb] = v[n, bb]

    for bb in range(B):
        b = b0 + bb
        for o in range(out_node.shape[0]):
            if not math.isfinite(v[out_node[o], bb]):
                status[b] = STATUS_NOT_FINITE
    return 0


@kernel
def evaluate_blocks_nl(blk0, blk1, topo, vals, devs, rising,
                       rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                       settle_frac, min_margin, t_ref,
                       metrics_out, bits_out, head_out, levels_out, status, dc):
    """Blocks blk0 .. blk1-1 of LANES variants of :func:`evaluate_chunk_nl` (one thread's share)."""
    n = t_ref.shape[0]
    out_node = topo.out_node
    n_steps = vals.n_steps
    dt = vals.dt
    n_out = out_node.shape[0]
    n_rcv = rcv_out.shape[0]
    t = np.arange(n_steps) * dt
    for blk in range(blk0, blk1):
        b0 = blk * LANES
        bsz = min(LANES, n - b0)
        waves = np.empty((n_steps, n_out, bsz))
        run_block_nl(b0, bsz, (), topo, vals, devs, waves, dc, status)
        m = np.empty(N_METRICS)
        wv = np.empty((bsz, n_steps))
        for r in range(n_rcv):
            o = rcv_out[r]
            node = out_node[o]
            for k in range(n_steps):
                for bb in range(bsz):
                    wv[bb, k] = waves[k, o, bb]
            for bb in range(bsz):
                b = b0 + bb
                if rising:
                    v_lo = dc[0, node, b]
                    v_hi = dc[1, node, b]
                else:
                    v_lo = dc[1, node, b]
                    v_hi = dc[0, node, b]
                swing = v_hi - v_lo
                edge_metrics(t, wv[bb], rising, v_lo, v_hi, rcv_vil[r, b], rcv_vih[r, b], t_ref[b],
                             settle_frac * abs(swing), alloc_v[r, b] + alloc_frac[r, b] * abs(swing), m)
                for k in range(N_METRICS):
                    metrics_out[b, r, k] = m[k]
                bits_out[b, r] = violation_bits(m, rcv_vmax[r, b], rcv_vmin[r, b], min_margin)
                head_out[b, r] = headroom(m, rcv_vmax[r, b], rcv_vmin[r, b], min_margin)
                levels_out[b, r, 0] = v_lo
                levels_out[b, r, 1] = v_hi
    return 0


def evaluate_chunk_nl(topo, vals, devs, rising,
                      rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                      settle_frac, min_margin, t_ref,
                      metrics_out, bits_out, head_out, levels_out, status):
    """:func:`budget.kernels.evaluate.evaluate_chunk` for a bus with devices (same arguments, plus devs;
    no guard: the whole window).  Blocks run on host threads (:mod:`budget.kernels.threads`)."""
    n = t_ref.shape[0]
    dc = np.empty((2, topo.n_nodes, n))
    args = (topo, vals, devs, bool(rising), rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
            float(settle_frac), float(min_margin), t_ref, metrics_out, bits_out, head_out, levels_out, status, dc)
    return over_blocks(block_count(n, LANES), lambda a, b: evaluate_blocks_nl(a, b, *args))


@kernel
def ref_times_nl(devs, d, c_die, r_ref, v_ref, c_ref, v_meas, rising, dt, n_steps, out):
    """Driver timing reference [s] per variant: device d alone into its reference load.

    The die (C = c_die + c_ref [F]) with r_ref [ohm] to v_ref [V], trapezoidal rule with step dt [s],
    Newton on the one node; out[b] = first crossing of v_meas [V] (linear between samples), NaN if none.
    """
    n = out.shape[0]
    for b in range(n):
        cap = c_die[b] + c_ref[b]
        gc = 2.0 * cap / dt
        g_r = 1.0 / r_ref[b]
        # DC start
        xv = v_ref[b]
        c0 = devs.dev_corner[d, b]
        ku0 = devs.k_u[c0, 0]
        kd0 = devs.k_d[c0, 0]
        for it in range(DC_MAX_ITER):
            i, g = device_current(devs, d, b, xv, ku0, kd0)
            f = i + (xv - v_ref[b]) * g_r
            step = f / (g + g_r)
            if step > DC_STEP_LIMIT:
                step = DC_STEP_LIMIT
            elif step < -DC_STEP_LIMIT:
                step = -DC_STEP_LIMIT
            xv -= step
            if abs(step) < NEWTON_TOL:
                break
        i_prev, _ = device_current(devs, d, b, xv, ku0, kd0)
        j_c = gc * xv       # trapezoidal capacitor history (no current at DC)
        out[b] = math.nan
        above = xv >= v_meas[b]
        for k in range(1, n_steps):
            t = k * dt
            ku, kd = coefficients(devs, c0, t)
            # KCL: i(x) + (x - v_ref) g_r + gc x - j_c = 0
            xn = xv
            for it in range(NEWTON_MAX_ITER):
                i, g = device_current(devs, d, b, xn, ku, kd)
                f = i + (xn - v_ref[b]) * g_r + gc * xn - j_c
                step = f / (g + g_r + gc)
                if step > NEWTON_STEP_LIMIT:
                    step = NEWTON_STEP_LIMIT
                elif step < -NEWTON_STEP_LIMIT:
                    step = -NEWTON_STEP_LIMIT
                xn -= step
                if abs(step) < NEWTON_TOL:
                    break
            j_c = 2.0 * gc * xn - j_c
            now = xn >= v_meas[b]
            if (rising and now and not above) or ((not rising) and above and not now):
                out[b] = (k - 1) * dt + dt * (v_meas[b] - xv) / (xn - xv)
                break
            above = now
            xv = xn
