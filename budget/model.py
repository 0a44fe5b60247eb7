"""Typed, immutable model of a bus design, validated when it is built.

A :class:`Design` is built in Python from plain frozen dataclasses, or read from
a design file by :func:`budget.load` (which only maps the file's tables onto
this constructor)::

    from budget.model import Design, Bus, Edge, Part, LineType, Segment, Tap, Stub, Termination
    d = Design(
        bus=Bus(name="demo"), edge=Edge(rise="1 ns", fall="1 ns"),
        parts={"xcvr": Part(role="transceiver", v_high="3.3 V", v_low="0 V", r_high="20 ohm",
                            r_low="20 ohm", c_pin="3 pF", vih="2 V", vil="0.8 V")},
        lines={"trunk": LineType(z0="50 ohm", delay="6.7 ns/m")},
        segments=[Segment("n0", "n1", "trunk", "10 cm")],
        taps=[Tap("U1", "n0", "xcvr"), Tap("U2", "n1", "xcvr", Stub("trunk", "1 cm"))],
        terminations=[Termination("parallel", node="n1", r="50 ohm", v="1.65 V")],
        tolerances={"lines.trunk.z0": "10%"}, noise_budget=Budget(allocations={"crosstalk": "100 mV"}),
    )

Values are unit strings or floats in SI base units.  Errors name the table and
key exactly as the design-file loader does ("<python>: [parts.xcvr] c_pin: ...").

Every numeric value lives in one flat, ordered table of *parameters* keyed by
dotted paths ("lines.trunk.z0", "parts.xcvr.c_pin", "segment.0.length",
"tap.U1.stub.length", "termination.1.r"...); the typed views (``parts``,
``lines``, ``taps``...) are derived from it.  :meth:`Design.with_values`
replaces values (floats, unit strings or 1-D arrays over a batch of variants)
and validates only the rules that read a changed value (:mod:`budget.validation`).

Designs compare equal when their content is equal (the ``source`` label is
provenance and does not count) and equal designs hash equal; batch designs
compare without raising.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from . import validation
from .errors import ArgumentError, DesignError
from .limits import listed
from .units import parse_quantity
from .validation import C0, RuleFailed

ROLES = ("driver", "receiver", "transceiver")
SIGNALING = ("single-ended", "differential")
TERMINATION_TYPES = ("parallel", "thevenin", "rc", "series")

# numeric keys of each kind of table and their dimension (the design-file schema uses them too)
DRIVE_KEYS = {"v_high": "voltage", "v_low": "voltage", "r_high": "resistance", "r_low": "resistance"}
RECEIVE_KEYS = {"vih": "voltage", "vil": "voltage"}
PART_COMMON = {"c_pin": "capacitance", "l_pkg": "inductance", "r_in": "resistance",
               "v_max": "voltage", "v_min": "voltage", "v_meas": "voltage"}
REF_LOAD_KEYS = {"r": "resistance", "v": "voltage", "c": "capacitance"}
LINE_KEYS = {"z0": "resistance", "delay": "delay_per_length", "er_eff": "dimensionless",
             "r_dc": "resistance_per_length"}
TERM_KEYS = {
    "parallel": {"node": None, "r": "resistance", "v": "voltage"},
    "thevenin": {"node": None, "r_up": "resistance", "r_down": "resistance", "v_up": "voltage"},
    "rc": {"node": None, "r": "resistance", "c": "capacitance"},
    "series": {"tap": None, "r": "resistance"},
}
BUDGET_NAMED = ("crosstalk", "supply_noise", "ground_shift", "receiver_offset", "reference_error", "other")

PYTHON_SOURCE = "<python>"


# ---------------------------------------------------------------------------
# equality and hashing that work with per-variant arrays

def freeze(v):
    """A hashable stand-in for ``v`` with the same equality (arrays by value, -0.0 == 0.0)."""
    if isinstance(v, np.ndarray):
        return ("array", v.shape, (np.asarray(v, dtype=float) + 0.0).tobytes())
    if isinstance(v, (float, int, np.floating, np.integer)) and not isinstance(v, bool):
        return float(v) + 0.0
    if isinstance(v, Mapping):
        return ("map", frozenset((k, freeze(x)) for k, x in v.items()))
    if isinstance(v, (tuple, list)):
        return ("seq", tuple(freeze(x) for x in v))
    if dataclasses.is_dataclass(v) and not isinstance(v, type):
        return (type(v).__name__, tuple(freeze(getattr(v, f.name)) for f in dataclasses.fields(v)
                                        if f.compare))
    return v


class _ByValue:
    """Equality and hash by content (see :func:`freeze`), for the model's dataclasses."""

    def __eq__(self, other):
        if type(other) is not type(self):
            return NotImplemented
        return freeze(self) == freeze(other)

    def __hash__(self):
        return hash(freeze(self))


