"""Tolerance analyses: corners, random sampling, the worst-case search, the Wilson interval, out-of-box values.

corners
    Every combination of the extremes of the ``[tolerances]`` table (2**k
    variants for k toleranced values; values whose tolerance is zero are left
    out).  :func:`budget.check.check` runs them by default when the count
    corners x drivers x edges is at most :data:`DEFAULT_MAX_SIMULATIONS`.
Monte Carlo
    Random variants, each value drawn independently and uniformly inside its
    tolerance interval (``"uniform"``, the default: a tolerance says where a
    value may be, not how likely each value is), or from a normal distribution
    with the interval as +-3 sigma, truncated to the interval (``"normal"``).
    The estimated failure probability is k/n with a Wilson score interval
    (Wilson 1927; :func:`wilson_interval`).
worst-case search
    Differential evolution (Storn & Price 1997, via
    :func:`scipy.optimize.differential_evolution`, vectorised so that each
    generation is one sweep) inside the tolerance box, minimising the lowest
    headroom over every driver, receiver and edge; its starting population
    holds the worst corner, so the search can only match or beat the corners.
    It matters when the response is not monotonic in a value (a stub whose
    length sweeps through a resonance), where the worst case lies inside the
    box, not at a corner.

"Worst" everywhere is the one rule of :mod:`budget.kernels.metrics`
(:func:`~budget.kernels.metrics.worst_along`): a result with a violation
before one without, then the lowest headroom, then the first met.

References
----------
- E. B. Wilson, "Probable inference, the law of succession, and statistical
  inference", JASA 22(158), 1927, 209-212 (docs/references.md G1).
- R. Storn, K. Price, "Differential evolution - a simple and efficient
  heuristic for global optimization over continuous spaces", J. Global
  Optimization 11, 1997, 341-359.
"""
from __future__ import annotations

import math

import numpy as np

from .errors import ArgumentError
from .kernels import metrics as mk
from .model import Design

DISTRIBUTIONS = ("uniform", "normal")
MAX_CORNERS = 4096
# The default check evaluates every tolerance corner when corners x drivers x edges
# is at most this many simulations (a few minutes at most on a 2-core machine).
DEFAULT_MAX_SIMULATIONS = 4096
N_EDGES = 2
# A value is out of the box only beyond this fraction of the interval's magnitude, so that
# "45 ohm" typed for a box computed as 50 ohm - 10 % (45.00000000000001) is not flagged.
BOX_SLACK = 1e-9


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
# the tolerance box

def varied_paths(design: Design) -> list:
    """Dotted paths whose tolerance interval is not a single value, in table order."""
    return [p for p, (lo, hi) in design.tolerances.items() if hi > lo]


def corner_count(design: Design) -> int:
    """Number of corners of the tolerance box, 2**k (1 without toleranced values)."""
    return 2 ** len(varied_paths(design))


def default_corners(design: Design, *, max_corners: int = MAX_CORNERS) -> dict:
    """Whether the default check evaluates every corner: {corners, simulations, limit, run}.

    simulations = corners x drivers x edges; ``run`` is True when the design has
    toleranced values, the corners are at most ``max_corners`` and the
    simulations at most :data:`DEFAULT_MAX_SIMULATIONS`.
    """
    k = len(varied_paths(design))
    n = 2 ** k if k else 0
    sims = n * len(design.drivers) * N_EDGES
    return {"corners": n, "simulations": sims, "limit": DEFAULT_MAX_SIMULATIONS,
            "run": bool(k) and n <= max_corners and sims <= DEFAULT_MAX_SIMULATIONS}


