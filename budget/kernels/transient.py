"""Numba kernels: DC operating point and transient of a flattened bus.

Private kernels on flat arrays (see :mod:`budget.netlist` for the layout).
They never raise on bad physics: they return integer status codes
(``STATUS_*``) and the wrappers in :mod:`budget.simulate` explain them.

Method
------
- Lines: method of characteristics (F. H. Branin, "Transient analysis of
  lossless transmission lines", Proc. IEEE 55(11), 1967, pp. 2012-2013).  At
  end k of a line with partner end m, i_k(t) = v_k(t)/Z0 - h_k(t) with
  h_k(t) = v_m(t-TD)/Z0 + i_m(t-TD) = w_m(t-TD), w = 2 v/Z0 - h.  TD is not a
  multiple of the step: w is interpolated between stored samples (4-point
  Lagrange stencil, see _lagrange_weights).
- L and C: trapezoidal companions (H. W. Dommel, "Digital computer solution
  of electromagnetic transients in single- and multiphase networks", IEEE
  Trans. PAS-88(4), 1969): C -> conductance 2C/dt with history J = Gc v + i;
  L -> conductance dt/2L with history J = i + Gl u.
- Within one step the lines couple nodes only through delayed history, so the
  nodal system splits into small clusters joined by lumped series elements;
  each cluster matrix is inverted once, and a step costs O(nodes).  The
  driver's time-varying conductance is a rank-1 change to its own cluster,
  applied with the Sherman-Morrison formula.
- DC: lines and inductors are shorts, capacitors open.  Shorted nodes are
  merged; the remaining conductance matrix is banded (RCM ordering) and solved
  by a banded Cholesky factorisation; the currents in the shorts (needed for
  the lines' and inductors' initial history) follow from Kirchhoff's current
  law along a spanning forest of the shorts, leaves first.

Arrays holding per-variant values are ``[item, B]`` with the variant axis
innermost, so each step's arithmetic runs over B variants in simple loops.
"""
from __future__ import annotations

import math

import numpy as np

from ..jit import kernel
from .stream import P_MIRC, P_MIRROR, settled_final, stream_step


STATUS_OK = 0
STATUS_DC_SINGULAR = 1        # a part of the network has no DC path to ground
STATUS_CLUSTER_SINGULAR = 2   # a lumped cluster matrix could not be inverted
STATUS_NOT_FINITE = 3         # the transient produced inf/nan

# Variants per block in sweeps.  The per-variant loops have a run-time trip count
# (the block size) so LLVM's loop vectoriser handles them, with run-time alias
# checks; 32 lanes amortise those checks.  64 lanes were 7 % faster on the 8-drop
# benchmark bus but 12 % slower per drop on the 64-drop one (a block's state and
# waveforms no longer fit the caches), so 32.  A single simulation runs one lane.
LANES = 32

# Steps between two checks whether a sweep block may end early (every lane's
# every metric final): the check costs about one metric update.
EARLY_CHECK_STEPS = 32


