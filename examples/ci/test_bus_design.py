"""Validate a bus design in CI: copy this file next to your tests and point it at your design.

It states properties of the design as tests; pytest and hypothesis try to
break them and, if one breaks, shrink the failure to a small case and print
which driver, receiver, edge, metric and value broke it, and which design
values differ from nominal (with units).

    pip install "busbudget[ci]" pytest
    BUSBUDGET_DESIGN=hw/address_bus.toml pytest test_bus_design.py

Without BUSBUDGET_DESIGN it checks the bundled example "short-bus" (the
fictional "Wren" address bus: one controller, three memory loads on 4 mm
stubs).  Edit STUBS and REQUIRED for your own board: the tap names in STUBS
must be taps of your design.

What "headroom" means: the lowest of (noise margin - min_margin),
(v_max - peak) and (trough - v_min) over every driver, receiver and edge --
the figure ``busbudget check`` ranks its worst case by.  REQUIRED asks for that
much beyond the limits the design file already sets.

The results are estimates from a linear model (see the README, "What the
model assumes"); a green CI run is evidence for a design review, to be
confirmed by measurement and with the part makers' data.
"""
import os

from hypothesis import given
from hypothesis import strategies as st

import budget
from budget.strategies import jit_settings, variants
from budget.testing import assert_margin

DESIGN_FILE = os.environ.get("BUSBUDGET_DESIGN")
DESIGN = budget.load(DESIGN_FILE) if DESIGN_FILE else budget.example("short-bus")

# Every memory stub may end up anywhere from 2 to 8 mm long (layout not final).
STUBS = {f"tap.{tap}.stub.length": ("2 mm", "8 mm") for tap in ("MEM1", "MEM2", "MEM3")}
# Headroom every receiver must keep, beyond the design file's own limits.
REQUIRED = "35 mV"


def test_nominal_design_at_every_corner():
    """The design as drawn keeps REQUIRED at every corner of its [tolerances] box."""
    assert_margin(DESIGN, at_least=REQUIRED, analysis="corners")


@jit_settings(max_examples=30)
@given(variant=variants(DESIGN, within=STUBS))
def test_every_stub_length_at_every_corner(variant):
    """For every stub length from 2 to 8 mm and every tolerance corner, headroom stays above REQUIRED."""
    assert_margin(variant, at_least=REQUIRED, analysis="corners")


@jit_settings(max_examples=10)
@given(batch=st.lists(variants(DESIGN), min_size=1, max_size=32))
def test_anywhere_inside_the_tolerance_box(batch):
    """Not only the corners: random points inside the tolerance box (up to 32 per batched sweep)."""
    assert_margin(batch, at_least=REQUIRED)