def corner_values(design: Design, *, max_corners: int = MAX_CORNERS, count_only: bool = False):
    """Values of every corner of the tolerance box: ({path: array(2**k)}, paths, codes[2**k, k]).

    codes[i, j] is 0 where value j is at its minimum and 1 at its maximum (corner i's
    bits, value 0 the most significant).  Raises ArgumentError when 2**k exceeds
    ``max_corners``; ``count_only``: only that check, returning the corner count.
    """
    paths = varied_paths(design)
    k = len(paths)
    if k == 0:
        return 0 if count_only else ({}, paths, np.zeros((0, 0), dtype=np.int64))
    if k > 62 or 2 ** k > max_corners:
        raise ArgumentError(
            f"{design.source}: [tolerances] has {k} toleranced values, i.e. 2**{k} = {2 ** k:,} corners, "
            f"more than the limit of {max_corners:,}; use a Monte Carlo analysis (--monte-carlo N) or the "
            "worst-case search (--search) instead, or raise the limit (--max-corners)")
    if count_only:
        return 2 ** k
    codes = (np.arange(2 ** k, dtype=np.int64)[:, None] >> np.arange(k - 1, -1, -1, dtype=np.int64)) & 1
    vals = {p: np.where(codes[:, j] == 0, design.tolerances[p][0], design.tolerances[p][1])
            for j, p in enumerate(paths)}
    return vals, paths, codes


def sample_values(design: Design, n: int, rng: np.random.Generator, distribution: str = "uniform"):
    """n random variants inside the tolerance box: {path: array(n)} (see module docstring)."""
    if distribution not in DISTRIBUTIONS:
        raise ArgumentError(f"distribution must be one of {', '.join(DISTRIBUTIONS)}, got {distribution!r}")
    out = {}
    for p in varied_paths(design):
        lo, hi = design.tolerances[p]
        if distribution == "uniform":
            out[p] = rng.uniform(lo, hi, n)
        else:
            from scipy.stats import truncnorm
            out[p] = truncnorm.rvs(-3.0, 3.0, loc=0.5 * (lo + hi), scale=(hi - lo) / 6.0, size=n,
                                   random_state=rng)
        if design.structure.dimensions.get(p) == "ibis_corner":
            out[p] = np.rint(out[p])    # an IBIS corner is discrete: the nearest of min / typ / max
    return out


def out_of_box(design: Design) -> list:
    """Values of ``design`` outside its tolerance box: [{path, value, min, max}] [SI], table order.

    A measured or overridden value (``Design.with_values``, ``bb_set``) may lie
    outside the interval the design file allows; it is evaluated as given, and
    this list lets reports flag it.  Boundary values are inside (within
    :data:`BOX_SLACK` of the interval's magnitude: rounding is not flagged).
    """
    out = []
    for p, (lo, hi) in design.tolerances.items():
        x = np.asarray(design.params[p], dtype=float)
        slack = BOX_SLACK * max(abs(float(lo)), abs(float(hi)))
        if np.any(x < lo - slack) or np.any(x > hi + slack):
            value = float(x) if x.ndim == 0 else [float(v) for v in x]
            out.append({"path": p, "value": value, "min": float(lo), "max": float(hi)})
    return out


# ---------------------------------------------------------------------------
# the worst result of one analysis

