"""Physical quantities from text: "50 ohm", "6.7 ns/m", "1.8 pF", "10%".

A quantity is a number and an optional unit, or a plain number already in SI
base units.  The text is read in two steps:

1. this module checks the *shape* of the text itself (one decimal number, then
   at most a unit over a unit; at most :data:`MAX_TEXT` characters), so hostile
   text (``"9**9**9 ohm"``, expressions, megabytes of digits) is refused at once
   instead of being handed to an expression evaluator;
2. each unit word is matched to a known unit, case-insensitively where the case
   cannot change the meaning (pF = pf = PF, ohm = Ohm = OHM = Ω, ns = NS,
   kohm = kOhm), and the canonical spelling is converted by `pint` (a well-kept
   units library), which also checks the dimension.

The one letter whose case carries meaning is m/M (milli / mega).  Its case is
trusted when the unit after it is written in its usual case ("mV", "MOhm",
"Mohm", "mohm", "ms", "mm"): whoever wrote it minded the case.  When the rest of
the unit is in an unusual case ("MOHM", "mv", "MS", "MM") both readings are
possible, so the value is refused with a message listing the two.

Every error is a :class:`~budget.errors.DesignError` naming file, table and key
(or the parameter path); no raw message of the units library is shown.
"""
from __future__ import annotations

import functools
import math
import re

from .errors import DesignError
from .ibis_corner import corner_value

# dimension name -> (pint dimensionality string, SI unit shown in messages)
DIMENSIONS = {
    "resistance": ("[mass] * [length] ** 2 / [time] ** 3 / [current] ** 2", "ohm"),
    "voltage": ("[mass] * [length] ** 2 / [time] ** 3 / [current]", "V"),
    "capacitance": ("[current] ** 2 * [time] ** 4 / [mass] / [length] ** 2", "F"),
    "inductance": ("[mass] * [length] ** 2 / [time] ** 2 / [current] ** 2", "H"),
    "time": ("[time]", "s"),
    "length": ("[length]", "m"),
    "delay_per_length": ("[time] / [length]", "s/m"),
    "resistance_per_length": ("[mass] * [length] / [time] ** 3 / [current] ** 2", "ohm/m"),
    "dimensionless": ("dimensionless", "1"),
    "ibis_corner": ("dimensionless", ""),   # -1 min, 0 typ, +1 max (budget.ibis_parts; parsed by corner_value)
}

MAX_TEXT = 64          # characters; "1.23456789e-12 ohm/m" needs 20

# SI base units of this domain: accepted spellings (compared in lower case) -> pint name,
# and the spellings whose case is the usual one (these make an m/M prefix trustworthy).
_BASES = {
    "ohm": (("ohm", "ohms", "\u03a9", "\u2126"), ("ohm", "Ohm", "ohms", "Ohms", "\u03a9", "\u2126")),
    "volt": (("v", "volt", "volts"), ("V", "volt", "volts")),
    "farad": (("f", "farad", "farads"), ("F", "farad", "farads")),
    "henry": (("h", "henry", "henrys", "henries"), ("H", "henry", "henrys", "henries")),
    "second": (("s", "sec", "second", "seconds"), ("s", "sec", "second", "seconds")),
    "meter": (("m", "meter", "metre", "meters", "metres"), ("m", "meter", "metre", "meters", "metres")),
}
# units that take no prefix (board dimensions are often given in mil and inch)
_PLAIN = {"mil": "thou", "mils": "thou", "inch": "inch", "inches": "inch", "in": "inch", "ft": "foot",
          "foot": "foot", "feet": "foot", "%": "percent", "percent": "percent"}
# SI prefixes people use on bus values (no peta/exa: "PF" means pF).  Keys are exact spellings.
_PREFIXES = {"f": "femto", "p": "pico", "n": "nano", "u": "micro", "\u00b5": "micro", "\u03bc": "micro",
             "m": "milli", "c": "centi", "k": "kilo", "M": "mega", "G": "giga",
             "femto": "femto", "pico": "pico", "nano": "nano", "micro": "micro", "milli": "milli",
             "centi": "centi", "kilo": "kilo", "mega": "mega", "giga": "giga"}
_PREFIX_SYMBOL = {"femto": "f", "pico": "p", "nano": "n", "micro": "u", "milli": "m", "centi": "c",
                  "kilo": "k", "mega": "M", "giga": "G"}
_SYMBOL = {"ohm": "ohm", "volt": "V", "farad": "F", "henry": "H", "second": "s", "meter": "m"}

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_WORD = r"[A-Za-z\u00b5\u03bc\u03a9\u2126%]+"
_QUANTITY = re.compile(rf"\s*({_NUMBER})\s*(?:({_WORD})\s*(?:/\s*({_WORD}))?)?\s*")

KNOWN_UNITS = "ohm, V, F, H, s, m (with the prefixes f p n u m c k M G), mil, inch, ft, %"


