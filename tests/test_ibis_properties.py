"""Properties of buses with IBIS parts, over random lengths, impedances, terminations and corners (hypothesis).

Physics stated, not code restated: (1) the transient ends at the DC operating point the engine
computes for the final state (a passive bus with a resistive termination forgets its start);
(2) the pins stay inside the rails widened by the clamps: a clamped receiver cannot be driven far
beyond a diode drop outside its supply, whatever the reflections (bounded by twice the swing as a
generous envelope); (3) the result does not depend on which other variants share the batch.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import budget
from budget.simulate import simulate
from budget.sweep import sweep

from ibis_fixtures import SHIPPED, design_text

SETTINGS = settings(max_examples=10, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])


def _bus(folder, trunk_cm, stub_cm, z0, r_term, corner):
    text = design_text("tansy_tsx33.ibs", segments=(("n0", "n1", f"{trunk_cm:.2f} cm"), ("n1", "n2",
                                                                                        f"{trunk_cm:.2f} cm")),
                       taps=(("U1", "n0", "drv", None), ("U2", "n1", "rcv", f"{stub_cm:.2f} cm"),
                             ("U3", "n2", "drv", None)),
                       extra=f'[[termination]]\nnode = "n2"\ntype = "parallel"\nr = "{r_term:.1f} ohm"\nv = "1.65 V"\n')
    text = text.replace('z0 = "50 ohm"', f'z0 = "{z0:.1f} ohm"').replace('switching = "auto" }',
                                                                       f'switching = "auto", corner = "{corner}" }}')
    (folder / "tansy_tsx33.ibs").write_bytes(SHIPPED.read_bytes())
    (folder / "p.toml").write_text(text)
    return budget.load(folder / "p.toml")


BUSES = st.tuples(st.floats(2.0, 25.0), st.floats(0.5, 5.0), st.floats(40.0, 75.0), st.floats(40.0, 150.0),
                  st.sampled_from(["typ", "min", "max"]), st.sampled_from(["rise", "fall"]))


@SETTINGS
@given(BUSES)
def test_transient_ends_at_the_dc_point_and_stays_within_clamped_rails(tmp_path, args):
    trunk, stub, z0, r_term, corner, edge = args
    d = _bus(tmp_path, trunk, stub, z0, r_term, corner)
    w = simulate(d, "U1", edge, t_stop=120e-9)
    swing = float(np.max(np.abs(w.v_end - w.v_start)))
    assert np.max(np.abs(w.v[-1] - w.v_end)) < 0.01 * swing
    vcc = {"typ": 3.3, "min": 3.0, "max": 3.6}[corner]
    assert w.v.max() < vcc + 2.0 and w.v.min() > -2.0


@SETTINGS
@given(BUSES, st.integers(0, 4))
def test_a_variant_gives_the_same_bits_alone_or_in_a_batch(tmp_path, args, pick):
    trunk, stub, z0, r_term, corner, edge = args
    d = _bus(tmp_path, trunk, stub, z0, r_term, corner)
    z = np.linspace(0.9, 1.1, 5) * z0
    many = sweep(d, {"lines.trunk.z0": z}, drivers=["U1"], edges=[edge])
    one = sweep(d, {"lines.trunk.z0": z[pick:pick + 1]}, drivers=["U1"], edges=[edge],
                dt=many.dt[edge], t_stop=many.t_stop[edge])
    np.testing.assert_array_equal(one.metrics[0], many.metrics[pick])
