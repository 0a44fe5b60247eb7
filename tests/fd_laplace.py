"""An independent reference for planar lines: a finite-difference Laplace solver (test helper).

Quasi-static TEM: the capacitance per length C of the strips with the dielectric and C_air
without it give Z0 = 1/(c sqrt(C C_air)) and er_eff = C/C_air (e.g. Pozar 2012 section 3.8).
Uniform square grid of step `cell`, zero-thickness strips on a grid row, a closed box of
grounded walls (shielding, far from the strips), 5-point finite-volume stencil with the
permittivity of each cell, sparse LU (scipy).  Grid and box errors are a few per cent for
absolute values but largely cancel in ratios taken on the same grid (coupled / single line),
which is how the tests use it.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

C_LIGHT = 299_792_458.0
EPS0 = 8.8541878128e-12


def _capacitances(eps_cells, strips, ny, nx):
    """Charge per unit length [C/m] on strip 0 for each drive pattern, per volt; eps_cells[j] below row j+1."""
    n = ny * nx
    idx = np.arange(n).reshape(ny, nx)
    fixed = np.zeros((ny, nx), dtype=bool)
    fixed[0, :] = fixed[-1, :] = True
    fixed[:, 0] = fixed[:, -1] = True
    strip_of = -np.ones((ny, nx), dtype=int)
    for k, (row, c0, c1) in enumerate(strips):
        strip_of[row, c0:c1 + 1] = k
        fixed[row, c0:c1 + 1] = True
    e = np.asarray(eps_cells)
    # coefficients from each free node to its four neighbours: the permittivity of the cells each face
    # crosses (the cell row above, below, or the mean of both for the side faces)
    j, i = np.nonzero(~fixed)
    up, down = e[j], e[j - 1]
    side = 0.5 * (e[j] + e[j - 1])
    centre = idx[j, i]
    diag = up + down + 2 * side
    neighbours = [((j + 1, i), up), ((j - 1, i), down), ((j, i + 1), side), ((j, i - 1), side)]
    free_pos = -np.ones(n, dtype=int)
    free_pos[centre] = np.arange(centre.size)
    a_rows, a_cols, a_vals = [np.arange(centre.size)], [np.arange(centre.size)], [diag]
    coupling = []  # (free row, strip index, coefficient) for the right-hand side
    for (jj, ii), coef in neighbours:
        nb = idx[jj, ii]
        is_free = free_pos[nb] >= 0
        a_rows.append(np.nonzero(is_free)[0])
        a_cols.append(free_pos[nb[is_free]])
        a_vals.append(-coef[is_free])
        s_of = strip_of[jj, ii]
        for k in range(len(strips)):
            m = s_of == k
            coupling.append((np.nonzero(m)[0], k, coef[m]))
    a = sp.csc_matrix((np.concatenate(a_vals), (np.concatenate(a_rows), np.concatenate(a_cols))),
                      shape=(centre.size, centre.size))
    lu = spla.splu(a)

    def charge(volts):
        rhs = np.zeros(centre.size)
        for r, k, coef in coupling:
            np.add.at(rhs, r, coef * volts[k])
        v = np.zeros(n)
        v[centre] = lu.solve(rhs)
        for k, (row, c0, c1) in enumerate(strips):
            v[idx[row, c0:c1 + 1]] = volts[k]
        vv = v.reshape(ny, nx)
        # Gauss: charge on strip 0 = sum of the fluxes leaving its nodes
        row, c0, c1 = strips[0]
        q = 0.0
        for c in range(c0, c1 + 1):
            v0 = vv[row, c]
            q += e[row] * (v0 - vv[row + 1, c]) + e[row - 1] * (v0 - vv[row - 1, c])
            q += 0.5 * (e[row] + e[row - 1]) * ((v0 - vv[row, c + 1]) + (v0 - vv[row, c - 1]))
        return EPS0 * q

    return charge


def microstrip_fd(w_cells, h_cells, er, gap_cells=None, margin=8.0, top=8.0):
    """(z, er_eff) of a single microstrip, or ((z_even, z_odd), (er_even, er_odd)) with a gap [ohm], [-].

    w_cells, h_cells, gap_cells: strip width, substrate height and gap in grid cells; margin, top:
    side and top walls in units of h.
    """
    ny = int(h_cells * (1 + top)) + 1
    span = 2 * w_cells + gap_cells if gap_cells is not None else w_cells
    side = int(margin * h_cells)
    nx = span + 2 * side + 1
    row = h_cells
    if gap_cells is None:
        strips = [(row, side, side + w_cells)]
    else:
        strips = [(row, side, side + w_cells), (row, side + w_cells + gap_cells, side + 2 * w_cells + gap_cells)]
    out = []
    for eps in (er, 1.0):
        cells = np.where(np.arange(ny - 1) < h_cells, eps, 1.0)
        charge = _capacitances(cells, strips, ny, nx)
        if gap_cells is None:
            out.append((charge([1.0]),))
        else:
            out.append((charge([1.0, 1.0]), charge([1.0, -1.0])))
    zs, es = [], []
    for c, c_air in zip(*out):
        zs.append(1.0 / (C_LIGHT * np.sqrt(c * c_air)))
        es.append(c / c_air)
    if gap_cells is None:
        return zs[0], es[0]
    return tuple(zs), tuple(es)
