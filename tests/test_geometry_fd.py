"""Planar cross-sections against an independent numerical field solution (tests/fd_laplace.py).

The finite-difference Laplace solver knows nothing of the closed forms: it grounds a box, puts
zero-thickness strips on a grid row and counts charge.  Its error is first order in the cell
size (the field is singular at strip edges), so every value here is Richardson-extrapolated
from grids of h/8 and h/16 cells: v = 2 v(16) - v(8).  The solver is first checked against
Cohn's exact stripline results, then used on microstrip, where no exact result exists.
"""
from __future__ import annotations

import pytest

from budget.geometry import line
from fd_laplace import microstrip_fd

from conftest import accuracy_record


def _extrapolated(u, g, er, top=8.0, margin=8.0):
    """Richardson-extrapolated FD values at w/h = u, s/h = g (None: single line) [ohm], [-]."""
    out = []
    for hc in (8, 16):
        gap = None if g is None else int(round(g * hc))
        out.append(microstrip_fd(int(round(u * hc)), hc, er, gap_cells=gap, top=top, margin=margin))
    coarse, fine = out

    def rich(a, b):
        if isinstance(a, tuple):
            return tuple(rich(x, y) for x, y in zip(a, b))
        return 2 * b - a
    return rich(coarse, fine)


def test_fd_solver_against_cohn_exact_stripline():
    # A strip centred between two planes (top wall at 2h, so b = 2h), air: Cohn 1954 / 1955 exact forms
    # (docs/references.md B9).  Tolerance 1 %: what the extrapolated grid reaches here (measured below 0.3 %).
    z, _ = _extrapolated(1.0, None, 1.0, top=1.0, margin=6.0)
    (ze, zo), _ = _extrapolated(1.0, 0.5, 1.0, top=1.0, margin=6.0)
    single = line("stripline", w=1.0, b=2.0, t=0.0, er=1.0).z0
    coupled = line("edge_coupled_stripline", w=1.0, s=0.5, b=2.0, t=0.0, er=1.0)
    errs = [z / single - 1, ze / coupled.z_even - 1, zo / coupled.z_odd - 1]
    accuracy_record(f"FD Laplace reference vs Cohn exact stripline: worst {max(map(abs, errs)):.2%} (tolerance 1 %)")
    assert max(map(abs, errs)) < 0.01


@pytest.mark.parametrize("u, g, er", [(1.0, 0.5, 4.4), (1.0, 2.0, 4.4), (0.5, 1.0, 9.8), (2.0, 1.0, 2.2)])
def test_coupled_microstrip_against_fd(u, g, er):
    # Kirschning & Jansen 1984 (from memory; ~1 % stated) against the FD field solution.  Compared as
    # ratios to the single line on the same grid and box (the box's shielding cancels); tolerance 1.5 %
    # = the formula's stated 1 % plus the extrapolated grid's residual.
    z1, e1 = _extrapolated(u, None, er)
    (ze, zo), (ee, eo) = _extrapolated(u, g, er)
    single = line("microstrip", w=u, h=1.0, t=0.0, er=er)
    cs = line("edge_coupled_microstrip", w=u, s=g, h=1.0, t=0.0, er=er)
    errs = {"z_even": (cs.z_even / single.z0) / (ze / z1) - 1, "z_odd": (cs.z_odd / single.z0) / (zo / z1) - 1,
            "er_even": (cs.er_eff_even / single.er_eff) / (ee / e1) - 1,
            "er_odd": (cs.er_eff / single.er_eff) / (eo / e1) - 1}
    worst = max(errs, key=lambda k: abs(errs[k]))
    accuracy_record(f"coupled microstrip (KJ84) vs FD, u={u} g={g} er={er}: worst {worst} {errs[worst]:+.2%} "
                    "(tolerance 1.5 %)")
    assert all(abs(v) < 0.015 for v in errs.values()), errs


def test_single_microstrip_against_fd():
    # Hammerstad & Jensen (0.2 % er_eff, 0.03 % Z01 stated) against the FD solution in a box whose walls are
    # 8 h away: the shield lowers Z a little, so allow 1.5 %.
    z, e = _extrapolated(1.0, None, 4.4)
    single = line("microstrip", w=1.0, h=1.0, t=0.0, er=4.4)
    accuracy_record(f"microstrip (H&J) vs FD: Z0 {z / single.z0 - 1:+.2%}, er_eff {e / single.er_eff - 1:+.2%} "
                    "(tolerance 1.5 %)")
    assert z == pytest.approx(single.z0, rel=0.015)
    assert e == pytest.approx(single.er_eff, rel=0.015)
