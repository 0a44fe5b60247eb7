"""Assertions for tests of a bus design (pytest, hypothesis, plain ``assert`` scripts).

:func:`assert_margin` is the one-line CI check of a design: it evaluates the
design (or a list of variants of it, in one batched sweep), finds the worst
case by the package's one rule -- a result with a violation first, then the
lowest headroom, then the first in (variant, driver, edge, receiver) order,
exactly as ``busbudget check`` and :class:`budget.sweep.SweepResult` do -- and
raises :class:`AssertionError` when that case has a violation or less headroom
than asked for.  The message names the driver, receiver, edge, metric and
value of the worst case and every value that differs from the nominal design,
with units, so a failing CI run (or a shrunk hypothesis counterexample) reads
as a sentence.

Headroom [V] is the lowest of margin - min_margin, v_max - v_peak and
v_trough - v_min (DEVELOPERS.md, "Headroom and worst").  ``at_least`` asks for
that much headroom beyond the design's own limits; ``at_least=0`` is the
pass/fail rule of ``busbudget check``.

This module does not import hypothesis; :mod:`budget.strategies` does.
Results are estimates from the linear model (README, "What the model
assumes"): a passing test is evidence for design review, not a substitute for
measurement, the part makers' data and the responsible engineer.
"""
from __future__ import annotations

import math
from dataclasses import replace
from typing import Mapping, Sequence

import numpy as np

from .analyses import corner_values, default_corners, varied_paths
from .errors import ArgumentError, DesignError
from .model import Design
from .report import result_row, si, worst_summary
from .sweep import limiting_term, sweep

ANALYSES = ("nominal", "corners", "default")


# ---------------------------------------------------------------------------
# variants that remember their nominal design

class Variant(Design):
    """A :class:`~budget.model.Design` with some values changed from a nominal design.

    Made by :func:`variant` (and drawn by :func:`budget.strategies.variants`).
    It is an ordinary design everywhere (``check``, ``sweep``, ``simulate``);
    in addition ``nominal`` is the design it was derived from and ``changes``
    the values [SI] that differ from it, so :func:`assert_margin` can say what
    was changed, and hypothesis prints it as one short line.
    """

    nominal: Design
    changes: Mapping[str, float]

    def __repr__(self) -> str:
        return f"<variant of {self.nominal.bus.name!r}: {describe_changes(self.nominal, self.changes) or 'nominal'}>"

    def _repr_pretty_(self, p, cycle):  # hypothesis' and IPython's pretty printer
        p.text(repr(self))

    def __reduce__(self):  # rebuilt from its nominal and changes (dask workers, multiprocessing)
        return (variant, (self.nominal, dict(self.changes)))


def variant(design: Design, values: Mapping[str, float], *, source: str | None = None) -> Variant:
    """``design.with_values(values)`` that remembers ``design`` as its nominal.

    values : {dotted path: float} in SI units.  Raises :class:`DesignError`
    (naming the path) for an unknown path or a non-physical value.
    """
    base = design.nominal if isinstance(design, Variant) else design
    if not isinstance(base, Design):
        raise ArgumentError(f"variant() takes a Design (from budget.load), got {type(design).__name__}")
    merged = dict(getattr(design, "changes", {}))
    merged.update({p: float(v) for p, v in values.items()})
    built = base.with_values(merged, source=source)
    out = object.__new__(Variant)
    out.__dict__.update(built.__dict__)
    changes = {p: float(built.params[p]) for p in merged if float(built.params[p]) != float(base.params[p])}
    object.__setattr__(out, "nominal", base)
    object.__setattr__(out, "changes", changes)
    return out


def unit_of(design: Design, path: str) -> str:
    """SI unit of the value at ``path`` ("ohm", "s/m"...; "" for a plain number)."""
    from .units import DIMENSIONS

    dim = (getattr(design.structure, "dimensions", {}) or {}).get(path)
    unit = DIMENSIONS[dim][1] if dim in DIMENSIONS else ""
    return "" if unit == "1" else unit


