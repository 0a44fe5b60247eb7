"""Margin anatomy: where a receiver's noise margin goes, and what to change when the DC level alone fails.

The margin of one (driver, receiver, edge) result is the kernel's
(:func:`budget.kernels.metrics.edge_metrics`, docs/metrics.md); for a rising
edge

    margin = min(held, V_hi) - VIH - allocations,

``held`` being the lowest level in the ringback window (or, for an edge that
never becomes valid, its highest level).  It splits exactly into three parts:

=================  =================================================  ========
part               rising edge (falling edge mirrored)                sign
=================  =================================================  ========
``dc``             V_hi - VIH: the settled level at the pin (driver   any
                   strength against the termination and the supply,
                   from the DC solve) against the threshold
``reflection``     min(held, V_hi) - V_hi: how far ringback (or an    <= 0
                   edge that never arrives) pulls the edge below its
                   settled level
``allocations``    minus the sum of the ``[budget]`` allocations at   <= 0
                   this pin (volts, and fractions of its swing)
=================  =================================================  ========

so that ``dc + reflection + allocations == margin`` to round-off.  The parts
are built from the result's own kernel outputs -- the DC levels, the ringback
(held = ringback + VIH), the overshoot for a never-valid edge (held = v_peak)
-- never from a second definition of the margin; the sum is a check, tested
on every bundled and test design.

A result whose ``dc + allocations`` is already below the required minimum
margin fails on its DC level alone: no stub length, line impedance or edge
rate can fix it.  :func:`dc_remedies` then answers from the DC solve (the same
engine, a batch of variants in one sweep) how strong the driver must be, how
weak the termination may be, and how far the level must rise.

These are estimates of a linear model: confirm by measurement and with the
part makers' data.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

from .errors import ArgumentError, DesignError
from .metrics import allocation_terms

#: names of the parts, in the order they add up
PARTS = ("dc", "reflection", "allocations")

# scale factors tried by dc_remedies: termination resistances up to 100x, driver resistance down to 1/100
_SCALE_SPAN = 100.0
_COARSE = 41
_FINE = 41


@dataclass(frozen=True)
class MarginAnatomy:
    """The margin of one result split into its parts; SI units (V).

    driver, receiver, edge, corner: the result; margin: its margin (the
    kernel's); settled: the DC level the edge ends at (v_hi rising, v_lo
    falling); threshold: VIH (rising) or VIL (falling); held: the lowest
    level in the ringback window (rising; falling: the highest), or for an
    edge that never becomes valid its furthest level; dc, reflection,
    allocations: the parts (see the module docstring), dc + reflection +
    allocations == margin; allocation_terms: [(name, volts)] each allocation
    at this pin (positive amounts); min_margin: the required margin;
    limited_by: "dc" (fails on the settled level alone), "reflection" (the
    settled level would pass; the edge's excursion costs the margin) or None
    (passes); largest_loss: "reflection" or "allocations", whichever takes
    more; clean_margin: dc + allocations, the margin an edge without
    reflections would keep; other_violations: the result's violations other
    than the margin (an absolute rating, a non-monotonic edge...);
    dc_remedies: see :func:`dc_remedies` (only for a DC-limited result).
    """
    driver: str
    receiver: str
    edge: str
    corner: str
    margin: float
    settled: float
    threshold: float
    held: float
    dc: float
    reflection: float
    allocations: float
    allocation_terms: tuple
    min_margin: float
    limited_by: str | None
    largest_loss: str
    clean_margin: float
    other_violations: tuple = ()
    dc_remedies: dict | None = field(default=None)

    @property
    def dc_only(self) -> bool:
        """True when the settled level alone, after the allocations, misses the required margin."""
        return self.limited_by == "dc"

    def total(self) -> float:
        """dc + reflection + allocations [V] (equals :attr:`margin` to round-off)."""
        return self.dc + self.reflection + self.allocations

    def to_json(self) -> dict:
        out = asdict(self)
        out["allocation_terms"] = [{"name": n, "value": v} for n, v in self.allocation_terms]
        out["dc_only"] = self.dc_only
        out["other_violations"] = list(self.other_violations)
        out["summary"] = self.summary()
        if out["dc_remedies"] is None:
            del out["dc_remedies"]
        return out

    def summary(self) -> str:
        """One line in words: which part limits the margin."""
        rising = self.edge == "rise"
        lvl, th = ("v_hi", "VIH") if rising else ("v_lo", "VIL")
        if self.limited_by == "dc":
            return (f"fails on the DC level alone: the settled {lvl} {self.settled:.3f} V leaves {self.dc:+.3f} V "
                    f"against {th} {self.threshold:.3f} V, {self.clean_margin:+.3f} V after the allocations "
                    f"(required >= {self.min_margin:g} V); stub lengths and line impedances cannot fix it -- "
                    "change the driver strength, the termination or the supply")
        if self.limited_by == "reflection":
            return (f"limited by reflections: the settled level alone would keep {self.clean_margin:+.3f} V after "
                    f"the allocations; the edge's excursion costs {-self.reflection:.3f} V")
        if self.other_violations:
            return (f"the margin itself passes ({self.margin:+.3f} V); this case fails on: "
                    f"{', '.join(self.other_violations)}")
        return (f"passes; the largest loss is the {'reflection excursion' if self.largest_loss == 'reflection' else 'allocations'}"
                f" ({-min(self.reflection, self.allocations):.3f} V)")


def _variant_value(design, values, path, default):
    x = values.get(path) if values else None
    if x is None:
        x = default
    return None if x is None else float(x)


def anatomy(design, row: dict, values: dict | None = None) -> MarginAnatomy:
    """The margin anatomy of one check result row (:func:`budget.report.result_row`).

    design: the checked design; row: a result (its v_lo, v_hi [V], ringback,
    overshoot/undershoot [V] and margin, from the kernel); values: the row's
    variant values {path: SI} (``CheckReport.variants[label]["values"]``;
    None or empty: the nominal design).
    """
    rising = row["edge"] == "rise"
    part = design.parts[design.tap(row["receiver"]).part]
    t = f"parts.{part.name}"
    vih = _variant_value(design, values, f"{t}.vih", part.vih)
    vil = _variant_value(design, values, f"{t}.vil", part.vil)
    v_lo, v_hi = float(row["v_lo"]), float(row["v_hi"])
    margin = row["margin_high"] if rising else row["margin_low"]
    if margin is None:
        raise ArgumentError(f"result {row['driver']} -> {row['receiver']} {row['edge']} has no margin")
    # the allocations exactly as the kernel takes them (budget.kernels.evaluate): volts + fraction * |swing|
    budget = design.noise_budget
    swing = abs(v_hi - v_lo)
    alloc_v, alloc_f = allocation_terms(budget)
    alloc = alloc_v + alloc_f * swing
    terms = tuple((name, float(v) if unit == "V" else float(v) * swing) for name, (v, unit) in budget.allocations.items())
    # mirrored for a falling edge, as the kernel measures it (x = -v)
    if rising:
        settled, threshold, dc = v_hi, vih, v_hi - vih
    else:
        settled, threshold, dc = v_lo, vil, vil - v_lo
    if row["ringback"] is not None:
        # ringback = held - threshold (in the edge's direction), so held - settled = ringback - dc
        excursion = row["ringback"] - dc
    else:
        # never valid: held is the furthest level, v_peak (rising) or v_trough (falling)
        excursion = row["overshoot"] if rising else row["undershoot"]
    reflection = min(excursion, 0.0)
    held = settled + excursion if rising else settled - excursion
    min_margin = float(budget.min_margin)
    clean = dc - alloc
    if clean < min_margin:
        limited = "dc"
    elif margin < min_margin:
        limited = "reflection"
    else:
        limited = None
    largest = "reflection" if reflection < -alloc else "allocations"
    others = tuple(v for v in row["violations"] if v != "margin below minimum")
    return MarginAnatomy(driver=row["driver"], receiver=row["receiver"], edge=row["edge"], corner=row["corner"],
                         margin=float(margin), settled=settled, threshold=threshold, held=held, dc=dc,
                         reflection=reflection, allocations=-alloc, allocation_terms=terms,
                         min_margin=min_margin, limited_by=limited, largest_loss=largest, clean_margin=clean,
                         other_violations=others)


# ---------------------------------------------------------------------------
# what to change when the DC level fails

def _clean_margin_of(design, driver, receiver, edge, values, n):
    """dc + allocations [V] at ``receiver`` for each of n variants (values: path -> array), from the DC solve."""
    from .sweep import sweep

    res = sweep(design, values, drivers=[driver], edges=[edge])
    r = res.receivers.index(receiver)
    v_lo, v_hi = res.levels[:, 0, 0, r, 0], res.levels[:, 0, 0, r, 1]
    part = design.parts[design.tap(receiver).part]
    alloc_v, alloc_f = allocation_terms(design.noise_budget)
    alloc = alloc_v + alloc_f * np.abs(v_hi - v_lo)
    dc = v_hi - float(part.vih) if edge == "rise" else float(part.vil) - v_lo
    return dc - alloc, (v_hi if edge == "rise" else v_lo)


def _solve_scale(design, driver, receiver, edge, paths, base, up: bool):
    """Smallest change of scale s (s >= 1 if up, else s <= 1) of ``paths`` that makes dc + allocations reach
    min_margin: two batched sweeps (a coarse log grid, then a fine grid inside the bracketing step).
    Returns (scale, settled level [V] there) on the passing side, or (None, the best level reached) if no
    scale within 1/100..100 reaches it."""
    need = float(design.noise_budget.min_margin)
    span = _SCALE_SPAN if up else 1.0 / _SCALE_SPAN
    grid = np.geomspace(1.0, span, _COARSE)

    def run(scales):
        vals = {p: base[p] * scales for p in paths}
        return _clean_margin_of(design, driver, receiver, edge, vals, scales.size)

    clean, level = run(grid)
    ok = np.flatnonzero(clean >= need)
    if ok.size == 0:
        best = int(np.argmax(clean))
        return None, float(level[best])
    k = int(ok[0])
    if k == 0:
        return 1.0, float(level[0])
    fine = np.geomspace(grid[k - 1], grid[k], _FINE)
    clean_f, level_f = run(fine)
    j = int(np.flatnonzero(clean_f >= need)[0]) if np.any(clean_f >= need) else _FINE - 1
    return float(fine[j]), float(level_f[j])


def dc_remedies(design, a: MarginAnatomy, values: dict | None = None) -> dict:
    """What makes a DC-limited result's settled level reach the required margin (the DC solve, batched).

    design: the checked design; a: the result's anatomy (``a.limited_by == "dc"``);
    values: the result's variant values {path: SI}.  Returns a JSON-ready dict:
    ``shortfall`` [V] (how far dc + allocations is below min_margin: the level
    must move by about this much), ``driver`` {part, key, value, needed} [ohm]
    (the driving part's r_high on a rising edge, r_low on a falling one, at most
    ``needed``; null when no value down to 1/100 of it is enough),
    ``termination`` {scale, needed: [{termination, key, value, needed}]} [ohm]
    (every parallel and Thevenin resistor scaled together by at least ``scale``;
    absent when the design has none; needed null when 100x is not enough), and
    ``summary`` (one line).  Each answer changes one thing; combined changes
    need less of each.
    """
    if a.limited_by != "dc":
        raise ArgumentError("dc_remedies() is for a result that fails on its DC level alone")
    vdesign = design.with_values(values) if values else design
    P = vdesign.params
    rising = a.edge == "rise"
    out: dict = {"shortfall": a.min_margin - a.clean_margin}
    words = []

    dpart = design.parts[design.tap(a.driver).part].name
    key = "r_high" if rising else "r_low"
    path = f"parts.{dpart}.{key}"
    base = {path: float(P[path])}
    try:
        scale, _ = _solve_scale(vdesign, a.driver, a.receiver, a.edge, [path], base, up=False)
    except DesignError:
        scale = None
    needed = None if scale is None else base[path] * scale
    out["driver"] = {"part": dpart, "key": key, "value": base[path], "needed": needed}
    if needed is not None:
        words.append(f"a stronger driver ({dpart} {key} at most {needed:.3g} ohm, now {base[path]:.3g} ohm)")
    else:
        words.append(f"no {dpart} {key} down to 1/100 of its value is enough")

    term_paths = []
    for i, tm in enumerate(vdesign.terminations):
        if tm.type == "parallel":
            term_paths.append((i, "r"))
        elif tm.type == "thevenin":
            term_paths += [(i, "r_up"), (i, "r_down")]
    if term_paths:
        paths = [f"termination.{i}.{k}" for i, k in term_paths]
        base = {p: float(P[p]) for p in paths}
        try:
            scale, _ = _solve_scale(vdesign, a.driver, a.receiver, a.edge, paths, base, up=True)
        except DesignError:
            scale = None
        out["termination"] = {
            "scale": scale,
            "needed": [{"termination": f"termination #{i + 1}", "key": k, "value": base[p],
                        "needed": None if scale is None else base[p] * scale}
                       for (i, k), p in zip(term_paths, paths)]}
        if scale is not None:
            first = out["termination"]["needed"][0]
            words.append(f"a weaker termination (every parallel/Thevenin resistor x{scale:.3g}, e.g. "
                         f"{first['termination']} {first['key']} {first['value']:.3g} -> {first['needed']:.3g} ohm)")
        else:
            words.append("no termination resistance up to 100x its value is enough")
    words.append(f"or a settled level {out['shortfall']:.3f} V {'higher' if rising else 'lower'} (supply or "
                 "driver levels)")
    out["summary"] = ("what reaches it: " + "; ".join(words) +
                      " -- each answer changes one value; confirm with the part makers' data")
    return out


def with_remedies(design, a: MarginAnatomy, values: dict | None = None) -> MarginAnatomy:
    """``a`` with :func:`dc_remedies` attached when it fails on its DC level alone (else ``a``)."""
    if a.limited_by != "dc":
        return a
    from dataclasses import replace

    return replace(a, dc_remedies=dc_remedies(design, a, values))


def report_anatomy(design, variants: dict, row: dict, *, remedies: bool = True) -> MarginAnatomy:
    """The anatomy of a check result row, its variant's values applied.

    variants: ``CheckReport.variants`` (label -> {"values": {path: SI}}); remedies:
    attach :func:`dc_remedies` when the row fails on its DC level alone.
    """
    values = (variants.get(row["corner"], {}) or {}).get("values", {}) if row["corner"] != "nominal" else {}
    a = anatomy(design, row, values)
    return with_remedies(design, a, values) if remedies else a


def anatomy_text(doc: dict, indent: str = "   ") -> list:
    """Aligned text lines of an anatomy (its :meth:`MarginAnatomy.to_json` form), for the check report
    and ``busbudget explain``."""
    rising = doc["edge"] == "rise"
    lvl, th = ("v_hi", "VIH") if rising else ("v_lo", "VIL")
    alloc = ", ".join(f"{t['name']} {t['value'] * 1e3:.0f} mV" for t in doc["allocation_terms"]) or "none"
    where = "lowest" if rising else "highest"
    rows = [
        ("DC level at the pin", f"settled {lvl} {doc['settled']:.3f} V vs {th} {doc['threshold']:.3f} V", doc["dc"]),
        ("reflections", f"{where} level after the first peak {doc['held']:.3f} V vs settled {doc['settled']:.3f} V",
         doc["reflection"]),
        ("allocations", alloc, doc["allocations"]),
        ("= margin", f"required >= {doc['min_margin']:g} V", doc["margin"]),
    ]
    w0 = max(len(r[0]) for r in rows)
    w1 = max(len(r[1]) for r in rows)
    out = [f"{indent}{name.ljust(w0)}  {what.ljust(w1)}  {value:+.3f} V" for name, what, value in rows]
    out.append(f"{indent}{doc['summary']}")
    if doc.get("dc_remedies"):
        out.append(f"{indent}{doc['dc_remedies']['summary']}")
    return out


__all__ = ["MarginAnatomy", "anatomy", "dc_remedies", "with_remedies", "report_anatomy", "anatomy_text", "PARTS"]
