"""Parsing of physical quantities from design files.

Quantities are written as strings with SI units ("50 ohm", "6.7 ns/m", "10%")
or as plain numbers already in SI base units.  Units are parsed by `pint`
(a well-kept units library); this module only checks the dimension and
returns a float in SI base units.
"""
from __future__ import annotations

import functools
import math

from .errors import DesignError

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
}


@functools.lru_cache(maxsize=1)
def _registry():
    # pint takes ~0.5 s to build its registry: do it only when a string needs it.
    import pint

    return pint.UnitRegistry()


@functools.lru_cache(maxsize=4096)
def _parse_string(text: str):
    ureg = _registry()
    q = ureg.Quantity(text.strip())
    q = q.to_base_units()
    return float(q.magnitude), str(q.dimensionality)


def _dimensionality(name: str) -> str:
    ureg = _registry()
    spec = DIMENSIONS[name][0]
    if spec == "dimensionless":
        return str(ureg.Quantity(1).dimensionality)
    return str(ureg.get_dimensionality(spec))


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
        Unparseable text, wrong dimension, or a non-finite number.
    """
    unit = DIMENSIONS[dimension][1]
    if isinstance(value, bool):
        raise DesignError(f"expected a quantity in {unit}, got a boolean", source=source, table=table, key=key)
    if isinstance(value, (int, float)):
        out = float(value)
    elif isinstance(value, str):
        try:
            out, dim = _parse_string(value)
        except Exception as exc:  # pint raises several unrelated types
            raise DesignError(f"cannot read {value!r} as a quantity ({type(exc).__name__}: {exc})",
                              source=source, table=table, key=key) from None
        if dim != _dimensionality(dimension):
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
    return isinstance(value, str) and (value.strip().endswith("%") or value.strip().endswith("percent"))
