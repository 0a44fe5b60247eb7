"""Structural edits of a design: the same design rebuilt with other taps, segments or terminations.

The solvers (:mod:`budget.solve`) try designs that differ in structure, not only
in values: another termination scheme, more devices on the trunk.  A
:class:`~budget.model.Design` is immutable and validated when it is built, so an
edit is a rebuild through the ordinary constructor (every rule of
:mod:`budget.validation` runs again on the new structure).  Keys the original
design left out (``l_pkg``, ``r_in``, ``r_dc``, ``v_meas``...) stay left out, so
``rebuilt(design) == design``: an unedited rebuild gives the same design
(tested on every bundled and test design).
"""
from __future__ import annotations

from typing import Mapping, Sequence

from .model import Design, LineType, Part, RefLoad, Termination

# part keys that are optional in the file: left out of the rebuilt part unless the original gave them
_OPTIONAL_PART_KEYS = ("v_high", "v_low", "r_high", "r_low", "l_pkg", "r_in", "vih", "vil", "v_max", "v_min",
                       "v_meas")


def _parts(design: Design) -> dict:
    out = {}
    for name, p in design.parts.items():
        keys = design.structure.part_keys[name]
        kw = {k: getattr(p, k) for k in _OPTIONAL_PART_KEYS if k in keys}
        ref = None
        if p.ref_load is not None:
            t = f"parts.{name}.ref_load"
            ref = RefLoad(r=p.ref_load.r, v=design.params.get(f"{t}.v"), c=design.params.get(f"{t}.c"))
        if p.ibis is not None:      # a part from an IBIS file: the same file, model and corner again
            from .ibis_parts import OVERRIDABLE, IbisRef

            kw = {k: getattr(p, k) for k in OVERRIDABLE if k in keys}
            corner = {-1.0: "min", 0.0: "typ", 1.0: "max"}[float(design.params[f"parts.{name}.ibis.corner"])]
            ibis = IbisRef(file=p.ibis.path, component=p.ibis.component, model=p.ibis.model_name, corner=corner,
                           pin=p.ibis.pin, switching=p.ibis.switching)
            out[name] = Part(role=p.role if "role" in keys else None, ref_load=ref, ibis=ibis, **kw)
            continue
        out[name] = Part(role=p.role, c_pin=p.c_pin, ref_load=ref, **kw)
    return out


def _lines(design: Design) -> dict:
    out = {}
    for name, ln in design.lines.items():
        r_dc = design.params.get(f"lines.{name}.r_dc")
        if design.delay_keys[name] == "geometry":
            out[name] = LineType(geometry=ln.geometry, r_dc=r_dc)
        elif design.delay_keys[name] == "delay":
            out[name] = LineType(z0=ln.z0, delay=ln.delay, r_dc=r_dc)
        else:
            out[name] = LineType(z0=ln.z0, er_eff=ln.er_eff, r_dc=r_dc)
    return out


def rebuilt(design: Design, *, taps: Sequence | None = None, segments: Sequence | None = None,
            terminations: Sequence[Termination] | None = None,
            tolerances: Mapping[str, tuple[float, float]] | None = None) -> Design:
    """``design`` rebuilt with the given taps, segments, terminations or tolerance box (others kept).

    taps, segments, terminations: sequences of :class:`~budget.model.Tap`,
    :class:`~budget.model.Segment`, :class:`~budget.model.Termination` with SI
    values or unit strings; tolerances: dotted path -> absolute (min, max) [SI].
    The result is validated like any new design (:class:`~budget.errors.DesignError`
    naming the table and key).  Tolerance entries whose path no longer exists
    must be dropped by the caller.
    """
    terms = design.terminations if terminations is None else terminations
    terms = [Termination(t.type, node=t.node, tap=t.tap, r=t.r, v=t.v, c=t.c, r_up=t.r_up, r_down=t.r_down,
                         v_up=t.v_up) for t in terms]
    return Design(bus=design.bus, edge=design.edge, parts=_parts(design), lines=_lines(design),
                  segments=design.segments if segments is None else segments,
                  taps=design.taps if taps is None else taps, terminations=terms,
                  tolerances=dict(design.tolerances if tolerances is None else tolerances),
                  noise_budget=design.noise_budget, source=design.source)


__all__ = ["rebuilt"]
