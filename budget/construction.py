"""Building a :class:`~budget.model.Design` from its inputs: the design file's error locations.

:func:`construct` turns the constructor's arguments (building blocks holding
unit strings or SI floats) into the design's :class:`~budget.model.Structure`
(names, references, dimensions, rules) and its flat table of SI values, with
errors that name the table and key exactly as the design-file reader does
("[parts.xcvr] c_pin", "segment #2", "tap U3.stub", "termination #1").
:func:`validate_new` then runs every rule of :mod:`budget.validation` on the
nominal values and on the tolerance box.
"""
from __future__ import annotations

import math
import unicodedata
from dataclasses import replace
from pathlib import Path
from typing import Mapping

import numpy as np

from . import ibis_parts, validation
from .errors import ArgumentError, DesignError
from .limits import MAX_NAME_CHARS, MAX_NODES, MAX_TAPS, listed
from .graph import union_roots
from .model import (
    BUDGET_NAMED, DRIVE_KEYS, LINE_KEYS, PART_COMMON, RECEIVE_KEYS, REF_LOAD_KEYS, ROLES, SIGNALING, TERM_KEYS,
    TERMINATION_TYPES, Budget, Bus, Edge, LineType, Part, RefLoad, Segment, Structure, Stub, Tap, Termination,
    _path_hint, frozen,
)
from .units import is_percent, parse_quantity
from .validation import C0, RuleFailed


class _Ctx:
    def __init__(self, source):
        self.source = source
        self.params: dict[str, float] = {}
        self.dims: dict[str, str] = {}

    def err(self, msg, table=None, key=None):
        return DesignError(msg, source=self.source, table=table, key=key)

    def text(self, value, table, key, *, required=True, choices=None):
        if value is None:
            if required:
                raise self.err("missing key", table, key)
            return None
        if not isinstance(value, str) or not value.strip():
            raise self.err(f"expected a non-empty string, got {value!r}", table, key)
        if len(value) > MAX_NAME_CHARS:
            raise self.err(f"a text of {len(value)} characters; at most {MAX_NAME_CHARS} "
                           "(budget.limits.MAX_NAME_CHARS)", table, key)
        bad = next((ch for ch in value if unicodedata.category(ch) == "Cc"), None)
        if bad is not None:   # NUL, escape sequences, newlines: they corrupt reports, CSV headers and terminals
            what = "a NUL character" if bad == "\x00" else f"the control character {bad!r}"
            raise self.err(f"{what} is not allowed here", table, key)
        if choices is not None and value not in choices:
            raise self.err(f"{value!r} is not one of: {', '.join(choices)}", table, key)
        return value

    def qty(self, value, dim, table, key, path, *, required=True):
        if value is None:
            if required:
                raise self.err("missing key", table, key)
            return None
        v = parse_quantity(value, dim, source=self.source, table=table, key=key)
        self.params[path] = v
        self.dims[path] = dim
        return v

    def kind(self, obj, cls, table):
        if not isinstance(obj, cls):
            raise self.err(f"expected a {cls.__name__}, got {type(obj).__name__}", table)
        return obj


