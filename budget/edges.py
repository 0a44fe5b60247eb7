"""The driver's two edges: their names and the duration of its linear ramp."""
from __future__ import annotations

import numpy as np

RISE = "rise"   # the driver goes from its low state to its high state
FALL = "fall"   # from high to low
EDGES = (RISE, FALL)


def ramp_time(design, edge: str):
    """0-100 % duration [s] of the driver's linear ramp for ``edge`` (= 10-90 % time / 0.8).

    A linear ramp covers 10-90 % in 0.8 of its 0-100 % time.  Returns a float
    array (scalar or over the design's variants).
    """
    t = design.edge.rise if edge == RISE else design.edge.fall
    return np.asarray(t, dtype=float) / 0.8