class FrozenDict(dict):
    """A read-only dict (picklable, unlike MappingProxyType, so designs travel to dask workers)."""

    def _readonly(self, *args, **kwargs):
        raise TypeError("design values are read-only; use Design.with_values()")

    __setitem__ = __delitem__ = clear = pop = popitem = setdefault = update = _readonly  # type: ignore
    __ior__ = _readonly  # type: ignore

    def __reduce__(self):
        return (FrozenDict, (dict(self),))

    def __eq__(self, other):
        if not isinstance(other, Mapping):
            return NotImplemented
        return freeze(self) == freeze(other)

    def __ne__(self, other):
        eq = self.__eq__(other)
        return eq if eq is NotImplemented else not eq

    def __hash__(self):
        return hash(freeze(self))


def frozen(mapping) -> Mapping:
    """Read-only copy of ``mapping``."""
    return FrozenDict(mapping)


# ---------------------------------------------------------------------------
# the building blocks (inputs: unit strings or SI floats; views: SI floats or arrays)

@dataclass(frozen=True, eq=False)
class RefLoad(_ByValue):
    """Timing reference load of a driver: r [ohm] to v [V] (default 0) in parallel with c [F] (default 0)."""
    r: Any
    v: Any = None
    c: Any = None


@dataclass(frozen=True, eq=False, kw_only=True)
class Part(_ByValue):
    """A device model, referenced by taps.

    role: "driver", "receiver" or "transceiver".  v_high, v_low [V]: driver
    open-circuit levels; r_high, r_low [ohm]: output resistance in each state;
    c_pin [F]; l_pkg [H] (absent: 0, none); r_in [ohm] (absent: inf, none);
    vih, vil [V] receiver thresholds; v_max, v_min [V] absolute limits (None =
    not given); ref_load: timing reference load (None = ideal ramp); v_meas [V]
    timing measurement level (None = 50 % of the swing).  ibis: an
    :class:`budget.ibis_parts.IbisRef` (a buffer from an IBIS file instead of
    the linear driver keys; in a design's view the resolved
    :class:`budget.ibis_parts.IbisPart`).  ``name`` is filled in
    from the key of ``Design(parts=...)``.
    """
    role: str
    v_high: Any = None
    v_low: Any = None
    r_high: Any = None
    r_low: Any = None
    c_pin: Any = None
    l_pkg: Any = None
    r_in: Any = None
    vih: Any = None
    vil: Any = None
    v_max: Any = None
    v_min: Any = None
    ref_load: RefLoad | None = None
    v_meas: Any = None
    ibis: Any = None
    name: str | None = None

    @property
    def can_drive(self) -> bool:
        return self.role in ("driver", "transceiver")

    @property
    def can_receive(self) -> bool:
        return self.role in ("receiver", "transceiver")


@dataclass(frozen=True, eq=False, kw_only=True)
class LineType(_ByValue):
    """A line cross-section: z0 [ohm], delay [s/m] or er_eff [-] (one of them), r_dc [ohm/m] (absent: 0);
    or, instead of z0 and delay, ``geometry``: {"kind": one of budget.geometry.KINDS, and that kind's
    keys (lengths [m] or unit strings, er [-])}.

    In a design's view ``delay`` is always set (from er_eff if that was given:
    t_pd = sqrt(er_eff) / c, docs/references.md B2) and ``er_eff`` is set only if it was given;
    for a geometry line z0, delay and er_eff are all derived from the geometry (budget.geometry.derive;
    a differential design takes the pair's differential impedance) and ``geometry`` holds its SI values.
    """
    z0: Any = None
    delay: Any = None
    er_eff: Any = None
    r_dc: Any = None
    name: str | None = None
    geometry: Any = None


