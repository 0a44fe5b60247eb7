"""The budget check: every driver x every receiver x both edges, nominal and across tolerances.

:func:`check` answers the sign-off question -- does every receiver keep its
noise margin whichever device drives, across the design's tolerances -- and,
if not, names exactly where and by how much.  Every evaluation goes through
:func:`budget.sweep.sweep` (the batched numba path), so the numbers here are
the numbers a production script or the C library gets.

Analyses
--------
nominal
    The design as written.  Always run.
corners
    Every combination of the extremes of the ``[tolerances]`` table (2**k
    variants for k toleranced values; values whose tolerance is zero are left
    out).  Refused above ``max_corners`` (default 4096) with a message that
    points to the Monte Carlo and the search.
Monte Carlo
    ``monte_carlo`` random variants, each value drawn independently and
    uniformly inside its tolerance interval (``distribution="uniform"``, the
    default: a tolerance says where a value may be, not how likely each value
    is), or from a normal distribution with the interval as +-3 sigma,
    truncated to the interval (``distribution="normal"``).  The estimated
    failure probability is k/n with a Wilson score interval (Wilson 1927; see
    :func:`wilson_interval`).
worst-case search
    Differential evolution (Storn & Price 1997, via
    :func:`scipy.optimize.differential_evolution`, vectorised so that each
    generation is one sweep) inside the tolerance box, minimising the
    bus-level headroom; its starting population holds the worst corner, so
    the search can only match or beat the corners.  It matters when the
    response is not monotonic in a value (a stub whose length sweeps through a
    resonance), where the worst case lies inside the box, not at a corner.

Worst case and headroom
-----------------------
For one (driver, receiver, edge) of one variant the *headroom* [V] is the
smallest of: margin - min_margin; v_max - v_peak (if the part gives v_max);
v_trough - v_min (if it gives v_min).  Negative headroom is a violation.  A
result also fails on the kernel's other violations (never valid,
non-monotonic edge, not settled in the window).  "Worst" orders results with
a violation before results without one, then by lowest headroom.

Time step and window are the same for every variant of a check: the engine
chooses them (and the line modelling) from the whole tolerance box
(:func:`budget.netlist.tolerance_envelope`), never from the variants that
happen to share a sweep.

References
----------
- E. B. Wilson, "Probable inference, the law of succession, and statistical
  inference", JASA 22(158), 1927, 209-212 (docs/references.md G1).
- R. Storn, K. Price, "Differential evolution - a simple and efficient
  heuristic for global optimization over continuous spaces", J. Global
  Optimization 11, 1997, 341-359.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np

from .errors import ArgumentError, DesignError
from .kernels import metrics as mk
from .model import Design

SCHEMA = "busbudget.check/1"
DISTRIBUTIONS = ("uniform", "normal")
MAX_CORNERS = 4096
MC_CHUNK = 512          # Monte Carlo variants per sweep call
PROGRESS_CHUNK = 256    # variants per progress report inside a sweep call
SEARCH_GENERATIONS = 20
# Violating results sort before passing ones: their key is lowered by this many
# volts, far more than any physical headroom.
VIOLATION_OFFSET = 1.0e3

RESULT_KEYS = ("driver", "receiver", "edge", "corner", "v_lo", "v_hi", "t_switch", "t_valid", "flight_min",
               "flight_max", "overshoot", "undershoot", "ringback", "monotonic", "settle_time",
               "margin_high", "margin_low", "v_peak", "v_trough", "pass", "violations")

ASSUMPTIONS = (
    "Linear driver model: each output state is a voltage behind a resistance, blended linearly over "
    "a ramp; no IBIS-style non-linear curves, clamp diodes or slew control.",
    "Differential buses are analysed in their differential mode only; common-mode effects are out of "
    "scope.",
    "Line loss is a DC series resistance lumped between sections; no skin effect or dielectric loss.",
    "Crosstalk, supply noise and other noise are not computed: they enter only as the allocations of "
    "the [budget] table.",
    "The margins are estimates to confirm by measurement and with the part makers' data; absolute "
    "maximum ratings come from the parts' datasheets, not from this tool.  Defer to the applicable "
    "interface standards and to the responsible engineer.",
)


def wilson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval [-] for a binomial proportion: k failures in n trials.

    centre = (p + z^2/(2n)) / (1 + z^2/n), half-width =
    z sqrt(p(1-p)/n + z^2/(4n^2)) / (1 + z^2/n), with p = k/n and
    z = Phi^-1(1 - (1 - confidence)/2) (Wilson 1927; docs/references.md G1).
    Unlike the normal approximation it stays inside [0, 1] and is not
    degenerate at k = 0 (upper limit z^2/(n + z^2)).
    """
    from scipy.stats import norm

    if not (isinstance(n, (int, np.integer)) and n > 0):
        raise ArgumentError(f"n must be a positive integer, got {n!r}")
    if not (isinstance(k, (int, np.integer)) and 0 <= k <= n):
        raise ArgumentError(f"k must be an integer in 0..n (n={n}), got {k!r}")
    if not 0 < confidence < 1:
        raise ArgumentError(f"confidence must be between 0 and 1, got {confidence!r}")
    z = float(norm.ppf(1.0 - (1.0 - confidence) / 2.0))
    p = k / n
    den = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / den
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    lo, hi = max(0.0, centre - half), min(1.0, centre + half)
    if k == 0:
        lo = 0.0
    if k == n:
        hi = 1.0
    return lo, hi