@kernel
def dc_state(b, v_state, r_state, topo, vals, v_out, line_i, ind_i, band, rhs, acc):
    """DC operating point of variant ``b`` with the driver at (v_state [V], r_state [ohm]).

    topo, vals: :class:`~budget.kernels.inputs.Topology`, :class:`~budget.kernels.inputs.Values`.
    Lines and inductors are shorts, capacitors open: a banded Cholesky solve of the
    conductance matrix on the merged nodes (RCM order), then the currents in the
    shorts by Kirchhoff's current law along their spanning forest, leaves first.
    Fills v_out[node] [V], line_i[k] (current into line k at its end a) [A]
    and ind_i[k] (current a -> b) [A]; band, rhs, acc are scratch.  Returns a STATUS_* code.
    """
    n_nodes, res_a, res_b, src_node, drv_node = topo.n_nodes, topo.res_a, topo.res_b, topo.src_node, topo.drv_node
    dc_map, n_dc, bw, line_a, ind_a = topo.dc_map, topo.n_dc, topo.dc_bw, topo.line_a, topo.ind_a
    tree_kind, tree_elem, tree_child, tree_parent = topo.tree_kind, topo.tree_elem, topo.tree_child, topo.tree_parent
    res_r, src_r, src_v = vals.res_r, vals.src_r, vals.src_v
    w = bw + 1
    for i in range(n_dc * w):
        band[i] = 0.0
    for i in range(n_dc):
        rhs[i] = 0.0
    # conductance stamps on merged nodes (lower band stored: band[i*w + (i-j)] = A[i, j])
    for k in range(res_a.shape[0]):
        g = 1.0 / res_r[k, b]
        i = dc_map[res_a[k]]
        band[i * w] += g
        if res_b[k] >= 0:
            j = dc_map[res_b[k]]
            if i == j:
                band[i * w] -= g
                continue
            band[j * w] += g
            if i > j:
                band[i * w + (i - j)] -= g
            else:
                band[j * w + (j - i)] -= g
    for k in range(src_node.shape[0]):
        i = dc_map[src_node[k]]
        band[i * w] += 1.0 / src_r[k, b]
        rhs[i] += src_v[k, b] / src_r[k, b]
    i = dc_map[drv_node]
    band[i * w] += 1.0 / r_state
    rhs[i] += v_state / r_state
    # banded Cholesky, in place
    for j in range(n_dc):
        for i in range(j, min(n_dc, j + w)):
            s = band[i * w + (i - j)]
            for k in range(max(0, i - bw), j):
                s -= band[i * w + (i - k)] * band[j * w + (j - k)]
            if i == j:
                if not s > 0.0:
                    return STATUS_DC_SINGULAR
                band[j * w] = math.sqrt(s)
            else:
                band[i * w + (i - j)] = s / band[j * w]
    for i in range(n_dc):
        s = rhs[i]
        for k in range(max(0, i - bw), i):
            s -= band[i * w + (i - k)] * rhs[k]
        rhs[i] = s / band[i * w]
    for i in range(n_dc - 1, -1, -1):
        s = rhs[i]
        for k in range(i + 1, min(n_dc, i + w)):
            s -= band[k * w + (k - i)] * rhs[k]
        rhs[i] = s / band[i * w]
    for n in range(n_nodes):
        v_out[n] = rhs[dc_map[n]]
    # currents leaving each node through resistive elements
    for n in range(n_nodes):
        acc[n] = 0.0
    for k in range(res_a.shape[0]):
        a = res_a[k]
        vb = 0.0 if res_b[k] < 0 else v_out[res_b[k]]
        i_r = (v_out[a] - vb) / res_r[k, b]
        acc[a] += i_r
        if res_b[k] >= 0:
            acc[res_b[k]] -= i_r
    for k in range(src_node.shape[0]):
        n = src_node[k]
        acc[n] += (v_out[n] - src_v[k, b]) / src_r[k, b]
    acc[drv_node] += (v_out[drv_node] - v_state) / r_state
    # currents in the shorts, leaves first
    for k in range(line_i.shape[0]):
        line_i[k] = 0.0
    for k in range(ind_i.shape[0]):
        ind_i[k] = 0.0
    for e in range(tree_kind.shape[0]):
        u = tree_child[e]
        p = tree_parent[e]
        cur = acc[u]  # flows from p into u through the short
        acc[p] += cur
        k = tree_elem[e]
        if tree_kind[e] == 0:
            line_i[k] = cur if line_a[k] == p else -cur
        else:
            ind_i[k] = cur if ind_a[k] == p else -cur
    return STATUS_OK


@kernel
def _stamp(amat, m, ia, ib, g):
    """Add conductance g [S] between local nodes ia and ib (ib < 0: ground) to the m x m matrix."""
    amat[ia * (m + 1)] += g
    if ib >= 0:
        amat[ib * (m + 1)] += g
        amat[ia * m + ib] -= g
        amat[ib * m + ia] -= g