@dataclass(frozen=True, eq=False)
class Segment(_ByValue):
    """A piece of line of type ``line`` and ``length`` [m] between bus nodes ``a`` and ``b``."""
    a: str
    b: str
    line: str
    length: Any
    index: int | None = None


@dataclass(frozen=True, eq=False)
class Stub(_ByValue):
    """A tap's stub: a line of type ``line`` and ``length`` [m]."""
    line: str
    length: Any


@dataclass(frozen=True, eq=False)
class Tap(_ByValue):
    """A device on the bus: bus node -- stub -- series R -- pad -- l_pkg -- die."""
    name: str
    node: str
    part: str
    stub: Stub | None = None


@dataclass(frozen=True, eq=False)
class Termination(_ByValue):
    """A termination.

    type "parallel": r [ohm] from ``node`` to voltage v [V];
    "thevenin": r_up [ohm] to v_up [V] and r_down [ohm] to ground at ``node``;
    "rc": r [ohm] in series with c [F] from ``node`` to ground;
    "series": r [ohm] between tap ``tap``'s stub (or bus node) and its pad.
    """
    type: str
    node: str | None = None
    tap: str | None = None
    r: Any = None
    v: Any = None
    c: Any = None
    r_up: Any = None
    r_down: Any = None
    v_up: Any = None
    index: int | None = None


@dataclass(frozen=True, eq=False)
class Bus(_ByValue):
    """name (default: the source's file stem), signaling, optional t_stop [s] and dt [s]."""
    name: str | None = None
    signaling: str = "single-ended"
    t_stop: Any = None
    dt: Any = None


@dataclass(frozen=True, eq=False)
class Edge(_ByValue):
    """10-90 % rise and fall times [s] of the driver's ramp."""
    rise: Any
    fall: Any


@dataclass(frozen=True, eq=False)
class Budget(_ByValue):
    """Noise-budget allocations.

    allocations: name -> value; given as "100 mV", "5%" (of the receiver's
    swing), a float [V] or (value, "V" | "swing"); in a design's view always
    (value, unit) with unit "V" or "swing".  settle_band [-] fraction of swing
    (default 5 %); min_margin [V] (default 0).
    """
    allocations: Mapping[str, Any] = field(default_factory=dict)
    settle_band: Any = 0.05
    min_margin: Any = 0.0


NoiseBudget = Budget


@dataclass(frozen=True, eq=False)
class Structure(_ByValue):
    """Everything in a design except the numeric values: names, references, units, rules."""
    source: str
    bus_name: str
    signaling: str
    parts: Mapping[str, str]                 # part name -> role
    part_keys: Mapping[str, frozenset]       # part name -> numeric keys present
    lines: tuple[str, ...]
    delay_keys: Mapping[str, str]            # line -> "delay" | "er_eff" | "geometry"
    segments: tuple[tuple[str, str, str], ...]   # (from, to, line)
    taps: tuple[tuple[str, str, str, str | None], ...]  # (name, node, part, stub line)
    terminations: tuple[tuple[str, str | None, str | None], ...]  # (type, node, tap)
    dimensions: Mapping[str, str]            # param path -> dimension
    tolerances: Mapping[str, tuple[float, float]]
    budget: Budget
    geometry_kinds: Mapping[str, str] = field(default_factory=dict)   # geometry line -> its kind
    ibis: Mapping[str, Any] = field(default_factory=dict)   # part name -> IbisPart (parts from IBIS files)
    rules: tuple = field(default=(), compare=False, repr=False)
    rule_index: Mapping[str, tuple] = field(default_factory=dict, compare=False, repr=False)


# ---------------------------------------------------------------------------
# the design

