"""Python API of the bus engine: pin waveforms of a design for one driver and edge."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import SimulationError
from .kernels import transient as tk
from .model import Design
from .netlist import Netlist, flatten
from .run_blocks import run_netlist   # noqa: F401 -- re-exported: simulate.run_netlist is public

# The late waveform must be within this fraction of the swing of the DC
# operating point, or the automatic window is doubled (at most MAX_EXTENSIONS times).
SETTLED_FRACTION = 0.005
MAX_EXTENSIONS = 4


@dataclass(frozen=True)
class Waveforms:
    """Pin (die-node) waveforms of every tap for one driver and one edge.

    t [s] starts at the start of the driver's ramp (t = 0); v [V] has one
    column per tap in ``taps`` order; v_start / v_end [V] are the DC levels of
    every tap in the driver's starting and final state (so for a rising edge
    v_start is the low level and v_end the high level).
    """
    t: np.ndarray
    v: np.ndarray
    taps: tuple
    driver: str
    edge: str
    v_start: np.ndarray
    v_end: np.ndarray
    dt: float
    notes: tuple = field(default_factory=tuple)

    def __getitem__(self, tap: str) -> np.ndarray:
        """Waveform [V] at tap ``tap``'s die node."""
        return self.v[:, self.index(tap)]

    def index(self, tap: str) -> int:
        try:
            return self.taps.index(tap)
        except ValueError:
            from .errors import ArgumentError
            raise ArgumentError(f"unknown tap {tap!r}; taps are: {', '.join(self.taps)}") from None

    @property
    def v_low(self) -> np.ndarray:
        """DC level [V] of every tap with the driver in its low state."""
        return self.v_start if self.edge == "rise" else self.v_end

    @property
    def v_high(self) -> np.ndarray:
        """DC level [V] of every tap with the driver in its high state."""
        return self.v_end if self.edge == "rise" else self.v_start


def check_status(status, net: Netlist, design: Design):
    """Raise SimulationError with a physical explanation for a non-zero kernel status."""
    bad = np.flatnonzero(status != tk.STATUS_OK)
    if bad.size == 0:
        return
    code = int(status[bad[0]])
    where = f"{design.source}: driver {net.driver}, {net.edge} edge"
    if net.n_variants > 1:
        where += f", variant {int(bad[0])}"
    if code == tk.STATUS_DC_SINGULAR:
        raise SimulationError(f"{where}: the DC operating point is undefined; part of the network has no "
                              "resistive path to ground (add r_in, a termination, or a driver)")
    if code == tk.STATUS_CLUSTER_SINGULAR:
        raise SimulationError(f"{where}: a lumped part of the network gave a singular nodal matrix")
    if code == 4:   # budget.kernels.nonlinear.STATUS_NL_NO_CONVERGENCE
        from .kernels import nonlinear as nk
        raise SimulationError(f"{where}: Newton's method on the IBIS buffers did not converge (tolerance "
                              f"{nk.NEWTON_TOL:g} V, at most {nk.NEWTON_MAX_ITER} iterations a step, "
                              f"{nk.DC_MAX_ITER} at the DC point); try a smaller dt")
    raise SimulationError(f"{where}: the transient produced non-finite voltages (status {code})")


def simulate(design: Design, driver: str, edge: str = "rise", *, dt: float | None = None,
             t_stop: float | None = None) -> Waveforms:
    """Pin waveforms of every tap when tap ``driver`` drives an ``edge`` ("rise" or "fall").

    Parameters
    ----------
    design : Design
        From :func:`budget.load` / :func:`budget.loads` (scalar values only).
    driver : str
        Name of the driving tap; its part must be able to drive.
    edge : str
        "rise" (low -> high) or "fall".
    dt : float, optional
        Time step [s]; default: the design's ``bus.dt`` or the automatic step.
    t_stop : float, optional
        Window [s]; default: the design's ``bus.t_stop`` or an automatic window,
        doubled (up to 4 times) until the late waveform has settled to within
        0.5 % of the swing of the DC operating point.

    Returns
    -------
    Waveforms
    """
    if design.batch_size is not None:
        from .errors import ArgumentError
        raise ArgumentError("simulate() takes a design with scalar values; use budget.sweep for arrays")
    auto_window = t_stop is None and design.bus.t_stop is None
    notes = []
    for attempt in range(MAX_EXTENSIONS + 1):
        net = flatten(design, driver, edge, dt=dt, t_stop=t_stop)
        waves, dc, status = run_netlist(net)
        check_status(status, net, design)
        v = waves[:, :, 0]
        v_start = dc[0, net.out_node, 0]
        v_end = dc[1, net.out_node, 0]
        swing = float(np.max(np.abs(v_end - v_start))) or 1.0
        late = np.max(np.abs(v[-1] - v_end))
        if not auto_window or late <= SETTLED_FRACTION * swing or attempt == MAX_EXTENSIONS:
            if auto_window and late > SETTLED_FRACTION * swing:
                notes.append(f"after {net.t[-1] * 1e9:.3g} ns the pins are still "
                             f"{100 * late / swing:.2g} % of the swing from their DC levels")
            break
        t_stop = net.t[-1] * 2
        notes.append(f"window extended to {t_stop * 1e9:.3g} ns for the waveforms to settle")
    return Waveforms(t=net.t, v=np.ascontiguousarray(v), taps=net.taps, driver=driver, edge=edge,
                     v_start=v_start.copy(), v_end=v_end.copy(), dt=net.dt,
                     notes=tuple(net.notes) + tuple(notes))
