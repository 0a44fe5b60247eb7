"""When a sweep may end a simulation window early: the guard time of the settle rule.

A sweep block ends before its window does once every lane's every metric
stream is final (:func:`budget.kernels.stream.settled_final`): each receiver
pin is valid, inside its settle band, and no sample of the last guard time
changed any of its metric states.  The safety argument and its
limits are in docs/metrics.md, "When a sweep ends a window early".
``simulate`` never ends early: it returns whole waveforms.
"""
from __future__ import annotations

import numpy as np

from .edges import ramp_time
from .line_model import vmax

__all__ = ["settle_guard", "GUARD_PASSES", "GUARD_RC_TAUS"]

# The guard: this many one-way passes over the longest path between any two
# nodes (bounded by every segment in series plus the two longest stubs), so a
# wave still travelling anywhere on the bus reaches a tap's stub and its pin
# inside the guard;
GUARD_PASSES = 2
# plus this many time constants of the slowest RC termination and two ramps.
GUARD_RC_TAUS = 3
GUARD_MIN = 1e-9  # [s]


def settle_guard(design, edge: str) -> float:
    """Guard time [s]: how long no sample may change a metric state before a block may end.

    design: the tolerance envelope (or any design; array values: their largest).
    2 x (the sum of every segment's delay + the two longest stub delays: a bound
    on the longest path between two pins) + 2 ramps + 3 x the slowest RC
    termination's time constant; at least 1 ns.
    """
    total_td = 0.0
    for s in design.segments:
        total_td += vmax(np.asarray(design.lines[s.line].delay) * s.length)
    stubs = sorted(vmax(np.asarray(design.lines[t.stub.line].delay) * t.stub.length)
                   for t in design.taps if t.stub is not None)
    total_td += sum(stubs[-2:])
    tau = 0.0
    for term in design.terminations:
        if term.type == "rc":
            tau = max(tau, vmax(np.asarray(term.r) * term.c))
    return max(GUARD_PASSES * total_td + 2 * vmax(ramp_time(design, edge)) + GUARD_RC_TAUS * tau, GUARD_MIN)