def quantity(design: Design, path: str, value: float) -> str:
    """``value`` [SI] of ``path`` as readable text with its unit ("25 mm", "40.5 ohm")."""
    unit = unit_of(design, path)
    if not unit:
        return f"{value:.6g}"
    return si(value, unit)


def describe_changes(nominal: Design, values: Mapping[str, float], notes: Mapping[str, str] | None = None) -> str:
    """'path = value (nominal x), ...' with units, in the design's path order."""
    return ", ".join(change_lines(nominal, values, notes))


def change_lines(nominal: Design, values: Mapping[str, float], notes: Mapping[str, str] | None = None) -> list:
    """One 'path = value (nominal x; note)' entry per value, with units, in the design's path order."""
    order = {p: i for i, p in enumerate(nominal.params)}
    lines = []
    for p in sorted(values, key=lambda q: order.get(q, len(order))):
        v = float(values[p])
        x0 = nominal.params.get(p)
        nom = "" if x0 is None or np.ndim(x0) else f"nominal {quantity(nominal, p, float(x0))}"
        extra = (notes or {}).get(p)
        detail = "; ".join(x for x in (nom, extra) if x)
        lines.append(f"{p} = {quantity(nominal, p, v)}" + (f" ({detail})" if detail else ""))
    return lines


# ---------------------------------------------------------------------------
# the worst case of a design, a list of variants, or their corners

def _parse_at_least(at_least) -> float:
    if isinstance(at_least, bool):
        raise ArgumentError(f"at_least must be a voltage (volts or a string such as '100 mV'), got {at_least!r}")
    if isinstance(at_least, str):
        from .units import parse_quantity
        try:
            x = parse_quantity(at_least, "voltage", source="assert_margin", key="at_least")
        except DesignError as exc:
            raise ArgumentError(f"at_least: {exc.reason}") from None
    elif isinstance(at_least, (int, float, np.integer, np.floating)):
        x = float(at_least)
    else:
        raise ArgumentError(f"at_least must be a voltage (volts or a string such as '100 mV'), "
                            f"got {type(at_least).__name__}")
    if not math.isfinite(x):
        raise ArgumentError(f"at_least must be finite, got {at_least!r}")
    if x < 0:
        raise ArgumentError(f"at_least must be >= 0 V (a negative headroom is already a violation), got {at_least!r}")
    return x


def _designs(design) -> list:
    if isinstance(design, Design):
        designs = [design]
    elif isinstance(design, (list, tuple)):
        designs = list(design)
        if not designs:
            raise ArgumentError("assert_margin() got an empty list of designs")
    else:
        raise ArgumentError(f"assert_margin() takes a Design or a list of Designs (variants of one design), "
                            f"got {type(design).__name__}")
    for i, d in enumerate(designs):
        if not isinstance(d, Design):
            raise ArgumentError(f"design #{i + 1} is a {type(d).__name__}, not a Design")
        if d.batch_size is not None:
            raise ArgumentError(f"design #{i + 1} holds arrays of values; pass one Design per variant")
    return designs


def _same_structure(a: Design, b: Design) -> bool:
    sa, sb = a.structure, b.structure
    if sa is sb:
        return True
    return replace(sa, source="") == replace(sb, source="")