def construct(source, bus, edge, parts, lines, segments, taps, terminations, tolerances, budget):
    if not isinstance(source, str):
        raise ArgumentError(f"source must be a string naming the design, got {type(source).__name__}")
    c = _Ctx(source)
    bus = c.kind(bus if bus is not None else Bus(), Bus, "bus")
    bus_name = c.text(bus.name, "bus", "name", required=False) or Path(source).stem
    signaling = c.text(bus.signaling, "bus", "signaling", required=False, choices=SIGNALING) or "single-ended"
    c.qty(bus.t_stop, "time", "bus", "t_stop", "bus.t_stop", required=False)
    c.qty(bus.dt, "time", "bus", "dt", "bus.dt", required=False)

    edge = c.kind(edge, Edge, "edge")
    c.qty(edge.rise, "time", "edge", "rise", "edge.rise")
    c.qty(edge.fall, "time", "edge", "fall", "edge.fall")

    if not isinstance(parts, Mapping):
        raise c.err(f"expected a table of parts, got {type(parts).__name__}", "parts")
    if not parts:
        raise c.err("no parts defined", "parts")
    roles, part_keys, ibis_found = {}, {}, {}
    for name, p in parts.items():
        t = f"parts.{name}"
        c.text(name, "parts", "name")
        p = c.kind(p, Part, t)
        if p.ibis is not None:      # a buffer from an IBIS file (budget.ibis_parts)
            roles[name], part_keys[name], ibis_found[name] = _ibis_part(c, p, t)
            continue
        role = c.text(p.role, t, "role", choices=ROLES)
        allowed = set(PART_COMMON)
        if role in ("driver", "transceiver"):
            allowed |= set(DRIVE_KEYS)
        if role in ("receiver", "transceiver"):
            allowed |= set(RECEIVE_KEYS)
        for k in (*DRIVE_KEYS, *RECEIVE_KEYS):
            if k not in allowed and getattr(p, k) is not None:
                raise c.err(f"a part with role {role!r} has no {k}; use role 'transceiver' for a part "
                            "that both drives and receives", t, k)
        present = set()
        for k, dim in {**DRIVE_KEYS, **RECEIVE_KEYS, **PART_COMMON}.items():
            if k not in allowed:
                continue
            value = getattr(p, k)
            if k == "r_in" and isinstance(value, float) and value == math.inf:
                value = None            # a view's "no input resistance"
            required = k in DRIVE_KEYS or k in RECEIVE_KEYS or k == "c_pin"
            if c.qty(value, dim, t, k, f"{t}.{k}", required=required) is not None:
                present.add(k)
        if p.ref_load is not None:
            if role == "receiver":
                raise c.err("a receiver-only part has no timing reference load", t, "ref_load")
            rl = c.kind(p.ref_load, RefLoad, f"{t}.ref_load")
            for k, dim in REF_LOAD_KEYS.items():
                if c.qty(getattr(rl, k), dim, f"{t}.ref_load", k, f"{t}.ref_load.{k}", required=(k == "r")) is not None:
                    present.add(f"ref_load.{k}")
        roles[name] = role
        part_keys[name] = frozenset(present)

    if not isinstance(lines, Mapping):
        raise c.err(f"expected a table of lines, got {type(lines).__name__}", "lines")
    delay_keys, geometry_kinds = {}, {}
    for name, ln in lines.items():
        t = f"lines.{name}"
        c.text(name, "lines", "name")
        ln = c.kind(ln, LineType, t)
        if ln.geometry is not None:
            geometry_kinds[name] = _geometry(c, ln, t, signaling)
            delay_keys[name] = "geometry"
            c.qty(ln.r_dc, "resistance_per_length", t, "r_dc", f"{t}.r_dc", required=False)
            continue
        c.qty(ln.z0, "resistance", t, "z0", f"{t}.z0")
        delay, er = ln.delay, ln.er_eff
        if delay is not None and er is not None and _same_delay(delay, er):
            delay = None                # a view: delay computed from er_eff
        if (delay is None) == (er is None):
            raise c.err("give exactly one of 'delay' (e.g. \"6.7 ns/m\") or 'er_eff'", t,
                        "delay" if delay is not None else None)
        key = "delay" if delay is not None else "er_eff"
        c.qty(delay if delay is not None else er, LINE_KEYS[key], t, key, f"{t}.{key}")
        delay_keys[name] = key
        c.qty(ln.r_dc, "resistance_per_length", t, "r_dc", f"{t}.r_dc", required=False)

    if isinstance(segments, (str, Mapping)) or not hasattr(segments, "__iter__"):
        raise c.err("use a list of segments ([[segment]] in a file)", "segment")
    segments = list(segments)
    if len(segments) > MAX_NODES:
        raise c.err(f"{len(segments)} segments; busbudget takes at most {MAX_NODES} nodes "
                    "(budget.limits.MAX_NODES)", "segment")
    seg_out = []
    for i, s in enumerate(segments):
        t = f"segment #{i + 1}"
        s = c.kind(s, Segment, t)
        a = c.text(s.a, t, "from")
        b = c.text(s.b, t, "to")
        ln = c.text(s.line, t, "line")
        if a == b:
            raise c.err(f"a segment must join two different nodes (both are {a!r})", t, "to")
        if ln not in lines:
            raise c.err(f"no line type {ln!r} in [lines]; defined: {listed(lines) or 'none'}", t, "line")
        c.qty(s.length, "length", t, "length", f"segment.{i}.length")
        seg_out.append((a, b, ln))

    if isinstance(taps, (str, Mapping)) or not hasattr(taps, "__iter__"):
        raise c.err("use a list of taps ([[tap]] in a file) with at least one entry", "tap")
    taps = list(taps)
    if not taps:
        raise c.err("use [[tap]] (an array of tables) with at least one entry", "tap")
    if len(taps) > MAX_TAPS:
        raise c.err(f"{len(taps)} taps; busbudget takes at most {MAX_TAPS} taps on one bus (budget.limits.MAX_TAPS)",
                    "tap")
    tap_out, tap_names = [], set()
    bus_nodes = {n for s in seg_out for n in s[:2]}
    for i, tp in enumerate(taps):
        t = f"tap #{i + 1}"
        tp = c.kind(tp, Tap, t)
        name = c.text(tp.name, t, "name")
        t = f"tap {name}"
        if name in tap_names:
            raise c.err(f"duplicate tap name {name!r}", t, "name")
        tap_names.add(name)
        if "." in name or "," in name:
            raise c.err("tap names may not contain '.' or ','", t, "name")
        node = c.text(tp.node, t, "node")
        part = c.text(tp.part, t, "part")
        if part not in parts:
            raise c.err(f"no part {part!r} in [parts]; defined: {listed(parts)}", t, "part")
        if seg_out and node not in bus_nodes:
            raise c.err(f"node {node!r} is not on any segment; bus nodes: {listed(sorted(bus_nodes))}", t, "node")
        stub_line = None
        if tp.stub is not None:
            stub = c.kind(tp.stub, Stub, f"{t}.stub")
            stub_line = c.text(stub.line, f"{t}.stub", "line")
            if stub_line not in lines:
                raise c.err(f"no line type {stub_line!r} in [lines]; defined: {listed(lines) or 'none'}",
                            f"{t}.stub", "line")
            c.qty(stub.length, "length", f"{t}.stub", "length", f"tap.{name}.stub.length")
        tap_out.append((name, node, part, stub_line))
    if not seg_out:
        nodes = {tp[1] for tp in tap_out}
        if len(nodes) > 1:
            raise c.err(f"taps sit on {len(nodes)} different nodes ({listed(sorted(nodes))}) but no "
                        "[[segment]] joins them", "segment")
        bus_nodes = nodes
    else:
        _check_connected(c, seg_out, bus_nodes)

    if isinstance(terminations, (str, Mapping)) or not hasattr(terminations, "__iter__"):
        raise c.err("use a list of terminations ([[termination]] in a file)", "termination")
    term_out, series_taps = [], set()
    for i, tm in enumerate(terminations):
        t = f"termination #{i + 1}"
        tm = c.kind(tm, Termination, t)
        typ = c.text(tm.type, t, "type", choices=TERMINATION_TYPES)
        keys = TERM_KEYS[typ]
        for k in ("node", "tap", "r", "v", "c", "r_up", "r_down", "v_up"):
            if k not in keys and getattr(tm, k) is not None:
                raise c.err(f"unknown key; allowed keys here: {', '.join(sorted(set(keys) | {'type'}))}", t, k)
        node = tap = None
        if typ == "series":
            tap = c.text(tm.tap, t, "tap")
            if tap not in tap_names:
                raise c.err(f"no tap named {tap!r}; taps: {listed(x[0] for x in tap_out)}", t, "tap")
            if tap in series_taps:
                raise c.err(f"tap {tap!r} already has a series termination", t, "tap")
            series_taps.add(tap)
        else:
            node = c.text(tm.node, t, "node")
            if node not in bus_nodes:
                raise c.err(f"node {node!r} does not exist; bus nodes: {listed(sorted(bus_nodes))}", t, "node")
        for k, dim in keys.items():
            if dim is not None:
                c.qty(getattr(tm, k), dim, t, k, f"termination.{i}.{k}")
        term_out.append((typ, node, tap))

    noise = _budget(c, budget if budget is not None else Budget())
    rules = validation.rules_for({n: (roles[n], part_keys[n]) for n in roles}, delay_keys, seg_out, tap_out,
                                 term_out, c.dims, geometry=geometry_kinds, differential=signaling == "differential")
    st = Structure(
        source=source, bus_name=bus_name, signaling=signaling, parts=frozen(roles),
        part_keys=frozen(part_keys), lines=tuple(lines), delay_keys=frozen(delay_keys),
        segments=tuple(seg_out), taps=tuple(tap_out), terminations=tuple(term_out),
        dimensions=frozen(c.dims), tolerances=frozen({}), budget=noise, geometry_kinds=frozen(geometry_kinds),
        ibis=frozen(ibis_found), rules=rules,
        rule_index=frozen(validation.index_rules(rules)),
    )
    st = replace(st, tolerances=frozen(_tolerances(c, tolerances, st)))
    return st, frozen(c.params)


