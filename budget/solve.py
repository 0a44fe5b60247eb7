"""Direct answers to "what do I change?": the longest stub, the best termination, how many drops.

Each solver tries whole candidate sets through the batch engine
(:func:`budget.candidates.score`: M candidates x the nominal design and every
corner of the tolerance box, one sweep per set; ``nominal=True``: the nominal
design only), then confirms its answer by running :func:`budget.check.check`
on the design with the answer (it must pass) and just beyond it (it must
fail), so the verdict given is the check's own.  Every answer comes with the
margin it achieves (the check's worst headroom [V]), the margin just beyond and
the worst case at the answer.

Searches
--------
longest stub, smallest spacing
    a grid of :data:`GRID` values over the range, then the bracket between the
    last passing and the first failing grid value is cut into
    :data:`REFINE` + 1 parts per batch until it is narrower than the resolution
    (:data:`RESOLUTION` of the range, at least :data:`MIN_RESOLUTION_M`).  The
    answer is the end of the run of passing values that starts at the safe end
    of the range (the shortest stub, the widest spacing): every grid value up to
    it passes.  A response that fails in between and passes again further out
    (a stub resonance) is not reported as passing.
most drops
    the device count is structure, not a value, so each count is its own
    batch (all corners); counts are searched by doubling, then bisection,
    assuming that a bus passing with n devices also passes with fewer.
best termination
    every candidate of every scheme at the nominal design in one batch per
    scheme, then over the whole box in order of nominal score until no
    candidate left can beat the best found (a candidate's worst case over the
    box is never better than its nominal case, so the skipped ones cannot
    win); all batches of a scheme share one time step and window.

These are estimates from the linear model of the check: confirm the answer by
measurement and with the part makers' data; the applicable standards and the
responsible engineer decide.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from . import preferred
from .analyses import varied_paths
from .candidates import Scores, moved, score
from .edges import EDGES
from .errors import ArgumentError
from .model import Design, Segment, Stub, Tap, Termination
from .redesign import rebuilt
from .sweep import plan

SCHEMA = "busbudget.solve/1"
GRID = 16                 # values in the first grid of a 1-D search
REFINE = 7                # interior values per refining batch
RESOLUTION = 1e-3         # of the searched range
MIN_RESOLUTION_M = 1e-4   # 0.1 mm
MAX_DROPS = 64            # most devices the drop search tries
RUNNERS_UP = 6            # candidates listed in the text report of the termination solver
MAX_STEP_BACK = 6         # most confirmations of a 1-D answer the check disagrees with
SERIES = ("E12", "E24", "E48", "E96")
SCHEMES = ("parallel", "thevenin", "rc", "series")
ASSUMPTIONS = (
    "the check's linear model (linear drivers, lumped-loss lines, differential mode only for differential buses)",
    "the answer is an estimate to confirm by measurement and with the part makers' data; the applicable "
    "standards and the responsible engineer decide",
)


@dataclass
class SolveResult:
    """A solver's answer; :meth:`to_json` is the ``busbudget.solve/1`` document."""
    question: str
    design: str
    answer: object
    unit: str
    passes: bool
    margin_at_answer: float | None
    margin_beyond: float | None
    beyond: object
    worst: dict | None
    candidates: list
    analysis: str
    method: str
    notes: list = field(default_factory=list)
    resolution: float | None = None
    beyond_passes: bool | None = None
    beyond_violations: list = field(default_factory=list)

    def to_json(self) -> dict:
        return {"schema": SCHEMA, "question": self.question, "design": self.design, "answer": self.answer,
                "unit": self.unit, "passes": self.passes, "margin_at_answer": self.margin_at_answer,
                "margin_beyond": self.margin_beyond, "beyond": self.beyond, "worst": self.worst,
                "candidates": self.candidates, "analysis": self.analysis, "method": self.method,
                "beyond_passes": self.beyond_passes, "beyond_violations": list(self.beyond_violations),
                "resolution": self.resolution, "notes": list(self.notes), "assumptions": list(ASSUMPTIONS)}

    def text(self) -> str:
        def v(x):
            return "-" if x is None else f"{x:+.3f} V"

        lines = [f"busbudget solve: {self.design}", f"question: {self.question}",
                 f"analysis: {self.analysis}", ""]
        lines.append(f"answer: {_show(self.answer, self.unit)}  ({'passes' if self.passes else 'FAILS: no candidate passes; the best one is shown'})")
        lines.append(f"worst headroom at the answer: {v(self.margin_at_answer)}")
        if self.beyond is not None:
            verdict = "" if self.beyond_passes is None else ("passes, " if self.beyond_passes else "FAILS, ")
            why = f" ({', '.join(self.beyond_violations)})" if self.beyond_violations else ""
            lines.append(f"just beyond ({_show(self.beyond, self.unit)}): {verdict}worst headroom "
                         f"{v(self.margin_beyond)}{why}")
        w = self.worst
        if w:
            lines.append(f"worst case at the answer: {w['receiver']} when {w['driver']} drives, {w['edge']} edge, "
                         f"{w['corner']}: {w['metric']} ({', '.join(w['violations']) or 'no violation'})")
        ranked = [c for c in self.candidates if c.get("over_box")]
        if ranked:
            lines.append("")
            lines.append(f"best candidates (worst headroom over the {'box' if 'corners' in self.analysis else 'design'}):")
            for c in ranked[:RUNNERS_UP]:
                lines.append(f"  {c['label']:<48} {v(c['margin'])}  {'passes' if c['passes'] else 'fails'}")
        lines.append("")
        lines.append(f"method: {self.method}")
        for n in self.notes:
            lines.append(f"note: {n}")
        lines.append("Estimates from a linear model: confirm by measurement and with the part makers' data; the "
                     "applicable standards and the responsible engineer decide.")
        return "\n".join(lines) + "\n"