# ---------------------------------------------------------------------------
# report object

@dataclass
class CheckReport:
    """Result of :func:`check`; SI units throughout (volts, seconds).

    passed, verdict ("pass"/"fail"); worst: the worst case (driver, receiver,
    edge, corner, metric, value, plus headroom [V], percent_of_swing,
    violations, analysis); results: one dict per (driver, receiver, edge,
    corner) with the JSON contract keys (docs/metrics.md) -- the nominal
    design, plus, for each tolerance analysis, the worst variant of that
    analysis for each (driver, receiver, edge), never every sample; analyses:
    settings and summaries of each analysis run; variants: label -> the
    values of every variant named in results or worst.
    """
    design: str
    source: str
    signaling: str
    passed: bool
    worst: dict
    results: list
    analyses: dict
    tolerances: dict
    budget: dict
    variants: dict
    units: dict = field(default_factory=dict)
    receivers: list = field(default_factory=list)

    @property
    def verdict(self) -> str:
        return "pass" if self.passed else "fail"

    def to_json(self) -> dict:
        """The versioned JSON document (schema "busbudget.check/1"); no NaN anywhere."""
        from .report import to_json

        return to_json(self)

    def text(self) -> str:
        """Readable report: per-receiver table, worst case, tolerance summaries, verdict, assumptions."""
        from .report import to_text

        return to_text(self)

    def rows(self, *, driver=None, receiver=None, edge=None, analysis=None) -> list:
        """Results filtered by driver, receiver, edge and/or analysis."""
        return [r for r in self.results
                if (driver is None or r["driver"] == driver) and (receiver is None or r["receiver"] == receiver)
                and (edge is None or r["edge"] == edge) and (analysis is None or r["analysis"] == analysis)]


# ---------------------------------------------------------------------------
# evaluation helpers