class UnitTextError(ValueError):
    """The text of a quantity is malformed; the message is meant for the user."""


def _resolve(word: str) -> tuple[str, float | None]:
    """pint spelling of one unit word, and the SI value of a refused ambiguous reading (None)."""
    low = word.lower()
    if low in _PLAIN:
        return _PLAIN[low], None
    for base, (spellings, usual) in _BASES.items():
        for spelling in sorted(spellings, key=len, reverse=True):
            if not low.endswith(spelling.lower()):
                continue
            pre_text, base_text = word[:len(word) - len(spelling)], word[len(word) - len(spelling):]
            if not pre_text:
                return base, None
            prefix = _PREFIXES.get(pre_text) or _PREFIXES.get(pre_text.lower())
            if prefix is None and len(pre_text) == 1 and pre_text.lower() == "g":
                prefix = "giga"
            if prefix is None and pre_text == "K":
                prefix = "kilo"
            if prefix is None:
                continue
            if pre_text in ("m", "M") and base_text not in usual:
                raise UnitTextError(
                    f"the unit {word!r} is ambiguous: {pre_text!r} reads as milli or mega because the rest of "
                    f"the unit is not in its usual case; write m{_SYMBOL[base]} (milli{base}) or "
                    f"M{_SYMBOL[base]} (mega{base})")
            return prefix + base, None
    raise UnitTextError(f"unknown unit {word!r}; known units: {KNOWN_UNITS}")


@functools.lru_cache(maxsize=1)
def _registry():
    # pint takes ~0.6 s to parse its unit definitions: do it only when a unit needs it, and keep
    # the parsed definitions in pint's own disk cache (its cache_folder option, keyed by pint on
    # the definition files) beside the kernel cache: 0.09 s in later processes (2-core machine).
    import pint

    from .jit import cache_root
    root = cache_root()
    if root is not None:
        try:
            return pint.UnitRegistry(cache_folder=root / "pint-definitions")
        except Exception:   # an unwritable or damaged cache: parse the definitions as usual
            pass
    return pint.UnitRegistry()


class _Factors:
    """pint's SI factor and dimensionality of each canonical unit, kept on disk.

    Importing pint costs about 0.5 s in a fresh process (2-core machine); a design uses a
    handful of units.  pint converts a magnitude as ``magnitude * factor`` with the factor of
    the whole unit (checked bit for bit in tests/test_units.py), so the factor pint gives for
    one unit is all a later process needs.  Each factor comes from pint itself, the first time
    a unit is met (or from ``busbudget warm``), and is kept in ``unit-factors-pint-<version>.json``
    beside the kernel cache; a pint upgrade starts a new table.  Without a writable cache the
    table lives in memory only."""

    def __init__(self):
        self._table: dict | None = None
        self._path = None

    def _load(self) -> dict:
        if self._table is None:
            import json
            from importlib import metadata

            from .jit import cache_root
            table: dict = {"units": {}, "dimensions": {}}
            root = cache_root()
            if root is not None:
                try:
                    version = metadata.version("pint")
                except metadata.PackageNotFoundError:
                    version = "unknown"
                self._path = root / f"unit-factors-pint-{version}.json"
                try:
                    loaded = json.loads(self._path.read_text())
                    if isinstance(loaded.get("units"), dict) and isinstance(loaded.get("dimensions"), dict):
                        table = loaded
                except (OSError, ValueError, AttributeError):   # absent or damaged: rebuilt from pint
                    pass
            self._table = table
        return self._table

    def _save(self) -> None:
        if self._path is None:
            return
        import json
        import os
        tmp = self._path.with_name(f"{self._path.name}.{os.getpid()}.tmp")
        try:
            tmp.write_text(json.dumps(self._table, sort_keys=True))
            os.replace(tmp, self._path)   # atomic: a concurrent reader sees an old or a new table
        except OSError:
            try:
                tmp.unlink()
            except OSError:
                pass

    @staticmethod
    def _from_pint(unit: str):
        try:
            q = _registry().Quantity(1.0, unit).to_base_units()
            return [float(q.magnitude), str(q.dimensionality)]
        except Exception:  # pint raises several unrelated types; the text was already checked
            return None

    def unit(self, unit: str):
        """[SI factor, pint dimensionality] of a canonical unit, or None if pint cannot convert it."""
        units = self._load()["units"]
        if unit not in units:
            units[unit] = self._from_pint(unit)
            self._save()
        return units[unit]

    def dimension(self, name: str) -> str:
        """pint dimensionality string of a :data:`DIMENSIONS` name."""
        dims = self._load()["dimensions"]
        if name not in dims:
            ureg = _registry()
            spec = DIMENSIONS[name][0]
            dims[name] = str(ureg.Quantity(1).dimensionality if spec == "dimensionless"
                             else ureg.get_dimensionality(spec))
            self._save()
        return dims[name]

    def fill(self) -> int:
        """Enter every unit a design can write (numerators over a length or a time, and alone)
        and every dimension; return the number of units in the table.  Run by ``busbudget warm``."""
        table = self._load()
        singles = sorted(set(_PLAIN.values()) | set(_BASES)
                         | {prefix + base for base in _BASES for prefix in _PREFIX_SYMBOL})
        denominators = [u for u in singles if u.endswith(("meter", "second")) or u in ("thou", "inch", "foot")]
        changed = False
        for unit in singles + [f"{a} / {b}" for a in singles for b in denominators]:
            if unit not in table["units"]:
                table["units"][unit] = self._from_pint(unit)
                changed = True
        for name in DIMENSIONS:
            if name not in table["dimensions"]:
                self.dimension(name)
        if changed:
            self._save()
        return len(table["units"])