def _geometry(c: _Ctx, ln: LineType, t: str, signaling: str) -> str:
    """Read a line's ``geometry`` table into the values ``{t}.geometry.KEY``; returns its kind.

    Lengths with units [m], er plain [-]; the kind must describe a single line in a single-ended
    design and a pair in a differential one.  A view's z0/delay/er_eff (derived from this same
    geometry) may come along; any other z0, delay or er_eff beside a geometry is refused.
    """
    from .geometry import DIFFERENTIAL_KINDS, KINDS, SINGLE_ENDED_KINDS, derive

    g = ln.geometry
    gt = f"{t}.geometry"
    if not isinstance(g, Mapping):
        raise c.err(f"expected a table {{ kind = ..., ... }}, got {type(g).__name__}", t, "geometry")
    kind = c.text(g.get("kind"), gt, "kind")
    if kind not in KINDS:
        raise c.err(f"unknown cross-section kind {kind!r}; kinds are: {', '.join(KINDS)}", gt, "kind")
    keys = KINDS[kind]
    for k in g:
        if k != "kind" and k not in keys:
            raise c.err(f"unknown key for kind {kind!r}; allowed keys here: {', '.join(('kind', *keys))}", gt, k)
    if signaling == "differential" and kind not in DIFFERENTIAL_KINDS:
        raise c.err(f"a differential design needs the pair's differential impedance; kind {kind!r} is a single "
                    f"line: use one of {', '.join(DIFFERENTIAL_KINDS)}", gt, "kind")
    if signaling != "differential" and kind not in SINGLE_ENDED_KINDS:
        raise c.err(f"kind {kind!r} describes a coupled pair (its differential impedance); a single-ended "
                    f"design uses one of {', '.join(SINGLE_ENDED_KINDS)} (or set [bus] signaling = "
                    "\"differential\")", gt, "kind")
    dims = {}
    for k in keys:
        if k not in g:
            raise c.err(f"missing key; kind {kind!r} takes: {', '.join(keys)}", gt, k)
        dims[k] = c.qty(g[k], "dimensionless" if k == "er" else "length", gt, k, f"{gt}.{k}")
    given = [k for k in ("z0", "delay", "er_eff") if getattr(ln, k) is not None]
    if given:
        # a design's own view carries the derived values: accept them only if they are exactly those
        view = False
        try:
            z0, delay, er, _ = derive(kind, dims, differential=signaling == "differential")
            view = all(isinstance(getattr(ln, k), (int, float)) and float(getattr(ln, k)) == v
                       for k, v in (("z0", z0), ("delay", delay), ("er_eff", er)) if getattr(ln, k) is not None)
        except Exception:   # noqa: BLE001 -- any failure means "not a view": refused below
            view = False
        if not view:
            raise c.err(f"give either geometry or {given[0]} (z0 with delay or er_eff), not both: the geometry "
                        "sets z0 and the delay", t, given[0])
    return kind