def worst_case(design: Design | Sequence[Design], *, analysis: str = "nominal",
               nominal: Design | None = None) -> dict:
    """The worst case by the package's rule over a design, or a list of variants of one design.

    Parameters
    ----------
    design : Design or list of Design
        A list must hold variants of one design (same file structure, e.g.
        drawn by :func:`budget.strategies.variants`); all of them are
        evaluated in one batched :func:`budget.sweep.sweep` (one time step for
        the whole batch, chosen from all their values and the tolerance box).
    analysis : "nominal", "corners" or "default"
        "nominal": each design as given.  "corners": each design as given and
        at every corner of its ``[tolerances]`` box (toleranced values at their
        minimum or maximum; a toleranced value the variant changed is replaced
        by the corner's).  "default": what ``busbudget check`` covers by
        default -- the corners too when corners x drivers x edges is at most
        :data:`budget.analyses.DEFAULT_MAX_SIMULATIONS`.
    nominal : Design, optional
        The design the values are compared with in the description (default:
        the variant's own nominal for a :class:`Variant`, else the first design).

    Returns
    -------
    dict with the keys of ``CheckReport.worst`` (driver, receiver, edge,
    metric, value [V or s or bool], headroom [V], violations, limit...) plus
    ``passed`` (no violation in any evaluated case), ``variant`` (which
    design of the list, and which corner), ``changes`` {path: value [SI]} that
    differ from ``nominal``, ``extremes`` {path: "min"|"max"} for a corner,
    ``evaluated`` (number of variants) and ``nominal`` (the Design compared with).
    """
    if analysis not in ANALYSES:
        raise ArgumentError(f"analysis must be one of {', '.join(ANALYSES)}, got {analysis!r}")
    designs = _designs(design)
    first = designs[0]
    base = nominal if nominal is not None else (first.nominal if isinstance(first, Variant) else first)
    if not isinstance(base, Design):
        raise ArgumentError(f"nominal must be a Design, got {type(base).__name__}")
    for i, d in enumerate(designs):
        if not _same_structure(d, base):
            raise ArgumentError(f"design #{i + 1} ({d.source}) is not a variant of {base.source}: its parts, "
                                "lines, taps or terminations differ; check each design on its own")
    if not base.drivers:
        raise ArgumentError(f"{base.source}: no tap can drive (parts with role driver or transceiver)")
    if not any(r != d for d in base.drivers for r in base.receivers):
        raise ArgumentError(f"{base.source}: no tap can receive from another tap")

    # per design: the values that differ from base
    diffs = [{p: float(d.params[p]) for p in base.params if float(d.params[p]) != float(base.params[p])}
             for d in designs]
    if analysis == "corners" and not varied_paths(base):
        raise ArgumentError(f"{base.source}: analysis='corners' needs [tolerances] (the design has none, or only "
                            "zero ones); use analysis='nominal'")
    run_corners = analysis == "corners" or (analysis == "default" and default_corners(base)["run"])
    corner_vals, codes, paths = {}, np.zeros((0, 0), dtype=np.int64), []
    if run_corners and varied_paths(base):
        corner_vals, paths, codes = corner_values(base)
    n_c = codes.shape[0]
    # variant list: for each design, itself, then each corner (if any)
    labels, rows = [], []
    for i, diff in enumerate(diffs):
        who = "" if len(designs) == 1 else f"design #{i + 1} of {len(designs)}"
        labels.append(who or "as given")
        rows.append((diff, None))
        for c in range(n_c):
            vals = dict(diff)
            vals.update({p: float(corner_vals[p][c]) for p in paths})
            labels.append((f"{who}, " if who else "") + f"corner {c + 1} of {n_c}")
            rows.append((vals, c))
    changed = sorted({p for vals, _ in rows for p in vals}, key=list(base.params).index)
    if not changed and len(rows) > 1:
        changed = [next(iter(base.params))]       # every variant nominal: still one result per variant
    values = {p: np.array([vals.get(p, float(base.params[p])) for vals, _ in rows]) for p in changed}
    try:
        res = sweep(base, values or None)
    except DesignError as exc:
        raise DesignError(f"a variant is non-physical ({exc.reason})", source=exc.source, table=exc.table,
                          key=exc.key) from None
    v = res.worst_variant()
    d_i, e_i, r_i = res.worst_indices(v)
    drv, edge, rcv = res.drivers[d_i], res.edges[e_i], res.receivers[r_i]
    vals, corner = rows[v]
    m = res.metrics[v, d_i, e_i, r_i]
    row = result_row(analysis, labels[v], m, res.levels[v, d_i, e_i, r_i], res.bits[v, d_i, e_i, r_i],
                     res.headroom[v, d_i, e_i, r_i], drv, rcv, edge)
    limit = limiting_term(base, rcv, m, vals)
    part = base.parts[base.tap(rcv).part]
    v_max, v_min = (vals.get(f"parts.{part.name}.{k}", getattr(part, k)) for k in ("v_max", "v_min"))
    out = worst_summary(row, limit, v_max, v_min, float(base.budget.min_margin))
    out["variant"] = labels[v]
    out["changes"] = dict(vals)
    out["extremes"] = ({p: ("max" if codes[corner, j] else "min") for j, p in enumerate(paths)}
                       if corner is not None else {})
    out["passed"] = bool(np.all(res.passed))
    out["evaluated"] = int(res.n_variants)
    out["ringback"] = row["ringback"]
    out["swing"] = abs(row["v_hi"] - row["v_lo"])
    out["design"] = base.bus.name
    out["nominal"] = base
    return out