class _Evaluator:
    """Runs sweeps, counts progress and keeps the per-analysis worst results."""

    def __init__(self, design: Design, progress, total: int):
        self.design = design
        self.box = {p: (float(lo), float(hi)) for p, (lo, hi) in design.tolerances.items()}
        self.progress = progress
        self.total = max(int(total), 1)
        self.done = 0
        part_of = {t.name: t.part for t in design.taps}
        self.receivers = design.receivers
        self.rcv_parts = [part_of[r] for r in self.receivers]

    def run(self, values: Mapping[str, np.ndarray] | None, n: int, what: str = "a variant"):
        """Sweep n variants; ``what`` names them in the error raised when one is non-physical."""
        from .sweep import sweep

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

    def limits(self, values, n):
        """v_max, v_min [V] per variant and receiver ([n, n_rcv]; +-inf when the part gives none)."""
        vmax = np.empty((n, len(self.receivers)))
        vmin = np.empty((n, len(self.receivers)))
        for j, part in enumerate(self.rcv_parts):
            for out, key, default in ((vmax, "v_max", np.inf), (vmin, "v_min", -np.inf)):
                path = f"parts.{part}.{key}"
                if values and path in values:
                    out[:, j] = values[path]
                else:
                    out[:, j] = self.design.params.get(path, default)
        return vmax, vmin

    def headroom(self, res, values, n):
        """[N, n_drv, n_edge, n_rcv] headroom [V] (+inf where the receiver is the driver)."""
        vmax, vmin = self.limits(values, n)
        m = res.metrics
        h = m[..., mk.MARGIN] - float(self.design.budget.min_margin)
        h = np.minimum(h, vmax[:, None, None, :] - m[..., mk.V_PEAK])
        h = np.minimum(h, m[..., mk.V_TROUGH] - vmin[:, None, None, :])
        return np.where(res.valid[None, :, None, :], h, np.inf)


class _Worst:
    """Per-(driver, edge, receiver) worst result of one analysis, updated batch by batch."""

    def __init__(self, name: str, shape):
        self.name = name
        self.key = np.full(shape, np.inf)
        self.head = np.full(shape, np.inf)
        self.metrics = np.full(shape + (mk.N_METRICS,), np.nan)
        self.levels = np.full(shape + (2,), np.nan)
        self.bits = np.zeros(shape, dtype=np.int64)
        self.label = np.empty(shape, dtype=object)
        self.values: dict[str, dict] = {}
        self.n = 0
        self.failed = 0
        self.lowest = (np.inf, None)   # bus-level lowest headroom and its label
        self.extremes: dict[str, dict] = {}   # corners: label -> {path: "min" | "max"}

    def update(self, res, head, labels, values):
        key = np.where(res.bits != 0, head - VIOLATION_OFFSET, head)
        i = np.argmin(key, axis=0)
        best = np.take_along_axis(key, i[None], axis=0)[0]
        better = best < self.key
        if np.any(better):
            sel = np.take_along_axis
            self.key = np.where(better, best, self.key)
            self.head = np.where(better, sel(head, i[None], axis=0)[0], self.head)
            self.bits = np.where(better, sel(res.bits, i[None], axis=0)[0], self.bits)
            self.metrics = np.where(better[..., None], sel(res.metrics, i[None, ..., None], axis=0)[0],
                                    self.metrics)
            self.levels = np.where(better[..., None], sel(res.levels, i[None, ..., None], axis=0)[0],
                                   self.levels)
            for idx in zip(*np.nonzero(better)):
                v = int(i[idx])
                self.label[idx] = labels[v]
                if labels[v] not in self.values:
                    self.values[labels[v]] = {p: float(a[v]) for p, a in values.items()} if values else {}
        bus = head.min(axis=(1, 2, 3))
        j = int(np.argmin(bus))
        if bus[j] < self.lowest[0]:
            self.lowest = (float(bus[j]), labels[j])
            if labels[j] not in self.values:
                self.values[labels[j]] = {p: float(a[j]) for p, a in values.items()} if values else {}
        self.n += res.n_variants
        self.failed += int(np.count_nonzero(~res.passed))
        return bus


def _opt(x):
    x = float(x)
    return None if not math.isfinite(x) else x


