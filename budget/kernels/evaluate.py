"""Numba kernel: transient + edge metrics + violations for a chunk of variants.

This is the throughput path used by sweeps, tolerance analyses, the budget
check and the C library.  Variants are processed in blocks of ``LANES`` (the
variant axis innermost, so the compiler can vectorise across it) and blocks
run in parallel across cores (``prange``).  Waveforms live only in a
per-block scratch buffer: memory does not grow with the number of variants.
"""
from __future__ import annotations

import numpy as np
from numba import prange

from ..jit import parallel_kernel
from .metrics import N_METRICS, edge_metrics, headroom, violation_bits
from .transient import LANES, run_block


@parallel_kernel
def evaluate_chunk(topo, vals, rising,
                   rcv_out, rcv_vil, rcv_vih, rcv_vmax, rcv_vmin, alloc_v, alloc_frac,
                   settle_frac, min_margin, t_ref,
                   metrics_out, bits_out, head_out, levels_out, status):
    """Evaluate N variants (N = t_ref.shape[0]) for one driver and one edge.

    topo, vals: :class:`~budget.kernels.inputs.Topology`, :class:`~budget.kernels.inputs.Values`
    (``Netlist.topology``, ``Netlist.values``); rising: the edge is a rising one.
    rcv_out[r]: index into out_node of receiver r; rcv_vil, rcv_vih, rcv_vmax,
    rcv_vmin [V], alloc_v [V] and alloc_frac [-] (of the receiver's swing) are
    ``[n_rcv, N]``; settle_frac [-]; min_margin [V]; t_ref [s] per variant.
    Writes metrics_out[N, n_rcv, N_METRICS], bits_out[N, n_rcv] (VIOL_*),
    head_out[N, n_rcv] (headroom [V], see budget.kernels.metrics.headroom),
    levels_out[N, n_rcv, 2] (V_lo, V_hi at the pin [V]) and status[N].
    """
    n = t_ref.shape[0]
    out_node = topo.out_node
    n_nodes = topo.n_nodes
    n_steps = vals.n_steps
    dt = vals.dt
    n_out = out_node.shape[0]
    n_rcv = rcv_out.shape[0]
    dc = np.empty((2, n_nodes, n))
    t = np.arange(n_steps) * dt
    n_blk = (n + LANES - 1) // LANES
    for blk in prange(n_blk):
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