class WorstTracker:
    """Per-(driver, edge, receiver) worst result of one analysis, updated sweep by sweep.

    Also keeps the analysis-level worst variant (the one holding the worst case
    over every driver, edge and receiver) and the values of every variant it names.
    """

    def __init__(self, name: str, shape):
        self.name = name
        self.head = np.full(shape, np.nan)          # NaN: no result yet (or no such case)
        self.metrics = np.full(shape + (mk.N_METRICS,), np.nan)
        self.levels = np.full(shape + (2,), np.nan)
        self.bits = np.zeros(shape, dtype=np.int64)
        self.label = np.empty(shape, dtype=object)
        self.index = np.full(shape, -1, dtype=np.int64)   # variant number within the analysis (ties: lowest)
        self.values: dict[str, dict] = {}
        self.n = 0
        self.failed = 0
        self.worst_label = None                     # analysis-level worst variant
        self.worst_bits = 0
        self.worst_head = math.nan
        self.extremes: dict[str, dict] = {}         # corners: label -> {path: "min" | "max"}

    def _keep(self, label, values, v):
        if label not in self.values:
            self.values[label] = {p: float(a[v]) for p, a in values.items()} if values else {}

    def update(self, res, labels, values) -> np.ndarray:
        """Fold in a SweepResult whose variants are ``labels``; returns its [N] lowest headroom [V]."""
        i = mk.worst_along(res.bits, res.headroom, axis=0)[None]
        take = np.take_along_axis
        bits, head = take(res.bits, i, axis=0)[0], take(res.headroom, i, axis=0)[0]
        better = mk.worse(bits, head, self.bits, self.head)
        if np.any(better):
            self.head = np.where(better, head, self.head)
            self.bits = np.where(better, bits, self.bits)
            self.metrics = np.where(better[..., None], take(res.metrics, i[..., None], axis=0)[0], self.metrics)
            self.levels = np.where(better[..., None], take(res.levels, i[..., None], axis=0)[0], self.levels)
            self.index = np.where(better, i[0] + self.n, self.index)
            for idx in zip(*np.nonzero(better)):
                v = int(i[(0, *idx)])
                self.label[idx] = labels[v]
                self._keep(labels[v], values, v)
        v = res.worst_variant()
        w = res.worst_indices(v)
        if w is not None and (self.worst_label is None or
                              mk.worse(res.bits[(v, *w)], res.headroom[(v, *w)], self.worst_bits,
                                       self.worst_head)):
            self.worst_label = labels[v]
            self.worst_bits, self.worst_head = int(res.bits[(v, *w)]), float(res.headroom[(v, *w)])
            self._keep(labels[v], values, v)
        self.n += res.n_variants
        self.failed += int(np.count_nonzero(~res.passed))
        return res.lowest_headroom


# ---------------------------------------------------------------------------
# worst-case search

def search(design: Design, evaluate, paths, pop: int, seed: int, generations: int, start=None) -> dict:
    """Differential evolution inside the tolerance box (vectorised: one ``evaluate`` call per generation).

    evaluate(values {path: array(S)}) -> [S] lowest headroom [V] of each candidate
    (the objective, minimised); start: values {path: float} of a variant to seed
    the population with (the worst corner).  Returns the settings and outcome.
    """
    from scipy.optimize import differential_evolution
    from scipy.stats import qmc

    k = len(paths)
    lo = np.array([design.tolerances[p][0] for p in paths])
    hi = np.array([design.tolerances[p][1] for p in paths])
    rng = np.random.default_rng(seed)
    init = lo + qmc.LatinHypercube(d=k, rng=rng).random(pop) * (hi - lo)
    nominal = np.clip(np.array([design.params[p] for p in paths], dtype=float), lo, hi)
    seeded = []
    if start is not None:
        init[0] = np.array([start[p] for p in paths])
        seeded.append("worst corner")
    init[1] = nominal
    seeded.append("nominal")

    def objective(x):
        # vectorised: x is [k, S] (one column per candidate); [k] for a single one
        x = np.asarray(x, dtype=float)
        x = (x[:, None] if x.ndim == 1 else x).T
        vals = {p: x[:, j].copy() for j, p in enumerate(paths)}
        for p in vals:
            if design.structure.dimensions.get(p) == "ibis_corner":
                vals[p] = np.rint(vals[p])   # an IBIS corner is discrete: the nearest of min / typ / max
        return evaluate(vals)

    result = differential_evolution(
        objective, list(zip(lo, hi)), init=init, maxiter=generations, tol=0.0, atol=1e-4,
        vectorized=True, updating="deferred", polish=False, rng=seed, mutation=(0.5, 1.0), recombination=0.7)
    return {
        "seed": seed, "method": "differential evolution "
        "(scipy.optimize.differential_evolution, best1bin, vectorised, no polishing)",
        "population": pop, "generations": int(result.nit), "max_generations": generations,
        "stopped": str(result.message), "starting_population": f"{', '.join(seeded)} and a Latin hypercube",
        "objective": "lowest headroom over every driver, receiver and edge [V]",
    }


__all__ = ["wilson_interval", "varied_paths", "corner_count", "default_corners", "corner_values",
           "sample_values", "out_of_box", "WorstTracker", "search", "DISTRIBUTIONS", "MAX_CORNERS",
           "DEFAULT_MAX_SIMULATIONS"]