def _show(x, unit):
    if x is None:
        return "none"
    if unit == "m":
        return f"{x * 1e3:.2f} mm"
    if isinstance(x, dict):
        return x.get("label", str(x))
    if isinstance(x, str):
        return x
    return f"{x} {unit}".strip()


def _analysis(design: Design, nominal: bool) -> str:
    k = 0 if nominal else len(varied_paths(design))
    return "nominal design only" if not k else f"nominal and all {2 ** k} corners of the tolerance box"


def _confirm(design: Design, nominal: bool):
    """The check at one design: (passed, worst headroom [V], worst summary)."""
    from .check import check

    has_box = bool(varied_paths(design))
    rep = check(design, nominal=nominal or not has_box, corners=None if (nominal or not has_box) else True)
    return rep.passed, rep.worst["headroom"], rep.worst


# ---------------------------------------------------------------------------
# 1-D searches: stub length (shorter is safer), spacing (wider is safer)

def _edge_run(passed: np.ndarray, safe_low: bool) -> int:
    """Index of the last grid value in the run of passes that starts at the safe end (-1: none)."""
    order = range(len(passed)) if safe_low else range(len(passed) - 1, -1, -1)
    last = -1
    for i in order:
        if not passed[i]:
            break
        last = i
    return last


def _search_1d(design, make, lo, hi, safe_low, resolution, nominal, progress, extra=None):
    """Threshold of a 1-D value x in [lo, hi]: make(x array) -> (design, candidates); see the module docstring.

    Returns (answer or None, beyond or None, tried [(x, Scores index, Scores)], best x when nothing passes).
    """
    tried = []

    def run(xs):
        d, cand = make(xs)
        s = score(d, cand, nominal=nominal, progress=progress)
        for i, x in enumerate(xs):
            tried.append((float(x), bool(not s.failed[i]), float(s.head[i]), s.worst[i]))
        return s

    xs = np.linspace(lo, hi, GRID)
    if extra is not None and extra < lo:
        xs = np.concatenate([[extra], xs])
    s = run(xs)
    ok = ~s.failed
    if not ok.any():
        return None, None, tried, float(xs[s.best()])
    top = int(np.argmax(np.where(ok, s.key, -np.inf)))     # the passing grid value with the best margin
    if safe_low:      # the run of passes that holds it, followed toward longer values
        k = top
        while k < len(xs) - 1 and ok[k + 1]:
            k += 1
        j = top
        while j > 0 and ok[j - 1]:
            j -= 1
        if j > 0:
            tried.append(("run_start", float(xs[j])))
        if k == len(xs) - 1:
            return float(xs[k]), None, tried, None
        a, b = xs[k], xs[k + 1]
    else:             # the run of passes that holds it, followed toward smaller values
        k = top
        while k > 0 and ok[k - 1]:
            k -= 1
        if k == 0:
            return float(xs[0]), None, tried, None
        a, b = xs[k], xs[k - 1]
    while abs(b - a) > resolution:
        inner = np.linspace(a, b, REFINE + 2)[1:-1]
        s = run(inner)
        ok = ~s.failed
        j = _edge_run(ok, True)            # inner runs from a (passing) toward b (failing)
        a, b = (a if j < 0 else inner[j]), (inner[j + 1] if j + 1 < len(inner) else b)
    return float(a), float(b), tried, None


