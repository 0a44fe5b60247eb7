"""Reading and validating design files (TOML), and rebuilding designs with new values.

The file format is a contract (see DEVELOPERS.md and the README).  Every error
names the file, the table and the key.  Nothing that changes the physics is
defaulted silently: optional keys have a physical meaning when absent (no
package inductance, no input resistance, lossless line...).
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .errors import DesignError
from .graph import union_roots
from .model import (
    C0, ROLES, SIGNALING, TERMINATION_TYPES, Budget, Bus, Design, Edge, LineType, Part, RefLoad,
    Segment, Stub, Tap, Termination, frozen,
)
from .units import is_percent, parse_quantity

TOP_LEVEL = ("bus", "edge", "parts", "lines", "segment", "tap", "termination", "tolerances", "budget")

# key -> (dimension, required?)  for each table kind
BUS_KEYS = {"name": None, "signaling": None, "t_stop": "time", "dt": "time"}
EDGE_KEYS = {"rise": "time", "fall": "time"}
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
BUDGET_KEYS = set(BUDGET_NAMED) | {"settle_band", "min_margin", "extra"}


@dataclass(frozen=True)
class Structure:
    """Everything in a design except the numeric values: names, references, units."""
    source: str
    bus_name: str
    signaling: str
    parts: Mapping[str, str]                 # part name -> role
    part_keys: Mapping[str, frozenset]       # part name -> numeric keys present
    lines: tuple[str, ...]
    delay_keys: Mapping[str, str]            # line -> "delay" | "er_eff"
    segments: tuple[tuple[str, str, str], ...]   # (from, to, line)
    taps: tuple[tuple[str, str, str, str | None], ...]  # (name, node, part, stub line)
    terminations: tuple[tuple[str, str | None, str | None], ...]  # (type, node, tap)
    dimensions: Mapping[str, str]            # param path -> dimension
    tolerances: Mapping[str, tuple[float, float]]
    budget: Budget


# ---------------------------------------------------------------------------
# entry points

def load(path) -> Design:
    """Load and validate a design file; errors name the file, table and key."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise DesignError(f"cannot read the file ({exc.strerror or exc})", source=str(path)) from None
    except UnicodeDecodeError:
        raise DesignError("the file is not UTF-8 text", source=str(path)) from None
    return loads(text, source=str(path))


def loads(text: str, *, source: str = "<string>") -> Design:
    """Parse and validate design-file text (TOML); ``source`` names it in errors."""
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"not valid TOML ({exc})", source=source) from None
    structure, params = _parse(doc, source)
    design = _build(structure, params)
    _check_tolerance_box(design)
    return design


def _check_tolerance_box(design: Design) -> None:
    """Every value of the tolerance box must be physical: each path at both ends, then all together."""
    box = design.tolerances
    if not box:
        return
    for path, (lo, hi) in box.items():
        try:
            rebuild(design, {path: np.array([lo, hi])})
        except DesignError as exc:
            raise DesignError(f"the tolerance range [{lo:g}, {hi:g}] reaches a non-physical value: {exc.reason}",
                              source=design.source, table="tolerances", key=path) from None
    try:
        rebuild(design, {p: np.array(b) for p, b in box.items()})
    except DesignError as exc:
        raise DesignError(f"with every tolerance at its minimum or maximum the design is non-physical: "
                          f"[{exc.table}] {exc.key}: {exc.reason}", source=design.source, table="tolerances",
                          key=exc.key) from None


def rebuild(design: Design, values: Mapping[str, Any], *, source: str | None = None) -> Design:
    """Implementation of :meth:`Design.with_values`."""
    st: Structure = design.structure
    src = source or st.source
    params = dict(design.params)
    n = None
    for path, value in values.items():
        if path not in st.dimensions:
            raise DesignError(f"no numeric value at this path; known paths: {_path_hint(st, path)}",
                              source=src, table="values", key=path)
        arr = np.asarray(value, dtype=float)
        if arr.ndim == 0:
            v = float(arr)
            if not math.isfinite(v):
                raise DesignError(f"{value!r} is not finite", source=src, table="values", key=path)
            params[path] = v
        elif arr.ndim == 1:
            if n is not None and arr.shape[0] != n:
                raise DesignError(f"array of length {arr.shape[0]} where others have length {n}",
                                  source=src, table="values", key=path)
            n = arr.shape[0]
            if n == 0:
                raise DesignError("empty array of values", source=src, table="values", key=path)
            if not np.all(np.isfinite(arr)):
                raise DesignError("array holds non-finite values", source=src, table="values", key=path)
            params[path] = arr
        else:
            raise DesignError("values must be scalars or 1-D arrays", source=src, table="values", key=path)
    if source is not None:
        st = replace(st, source=source)
    return _build(st, params)


