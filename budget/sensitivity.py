"""Sensitivities: how fast the worst margin moves with each value, and what each tolerance costs.

For every toleranced value (and every path the caller names) :func:`sensitivities`
gives dW/dx, the derivative of the check's worst headroom W [V]
(:attr:`budget.sweep.SweepResult.worst_headroom` of the worst variant, the rule of
:mod:`budget.kernels.metrics`) with respect to the value x [SI], at the worst
case of the tolerance box and at the nominal design, and ranks the values by the
margin each costs over its tolerance interval, |dW/dx| x (max - min)/2 [V].

How it is computed
------------------
Batch 1 evaluates the nominal design and every corner of the box, as the check
does, and gives W.  Batch 2 holds, for every value x_p, the same variants with
x_p moved by +h_p and by -h_p (2 x values x variants, one sweep;
:func:`budget.candidates.score`); W(x_p +- h_p) is the worst over each block, so
dW/dx_p = (W(x_p + h_p) - W(x_p - h_p)) / (2 h_p) is a central difference of full
corner analyses, including a change of the worst corner.  Moving a toleranced
value moves its interval with it (:func:`budget.candidates.moved`).  Above
:data:`MAX_VARIANTS` the shifted values are evaluated at the nominal design and
the worst corners of batch 1 only (said in the notes).  The nominal design's own
derivative (``d_nominal``) comes from the same batch.

Step rule: h_p = :data:`REL_STEP` x |x_p| (1 % of the value); for a value that
is zero, 1 % of its tolerance half-range.  Every variant of both batches shares
the time step and window the check chooses for the design as given, so the
differences carry no change of discretisation.  (Re-running the check at x +- h
lets it choose its step again when x sets the step -- a pin capacitance or a
package inductance via the L-C resonance -- which moves W by a few tenths of a
percent of the swing.)

Where the derivative means little
---------------------------------
W is the worst of many cases (drivers, receivers, edges, corners): a minimum of
functions, with a kink wherever the worst case switches, and the margin
definitions have knife edges (an edge that just reaches a threshold and turns
back moves the start of the ringback window; docs/metrics.md).  Each row gives
the one-sided differences too; where they disagree (by more than
:data:`SMOOTH_REL`) the row is marked not smooth and its central difference is a
secant across the kink or jump.  ``gap_to_next_corner`` [V] says how close the
next-worst corner is.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from .analyses import varied_paths
from .candidates import box_offsets, score
from .edges import EDGES
from .errors import ArgumentError
from .model import Design
from .sweep import plan

SCHEMA = "busbudget.sensitivity/1"
REL_STEP = 0.01
MAX_VARIANTS = 16384     # most variants in the batch of shifted values
SMOOTH_REL, SMOOTH_ABS = 0.25, 1e-4   # one-sided differences agree within 25 % (or 0.1 mV over the step)
ASSUMPTIONS = (
    "the check's linear model; derivatives by central differences with the stated step",
    "estimates to confirm by measurement and with the part makers' data; the applicable standards and the "
    "responsible engineer decide",
)


@dataclass
class SensitivityResult:
    """Sensitivities of the worst headroom; :meth:`to_json` is the ``busbudget.sensitivity/1`` document."""
    design: str
    analysis: str
    worst: dict
    nominal_headroom: float
    gap_to_next_corner: float | None
    rows: list
    notes: list = field(default_factory=list)

    def to_json(self) -> dict:
        return {"schema": SCHEMA, "design": self.design, "analysis": self.analysis, "worst": self.worst,
                "nominal_headroom": self.nominal_headroom, "gap_to_next_corner": self.gap_to_next_corner,
                "step_rule": STEP_RULE, "sensitivities": self.rows, "notes": list(self.notes),
                "assumptions": list(ASSUMPTIONS)}

    def text(self) -> str:
        w = self.worst
        out = [f"busbudget sensitivity: {self.design}", f"analysis: {self.analysis}",
               f"worst case: {w['receiver']} when {w['driver']} drives, {w['edge']} edge, {w['corner']}: "
               f"headroom {w['headroom']:+.4f} V (nominal design {self.nominal_headroom:+.4f} V)"]
        if self.gap_to_next_corner is not None:
            out.append(f"next-worst corner: {self.gap_to_next_corner * 1e3:.1f} mV better")
        out.append("")
        out.append("ranked by the margin each tolerance costs, |dW/dx| x half-range (W: worst headroom); "
                   "per 1 %: dW/dx x 1 % of the value")
        head = f"{'rank':>4}  {'path':<28} {'value':>12} {'range':>25} {'dW/dx at worst':>16} " \
               f"{'dW/dx nominal':>16} {'cost mV':>8} {'per 1% mV':>9}"
        out.append(head)
        for r in self.rows:
            u = r["unit"]
            rng = "-" if r["min"] is None else f"{r['min']:.4g}..{r['max']:.4g} {u}"
            cost = "-" if r["cost_over_box"] is None else f"{r['cost_over_box'] * 1e3:.1f}"
            flag = "" if r["smooth"] else " *"
            out.append(f"{r['rank']:>4}  {r['path']:<28} {r['value']:>9.4g} {u:<3}{rng:>25} "
                       f"{r['d_worst']:>+11.4g} V/{u:<4}{r['d_nominal']:>+11.4g} V/{u:<4}{cost:>8} "
                       f"{r['per_percent'] * 1e3:>+9.2f}{flag}")
        if any(not r["smooth"] for r in self.rows):
            out.append("*: not smooth inside the step (the one-sided differences disagree: the worst case switches "
                       "or a metric jumps); the value shown is the secant over +-h")
        for n in self.notes:
            out.append(f"note: {n}")
        out.append(f"step: {STEP_RULE}")
        out.append("Estimates from a linear model: confirm by measurement and with the part makers' data.")
        return "\n".join(out) + "\n"


STEP_RULE = (f"central differences, h = {REL_STEP:g} x |value| ({REL_STEP * 100:g} %; a zero value: "
             f"{REL_STEP * 100:g} % of its tolerance half-range); the time step and window of the check for the "
             "design as given, shared by every variant")


def _unit(design: Design, path: str) -> str:
    from .units import DIMENSIONS

    u = DIMENSIONS[design.structure.dimensions[path]][1]
    return "" if u == "1" else u


def sensitivities(design: Design, *, paths: Sequence[str] = (), nominal: bool = False,
                  progress: Callable[[int, int], None] | None = None) -> SensitivityResult:
    """dW/dx of the worst headroom W [V] for every toleranced value and every path in ``paths``.

    design : a Design with scalar values.
    paths : extra dotted paths (e.g. ``"tap.U3.stub.length"``); each must name a numeric value.
    nominal : the nominal design only (no corners): the "worst" case is the nominal one.
    Returns a :class:`SensitivityResult`, rows ranked by the margin each tolerance costs over its
    interval (values without a tolerance after, by the change per 1 %).  See the module docstring.
    """
    if not isinstance(design, Design) or design.batch_size is not None:
        raise ArgumentError("sensitivities() takes a Design with scalar values (from budget.load)")
    if isinstance(paths, str):
        raise ArgumentError(f"paths must be a list of dotted paths, got the string {paths!r}")
    dims = design.structure.dimensions
    for p in paths:
        if not isinstance(p, str) or p not in dims:
            near = [q for q in dims if isinstance(p, str) and q.split(".")[0] == p.split(".")[0]][:12]
            raise ArgumentError(f"--path {p!r}: no numeric value at this path; known paths include: "
                                + ", ".join(near or list(dims)[:12]))
    box = varied_paths(design)
    names = list(dict.fromkeys(list(box) + list(paths)))
    if not names:
        raise ArgumentError(f"{design.source}: the design has no [tolerances]; name the values to study with "
                            "--path PATH")
    _, dts, tss = plan(design, {}, EDGES)
    # batch 1: the nominal design and every corner, as the check evaluates them
    s1 = score(design, {}, nominal=nominal, dt=dts, t_stop=tss, progress=progress)
    w1 = s1.variant_head[0]
    labels = s1.labels
    c = len(labels)
    k = labels.index(s1.worst[0][3])
    order = np.argsort(w1, kind="stable")
    gap = float(w1[order[1]] - w1[order[0]]) if c > 1 else None
    steps = {}
    for p in names:
        x = float(design.params[p])
        h = REL_STEP * abs(x)
        if h == 0.0 and p in design.tolerances:
            lo, hi = design.tolerances[p]
            h = REL_STEP * 0.5 * (hi - lo)
        if h == 0.0:
            raise ArgumentError(f"--path {p}: its value is 0 and it has no tolerance: no step to differentiate "
                                "with; give it a tolerance")
        steps[p] = h
    # batch 2: every value moved by +h and -h, each crossed with the variants of batch 1
    only, notes = None, []
    if 2 * len(names) * c > MAX_VARIANTS:
        keep = max(1, MAX_VARIANTS // (2 * len(names)) - 1)
        only = [0] + sorted(int(i) for i in order[:keep] if i != 0)
        notes.append(f"the shifted values were evaluated at the nominal design and the {len(only) - 1} worst of "
                     f"the {c - 1} corners (at most {MAX_VARIANTS} variants in the batch)")
    cand = {p: np.full(2 * len(names), float(design.params[p])) for p in names}
    for j, p in enumerate(names):
        cand[p][2 * j] += steps[p]
        cand[p][2 * j + 1] -= steps[p]
    s2 = score(design, cand, nominal=nominal, dt=dts, t_stop=tss, only=only, progress=progress)
    w0 = float(s1.head[0])
    rows = []
    for j, p in enumerate(names):
        wp, wm = float(s2.head[2 * j]), float(s2.head[2 * j + 1])
        h = steps[p]
        d_worst = (wp - wm) / (2 * h)
        fwd, bwd = (wp - w0) / h, (w0 - wm) / h
        d_nom = (float(s2.variant_head[2 * j, 0]) - float(s2.variant_head[2 * j + 1, 0])) / (2 * h)
        # smooth: the one-sided differences agree (a kink or a jump of W inside the step makes them differ)
        smooth = abs(fwd - bwd) <= SMOOTH_REL * max(abs(fwd), abs(bwd)) + SMOOTH_ABS / h
        switches = any(s2.worst[2 * j + m][3] != s1.worst[0][3] for m in (0, 1))
        x = float(design.params[p])
        lo, hi = design.tolerances.get(p, (None, None))
        tol = lo is not None and hi > lo
        rows.append({"path": p, "unit": _unit(design, p), "value": x,
                     "min": float(lo) if tol else None, "max": float(hi) if tol else None,
                     "step": h, "d_worst": float(d_worst), "d_nominal": float(d_nom),
                     "d_forward": float(fwd), "d_backward": float(bwd), "smooth": bool(smooth),
                     "cost_over_box": float(abs(d_worst) * 0.5 * (hi - lo)) if tol else None,
                     "per_percent": float(d_worst * 0.01 * x), "corner_switches": bool(switches),
                     "worst_plus": wp, "worst_minus": wm,
                     "worst_corner_plus": s2.worst[2 * j][3], "worst_corner_minus": s2.worst[2 * j + 1][3]})
    rows.sort(key=lambda r: (r["cost_over_box"] is None, -(r["cost_over_box"] or abs(r["per_percent"]))))
    for n, r in enumerate(rows):
        r["rank"] = n + 1
    if not (np.all(np.isfinite(s1.head)) and np.all(np.isfinite(s2.head))):
        raise ArgumentError(f"{design.source}: a variant has no (driver, receiver) case")
    drv, edge, rcv, corner = s1.worst[0]
    offsets, _ = box_offsets(design, nominal=nominal)
    worst = {"driver": drv, "edge": edge, "receiver": rcv, "corner": corner, "headroom": w0,
             "values": {p: float(design.params[p]) + float(offsets[p][k]) for p in offsets}}
    if any(not r["smooth"] for r in rows):
        notes.append("W is not smooth in the values marked: the one-sided differences disagree (the worst case "
                     "switches, or a metric jumps, inside the step); their central difference is a secant")
    analysis = "nominal design only" if c == 1 else f"nominal and all {c - 1} corners of the tolerance box"
    return SensitivityResult(design.bus.name, analysis, worst, float(w1[0]), gap, rows, notes)


__all__ = ["sensitivities", "SensitivityResult", "SCHEMA", "REL_STEP", "STEP_RULE"]
