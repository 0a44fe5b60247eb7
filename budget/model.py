"""Typed, immutable model of a bus design.

A :class:`Design` is made of plain frozen dataclasses.  Every numeric value is
in SI base units and lives in one flat, ordered table of *parameters* keyed by
dotted paths into the design file ("lines.trunk.z0", "parts.xcvr.c_pin",
"segment.0.length", "tap.U1.stub.length", "termination.1.r"...).  Changing a
value (a tolerance corner, a measured value on the production line, a sweep)
goes through :meth:`Design.with_values`, which re-validates the physics.

Values may be numpy arrays of one common length instead of floats: that is how
a batch of variants flows through :mod:`budget.netlist` in one pass.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np


C0 = 299_792_458.0  # speed of light in vacuum [m/s] (SI definition)

ROLES = ("driver", "receiver", "transceiver")
SIGNALING = ("single-ended", "differential")
TERMINATION_TYPES = ("parallel", "thevenin", "rc", "series")


@dataclass(frozen=True)
class RefLoad:
    """Timing reference load of a driver: r [ohm] to v [V] in parallel with c [F]."""
    r: float
    v: float
    c: float


@dataclass(frozen=True)
class Part:
    """A device model, referenced by taps.

    v_high, v_low [V]: driver open-circuit levels; r_high, r_low [ohm]: output
    resistance in each state; c_pin [F]; l_pkg [H] (0 = none); r_in [ohm]
    (inf = none); vih, vil [V] receiver thresholds; v_max, v_min [V] absolute
    limits (None = not given); ref_load: timing reference load (None = ideal
    ramp); v_meas [V] timing measurement level (None = 50 % of the swing).
    """
    name: str
    role: str
    v_high: float | None
    v_low: float | None
    r_high: float | None
    r_low: float | None
    c_pin: float
    l_pkg: float
    r_in: float
    vih: float | None
    vil: float | None
    v_max: float | None = None
    v_min: float | None = None
    ref_load: RefLoad | None = None
    v_meas: float | None = None

    @property
    def can_drive(self) -> bool:
        return self.role in ("driver", "transceiver")

    @property
    def can_receive(self) -> bool:
        return self.role in ("receiver", "transceiver")


@dataclass(frozen=True)
class LineType:
    """A line cross-section: z0 [ohm], delay [s/m], r_dc [ohm/m] (0 = lossless)."""
    name: str
    z0: float
    delay: float
    r_dc: float = 0.0


@dataclass(frozen=True)
class Segment:
    """A piece of line of type ``line`` and ``length`` [m] between nodes a and b."""
    index: int
    a: str
    b: str
    line: str
    length: float


@dataclass(frozen=True)
class Stub:
    """A tap's stub: a line of type ``line`` and ``length`` [m]."""
    line: str
    length: float


@dataclass(frozen=True)
class Tap:
    """A device on the bus: bus node -- stub -- series R -- pad -- l_pkg -- die."""
    name: str
    node: str
    part: str
    stub: Stub | None = None


@dataclass(frozen=True)
class Termination:
    """A termination.

    type "parallel": r [ohm] from ``node`` to voltage v [V];
    "thevenin": r_up [ohm] to v_up [V] and r_down [ohm] to ground at ``node``;
    "rc": r [ohm] in series with c [F] from ``node`` to ground;
    "series": r [ohm] between tap ``tap``'s stub (or bus node) and its pad.
    """
    index: int
    type: str
    node: str | None = None
    tap: str | None = None
    r: float | None = None
    v: float | None = None
    c: float | None = None
    r_up: float | None = None
    r_down: float | None = None
    v_up: float | None = None


@dataclass(frozen=True)
class Bus:
    name: str
    signaling: str
    t_stop: float | None
    dt: float | None


@dataclass(frozen=True)
class Edge:
    """10-90 % rise and fall times [s] of the driver's ramp."""
    rise: float
    fall: float


