"""``busbudget explain``: the margin anatomy of chosen (driver, receiver, edge) cases of a check.

Runs the same check as ``busbudget check`` (same analyses, same kernels), keeps
for each (driver, receiver, edge) its worst result over every analysed case
(the one rule, :func:`budget.report.worst_row`), selects by driver, receiver
and edge, and splits each selected margin into DC level + reflection +
allocations (:mod:`budget.anatomy`).  The worst selected case also gets the DC
remedies when it fails on its DC level alone.

JSON (schema ``busbudget.explain/1``): ``{"schema", "design", "verdict"
(of the selected cases), "worst" (index into cases), "cases": [anatomy ...],
"assumptions"}``; each case is :meth:`budget.anatomy.MarginAnatomy.to_json`.
"""
from __future__ import annotations

from .anatomy import anatomy_text, report_anatomy
from .errors import ArgumentError
from .report import ASSUMPTIONS, worst_row

SCHEMA = "busbudget.explain/1"


def explain(design, report, *, driver: str | None = None, receiver: str | None = None,
            edge: str | None = None) -> dict:
    """The explain document for the cases of ``report`` (a check of ``design``) matching the selection.

    driver / receiver: tap names (None: all); edge: "rise", "fall" or None.
    Raises ArgumentError naming the option when nothing matches or a name is unknown.
    """
    if driver is not None and driver not in design.drivers:
        raise ArgumentError(f"--driver {driver!r} is not a tap that can drive; drivers: {', '.join(design.drivers)}")
    if receiver is not None and receiver not in design.receivers:
        raise ArgumentError(f"--receiver {receiver!r} is not a tap that can receive; receivers: "
                            f"{', '.join(design.receivers)}")
    if edge is not None and edge not in ("rise", "fall"):
        raise ArgumentError(f"--edge must be rise or fall, got {edge!r}")
    groups: dict = {}
    for r in report.rows(driver=driver, receiver=receiver, edge=edge):
        groups.setdefault((r["driver"], r["receiver"], r["edge"]), []).append(r)
    if not groups:
        raise ArgumentError(f"no case matches --driver {driver} --receiver {receiver} --edge {edge} "
                            "(a tap does not receive its own edge)")
    rows = [rs[worst_row(rs)] for rs in groups.values()]
    worst = worst_row(rows)
    cases = [report_anatomy(design, report.variants, r, remedies=(i == worst)).to_json()
             for i, r in enumerate(rows)]
    for c, r in zip(cases, rows):
        c["pass"] = r["pass"]
        c["analysis"] = r["analysis"]
    return {"schema": SCHEMA, "design": report.design, "verdict": "pass" if all(r["pass"] for r in rows) else "fail",
            "worst": worst, "cases": cases, "coverage": report.coverage.get("summary"),
            "assumptions": list(ASSUMPTIONS)}


def text(doc: dict) -> str:
    """The explain document as a table (one line per case) and the worst case in full."""
    L = [f"busbudget explain: {doc['design']}  ({doc['coverage']})",
         "margin = DC level + reflections + allocations, per (driver, receiver, edge), its worst analysed case [V]:"]
    head = ["driver", "receiver", "edge", "case", "DC level", "reflections", "allocations", "margin", "limited by"]
    body = []
    for c in doc["cases"]:
        body.append([c["driver"], c["receiver"], c["edge"], c["corner"], f"{c['dc']:+.3f}", f"{c['reflection']:+.3f}",
                     f"{c['allocations']:+.3f}", f"{c['margin']:+.3f}",
                     {"dc": "DC level", "reflection": "reflections"}.get(c["limited_by"], "-" if c["pass"] else
                                                                            ", ".join(c["other_violations"]))])
    widths = [max(len(h), *(len(b[i]) for b in body)) for i, h in enumerate(head)]
    L.append("   " + "  ".join(h.ljust(w) for h, w in zip(head, widths)).rstrip())
    for i, b in enumerate(body):
        L.append((">> " if i == doc["worst"] else "   ") + "  ".join(x.ljust(w) for x, w in zip(b, widths)).rstrip())
    w = doc["cases"][doc["worst"]]
    L.append("")
    L.append(f"worst of these (>>): {w['driver']} -> {w['receiver']}, {w['edge']} edge, {w['corner']}:")
    L += anatomy_text(w, indent="   ")
    L.append("")
    L.append(f"VERDICT: {doc['verdict'].upper()} for the cases shown. Estimates from a linear model: confirm by "
             "measurement and with the part makers' data.")
    return "\n".join(L) + "\n"


__all__ = ["explain", "text", "SCHEMA"]