def _path_hint(st: Structure, path: str) -> str:
    head = path.split(".")[0]
    near = [p for p in st.dimensions if p.split(".")[0] == head] or list(st.dimensions)
    return ", ".join(near[:12]) + (" ..." if len(near) > 12 else "")


# ---------------------------------------------------------------------------
# parsing (file -> structure + params)

class _Ctx:
    def __init__(self, source):
        self.source = source
        self.params: dict[str, float] = {}
        self.dims: dict[str, str] = {}

    def err(self, msg, table=None, key=None):
        return DesignError(msg, source=self.source, table=table, key=key)

    def table(self, obj, table):
        if not isinstance(obj, dict):
            raise self.err(f"expected a table, got {type(obj).__name__}", table)
        return obj

    def unknown(self, obj, allowed, table):
        for k in obj:
            if k not in allowed:
                raise self.err(f"unknown key; allowed keys here: {', '.join(sorted(allowed))}", table, k)

    def text(self, obj, key, table, *, required=True, choices=None):
        if key not in obj:
            if required:
                raise self.err("missing key", table, key)
            return None
        v = obj[key]
        if not isinstance(v, str) or not v.strip():
            raise self.err(f"expected a non-empty string, got {v!r}", table, key)
        if choices is not None and v not in choices:
            raise self.err(f"{v!r} is not one of: {', '.join(choices)}", table, key)
        return v

    def qty(self, obj, key, dim, table, path, *, required=True):
        if key not in obj:
            if required:
                raise self.err("missing key", table, key)
            return None
        v = parse_quantity(obj[key], dim, source=self.source, table=table, key=key)
        self.params[path] = v
        self.dims[path] = dim
        return v