def _candidates_json(tried, unit_key):
    rows = sorted(tried, key=lambda t: t[0])
    return [{unit_key: x, "passes": p, "margin": h,
             "worst": {"driver": w[0], "edge": w[1], "receiver": w[2], "corner": w[3]}} for x, p, h, w in rows]


def longest_stub(design: Design, *, tap: str | None = None, nominal: bool = False,
                 longest: float | None = None,
                 progress: Callable[[int, int], None] | None = None) -> SolveResult:
    """The longest stub [m] that keeps the bus passing, for one tap or one length for every stubbed tap.

    tap : a tap name (its stub alone changes) or None (every tap that has a
        stub gets the same length).
    nominal : the nominal design only instead of the tolerance box.
    longest : upper end of the searched range [m] (default: the length whose
        delay equals the 10-90 % rise time, at least twice the longest stub now).
    Searched from 0 (excluded) up; see the module docstring for the rule.
    """
    stubbed = [t for t in design.taps if t.stub is not None]
    if tap is not None:
        design.tap(tap)   # unknown tap: ArgumentError listing the taps
        stubbed = [t for t in stubbed if t.name == tap]
        if not stubbed:
            raise ArgumentError(f"--tap {tap}: that tap has no stub (a pin on the bus node); taps with stubs: "
                                + (", ".join(t.name for t in design.taps if t.stub is not None) or "none"))
    if not stubbed:
        raise ArgumentError(f"{design.source}: no tap has a stub; the stub solver changes stub lengths")
    paths = [f"tap.{t.name}.stub.length" for t in stubbed]
    now = max(float(np.max(t.stub.length)) for t in stubbed)
    delay = min(float(design.lines[t.stub.line].delay) for t in stubbed)
    rise = min(float(design.edge.rise), float(design.edge.fall))
    if longest is None:
        longest = max(rise / delay, 2.0 * now)
    elif not (isinstance(longest, (int, float)) and math.isfinite(longest) and longest > 0):
        raise ArgumentError(f"longest must be a positive length in metres, got {longest!r}")
    lo = longest / GRID
    shortest = min(lo, 0.25 * now)      # a quarter of today's stub is tried too
    resolution = max(MIN_RESOLUTION_M, RESOLUTION * longest)

    def make(xs):
        return design, {p: np.asarray(xs, dtype=float) for p in paths}

    ans, beyond, tried, best = _search_1d(design, make, lo, longest, True, resolution, nominal, progress,
                                          extra=shortest)
    which = f"tap {tap}'s stub" if tap else f"one length for every stub ({len(paths)} taps)"
    question = f"longest stub that keeps the bus passing: {which}"
    method = (f"grid of {shortest * 1e3:.2f} mm and {GRID} lengths from {lo * 1e3:.2f} to {longest * 1e3:.2f} mm, "
              f"then brackets cut in {REFINE + 1} per batch down to {resolution * 1e3:.2f} mm; the answer ends the "
              "run of passing grid lengths that holds the best margin; the answer and the length just beyond "
              "confirmed by the check")
    res = _finish_1d(design, paths, ans, beyond, best, tried, nominal, question, method, "length",
                     lambda x: {p: x for p in paths})
    res.resolution = resolution
    return res


