"""The design-aid commands ``busbudget sensitivity`` and ``busbudget solve stub|termination|drops``.

Kept apart from :mod:`budget.cli` (which adds them with :func:`add_commands`);
exit codes as ``check``: 0 an answer that passes, 1 no candidate passes (the
best one is still reported), 2 bad input.  ``sensitivity`` exits 0 when it has
computed the table (whatever the verdict of the design).
"""
from __future__ import annotations

import argparse
import json
import sys

EXIT_PASS, EXIT_FAIL = 0, 1


def _progress(args, label):
    if getattr(args, "no_progress", False):
        return None
    from .progress import ProgressBar

    bar = ProgressBar(label)
    return bar if bar.enabled else None


def _run(args, label, fn):
    bar = _progress(args, label)
    try:
        return fn(bar)
    finally:
        if bar is not None:
            bar.close()


def _emit(args, doc, text):
    sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n" if args.json else text)


def cmd_sensitivity(args) -> int:
    """Derivatives of the worst headroom, ranked by what each tolerance costs (busbudget.sensitivity/1)."""
    from .sensitivity import sensitivities

    design = args.load_design(args.design)
    res = _run(args, "busbudget sensitivity",
               lambda bar: sensitivities(design, paths=args.paths, nominal=args.nominal, progress=bar))
    _emit(args, res.to_json(), res.text())
    return EXIT_PASS


def cmd_solve_stub(args) -> int:
    from .solve import longest_stub

    design = args.load_design(args.design)
    res = _run(args, "busbudget solve stub",
               lambda bar: longest_stub(design, tap=args.tap, nominal=args.nominal, longest=args.longest,
                                        progress=bar))
    _emit(args, res.to_json(), res.text())
    return EXIT_PASS if res.passes else EXIT_FAIL


def cmd_solve_termination(args) -> int:
    from .solve import SCHEMES, best_termination

    design = args.load_design(args.design)
    res = _run(args, "busbudget solve termination",
               lambda bar: best_termination(design, series=args.series, schemes=args.scheme or SCHEMES,
                                            nominal=args.nominal, progress=bar))
    _emit(args, res.to_json(), res.text())
    return EXIT_PASS if res.passes else EXIT_FAIL


def cmd_solve_drops(args) -> int:
    from .solve import most_drops, smallest_spacing

    design = args.load_design(args.design)
    if args.spacing is not None:
        res = _run(args, "busbudget solve drops",
                   lambda bar: most_drops(design, args.spacing, nominal=args.nominal, progress=bar))
    else:
        res = _run(args, "busbudget solve drops",
                   lambda bar: smallest_spacing(design, args.count, nominal=args.nominal, progress=bar))
    _emit(args, res.to_json(), res.text())
    return EXIT_PASS if res.passes else EXIT_FAIL


def _length(text: str) -> float:
    from .errors import DesignError
    from .units import parse_quantity

    try:
        value = parse_quantity(text, "length", source="command line")
    except DesignError as exc:
        raise argparse.ArgumentTypeError(exc.reason) from None
    if not value > 0:
        raise argparse.ArgumentTypeError(f"{text!r} is not a positive length")
    return value


def _common(p) -> None:
    p.add_argument("design", help="design file, or example:NAME")
    p.add_argument("--nominal", action="store_true",
                   help="the nominal design only (default: the nominal design and every corner of the box)")
    p.add_argument("--json", action="store_true", help="one JSON document instead of the text report")
    p.add_argument("--no-progress", action="store_true", help="no progress bar even on a terminal")


def add_commands(sub, *, load_design, positive) -> None:
    """Add ``sensitivity`` and ``solve`` to the ``busbudget`` sub-command parser ``sub``.

    load_design(text) -> Design (a path or ``example:NAME``) and positive (an argparse type for a
    whole number >= 1) come from :mod:`budget.cli`, which imports this module (not the reverse).
    """
    from .solve import MAX_DROPS, SCHEMES, SERIES

    _positive = positive

    se = sub.add_parser(
        "sensitivity", help="derivative of the worst margin with respect to every toleranced value, ranked",
        description="dW/dx of the worst headroom W with respect to every value of the [tolerances] box and every "
                    "--path, at the worst case and at the nominal design (central differences of full corner "
                    "analyses, one batch), ranked by the margin each tolerance costs over its range. Exit 0 = "
                    "table written, 2 = bad input.")
    _common(se)
    se.add_argument("--path", action="append", default=[], dest="paths", metavar="PATH",
                    help="also differentiate with respect to this value (a dotted path, e.g. tap.U3.stub.length); "
                         "repeatable")
    se.set_defaults(func=cmd_sensitivity, load_design=load_design)

    so = sub.add_parser(
        "solve", help="direct answers: longest stub, best termination, most drops / smallest spacing",
        description="busbudget solve stub|termination|drops DESIGN ...: each answer confirmed by the check at the "
                    "answer (passes) and just beyond (fails). Exit 0 = an answer that passes, 1 = no candidate "
                    "passes (the best one is reported), 2 = bad input.")
    ss = so.add_subparsers(dest="question", metavar="QUESTION")
    ss.required = True

    st = ss.add_parser("stub", help="the longest stub that keeps the bus passing",
                       description="The longest stub length (one for every tap with a stub, or --tap's alone) "
                                   "that keeps the bus passing over the tolerance box.")
    _common(st)
    st.add_argument("--tap", default=None, help="change this tap's stub only (default: every stub, one length)")
    st.add_argument("--longest", type=_length, default=None, metavar="LENGTH",
                    help="upper end of the searched range (default: the length whose delay is the rise time, at "
                         "least twice the longest stub)")
    st.set_defaults(func=cmd_solve_stub, load_design=load_design)

    te = ss.add_parser("termination", help="the termination scheme and preferred values with the best worst case",
                       description="Tries parallel-to-a-rail, Thevenin pair, RC and series-at-the-drivers schemes "
                                   "with values from an IEC 60063 series; reports the best by worst-case margin and "
                                   "the runners-up.")
    _common(te)
    te.add_argument("--series", choices=SERIES, default="E24", help="preferred-number series (default E24)")
    te.add_argument("--scheme", action="append", choices=SCHEMES, default=[],
                    help="try only this scheme (repeatable; default: every scheme)")
    te.set_defaults(func=cmd_solve_termination, load_design=load_design)

    dr = ss.add_parser("drops", help="the most devices at a spacing, or the smallest spacing for a count",
                       description="Devices as copies of the design's taps in trunk order, evenly spaced along a "
                                   "trunk of the first segment's line, end terminations at the new ends.")
    _common(dr)
    g = dr.add_mutually_exclusive_group(required=True)
    g.add_argument("--spacing", type=_length, metavar="LENGTH",
                   help="the most devices the trunk carries at this spacing, e.g. '2.5 cm'")
    g.add_argument("--count", type=_positive, metavar="N",
                   help=f"the smallest spacing at which N devices pass (2 to {MAX_DROPS})")
    dr.set_defaults(func=cmd_solve_drops, load_design=load_design)


__all__ = ["add_commands"]