@kernel
def _invert(a, m, out):
    """Invert the m x m matrix a (row-major, destroyed) into out; False if singular."""
    for i in range(m):
        for j in range(m):
            out[i * m + j] = 1.0 if i == j else 0.0
    for c in range(m):
        p = c
        best = abs(a[c * m + c])
        for r in range(c + 1, m):
            if abs(a[r * m + c]) > best:
                best = abs(a[r * m + c])
                p = r
        if not best > 0.0:
            return False
        if p != c:
            for j in range(m):
                t = a[c * m + j]
                a[c * m + j] = a[p * m + j]
                a[p * m + j] = t
                t = out[c * m + j]
                out[c * m + j] = out[p * m + j]
                out[p * m + j] = t
        d = a[c * m + c]
        for j in range(m):
            a[c * m + j] /= d
            out[c * m + j] /= d
        for r in range(m):
            if r != c:
                f = a[r * m + c]
                if f != 0.0:
                    for j in range(m):
                        a[r * m + j] -= f * a[c * m + j]
                        out[r * m + j] -= f * out[c * m + j]
    return True


# ---- block set-up (once per variant) -------------------------------------------------

@kernel
def _start_histories(b, bb, topo, vals, vdc, li, ii, ring_off, ring, gz, q, fr, g_cap, j_cap, g_ind, j_ind,
                     rhs0):
    """Companion conductances and initial histories of variant b (block lane bb) from its DC state.

    vdc [V], li, ii [A]: DC node voltages, line and inductor currents of the
    starting state (:func:`dc_state`).
    - Line k (Branin 1967): end conductance 1/Z0; the delay TD/dt = q + f
      (q >= 1 whole steps, fraction f); both ends' history rings filled with
      w = v/Z0 + i (DC: the wave leaving each end, i into the line at that end).
    - Capacitor (Dommel 1969, trapezoidal): G = 2C/dt, history J = G u (no current at DC).
    - Inductor (Dommel 1969, trapezoidal): G = dt/(2L), history J = i (the DC current).
    - Norton sources: their fixed current v/r into rhs0.
    """
    dt = vals.dt
    for k in range(topo.line_a.shape[0]):
        z = vals.line_z0[k, b]
        gz[k, bb] = 1.0 / z
        x = vals.line_td[k, b] / dt
        qi = int(math.floor(x + 1e-9))
        if qi < 1:
            qi = 1
        q[k, bb] = qi
        fr[k, bb] = max(0.0, x - qi)
        wa = vdc[topo.line_a[k]] / z + li[k]
        wb = vdc[topo.line_b[k]] / z - li[k]
        o = ring_off[k]
        rl = topo.ring_len[k]
        for s in range(rl):
            ring[o + s, bb] = wa
            ring[o + rl + s, bb] = wb
    for k in range(topo.cap_a.shape[0]):
        g_cap[k, bb] = 2.0 * vals.cap_c[k, b] / dt
        u = vdc[topo.cap_a[k]] - (vdc[topo.cap_b[k]] if topo.cap_b[k] >= 0 else 0.0)
        j_cap[k, bb] = g_cap[k, bb] * u
    for k in range(topo.ind_a.shape[0]):
        g_ind[k, bb] = dt / (2.0 * vals.ind_l[k, b])
        j_ind[k, bb] = ii[k]
    for k in range(topo.src_node.shape[0]):
        rhs0[topo.src_node[k], bb] += vals.src_v[k, b] / vals.src_r[k, b]