def _row(worst: _Worst, d: int, e: int, r: int, drivers, edges, receivers) -> dict:
    m = worst.metrics[d, e, r]
    v_lo, v_hi = (float(x) for x in worst.levels[d, e, r])
    bits = int(worst.bits[d, e, r])
    rising = edges[e] == "rise"
    swing = abs(v_hi - v_lo)
    margin = float(m[mk.MARGIN])
    return {
        "driver": drivers[d], "receiver": receivers[r], "edge": edges[e], "corner": worst.label[d, e, r],
        "v_lo": v_lo, "v_hi": v_hi,
        "t_switch": _opt(m[mk.T_SWITCH]), "t_valid": _opt(m[mk.T_VALID]),
        "flight_min": _opt(m[mk.FLIGHT_MIN]), "flight_max": _opt(m[mk.FLIGHT_MAX]),
        "overshoot": _opt(m[mk.OVERSHOOT]), "undershoot": _opt(m[mk.UNDERSHOOT]),
        "ringback": _opt(m[mk.RINGBACK]), "monotonic": bool(m[mk.MONOTONIC] > 0.5),
        "settle_time": _opt(m[mk.SETTLE_TIME]),
        "margin_high": _opt(margin) if rising else None, "margin_low": None if rising else _opt(margin),
        "v_peak": _opt(m[mk.V_PEAK]), "v_trough": _opt(m[mk.V_TROUGH]),
        "pass": bits == 0, "violations": mk.violation_list(bits),
        # extensions
        "analysis": worst.name,
        "margin_percent_of_swing": _opt(100.0 * margin / swing) if swing > 0 else None,
        "headroom": _opt(worst.head[d, e, r]),
    }


def _worst_dict(row: dict, design: Design) -> dict:
    """The bus-level worst case from its result row: which metric limits it, and by how much."""
    part = design.parts[design.tap(row["receiver"]).part]
    rising = row["edge"] == "rise"
    margin = row["margin_high"] if rising else row["margin_low"]
    swing = abs(row["v_hi"] - row["v_lo"])
    min_margin = float(design.budget.min_margin)
    cands = [(margin - min_margin, "margin_high" if rising else "margin_low", margin,
              f"margin >= {min_margin:g} V")]
    values = row.get("_values", {})
    v_max = values.get(f"parts.{part.name}.v_max", part.v_max)
    v_min = values.get(f"parts.{part.name}.v_min", part.v_min)
    if v_max is not None:
        cands.append((v_max - row["v_peak"], "overshoot", row["overshoot"], f"v_peak <= v_max = {v_max:g} V"))
    if v_min is not None:
        cands.append((row["v_trough"] - v_min, "undershoot", row["undershoot"],
                      f"v_trough >= v_min = {v_min:g} V"))
    head, metric, value, limit = min(cands, key=lambda c: c[0])
    if head >= 0 and not row["pass"]:
        # only a non-margin violation (non-monotonic edge, never settled): name it
        viol = row["violations"][0]
        metric, value, limit = {"never valid": ("t_valid", None, "must become valid"),
                                "non-monotonic edge": ("monotonic", False, "monotonic through VIL..VIH"),
                                "not settled in window": ("settle_time", None, "must settle in the window"),
                                }.get(viol, (metric, value, limit))
    return {
        "driver": row["driver"], "receiver": row["receiver"], "edge": row["edge"], "corner": row["corner"],
        "metric": metric, "value": value,
        # extensions
        "headroom": head, "percent_of_swing": 100.0 * head / swing if swing > 0 else None,
        "margin": margin, "margin_percent_of_swing": row["margin_percent_of_swing"], "limit": limit,
        "violations": list(row["violations"]), "analysis": row["analysis"],
    }


# ---------------------------------------------------------------------------
# the analyses

def _varied_paths(design: Design):
    return [p for p, (lo, hi) in design.tolerances.items() if hi > lo]


def corner_values(design: Design, *, max_corners: int = MAX_CORNERS):
    """Values of every corner of the tolerance box: ({path: array(2**k)}, paths, codes[2**k, k]).

    codes[i, j] is 0 where value j is at its minimum and 1 at its maximum.
    Raises ArgumentError when 2**k exceeds ``max_corners``.
    """
    paths = _varied_paths(design)
    k = len(paths)
    if k == 0:
        return {}, paths, np.zeros((0, 0), dtype=np.int64)
    if k > 62 or 2 ** k > max_corners:
        raise ArgumentError(
            f"{design.source}: [tolerances] has {k} toleranced values, i.e. 2**{k} = {2 ** k:,} corners, "
            f"more than the limit of {max_corners:,}; use a Monte Carlo analysis (--monte-carlo N) or the "
            "worst-case search (--search) instead, or raise the limit (--max-corners)")
    codes = np.array(list(itertools.product((0, 1), repeat=k)), dtype=np.int64)
    vals = {p: np.where(codes[:, j] == 0, design.tolerances[p][0], design.tolerances[p][1])
            for j, p in enumerate(paths)}
    return vals, paths, codes