FACTORS = _Factors()


@functools.lru_cache(maxsize=4096)
def _parse_string(text: str) -> tuple[float, str, bool]:
    """(SI magnitude, pint dimensionality, has a unit) of quantity text; raises UnitTextError."""
    if len(text) > MAX_TEXT:
        raise UnitTextError(f"quantity text of {len(text)} characters (at most {MAX_TEXT})")
    m = _QUANTITY.fullmatch(text)
    if m is None:
        raise UnitTextError("expected a number and a unit, like \"50 ohm\" or \"1.2 ns\" "
                            "(no expressions or powers)")
    number, num_unit, den_unit = m.groups()
    value = float(number)
    if not math.isfinite(value):
        raise UnitTextError("the number is too large")
    if num_unit is None:
        return value, "dimensionless", False
    unit = _resolve(num_unit)[0]
    if den_unit is not None:
        unit = f"{unit} / {_resolve(den_unit)[0]}"
    entry = FACTORS.unit(unit)
    if entry is None:
        raise UnitTextError(f"cannot convert the unit {unit!r}")
    return value * entry[0], entry[1], True


def _dimensionality(name: str) -> str:
    return FACTORS.dimension(name)


def parse_quantity(value, dimension: str, *, source="<design>", table=None, key=None) -> float:
    """Return ``value`` as a float in SI base units, checking its dimension.

    Parameters
    ----------
    value : str | int | float
        "50 ohm", "1.2 ns", "10%" ... or a plain number in SI base units.
    dimension : str
        One of :data:`DIMENSIONS` (for example ``"resistance"``).
    source, table, key :
        Where the value came from, used in the error message.

    Raises
    ------
    DesignError
        Malformed text, an unknown or ambiguous unit, the wrong dimension, or a
        non-finite number.
    """
    if dimension == "ibis_corner":   # an IBIS part's corner: "typ" / "min" / "max" (budget.ibis_parts)
        return corner_value(value, source, table, key)
    unit = DIMENSIONS[dimension][1]
    if isinstance(value, bool):
        raise DesignError(f"expected a quantity in {unit}, got a boolean", source=source, table=table, key=key)
    if isinstance(value, (int, float)):
        try:
            out = float(value)
        except OverflowError:
            raise DesignError(f"the number is too large for a quantity in {unit}",
                              source=source, table=table, key=key) from None
    elif isinstance(value, str):
        shown = value if len(value) <= MAX_TEXT else value[:MAX_TEXT] + "..."
        try:
            out, dim, has_unit = _parse_string(value)
        except UnitTextError as exc:
            raise DesignError(f"cannot read {shown!r} as a quantity: {exc}", source=source, table=table,
                              key=key) from None
        if dim != _dimensionality(dimension):
            if not has_unit:
                raise DesignError(f"{value!r} has no unit; write it with one (e.g. \"{value.strip()} {unit}\") "
                                  f"or as a plain number in {unit}", source=source, table=table, key=key)
            raise DesignError(f"{value!r} is not a {dimension.replace('_', ' ')} (expected units of {unit})",
                              source=source, table=table, key=key)
    else:
        raise DesignError(f"expected a quantity in {unit}, got {type(value).__name__}",
                          source=source, table=table, key=key)
    if not math.isfinite(out):
        raise DesignError(f"{value!r} is not a finite number", source=source, table=table, key=key)
    return out


def is_percent(value) -> bool:
    """True if ``value`` is a string written as a percentage ("10%", "5 %", "10 percent")."""
    return isinstance(value, str) and (value.strip().endswith("%") or value.strip().lower().endswith("percent"))


_SI_PREFIX = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"),
              (1e-12, "p"), (1e-15, "f")]


def si(value: float, unit: str) -> str:
    """``value`` [SI] written with an SI prefix on ``unit``: si(1.8e-12, "F") -> "1.8 pF"."""
    if value == 0 or not math.isfinite(value) or unit in ("", "1"):
        return f"{value:.4g} {unit}".strip() if unit not in ("1",) else f"{value:.4g}"
    mag = abs(value)
    for scale, prefix in _SI_PREFIX:
        if mag >= scale * 0.9995:
            return f"{value / scale:.4g} {prefix}{unit}"
    return f"{value:.4g} {unit}"
