"""Reading design files (TOML): a thin reader onto the :class:`~budget.model.Design` constructor.

The file format is a contract (see DEVELOPERS.md and the README).  This module
only checks the file's shape -- tables where tables belong, no unknown keys
(:func:`accepted_keys`, the one key schema) -- and maps each table onto the
model's building blocks; every physics rule lives in :mod:`budget.model` and
:mod:`budget.validation`, which name the file, the table and the key exactly
as this reader does.
"""
from __future__ import annotations

import tomllib
from pathlib import Path

from .errors import DesignError
from .files import read_regular_file
from .geometry import KINDS as GEOMETRY_KINDS
from .limits import MAX_FILE_BYTES   # re-exported here, where it always was
from .ibis_parts import IBIS_KEYS, IbisRef
from .ibis_parts import OVERRIDABLE as IBIS_OVERRIDABLE
from .model import (
    BUDGET_NAMED, DRIVE_KEYS, LINE_KEYS, PART_COMMON, RECEIVE_KEYS, REF_LOAD_KEYS, TERM_KEYS, Budget, Bus,
    Design, Edge, LineType, Part, RefLoad, Segment, Stub, Tap, Termination,
)

_PART_BASE = {"role", "ref_load", *PART_COMMON}
_SCHEMA = {
    "": {"bus", "edge", "parts", "lines", "segment", "tap", "termination", "tolerances", "budget"},
    "bus": {"name", "signaling", "t_stop", "dt"},
    "edge": {"rise", "fall"},
    "parts.driver": _PART_BASE | set(DRIVE_KEYS),
    "parts.receiver": (_PART_BASE - {"ref_load"}) | set(RECEIVE_KEYS),   # a receiver has no timing reference
    "parts.transceiver": _PART_BASE | set(DRIVE_KEYS) | set(RECEIVE_KEYS),
    "parts.ref_load": set(REF_LOAD_KEYS),
    "parts.ibis_part": {"role", "ibis", "ref_load", *IBIS_OVERRIDABLE},   # a part from an IBIS file
    "parts.ibis": set(IBIS_KEYS),
    "lines": set(LINE_KEYS) | {"geometry"},
    **{f"lines.geometry.{kind}": {"kind", *keys} for kind, keys in GEOMETRY_KINDS.items()},
    "segment": {"from", "to", "line", "length"},
    "tap": {"name", "node", "part", "stub"},
    "tap.stub": {"line", "length"},
    **{f"termination.{typ}": {"type", *keys} for typ, keys in TERM_KEYS.items()},
    "budget": {*BUDGET_NAMED, "settle_band", "min_margin", "extra"},
}
TOP_LEVEL = tuple(sorted(_SCHEMA[""]))
_ANY_PART_KEY = _SCHEMA["parts.transceiver"]


def accepted_keys() -> dict[str, set[str]]:
    """Table label -> the keys the loader accepts in that table (a fresh copy).

    Labels: "" (top-level tables), "bus", "edge", "parts.driver",
    "parts.receiver", "parts.transceiver", "parts.ref_load", "parts.ibis_part" (a part
    with ``ibis``), "parts.ibis" (the ``ibis`` table itself), "lines",
    "lines.geometry.KIND" (one per cross-section kind: microstrip, stripline, coax, two_wire,
    edge_coupled_microstrip, edge_coupled_stripline), "segment", "tap", "tap.stub", "termination.parallel",
    "termination.thevenin", "termination.rc", "termination.series", "budget".
    ``[tolerances]`` and ``[budget.extra]`` take any key (dotted paths,
    allocation names).  The loader's own unknown-key checks use this data.
    """
    return {label: set(keys) for label, keys in _SCHEMA.items()}


# ---------------------------------------------------------------------------
# entry points

def load(path) -> Design:
    """Load and validate a design file; errors name the file, table and key."""
    path = Path(path)
    data = read_regular_file(path, MAX_FILE_BYTES, lambda reason: DesignError(reason, source=str(path)),
                             hint="not a design file")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise DesignError("the file is not UTF-8 text", source=str(path)) from None
    return loads(text, source=str(path))


def loads(text: str, *, source: str = "<string>") -> Design:
    """Parse and validate design-file text (TOML); ``source`` names it in errors."""
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"not valid TOML ({exc})", source=source) from None
    except (ValueError, RecursionError, MemoryError) as exc:   # huge integers, deep nesting
        raise DesignError(f"cannot read the TOML ({type(exc).__name__}: {str(exc)[:120]})", source=source) from None
    return Design(source=source, **_arguments(doc, source))


# ---------------------------------------------------------------------------
# file tables -> constructor arguments

class _Reader:
    def __init__(self, source):
        self.source = source

    def err(self, msg, table=None, key=None):
        return DesignError(msg, source=self.source, table=table, key=key)

    def table(self, obj, table):
        if not isinstance(obj, dict):
            raise self.err(f"expected a table, got {type(obj).__name__}", table)
        return obj

    def known(self, obj, label, table):
        allowed = _SCHEMA[label]
        for k in obj:
            if k not in allowed:
                raise self.err(f"unknown key; allowed keys here: {', '.join(sorted(allowed))}", table, k)

    def array(self, obj, name):
        if not isinstance(obj, list):
            raise self.err(f"use [[{name}]] (an array of tables)", name)
        return obj