class Design:
    """A whole bus design, validated when it is built (see the module docstring).

    Parameters (keyword only)
    -------------------------
    edge : Edge
    parts : mapping name -> Part
    taps : sequence of Tap (at least one)
    bus : Bus, optional
    lines : mapping name -> LineType
    segments : sequence of Segment
    terminations : sequence of Termination
    tolerances : mapping dotted path -> "10%" | "+/-" quantity | (min, max)
    noise_budget (or budget) : Budget
    source : str, names the design in errors (default "<python>")

    Attributes: ``params`` maps every numeric value, by dotted path, to its
    value in SI base units; ``tolerances`` maps paths to absolute (min, max);
    ``parts``, ``lines``, ``segments``, ``taps``, ``terminations``, ``bus``,
    ``edge``, ``noise_budget`` are views with SI values.
    """

    def __init__(self, *, edge: Edge, parts: Mapping[str, Part], taps, bus: Bus | None = None,
                 lines: Mapping[str, LineType] | None = None, segments=(), terminations=(),
                 tolerances: Mapping[str, Any] | None = None, noise_budget: Budget | None = None,
                 budget: Budget | None = None, source: str = PYTHON_SOURCE):
        if noise_budget is not None and budget is not None:
            raise ArgumentError("give noise_budget or its alias budget, not both")
        from .construction import construct, validate_new

        st, params = construct(source, bus, edge, parts, lines or {}, segments, taps, terminations,
                               tolerances or {}, noise_budget if noise_budget is not None else budget)
        validate_new(st, params)
        self._set_views(st, params)

    # -- construction from validated pieces -------------------------------
    @classmethod
    def _assemble(cls, st: Structure, params: Mapping[str, Any]) -> "Design":
        d = cls.__new__(cls)
        d._set_views(st, params)
        return d

    def _set_views(self, st: Structure, P: Mapping[str, Any]) -> None:
        put = object.__setattr__
        get = P.get
        put(self, "source", st.source)
        put(self, "structure", st)
        put(self, "bus", Bus(name=st.bus_name, signaling=st.signaling, t_stop=get("bus.t_stop"), dt=get("bus.dt")))
        put(self, "edge", Edge(rise=P["edge.rise"], fall=P["edge.fall"]))
        parts = {}
        for name, role in st.parts.items():
            t = f"parts.{name}"
            ref = None
            if f"{t}.ref_load.r" in P:
                ref = RefLoad(r=P[f"{t}.ref_load.r"], v=get(f"{t}.ref_load.v", 0.0), c=get(f"{t}.ref_load.c", 0.0))
            parts[name] = Part(
                name=name, role=role, v_high=get(f"{t}.v_high"), v_low=get(f"{t}.v_low"),
                r_high=get(f"{t}.r_high"), r_low=get(f"{t}.r_low"), c_pin=P[f"{t}.c_pin"],
                l_pkg=get(f"{t}.l_pkg", 0.0), r_in=get(f"{t}.r_in", math.inf), vih=get(f"{t}.vih"),
                vil=get(f"{t}.vil"), v_max=get(f"{t}.v_max"), v_min=get(f"{t}.v_min"), ref_load=ref,
                v_meas=get(f"{t}.v_meas"), ibis=st.ibis.get(name))
        put(self, "parts", frozen(parts))
        lines = {}
        for name in st.lines:
            t = f"lines.{name}"
            if st.delay_keys[name] == "geometry":
                lines[name] = _geometry_view(st, name, P)
                continue
            if st.delay_keys[name] == "delay":
                delay, er = P[f"{t}.delay"], None
            else:
                er = P[f"{t}.er_eff"]
                delay = np.sqrt(er) / C0  # docs/references.md B2: t_pd = sqrt(eps_eff)/c
                delay = float(delay) if np.ndim(delay) == 0 else delay
            lines[name] = LineType(name=name, z0=P[f"{t}.z0"], delay=delay, er_eff=er, r_dc=get(f"{t}.r_dc", 0.0))
        put(self, "lines", frozen(lines))
        put(self, "segments", tuple(Segment(a, b, ln, P[f"segment.{i}.length"], index=i)
                                    for i, (a, b, ln) in enumerate(st.segments)))
        put(self, "taps", tuple(Tap(name, node, part, None if stub is None else
                                    Stub(stub, P[f"tap.{name}.stub.length"]))
                                for name, node, part, stub in st.taps))
        terms = []
        for i, (typ, node, tap) in enumerate(st.terminations):
            t = f"termination.{i}"
            terms.append(Termination(typ, node=node, tap=tap, r=get(f"{t}.r"), v=get(f"{t}.v"), c=get(f"{t}.c"),
                                     r_up=get(f"{t}.r_up"), r_down=get(f"{t}.r_down"), v_up=get(f"{t}.v_up"),
                                     index=i))
        put(self, "terminations", tuple(terms))
        put(self, "tolerances", st.tolerances)
        put(self, "noise_budget", st.budget)
        put(self, "params", P if isinstance(P, FrozenDict) else frozen(P))
        put(self, "delay_keys", st.delay_keys)
        put(self, "_key", None)

    def __setattr__(self, name, value):
        raise AttributeError(f"a Design is immutable (cannot set {name!r}); use Design.with_values()")

    __delattr__ = __setattr__  # type: ignore

    def __reduce__(self):
        return (Design._assemble, (self.structure, dict(self.params)))

    # -- equality ----------------------------------------------------------
    def _content(self):
        if self._key is None:
            st = self.structure
            key = freeze((replace(st, source=""), dict(self.params)))
            object.__setattr__(self, "_key", key)
        return self._key

    def __eq__(self, other):
        if not isinstance(other, Design):
            return NotImplemented
        return self is other or self._content() == other._content()

    def __hash__(self):
        return hash(self._content())

    def __repr__(self):
        n = self.batch_size
        return (f"Design({self.bus.name!r}, {len(self.taps)} taps, {len(self.params)} values"
                f"{f', {n} variants' if n else ''}, source={self.source!r})")

    @property
    def budget(self) -> Budget:
        """Alias of :attr:`noise_budget` (read only)."""
        return self.noise_budget

    # -- lookups ---------------------------------------------------------
    def tap(self, name: str) -> Tap:
        for t in self.taps:
            if t.name == name:
                return t
        raise ArgumentError(f"unknown tap {name!r}; taps are: {listed(t.name for t in self.taps)}")

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

    # -- changing values ---------------------------------------------------
    def with_values(self, values: Mapping[str, Any], *, source: str | None = None) -> "Design":
        """Return a copy with some parameters replaced, validating only what the change touches.

        ``values`` maps dotted paths (see :attr:`params`) to floats [SI], unit
        strings ("37 ohm", "1.8 pF") or 1-D arrays of one common length (a
        batch of variants; arrays of unit strings too).  Unknown paths,
        unreadable or implausible values and values that break a rule
        (positivity, v_high above v_low, thresholds the bus can reach...) raise
        :class:`DesignError` naming the path: ``source: [values] path: reason``.
        Every variant of a batch is checked at once (numpy).
        """
        st = self.structure
        src = source or st.source
        P = dict(self.params)
        n = None
        for path, value in values.items():
            if not isinstance(path, str) or path not in st.dimensions:
                raise DesignError(f"no numeric value at this path; known paths: {_path_hint(st, path)}",
                                  source=src, table="values", key=str(path))
            v = _value_of(value, st.dimensions[path], src, path)
            if isinstance(v, np.ndarray):
                if n is not None and v.shape[0] != n:
                    raise DesignError(f"array of length {v.shape[0]} where others have length {n}",
                                      source=src, table="values", key=path)
                n = v.shape[0]
            P[path] = v
        only = set()
        for path in values:
            only.update(st.rule_index.get(path, ()))
        try:
            validation.check(st.rules, P, only)
        except RuleFailed as exc:
            raise DesignError(exc.reason, source=src, table="values", key=exc.blame) from None
        if source is not None:
            st = replace(st, source=source)
        return Design._assemble(st, P)

    def with_tolerance_box(self, box: Mapping[str, tuple[float, float]]) -> "Design":
        """Return a copy whose tolerance box is ``box``: dotted path -> absolute (min, max) in SI units.

        The values are unchanged; the box only steers the tolerance analyses (corners,
        sampling, search) and the automatic step and window.  Each path must name a
        numeric value and min <= max; a box that leaves the physical range is refused
        like one written in a file.
        """
        from .errors import DesignError

        st = self.structure
        out = {}
        for path, bounds in box.items():
            if path not in st.dimensions:
                raise DesignError(f"no numeric value at this path; known paths: {_path_hint(st, path)}",
                                  source=st.source, table="tolerances", key=path)
            lo, hi = (float(b) for b in bounds)
            if not (math.isfinite(lo) and math.isfinite(hi) and lo <= hi):
                raise DesignError(f"need finite min <= max, got [{lo:g}, {hi:g}]", source=st.source,
                                  table="tolerances", key=path)
            out[path] = (lo, hi)
        if out:
            # the box's ends must be physical, as for a file's [tolerances]
            self.with_values({p: np.array(b) for p, b in out.items()})
        return Design._assemble(replace(st, tolerances=frozen(out)), self.params)

    def _with_values_trusted(self, values: Mapping[str, Any]) -> "Design":
        """with_values without conversion or checks, for slices of values already validated (internal)."""
        P = dict(self.params)
        P.update(values)
        return Design._assemble(self.structure, P)


