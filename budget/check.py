"""The budget check: every driver x every receiver x both edges, nominal and across tolerances.

:func:`check` answers the sign-off question -- does every receiver keep its
noise margin whichever device drives, across the design's tolerances -- and,
if not, names exactly where and by how much.  It orchestrates: every
evaluation goes through :func:`budget.sweep.sweep` (the batched numba path, so
the numbers are the numbers a production script or the C library gets), the
analyses themselves live in :mod:`budget.analyses`, the report object and its
renderings in :mod:`budget.report`.

What is covered
---------------
The nominal design is always evaluated.  When the design has ``[tolerances]``
the default also evaluates every corner of the box, if corners x drivers x
edges is at most :data:`budget.analyses.DEFAULT_MAX_SIMULATIONS`; otherwise
the report says plainly (text and JSON ``coverage.note``) that the box was not
covered and what to run.  ``nominal=True`` asks for the nominal design alone.
Monte Carlo sampling and the worst-case search are added on request.

Worst case and headroom
-----------------------
For one (driver, receiver, edge) of one variant the *headroom* [V] is the
smallest of: margin - min_margin; v_max - v_peak (if the part gives v_max);
v_trough - v_min (if it gives v_min), computed in the kernel next to the
violation bits (:func:`budget.kernels.metrics.headroom`).  Negative headroom
is a violation.  A result also fails on the kernel's other violations (never
valid, non-monotonic edge, not settled in the window).  "Worst" orders
results with a violation before results without one, then by lowest
headroom, then the first met (:func:`budget.kernels.metrics.worst_along`) --
the same rule as :class:`budget.sweep.SweepResult` and ``bb_check``.

Time step and window are the same for every variant of a check: the engine
chooses them (and the line modelling) from the whole tolerance box
(:func:`budget.netlist.tolerance_envelope`), never from the variants that
happen to share a sweep.
"""
from __future__ import annotations

from typing import Callable, Mapping

import numpy as np

from .analyses import (DEFAULT_MAX_SIMULATIONS, DISTRIBUTIONS, MAX_CORNERS, WorstTracker, corner_values,
                       default_corners, out_of_box, sample_values, varied_paths, wilson_interval)
from .analyses import search as search_box
from .errors import ArgumentError, DesignError
from .limits import MAX_CORNERS_RAISED, MAX_MONTE_CARLO, MAX_WORK, STEP_ESTIMATE_WORK
from .kernels import metrics as mk
from .model import Design
from .report import ASSUMPTIONS, RESULT_KEYS, SCHEMA, CheckReport, assumptions_for, result_row, worst_summary
from .sweep import limiting_term, sweep

MC_CHUNK = 512          # Monte Carlo variants per sweep call
PROGRESS_CHUNK = 256    # variants per progress report inside a sweep call
SEARCH_GENERATIONS = 20


class _Evaluator:
    """Runs sweeps and counts progress over all analyses."""

    def __init__(self, design: Design, progress, total: int):
        self.design = design
        self.progress = progress
        self.total = max(int(total), 1)
        self.done = 0

    def run(self, values: Mapping[str, np.ndarray] | None, n: int, what: str = "a variant"):
        """Sweep n variants; ``what`` names them in the error raised when one is non-physical."""
        base = self.done

        def tick(done, total):
            if self.progress is not None:
                self.progress(min(base + done, self.total), self.total)

        try:
            res = sweep(self.design, dict(values) if values else None, progress=tick, chunk=PROGRESS_CHUNK)
        except DesignError as exc:
            if not values:
                raise
            raise _non_physical(exc, what) from None
        self.done = base + n
        if self.progress is not None:
            self.progress(min(self.done, self.total), self.total)
        return res


def _non_physical(exc: DesignError, what: str) -> DesignError:
    """A DesignError from a tolerance variant, re-worded to point at the [tolerances] table."""
    key = f"{exc.table}.{exc.key}" if exc.table and exc.key and exc.table != "values" else exc.key
    return DesignError(f"{what} is non-physical ({exc.reason}); narrow the [tolerances] entry",
                       source=exc.source, table="tolerances", key=key)