def _ibis_part(c, p, t):
    """(role, keys the part table gave, IbisPart) of a part from an IBIS file (budget.ibis_parts); fills c's values."""

    ref = p.ibis
    if isinstance(ref, ibis_parts.IbisPart):
        raise c.err("a part view holds the resolved IBIS part; build the part from an IbisRef "
                    "(file, component, model, corner)", t, "ibis")
    part = ibis_parts.resolve(ref, c.source, t)
    model = part.model
    role = p.role if p.role is not None else ibis_parts.role_of(model)
    role = c.text(role, t, "role", choices=ROLES)
    if role in ("driver", "transceiver") and not model.can_drive:
        raise c.err(f"IBIS model {part.model_name!r} (Model_type {model.model_type}) cannot drive; use role "
                    "'receiver'", t, "role")
    if role in ("receiver", "transceiver") and not model.can_receive:
        raise c.err(f"IBIS model {part.model_name!r} (Model_type {model.model_type}) has no input; use role "
                    "'driver'", t, "role")
    for k in DRIVE_KEYS:
        if getattr(p, k) is not None:
            raise c.err("comes from the IBIS model (its I-V tables); remove it, or use a linear part", t, k)
    corner = ibis_parts.corner_value(ref.corner, c.source, t, "ibis.corner")
    c.params[f"{t}.ibis.corner"] = corner
    c.dims[f"{t}.ibis.corner"] = "ibis_corner"
    derived = ibis_parts.derived_values(part, {-1.0: "min", 0.0: "typ", 1.0: "max"}[corner])
    receives = role in ("receiver", "transceiver")
    present = set()
    dims = {**RECEIVE_KEYS, **PART_COMMON}
    for k in ibis_parts.OVERRIDABLE:
        if k in RECEIVE_KEYS and not receives:
            if getattr(p, k) is not None:
                raise c.err(f"a part with role {role!r} has no {k}", t, k)
            continue
        value = getattr(p, k)
        if k == "r_in" and isinstance(value, float) and value == float("inf"):
            value = None
        if value is not None:
            c.qty(value, dims[k], t, k, f"{t}.{k}")
            present.add(k)
        elif k in derived:
            c.params[f"{t}.{k}"] = derived[k]
        elif k in RECEIVE_KEYS:
            raise c.err(f"IBIS model {part.model_name!r} gives no {'Vinh' if k == 'vih' else 'Vinl'}; give {k} in "
                        "the part table", t, k)
    if role in ("driver", "transceiver"):
        for k in DRIVE_KEYS:
            c.params[f"{t}.{k}"] = derived[k]
    if p.ref_load is not None:
        if role == "receiver":
            raise c.err("a receiver-only part has no timing reference load", t, "ref_load")
        rl = c.kind(p.ref_load, RefLoad, f"{t}.ref_load")
        for k, dim in REF_LOAD_KEYS.items():
            if c.qty(getattr(rl, k), dim, f"{t}.ref_load", k, f"{t}.ref_load.{k}", required=(k == "r")) is not None:
                present.add(f"ref_load.{k}")
    present.add("ibis")
    return role, frozenset(present), part