def _finish_1d(design, paths, ans, beyond, best, tried, nominal, question, method, key, values_at, make=None):
    """Confirm a 1-D answer with the check (stepping back if the check disagrees) and build the result."""
    notes = []
    for t in [t for t in tried if t[0] == "run_start"]:
        tried.remove(t)
        notes.append(f"the passing run starts at {t[1]:.6g} m: shorter values on the grid fail (the response is "
                     "not monotonic)")
    at = (lambda x: make(x)) if make else (lambda x: moved(design, values_at(x)))
    if ans is None:
        d = at(best)
        ok, head, worst = _confirm(d, nominal)
        return SolveResult(question, design.bus.name, best, "m", bool(ok), head, None, None, worst,
                           _candidates_json(tried, key), _analysis(d, nominal), method,
                           notes + ["no value in the range passes; the best one tried is shown"])
    # the batch shares one time step over all candidates; the check chooses its own: confirm, and where the
    # check disagrees step back to the next passing candidate on the safe side (beyond: the one it failed)
    side = 1.0 if beyond is None else math.copysign(1.0, ans - beyond)    # +1: safe side is above
    back = sorted((x for x, p, _, _ in tried if p and (x - ans) * side > 0), key=lambda x: abs(x - ans))
    for _ in range(MAX_STEP_BACK):
        d = at(ans)
        ok, head, worst = _confirm(d, nominal)
        if ok or beyond is None or not back:
            break
        notes.append(f"the check fails at {ans:.6g} m where the batch (one time step for every candidate) "
                     "passed it: stepped back to the next passing candidate")
        beyond, ans = ans, back.pop(0)
    m_beyond = ok_b = None
    viol = []
    if beyond is not None:
        ok_b, m_beyond, w_b = _confirm(at(beyond), nominal)
        viol = list(w_b["violations"])
        if ok_b:
            notes.append("the check passes just beyond the answer too (the batch's shared time step failed it)")
    else:
        notes.append("passes over the whole searched range: the answer is the range's end")
    return SolveResult(question, design.bus.name, ans, "m", bool(ok), head, m_beyond, beyond, worst,
                       _candidates_json(tried, key), _analysis(d, nominal), method, notes,
                       beyond_passes=ok_b, beyond_violations=viol)


# ---------------------------------------------------------------------------
# terminations

def _trunk_ends(design: Design) -> list:
    """Bus nodes with exactly one trunk segment (a chain's two ends), in node order."""
    deg = {}
    for s in design.segments:
        deg[s.a] = deg.get(s.a, 0) + 1
        deg[s.b] = deg.get(s.b, 0) + 1
    return [n for n in design.nodes if deg.get(n) == 1]


def _places(design: Design):
    """(nodes for an end termination, where they came from)."""
    nodes = list(dict.fromkeys(t.node for t in design.terminations if t.type != "series"))
    if nodes:
        return nodes, "the nodes of the design's own terminations"
    ends = _trunk_ends(design)
    if not ends:
        raise ArgumentError(f"{design.source}: the design has no end termination and its trunk has no ends "
                            "(a node with one segment); nowhere to place a termination")
    return ends, "the trunk ends (the design has no termination of its own there)"


def _z0_at(design: Design, node: str) -> float:
    zs = [float(np.min(design.lines[s.line].z0)) for s in design.segments if node in (s.a, s.b)]
    return min(zs) if zs else float(np.min(next(iter(design.lines.values())).z0))


def _rails(design: Design):
    drv = [design.parts[design.tap(t).part] for t in design.drivers]
    hi = max(float(p.v_high) for p in drv)
    lo = min(float(p.v_low) for p in drv)
    return lo, hi


def _round_trip(design: Design) -> float:
    return 2.0 * sum(float(s.length) * float(design.lines[s.line].delay) for s in design.segments)


def _scheme_design(design: Design, scheme: str, places, init: dict):
    """The design with the scheme in place of the design's terminations of that kind; its value paths."""
    keep = [t for t in design.terminations if (t.type == "series") != (scheme == "series")]
    new = []
    if scheme == "series":
        for tap in design.drivers:
            new.append(Termination("series", tap=tap, r=init["r"]))
    else:
        for node in places:
            if scheme == "parallel":
                new.append(Termination("parallel", node=node, r=init["r"], v=init["v"]))
            elif scheme == "thevenin":
                new.append(Termination("thevenin", node=node, r_up=init["r_up"], r_down=init["r_down"],
                                       v_up=init["v_up"]))
            else:
                new.append(Termination("rc", node=node, r=init["r"], c=init["c"]))
    terms = keep + new
    old_idx = [t.index for t in keep]
    # tolerances: keep those of kept terminations (re-indexed) and of everything else; drop the replaced ones
    tol, dropped = {}, []
    for p, b in design.tolerances.items():
        if p.startswith("termination."):
            i = int(p.split(".")[1])
            if i in old_idx:
                tol[f"termination.{old_idx.index(i)}.{p.split('.', 2)[2]}"] = b
            else:
                dropped.append(p)
        else:
            tol[p] = b
    d = rebuilt(design, terminations=terms, tolerances=tol)
    first = len(keep)
    return d, list(range(first, len(terms))), dropped


