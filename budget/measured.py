"""Measured values: ``--set PATH=VALUE`` and ``--values FILE`` applied on top of a design.

On the production line a unit's measured values (trunk impedance from a TDR,
driver strength from the fixture, actual stub lengths) replace the nominal
ones.  Each value is addressed by the dotted path of the design's parameter
table (``Design.params``: ``"lines.trunk.z0"``, ``"parts.xcvr.r_high"``,
``"tap.U3.stub.length"``, ``"termination.0.r"`` ...) and written as a quantity
with units (``"52.1 ohm"``) or a plain number in SI base units.

Files
-----
TOML
    ``"lines.trunk.z0" = "52.1 ohm"`` (quoted dotted keys) or the same as
    tables (``[lines.trunk]`` then ``z0 = "52.1 ohm"``); nested tables are
    joined with dots.  Chosen for ``.toml`` files.
CSV
    A header line ``path,value`` (case-insensitive; further columns such as a
    note are ignored), then one value per line; blank lines and lines starting
    with ``#`` are skipped.  Chosen for every other file name.

Rules
-----
* Each value is parsed with :func:`budget.units.parse_quantity` in the
  dimension of its path (``design.structure.dimensions``), so ``"52 mV"`` for
  an impedance is refused.  Errors name the file, the line and the path
  (:class:`ValuesError`, a :class:`budget.errors.DesignError`).
* A path given twice in one file is refused; ``--set`` overrides a value of
  ``--values`` (the command line is the last word) and the override is noted.
* The result goes through :meth:`budget.Design.with_values`, which re-validates
  the physics (a non-physical value is refused naming its file and line).
* A value outside the design's tolerance box is accepted and flagged
  (:func:`budget.analyses.out_of_box`), never refused: a unit out of tolerance
  is exactly what the line must see.
* In tolerance analyses (the default check's corners, Monte Carlo, search) a
  measured value is *held at its measured value*: the unit is known there; the
  values that were not measured still vary over their tolerance (:func:`pin`).
"""
from __future__ import annotations

import csv
import io
import math
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

from .errors import DesignError
from .files import read_regular_file

MAX_VALUES_BYTES = 4 * 1024 * 1024   # a values file is a few lines, not a data dump


class ValuesError(DesignError):
    """A measured value (``--set`` or a ``--values`` file) is unreadable, unknown or non-physical.

    ``source`` is the file (or ``--set``), ``line`` its line (None for ``--set``),
    ``path`` the dotted parameter path.  Message: ``file: line 3: lines.trunk.z0: reason``.
    """

    def __init__(self, message, *, source="--set", line=None, path=None):
        super().__init__(message, source=source, key=path)
        self.line = line
        self.path = path
        where = source + (f": line {line}" if line is not None else "") + (f": {path}" if path else "")
        self.args = (f"{where}: {message}",)


@dataclass(frozen=True)
class Entry:
    """One measured value as written: path, text (or number), where it came from."""
    path: str
    raw: object
    source: str          # file name, or "--set"
    line: int | None     # 1-based line in the file (None for --set)

    @property
    def origin(self) -> str:
        return self.source if self.line is None else f"{self.source}:{self.line}"


@dataclass(frozen=True)
class Measured:
    """Measured values resolved against a design.

    values: {path: float [SI]}; entries: the Entry each value came from;
    files: values files read (for the record's input hashes); settings: the
    ``PATH=VALUE`` texts of ``--set`` (hashed under ``"--set"``); notes: overrides.
    """
    values: dict = field(default_factory=dict)
    entries: dict = field(default_factory=dict)
    files: tuple = ()
    settings: tuple = ()
    notes: tuple = ()

    def __bool__(self):
        return bool(self.values)

    def to_json(self, design=None) -> list:
        """[{path, value [SI], unit, given, origin}] in the order given."""
        from .units import DIMENSIONS

        dims = getattr(getattr(design, "structure", None), "dimensions", {}) or {}
        return [{"path": p, "value": v, "unit": DIMENSIONS[dims[p]][1] if p in dims else None,
                 "given": str(self.entries[p].raw), "origin": self.entries[p].origin}
                for p, v in self.values.items()]


# ---------------------------------------------------------------------------
# reading

def parse_setting(text: str) -> Entry:
    """``PATH=VALUE`` from the command line -> Entry (ValuesError if there is no ``=``, path or value)."""
    if not isinstance(text, str) or "=" not in text:
        raise ValuesError(f"expected PATH=VALUE (e.g. lines.trunk.z0=\"52.1 ohm\"), got {text!r}")
    path, _, value = text.partition("=")
    path, value = path.strip(), value.strip().strip('"').strip("'").strip()
    if not path:
        raise ValuesError(f"no path before '=' in {text!r}")
    if not value:
        raise ValuesError("no value after '='", path=path)
    return Entry(path, value, "--set", None)


def read_values_file(path) -> list:
    """Entries of a values file (TOML for ``.toml``, else CSV ``path,value``); ValuesError naming file and line."""
    src = str(path)
    p = Path(path)
    raw = read_regular_file(p, MAX_VALUES_BYTES, lambda reason: ValuesError(reason, source=src),
                            hint="a values file holds one line per value")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValuesError("not UTF-8 text", source=src) from None
    if p.suffix.lower() == ".toml":
        return _read_toml(text, src)
    return _read_csv(text, src)