def _same_delay(delay, er) -> bool:
    try:
        return abs(float(delay) - math.sqrt(float(er)) / C0) <= 1e-12 * abs(float(delay))
    except (TypeError, ValueError):
        return False


def _check_connected(c: _Ctx, segments, nodes):
    order = sorted(nodes)
    index = {n: i for i, n in enumerate(order)}
    roots = union_roots(len(order), [(index[a], index[b]) for a, b, _ in segments])
    groups = {}
    for n, r in zip(order, roots):
        groups.setdefault(r, []).append(n)
    if len(groups) > 1:
        parts = sorted((sorted(g) for g in groups.values()), key=len)
        raise c.err(f"the segments form {len(groups)} separate pieces; nodes {listed(parts[0])} are not "
                    "connected to the rest", "segment")


def _budget(c: _Ctx, b) -> Budget:
    b = c.kind(b, Budget, "budget")
    if not isinstance(b.allocations, Mapping):
        raise c.err("allocations must be a mapping name -> value", "budget")
    alloc = {}

    def one(name, value, table):
        if isinstance(value, tuple) and len(value) == 2 and value[1] in ("V", "swing"):
            v = parse_quantity(value[0], "voltage" if value[1] == "V" else "dimensionless",
                               source=c.source, table=table, key=name)
            unit = value[1]
        elif is_percent(value):
            v, unit = parse_quantity(value, "dimensionless", source=c.source, table=table, key=name), "swing"
        else:
            v, unit = parse_quantity(value, "voltage", source=c.source, table=table, key=name), "V"
        if v < 0:
            raise c.err("an allocation cannot be negative", table, name)
        limit = 1.0 if unit == "swing" else validation.PLAUSIBLE["voltage"].hi
        if v > limit:
            raise c.err(f"an allocation of {v:g} {'of the swing' if unit == 'swing' else 'V'} is not plausible "
                        f"(at most {'100 %' if unit == 'swing' else f'{limit:g} V'})", table, name)
        return (v, unit)

    for name, value in b.allocations.items():
        table = "budget" if name in BUDGET_NAMED else "budget.extra"
        c.text(name, table, "name")
        alloc[name] = one(name, value, table)
    settle = parse_quantity(b.settle_band, "dimensionless", source=c.source, table="budget", key="settle_band")
    if not 0 < settle < 1:
        raise c.err("settle_band must be between 0 % and 100 % of the swing", "budget", "settle_band")
    min_margin = parse_quantity(b.min_margin, "voltage", source=c.source, table="budget", key="min_margin")
    if abs(min_margin) > validation.PLAUSIBLE["voltage"].hi:
        raise c.err(f"a minimum margin of {min_margin:g} V is not plausible", "budget", "min_margin")
    return Budget(allocations=frozen(alloc), settle_band=settle, min_margin=min_margin)