def _refuse_long(design: Design, total: int, n_corners: int, monte_carlo: int, search: bool, max_work) -> None:
    """ArgumentError naming the estimate, the limit and the ways out when the check's work exceeds ``max_work``."""
    from .workload import estimate_work

    # the lower bound first (no simulation); the step's accuracy estimate (a few simulations of
    # the envelope) runs only when one variant is cheap, so a huge bus is refused at once
    work = estimate_work(design, total, largest_step=True)
    exact = work.node_steps <= max_work or work.node_steps / total <= STEP_ESTIMATE_WORK
    if exact:
        work = estimate_work(design, total)
        if work.node_steps <= max_work:
            return
    fits = int(max_work // (work.node_steps / total))    # variants (nominal included) within the limit
    bound = "" if exact else " (an upper bound: the step chosen for accuracy may be finer)"
    ways = []
    if fits >= 1 and exact:
        ways.append("--nominal (the nominal design alone)")
    elif fits >= 1:
        # a lower bound: the nominal alone is below the limit at the largest step, maybe not at the chosen one
        ways.append("--nominal (the nominal design alone; its work is then estimated at the step chosen "
                    "for accuracy and may still be above the limit)")
    else:
        ways.append("a shorter window or a longer step ([bus] t_stop, dt): even the nominal design is above it")
    if n_corners and fits >= 2:
        ways.append(f"--monte-carlo N with N at most {fits - 1:,}{bound} instead of all {n_corners:,} corners")
    if n_corners:
        ways.append("fewer corners (fewer toleranced values in [tolerances])")
    if monte_carlo and fits >= 2:
        ways.append(f"at most {fits - 1:,} Monte Carlo samples{bound} instead of {monte_carlo:,}")
    if search:
        ways.append("a shorter search (--search-generations) or none")
    ways.append("--allow-long to run it anyway (max_work=None from Python; a progress bar is shown on a terminal)")
    limit_name = "budget.limits.MAX_WORK" if max_work == MAX_WORK else "max_work"
    raise ArgumentError(f"{design.source}: this check would take {'' if exact else 'at least '}"
                        f"{work.describe()}, above the limit of "
                        f"{max_work:.3g} node-steps ({limit_name}; about 2e8 to 3e8 node-steps per second on a "
                        f"2-core machine); ways out: " + "; ".join(ways))


def _coverage(design: Design, plan: dict, n_corners: int, monte_carlo: int, n_search: int, nominal: bool,
              corners_asked) -> dict:
    """The ``coverage`` entry of the report: what was evaluated, in numbers and in words."""
    has_box = bool(varied_paths(design))
    box = plan["corners"] if has_box else 0
    parts = []
    if n_corners:
        parts.append(f"all {n_corners} tolerance corners")
    if monte_carlo:
        parts.append(f"{monte_carlo} Monte Carlo samples")
    if n_search:
        parts.append(f"a worst-case search of {n_search} candidates")
    note = None
    if not parts:
        if not has_box:
            summary = "nominal design only (the design has no tolerances)"
        elif nominal or corners_asked is False:
            summary = "nominal design only"
        else:
            summary = "nominal design only; the tolerance box was not covered"
            note = (f"the tolerance box has {box:,} corners, i.e. {plan['simulations']:,} simulations "
                    f"(corners x {len(design.drivers)} drivers x 2 edges), more than the default limit of "
                    f"{plan['limit']:,}; run --corners (every corner; --max-corners raises the corner limit) "
                    "or sample the box with --monte-carlo N (optionally --search for the worst case inside it)")
    else:
        summary = "nominal and " + (parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1])
        if has_box and not n_corners:
            summary += " (corners not evaluated)"
    return {"nominal": True, "corners": n_corners, "corners_in_box": box, "all_corners": bool(has_box and n_corners),
            "monte_carlo": int(monte_carlo), "search": int(n_search), "default_limit_simulations": plan["limit"],
            "summary": summary, "note": note}