def _parse(doc: dict, source: str):
    c = _Ctx(source)
    c.unknown(doc, TOP_LEVEL, None)
    for required in ("bus", "edge", "parts", "tap"):
        if required not in doc:
            raise c.err(f"missing table [{required}]" if required != "tap" else "missing [[tap]] entries")

    bus = c.table(doc["bus"], "bus")
    c.unknown(bus, BUS_KEYS, "bus")
    bus_name = c.text(bus, "name", "bus", required=False) or Path(source).stem
    signaling = c.text(bus, "signaling", "bus", required=False, choices=SIGNALING) or "single-ended"
    c.qty(bus, "t_stop", "time", "bus", "bus.t_stop", required=False)
    c.qty(bus, "dt", "time", "bus", "bus.dt", required=False)

    edge = c.table(doc["edge"], "edge")
    c.unknown(edge, EDGE_KEYS, "edge")
    for k in EDGE_KEYS:
        c.qty(edge, k, "time", "edge", f"edge.{k}")

    parts = c.table(doc["parts"], "parts")
    if not parts:
        raise c.err("no parts defined", "parts")
    roles, part_keys = {}, {}
    for name, p in parts.items():
        t = f"parts.{name}"
        p = c.table(p, t)
        role = c.text(p, "role", t, choices=ROLES)
        allowed = {"role"} | set(PART_COMMON) | {"ref_load"}
        if role in ("driver", "transceiver"):
            allowed |= set(DRIVE_KEYS)
        if role in ("receiver", "transceiver"):
            allowed |= set(RECEIVE_KEYS)
        for k in p:
            if k not in allowed and (k in DRIVE_KEYS or k in RECEIVE_KEYS):
                raise c.err(f"a part with role {role!r} has no {k}; use role 'transceiver' for a part "
                            "that both drives and receives", t, k)
        c.unknown(p, allowed, t)
        present = set()
        for k, dim in {**DRIVE_KEYS, **RECEIVE_KEYS, **PART_COMMON}.items():
            if k in allowed:
                required = k in DRIVE_KEYS or k in RECEIVE_KEYS or k == "c_pin"
                if c.qty(p, k, dim, t, f"{t}.{k}", required=required) is not None:
                    present.add(k)
        if "ref_load" in p:
            if role == "receiver":
                raise c.err("a receiver-only part has no timing reference load", t, "ref_load")
            rl = c.table(p["ref_load"], f"{t}.ref_load")
            c.unknown(rl, REF_LOAD_KEYS, f"{t}.ref_load")
            for k, dim in REF_LOAD_KEYS.items():
                c.qty(rl, k, dim, f"{t}.ref_load", f"{t}.ref_load.{k}", required=(k == "r"))
                if f"{t}.ref_load.{k}" in c.params:
                    present.add(f"ref_load.{k}")
        roles[name] = role
        part_keys[name] = frozenset(present)

    lines = c.table(doc.get("lines", {}), "lines")
    delay_keys = {}
    for name, ln in lines.items():
        t = f"lines.{name}"
        ln = c.table(ln, t)
        c.unknown(ln, LINE_KEYS, t)
        c.qty(ln, "z0", "resistance", t, f"{t}.z0")
        if ("delay" in ln) == ("er_eff" in ln):
            raise c.err("give exactly one of 'delay' (e.g. \"6.7 ns/m\") or 'er_eff'", t,
                        "delay" if "delay" in ln else None)
        key = "delay" if "delay" in ln else "er_eff"
        c.qty(ln, key, LINE_KEYS[key], t, f"{t}.{key}")
        delay_keys[name] = key
        c.qty(ln, "r_dc", "resistance_per_length", t, f"{t}.r_dc", required=False)

    segs = doc.get("segment", [])
    if not isinstance(segs, list):
        raise c.err("use [[segment]] (an array of tables)", "segment")
    segments = []
    for i, s in enumerate(segs):
        t = f"segment #{i + 1}"
        s = c.table(s, t)
        c.unknown(s, {"from", "to", "line", "length"}, t)
        a = c.text(s, "from", t)
        b = c.text(s, "to", t)
        ln = c.text(s, "line", t)
        if a == b:
            raise c.err(f"a segment must join two different nodes (both are {a!r})", t, "to")
        if ln not in lines:
            raise c.err(f"no line type {ln!r} in [lines]; defined: {', '.join(lines) or 'none'}", t, "line")
        c.qty(s, "length", "length", t, f"segment.{i}.length")
        segments.append((a, b, ln))

    taps_doc = doc["tap"]
    if not isinstance(taps_doc, list) or not taps_doc:
        raise c.err("use [[tap]] (an array of tables) with at least one entry", "tap")
    taps, tap_names = [], set()
    bus_nodes = {n for s in segments for n in s[:2]}
    for i, tp in enumerate(taps_doc):
        t = f"tap #{i + 1}"
        tp = c.table(tp, t)
        c.unknown(tp, {"name", "node", "part", "stub"}, t)
        name = c.text(tp, "name", t)
        t = f"tap {name}"
        if name in tap_names:
            raise c.err(f"duplicate tap name {name!r}", t, "name")
        tap_names.add(name)
        if "." in name or "," in name:
            raise c.err("tap names may not contain '.' or ','", t, "name")
        node = c.text(tp, "node", t)
        part = c.text(tp, "part", t)
        if part not in parts:
            raise c.err(f"no part {part!r} in [parts]; defined: {', '.join(parts)}", t, "part")
        if segments and node not in bus_nodes:
            raise c.err(f"node {node!r} is not on any segment; bus nodes: {', '.join(sorted(bus_nodes))}", t, "node")
        stub_line = None
        if "stub" in tp:
            st = c.table(tp["stub"], f"{t}.stub")
            c.unknown(st, {"line", "length"}, f"{t}.stub")
            stub_line = c.text(st, "line", f"{t}.stub")
            if stub_line not in lines:
                raise c.err(f"no line type {stub_line!r} in [lines]; defined: {', '.join(lines) or 'none'}",
                            f"{t}.stub", "line")
            c.qty(st, "length", "length", f"{t}.stub", f"tap.{name}.stub.length")
        taps.append((name, node, part, stub_line))
    if not segments:
        nodes = {tp[1] for tp in taps}
        if len(nodes) > 1:
            raise c.err(f"taps sit on {len(nodes)} different nodes ({', '.join(sorted(nodes))}) but no "
                        "[[segment]] joins them", "segment")
        bus_nodes = nodes
    else:
        _check_connected(c, segments, bus_nodes)
    known_nodes = bus_nodes

    terms_doc = doc.get("termination", [])
    if not isinstance(terms_doc, list):
        raise c.err("use [[termination]] (an array of tables)", "termination")
    terms, series_taps = [], set()
    for i, tm in enumerate(terms_doc):
        t = f"termination #{i + 1}"
        tm = c.table(tm, t)
        typ = c.text(tm, "type", t, choices=TERMINATION_TYPES)
        keys = TERM_KEYS[typ]
        c.unknown(tm, set(keys) | {"type"}, t)
        node = tap = None
        if typ == "series":
            tap = c.text(tm, "tap", t)
            if tap not in tap_names:
                raise c.err(f"no tap named {tap!r}; taps: {', '.join(x[0] for x in taps)}", t, "tap")
            if tap in series_taps:
                raise c.err(f"tap {tap!r} already has a series termination", t, "tap")
            series_taps.add(tap)
        else:
            node = c.text(tm, "node", t)
            if node not in known_nodes:
                raise c.err(f"node {node!r} does not exist; bus nodes: {', '.join(sorted(known_nodes))}", t, "node")
        for k, dim in keys.items():
            if dim is not None:
                c.qty(tm, k, dim, t, f"termination.{i}.{k}")
        terms.append((typ, node, tap))

    budget = _parse_budget(c, doc.get("budget", {}))
    structure = Structure(
        source=source, bus_name=bus_name, signaling=signaling, parts=frozen(roles),
        part_keys=frozen(part_keys), lines=tuple(lines), delay_keys=frozen(delay_keys),
        segments=tuple(segments), taps=tuple(taps), terminations=tuple(terms),
        dimensions=frozen(c.dims), tolerances=frozen({}), budget=budget,
    )
    tolerances = _parse_tolerances(c, doc.get("tolerances", {}), structure)
    structure = replace(structure, tolerances=frozen(tolerances))
    return structure, c.params