def _value_text(metric: str, value) -> str:
    if value is None:
        return "never" if metric in ("t_valid", "settle_time") else "undefined"
    if isinstance(value, bool):
        return str(value).lower()
    return si(float(value), "s" if metric in ("t_valid", "settle_time") else "V")


def explain(case: dict, at_least: float = 0.0) -> str:
    """The readable explanation of a :func:`worst_case` result (the AssertionError message)."""
    head = case["headroom"]
    if case["violations"]:
        first = f"bus {case['design']!r} fails: {', '.join(case['violations'])}"
    else:
        first = f"bus {case['design']!r}: headroom {si(head, 'V')} is below the required {si(at_least, 'V')}"
    lines = [first,
             f"  worst case: driver {case['driver']} -> receiver {case['receiver']}, {case['edge']} edge "
             f"({case['variant']}; {case['evaluated']} variant{'s' if case['evaluated'] != 1 else ''} evaluated)",
             f"  metric: {case['metric']} = {_value_text(case['metric'], case['value'])} "
             f"(limit {case['limit']}); headroom {si(head, 'V')}"
             + (f" = {case['percent_of_swing']:.1f} % of the {si(case['swing'], 'V')} swing"
                if case.get("percent_of_swing") is not None else "")
             + (f"; ringback {si(case['ringback'], 'V')}" if case.get("ringback") is not None else "")]
    nominal = case["nominal"]
    if case["changes"]:
        notes = {p: f"tolerance corner: {x}" for p, x in case["extremes"].items()}
        lines.append("  values that differ from nominal:")
        for item in change_lines(nominal, case["changes"], notes):
            lines.append(f"    {item}")
    else:
        lines.append("  values that differ from nominal: none (the nominal design)")
    return "\n".join(lines)


def assert_margin(design: Design | Sequence[Design], *, at_least=0.0, analysis: str = "nominal",
                  nominal: Design | None = None) -> dict:
    """Assert that the worst case of ``design`` has no violation and at least ``at_least`` of headroom.

    Parameters
    ----------
    design : Design or list of Design
        One design, or variants of one design (evaluated in one batched sweep).
    at_least : float [V] or str
        Headroom required beyond the design's own limits ("100 mV", 0.1);
        0 (default) is exactly the pass/fail rule of ``busbudget check``.
    analysis : "nominal", "corners" or "default"
        Which cases are evaluated (see :func:`worst_case`).
    nominal : Design, optional
        What "differs from nominal" is measured against (default: the
        variant's nominal, see :class:`Variant`).

    Returns
    -------
    The worst case (dict, see :func:`worst_case`) when the assertion holds.

    Raises
    ------
    AssertionError
        Naming driver, receiver, edge, metric and value of the worst case and
        the values that differ from nominal, with units.
    ArgumentError
        An invalid argument (unknown analysis, negative ``at_least``...).
    """
    need = _parse_at_least(at_least)
    case = worst_case(design, analysis=analysis, nominal=nominal)
    if case["violations"] or not case["passed"] or case["headroom"] < need:
        raise AssertionError(explain(case, need))
    return case


__all__ = ["assert_margin", "worst_case", "explain", "variant", "Variant", "describe_changes", "quantity",
           "unit_of", "ANALYSES"]
