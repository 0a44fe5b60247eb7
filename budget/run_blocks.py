"""Run a flattened netlist through the transient kernel, block by block (no design-level logic).

Below :mod:`budget.netlist` and :mod:`budget.simulate`, so the step estimate
(:mod:`budget.step_accuracy`) can run netlists without an import cycle.
"""
from __future__ import annotations

import numpy as np

from .kernels import transient as tk


def run_netlist(net):
    """Run the transient kernel on every variant of ``net`` (blocks of ``LANES`` variants).

    Returns (waves [n_steps, n_taps, N], dc [2, n_nodes, N], status [N]).
    """
    n = net.n_variants
    n_out = net.topology.out_node.shape[0]
    waves = np.empty((net.n_steps, n_out, n))
    dc = np.empty((2, net.topology.n_nodes, n))
    status = np.empty(n, dtype=np.int64)
    if net.devices is not None:     # IBIS parts: the non-linear kernel (budget.kernels.nonlinear)
        from .kernels import nonlinear as nk
        for b0 in range(0, n, tk.LANES):
            bsz = min(tk.LANES, n - b0)
            nk.run_block_nl(b0, bsz, (), net.topology, net.values, net.devices,
                            waves[:, :, b0:b0 + bsz], dc, status)
        return waves, dc, status
    for b0 in range(0, n, tk.LANES):
        bsz = min(tk.LANES, n - b0)
        # a contiguous block buffer: one compiled signature of run_block.  The lane count is a run-time
        # value also for a single simulation: the one-lane specialisation (lanes=(0,)) ran a single
        # simulation about 2x faster (0.13 vs 0.27 ms on short-bus, 4.9 vs 9.5 ms on fieldbus) but cost
        # about 50 s of cold compile (75 s with the non-linear kernel) on a 2-core machine (2026-12-03).
        blk = waves if bsz == n else np.empty((net.n_steps, n_out, bsz))
        tk.run_block(b0, bsz, (), net.topology, net.values, blk, dc, status)
        if blk is not waves:
            waves[:, :, b0:b0 + bsz] = blk
    return waves, dc, status
