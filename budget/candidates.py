"""Candidate designs over the tolerance box, scored in one batch: the engine behind the solvers.

A *candidate* is a set of values ({path: value [SI]}) tried on a design: a stub
length, a pair of termination resistors, a trunk spacing.  :func:`score` takes a
whole candidate set at once, crosses it with the design's tolerance box (the
nominal values and every corner, as :func:`budget.check.check` evaluates them;
only the nominal design with ``nominal=True``) and runs it through
:func:`budget.sweep.sweep` as one batch: M candidates x (1 + 2**k) variants.

Moving a toleranced value
-------------------------
When a candidate changes a value that has a tolerance, its interval moves with
it: its ends shift by the same amount (a stub drawn 3 mm shorter keeps its
+-0.5 mm; a "5%" written in the file was turned into an absolute interval when
the design was loaded, and it is that interval that moves).  :func:`moved`
applies the same rule to a single design, so the solvers' confirmation runs
and the sensitivity test re-run :func:`budget.check.check` on exactly the box
the batch evaluated.

Scores
------
Each candidate's score is the worst case over its variants by the one rule of
:mod:`budget.kernels.metrics` (a violation before no violation, then the lowest
headroom [V]); :attr:`Scores.key` orders candidates by it (higher is better).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from .analyses import corner_values, varied_paths
from .edges import EDGES
from .errors import ArgumentError
from .kernels import metrics as mk
from .model import Design
from .sweep import plan, sweep


def moved(design: Design, values: Mapping[str, float]) -> Design:
    """``design`` with ``values`` ({path: value [SI]}) set and each toleranced one's interval shifted with it."""
    out = design.with_values(dict(values))
    box = {}
    for p, (lo, hi) in design.tolerances.items():
        if p in values:
            shift = float(values[p]) - float(design.params[p])
            lo, hi = lo + shift, hi + shift
        box[p] = (lo, hi)
    return out.with_tolerance_box(box) if box else out


def box_offsets(design: Design, *, nominal: bool = False) -> tuple[dict, list]:
    """The variants a check evaluates, as offsets from nominal: ({path: array(C)}, labels).

    Variant 0 is the nominal design, then every corner of the box in the
    order of :func:`budget.analyses.corner_values` (labels "corner 1" ...), as
    the check labels them.  ``nominal=True``: the nominal design alone.
    """
    paths = [] if nominal else varied_paths(design)
    if not paths:
        return {}, ["nominal"]
    vals, _, codes = corner_values(design)
    offsets = {p: np.concatenate([[0.0], vals[p] - float(design.params[p])]) for p in paths}
    return offsets, ["nominal"] + [f"corner {i + 1}" for i in range(codes.shape[0])]


@dataclass
class Scores:
    """The worst case of each of M candidates over its C variants (nominal and corners).

    head : [M] headroom [V] of each candidate's worst case
    failed : [M] bool, some variant has a violation
    n_failed : [M] number of failing variants
    worst : [M] tuples (driver, edge, receiver, variant label) of each worst case
    labels : the C variant labels ("nominal", "corner 1", ...)
    variant_head : [M, C] headroom [V] of the worst case of each variant
    dt, t_stop : {edge: [s]} the time step and window shared by the batch
    """
    head: np.ndarray
    failed: np.ndarray
    n_failed: np.ndarray
    worst: list
    labels: list
    dt: dict
    t_stop: dict
    variant_head: np.ndarray | None = None

    @property
    def key(self) -> np.ndarray:
        """[M] sort key, higher is better: headroom, every failing candidate below every passing one."""
        span = np.nanmax(np.abs(self.head)) if self.head.size else 0.0
        return np.where(self.failed, self.head - 4.0 * (span + 1.0), self.head)

    def best(self) -> int:
        """Index of the best candidate (first of equals)."""
        return int(np.argmax(self.key))


