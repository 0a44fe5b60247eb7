"""Numba kernels: transient + edge metrics + violations for a chunk of variants.

This is the throughput path used by sweeps, tolerance analyses, the budget
check and the C library.  Variants are processed in blocks of ``LANES`` (the
variant axis innermost, so the compiler can vectorise across it) and blocks
run in parallel across cores (host threads, :mod:`budget.kernels.threads`).

The metrics are computed inside the time loop, sample by sample
(:mod:`budget.kernels.stream`): no waveform is stored.  A block may end its
window early once every metric of every lane is final (``guard``).
:func:`evaluate_chunk_both` computes both edges of a linear bus from one
transient (the falling edge is the mirror of the rising one).
:func:`evaluate_chunk_reference` is the former path (waveforms stored, then
:func:`~budget.kernels.metrics.edge_metrics`), kept as the reference the
tests compare the fused path with.
"""
from __future__ import annotations

import math

import numpy as np

from ..jit import kernel
from .metrics import N_METRICS, edge_metrics, headroom, violation_bits
from .stream import N_PARAMS, N_STATE, P_MIRC, P_VHI, P_VLO, stream_finish, stream_params, stream_start
from .threads import block_count, over_blocks
from .transient import LANES, _block_setup, _finite_status, _time_loop, run_block


# One compiled function shared by evaluate_chunk and evaluate_chunk_both (not inlined into each,
# and n_e passed as a run-time count, not a literal): the block body is compiled once, which cut
# the cold compile of the mirrored-edges path from 33 s to 10 s (2-core machine, 2026-12-03); the
# call is made once per block of lanes, not per time step.
@kernel
def _evaluate_block(b0, bsz, lanes, topo, vals, rising, n_e, rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin,
                    alloc_v, alloc_frac, settle_frac, min_margin, t_ref, metrics_out, bits_out, head_out,
                    levels_out, status, dc, guard):
    """One block: set-up, the time loop with the metrics of n_e edges (1: the simulated one;
    2: it and its mirror), then violations and headroom.  Returns the samples computed."""
    B = len(lanes) if len(lanes) > 0 else bsz
    out_node = topo.out_node
    (ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap, j_cap, g_ind, j_ind, inv, rhs0, rhs, v,
     ha, hb, s0_d, m_d, off_d) = _block_setup(b0, bsz, lanes, topo, vals, dc, status)
    n_rcv = rcv_out.shape[0]
    n_st = n_e * n_rcv
    st_node = np.empty(n_st, dtype=np.int64)
    mp = np.empty((n_st, N_PARAMS, B))
    ms = np.empty((n_st, N_STATE, B))
    for e in range(n_e):
        rise_e = rising if e == 0 else not rising
        for r in range(n_rcv):
            s = e * n_rcv + r
            node = out_node[rcv_out[r]]
            st_node[s] = node
            for bb in range(B):
                b = b0 + bb
                if rising:
                    v_lo = dc[0, node, b]
                    v_hi = dc[1, node, b]
                else:
                    v_lo = dc[1, node, b]
                    v_hi = dc[0, node, b]
                swing = v_hi - v_lo
                stream_params(mp, s, bb, rise_e, v_lo, v_hi, rcv_vil[r, b], rcv_vih[r, b], t_ref[e, b],
                              settle_frac * abs(swing), alloc_v[r, b] + alloc_frac[r, b] * abs(swing), e == 1,
                              dc[0, node, b] + dc[1, node, b])
                v0 = v[node, bb]
                if e == 1:
                    v0 = mp[s, P_MIRC, bb] - v0
                stream_start(mp, ms, s, bb, v0)
    no_wave = np.empty((0, 0, B))
    early = guard < math.inf
    record = no_wave.shape[0] == vals.n_steps    # False, as a run-time flag: run_block's compiled _time_loop
    n_done = _time_loop(b0, bsz, lanes, topo, vals, ring_off, pos, qmin, ntap, tap_off, wts, ring, gz, g_cap,
                        j_cap, g_ind, j_ind, inv, rhs0, rhs, v, ha, hb, s0_d, m_d, off_d, no_wave, record,
                        (st_node, mp, ms, guard, early))
    _finite_status(b0, bsz, lanes, topo, v, status)
    m = np.empty(N_METRICS)
    for e in range(n_e):
        for r in range(n_rcv):
            s = e * n_rcv + r
            for bb in range(B):
                b = b0 + bb
                stream_finish(mp, ms, s, bb, vals.dt, m)
                for k in range(N_METRICS):
                    metrics_out[e, b, r, k] = m[k]
                bits_out[e, b, r] = violation_bits(m, rcv_vmax[r, b], rcv_vmin[r, b], min_margin)
                head_out[e, b, r] = headroom(m, rcv_vmax[r, b], rcv_vmin[r, b], min_margin)
                levels_out[e, b, r, 0] = mp[s, P_VLO, bb]
                levels_out[e, b, r, 1] = mp[s, P_VHI, bb]
    return n_done