def _check_connected(c: _Ctx, segments, nodes):
    order = sorted(nodes)
    index = {n: i for i, n in enumerate(order)}
    roots = union_roots(len(order), [(index[a], index[b]) for a, b, _ in segments])
    groups = {}
    for n, r in zip(order, roots):
        groups.setdefault(r, []).append(n)
    if len(groups) > 1:
        parts = sorted((sorted(g) for g in groups.values()), key=len)
        raise c.err(f"the segments form {len(groups)} separate pieces; nodes {', '.join(parts[0])} are not "
                    "connected to the rest", "segment")


def _parse_budget(c: _Ctx, b) -> Budget:
    b = c.table(b, "budget")
    c.unknown(b, BUDGET_KEYS, "budget")
    alloc = {}

    def one(name, value, table):
        if is_percent(value):
            frac = parse_quantity(value, "dimensionless", source=c.source, table=table, key=name)
            if frac < 0:
                raise c.err("an allocation cannot be negative", table, name)
            return (frac, "swing")
        v = parse_quantity(value, "voltage", source=c.source, table=table, key=name)
        if v < 0:
            raise c.err("an allocation cannot be negative", table, name)
        return (v, "V")

    for name in BUDGET_NAMED:
        if name in b:
            alloc[name] = one(name, b[name], "budget")
    if "extra" in b:
        extra = c.table(b["extra"], "budget.extra")
        for name, value in extra.items():
            if name in alloc:
                raise c.err("duplicates a named allocation", "budget.extra", name)
            alloc[name] = one(name, value, "budget.extra")
    settle = 0.05
    if "settle_band" in b:
        settle = parse_quantity(b["settle_band"], "dimensionless", source=c.source, table="budget", key="settle_band")
        if not 0 < settle < 1:
            raise c.err("settle_band must be between 0 % and 100 % of the swing", "budget", "settle_band")
    min_margin = 0.0
    if "min_margin" in b:
        min_margin = parse_quantity(b["min_margin"], "voltage", source=c.source, table="budget", key="min_margin")
    return Budget(allocations=frozen(alloc), settle_band=settle, min_margin=min_margin)


