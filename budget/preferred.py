"""IEC 60063 preferred values (E6 ... E192) for picking resistor and capacitor values.

The tables come from the `eseries` package (the IEC 60063:2015 lists, including
the irregular E24 values 2.7, 3.0 ... 8.2 and E192's 920 that the formula
10**(i/n) does not give).  This module adds what the package leaves open:

- :func:`nearest` picks by *logarithmic* distance, |ln(value/candidate)|.  The
  E series are geometric (each step is the same ratio), so "nearest" means the
  smallest ratio error; the package's own ``find_nearest`` uses the linear
  distance |value - candidate|, which favours the larger neighbour near a
  midpoint (10.49 is nearer 10 linearly but nearer 11 in ratio).  Ties go to
  the lower value.
- :func:`values_between` lists the series values in a closed range.

Values are plain numbers in whatever unit the caller uses (ohm, F, ...).
"""
from __future__ import annotations

import math

from .errors import ArgumentError

SERIES = ("E6", "E12", "E24", "E48", "E96", "E192")


def _key(series: str):
    import eseries

    if not isinstance(series, str) or series.upper() not in SERIES:
        raise ArgumentError(f"unknown preferred-number series {series!r}; series are: {', '.join(SERIES)}")
    return eseries.ESeries[series.upper()]


# the eseries package works between 1e-200 and the float limit; keep clear of both ends
MIN_VALUE, MAX_VALUE = 1e-150, 1e150


def _positive(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ArgumentError(f"{name} must be a number, got {type(value).__name__}")
    v = float(value)
    if not (math.isfinite(v) and v > 0.0):
        raise ArgumentError(f"{name} must be a positive finite number, got {value!r}")
    if not MIN_VALUE <= v <= MAX_VALUE:
        raise ArgumentError(f"{name} = {v:g} is outside the supported range {MIN_VALUE:g} .. {MAX_VALUE:g}")
    return v


def decade(series: str) -> tuple[float, ...]:
    """The series' values in one decade, scaled to [1, 10) (e.g. E6: 1.0, 1.5, 2.2, 3.3, 4.7, 6.8)."""
    import eseries

    base = eseries.series(_key(series))
    scale = 10.0 ** (len(str(base[0])) - 1)
    return tuple(round(b / scale, 2) for b in base)


def values_between(lo: float, hi: float, series: str) -> tuple[float, ...]:
    """Every value of ``series`` with lo <= value <= hi, ascending (both ends included).

    lo, hi: positive numbers in the caller's unit (e.g. [ohm]).
    """
    import eseries

    key = _key(series)
    lo, hi = _positive(lo, "lo"), _positive(hi, "hi")
    if lo > hi:
        raise ArgumentError(f"values_between: lo ({lo:g}) must not exceed hi ({hi:g})")
    return tuple(float(v) for v in eseries.erange(key, lo, hi))


def nearest(value: float, series: str) -> float:
    """The value of ``series`` nearest to ``value`` in ratio (log distance); ties go to the lower one.

    value: a positive number in the caller's unit (e.g. [ohm]).  Example:
    nearest(54, "E24") -> 56, nearest(54, "E96") -> 53.6, nearest(120, "E96") -> 121.
    """
    import eseries

    key = _key(series)
    v = _positive(value, "value")
    # the neighbours below and above (exact members come back from both)
    below = eseries.find_less_than_or_equal(key, v)
    above = eseries.find_greater_than_or_equal(key, v)
    candidates = [float(c) for c in (below, above) if c is not None]
    return min(candidates, key=lambda c: (abs(math.log(v / c)), c))


def neighbours(value: float, series: str) -> tuple[float, float]:
    """The series values just below-or-equal and just above-or-equal to ``value`` (caller's unit)."""
    import eseries

    key = _key(series)
    v = _positive(value, "value")
    return float(eseries.find_less_than_or_equal(key, v)), float(eseries.find_greater_than_or_equal(key, v))


def tolerance(series: str) -> float:
    """The series' customary tolerance [-] (E6 0.2, E12 0.1, E24 0.05, E48 0.02, E96 0.01, E192 0.005)."""
    import eseries

    return float(eseries.tolerance(_key(series)))


__all__ = ["SERIES", "decade", "values_between", "nearest", "neighbours", "tolerance"]