@kernel
def evaluate_blocks(blk0, blk1, topo, vals, rising,
                    rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                    settle_frac, min_margin, t_ref,
                    metrics_out, bits_out, head_out, levels_out, status, dc, guard):
    """Blocks blk0 .. blk1-1 of LANES variants (one thread's share, see :func:`evaluate_chunk`).

    n_e = t_ref.shape[0] edges (1: the simulated one; 2: it and its mirror); every output
    has the leading edge axis; dc[2, n_nodes, N] [V] is scratch for the DC states.
    Returns the number of time steps computed over these blocks."""
    n = t_ref.shape[1]
    steps = 0
    for blk in range(blk0, blk1):
        b0 = blk * LANES
        bsz = min(LANES, n - b0)
        steps += _evaluate_block(b0, bsz, (), topo, vals, rising, t_ref.shape[0], rcv_out, rcv_vil, rcv_vih,
                                 rcv_vmax, rcv_vmin, alloc_v, alloc_frac, settle_frac, min_margin, t_ref,
                                 metrics_out, bits_out, head_out, levels_out, status, dc, guard)
    return steps


def _evaluate(topo, vals, rising, rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
              settle_frac, min_margin, t_ref, metrics_out, bits_out, head_out, levels_out, status, guard):
    # outputs with the leading edge axis: one compiled signature of evaluate_blocks serves both callers
    n = t_ref.shape[1]
    dc = np.empty((2, topo.n_nodes, n))
    args = (topo, vals, bool(rising), rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
            float(settle_frac), float(min_margin), t_ref, metrics_out, bits_out, head_out, levels_out, status,
            dc, float(guard))
    return over_blocks(block_count(n, LANES), lambda a, b: evaluate_blocks(a, b, *args))


def evaluate_chunk(topo, vals, rising,
                   rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                   settle_frac, min_margin, t_ref,
                   metrics_out, bits_out, head_out, levels_out, status, guard=math.inf):
    """Evaluate N variants (N = t_ref.shape[0]) for one driver and one edge.

    topo, vals: :class:`~budget.kernels.inputs.Topology`, :class:`~budget.kernels.inputs.Values`
    (``Netlist.topology``, ``Netlist.values``); rising: the edge is a rising one.
    rcv_out[r]: index into out_node of receiver r; rcv_vil, rcv_vih, rcv_vmax,
    rcv_vmin [V], alloc_v [V] and alloc_frac [-] (of the receiver's swing) are
    ``[n_rcv, N]``; settle_frac [-]; min_margin [V]; t_ref [s] per variant.
    Writes metrics_out[N, n_rcv, N_METRICS], bits_out[N, n_rcv] (VIOL_*),
    head_out[N, n_rcv] (headroom [V], see budget.kernels.metrics.headroom),
    levels_out[N, n_rcv, 2] (V_lo, V_hi at the pin [V]) and status[N].
    guard [s]: a block ends once every metric of every lane is final and its pins
    have stayed in their stop band this long (math.inf: the whole window).
    Blocks run on :func:`budget.kernels.threads.threads` host threads (NUMBA_NUM_THREADS, else the cores).
    Returns the number of time steps computed over all blocks.
    """
    n = t_ref.shape[0]
    n_rcv = rcv_out.shape[0]
    return _evaluate(topo, vals, rising, rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                     settle_frac, min_margin, t_ref.reshape((1, n)),
                     metrics_out.reshape((1, n, n_rcv, N_METRICS)), bits_out.reshape((1, n, n_rcv)),
                     head_out.reshape((1, n, n_rcv)), levels_out.reshape((1, n, n_rcv, 2)), status, guard)


def evaluate_chunk_both(topo, vals, rising,
                        rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                        settle_frac, min_margin, t_ref,
                        metrics_out, bits_out, head_out, levels_out, status, guard):
    """:func:`evaluate_chunk` for both edges of a linear bus from one transient.

    Valid only when the driver's two states have the same output resistance in
    every variant and both edges share the ramp, time step and window: then the
    bus is a linear network driven by one ramped source, and the other edge's
    pin waveform is V_lo + V_hi - v(t) (superposition).  t_ref [2, N] [s]: row 0
    for the simulated edge (``rising``), row 1 for the other; outputs gain a
    leading edge axis of 2 (metrics_out[2, N, n_rcv, N_METRICS], ...).
    """
    return _evaluate(topo, vals, rising, rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                     settle_frac, min_margin, t_ref, metrics_out, bits_out, head_out, levels_out, status, guard)


@kernel
def reference_blocks(blk0, blk1, topo, vals, rising,
                     rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                     settle_frac, min_margin, t_ref,
                     metrics_out, bits_out, head_out, levels_out, status, dc):
    """Blocks blk0 .. blk1-1 of :func:`evaluate_chunk_reference` (waveforms stored, then the metrics)."""
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
        run_block(b0, bsz, (), topo, vals, waves, dc, status)
        m = np.empty(N_METRICS)
        wv = np.empty((bsz, n_steps))
        for r in range(n_rcv):
            o = rcv_out[r]
            node = out_node[o]
            # one sequential pass over the block's samples, transposed for the metrics
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


def evaluate_chunk_reference(topo, vals, rising,
                             rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                             settle_frac, min_margin, t_ref,
                             metrics_out, bits_out, head_out, levels_out, status):
    """The reference path of :func:`evaluate_chunk` (same arguments, no guard): waveforms stored per
    block, transposed, then :func:`~budget.kernels.metrics.edge_metrics` on each (the outputs as
    evaluate_chunk's, without the edge axis)."""
    n = t_ref.shape[0]
    dc = np.empty((2, topo.n_nodes, n))
    args = (topo, vals, bool(rising), rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
            float(settle_frac), float(min_margin), t_ref, metrics_out, bits_out, head_out, levels_out, status, dc)
    return over_blocks(block_count(n, LANES), lambda a, b: reference_blocks(a, b, *args))
