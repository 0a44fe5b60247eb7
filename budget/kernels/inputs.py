"""The transient kernel's inputs as two named structures (numba compiles them as tuples).

:class:`Topology` holds what is fixed for one structure of a bus, one driver
and one time step: node numbering, which nodes each element joins, the DC
ordering and the history ring lengths (int64 arrays and ints).
:class:`Values` holds what changes per variant: element values as float64
arrays ``[item, n_variants]`` (variant axis innermost), the driver's two
states and ramp per variant ``[n_variants]``, the time step dt [s] and the
number of steps.

Built by :func:`budget.netlist.flatten` (``Netlist.topology``, ``Netlist.values``)
and taken as they are by :func:`budget.kernels.transient.run_block` and
:func:`budget.kernels.evaluate.evaluate_chunk`.  Node b = -1 means ground.
Nodes are numbered so that each cluster (nodes joined by lumped series
elements) is contiguous: ``cl_start[c]:cl_start[c+1]``; its inverse matrix
sits at ``cl_moff[c]`` in the flat per-variant matrix store.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np


class Topology(NamedTuple):
    """Integer structure of a flattened bus (int64 arrays, C order)."""
    n_nodes: int
    cl_start: np.ndarray     # [n_clusters + 1] first node of each cluster
    cl_moff: np.ndarray      # [n_clusters + 1] offset of each cluster's m x m matrix
    line_a: np.ndarray       # [n_lines] node of end a of each lossless line section
    line_b: np.ndarray       # [n_lines] node of end b
    res_a: np.ndarray        # [n_res] resistor nodes (res_b = -1: to ground)
    res_b: np.ndarray
    cap_a: np.ndarray        # [n_cap] capacitor nodes
    cap_b: np.ndarray
    ind_a: np.ndarray        # [n_ind] inductor nodes (current a -> b)
    ind_b: np.ndarray
    src_node: np.ndarray     # [n_src] node of each Norton source (r to a fixed v)
    drv_node: int            # the driver's die node
    out_node: np.ndarray     # [n_taps] die node of every tap (the recorded pins)
    dc_map: np.ndarray       # [n_nodes] DC unknown of each node (shorts merged, RCM order)
    n_dc: int                # number of DC unknowns
    dc_bw: int               # bandwidth of the DC conductance matrix
    tree_kind: np.ndarray    # spanning forest of the DC shorts, leaves first: 0 line, 1 inductor
    tree_elem: np.ndarray    # element index of each forest edge
    tree_child: np.ndarray   # child node of each forest edge
    tree_parent: np.ndarray  # parent node of each forest edge
    ring_len: np.ndarray     # [n_lines] history samples kept per line end


class Values(NamedTuple):
    """Per-variant values of a flattened bus; SI units, float64, variant axis last."""
    line_z0: np.ndarray  # [n_lines, N] characteristic impedance [ohm]
    line_td: np.ndarray  # [n_lines, N] one-way delay [s]
    res_r: np.ndarray    # [n_res, N] [ohm]
    cap_c: np.ndarray    # [n_cap, N] [F]
    ind_l: np.ndarray    # [n_ind, N] [H]
    src_r: np.ndarray    # [n_src, N] [ohm]
    src_v: np.ndarray    # [n_src, N] [V]
    drv_v0: np.ndarray   # [N] driver's starting state: open-circuit voltage [V]
    drv_v1: np.ndarray   # [N] final state [V]
    drv_r0: np.ndarray   # [N] starting state's output resistance [ohm]
    drv_r1: np.ndarray   # [N] final state's [ohm]
    t_ramp: np.ndarray   # [N] 0-100 % duration of the linear ramp [s]
    dt: float            # time step [s]
    n_steps: int         # samples, t = 0, dt, ..., (n_steps - 1) dt
