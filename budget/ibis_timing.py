"""Timing reference of an IBIS driver: the buffer alone into its reference load crosses its measurement level.

Reference load, first given of: the part table's ``ref_load``; the model's Rref / Vref / Cref;
the [Ramp]'s R_load to half the pull-up rail (a mid-rail timing load, common practice; for an open
drain to the supply, for an open source to 0 V).  Measurement
level: the part's ``v_meas``, else the model's Vmeas, else half the pull-up rail.  The die carries
C_comp (or the part's c_pin); the package is left out (the reference describes the buffer).
Solved by :func:`budget.kernels.nonlinear.ref_times_nl` (the engine's device equations, trapezoidal
rule at a quarter of the bus's time step).
"""
from __future__ import annotations

import numpy as np

from .errors import SimulationError
from .ibis import CORNERS
from .ibis_netlist import corners_of
from .kernels.nonlinear import ref_times_nl


def reference(design, driver: str, edge: str):
    """(r_ref [ohm], v_ref [V], c_ref [F], v_meas [V]) per variant of the IBIS driver at tap ``driver``."""
    n = design.batch_size or 1
    part = design.parts[design.tap(driver).part]
    m = part.ibis.model
    cidx = corners_of(design, part)
    rail = np.array([m.rail("pullup", c) if m.pullup is not None else
                     m.voltage_range.at(c) if m.voltage_range is not None else m.rail("pulldown", c)
                     for c in CORNERS])[cidx]

    def arr(x):
        return np.ascontiguousarray(np.broadcast_to(np.asarray(x, dtype=float), (n,)))
    if part.ref_load is not None:
        r, v, c = part.ref_load.r, part.ref_load.v, part.ref_load.c
    elif m.rref is not None:
        r, v, c = m.rref, (m.vref or 0.0), (m.cref or 0.0)
    else:
        # push-pull: mid-rail; open drain: a pull-up to the supply; open source: a pull-down to 0 V
        v = 0.5 * rail if (m.pullup is not None and m.pulldown is not None) else (rail if m.pullup is None else 0.0)
        r, c = m.ramp.r_load, 0.0
    if part.v_meas is not None:
        vm = part.v_meas
    elif m.vmeas is not None:
        vm = m.vmeas
    else:
        vm = 0.5 * rail
    return arr(r), arr(v), arr(c), arr(vm)


def t_ref_ibis(design, driver: str, edge: str, n: int, net) -> np.ndarray:
    """Timing reference [s] per variant of an IBIS driver (``net``: its flattened netlist, for the devices)."""
    devs = net.devices
    d = int(np.flatnonzero(devs.dev_drive)[0])
    part = design.parts[design.tap(driver).part]
    keys = design.structure.part_keys[part.name]
    cidx = corners_of(design, part)
    c_die = part.c_pin if "c_pin" in keys else np.array([part.ibis.model.c_comp.at(c) for c in CORNERS])[cidx]
    c_die = np.ascontiguousarray(np.broadcast_to(np.asarray(c_die, dtype=float), (n,)))
    r, v, c, vm = reference(design, driver, edge)
    dt = net.dt / 4
    span = float(np.max(devs.k_t)) + 10 * float(np.max(r * (c_die + c))) + 2e-9
    steps = int(min(span / dt, 2_000_000)) + 2
    # variants that share corner, die capacitance and reference load share the timing reference
    # (a sweep over the bus's lines has one or three distinct rows): compute each distinct row once
    rows = np.stack([devs.dev_corner[d].astype(float), c_die, r, v, c, vm], axis=1)
    uniq, inverse = np.unique(rows, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    first = np.array([int(np.flatnonzero(inverse == k)[0]) for k in range(uniq.shape[0])])
    sub = devs._replace(dev_corner=np.ascontiguousarray(devs.dev_corner[:, first]))
    part_out = np.empty(first.shape[0])
    ref_times_nl(sub, d, np.ascontiguousarray(c_die[first]), np.ascontiguousarray(r[first]),
                 np.ascontiguousarray(v[first]), np.ascontiguousarray(c[first]), np.ascontiguousarray(vm[first]),
                 edge == "rise", dt, steps, part_out)
    out = part_out[inverse]
    if not np.all(np.isfinite(out)):
        k = int(np.flatnonzero(~np.isfinite(out))[0])
        raise SimulationError(f"{design.source}: driver {driver}, {edge} edge: the IBIS buffer into its reference "
                              f"load ({r[k]:g} ohm to {v[k]:g} V) never crosses its measurement level {vm[k]:g} V "
                              "(give ref_load or v_meas in the part table)")
    return out