def score(design: Design, candidates: Mapping[str, np.ndarray], *, nominal: bool = False,
          dt: Mapping[str, float] | None = None, t_stop: Mapping[str, float] | None = None,
          only=None, progress: Callable[[int, int], None] | None = None) -> Scores:
    """Score M candidates ({path: array(M) [SI]}) over the tolerance box of ``design`` in one sweep.

    Every candidate is evaluated at the nominal design and at every corner of
    the box (its own toleranced values moved with it, see :func:`moved`),
    every driver, both edges and every receiver.  dt, t_stop: {edge: [s]}
    shared by the whole batch (default: chosen by :func:`budget.sweep.plan`
    over the box and all candidates).  only: indices into the variants of
    :func:`box_offsets` to evaluate (default: all of them).
    """
    cand = {p: np.atleast_1d(np.asarray(a, dtype=float)) for p, a in candidates.items()}
    m = {a.shape[0] for a in cand.values()}
    if len(m) > 1:
        raise ArgumentError("candidate arrays differ in length")
    m = m.pop() if m else 1
    offsets, labels = box_offsets(design, nominal=nominal)
    if only is not None:
        only = [int(i) for i in only]
        offsets = {p: a[only] for p, a in offsets.items()}
        labels = [labels[i] for i in only]
    c = len(labels)
    values = {}
    for p in set(cand) | set(offsets):
        base = cand[p] if p in cand else np.full(m, float(design.params[p]))
        off = offsets.get(p, np.zeros(c))
        values[p] = (base[:, None] + off[None, :]).ravel()
    if dt is None or t_stop is None:
        _, dts, tss = plan(design, values, EDGES)
        dt, t_stop = dt or dts, t_stop or tss
    groups = _lumping_groups(design, cand, m, min(dt.values()))
    if len(groups) == 1:
        res = _sweep_fixed(design, values, dt, t_stop, progress)
    else:
        # candidates whose lines the engine would model differently (lumped below one step) go in separate
        # sweeps: a batch models a line one way for all its variants, from its shortest one
        parts = []
        for g in groups:
            rows = np.concatenate([np.arange(i * c, (i + 1) * c) for i in g])
            parts.append((g, _sweep_fixed(design, {p: a[rows] for p, a in values.items()}, dt, t_stop, progress)))
        res = _merge(parts, m, c)
    n = res.n_variants
    head = np.where(res.valid[None, :, None, :], res.headroom, np.nan).reshape(m, c, -1)
    bits = res.bits.reshape(m, c, -1)
    shape = res.bits.shape[1:]
    out_head, failed, worst = np.empty(m), np.empty(m, dtype=bool), []
    for i in range(m):
        k = int(mk.worst_along(bits[i].ravel(), head[i].ravel()))
        v, rest = divmod(k, head.shape[2])
        d, e, r = np.unravel_index(rest, shape)
        out_head[i] = head[i].ravel()[k]
        failed[i] = bool(np.any(bits[i] != 0))
        worst.append((res.drivers[d], res.edges[e], res.receivers[r], labels[v]))
    n_failed = np.any(bits != 0, axis=2).sum(axis=1)
    assert n == m * c
    kv = mk.worst_along(bits.reshape(m * c, -1), head.reshape(m * c, -1), axis=1)
    vhead = np.take_along_axis(head.reshape(m * c, -1), kv[:, None], axis=1)[:, 0].reshape(m, c)
    return Scores(head=out_head, failed=failed, n_failed=n_failed, worst=worst, labels=labels,
                  dt=dict(dt), t_stop=dict(t_stop), variant_head=vhead)


def _delay_min(design: Design, line: str) -> float:
    """Shortest delay per length [s/m] of a line type over its tolerance box."""
    from .model import C0

    d = float(np.min(design.lines[line].delay))
    if f"lines.{line}.delay" in design.tolerances:
        d = min(d, design.tolerances[f"lines.{line}.delay"][0])
    if f"lines.{line}.er_eff" in design.tolerances:
        d = min(d, float(np.sqrt(design.tolerances[f"lines.{line}.er_eff"][0])) / C0)
    return d


def _length_line(design: Design, path: str):
    """The line type of a length path (a stub or a segment), else None."""
    parts = path.split(".")
    if parts[0] == "tap" and path.endswith(".stub.length"):
        stub = design.tap(".".join(parts[1:-2])).stub
        return None if stub is None else stub.line
    if parts[0] == "segment" and parts[-1] == "length":
        return design.segments[int(parts[1])].line
    return None


def _lumping_groups(design: Design, cand: dict, m: int, dt: float) -> list:
    """Candidate indices grouped by which of their changed lines are shorter than one step dt [s]."""
    sig = np.zeros((m, 0), dtype=bool)
    for p, a in cand.items():
        line = _length_line(design, p)
        if line is None:
            continue
        # the box may shorten the line too (a toleranced length moves with its candidate)
        lo = a + (design.tolerances[p][0] - float(design.params[p]) if p in design.tolerances else 0.0)
        sig = np.column_stack([sig, lo * _delay_min(design, line) < dt * (1 - 1e-9)])
    keys = {}
    for i in range(m):
        keys.setdefault(tuple(sig[i]), []).append(i)
    return list(keys.values())


def _merge(parts, m, c):
    """One SweepResult of m x c variants from sweeps of candidate groups (candidate-major order)."""
    from dataclasses import replace

    first = parts[0][1]
    shape = first.bits.shape[1:]
    margin = np.empty((m * c,) + shape)
    bits = np.empty((m * c,) + shape, dtype=first.bits.dtype)
    head = np.empty((m * c,) + shape)
    for g, r in parts:
        rows = np.concatenate([np.arange(i * c, (i + 1) * c) for i in g])
        margin[rows], bits[rows], head[rows] = r.margin, r.bits, r.headroom
    return replace(first, n_variants=m * c, margin=margin, bits=bits, headroom=head, metrics=None, levels=None)


def _sweep_fixed(design, values, dt, t_stop, progress):
    """One sweep per edge with that edge's step and window (sweep takes one dt for all edges)."""
    if len({dt[e] for e in EDGES}) == 1 and len({t_stop[e] for e in EDGES}) == 1:
        return sweep(design, values or None, dt=dt[EDGES[0]], t_stop=t_stop[EDGES[0]], keep="margin",
                     progress=progress)
    parts = [sweep(design, values or None, edges=(e,), dt=dt[e], t_stop=t_stop[e], keep="margin",
                   progress=progress) for e in EDGES]
    a, b = parts
    from dataclasses import replace

    return replace(a, edges=EDGES, margin=np.concatenate([a.margin, b.margin], axis=2),
                   bits=np.concatenate([a.bits, b.bits], axis=2),
                   headroom=np.concatenate([a.headroom, b.headroom], axis=2))


__all__ = ["moved", "box_offsets", "Scores", "score"]