def sample_values(design: Design, n: int, rng: np.random.Generator, distribution: str = "uniform"):
    """n random variants inside the tolerance box: {path: array(n)} (see module docstring)."""
    if distribution not in DISTRIBUTIONS:
        raise ArgumentError(f"distribution must be one of {', '.join(DISTRIBUTIONS)}, got {distribution!r}")
    out = {}
    for p in _varied_paths(design):
        lo, hi = design.tolerances[p]
        if distribution == "uniform":
            out[p] = rng.uniform(lo, hi, n)
        else:
            from scipy.stats import truncnorm
            out[p] = truncnorm.rvs(-3.0, 3.0, loc=0.5 * (lo + hi), scale=(hi - lo) / 6.0, size=n,
                                   random_state=rng)
    return out


def _non_physical(exc: DesignError, what: str) -> DesignError:
    """A DesignError from a tolerance variant, re-worded to point at the [tolerances] table."""
    key = f"{exc.table}.{exc.key}" if exc.table and exc.key and exc.table != "values" else exc.key
    return DesignError(f"{what} is non-physical ({exc.reason}); narrow the [tolerances] entry",
                       source=exc.source, table="tolerances", key=key)


def check(design: Design, *, corners: bool = False, monte_carlo: int = 0, seed: int | None = None,
          search: bool = False, progress: Callable[[int, int], None] | None = None,
          distribution: str = "uniform", max_corners: int = MAX_CORNERS,
          search_generations: int = SEARCH_GENERATIONS) -> CheckReport:
    """Check every driver x receiver x edge of ``design`` against its noise budget.

    Parameters
    ----------
    design : Design
        From :func:`budget.load` (scalar values).
    corners : bool
        Also evaluate every corner of the ``[tolerances]`` box (at most ``max_corners``).
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

    Returns
    -------
    CheckReport
    """
    if not isinstance(design, Design):
        raise ArgumentError(f"check() takes a Design (from budget.load), got {type(design).__name__}")
    if design.batch_size is not None:
        raise ArgumentError("check() takes a design with scalar values; use budget.sweep for arrays")
    if isinstance(monte_carlo, bool) or not isinstance(monte_carlo, (int, np.integer)) or monte_carlo < 0:
        raise ArgumentError(f"monte_carlo must be a whole number of samples >= 0, got {monte_carlo!r}")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise ArgumentError(f"seed must be a non-negative integer or None, got {seed!r}")
    if distribution not in DISTRIBUTIONS:
        raise ArgumentError(f"distribution must be one of {', '.join(DISTRIBUTIONS)}, got {distribution!r}")
    if not isinstance(max_corners, (int, np.integer)) or max_corners < 1:
        raise ArgumentError(f"max_corners must be a positive integer, got {max_corners!r}")
    if not isinstance(search_generations, (int, np.integer)) or search_generations < 1:
        raise ArgumentError(f"search_generations must be a positive integer, got {search_generations!r}")
    if progress is not None and not callable(progress):
        raise ArgumentError("progress must be a callable(done, total) or None")
    wants_tol = corners or monte_carlo > 0 or search
    paths = _varied_paths(design)
    if wants_tol and not paths:
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
    run_corners = corners
    corner_vals = codes = None
    if corners:
        corner_vals, _, codes = corner_values(design, max_corners=max_corners)
    elif search and len(paths) <= 62 and 2 ** len(paths) <= max_corners:
        run_corners = True   # the search starts from the worst corner
        corner_vals, _, codes = corner_values(design, max_corners=max_corners)
    n_corners = 0 if corner_vals is None else codes.shape[0]
    k = len(paths)
    pop = max(8, 4 * k)
    total = 1 + n_corners + monte_carlo + (pop * (search_generations + 1) if search else 0)
    ev = _Evaluator(design, progress, total)
    shape = (len(drivers), 2, len(receivers))
    trackers = []
    analyses: dict = {}

    # nominal
    nom = _Worst("nominal", shape)
    res = ev.run(None, 1)
    nom.update(res, ev.headroom(res, None, 1), ["nominal"], None)
    trackers.append(nom)
    analyses["nominal"] = {"variants": 1, "failed": nom.failed}
    edges = res.edges

    cor = None
    if run_corners:
        cor = _Worst("corners", shape)
        labels = [f"corner {i + 1}" for i in range(n_corners)]
        res = ev.run(corner_vals, n_corners, "a corner of the tolerance box")
        bus = cor.update(res, ev.headroom(res, corner_vals, n_corners), labels, corner_vals)
        trackers.append(cor)
        analyses["corners"] = {
            "variants": n_corners, "failed": cor.failed, "toleranced_values": paths,
            "worst_corner": cor.lowest[1], "worst_headroom": cor.lowest[0],
            "requested": bool(corners),
            "note": "every combination of the minimum and maximum of each toleranced value"
                    + ("" if corners else "; run as the starting point of the worst-case search"),
        }
        corner_bus = bus
        cor.extremes = {f"corner {i + 1}": {p: ("max" if codes[i, j] else "min") for j, p in enumerate(paths)}
                        for i in range(n_corners)}

    if monte_carlo > 0:
        mc = _Worst("monte_carlo", shape)
        rng = np.random.default_rng(seed)
        vals = sample_values(design, monte_carlo, rng, distribution)
        for lo in range(0, monte_carlo, MC_CHUNK):
            hi = min(monte_carlo, lo + MC_CHUNK)
            part = {p: a[lo:hi] for p, a in vals.items()}
            res = ev.run(part, hi - lo, "a Monte Carlo sample of the tolerance box")
            mc.update(res, ev.headroom(res, part, hi - lo), [f"sample {i + 1}" for i in range(lo, hi)], part)
        trackers.append(mc)
        ci = wilson_interval(mc.failed, monte_carlo)
        analyses["monte_carlo"] = {
            "variants": monte_carlo, "failed": mc.failed, "seed": seed, "distribution": distribution,
            "distribution_note": ("each toleranced value drawn independently and uniformly inside its interval"
                                  if distribution == "uniform" else
                                  "each toleranced value drawn independently from a normal distribution with "
                                  "the interval as +-3 sigma, truncated to the interval"),
            "failure_probability": mc.failed / monte_carlo, "wilson_95": list(ci),
            "worst_sample": mc.lowest[1], "worst_headroom": mc.lowest[0],
        }

    if search:
        srch = _Worst("search", shape)
        info = _search(design, ev, srch, paths, pop, seed, search_generations,
                       start=(corner_vals, corner_bus) if cor is not None else None)
        trackers.append(srch)
        if cor is not None:
            info["worst_corner_headroom"] = cor.lowest[0]
            info["beats_corners_by"] = cor.lowest[0] - srch.lowest[0]
        analyses["search"] = info

    return _assemble(design, trackers, analyses, drivers, edges, receivers)


