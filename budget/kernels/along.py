"""Numba kernels of the space-time picture: the voltage inside every lossless line section.

Private kernels on flat arrays, used by :mod:`budget.along` after a normal
transient run (:func:`budget.kernels.transient.run_block`) that recorded every
node's voltage.  They read the engine's results; they never change them.

Method (F. H. Branin, "Transient analysis of lossless transmission lines",
Proc. IEEE 55(11), 1967; the same picture as Bergeron's method): on a lossless
line of impedance Z0 and delay TD the voltage is the sum of two waves,
v(x, t) = f(t - x/c) + g(t + x/c).  In the engine's variables the wave that
leaves end a at time t is w_a(t) = 2 v_a(t)/Z0 - h_a(t) with h_a(t) = w_b(t - TD)
(Branin's history current), and the forward voltage wave at end a is
(v_a + Z0 i_a)/2 = Z0 w_a/2, the backward one (v_a - Z0 i_a)/2 = Z0 h_a/2
(D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley 2012, section 2.1 --
from memory).  So at the fraction xi = x/length from end a,

    v(xi, t) = Z0/2 * (w_a(t - xi TD) + w_b(t - (1 - xi) TD)),

which is v_a at xi = 0 and v_b at xi = 1.

:func:`replay_line_waves` recomputes w_a and w_b from the recorded end
voltages with the engine's own recursion and interpolation weights (so they
are the engine's history values, up to rounding); :func:`interior_voltages`
evaluates the formula above, interpolating w between samples with the
engine's 4-point Lagrange stencil (linear for delays under two steps).
Before t = 0 every wave holds its DC value.
"""
from __future__ import annotations

import math

import numpy as np

from ..jit import kernel


@kernel
def replay_line_waves(v_rec, line_a, line_b, gz, w0_a, w0_b, qmin, ntap, tap_off, wts, w_a, w_b):
    """The waves leaving both ends of every line section at every step, from recorded voltages.

    v_rec[step, node] [V]: node voltages of one variant at every step (step 0 =
    the DC state the run started from); line_a, line_b [line]: end nodes;
    gz[line] = 1/Z0 [S]; w0_a, w0_b [line] [A]: the DC waves (v/Z0 + i at a,
    v/Z0 - i at b, i the DC current into end a); qmin, ntap, tap_off, wts:
    the interpolation taps and weights of
    :func:`budget.kernels.transient._lagrange_weights` for this variant (lane 0).
    Fills w_a[step, line], w_b[step, line] [A]: w = 2 v/Z0 - h, with
    h_a(step) = sum_j wts[tap_off + j] * w_b(step - qmin - j) -- the engine's
    recursion (Branin 1967), in the engine's order of operations.
    """
    n_steps = v_rec.shape[0]
    for k in range(line_a.shape[0]):
        w_a[0, k] = w0_a[k]
        w_b[0, k] = w0_b[k]
    for step in range(1, n_steps):
        for k in range(line_a.shape[0]):
            ha = 0.0
            hb = 0.0
            for j in range(ntap[k]):
                s = step - qmin[k] - j
                wt = wts[tap_off[k] + j, 0]
                if s >= 0:
                    hb += wt * w_a[s, k]
                    ha += wt * w_b[s, k]
                else:
                    hb += wt * w0_a[k]
                    ha += wt * w0_b[k]
            w_a[step, k] = 2.0 * v_rec[step, line_a[k]] * gz[k] - ha
            w_b[step, k] = 2.0 * v_rec[step, line_b[k]] * gz[k] - hb


@kernel
def _stencil(d, idx, wt):
    """Samples back (idx[0..3]) and weights (wt[0..3]) of a delay of d steps; returns their count.

    The engine's rule (:func:`budget.kernels.transient._lagrange_weights`):
    d = q + f, q = floor(d), f in [0, 1); 4-point Lagrange over q-1 .. q+2 steps
    back when q >= 2, linear over q, q+1 otherwise.
    """
    q = int(math.floor(d + 1e-9))
    f = d - q
    if f < 0.0:
        f = 0.0
    if q >= 2:
        idx[0] = q - 1
        idx[1] = q
        idx[2] = q + 1
        idx[3] = q + 2
        wt[0] = -f * (f - 1.0) * (f - 2.0) / 6.0
        wt[1] = (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0
        wt[2] = -(f + 1.0) * f * (f - 2.0) / 2.0
        wt[3] = (f + 1.0) * f * (f - 1.0) / 6.0
        return 4
    idx[0] = q
    idx[1] = q + 1
    wt[0] = 1.0 - f
    wt[1] = f
    return 2


@kernel
def interior_voltages(w_a, w_b, w0_a, w0_b, k, z0, td_steps, xi, out):
    """Voltage [V] at fractions xi[p] of line section k at every step: out[p, step].

    w_a, w_b [step, line] [A]: from :func:`replay_line_waves`; w0_a, w0_b
    [line] [A]: their DC values (used before step 0); z0 [ohm], td_steps: the
    section's impedance and its delay in time steps; xi [p] in [0, 1], from end a.
    v(xi, t) = Z0/2 (w_a(t - xi TD) + w_b(t - (1 - xi) TD)) (Branin 1967; see
    the module docstring).
    """
    n_steps = w_a.shape[0]
    ia = np.zeros(4, dtype=np.int64)
    ib = np.zeros(4, dtype=np.int64)
    wa = np.zeros(4)
    wb = np.zeros(4)
    for p in range(xi.shape[0]):
        na = _stencil(xi[p] * td_steps, ia, wa)
        nb = _stencil((1.0 - xi[p]) * td_steps, ib, wb)
        for step in range(n_steps):
            fa = 0.0
            for j in range(na):
                s = step - ia[j]
                fa += wa[j] * (w_a[s, k] if s >= 0 else w0_a[k])
            fb = 0.0
            for j in range(nb):
                s = step - ib[j]
                fb += wb[j] * (w_b[s, k] if s >= 0 else w0_b[k])
            out[p, step] = 0.5 * z0 * (fa + fb)