@dataclass(frozen=True)
class Budget:
    """Noise-budget allocations.

    allocations: name -> (value, unit) where unit is "V" or "swing" (a
    fraction of the receiver's swing); settle_band [-] fraction of swing;
    min_margin [V].
    """
    allocations: Mapping[str, tuple[float, str]] = field(default_factory=dict)
    settle_band: float = 0.05
    min_margin: float = 0.0


@dataclass(frozen=True)
class Design:
    """A whole bus design; build it with :func:`budget.load` or :func:`budget.loads`.

    ``params`` maps every numeric design-file value, by dotted path, to its
    value in SI base units; the typed views (``parts``, ``lines``, ``taps``...)
    are derived from it.
    """
    source: str
    bus: Bus
    edge: Edge
    parts: Mapping[str, Part]
    lines: Mapping[str, LineType]
    segments: tuple[Segment, ...]
    taps: tuple[Tap, ...]
    terminations: tuple[Termination, ...]
    tolerances: Mapping[str, tuple[float, float]]
    budget: Budget
    params: Mapping[str, float]
    # how each line's delay was given: "delay" [s/m] or "er_eff" [-]
    delay_keys: Mapping[str, str] = field(default_factory=dict)
    # parsed file structure (names, references, units of each path); used to rebuild
    structure: object = field(default=None, repr=False, compare=False)

    # -- lookups ---------------------------------------------------------
    def tap(self, name: str) -> Tap:
        for t in self.taps:
            if t.name == name:
                return t
        from .errors import ArgumentError
        raise ArgumentError(f"unknown tap {name!r}; taps are: {', '.join(t.name for t in self.taps)}")

    @property
    def tap_names(self) -> tuple[str, ...]:
        return tuple(t.name for t in self.taps)

    @property
    def drivers(self) -> tuple[str, ...]:
        """Names of the taps whose part can drive, in file order."""
        return tuple(t.name for t in self.taps if self.parts[t.part].can_drive)

    @property
    def receivers(self) -> tuple[str, ...]:
        """Names of the taps whose part can receive, in file order."""
        return tuple(t.name for t in self.taps if self.parts[t.part].can_receive)

    @property
    def nodes(self) -> tuple[str, ...]:
        """Bus node names in order of first appearance (segments, then taps)."""
        seen = {}
        for s in self.segments:
            seen.setdefault(s.a, None)
            seen.setdefault(s.b, None)
        for t in self.taps:
            seen.setdefault(t.node, None)
        return tuple(seen)

    @property
    def batch_size(self) -> int | None:
        """Length of the variant axis if some values are arrays, else None."""
        for v in self.params.values():
            if isinstance(v, np.ndarray) and v.ndim == 1:
                return v.shape[0]
        return None

    def with_values(self, values: Mapping[str, float], *, source: str | None = None) -> "Design":
        """Return a copy with some parameters replaced (SI units), re-validated.

        ``values`` maps dotted paths (see :attr:`params`) to floats or 1-D
        arrays of one common length (a batch of variants).  Unknown paths and
        non-physical values raise :class:`DesignError` naming the path.
        """
        from .design_file import rebuild

        return rebuild(self, values, source=source)


class FrozenDict(dict):
    """A read-only dict (picklable, unlike MappingProxyType, so designs travel to dask workers)."""

    def _readonly(self, *args, **kwargs):
        raise TypeError("design values are read-only; use Design.with_values()")

    __setitem__ = __delitem__ = clear = pop = popitem = setdefault = update = _readonly  # type: ignore

    def __reduce__(self):
        return (FrozenDict, (dict(self),))

    def __hash__(self):
        return id(self)


def frozen(mapping) -> Mapping:
    """Read-only copy of ``mapping``."""
    return FrozenDict(mapping)


__all__ = [
    "C0", "ROLES", "SIGNALING", "TERMINATION_TYPES", "RefLoad", "Part", "LineType", "Segment",
    "Stub", "Tap", "Termination", "Bus", "Edge", "Budget", "Design", "frozen",
]
