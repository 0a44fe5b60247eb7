"""Reports of a budget check: the report object, a text table for people, a versioned JSON document for scripts.

:class:`CheckReport` is what :func:`budget.check.check` returns; this module
owns it, its JSON schema and both renderings.

JSON (schema ``busbudget.check/1``, docs/metrics.md is the contract; keys
are only ever added): SI units (volts, seconds), ``null`` for a time that
never occurs, never NaN.  Extensions beyond the contract are listed in
:data:`JSON_EXTENSIONS`.

Text: a header, the budget, one line per receiver with its worst figures over
every driver, both edges and every analysed case (the receiver holding the
bus-level worst case is marked ``>>``), the worst case in words, the tolerance
analyses, values outside the tolerance box, what was covered, the verdict
line, and what the model assumes.  "-" marks a figure that does not apply,
"never" a time that never occurs (a violation).
"""
from __future__ import annotations

from pathlib import Path

import math
from dataclasses import dataclass, field

import numpy as np

from .kernels import metrics as mk

SCHEMA = "busbudget.check/1"

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




def assumptions_for(design) -> tuple:
    """What the model assumes for ``design``: :data:`ASSUMPTIONS`, its first item saying which parts are linear
    and which come from IBIS files when the design has IBIS parts."""
    ibis = design.structure.ibis
    if not ibis:
        return ASSUMPTIONS
    used = {t.part for t in design.taps}
    linear = sorted(p for p in design.parts if p not in ibis and p in used)
    described = []
    skipped = set()
    for name in sorted(p for p in ibis if p in used):
        ip = ibis[name]
        taps = ", ".join(t.name for t in design.taps if t.part == name)
        described.append(f"{name} (taps {taps}): model {ip.model_name} of {Path(ip.path).name}")
        skipped.update(ip.model.skipped)
    text = ("Parts from IBIS files: " + "; ".join(described) + ". Their buffers follow the files' I-V tables "
            "(pull-up, pull-down, clamps), switching coefficients from the V-T tables or [Ramp], C_comp and "
            "package R/L/C at the chosen typ/min/max corner; a behavioural model without supply or ground "
            "bounce" + (f"; keywords not modelled: {', '.join(sorted(skipped))}" if skipped else "") + ".")
    if linear:
        text += (" Linear parts (" + ", ".join(linear) + "): each output state is a voltage behind a resistance, "
                 "blended linearly over a ramp; no clamp diodes.")
    return (text,) + ASSUMPTIONS[1:]


# ---------------------------------------------------------------------------
# the report object

