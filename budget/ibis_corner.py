"""The corner of a part from an IBIS file as a design value: "min" -1 (slow-weak), "typ" 0, "max" +1 (fast-strong)."""
from __future__ import annotations

from .errors import DesignError

CORNER_VALUE = {"min": -1.0, "typ": 0.0, "max": 1.0}


def corner_value(value, source: str, table: str, key: str) -> float:
    """A corner written as "typ" / "min" / "max" (or -1 / 0 / 1) -> -1, 0 or +1."""
    if isinstance(value, str) and value.strip().lower() in CORNER_VALUE:
        return CORNER_VALUE[value.strip().lower()]
    if isinstance(value, (int, float)) and not isinstance(value, bool) and float(value) in (-1.0, 0.0, 1.0):
        return float(value)
    raise DesignError(f"{value!r} is not an IBIS corner; use \"typ\", \"min\" (slow-weak) or \"max\" (fast-strong)",
                      source=source, table=table, key=key)