def _tolerances(c: _Ctx, tol, st: Structure):
    if not isinstance(tol, Mapping):
        raise c.err(f"expected a table of tolerances, got {type(tol).__name__}", "tolerances")
    out = {}
    for path, spec in tol.items():
        if path not in c.dims:
            raise c.err(f"no numeric value at this path in the design; known paths: {_path_hint(st, path)}",
                        "tolerances", path)
        dim = c.dims[path]
        nominal = c.params[path]
        if isinstance(spec, (list, tuple)):
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


def validate_new(st: Structure, P) -> None:
    """Every rule on the nominal values, then the tolerance box (each path at both ends, then all together)."""
    try:
        validation.check(st.rules, P)
    except RuleFailed as exc:
        raise validation.file_error(st.source, exc) from None
    box = st.tolerances
    if not box:
        return
    for path, (lo, hi) in box.items():
        Q = dict(P)
        Q[path] = np.array([lo, hi])
        try:
            validation.check(st.rules, Q, st.rule_index.get(path, ()))
        except RuleFailed as exc:
            raise DesignError(f"the tolerance range [{lo:g}, {hi:g}] reaches a non-physical value: {exc.reason}",
                              source=st.source, table="tolerances", key=path) from None
    Q = dict(P)
    only = set()
    for path, b in box.items():
        Q[path] = np.array(b)
        only.update(st.rule_index.get(path, ()))
    try:
        validation.check(st.rules, Q, only)
    except RuleFailed as exc:
        table, _, key = exc.blame.rpartition(".")
        raise DesignError(f"with every tolerance at its minimum or maximum the design is non-physical: "
                          f"[{validation.table_label(table)}] {key}: {exc.reason}", source=st.source,
                          table="tolerances", key=key) from None