@dataclass
class CheckReport:
    """Result of :func:`budget.check.check`; SI units throughout (volts, seconds).

    passed, verdict ("pass"/"fail"); worst: the worst case (driver, receiver,
    edge, corner, metric, value, plus headroom [V], percent_of_swing,
    violations, analysis); results: one dict per (driver, receiver, edge,
    corner) with the JSON contract keys (docs/metrics.md) -- the nominal
    design, plus, for each tolerance analysis, the worst variant of that
    analysis for each (driver, receiver, edge), never every sample; analyses:
    settings and summaries of each analysis run; variants: label -> the
    values of every variant named in results or worst; coverage: what part
    of the tolerance box was evaluated (and, if not all of it, what to run);
    out_of_box: design values outside their tolerance interval.
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
    coverage: dict = field(default_factory=dict)
    out_of_box: list = field(default_factory=list)
    anatomy: dict | None = None
    warnings: list = field(default_factory=list)
    assumptions: tuple = ASSUMPTIONS    # what the model assumes (assumptions_for: says which parts are IBIS)

    @property
    def verdict(self) -> str:
        return "pass" if self.passed else "fail"

    def to_json(self) -> dict:
        """The versioned JSON document (schema "busbudget.check/1"); no NaN anywhere."""
        return to_json(self)

    def text(self) -> str:
        """Readable report: per-receiver table, worst case, tolerance summaries, verdict, assumptions."""
        return to_text(self)

    def rows(self, *, driver=None, receiver=None, edge=None, analysis=None) -> list:
        """Results filtered by driver, receiver, edge and/or analysis."""
        return [r for r in self.results
                if (driver is None or r["driver"] == driver) and (receiver is None or r["receiver"] == receiver)
                and (edge is None or r["edge"] == edge) and (analysis is None or r["analysis"] == analysis)]


# ---------------------------------------------------------------------------
# result rows and the worst case in words

def _opt(x):
    x = float(x)
    return None if not math.isfinite(x) else x


def result_row(analysis: str, label, m, levels, bits: int, head: float, driver: str, receiver: str,
               edge: str) -> dict:
    """One result (JSON contract keys plus extensions) from a metrics vector m, levels (V_lo, V_hi) [V],
    the violation bits and the headroom [V]."""
    v_lo, v_hi = (float(x) for x in levels)
    bits = int(bits)
    rising = edge == "rise"
    swing = abs(v_hi - v_lo)
    margin = float(m[mk.MARGIN])
    return {
        "driver": driver, "receiver": receiver, "edge": edge, "corner": label,
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
        "analysis": analysis,
        "margin_percent_of_swing": _opt(100.0 * margin / swing) if swing > 0 else None,
        "headroom": _opt(head),
    }


def worst_summary(row: dict, limit: int, v_max, v_min, min_margin: float) -> dict:
    """The bus-level worst case from its result row and the LIMIT_* code of its headroom.

    v_max, v_min [V] (None: the part gives none); min_margin [V].  Names the
    metric that limits it (or, when only a non-margin violation fails it, that
    violation) and by how much.
    """
    rising = row["edge"] == "rise"
    margin = row["margin_high"] if rising else row["margin_low"]
    swing = abs(row["v_hi"] - row["v_lo"])
    head = row["headroom"]
    if limit == mk.LIMIT_V_MAX:
        metric, value, lim = "overshoot", row["overshoot"], f"v_peak <= v_max = {v_max:g} V"
    elif limit == mk.LIMIT_V_MIN:
        metric, value, lim = "undershoot", row["undershoot"], f"v_trough >= v_min = {v_min:g} V"
    else:
        metric, value, lim = ("margin_high" if rising else "margin_low"), margin, f"margin >= {min_margin:g} V"
    if head is not None and head >= 0 and not row["pass"]:
        # only a non-margin violation (non-monotonic edge, never settled): name it
        viol = row["violations"][0]
        metric, value, lim = {"never valid": ("t_valid", None, "must become valid"),
                              "non-monotonic edge": ("monotonic", False, "monotonic through VIL..VIH"),
                              "not settled in window": ("settle_time", None, "must settle in the window"),
                              }.get(viol, (metric, value, lim))
    return {
        "driver": row["driver"], "receiver": row["receiver"], "edge": row["edge"], "corner": row["corner"],
        "metric": metric, "value": value,
        # extensions
        "headroom": head, "percent_of_swing": 100.0 * head / swing if swing > 0 and head is not None else None,
        "margin": margin, "margin_percent_of_swing": row["margin_percent_of_swing"], "limit": lim,
        "violations": list(row["violations"]), "analysis": row["analysis"],
    }


RESULTS_NOTE = (
    "one result per (driver, receiver, edge) for each analysis: the nominal design, and for corners, "
    "Monte Carlo and search the variant of that analysis that is worst for that (driver, receiver, edge) "
    "(a violation first, then the lowest headroom); the other variants are counted in 'analyses' but not "
    "listed. 'corner' names the variant; its values are in 'variants'.")

JSON_EXTENSIONS = {
    "source": "path of the design file",
    "signaling": "single-ended or differential (differential: all levels are differential-mode)",
    "results[].analysis": "nominal, corners, monte_carlo or search",
    "results[].margin_percent_of_swing": "the row's margin as a percentage of |v_hi - v_lo|",
    "results[].headroom": "lowest of margin - min_margin, v_max - v_peak, v_trough - v_min [V]",
    "worst.headroom / percent_of_swing / margin / margin_percent_of_swing / limit / violations / analysis":
        "how far the worst case is from its limit, and which limit",
    "analyses": "settings and summary of every analysis run (counts, seed, distribution, Monte Carlo failure "
                "probability with its Wilson 95 % interval, search settings and result)",
    "tolerances": "the tolerance box: path -> {min, max, unit}",
    "budget": "allocations (V or fraction of swing), min_margin [V], settle_band [-]",
    "variants": "label -> values [SI] of every variant named in results, worst and analyses",
    "coverage": "what was evaluated: nominal, corners run and how many the box has, Monte Carlo samples, "
                "search candidates; all_corners; summary (the words of the verdict line); note: what to run "
                "when the default analysis did not cover the tolerance box",
    "out_of_box": "design values outside their tolerance interval: [{path, value, min, max}] (SI); "
                  "evaluated as given, flagged",
    "assumptions / safety": "what the model assumes; results are estimates",
    "warnings": "notes on the model's validity for this design, e.g. a cross-section outside its formula's "
                "stated range (the result is still given; treat it as a rough estimate)",
    "anatomy": "the worst case's margin split into dc + reflection + allocations (budget.anatomy); "
               "dc_remedies when it fails on the DC level alone",
}


def _clean(x):
    """JSON-safe copy: NaN/inf -> None, numpy scalars -> Python, tuples -> lists."""
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        x = float(x)
        return x if math.isfinite(x) else None
    return x


def to_json(report: CheckReport) -> dict:
    """The JSON document of a check (a dict ready for ``json.dumps(..., allow_nan=False)``)."""
    tol = {p: {"min": lo, "max": hi, "unit": report.units.get(p)} for p, (lo, hi) in report.tolerances.items()}
    doc = {
        "schema": SCHEMA,
        "design": report.design,
        "verdict": report.verdict,
        "worst": report.worst,
        "results": report.results,
        "results_note": RESULTS_NOTE,
        "source": report.source,
        "signaling": report.signaling,
        "analyses": report.analyses,
        "tolerances": tol,
        "budget": report.budget,
        "variants": report.variants,
        "coverage": report.coverage,
        "out_of_box": report.out_of_box,
        **({"anatomy": report.anatomy} if report.anatomy is not None else {}),
        "warnings": list(report.warnings),
        "units": {"voltage": "V", "time": "s", "percent_of_swing": "%"},
        "assumptions": list(report.assumptions),
        "safety": ("Estimates from a linear model" if report.assumptions == ASSUMPTIONS else
                   "Estimates from linear and IBIS behavioural models") +
                  ": confirm by measurement and with the part makers' data; "
                  "absolute maximum ratings come from the datasheets; the applicable standards and the "
                  "responsible engineer decide.",
        "extensions": JSON_EXTENSIONS,
    }
    return _clean(doc)


# ---------------------------------------------------------------------------
# text

_PREFIX = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"),
           (1e-12, "p"), (1e-15, "f"))


def si(x, unit: str) -> str:
    """A value with an SI prefix: si(2.5e-12, 'F') -> '2.5 pF'."""
    if x is None or not math.isfinite(x):
        return "-"
    if x == 0:
        return f"0 {unit}".strip()
    for scale, p in _PREFIX:
        if abs(x) >= scale * 0.9995:
            return f"{x / scale:.4g} {p}{unit}".strip()
    return f"{x:.3g} {unit}".strip()


def volts(x, sign: bool = True) -> str:
    if x is None or not math.isfinite(x):
        return "-"
    return f"{x:+.3f} V" if sign else f"{x:.3f} V"


def ns(x, never: bool = True) -> str:
    if x is None or not math.isfinite(x):
        return "never" if never else "-"
    return f"{x * 1e9:.2f} ns"


def pct(x) -> str:
    if x is None or not math.isfinite(x):
        return ""
    return f"({x:.1f}%)"


def worst_row(rows) -> int:
    """Index of the worst of some result rows, by the one rule (budget.kernels.metrics.worst_along)."""
    bits = np.array([0 if r["pass"] else 1 for r in rows])
    head = np.array([math.inf if r["headroom"] is None else r["headroom"] for r in rows], dtype=float)
    return int(mk.worst_along(bits, head))


def _receiver_lines(report: CheckReport):
    """Per receiver: worst figures over every driver, edge and analysis."""
    out = []
    names = report.receivers or list(dict.fromkeys(r["receiver"] for r in report.results))
    for name in names:
        rows = [r for r in report.results if r["receiver"] == name]
        rise = [r for r in rows if r["edge"] == "rise"]
        fall = [r for r in rows if r["edge"] == "fall"]

        def lowest(rs, key):
            rs = [r for r in rs if r[key] is not None]
            return min(rs, key=lambda r: r[key]) if rs else None

        mh, ml = lowest(rise, "margin_high"), lowest(fall, "margin_low")
        rb = lowest(rows, "ringback")
        fmin = [r["flight_min"] for r in rows]
        fmax = [r["flight_max"] for r in rows]
        settle = [r["settle_time"] for r in rows]
        ringback_never = any(r["ringback"] is None for r in rows)
        limiting = rows[worst_row(rows)]
        out.append({
            "receiver": name,
            "margin_high": f"{mh['margin_high']:+.3f} {pct(mh['margin_percent_of_swing'])}" if mh else "-",
            "margin_low": f"{ml['margin_low']:+.3f} {pct(ml['margin_percent_of_swing'])}" if ml else "-",
            "overshoot": f"{max(r['overshoot'] for r in rows):.3f}",
            "undershoot": f"{max(r['undershoot'] for r in rows):.3f}",
            "ringback": "never valid" if ringback_never else (f"{rb['ringback']:+.3f}" if rb else "-"),
            "flight": _span(fmin, fmax),
            "settle": "never" if any(x is None for x in settle) else f"{max(settle) * 1e9:.2f}",
            "status": "ok" if all(r["pass"] for r in rows) else "FAIL",
            "case": f"{limiting['driver']} {limiting['edge']} {limiting['corner']}",
        })
    return out


def _span(fmin, fmax) -> str:
    lo = "never" if any(x is None for x in fmin) else f"{min(fmin) * 1e9:.2f}"
    hi = "never" if any(x is None for x in fmax) else f"{max(fmax) * 1e9:.2f}"
    return f"{lo}..{hi}"


def _table(headers, rows, marks):
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(headers)]
    lines = ["   " + "  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip()]
    for r, m in zip(rows, marks):
        lines.append((">> " if m else "   ") + "  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip())
    return lines


def _describe_variant(report: CheckReport, label: str) -> list:
    v = report.variants.get(label)
    if not v or not v.get("values"):
        return []
    ext = v.get("extremes", {})
    out = []
    for p, x in v["values"].items():
        tag = f" ({ext[p]})" if p in ext else ""
        out.append(f"      {p} = {si(x, report.units.get(p, ''))}{tag}")
    return out


def to_text(report: CheckReport) -> str:
    """The readable report (see module docstring)."""
    L = []
    L.append(f"busbudget check: {report.design}")
    L.append(f"design file: {report.source}  ({report.signaling}"
             f"{', all levels differential-mode' if report.signaling == 'differential' else ''})")
    a = report.analyses
    done = ["nominal"]
    if "corners" in a:
        done.append(f"{a['corners']['variants']} corners")
    if "monte_carlo" in a:
        done.append(f"Monte Carlo {a['monte_carlo']['variants']} samples")
    if "search" in a:
        done.append(f"worst-case search {a['search']['variants']} candidates")
    L.append("analyses: " + ", ".join(done))
    cov = report.coverage or {}
    b = report.budget
    alloc = [f"{n} {si(x['value'], 'V')}" if x["unit"] == "V" else f"{n} {100 * x['value']:.3g}% of swing"
             for n, x in b["allocations"].items()]
    L.append("budget: " + (", ".join(alloc) if alloc else "no allocations")
             + f"; required margin >= {si(b['min_margin'], 'V') if b['min_margin'] else '0 V'}"
             + f"; settle band {100 * b['settle_band']:.3g}% of swing")
    L.append("")
    L.append("Per receiver, worst over every driver, both edges and every analysed case; margins after the "
             "budget allocations, in V and % of swing:")
    recs = _receiver_lines(report)
    headers = ["receiver", "margin high V", "margin low V", "overshoot V", "undershoot V", "ringback V",
               "flight ns", "settle ns", "status", "limiting case"]
    keys = ["receiver", "margin_high", "margin_low", "overshoot", "undershoot", "ringback", "flight",
            "settle", "status", "case"]
    L += _table(headers, [[r[k] for k in keys] for r in recs],
                [r["receiver"] == report.worst["receiver"] for r in recs])
    L.append("")
    w = report.worst
    value = w["value"]
    if isinstance(value, bool) or value is None:
        shown = str(value).lower() if isinstance(value, bool) else "never"
    else:
        shown = volts(value)
    head = w["headroom"]
    L.append(f"worst case (>>): receiver {w['receiver']} when {w['driver']} drives, {w['edge']} edge, "
             f"{w['corner']}: {w['metric']} = {shown}; headroom to its limit ({w['limit']}) "
             f"{volts(head)}" + (f" = {w['percent_of_swing']:+.1f}% of swing" if w["percent_of_swing"] is not None
                                 else ""))
    if w["violations"]:
        L.append(f"   violations there: {', '.join(w['violations'])}")
    L += [line.replace("      ", "   ", 1) for line in _describe_variant(report, w["corner"])]
    if report.anatomy is not None:
        from .anatomy import anatomy_text

        L.append("   margin anatomy (dc + reflection + allocations = margin):")
        L += anatomy_text(report.anatomy, indent="      ")
    failing = sorted({(r["driver"], r["receiver"], r["edge"]) for r in report.results if not r["pass"]})
    if failing:
        listed = ", ".join(f"{d}->{r} {e}" for d, r, e in failing[:8])
        more = f" and {len(failing) - 8} more" if len(failing) > 8 else ""
        L.append(f"failing (driver->receiver edge): {listed}{more}")

    if report.out_of_box:
        L.append("")
        L.append("values outside the tolerance box (evaluated as given; check the measurement or widen the box):")
        for o in report.out_of_box:
            unit = report.units.get(o["path"], "")
            L.append(f"   {o['path']} = {si(o['value'], unit) if isinstance(o['value'], float) else o['value']}"
                     f", box {si(o['min'], unit)} .. {si(o['max'], unit)}")

    if report.warnings:
        L.append("")
        L.append("warnings (results still given; treat them as rough estimates there):")
        L += [f"   {w_}" for w_ in report.warnings]

    if len(a) > 1:
        L.append("")
        L.append("tolerances:")
    if "corners" in a:
        c = a["corners"]
        L.append(f"   corners: {c['variants']} ({len(c['toleranced_values'])} toleranced values), "
                 f"{c['failed']} fail; worst: {c['worst_corner']}, headroom {volts(c['worst_headroom'])}"
                 + ("" if c["requested"] else "  [run as the search's start]"))
    if "monte_carlo" in a:
        m = a["monte_carlo"]
        lo, hi = m["wilson_95"]
        L.append(f"   Monte Carlo: {m['variants']} samples ({m['distribution']}, seed {m['seed']}), {m['failed']} fail: "
                 f"failure probability {100 * m['failure_probability']:.3g}% "
                 f"(Wilson 95% interval {100 * lo:.3g}% .. {100 * hi:.3g}%); worst: {m['worst_sample']}, "
                 f"headroom {volts(m['worst_headroom'])}")
    if "search" in a:
        s = a["search"]
        line = (f"   search: {s['variants']} candidates in {s['generations']} generations (seed {s['seed']}); "
                f"worst found: {s['worst_found']}, headroom {volts(s['worst_headroom'])}")
        if "beats_corners_by" in s:
            by = s["beats_corners_by"]
            line += (f", {by * 1e3:.1f} mV below the worst corner" if by > 1e-6 else
                     ", no case below the worst corner")
        L.append(line)

    if cov.get("note"):
        L.append("")
        L.append(f"NOT COVERED: {cov['note']}")
    L.append("")
    scope = cov.get("summary") or ("nominal design only" if len(a) == 1 else "across the analysed tolerances")
    if report.passed:
        L.append(f"VERDICT: PASS - every receiver keeps its margin and ratings, whichever device drives ({scope})")
    else:
        L.append(f"VERDICT: FAIL - {w['driver']} -> {w['receiver']}, {w['edge']} edge, {w['corner']}: "
                 f"{w['metric']} {shown} ({scope})")
    L.append("")
    L.append("What the model assumes:")
    for s in report.assumptions:
        L.append(f" - {s}")
    return "\n".join(L) + "\n"


__all__ = ["CheckReport", "to_json", "to_text", "result_row", "worst_summary", "worst_row", "si", "SCHEMA",
           "RESULT_KEYS", "ASSUMPTIONS", "RESULTS_NOTE", "JSON_EXTENSIONS"]