def _geometry_view(st: Structure, name: str, P: Mapping[str, Any]) -> LineType:
    """The view of a geometry line: z0, delay, er_eff derived for every variant at once (numpy)."""
    from .geometry import KINDS, derive

    t = f"lines.{name}"
    kind = st.geometry_kinds[name]
    dims = {k: P[f"{t}.geometry.{k}"] for k in KINDS[kind]}
    z0, delay, er_eff, _ = derive(kind, dims, differential=st.signaling == "differential")
    return LineType(name=name, z0=z0, delay=delay, er_eff=er_eff, r_dc=P.get(f"{t}.r_dc", 0.0),
                    geometry=frozen({"kind": kind, **dims}))


def geometry_notes(design: "Design") -> list:
    """The cross-section formulas' range warnings for a design's geometry lines, as text.

    Evaluated over the nominal values and every corner of the toleranced geometry values of each
    line (at most 2**10 corners per line), so a box that leaves a formula's stated range is named.
    """
    from itertools import product

    from .geometry import KINDS, derive

    st = design.structure
    out = []
    for name, kind in st.geometry_kinds.items():
        t = f"lines.{name}"
        paths = [f"{t}.geometry.{k}" for k in KINDS[kind]]
        dims = {p: [design.params[p]] for p in paths}
        boxed = [p for p in paths if p in design.tolerances][:10]
        if boxed:
            combos = np.array(list(product((0, 1), repeat=len(boxed))))
            for j, p in enumerate(boxed):
                lo, hi = design.tolerances[p]
                dims[p] = list(dims[p]) + list(np.where(combos[:, j] == 1, hi, lo))
        n = max(len(v) for v in dims.values())
        arrays = {p.rpartition(".")[2]: np.asarray(v, dtype=float) if len(v) == n else np.full(n, float(v[0]))
                  for p, v in dims.items()}
        _, _, _, notes = derive(kind, arrays, differential=st.signaling == "differential")
        out += [f"[lines.{name}] geometry: {n_}" for n_ in notes]
    return out


