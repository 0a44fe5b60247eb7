"""Unit conversion: the on-disk factor table (budget.units.FACTORS) against pint itself.

pint (a general-purpose units library) is the outside reference: every quantity a design
can write must convert to the very float pint gives, and to the same dimension, whether
the factor comes from pint in this process or from a table an earlier process wrote.
"""
from __future__ import annotations

import json
import subprocess
import sys

import pint
import pytest
from hypothesis import given
from hypothesis import strategies as st

from budget import units
from budget.errors import DesignError

UREG = pint.UnitRegistry()

# spellings a designer writes -> the dimension they must be read as
WRITTEN = [("50 ohm", "resistance"), ("1.2 kOhm", "resistance"), ("3.3 V", "voltage"), ("250 mV", "voltage"),
           ("1.8 pF", "capacitance"), ("2 nH", "inductance"), ("6.7 ns/m", "delay_per_length"),
           ("170 ps/in", "delay_per_length"), ("5 mohm/mm", "resistance_per_length"), ("8 mil", "length"),
           ("1.5 inch", "length"), ("3 ft", "length"), ("120 um", "length"), ("10%", "dimensionless"),
           ("4 us", "time"), ("0.5 ohm/ft", "resistance_per_length"), ("2 ns/ft", "delay_per_length")]


def _pint_value(text: str) -> tuple[float, str]:
    """(SI magnitude, dimensionality) of quantity text converted by pint directly."""
    m = units._QUANTITY.fullmatch(text)
    number, num_unit, den_unit = m.groups()
    unit = units._resolve(num_unit)[0]
    if den_unit is not None:
        unit = f"{unit} / {units._resolve(den_unit)[0]}"
    q = UREG.Quantity(float(number), unit).to_base_units()
    return float(q.magnitude), str(q.dimensionality)


@pytest.mark.parametrize("text, dimension", WRITTEN)
def test_written_quantities_equal_pint_bit_for_bit(text, dimension):
    value, dim = _pint_value(text)
    assert units.parse_quantity(text, dimension) == value
    assert units._dimensionality(dimension) == dim


@given(value=st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, allow_infinity=False),
       num=st.sampled_from(["ohm", "pF", "nH", "mV", "kohm", "ns", "ps", "mm", "um", "mil", "inch", "ft", "%"]),
       den=st.sampled_from([None, "m", "mm", "cm", "in", "ft", "mil", "ns", "us"]))
def test_any_number_in_any_unit_equals_pint(value, num, den):
    text = f"{value!r} {num}" + (f"/{den}" if den else "")
    if len(text) > units.MAX_TEXT:
        return
    try:
        expected = _pint_value(text)
    except pint.errors.PintError:
        return
    got = units._parse_string(text)
    assert got[0] == expected[0] and got[1] == expected[1], text


def test_table_from_disk_gives_pints_values_without_importing_pint(tmp_path):
    """A process that finds the table converts every written quantity as pint does, and
    never imports pint; a damaged table is rebuilt from pint instead of read."""
    script = ("import json, sys\n"
              "from budget import units\n"
              f"written = {WRITTEN!r}\n"
              "out = [units.parse_quantity(t, d) for t, d in written]\n"
              "print(json.dumps({'values': out, 'pint': 'pint' in sys.modules}))\n")
    env = {"NUMBA_CACHE_DIR": str(tmp_path), "PATH": "/usr/bin:/bin"}
    run = lambda: json.loads(subprocess.run([sys.executable, "-c", script], env=env, capture_output=True,
                                            text=True, check=True).stdout)
    first = run()                       # empty cache: factors from pint, table written
    assert first["pint"] is True
    second = run()                      # table on disk: no pint at all
    assert second == {"values": first["values"], "pint": False}
    assert second["values"] == [_pint_value(t)[0] for t, _ in WRITTEN]
    (table,) = tmp_path.glob("unit-factors-pint-*.json")
    table.write_text("{not json")
    third = run()
    assert third == {"values": first["values"], "pint": True}
    assert json.loads(table.read_text())["units"]   # rewritten whole


def test_filled_table_covers_every_unit_pint_knows_of_a_design():
    """After fill() (busbudget warm) no spelling of the known units reaches pint; and each
    entry is pint's factor of that unit."""
    units.FACTORS.fill()
    table = units.FACTORS._load()["units"]
    for unit, entry in list(table.items())[::37]:
        try:
            q = UREG.Quantity(1.0, unit).to_base_units()
        except pint.errors.PintError:
            assert entry is None
            continue
        assert entry == [float(q.magnitude), str(q.dimensionality)], unit
    for text, _ in WRITTEN:
        m = units._QUANTITY.fullmatch(text)
        unit = units._resolve(m.group(2))[0] + (f" / {units._resolve(m.group(3))[0]}" if m.group(3) else "")
        assert unit in table, text


def test_wrong_dimension_and_unconvertible_units_are_refused_naming_the_key():
    with pytest.raises(DesignError, match="not a capacitance"):
        units.parse_quantity("5 ns", "capacitance", source="bus.toml", table="tap.U2", key="c_pin")
    with pytest.raises(DesignError, match="c_pin"):
        units.parse_quantity("5 ohm/%", "capacitance", source="bus.toml", table="tap.U2", key="c_pin")