def _arguments(doc: dict, source: str) -> dict:
    r = _Reader(source)
    r.known(doc, "", None)
    for required in ("bus", "edge", "parts", "tap"):
        if required not in doc:
            raise r.err(f"missing table [{required}]" if required != "tap" else "missing [[tap]] entries")

    bus = r.table(doc["bus"], "bus")
    r.known(bus, "bus", "bus")
    edge = r.table(doc["edge"], "edge")
    r.known(edge, "edge", "edge")

    parts = {}
    for name, p in r.table(doc["parts"], "parts").items():
        t = f"parts.{name}"
        p = dict(r.table(p, t))
        if "ibis" in p and not _linear_intent(p):   # a buffer from an IBIS file: budget.ibis_parts
            r.known(p, "parts.ibis_part", t)
            ib = r.table(p["ibis"], f"{t}.ibis")
            r.known(ib, "parts.ibis", f"{t}.ibis")
            if "file" not in ib:
                raise r.err("missing key", f"{t}.ibis", "file")
            p["ibis"] = IbisRef(**ib)
            if "ref_load" in p:
                rl = r.table(p["ref_load"], f"{t}.ref_load")
                r.known(rl, "parts.ref_load", f"{t}.ref_load")
                p["ref_load"] = RefLoad(**rl) if "r" in rl else _missing_ref_r(r, t)
            parts[name] = Part(role=p.pop("role", None), **p)
            continue
        if "role" not in p:
            raise r.err("missing key (or ibis = { ... } for a part from an IBIS file)", t, "role")
        role = p.get("role")
        label = f"parts.{role}" if role in ("driver", "receiver", "transceiver") else "parts.transceiver"
        for k in p:
            # a key of another role is left to the model, which says to use role 'transceiver'
            if k not in _SCHEMA[label] and k not in _ANY_PART_KEY:
                r.known(p, label, t)
        if "ref_load" in p:
            rl = r.table(p["ref_load"], f"{t}.ref_load")
            r.known(rl, "parts.ref_load", f"{t}.ref_load")
            p["ref_load"] = RefLoad(**rl) if "r" in rl else _missing_ref_r(r, t)
        parts[name] = Part(**p)

    lines = {}
    for name, ln in r.table(doc.get("lines", {}), "lines").items():
        t = f"lines.{name}"
        ln = r.table(ln, t)
        r.known(ln, "lines", t)
        if "geometry" in ln:
            g = r.table(ln["geometry"], f"{t}.geometry")
            kind = g.get("kind")
            if kind in GEOMETRY_KINDS:        # the model names a missing or unknown kind
                r.known(g, f"lines.geometry.{kind}", f"{t}.geometry")
        elif "z0" not in ln:
            raise r.err("missing key (or give geometry = { kind = ..., ... })", t, "z0")
        lines[name] = LineType(**ln)

    segments = []
    for i, s in enumerate(r.array(doc.get("segment", []), "segment")):
        t = f"segment #{i + 1}"
        s = r.table(s, t)
        r.known(s, "segment", t)
        for k in ("from", "to", "line", "length"):
            if k not in s:
                raise r.err("missing key", t, k)
        segments.append(Segment(s["from"], s["to"], s["line"], s["length"]))

    taps_doc = doc["tap"]
    if not isinstance(taps_doc, list) or not taps_doc:
        raise r.err("use [[tap]] (an array of tables) with at least one entry", "tap")
    taps = []
    for i, tp in enumerate(taps_doc):
        t = f"tap #{i + 1}"
        tp = r.table(tp, t)
        r.known(tp, "tap", t)
        for k in ("name", "node", "part"):
            if k not in tp:
                raise r.err("missing key", t if k == "name" or "name" not in tp else f"tap {tp['name']}", k)
        stub = None
        if "stub" in tp:
            st_t = f"tap {tp['name']}.stub"
            st = r.table(tp["stub"], st_t)
            r.known(st, "tap.stub", st_t)
            for k in ("line", "length"):
                if k not in st:
                    raise r.err("missing key", st_t, k)
            stub = Stub(st["line"], st["length"])
        taps.append(Tap(tp["name"], tp["node"], tp["part"], stub))

    terminations = []
    for i, tm in enumerate(r.array(doc.get("termination", []), "termination")):
        t = f"termination #{i + 1}"
        tm = r.table(tm, t)
        typ = tm.get("type")
        known = isinstance(typ, str) and typ in TERM_KEYS   # a table or an array here is no type name
        if known:
            r.known(tm, f"termination.{typ}", t)
        terminations.append(Termination(**tm) if known else Termination(typ))

    b = r.table(doc.get("budget", {}), "budget")
    r.known(b, "budget", "budget")
    alloc = {k: v for k, v in b.items() if k in BUDGET_NAMED}
    if "extra" in b:
        for name, value in r.table(b["extra"], "budget.extra").items():
            if name in alloc:
                raise r.err("duplicates a named allocation", "budget.extra", name)
            alloc[name] = value
    budget = Budget(allocations=alloc, **{k: b[k] for k in ("settle_band", "min_margin") if k in b})
    tolerances = r.table(doc.get("tolerances", {}), "tolerances")
    return dict(bus=Bus(**bus), edge=Edge(rise=edge.get("rise"), fall=edge.get("fall")), parts=parts, lines=lines,
                segments=segments, taps=taps, terminations=terminations, tolerances=tolerances,
                noise_budget=budget)


def _linear_intent(p: dict) -> bool:
    """A part table that has the linear keys of its role is a linear part (a stray ``ibis`` is then refused)."""
    if "role" not in p:
        return False
    if any(k in p for k in DRIVE_KEYS):
        return True
    return p.get("role") == "receiver" and all(k in p for k in ("c_pin", *RECEIVE_KEYS))


def _missing_ref_r(r: _Reader, t: str):
    raise r.err("missing key", f"{t}.ref_load", "r")