def _value_of(value, dim: str, src: str, path: str):
    """One with_values value as a float or a 1-D float array [SI], or DesignError naming the path."""
    def err(msg):
        return DesignError(msg, source=src, table="values", key=path)
    if isinstance(value, str) or (isinstance(value, (int, float)) and not isinstance(value, bool)):
        v = parse_quantity(value, dim, source=src, table="values", key=path)
        return v
    if isinstance(value, bool) or value is None:
        raise err(f"expected a number or a quantity, got {value!r}")
    try:
        arr = np.asarray(value)
    except Exception:
        raise err(f"expected a number, a quantity or a 1-D array, got {type(value).__name__}") from None
    if arr.dtype.kind in "UO":
        if arr.ndim != 1:
            raise err("values must be scalars or 1-D arrays")
        arr = np.array([parse_quantity(x, dim, source=src, table="values", key=f"{path}[{i}]")
                        for i, x in enumerate(arr.tolist())], dtype=float)
    elif arr.dtype.kind in "fiu":
        arr = arr.astype(float)
    else:
        raise err(f"expected numbers, got an array of {arr.dtype}")
    if arr.ndim == 0:
        v = float(arr)
        if not math.isfinite(v):
            raise err(f"{value!r} is not finite")
        return v
    if arr.ndim != 1:
        raise err("values must be scalars or 1-D arrays")
    if arr.shape[0] == 0:
        raise err("empty array of values")
    if not np.all(np.isfinite(arr)):
        raise err("array holds non-finite values")
    return arr


def _path_hint(st: Structure, path) -> str:
    head = str(path).split(".")[0]
    near = [p for p in st.dimensions if p.split(".")[0] == head] or list(st.dimensions)
    return ", ".join(near[:12]) + (" ..." if len(near) > 12 else "")


__all__ = [
    "C0", "ROLES", "SIGNALING", "TERMINATION_TYPES", "RefLoad", "Part", "LineType", "Segment",
    "Stub", "Tap", "Termination", "Bus", "Edge", "Budget", "NoiseBudget", "Design", "Structure", "frozen",
    "freeze",
]