@kernel
def _cluster_inverses(b, bb, topo, vals, gz, g_cap, g_ind, amat, ainv, inv):
    """Invert every cluster's nodal matrix for variant b (lane bb) into inv[cl_moff[c]:, bb].

    Stamps: 1/Z0 at each line end, 1/R, the companion conductances of C and L,
    1/r of the Norton sources and the driver at its starting-state conductance
    1/r0 (its change during the ramp is a rank-1 update, see :func:`_time_loop`).
    Returns False if some cluster matrix is singular (the others are still inverted).
    """
    cl_start, line_a, line_b = topo.cl_start, topo.line_a, topo.line_b
    res_a, res_b, cap_a, cap_b = topo.res_a, topo.res_b, topo.cap_a, topo.cap_b
    ind_a, ind_b, src_node, drv_node = topo.ind_a, topo.ind_b, topo.src_node, topo.drv_node
    ok = True
    for c in range(cl_start.shape[0] - 1):
        s0 = cl_start[c]
        m = cl_start[c + 1] - s0
        for i in range(m * m):
            amat[i] = 0.0
        for k in range(line_a.shape[0]):
            if s0 <= line_a[k] < s0 + m:
                amat[(line_a[k] - s0) * (m + 1)] += gz[k, bb]
            if s0 <= line_b[k] < s0 + m:
                amat[(line_b[k] - s0) * (m + 1)] += gz[k, bb]
        for k in range(res_a.shape[0]):
            if s0 <= res_a[k] < s0 + m:
                _stamp(amat, m, res_a[k] - s0, res_b[k] - s0 if res_b[k] >= 0 else -1, 1.0 / vals.res_r[k, b])
        for k in range(cap_a.shape[0]):
            if s0 <= cap_a[k] < s0 + m:
                _stamp(amat, m, cap_a[k] - s0, cap_b[k] - s0 if cap_b[k] >= 0 else -1, g_cap[k, bb])
        for k in range(ind_a.shape[0]):
            if s0 <= ind_a[k] < s0 + m:
                _stamp(amat, m, ind_a[k] - s0, ind_b[k] - s0, g_ind[k, bb])
        for k in range(src_node.shape[0]):
            if s0 <= src_node[k] < s0 + m:
                amat[(src_node[k] - s0) * (m + 1)] += 1.0 / vals.src_r[k, b]
        if s0 <= drv_node < s0 + m:
            amat[(drv_node - s0) * (m + 1)] += 1.0 / vals.drv_r0[b]
        if not _invert(amat, m, ainv):
            ok = False
        o = topo.cl_moff[c]
        for i in range(m * m):
            inv[o + i, bb] = ainv[i]
    return ok