def check(design: Design, *, corners: bool | None = None, nominal: bool = False, monte_carlo: int = 0,
          seed: int | None = None, search: bool = False, progress: Callable[[int, int], None] | None = None,
          distribution: str = "uniform", max_corners: int = MAX_CORNERS,
          search_generations: int = SEARCH_GENERATIONS, max_work: float | None = MAX_WORK) -> CheckReport:
    """Check every driver x receiver x edge of ``design`` against its noise budget.

    Parameters
    ----------
    design : Design
        From :func:`budget.load` (scalar values).
    corners : bool or None
        True: evaluate every corner of the ``[tolerances]`` box (at most
        ``max_corners``); False: no corners; None (default): every corner when
        corners x drivers x edges is at most
        :data:`~budget.analyses.DEFAULT_MAX_SIMULATIONS`, else the report says
        the box was not covered.
    nominal : bool
        Evaluate the nominal design alone (no tolerance analysis at all).
    monte_carlo : int
        Number of random variants (0 = none); see ``distribution``.
    seed : int, optional
        Seed of the Monte Carlo draws and of the search; None draws a fresh
        one, reported in ``analyses`` so the run can be repeated.
    search : bool
        Run the worst-case search (differential evolution) inside the
        tolerance box, starting from the worst corner (corners are evaluated
        for it when there are at most ``max_corners``).
    progress : callable(done, total), optional
        Called as variants are evaluated (counts over all analyses).
    distribution : "uniform" or "normal"
        Monte Carlo sampling: uniform inside each interval, or normal with
        the interval as +-3 sigma, truncated to it.
    max_corners : int
        Largest corner count accepted.
    search_generations : int
        Most generations of the search (each one sweep of the population).
    max_work : float or None [node-steps]
        Refuse the check (ArgumentError, before any simulation) when its estimated
        work (simulations x time steps x netlist nodes, :func:`budget.workload.estimate_work`)
        is above this; default :data:`budget.limits.MAX_WORK`; None allows any length.

    Returns
    -------
    CheckReport
    """
    if not isinstance(design, Design):
        raise ArgumentError(f"check() takes a Design (from budget.load), got {type(design).__name__}")
    if design.batch_size is not None:
        raise ArgumentError("check() takes a design with scalar values; use budget.sweep for arrays")
    if corners is not None and not isinstance(corners, (bool, np.bool_)):
        raise ArgumentError(f"corners must be True, False or None (the default), got {corners!r}")
    if not isinstance(nominal, (bool, np.bool_)):
        raise ArgumentError(f"nominal must be True or False, got {nominal!r}")
    if isinstance(monte_carlo, bool) or not isinstance(monte_carlo, (int, np.integer)) or monte_carlo < 0:
        raise ArgumentError(f"monte_carlo must be a whole number of samples >= 0, got {monte_carlo!r}")
    if monte_carlo > MAX_MONTE_CARLO:
        raise ArgumentError(f"monte_carlo (--monte-carlo) is {monte_carlo}; at most {MAX_MONTE_CARLO} samples "
                            "(budget.limits.MAX_MONTE_CARLO)")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise ArgumentError(f"seed must be a non-negative integer or None, got {seed!r}")
    if distribution not in DISTRIBUTIONS:
        raise ArgumentError(f"distribution must be one of {', '.join(DISTRIBUTIONS)}, got {distribution!r}")
    if isinstance(max_corners, bool) or not isinstance(max_corners, (int, np.integer)) or max_corners < 1:
        raise ArgumentError(f"max_corners must be a positive integer, got {max_corners!r}")
    if max_corners > MAX_CORNERS_RAISED:
        raise ArgumentError(f"max_corners (--max-corners) is {max_corners:,}; at most {MAX_CORNERS_RAISED:,} "
                            "corners (budget.limits.MAX_CORNERS_RAISED, 20 toleranced values): beyond that "
                            "use --monte-carlo N or --search")
    if not isinstance(search_generations, (int, np.integer)) or search_generations < 1:
        raise ArgumentError(f"search_generations must be a positive integer, got {search_generations!r}")
    if max_work is not None and (isinstance(max_work, bool) or not isinstance(max_work, (int, float, np.integer,
                                                                                        np.floating))
                                 or not max_work > 0):
        raise ArgumentError(f"max_work must be a positive number of node-steps or None, got {max_work!r}")
    if progress is not None and not callable(progress):
        raise ArgumentError("progress must be a callable(done, total) or None")
    if nominal and (corners or monte_carlo > 0 or search):
        raise ArgumentError("nominal=True (--nominal) asks for the nominal design alone; it cannot be combined "
                            "with corners, monte_carlo or search")
    paths = varied_paths(design)
    if (corners or monte_carlo > 0 or search) and not paths:
        raise ArgumentError(f"{design.source}: the design has no [tolerances] (or only zero ones); "
                            "corners, Monte Carlo and search need toleranced values")
    drivers, receivers = design.drivers, design.receivers
    if not drivers:
        raise ArgumentError(f"{design.source}: no tap can drive (parts with role driver or transceiver)")
    if not any(r != d for d in drivers for r in receivers):
        raise ArgumentError(f"{design.source}: no tap can receive from another tap "
                            "(parts with role receiver or transceiver)")
    if seed is None and (monte_carlo > 0 or search):
        seed = int(np.random.SeedSequence().entropy % (2 ** 32))

    # corner values first: an over-large box is refused before any work
    plan = default_corners(design, max_corners=max_corners)
    fits = len(paths) <= 62 and 2 ** len(paths) <= max_corners
    run_corners = bool(corners) or (corners is None and not nominal and plan["run"]) or (search and fits)
    corner_vals = codes = None
    # the count first (refusing too many corners), the corner table only after the work bound
    n_corners = corner_values(design, max_corners=max_corners, count_only=True) if run_corners else 0
    k = len(paths)
    pop = max(8, 4 * k)
    total = 1 + n_corners + monte_carlo + (pop * (search_generations + 1) if search else 0)
    if max_work is not None:
        _refuse_long(design, total, n_corners, monte_carlo, search, max_work)
    if run_corners:
        corner_vals, _, codes = corner_values(design, max_corners=max_corners)
    ev = _Evaluator(design, progress, total)
    shape = (len(drivers), 2, len(receivers))
    trackers = []
    analyses: dict = {}

    # nominal
    nom = WorstTracker("nominal", shape)
    res = ev.run(None, 1)
    nom.update(res, ["nominal"], None)
    trackers.append(nom)
    analyses["nominal"] = {"variants": 1, "failed": nom.failed}
    edges = res.edges

    cor = None
    if run_corners:
        cor = WorstTracker("corners", shape)
        labels = [f"corner {i + 1}" for i in range(n_corners)]
        res = ev.run(corner_vals, n_corners, "a corner of the tolerance box")
        cor.update(res, labels, corner_vals)
        trackers.append(cor)
        requested = bool(corners) or (corners is None and plan["run"])
        analyses["corners"] = {
            "variants": n_corners, "failed": cor.failed, "toleranced_values": paths,
            "worst_corner": cor.worst_label, "worst_headroom": cor.worst_head,
            "requested": requested, "default": corners is None and plan["run"],
            "note": "every combination of the minimum and maximum of each toleranced value"
                    + ("" if requested else "; run as the starting point of the worst-case search"),
        }
        cor.extremes = {f"corner {i + 1}": {p: ("max" if codes[i, j] else "min") for j, p in enumerate(paths)}
                        for i in range(n_corners)}

    if monte_carlo > 0:
        mc = WorstTracker("monte_carlo", shape)
        rng = np.random.default_rng(seed)
        vals = sample_values(design, monte_carlo, rng, distribution)
        for lo in range(0, monte_carlo, MC_CHUNK):
            hi = min(monte_carlo, lo + MC_CHUNK)
            part = {p: a[lo:hi] for p, a in vals.items()}
            res = ev.run(part, hi - lo, "a Monte Carlo sample of the tolerance box")
            mc.update(res, [f"sample {i + 1}" for i in range(lo, hi)], part)
        trackers.append(mc)
        ci = wilson_interval(mc.failed, monte_carlo)
        analyses["monte_carlo"] = {
            "variants": monte_carlo, "failed": mc.failed, "seed": seed, "distribution": distribution,
            "distribution_note": ("each toleranced value drawn independently and uniformly inside its interval"
                                  if distribution == "uniform" else
                                  "each toleranced value drawn independently from a normal distribution with "
                                  "the interval as +-3 sigma, truncated to the interval"),
            "failure_probability": mc.failed / monte_carlo, "wilson_95": list(ci),
            "worst_sample": mc.worst_label, "worst_headroom": mc.worst_head,
        }

    n_search = 0
    if search:
        srch = WorstTracker("search", shape)
        counter = [0]

        def evaluate(vals):
            n = len(next(iter(vals.values())))
            r = ev.run(vals, n, "a search candidate in the tolerance box")
            labels = [f"search {counter[0] + i + 1}" for i in range(n)]
            counter[0] += n
            return srch.update(r, labels, vals)

        start = cor.values[cor.worst_label] if cor is not None else None
        info = search_box(design, evaluate, paths, pop, seed, search_generations, start=start)
        info = {"variants": srch.n, "failed": srch.failed, **info,
                "worst_found": srch.worst_label, "worst_headroom": srch.worst_head}
        trackers.append(srch)
        if cor is not None:
            info["worst_corner_headroom"] = cor.worst_head
            info["beats_corners_by"] = cor.worst_head - srch.worst_head
        analyses["search"] = info
        n_search = srch.n

    coverage = _coverage(design, plan, n_corners, monte_carlo, n_search, nominal, corners)
    return _assemble(design, trackers, analyses, drivers, edges, receivers, coverage)