def _scheme_candidates(design, scheme, series, places):
    """(list of value dicts, fixed values dict) of one scheme, from the preferred series."""
    z0 = min(_z0_at(design, n) for n in places) if scheme != "series" else _z0_at(design, places[0])
    lo_v, hi_v = _rails(design)
    old = {t.type: t for t in design.terminations}
    if scheme == "parallel":
        v = float(old["parallel"].v) if "parallel" in old else 0.5 * (lo_v + hi_v)
        return [{"r": r, "v": v} for r in preferred.values_between(z0 / 3, 3 * z0, series)], \
            f"r from {series} between Z0/3 and 3 Z0 (Z0 = {z0:g} ohm), to the rail v = {v:g} V"
    if scheme == "thevenin":
        v_up = float(old["thevenin"].v_up) if "thevenin" in old else hi_v
        rs = preferred.values_between(z0 / 2, 6 * z0, series)
        pairs = [{"r_up": a, "r_down": b, "v_up": v_up} for a, b in itertools.product(rs, rs)
                 if z0 / 3 <= a * b / (a + b) <= 3 * z0]
        return pairs, (f"r_up, r_down from {series} between Z0/2 and 6 Z0 with r_up || r_down between Z0/3 "
                       f"and 3 Z0 (Z0 = {z0:g} ohm), r_up to v_up = {v_up:g} V")
    if scheme == "rc":
        t_rt = max(_round_trip(design), float(design.edge.rise))
        rs = preferred.values_between(z0 / 2, 2 * z0, series)
        out = []
        for r in rs:
            for c in preferred.values_between(t_rt / r, 4 * t_rt / r, series):
                out.append({"r": r, "c": c})
        return out, (f"r from {series} between Z0/2 and 2 Z0 (Z0 = {z0:g} ohm), c from {series} with r c "
                     f"between 1 and 4 trunk round trips ({t_rt * 1e9:.3g} ns)")
    # series at the drivers
    return [{"r": r} for r in preferred.values_between(1.0, z0, series)], \
        f"r from {series} between 1 ohm and Z0 = {z0:g} ohm at every driving tap"


def _label(scheme, vals):
    def o(x):
        return f"{x:g} ohm"
    if scheme == "parallel":
        return f"parallel {o(vals['r'])} to {vals['v']:g} V"
    if scheme == "thevenin":
        return f"thevenin {o(vals['r_up'])} up (to {vals['v_up']:g} V) / {o(vals['r_down'])} down"
    if scheme == "rc":
        return f"rc {o(vals['r'])} + {vals['c'] * 1e12:g} pF"
    return f"series {o(vals['r'])} at each driver"


BATCH = 8   # candidates per box batch of the termination search