def _parse_tolerances(c: _Ctx, tol, st: Structure):
    tol = c.table(tol, "tolerances")
    out = {}
    for path, spec in tol.items():
        if path not in c.dims:
            raise c.err(f"no numeric value at this path in the design; known paths: {_path_hint(st, path)}",
                        "tolerances", path)
        dim = c.dims[path]
        nominal = c.params[path]
        if isinstance(spec, list):
            if len(spec) != 2:
                raise c.err("give [min, max]", "tolerances", path)
            lo = parse_quantity(spec[0], dim, source=c.source, table="tolerances", key=path)
            hi = parse_quantity(spec[1], dim, source=c.source, table="tolerances", key=path)
            if lo > hi:
                raise c.err(f"min {spec[0]!r} is above max {spec[1]!r}", "tolerances", path)
            if not lo <= nominal <= hi:
                raise c.err(f"the nominal value {nominal:g} lies outside [min, max]", "tolerances", path)
        elif is_percent(spec):
            frac = parse_quantity(spec, "dimensionless", source=c.source, table="tolerances", key=path)
            if not 0 <= frac < 1:
                raise c.err("a percentage tolerance must be between 0 % and 100 %", "tolerances", path)
            lo, hi = sorted((nominal * (1 - frac), nominal * (1 + frac)))
        else:
            d = parse_quantity(spec, dim, source=c.source, table="tolerances", key=path)
            if d < 0:
                raise c.err("a +/- tolerance cannot be negative", "tolerances", path)
            lo, hi = nominal - d, nominal + d
        out[path] = (lo, hi)
    return out


# ---------------------------------------------------------------------------
# building the model (structure + params -> Design), with physics checks

def _check(cond, st: Structure, path: str, reason: str, values=None):
    ok = np.all(cond)
    if not ok:
        table, _, key = path.rpartition(".")
        shown = ""
        if values is not None:
            arr = np.atleast_1d(values)
            bad = arr[~np.atleast_1d(np.broadcast_to(cond, arr.shape))] if np.ndim(cond) else arr
            shown = f" (got {bad[0]:g})" if bad.size else ""
        raise DesignError(reason + shown, source=st.source, table=_table_label(table), key=key)


def _table_label(table: str) -> str:
    head, _, rest = table.partition(".")
    if head in ("segment", "termination") and rest.split(".")[0].isdigit():
        idx, _, tail = rest.partition(".")
        return f"{head} #{int(idx) + 1}" + (f".{tail}" if tail else "")
    return table


