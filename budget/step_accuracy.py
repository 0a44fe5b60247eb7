"""The automatic time step, chosen by a measured accuracy: a two-step estimate on the envelope.

The structural rules of :func:`budget.line_model.choose_dt` give the largest step
worth trying (``h0``: STEPS_PER_RAMP samples over the ramp, STEPS_PER_LC_PERIOD
a package resonance period, no lumping of a line longer than ramp/128).  Steps
h_k = h0 / 2^(k/2) are then tried in turn, largest first: the bus is simulated
at h_k and at h_k / 2 and the difference

    d(h) = max over taps of  max_t |v_h(t) - v_h/2(t)| / swing,  and of the
           difference of the sampled extremes max v, min v (peak sampling)

estimates the error of step h.  The transient's errors (trapezoidal companions,
Dommel 1969; Lagrange interpolation of the line histories; sampled ramp corners)
shrink at least as h (mostly h^2), so e(h) = d(h) * 4/3 for a second-order error
(Richardson extrapolation: e(h) - e(h/2) = (1 - 1/4) e(h); L. F. Richardson,
"The deferred approach to the limit", Phil. Trans. R. Soc. A 226, 1927) and at
most 2 d(h) for a first-order one.  The first h_k with e(h_k) <= TARGET_ERROR
(0.5 % of the swing: half the 1 % accuracy target, so a first-order error still
stays under 0.75 %) is the step.

The estimate runs the tolerance envelope's two extreme variants (every toleranced
value at its minimum, and at its maximum: the fastest and slowest resonances and
delays) in one block, for up to three drivers (the first, middle and last that
can drive), over the same window as the simulation.  It costs a few simulations
per (design, edge) and is remembered for the process, so every variant, corner
and measured unit inside the box shares the step, as before.

Measured against the frequency-domain references (tests/test_reference_skrf.py,
tests/test_step_accuracy.py): see docs/metrics.md "Time step".
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from .errors import ArgumentError
from .line_model import choose_dt

# Accepted estimated error [-] of the swing (the accuracy target is 1 %).
TARGET_ERROR = 0.005
# Richardson factor of a second-order method: e(h) = d(h, h/2) * 4/3.
RICHARDSON = 4.0 / 3.0
# Steps tried: h0 / 2^(k/2), k = 0 .. MAX_HALVINGS_X2 (down to h0 / 8).
MAX_HALVINGS_X2 = 6
# Drivers the estimate is run for (first, middle, last).
MAX_DRIVERS = 3


class StepChoice(NamedTuple):
    """The automatic step of one (envelope, edge): dt [s]; h0 [s] the rules' largest step (the
    design's ``bus.dt`` when it gives one); error [-] the estimated error of dt (fraction of the
    swing; nan if not estimated); verified: the estimate was made and met TARGET_ERROR; note: for
    the waveform notes, why an automatic step is not verified (empty otherwise)."""
    dt: float
    h0: float
    error: float
    verified: bool
    note: str = ""


_CHOICES: dict = {}


def estimate_drivers(design) -> list:
    """The taps the estimate is run for: up to MAX_DRIVERS of the design's drivers, ends first."""
    drv = list(design.drivers)
    if len(drv) <= MAX_DRIVERS:
        return drv
    return [drv[0], drv[len(drv) // 2], drv[-1]]


def _run(flatten, env, driver, edge, dt):
    from .kernels import transient as tk
    from .run_blocks import run_netlist   # the linear or, with IBIS buffers, the non-linear kernel

    net = flatten(env, driver, edge, dt=dt, envelope=env)
    waves, dc, status = run_netlist(net)
    if np.any(status != tk.STATUS_OK) or not np.all(np.isfinite(waves)):
        return None
    swing = np.abs(dc[1, net.out_node] - dc[0, net.out_node])       # [taps, variants]
    return waves, np.maximum(swing, 1e-3 * swing.max(initial=0.0) + 1e-300)


def difference(coarse, fine) -> float:
    """d(h) [-]: largest difference of a run at h and one at h/2 on the common samples, and of their
    sampled extremes, as a fraction of each tap's swing (coarse, fine: (waves, swing) of :func:`_run`)."""
    wc, swing = coarse
    wf = fine[0]
    n = min(wc.shape[0], (wf.shape[0] + 1) // 2)
    d = np.max(np.abs(wc[:n] - wf[0:2 * n:2]), axis=0)
    d = np.maximum(d, np.abs(wc.max(axis=0) - wf.max(axis=0)))
    d = np.maximum(d, np.abs(wc.min(axis=0) - wf.min(axis=0)))
    return float(np.max(d / swing))


def choose(env, edge: str, flatten) -> StepChoice:
    """The automatic step for ``edge`` of the envelope design ``env`` (see module docstring).

    flatten: :func:`budget.netlist.flatten` (passed in: this module sits below it)."""
    key = (env, edge)
    hit = _CHOICES.get(key)
    if hit is not None:
        return hit
    if env.bus.dt is not None:
        h0 = choose_dt(env, edge)
        return StepChoice(h0, h0, math.nan, False)          # the design's own step: no estimate
    h0 = choose_dt(env, edge)
    drivers = estimate_drivers(env)
    runs: dict = {}

    def run(k, driver):
        if (k, driver) not in runs:
            try:
                runs[(k, driver)] = _run(flatten, env, driver, edge, h0 / 2 ** (k / 2))
            except ArgumentError:          # the finer run exceeds a stated limit (steps, block size)
                runs[(k, driver)] = "limit"
        return runs[(k, driver)]

    choice = None
    for k in range(MAX_HALVINGS_X2 + 1):
        h = h0 / 2 ** (k / 2)
        err, limited = 0.0, False
        for driver in drivers:
            a, b = run(k, driver), run(k + 2, driver)
            if isinstance(a, str) or isinstance(b, str):
                limited = True
                break
            if a is None or b is None:     # a non-finite or singular run: the simulation will say why
                continue
            err = max(err, RICHARDSON * difference(a, b))
        if limited:
            choice = StepChoice(h, h0, math.nan, False,
                                f"step {h * 1e12:.3g} ps not verified: a run at half of it exceeds a stated limit")
            break
        if err <= TARGET_ERROR:
            choice = StepChoice(h, h0, err, True)
            break
    if choice is None:
        h = h0 / 2 ** ((MAX_HALVINGS_X2 + 2) / 2)
        choice = StepChoice(h, h0, err / 4, False,
                            f"the step estimate did not reach {100 * TARGET_ERROR:.2g} % of the swing by "
                            f"{h0 / h:.3g}x below the rules' step; using {h * 1e12:.3g} ps "
                            f"(estimated {100 * err / 4:.2g} %)")
    if len(_CHOICES) > 256:
        _CHOICES.clear()
    _CHOICES[key] = choice
    return choice