def best_termination(design: Design, *, series: str = "E24", schemes=SCHEMES, nominal: bool = False,
                     progress: Callable[[int, int], None] | None = None) -> SolveResult:
    """The termination (scheme and preferred values) that maximises the worst-case headroom [V].

    series : "E12", "E24", "E48" or "E96" (IEC 60063, :mod:`budget.preferred`); every resistor
        and capacitor tried is a value of it.
    schemes : subset of ("parallel", "thevenin", "rc", "series").  End schemes go where the design
        has its own (non-series) terminations, else at the trunk ends; they replace those, with one
        value for every place.  "series" puts one resistor at every driving tap, replacing the
        design's series terminations and keeping its end terminations.
    The new parts carry no tolerance of their own (the design's tolerances of the terminations they
    replace are dropped, and said so): add one to [tolerances] and run the check.
    """
    if not isinstance(series, str) or series.upper() not in SERIES:
        raise ArgumentError(f"series (--series) must be one of {', '.join(SERIES)}, got {series!r}")
    series = series.upper()
    schemes = tuple(schemes)
    bad = [s for s in schemes if s not in SCHEMES]
    if bad or not schemes:
        raise ArgumentError(f"schemes must be some of {', '.join(SCHEMES)}, got {list(schemes)!r}")
    places, where = _places(design)
    tried, notes, methods = [], [], []
    best = None     # (key, scheme, vals, head, worst, scheme design)
    for scheme in schemes:
        cands, how = _scheme_candidates(design, scheme, series, places)
        if not cands:
            notes.append(f"{scheme}: no {series} value in the range ({how})")
            continue
        methods.append(f"{scheme}: {how}")
        d0, idx, dropped = _scheme_design(design, scheme, places, cands[0])
        for p in dropped:
            if not any(p in n for n in notes):
                notes.append(f"tolerance {p} dropped: that termination is replaced (the new parts carry no "
                             "tolerance; add one to [tolerances] and run the check)")
        arrays = {}
        for i in idx:
            for key in cands[0]:
                arrays[f"termination.{i}.{key}"] = np.array([c[key] for c in cands], dtype=float)
        # each candidate with the time step and window the check chooses for it (an RC's window follows
        # its r c), so a candidate's margin here is the check's; candidates sharing them share a batch
        keys = [_plan_key(_apply(d0, idx, c)) for c in cands]
        groups = {}
        for j, k in enumerate(keys):
            groups.setdefault(k, []).append(j)

        def run(js, nom):
            """score of candidates js (grouped by step and window), in the order of js."""
            head, failed, worst = {}, {}, {}
            for k in dict.fromkeys(keys[j] for j in js):
                sub = [j for j in js if keys[j] == k]
                sc = score(d0, {p: a[sub] for p, a in arrays.items()}, nominal=nom, dt=dict(k[0]),
                           t_stop=dict(k[1]), progress=progress)
                for g, j in enumerate(sub):
                    head[j], failed[j], worst[j] = float(sc.head[g]), bool(sc.failed[g]), sc.worst[g]
            return head, failed, worst

        sh, sf, _ = run(list(range(len(cands))), True)
        skey = [_key(sh[j], sf[j]) for j in range(len(cands))]
        order = sorted(range(len(cands)), key=lambda j: skey[j], reverse=True)   # stable
        done = set()
        for start in range(0, len(order), BATCH):
            group = [int(j) for j in order[start:start + BATCH]]
            if best is not None and skey[group[0]] <= best[0]:
                break
            bh, bf, bw = run(group, nominal)
            for j in group:
                done.add(j)
                k = _key(bh[j], bf[j])
                tried.append({"scheme": scheme, "values": cands[j], "label": _label(scheme, cands[j]),
                              "passes": not bf[j], "margin": bh[j], "nominal_margin": sh[j],
                              "nominal_passes": not sf[j], "over_box": True,
                              "worst": dict(zip(("driver", "edge", "receiver", "corner"), bw[j])), "_key": k})
                if best is None or k > best[0]:
                    best = (k, scheme, cands[j], bh[j], bw[j], d0, idx)
        for j in range(len(cands)):
            if j not in done:
                tried.append({"scheme": scheme, "values": cands[j], "label": _label(scheme, cands[j]),
                              "passes": None, "margin": None, "nominal_margin": sh[j],
                              "nominal_passes": not sf[j], "over_box": False, "worst": None, "_key": None})
    if best is None:
        raise ArgumentError("no termination candidate could be formed (see the notes)")
    tried.sort(key=lambda c: c["_key"] if c["over_box"] else (-1, -math.inf), reverse=True)
    for c in tried:
        c.pop("_key")
    _, scheme, vals, head, _, d0, idx = best
    final = _apply(d0, idx, vals)
    ok, head_c, worst = _confirm(final, nominal)
    runner = next((c for c in tried[1:] if c["over_box"]), None)
    answer = {"scheme": scheme, "values": vals, "label": _label(scheme, vals),
              "places": (list(design.drivers) if scheme == "series" else places),
              "where": ("every driving tap" if scheme == "series" else where)}
    skipped = sum(1 for c in tried if not c["over_box"])
    method = (f"values from {series}; " + "; ".join(methods) + f". Every candidate at the nominal design, then over "
              f"the box in order of nominal margin until none left could beat the best ({skipped} skipped: their "
              "nominal margin is already below the best worst-case margin)")
    return SolveResult("best termination: scheme and preferred values maximising the worst-case margin",
                       design.bus.name, answer, "ohm", bool(ok), head_c,
                       None if runner is None else runner["margin"],
                       None if runner is None else runner["label"], worst, tried, _analysis(final, nominal),
                       method, notes, beyond_passes=None if runner is None else runner["passes"])


def _key(head: float, failed: bool) -> tuple:
    """Sort key of a candidate's worst case, higher is better: any violation first, then the headroom."""
    return (0 if failed else 1, head)


def _plan_key(d: Design):
    _, dts, tss = plan(d, {}, EDGES)
    return tuple(sorted(dts.items())), tuple(sorted(tss.items()))


def _apply(d0: Design, idx, vals) -> Design:
    return d0.with_values({f"termination.{i}.{k}": float(v) for i in idx for k, v in vals.items()})


# ---------------------------------------------------------------------------
# drops along the trunk