def _build(st: Structure, params: Mapping[str, Any]) -> Design:
    P = params

    def get(path, default=None):
        return P.get(path, default)

    def positive(path, what="must be positive"):
        if path in P:
            _check(np.asarray(P[path]) > 0, st, path, what, P[path])

    def nonneg(path):
        if path in P:
            _check(np.asarray(P[path]) >= 0, st, path, "cannot be negative", P[path])

    for p in ("bus.t_stop", "bus.dt", "edge.rise", "edge.fall"):
        positive(p)
    bus = Bus(name=st.bus_name, signaling=st.signaling, t_stop=get("bus.t_stop"), dt=get("bus.dt"))
    edge = Edge(rise=P["edge.rise"], fall=P["edge.fall"])

    parts = {}
    for name, role in st.parts.items():
        t = f"parts.{name}"
        for k in ("r_high", "r_low", "r_in", "ref_load.r"):
            positive(f"{t}.{k}")
        for k in ("c_pin", "l_pkg", "ref_load.c"):
            nonneg(f"{t}.{k}")
        if role != "receiver":
            _check(np.asarray(P[f"{t}.v_high"]) > np.asarray(P[f"{t}.v_low"]), st, f"{t}.v_high",
                   "must be above v_low", P[f"{t}.v_high"])
        if role != "driver":
            _check(np.asarray(P[f"{t}.vih"]) > np.asarray(P[f"{t}.vil"]), st, f"{t}.vih",
                   "must be above vil", P[f"{t}.vih"])
        if f"{t}.v_max" in P and f"{t}.v_min" in P:
            _check(np.asarray(P[f"{t}.v_max"]) > np.asarray(P[f"{t}.v_min"]), st, f"{t}.v_max",
                   "must be above v_min", P[f"{t}.v_max"])
        ref = None
        if f"{t}.ref_load.r" in P:
            ref = RefLoad(r=P[f"{t}.ref_load.r"], v=get(f"{t}.ref_load.v", 0.0), c=get(f"{t}.ref_load.c", 0.0))
        parts[name] = Part(
            name=name, role=role, v_high=get(f"{t}.v_high"), v_low=get(f"{t}.v_low"),
            r_high=get(f"{t}.r_high"), r_low=get(f"{t}.r_low"), c_pin=P[f"{t}.c_pin"],
            l_pkg=get(f"{t}.l_pkg", 0.0), r_in=get(f"{t}.r_in", math.inf), vih=get(f"{t}.vih"),
            vil=get(f"{t}.vil"), v_max=get(f"{t}.v_max"), v_min=get(f"{t}.v_min"), ref_load=ref,
            v_meas=get(f"{t}.v_meas"),
        )

    lines = {}
    for name in st.lines:
        t = f"lines.{name}"
        positive(f"{t}.z0")
        if st.delay_keys[name] == "delay":
            positive(f"{t}.delay")
            delay = P[f"{t}.delay"]
        else:
            _check(np.asarray(P[f"{t}.er_eff"]) >= 1, st, f"{t}.er_eff",
                   "must be at least 1 (a line is never faster than light in vacuum)", P[f"{t}.er_eff"])
            delay = np.sqrt(P[f"{t}.er_eff"]) / C0  # docs/references.md B2: t_pd = sqrt(eps_eff)/c
        nonneg(f"{t}.r_dc")
        lines[name] = LineType(name=name, z0=P[f"{t}.z0"], delay=delay, r_dc=get(f"{t}.r_dc", 0.0))

    segments = []
    for i, (a, b, ln) in enumerate(st.segments):
        positive(f"segment.{i}.length")
        segments.append(Segment(index=i, a=a, b=b, line=ln, length=P[f"segment.{i}.length"]))
    taps = []
    for name, node, part, stub_line in st.taps:
        stub = None
        if stub_line is not None:
            positive(f"tap.{name}.stub.length")
            stub = Stub(line=stub_line, length=P[f"tap.{name}.stub.length"])
        taps.append(Tap(name=name, node=node, part=part, stub=stub))
    terms = []
    for i, (typ, node, tap) in enumerate(st.terminations):
        t = f"termination.{i}"
        for k in ("r", "r_up", "r_down", "c"):
            positive(f"{t}.{k}")
        terms.append(Termination(index=i, type=typ, node=node, tap=tap, r=get(f"{t}.r"), v=get(f"{t}.v"),
                                 c=get(f"{t}.c"), r_up=get(f"{t}.r_up"), r_down=get(f"{t}.r_down"),
                                 v_up=get(f"{t}.v_up")))
    return Design(
        source=st.source, bus=bus, edge=edge, parts=frozen(parts), lines=frozen(lines),
        segments=tuple(segments), taps=tuple(taps), terminations=tuple(terms),
        tolerances=st.tolerances, budget=st.budget, params=frozen(P), delay_keys=st.delay_keys,
        structure=st,
    )


# ---------------------------------------------------------------------------
# the key schema, for the design-file reference (docs/design-file.md) and its test

def accepted_keys() -> dict[str, set[str]]:
    """Every key the loader accepts, by table label.

    Labels: "" (top-level table names), "bus", "edge", "parts.driver",
    "parts.receiver", "parts.transceiver" (by role; each with "role" and, for
    the roles that can drive, "ref_load"), "parts.ref_load", "lines",
    "segment", "tap", "tap.stub", "termination.<type>" (each with "type") and
    "budget".  The named allocations of ``[budget.extra]`` are free names and
    the keys of ``[tolerances]`` are parameter paths, so neither is listed.
    """
    part_common = {"role"} | set(PART_COMMON)
    out = {
        "": set(TOP_LEVEL),
        "bus": set(BUS_KEYS),
        "edge": set(EDGE_KEYS),
        # a receiver-only part is refused a ref_load (it never drives, so it has no timing reference)
        "parts.driver": part_common | set(DRIVE_KEYS) | {"ref_load"},
        "parts.receiver": part_common | set(RECEIVE_KEYS),
        "parts.transceiver": part_common | set(DRIVE_KEYS) | set(RECEIVE_KEYS) | {"ref_load"},
        "parts.ref_load": set(REF_LOAD_KEYS),
        "lines": set(LINE_KEYS),
        "segment": {"from", "to", "line", "length"},
        "tap": {"name", "node", "part", "stub"},
        "tap.stub": {"line", "length"},
        "budget": set(BUDGET_KEYS),
    }
    for typ, keys in TERM_KEYS.items():
        out[f"termination.{typ}"] = set(keys) | {"type"}
    return out