def _search(design, ev: _Evaluator, srch: _Worst, paths, pop, seed, generations, start):
    """Differential evolution inside the tolerance box (vectorised: one sweep per generation)."""
    from scipy.optimize import differential_evolution
    from scipy.stats import qmc

    k = len(paths)
    lo = np.array([design.tolerances[p][0] for p in paths])
    hi = np.array([design.tolerances[p][1] for p in paths])
    rng = np.random.default_rng(seed)
    init = lo + qmc.LatinHypercube(d=k, rng=rng).random(pop) * (hi - lo)
    nominal = np.array([design.params[p] for p in paths])
    seeded = []
    if start is not None:
        vals, bus = start
        order = np.argsort(bus, kind="stable")
        worst = np.array([vals[p][order[0]] for p in paths])
        init[0] = worst
        seeded.append("worst corner")
    init[1] = nominal
    seeded.append("nominal")
    counter = [0]

    def objective(x):
        # vectorised: x is [k, S] (one column per candidate); [k] for a single one
        x = np.asarray(x, dtype=float)
        x = (x[:, None] if x.ndim == 1 else x).T
        n = x.shape[0]
        vals = {p: x[:, j].copy() for j, p in enumerate(paths)}
        res = ev.run(vals, n, "a search candidate in the tolerance box")
        labels = [f"search {counter[0] + i + 1}" for i in range(n)]
        counter[0] += n
        return srch.update(res, ev.headroom(res, vals, n), labels, vals)

    result = differential_evolution(
        objective, list(zip(lo, hi)), init=init, maxiter=generations, tol=0.0, atol=1e-4,
        vectorized=True, updating="deferred", polish=False, rng=seed, mutation=(0.5, 1.0), recombination=0.7)
    return {
        "variants": srch.n, "failed": srch.failed, "seed": seed, "method": "differential evolution "
        "(scipy.optimize.differential_evolution, best1bin, vectorised, no polishing)",
        "population": pop, "generations": int(result.nit), "max_generations": generations,
        "stopped": str(result.message), "starting_population": f"{', '.join(seeded)} and a Latin hypercube",
        "objective": "lowest headroom over every driver, receiver and edge [V]",
        "worst_found": srch.lowest[1], "worst_headroom": srch.lowest[0],
    }