def _chain(design: Design):
    """The trunk as an ordered chain of nodes (refused if it branches)."""
    ends = _trunk_ends(design)
    adj = {}
    for s in design.segments:
        adj.setdefault(s.a, []).append(s)
        adj.setdefault(s.b, []).append(s)
    if len(ends) != 2 or any(len(v) > 2 for v in adj.values()):
        raise ArgumentError(f"{design.source}: the drop solver needs a trunk that is one chain of segments "
                            "(two ends, no branches)")
    order, prev, node = [ends[0]], None, ends[0]
    while len(order) <= len(design.segments):
        seg = next(s for s in adj[node] if s is not prev)
        node = seg.b if seg.a == node else seg.a
        order.append(node)
        prev = seg
        if node == ends[1]:
            break
    return order


def drops_design(design: Design, count: int, spacing: float) -> Design:
    """The design rebuilt with ``count`` devices evenly ``spacing`` [m] apart along its trunk.

    The trunk becomes count - 1 segments of the first segment's line type,
    one device on each of its count nodes: the design's taps in trunk order,
    then copies of its receiving taps in trunk order, cycling (same part and
    stub; "MEM1_2" is MEM1's second copy).  Fewer devices than the design has:
    receivers are left out from the far end, taps that only drive stay.  End
    terminations move to the new ends,
    series terminations go with every copy of their tap.  Tolerances of parts,
    lines, the edge and end terminations are kept; those of single taps and
    segments are dropped.
    """
    order = _chain(design)
    if len(design.taps) and any(t.node not in order for t in design.taps):
        raise ArgumentError(f"{design.source}: every tap must sit on the trunk for the drop solver")
    line = design.segments[0].line
    pos = {n: i for i, n in enumerate(order)}
    base = sorted(design.taps, key=lambda t: pos[t.node])
    rcv = [t for t in base if design.parts[t.part].can_receive]
    if not rcv:
        raise ArgumentError(f"{design.source}: no tap can receive; the drop solver adds copies of receivers")
    if count >= len(base):
        chosen = base + [rcv[i % len(rcv)] for i in range(count - len(base))]
    else:   # fewer devices: drop receivers from the far end of the trunk, keep every tap that only drives
        only_drive = [t for t in base if not design.parts[t.part].can_receive]
        keep = set(id(t) for t in only_drive) | set(id(t) for t in rcv[:max(0, count - len(only_drive))])
        chosen = [t for t in base if id(t) in keep][:count]
    nodes = [f"d{i + 1}" for i in range(count)]
    seen = {}
    taps, names = [], []
    for i, t in enumerate(chosen):
        seen[t.name] = seen.get(t.name, 0) + 1
        name = t.name if seen[t.name] == 1 else f"{t.name}_{seen[t.name]}"
        stub = None if t.stub is None else Stub(t.stub.line, float(np.min(t.stub.length)))
        taps.append(Tap(name, nodes[i], t.part, stub))
        names.append((t.name, name))
    segs = [Segment(nodes[i], nodes[i + 1], line, spacing) for i in range(count - 1)]
    end_map = {order[0]: nodes[0], order[-1]: nodes[-1]}
    terms, keep_idx = [], []
    for t in design.terminations:
        if t.type == "series":
            for orig, name in names:
                if orig == t.tap:
                    terms.append(Termination("series", tap=name, r=t.r))
                    keep_idx.append(None)
        elif t.node in end_map:
            terms.append(Termination(t.type, node=end_map[t.node], r=t.r, v=t.v, c=t.c, r_up=t.r_up,
                                     r_down=t.r_down, v_up=t.v_up))
            keep_idx.append(t.index)
        else:
            raise ArgumentError(f"{design.source}: termination #{t.index} sits inside the trunk; the drop solver "
                                "only moves end terminations")
    tol = {}
    for p, b in design.tolerances.items():
        head = p.split(".")[0]
        if head in ("parts", "lines", "edge"):
            tol[p] = b
        elif head == "termination" and int(p.split(".")[1]) in keep_idx:
            tol[f"termination.{keep_idx.index(int(p.split('.')[1]))}.{p.split('.', 2)[2]}"] = b
    return rebuilt(design, taps=taps, segments=segs, terminations=terms, tolerances=tol)


def _check_spacing(x, name):
    if isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x) or x <= 0:
        raise ArgumentError(f"{name} must be a positive length in metres, got {x!r}")