@kernel
def _lagrange_weights(q, fr, B, qmin, ntap, tap_off):
    """Interpolation weights of every line's delayed history; returns wts[tap, lane].

    Delay TD = (q + f) dt.  4-point (cubic) Lagrange interpolation over the
    samples q-1 .. q+2 steps back, weights for f in [0, 1):
        w(q-1) = -f (f-1)(f-2)/6,   w(q)   = (f+1)(f-1)(f-2)/2,
        w(q+1) = -(f+1) f (f-2)/2,  w(q+2) = (f+1) f (f-1)/6;
    for a delay under two steps (q = 1) the newer sample does not exist yet and
    the interpolation is linear over q, q+1: w(q) = 1-f, w(q+1) = f.  Linear
    interpolation alone loses ~f(1-f)(w dt)^2/2 of a wave per pass, which adds
    up on ringing buses and chains of short sections; the centred cubic stencil
    is passive (|H| <= 1) for f in [0, 1] (T. I. Laakso, V. Valimaki,
    M. Karjalainen, U. K. Laine, "Splitting the unit delay", IEEE Signal
    Processing Magazine 13(1), 1996, section on Lagrange interpolation).
    Taps are shared by the block: line k reads ntap[k] ring slots from qmin[k]
    steps back (tap_off[k] = its first row of wts), every variant with its own
    weights, so the loads are contiguous over the variant axis; a weight of
    exactly 0 leaves a sum unchanged, so a variant gives the same bits alone
    or inside any block.  Fills qmin, ntap, tap_off.
    """
    nl = q.shape[0]
    for k in range(nl):
        lo = q[k, 0]
        hi = q[k, 0]
        for bb in range(B):
            qq = q[k, bb]
            lo = min(lo, qq - 1 if qq >= 2 else qq)
            hi = max(hi, qq + 2 if qq >= 2 else qq + 1)
        qmin[k] = lo
        ntap[k] = hi - lo + 1
        tap_off[k + 1] = tap_off[k] + ntap[k]
    wts = np.zeros((tap_off[nl], B))
    for k in range(nl):
        for bb in range(B):
            f = fr[k, bb]
            j = tap_off[k] + q[k, bb] - qmin[k]
            if q[k, bb] >= 2:
                wts[j - 1, bb] = -f * (f - 1.0) * (f - 2.0) / 6.0
                wts[j, bb] = (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0
                wts[j + 1, bb] = -(f + 1.0) * f * (f - 2.0) / 2.0
                wts[j + 2, bb] = (f + 1.0) * f * (f - 1.0) / 6.0
            else:
                wts[j, bb] = 1.0 - f
                wts[j + 1, bb] = f
    return wts


# ---- the time loop ----------------------------------------------------------------------

@kernel
def _time_loop(b0, nb, lanes, topo, vals, ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap, j_cap,
               g_ind, j_ind, inv, rhs0, rhs, v, ha, hb, s0_d, m_d, off_d, wave_out, record, streams):
    """The time loop of one block: steps 1 .. n_steps-1 of every lane (set-up done by run_block).

    A compiled function of its own, called once per block by run_block and by
    the sweeps' block (budget.kernels.evaluate._evaluate_block) with the same
    argument types, so it is compiled once.
    Inlined into both callers (numba IR inlining) it cost about 16 s of compile
    time per caller; as a called function, throughput measured interleaved in
    one process was at parity (2-core machine, 2026-12-03).  One loop nest,
    not one function per phase: with the phases as separate inlined numba
    functions (each binding its array arguments with a reference-count call
    per step) a single simulation of the benchmark bus ran 2-10 % slower than
    the undivided kernel; as separate compiled functions called every step,
    1.7x slower.
    Each step, in order:

    1. Delayed line histories (method of characteristics, F. H. Branin,
       "Transient analysis of lossless transmission lines", Proc. IEEE 55(11),
       1967): the history current at one end is the wave w = 2v/Z0 - h that
       left the partner end one delay earlier, h_a(t) = w_b(t - TD),
       interpolated between stored samples with the weights of
       :func:`_lagrange_weights` (4-point Lagrange).  Advances each line's
       ring slot pos[k] (step modulo ring_len[k]).
    2. Right-hand side: rhs = rhs0 (Norton sources) + h at each line end + J_C
       (into node a, out of node b) - J_L (the inductor's history flows a -> b).
    3. Driver injection: the Norton blend of its two states over the linear
       ramp, s = min(t / T_ramp, 1): I(t) = (1 - s) v0/r0 + s v1/r1.
    4. Cluster solves: within one step the lines couple nodes only through
       their delayed history, so the nodal system is block diagonal over the
       clusters: v = A_c^-1 rhs (inverses from :func:`_cluster_inverses`).
    5. Driver update: its conductance change g = G(t) - G(0),
       G(t) = (1 - s)/r0 + s/r1, is a rank-1 change of its cluster matrix,
       solved from the stored A^-1 by the Sherman-Morrison formula
       (J. Sherman, W. J. Morrison, Ann. Math. Statist. 21(1), 1950):
       v' = v - A^-1 e g (e^T v) / (1 + g e^T A^-1 e), e = the driver's node.
    6. Line history update (Branin 1967): i = v/Z0 - h at an end, and the wave
       v/Z0 + i = 2v/Z0 - h reaches the partner end one delay later.
    7. Companion updates, trapezoidal rule (H. W. Dommel, "Digital computer
       solution of electromagnetic transients in single- and multiphase
       networks", IEEE Trans. PAS-88(4), 1969): capacitor (G = 2C/dt)
       J' = 2 G u - J; inductor (G = dt/(2L)) J' = J + 2 G u, u = v_a - v_b.
    8. Pin voltages into wave_out[step, pin, lane] when recording.
    9. Metrics in the loop (sweeps): streams = (st_node, mp, ms, guard, early)
       (one tuple: a call of more than 30 arguments is compiled as f(*args),
       which numba cannot inline).  Every metric stream r (a receiver pin
       st_node[r], as it is or mirrored, see :mod:`budget.kernels.stream`)
       takes this step's sample; with ``early`` the block ends once every
       stream of every lane is final (:func:`~budget.kernels.stream.settled_final`,
       valid, inside the settle band and unchanged for ``guard`` [s]), checked every
       ``EARLY_CHECK_STEPS`` steps.

    Returns the number of samples computed (n_steps unless the block ended early).
    """
    B = len(lanes) if len(lanes) > 0 else nb
    line_a, line_b, cap_a, cap_b, ind_a, ind_b = topo.line_a, topo.line_b, topo.cap_a, topo.cap_b, topo.ind_a, topo.ind_b
    cl_start, cl_moff, ring_len, out_node, drv_node = topo.cl_start, topo.cl_moff, topo.ring_len, topo.out_node, topo.drv_node
    t_ramp, drv_v0, drv_r0, drv_v1, drv_r1 = vals.t_ramp, vals.drv_v0, vals.drv_r0, vals.drv_v1, vals.drv_r1
    dt = vals.dt
    st_node, mp, ms, guard, early = streams
    n_st = st_node.shape[0]
    countdown = EARLY_CHECK_STEPS
    for step in range(1, vals.n_steps):
        t = step * dt
        # line histories h_a(t) = w_b(t - TD), h_b(t) = w_a(t - TD) [A]: Lagrange-interpolated ring samples
        for k in range(ring_len.shape[0]):
            o = ring_off[k]
            r = ring_len[k]
            pos[k] += 1  # ring slot of this step: step modulo r, kept without a division
            if pos[k] == r:
                pos[k] = 0
            s0 = pos[k] - qmin[k]  # qmin >= 1 and qmax + 2 < r, so one wrap is enough
            if s0 < 0:
                s0 += r
            for bb in range(B):
                hb[k, bb] = 0.0
                ha[k, bb] = 0.0
            for j in range(ntap[k]):
                sj = s0 - j
                if sj < 0:
                    sj += r
                to = tap_off[k] + j
                for bb in range(B):
                    hb[k, bb] += wts[to, bb] * ring[o + sj, bb]
                    ha[k, bb] += wts[to, bb] * ring[o + r + sj, bb]
        # nodal injections [A]: Norton sources + line histories + J_C (into a, out of b) - J_L (flows a -> b)
        for n in range(rhs.shape[0]):
            for bb in range(B):
                rhs[n, bb] = rhs0[n, bb]
        for k in range(line_a.shape[0]):
            a = line_a[k]
            c = line_b[k]
            for bb in range(B):
                rhs[a, bb] += ha[k, bb]
                rhs[c, bb] += hb[k, bb]
        for k in range(cap_a.shape[0]):
            a = cap_a[k]
            c = cap_b[k]
            for bb in range(B):
                rhs[a, bb] += j_cap[k, bb]
            if c >= 0:
                for bb in range(B):
                    rhs[c, bb] -= j_cap[k, bb]
        for k in range(ind_a.shape[0]):
            a = ind_a[k]
            c = ind_b[k]
            for bb in range(B):
                rhs[a, bb] -= j_ind[k, bb]
                rhs[c, bb] += j_ind[k, bb]
        # driver's Norton current I(t) = (1 - s) v0/r0 + s v1/r1, s = min(t / T_ramp, 1)
        for bb in range(B):
            b = b0 + bb
            s = t / t_ramp[b]
            if s > 1.0:
                s = 1.0
            rhs[drv_node, bb] += (1.0 - s) * drv_v0[b] / drv_r0[b] + s * drv_v1[b] / drv_r1[b]
        # cluster solves v = A_c^-1 rhs (block diagonal within a step)
        for c in range(cl_start.shape[0] - 1):
            s0 = cl_start[c]
            m = cl_start[c + 1] - s0
            o = cl_moff[c]
            for i in range(m):
                for bb in range(B):
                    v[s0 + i, bb] = 0.0
                for j in range(m):
                    for bb in range(B):
                        v[s0 + i, bb] += inv[o + i * m + j, bb] * rhs[s0 + j, bb]
        # Sherman-Morrison for the driver's conductance change g = G(t) - G(0), G(t) = (1 - s)/r0 + s/r1
        l_d = drv_node - s0_d
        for bb in range(B):
            b = b0 + bb
            s = t / t_ramp[b]
            if s > 1.0:
                s = 1.0
            g = (1.0 - s) / drv_r0[b] + s / drv_r1[b] - 1.0 / drv_r0[b]
            if g != 0.0:
                scale = g * v[drv_node, bb] / (1.0 + g * inv[off_d + l_d * m_d + l_d, bb])
                for i in range(m_d):
                    v[s0_d + i, bb] -= inv[off_d + i * m_d + l_d, bb] * scale
        # waves leaving both ends of every line: w = 2 v / Z0 - h (Branin 1967)
        for k in range(line_a.shape[0]):
            o = ring_off[k]
            r = ring_len[k]
            sl = pos[k]
            a = line_a[k]
            c = line_b[k]
            for bb in range(B):
                ring[o + sl, bb] = 2.0 * v[a, bb] * gz[k, bb] - ha[k, bb]
                ring[o + r + sl, bb] = 2.0 * v[c, bb] * gz[k, bb] - hb[k, bb]
        # trapezoidal companions (Dommel 1969): C: J' = 2 G u - J; L: J' = J + 2 G u
        for k in range(cap_a.shape[0]):
            a = cap_a[k]
            c = cap_b[k]
            for bb in range(B):
                u = v[a, bb] - (v[c, bb] if c >= 0 else 0.0)
                j_cap[k, bb] = 2.0 * g_cap[k, bb] * u - j_cap[k, bb]
        for k in range(ind_a.shape[0]):
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
        if n_st > 0:
            stepf = float(step)
            for r in range(n_st):
                n = st_node[r]
                if mp[r, P_MIRROR, 0] > 0.5:
                    for bb in range(B):
                        stream_step(mp, ms, r, bb, mp[r, P_MIRC, bb] - v[n, bb], stepf, t)
                else:
                    for bb in range(B):
                        stream_step(mp, ms, r, bb, v[n, bb], stepf, t)
            if early:
                countdown -= 1
                if countdown == 0:
                    countdown = EARLY_CHECK_STEPS
                    done = True
                    for r in range(n_st):
                        for bb in range(B):
                            if not settled_final(ms, r, bb, t, guard):
                                done = False
                                break
                        if not done:
                            break
                    if done:
                        return step + 1
    return vals.n_steps


# ---- the block driver -------------------------------------------------------------------

@kernel
def _block_setup(b0, nb, lanes, topo, vals, dc_out, status):
    """Set-up of one block (called once per block by run_block and the sweeps): DC states, histories,
    cluster inverses, weights.

    Fills dc_out[0 or 1, node, b] [V] (start and end states) and status[b];
    returns the block state the time loop takes, with v holding the DC start state.
    """
    B = len(lanes) if len(lanes) > 0 else nb
    n_nodes = topo.n_nodes
    cl_start = topo.cl_start
    drv_node = topo.drv_node
    ring_len = topo.ring_len
    nl = topo.line_a.shape[0]
    nc = topo.cap_a.shape[0]
    ni = topo.ind_a.shape[0]
    n_cl = cl_start.shape[0] - 1

    # ---- per-variant scratch -------------------------------------------------
    vdc = np.empty(n_nodes)
    li = np.empty(nl)
    ii = np.empty(ni)
    band = np.empty(max(1, topo.n_dc * (topo.dc_bw + 1)))
    rhs_dc = np.empty(max(1, topo.n_dc))
    acc = np.empty(n_nodes)
    mmax = 1
    for c in range(n_cl):
        mmax = max(mmax, cl_start[c + 1] - cl_start[c])
    amat = np.empty(mmax * mmax)
    ainv = np.empty(mmax * mmax)

    # ---- block state, variant axis innermost ----------------------------------
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
    drv_cl = 0
    for c in range(n_cl):
        if cl_start[c] <= drv_node < cl_start[c + 1]:
            drv_cl = c
    s0_d = cl_start[drv_cl]
    m_d = cl_start[drv_cl + 1] - s0_d
    off_d = topo.cl_moff[drv_cl]

    for bb in range(B):
        b = b0 + bb
        # DC of the end state (for levels), then of the start state (initial conditions)
        st = dc_state(b, vals.drv_v1[b], vals.drv_r1[b], topo, vals, vdc, li, ii, band, rhs_dc, acc)
        for n in range(n_nodes):
            dc_out[1, n, b] = vdc[n]
        st2 = dc_state(b, vals.drv_v0[b], vals.drv_r0[b], topo, vals, vdc, li, ii, band, rhs_dc, acc)
        for n in range(n_nodes):
            v[n, bb] = vdc[n]
        status[b] = STATUS_OK
        for n in range(n_nodes):
            dc_out[0, n, b] = vdc[n]
        if st != STATUS_OK or st2 != STATUS_OK:
            status[b] = STATUS_DC_SINGULAR
        _start_histories(b, bb, topo, vals, vdc, li, ii, ring_off, ring, gz, q, fr, g_cap, j_cap, g_ind, j_ind,
                         rhs0)
        if not _cluster_inverses(b, bb, topo, vals, gz, g_cap, g_ind, amat, ainv, inv):
            status[b] = STATUS_CLUSTER_SINGULAR

    wts = _lagrange_weights(q, fr, B, qmin, ntap, tap_off)
    return (ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap, j_cap, g_ind, j_ind, inv, rhs0, rhs, v,
            ha, hb, s0_d, m_d, off_d)


@kernel(inline="always")
def _finite_status(b0, nb, lanes, topo, v, status):
    """STATUS_NOT_FINITE for every lane whose last pin voltages are not finite."""
    B = len(lanes) if len(lanes) > 0 else nb
    out_node = topo.out_node
    for bb in range(B):
        for o in range(out_node.shape[0]):
            if not math.isfinite(v[out_node[o], bb]):
                status[b0 + bb] = STATUS_NOT_FINITE


@kernel
def run_block(b0, nb, lanes, topo, vals, wave_out, dc_out, status):
    """Simulate variants b0 .. b0+B-1 of one flattened bus.

    topo, vals: :class:`~budget.kernels.inputs.Topology` and
    :class:`~budget.kernels.inputs.Values` (``Netlist.topology``, ``Netlist.values``);
    values are ``[item, N]`` arrays over all N variants.
    The block size B is ``len(lanes)`` when ``lanes`` is a non-empty tuple (a
    compile-time constant: ``(0,)`` for a single variant lets the compiler drop
    the per-variant loops' vectorisation checks, about 2x faster per step, at
    the price of a second compiled signature of every kernel below), else the
    run-time ``nb`` (sweeps: LLVM vectorises the per-variant loops).  The
    package passes ``()`` everywhere (budget.run_blocks).

    Writes pin waveforms wave_out[step, out, b - b0] [V] (block-local variant
    index) when wave_out has n_steps rows (else records nothing), the DC node
    voltages of the start and end states into dc_out[0 or 1, node, b] [V], and
    a STATUS_* per variant into status[b].
    """
    B = len(lanes) if len(lanes) > 0 else nb
    out_node = topo.out_node
    record = wave_out.shape[0] == vals.n_steps
    (ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap, j_cap, g_ind, j_ind, inv, rhs0, rhs, v,
     ha, hb, s0_d, m_d, off_d) = _block_setup(b0, nb, lanes, topo, vals, dc_out, status)
    if record:
        for o in range(out_node.shape[0]):
            for bb in range(B):
                wave_out[0, o, bb] = v[out_node[o], bb]
    no_rcv = np.empty(0, dtype=np.int64)
    no_state = np.empty((0, 0, B))
    # run-time flags, not literals: the same compiled _time_loop as the sweeps' (_evaluate_block) call
    early = no_rcv.shape[0] > 0
    _time_loop(b0, nb, lanes, topo, vals, ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap, j_cap,
               g_ind, j_ind, inv, rhs0, rhs, v, ha, hb, s0_d, m_d, off_d, wave_out, record,
               (no_rcv, no_state, no_state, math.inf, early))
    _finite_status(b0, nb, lanes, topo, v, status)
    return 0