def _assemble(design, trackers, analyses, drivers, edges, receivers, coverage) -> CheckReport:
    results = []
    best = None
    for tr in trackers:
        for d in range(len(drivers)):
            for e in range(len(edges)):
                for r in range(len(receivers)):
                    if receivers[r] == drivers[d] or tr.label[d, e, r] is None:
                        continue
                    row = result_row(tr.name, tr.label[d, e, r], tr.metrics[d, e, r], tr.levels[d, e, r],
                                     tr.bits[d, e, r], tr.head[d, e, r], drivers[d], receivers[r], edges[e])
                    results.append(row)
                    # the rule, ties to the first in (analysis, variant, driver, edge, receiver) order
                    bits, head = tr.bits[d, e, r], tr.head[d, e, r]
                    if best is None or mk.worse(bits, head, best[1], best[2]) or (
                            best[3] is tr and tr.index[d, e, r] < tr.index[best[4]]
                            and not mk.worse(best[1], best[2], bits, head)):
                        best = (row, bits, head, tr, (d, e, r))
    variants = {"nominal": {"analysis": "nominal", "values": {}}}
    for tr in trackers[1:]:
        for label, v in tr.values.items():
            variants[label] = {"analysis": tr.name, "values": v}
            if label in tr.extremes:
                variants[label]["extremes"] = tr.extremes[label]
    used = {r["corner"] for r in results}
    for tr in trackers[1:]:
        used.add(tr.worst_label)
    variants = {k: v for k, v in variants.items() if k in used}
    row, _, _, tr, idx = best
    values = variants.get(row["corner"], {}).get("values", {})
    limit = limiting_term(design, row["receiver"], tr.metrics[idx], values)
    part = design.parts[design.tap(row["receiver"]).part]
    v_max, v_min = (values.get(f"parts.{part.name}.{k}", getattr(part, k)) for k in ("v_max", "v_min"))
    min_margin = float(design.noise_budget.min_margin)
    worst = worst_summary(row, limit, v_max, v_min, min_margin)
    passed = all(r["pass"] for r in results) and all(t.failed == 0 for t in trackers)
    for name, a in analyses.items():
        a["passed"] = a["failed"] == 0
    budget = {
        "allocations": {name: {"value": v, "unit": "V" if unit == "V" else "fraction of swing"}
                        for name, (v, unit) in design.noise_budget.allocations.items()},
        "min_margin": min_margin, "settle_band": float(design.noise_budget.settle_band),
    }
    from .anatomy import report_anatomy
    from .model import geometry_notes

    anatomy = report_anatomy(design, variants, row).to_json()
    return CheckReport(design=design.bus.name, source=str(design.source), signaling=design.bus.signaling,
                       passed=bool(passed), worst=worst, results=results, analyses=analyses,
                       tolerances={p: [float(lo), float(hi)] for p, (lo, hi) in design.tolerances.items()},
                       budget=budget, variants=variants, units=_units(design),
                       receivers=[r for r in receivers if any(x["receiver"] == r for x in results)],
                       coverage=coverage, out_of_box=out_of_box(design), anatomy=anatomy,
                       warnings=geometry_notes(design), assumptions=assumptions_for(design))


def _units(design) -> dict:
    from .units import DIMENSIONS

    dims = getattr(design.structure, "dimensions", {}) or {}
    return {p: DIMENSIONS[dims[p]][1] for p in design.tolerances if p in dims}


__all__ = ["check", "CheckReport", "wilson_interval", "corner_values", "sample_values", "out_of_box", "SCHEMA",
           "MAX_CORNERS", "DEFAULT_MAX_SIMULATIONS", "DISTRIBUTIONS", "ASSUMPTIONS", "RESULT_KEYS",
           "SEARCH_GENERATIONS"]