def most_drops(design: Design, spacing: float, *, nominal: bool = False,
               progress: Callable[[int, int], None] | None = None) -> SolveResult:
    """The most devices [count] the trunk can carry ``spacing`` [m] apart (see :func:`drops_design`)."""
    _check_spacing(spacing, "spacing (--spacing)")
    tried = {}

    def passes(n):
        if n not in tried:
            d = drops_design(design, n, spacing)
            s = score(d, {}, nominal=nominal, progress=progress)
            tried[n] = (bool(not s.failed[0]), float(s.head[0]), s.worst[0])
        return tried[n][0]

    lo = 2
    if not passes(lo):
        ans = None
    else:
        hi = max(lo + 1, len(design.taps))
        while hi <= MAX_DROPS and passes(hi):
            lo, hi = hi, 2 * hi
        hi = min(hi, MAX_DROPS + 1)
        while hi - lo > 1:
            mid = (lo + hi) // 2
            lo, hi = (mid, hi) if passes(mid) else (lo, mid)
        ans = lo
    question = f"most devices the trunk carries at {spacing * 1e3:g} mm spacing"
    method = ("the design's taps, then copies of its receiving taps, in trunk order, evenly spaced, end terminations at "
              "the new ends; counts searched by doubling then bisection (one batch of all corners per count), "
              "assuming fewer devices never fail where more pass; the answer and one more confirmed by the check")
    cands = [{"count": n, "passes": p, "margin": h, "worst": dict(zip(("driver", "edge", "receiver", "corner"), w))}
             for n, (p, h, w) in sorted(tried.items())]
    notes = []
    if ans is None:
        ok, head, worst = _confirm(drops_design(design, 2, spacing), nominal)
        return SolveResult(question, design.bus.name, 2, "devices", False, head, None, None, worst, cands,
                           _analysis(design, nominal), method, ["even two devices fail at this spacing"])
    d = drops_design(design, ans, spacing)
    ok, head, worst = _confirm(d, nominal)
    m_beyond = beyond = ok_b = None
    viol = []
    if ans < MAX_DROPS:
        beyond = ans + 1
        ok_b, m_beyond, w_b = _confirm(drops_design(design, beyond, spacing), nominal)
        viol = list(w_b["violations"])
    else:
        notes.append(f"passes up to the search's limit of {MAX_DROPS} devices")
    return SolveResult(question, design.bus.name, ans, "devices", bool(ok), head, m_beyond, beyond, worst, cands,
                       _analysis(d, nominal), method, notes, beyond_passes=ok_b, beyond_violations=viol)


def smallest_spacing(design: Design, count: int, *, nominal: bool = False, widest: float | None = None,
                     progress: Callable[[int, int], None] | None = None) -> SolveResult:
    """The smallest even spacing [m] at which ``count`` devices pass (see :func:`drops_design`)."""
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or not 2 <= count <= MAX_DROPS:
        raise ArgumentError(f"count (--count) must be a whole number of devices from 2 to {MAX_DROPS}, got {count!r}")
    count = int(count)
    now = sum(float(np.min(s.length)) for s in design.segments) / len(design.segments)
    if widest is None:
        widest = 2.0 * now
    _check_spacing(widest, "widest")
    # the search range must hold the answer: widest is the default's upper end [m]
    base = drops_design(design, count, widest)
    paths = [f"segment.{i}.length" for i in range(count - 1)]
    resolution = max(MIN_RESOLUTION_M, RESOLUTION * widest)

    def make(xs):
        return base, {p: np.asarray(xs, dtype=float) for p in paths}

    lo = widest / GRID
    ans, beyond, tried, best = _search_1d(base, make, lo, widest, False, resolution, nominal, progress)
    question = f"smallest spacing at which {count} devices pass"
    method = (f"grid of {GRID} spacings from {lo * 1e3:.2f} to {widest * 1e3:.2f} mm, brackets cut in {REFINE + 1} "
              f"per batch down to {resolution * 1e3:.2f} mm; every grid spacing from the answer up to the best one passes; the design's "
              "taps, then copies of its receiving taps, in trunk order; the answer and just below confirmed by the check")
    res = _finish_1d(base, paths, ans, beyond, best, tried, nominal, question, method, "spacing",
                     lambda x: {p: x for p in paths})
    res.resolution = resolution
    return res


__all__ = ["SolveResult", "SCHEMA", "SERIES", "SCHEMES", "longest_stub", "best_termination", "most_drops",
           "smallest_spacing", "drops_design"]