def _read_toml(text: str, src: str) -> list:
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValuesError(f"not valid TOML ({exc})", source=src) from None
    lines = text.splitlines()
    out = []

    def walk(table, prefix):
        for key, value in table.items():
            path = f"{prefix}{key}"
            if isinstance(value, dict):
                walk(value, path + ".")
                continue
            line = _toml_line(lines, key)
            if isinstance(value, bool) or not isinstance(value, (str, int, float)):
                raise ValuesError(f"expected a quantity (\"52.1 ohm\") or a number, got {type(value).__name__}",
                                  source=src, line=line, path=path)
            out.append(Entry(path, value, src, line))
    walk(doc, "")
    if not out:
        raise ValuesError("no values (expected lines like \"lines.trunk.z0\" = \"52.1 ohm\")", source=src)
    return out


def _toml_line(lines, key: str):
    """1-based line where ``key`` is assigned (best effort; None if not found)."""
    for i, ln in enumerate(lines, start=1):
        s = ln.strip()
        for form in (f'"{key}"', f"'{key}'", key):
            if s.startswith(form) and s[len(form):].lstrip().startswith("="):
                return i
    return None


def _read_csv(text: str, src: str) -> list:
    rows = [(i, ln) for i, ln in enumerate(text.splitlines(), start=1)
            if ln.strip() and not ln.lstrip().startswith("#")]
    if not rows:
        raise ValuesError("empty: expected a header 'path,value' and one line per value", source=src)
    hline, head = rows[0]
    cells = [c.strip().lower() for c in next(csv.reader(io.StringIO(head)))]
    if len(cells) < 2 or cells[:2] != ["path", "value"]:
        raise ValuesError(f"the header must start with 'path,value', got {head.strip()!r}", source=src, line=hline)
    if len(rows) == 1:
        raise ValuesError("no values after the header", source=src, line=hline)
    out = []
    for i, ln in rows[1:]:
        cells = [c.strip() for c in next(csv.reader(io.StringIO(ln)))]
        if len(cells) < 2:
            raise ValuesError(f"expected 'path,value', got {ln.strip()!r}", source=src, line=i)
        path, value = cells[0], cells[1]
        if not path:
            raise ValuesError("empty path", source=src, line=i)
        if not value:
            raise ValuesError("empty value", source=src, line=i, path=path)
        out.append(Entry(path, value, src, i))
    return out


# ---------------------------------------------------------------------------
# resolving against a design

def _known_paths(design, path: str) -> str:
    dims = design.structure.dimensions
    head = path.split(".")[0]
    near = [p for p in dims if p.split(".")[0] == head] or list(dims)
    return ", ".join(near[:10]) + (" ..." if len(near) > 10 else "")


def resolve(design, entries) -> Measured:
    """Parse every entry in the dimension of its path: Measured with {path: float [SI]}.

    Later entries override earlier ones from another source (``--set`` after
    ``--values``); a path repeated within one source is refused.
    """
    from .units import parse_quantity

    dims = design.structure.dimensions
    values, used, notes = {}, {}, []
    for e in entries:
        if e.path not in dims:
            raise ValuesError(f"the design has no numeric value at this path; known paths: "
                              f"{_known_paths(design, e.path)}", source=e.source, line=e.line, path=e.path)
        raw = e.raw
        if isinstance(raw, str):
            try:
                raw = float(raw)   # a plain number (CSV and --set are text) is in SI base units
            except ValueError:
                pass
        try:
            v = parse_quantity(raw, dims[e.path], source=e.source)
        except DesignError as exc:
            raise ValuesError(exc.reason, source=e.source, line=e.line, path=e.path) from None
        if not math.isfinite(v):  # pragma: no cover (parse_quantity refuses non-finite values)
            raise ValuesError(f"{e.raw!r} is not finite", source=e.source, line=e.line, path=e.path)
        if e.path in used:
            prev = used[e.path]
            if prev.source == e.source:
                raise ValuesError(f"given twice (also at {prev.origin})", source=e.source, line=e.line,
                                  path=e.path)
            notes.append(f"{e.path}: {e.origin} overrides {prev.origin}")
            del values[e.path]
        values[e.path] = v
        used[e.path] = e
    return Measured(values=values, entries=used, notes=tuple(notes))


def gather(design, *, settings=(), files=()) -> Measured:
    """Measured values from ``--values`` files (in order) then ``--set`` texts, resolved against ``design``."""
    entries = []
    for f in files:
        entries += read_values_file(f)
    for s in settings:
        entries.append(parse_setting(s))
    m = resolve(design, entries)
    return replace(m, files=tuple(str(f) for f in files), settings=tuple(settings))


def apply(design, measured: Measured):
    """``design`` with the measured values in place (re-validated); a non-physical value names its origin."""
    if not measured:
        return design
    try:
        return design.with_values(measured.values)
    except ValuesError:
        raise
    except DesignError as exc:
        path = next((p for p in (exc.key, f"{exc.table}.{exc.key}") if p in measured.entries), None)
        if path is None:
            raise
        e = measured.entries[path]
        raise ValuesError(exc.reason, source=e.source, line=e.line, path=path) from None


def pin(design, measured: Measured):
    """``design`` with the tolerance interval of each measured path collapsed to its measured value.

    Tolerance analyses then vary only the values that were not measured.
    (Use the unpinned design for :func:`budget.analyses.out_of_box`.)
    """
    if not measured:
        return design
    tol = {p: ((measured.values[p], measured.values[p]) if p in measured.values else box)
           for p, box in design.tolerances.items()}
    return design.with_tolerance_box(tol)


def load_with_values(design, *, settings=(), files=()):
    """(design with the measured values applied, Measured) -- the CLI's and a Python script's one call."""
    m = gather(design, settings=settings, files=files)
    return apply(design, m), m


__all__ = ["ValuesError", "Entry", "Measured", "parse_setting", "read_values_file", "resolve", "gather", "apply",
           "pin", "load_with_values"]