def _assemble(design, trackers, analyses, drivers, edges, receivers) -> CheckReport:
    results = []
    best = None
    valid = [[r != d for r in receivers] for d in drivers]
    for tr in trackers:
        for d in range(len(drivers)):
            for e in range(len(edges)):
                for r in range(len(receivers)):
                    if not valid[d][r]:
                        continue
                    row = _row(tr, d, e, r, drivers, edges, receivers)
                    results.append(row)
                    if best is None or tr.key[d, e, r] < best[0]:
                        best = (tr.key[d, e, r], row, tr)
    variants = {"nominal": {"analysis": "nominal", "values": {}}}
    for tr in trackers[1:]:
        for label, v in tr.values.items():
            variants[label] = {"analysis": tr.name, "values": v}
            if label in tr.extremes:
                variants[label]["extremes"] = tr.extremes[label]
    used = {r["corner"] for r in results}
    for tr in trackers[1:]:
        used.add(tr.lowest[1])
    variants = {k: v for k, v in variants.items() if k in used}
    _, row, tr = best
    wrow = dict(row)
    wrow["_values"] = variants.get(row["corner"], {}).get("values", {})
    worst = _worst_dict(wrow, design)
    passed = all(r["pass"] for r in results) and all(t.failed == 0 for t in trackers)
    for name, a in analyses.items():
        a["passed"] = a["failed"] == 0
    budget = {
        "allocations": {name: {"value": v, "unit": "V" if unit == "V" else "fraction of swing"}
                        for name, (v, unit) in design.budget.allocations.items()},
        "min_margin": float(design.budget.min_margin), "settle_band": float(design.budget.settle_band),
    }
    return CheckReport(design=design.bus.name, source=str(design.source), signaling=design.bus.signaling,
                       passed=bool(passed), worst=worst, results=results, analyses=analyses,
                       tolerances={p: [float(lo), float(hi)] for p, (lo, hi) in design.tolerances.items()},
                       budget=budget, variants=variants, units=_units(design),
                       receivers=[r for r in receivers if any(x["receiver"] == r for x in results)])


def _units(design) -> dict:
    from .units import DIMENSIONS

    dims = getattr(design.structure, "dimensions", {}) or {}
    return {p: DIMENSIONS[dims[p]][1] for p in design.tolerances if p in dims}


__all__ = ["check", "CheckReport", "wilson_interval", "corner_values", "sample_values", "SCHEMA",
           "MAX_CORNERS", "DISTRIBUTIONS", "ASSUMPTIONS", "RESULT_KEYS"]
