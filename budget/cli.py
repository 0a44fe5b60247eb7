"""Command line: ``busbudget COMMAND ...`` (see ``busbudget --help``).

Exit codes (a contract): 0 = the bus passes / the command succeeded,
1 = a margin or rating is violated, 2 = bad input (one-line message on
stderr, no output file written), 3 = an internal error (a bug in busbudget:
a one-line message naming the exception; set BUSBUDGET_DEBUG=1 for the
traceback).  Only the package's own errors (:class:`budget.errors.BusBudgetError`)
count as bad input.

A DESIGN argument is a path to a design file, or ``example:NAME`` for a
design bundled with the package (``busbudget examples`` lists them).
"""
from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from .errors import ArgumentError, BusBudgetError
from .files import write_atomically

EXIT_PASS, EXIT_FAIL, EXIT_INPUT, EXIT_INTERNAL = 0, 1, 2, 3
DEBUG_ENV = "BUSBUDGET_DEBUG"


class InputError(ArgumentError):
    """Bad input found by the CLI itself (exit 2)."""


def load_design(arg: str):
    """Load a design from a path or ``example:NAME``."""
    from . import examples
    from .design_file import load

    if arg.startswith("example:"):
        return load(examples.example_path(arg.split(":", 1)[1]))
    return load(arg)


# ---------------------------------------------------------------------------
# commands

def cmd_waves(args) -> int:
    """Pin waveforms as CSV: t [s], then one column per tap [V]."""
    import numpy as np

    from .simulate import simulate

    design, measured = _measured_design(args)
    w = simulate(design, args.driver, args.edge, dt=args.dt, t_stop=args.t_stop)

    def write(fh):
        fh.write(",".join(["t", *w.taps]) + "\n")
        data = np.column_stack([w.t, w.v])
        np.savetxt(fh, data, delimiter=",", fmt="%.9e")

    if args.csv == "-":
        write(sys.stdout)
    else:
        write_atomically(args.csv, write)
    for note in w.notes:
        print(f"note: {note}", file=sys.stderr)
    _print_measured_notes(measured, design)
    return EXIT_PASS


def cmd_examples(args) -> int:
    """List the bundled example designs and where they are."""
    from .examples import EXAMPLES, example_path

    for name in EXAMPLES:
        print(f"example:{name}\t{example_path(name)}")
    from .examples import captures_dir

    print(f"demo captures, values files and a TDR trace (fictional Wren board):\t{captures_dir()}")
    return EXIT_PASS


def _progress(args):
    """A progress bar on stderr when it is a terminal (and --no-progress is not given), else None."""
    if getattr(args, "no_progress", False):
        return None
    from .progress import ProgressBar

    bar = ProgressBar("busbudget check")
    return bar if bar.enabled else None


def _run_check(args, design):
    from .check import check
    from .limits import MAX_WORK

    bar = _progress(args)
    try:
        return check(design, corners=True if args.corners else None, nominal=args.nominal,
                     monte_carlo=args.monte_carlo, seed=args.seed,
                     search=args.search, progress=bar, distribution=args.distribution,
                     max_corners=args.max_corners, search_generations=args.search_generations,
                     max_work=None if args.allow_long else MAX_WORK)
    finally:
        if bar is not None:
            bar.close()


def cmd_check(args) -> int:
    """The budget report (text or JSON); exit 0 pass, 1 fail, 2 bad input, 3 internal error."""
    import json

    _check_log_options(args)
    design, measured = _measured_design(args)
    report = _run_check(args, _pinned(design, measured))
    if measured:
        from .analyses import out_of_box

        report.out_of_box = out_of_box(design)
        report.tolerances = {p: [float(lo), float(hi)] for p, (lo, hi) in design.tolerances.items()}
    doc = report.to_json()
    if measured:
        doc["measured"] = measured.to_json(design)
        doc["measured_note"] = MEASURED_NOTE
    if args.json:
        body = json.dumps(doc, indent=2, allow_nan=False) + "\n"
    else:
        body = report.text() + _measured_text(measured, design)
    _append_record(args, doc, "check", measured)
    if args.out:
        write_atomically(args.out, lambda fh: fh.write(body))
        from .report import volts

        w = report.worst
        print(f"{report.verdict.upper()}: worst {w['driver']} -> {w['receiver']} {w['edge']} {w['corner']}: "
              f"headroom {volts(w['headroom'])} ({report.coverage['summary']}); report written to {args.out}")
    else:
        sys.stdout.write(body)
    return EXIT_PASS if report.passed else EXIT_FAIL


def cmd_explain(args) -> int:
    """Margin anatomy (DC level + reflections + allocations) of chosen cases; exit 0 all pass, 1 any fails."""
    import json

    from .explain import explain, text

    design, measured = _measured_design(args)
    report = _run_check(args, _pinned(design, measured))
    doc = explain(design, report, driver=args.driver, receiver=args.receiver, edge=args.edge)
    sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n" if args.json else text(doc))
    return EXIT_PASS if doc["verdict"] == "pass" else EXIT_FAIL


def cmd_plot(args) -> int:
    """Pictures: pin waveforms for one driver and edge, or the driver x receiver margin map."""
    from . import plots

    if Path(args.out).suffix.lower() not in plots.FORMATS:
        raise InputError(f"{args.out}: unknown picture format; use one of {', '.join(plots.FORMATS)}")
    if args.along:
        return _plot_along(args)
    if args.data or args.t_stop is not None:
        raise InputError(f"{'--data' if args.data else '--t-stop'} goes with --along (the space-time picture)")
    design = load_design(args.design)
    if args.map:
        report = _run_check(args, design)
        fig = plots.margin_map_figure(report)
    else:
        if not args.driver or not args.edge:
            raise InputError("plot needs --driver and --edge (or --map for the margin map)")
        fig = plots.waveform_figure(design, args.driver, args.edge,
                                    receivers=[args.receiver] if args.receiver else None,
                                    corners=not args.no_corners)
    plots.save(fig, args.out)
    print(f"wrote {args.out}")
    return EXIT_PASS


def _plot_along(args) -> int:
    """plot --along: the voltage along every segment, stub and pin against time (budget.along)."""
    from . import plots
    from .along import along
    from .along_figure import along_figure

    if args.map:
        raise InputError("--along and --map are two different pictures; give one of them")
    if args.receiver or args.no_corners:
        raise InputError(f"{'--receiver' if args.receiver else '--no-corners'} belongs to the waveform plot, "
                         "not to --along (which shows every tap)")
    if not args.driver or not args.edge:
        raise InputError("plot --along needs --driver and --edge")
    if args.data and Path(args.data).suffix.lower() not in (".json", ".csv"):
        raise InputError(f"{args.data}: unknown data format; use .json or .csv")
    for target in (args.out, args.data):
        if target and not Path(target).resolve().parent.is_dir():
            raise InputError(f"{target}: the folder does not exist")
    design = load_design(args.design)
    waves = along(design, args.driver, args.edge, t_stop=args.t_stop)
    fig = along_figure(design, args.driver, args.edge, waves=waves,
                       t_max=float(waves.t[-1]) if args.t_stop is not None else None)
    plots.save(fig, args.out)
    print(f"wrote {args.out}")
    if args.data:
        waves.write(args.data)
        print(f"wrote {args.data}")
    for note in waves.notes:
        print(f"note: {note}", file=sys.stderr)
    return EXIT_PASS


def cmd_log(args) -> int:
    """Print the records of a log file (busbudget.record/1 lines) and any damaged line."""
    import json

    from .records import log_table, read_records

    log = read_records(args.file)
    if args.json:
        doc = {"schema": "busbudget.log/1", "path": log.path, "records": log.records,
               "problems": [{"line": p.line, "kind": p.kind, "text": p.text} for p in log.problems]}
        sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n")
    else:
        sys.stdout.write(log_table(log))
    for p in log.problems:
        print(f"busbudget: warning: {args.file}: {p}", file=sys.stderr)
    return EXIT_PASS


def cmd_tdr(args) -> int:
    """Impedance profile of a TDR capture by layer peeling (text table or busbudget.tdr/1 JSON)."""
    import json

    from .capture import read_capture
    from .errors import CaptureError
    from .tdr import tdr_profile

    cap = read_capture(args.file)
    if args.channel is None and len(cap.names) > 1:
        raise CaptureError(f"{len(cap.names)} channels ({', '.join(cap.names)}); choose the port voltage "
                           "with --channel", source=cap.source)
    name = args.channel or cap.names[0]
    prof = tdr_profile(cap.t, cap[name], source_r=args.source_r, emf=args.emf,
                       ramp=None if args.rise is None else args.rise / 0.8, t0=args.t0, cell=args.cell,
                       delay=args.delay, er_eff=args.er_eff, source=cap.source)
    doc, text = prof.to_json(), prof.text()
    if args.design is not None or args.port is not None or args.values_out is not None:
        text, doc = _tdr_values(args, prof, text, doc)
        if doc is None:   # --values-out -: the values file was the output
            return EXIT_PASS
    if args.json:
        sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n")
    else:
        sys.stdout.write(text)
    return EXIT_PASS


def _tdr_values(args, prof, text, doc):
    """tdr --design/--port/--values-out: the profile assigned to the design's line pieces (budget.tdr_values)."""
    from .tdr_values import assign_profile

    if args.design is None or args.port is None:
        raise InputError("tdr: --design and --port go together (and --values-out needs both)")
    design = load_design(args.design)
    a = assign_profile(design, prof, args.port, match=args.match, source=str(args.file))
    if args.values_out is not None:
        body = a.values_toml(f"design {args.design}, capture {args.file}")
        if args.values_out == "-":
            sys.stdout.write(body)
            return None, None
        write_atomically(args.values_out, lambda fh: fh.write(body))
        print(f"wrote {len(a.values)} value(s) to {args.values_out}", file=sys.stderr)
    return text + a.text(), dict(doc, design_values=a.to_json())


# ---------------------------------------------------------------------------
# measured values and records: the options shared by check, waves, judge and correlate

MEASURED_NOTE = ("measured values (--set/--values) replace the nominal ones and are held at their measured value "
                 "in every tolerance analysis; the values not measured still vary over their tolerance")


def _measured_options(parser, *, log: bool = True) -> None:
    """Add --set/--values (and, with log=True, --log/--serial) to a command's parser."""
    parser.add_argument("--set", action="append", default=[], metavar="PATH=VALUE", dest="settings",
                        help="a measured value replacing the nominal one, e.g. lines.trunk.z0=\"52.1 ohm\" "
                             "(a quantity with units, or an SI number); repeatable; overrides --values")
    parser.add_argument("--values", action="append", default=[], metavar="FILE", dest="values_files",
                        help="measured values: TOML (\"lines.trunk.z0\" = \"52.1 ohm\") or CSV with a "
                             "'path,value' header; repeatable")
    if log:
        parser.add_argument("--log", metavar="FILE", default=None,
                            help="append one run record (busbudget.record/1 JSON line) to FILE; needs --serial")
        parser.add_argument("--serial", metavar="SN", default=None,
                            help="serial number of the unit, written in the record; needs --log")


def _check_log_options(args) -> None:
    """--log and --serial go together (exit 2 before any work otherwise)."""
    log, serial = getattr(args, "log", None), getattr(args, "serial", None)
    if (log is None) != (serial is None):
        raise InputError("--log and --serial must be given together" +
                         (" (--serial is missing)" if serial is None else " (--log is missing)"))
    if serial is not None and not serial.strip():
        raise InputError("--serial must not be empty")


def _design_path(arg: str):
    from . import examples

    return examples.example_path(arg.split(":", 1)[1]) if arg.startswith("example:") else Path(arg)


def _measured_design(args):
    """(design with the measured values of --values/--set applied, Measured)."""
    from .measured import load_with_values

    design = load_design(args.design)
    return load_with_values(design, settings=getattr(args, "settings", ()) or (),
                            files=getattr(args, "values_files", ()) or ())


def _pinned(design, measured):
    from .measured import pin

    return pin(design, measured)


def _measured_text(measured, design) -> str:
    if not measured:
        return ""
    lines = ["", "Measured values (" + MEASURED_NOTE[len("measured values (--set/--values) "):] + "):"]
    for m in measured.to_json(design):
        lines.append(f"  {m['path']} = {m['given']}  ({m['origin']})")
    for n in measured.notes:
        lines.append(f"  note: {n}")
    return "\n".join(lines) + "\n"


def _print_measured_notes(measured, design) -> None:
    from .analyses import out_of_box

    for n in measured.notes:
        print(f"note: {n}", file=sys.stderr)
    if measured:
        for b in out_of_box(design):
            print(f"note: {b['path']} = {b['value']:g} is outside its tolerance box [{b['min']:g}, {b['max']:g}]",
                  file=sys.stderr)


def _append_record(args, doc: dict, command: str, measured, extra_files=()) -> None:
    """Append the run record when --log/--serial are given (hashes of the design and every input)."""
    if getattr(args, "log", None) is None:
        return
    from .records import append_record, record_from_report

    files = list(measured.files if measured else ()) + [str(f) for f in extra_files]
    rec = record_from_report(doc, serial=args.serial, command=command, design_path=_design_path(args.design),
                             input_files=files, settings=tuple(measured.settings if measured else ()))
    append_record(args.log, rec)


def _channel_map(items) -> dict:
    out = {}
    for text in items or ():
        col, sep, tap = text.partition("=")
        if not sep or not col.strip() or not tap.strip():
            raise InputError(f"--channel expects COLUMN=TAP, got {text!r}")
        if col.strip() in out:
            raise InputError(f"--channel: column {col.strip()!r} given twice")
        out[col.strip()] = tap.strip()
    return out


def _judge_inputs(args):
    """(design with measured values, Measured, capture) for judge and correlate."""
    from .capture import read_capture

    _check_log_options(args)
    design, measured = _measured_design(args)
    cap = read_capture(args.capture)
    return design, measured, cap


def _finish(args, doc, text, command, measured, passed) -> int:
    import json

    _append_record(args, doc, command, measured, extra_files=[args.capture])
    body = json.dumps(doc, indent=2, allow_nan=False) + "\n" if args.json else text
    sys.stdout.write(body)
    return EXIT_PASS if passed else EXIT_FAIL


def cmd_judge(args) -> int:
    """Judge captured edges against the design's thresholds and budget (exit 0 pass, 1 fail, 2 bad input)."""
    from .analyses import out_of_box
    from .judge import judge_capture

    design, measured, cap = _judge_inputs(args)
    rep = judge_capture(design, cap, args.driver, args.edge, channels=_channel_map(args.channel),
                        t_edge=args.t_edge, levels=args.levels, remove_offset=args.remove_offset,
                        guardband=args.guardband, noise=args.noise, allow_partial=args.allow_partial)
    rep.measured = measured.to_json(design)
    rep.out_of_box = out_of_box(design) if measured else []
    rep.notes += list(measured.notes)
    return _finish(args, rep.to_json(), rep.text(), "judge", measured, rep.passed)


def cmd_correlate(args) -> int:
    """Measured vs predicted metrics (exit 0 the model describes the unit, 1 it does not, 2 bad input)."""
    from .analyses import out_of_box
    from .correlate import correlate

    design, measured, cap = _judge_inputs(args)
    rep = correlate(design, cap, args.driver, args.edge, channels=_channel_map(args.channel),
                    tolerances={"level": args.level_tolerance, "voltage": args.voltage_tolerance,
                                "time": args.time_tolerance}, noise=args.noise)
    rep.measured = measured.to_json(design)
    rep.out_of_box = out_of_box(design) if measured else []
    rep.notes += list(measured.notes)
    return _finish(args, rep.to_json(), rep.text(), "correlate", measured, rep.describes)


def _fraction(text: str) -> float:
    """argparse type: a fraction written as '5%' or a plain number (0.05)."""
    t = text.strip()
    try:
        x = float(t[:-1]) / 100.0 if t.endswith("%") else float(t)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a percentage ('5%') or a fraction (0.05), got {text!r}") from None
    import math

    if not (math.isfinite(x) and x >= 0):
        raise argparse.ArgumentTypeError(f"must be a finite fraction >= 0, got {text!r}")
    return x


def _capture_options(parser) -> None:
    parser.add_argument("design", help="design file, or example:NAME")
    parser.add_argument("--capture", required=True, metavar="FILE",
                        help="captured waveforms: CSV with a time column and one column per channel (units in "
                             "the header, e.g. 'Time (ns)', 'CH1 (mV)'; SI when none)")
    parser.add_argument("--driver", required=True, help="name of the driving tap")
    parser.add_argument("--edge", required=True, choices=("rise", "fall"))
    parser.add_argument("--channel", action="append", default=[], metavar="COLUMN=TAP",
                        help="map a capture column to a tap (repeatable); columns named like taps need none; a "
                             "column mapped to the driver gives the time origin")
    parser.add_argument("--noise", metavar="SIGMA", default=None,
                        type=_quantity_type("voltage", lambda x: x >= 0, "a voltage >= 0"),
                        help="noise sigma of the capture (default: estimated from the pre-edge samples)")
    parser.add_argument("--json", action="store_true", help="one JSON document instead of the text table")


def _quantity_type(dimension: str, check=None, what=""):
    """argparse type: a quantity with units of ``dimension`` (or an SI number), optionally checked."""
    def parse(text):
        import math

        from .errors import DesignError
        from .units import parse_quantity

        try:
            value = float(text)  # a plain number is in SI units
        except ValueError:
            try:
                value = parse_quantity(text, dimension, source="command line")
            except DesignError as exc:
                raise argparse.ArgumentTypeError(exc.reason) from None
        if not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
        if check is not None and not check(value):
            raise argparse.ArgumentTypeError(f"{text!r} is not {what}")
        return value
    return parse

def _cmd_line(args) -> int:
    """``busbudget line KIND KEY=VALUE ...``: Z0 and delay of a cross-section from its geometry."""
    import json
    import warnings

    from .geometry import KINDS, line

    dims = {}
    for item in args.dims:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise InputError(f"line: expected KEY=VALUE, got {item!r}; {args.kind} takes: "
                             f"{', '.join(KINDS.get(args.kind, ())) or 'see --help'}")
        value = value.strip()
        try:  # a bare number is SI (er, or metres); anything else goes to the unit parser
            dims[key.strip()] = float(value)
        except ValueError:
            dims[key.strip()] = value
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        cs = line(args.kind, **dims)
    notes = [str(w.message) for w in caught]
    if args.json:
        sys.stdout.write(json.dumps({"schema": "busbudget.line/1", **cs.to_json(), "warnings": notes},
                                    indent=2, allow_nan=False) + "\n")
    else:
        rows = [("kind", cs.kind, "")]
        rows += [(k, f"{v:.6g}", "" if k == "er" else "m") for k, v in cs.dims.items()]
        rows += [("z0", f"{cs.z0:.4f}", "ohm" + (" (odd mode)" if cs.z_odd is not None else "")),
                 ("delay", f"{cs.delay * 1e9:.5f}", "ns/m"), ("er_eff", f"{cs.er_eff:.5f}", "")]
        if cs.z_odd is not None:
            rows += [("z_odd", f"{cs.z_odd:.4f}", "ohm"), ("z_even", f"{cs.z_even:.4f}", "ohm"),
                     ("z_diff", f"{cs.z_diff:.4f}", "ohm"), ("er_eff_even", f"{cs.er_eff_even:.5f}", ""),
                     ("delay_even", f"{cs.delay_even * 1e9:.5f}", "ns/m")]
        width = max(len(r[0]) for r in rows)
        for name, value, unit in rows:
            print(f"{name:<{width}}  {value:>12}  {unit}".rstrip())
        print(f"formula: {cs.formula}; quasi-static, lossless; an estimate to confirm with the "
              "board maker's impedance data or a TDR measurement")
    for note in notes:
        print(f"warning: {note}", file=sys.stderr)
    return EXIT_PASS


def _cmd_estimate(args) -> int:
    """``busbudget estimate DESIGN``: loaded-line numbers and reflection coefficients, to sanity-check a simulation."""
    import json
    import math
    import textwrap

    from .estimates import RESISTIVE_RULE, discontinuities, loaded_lines

    design = load_design(args.design)
    loaded, recs = loaded_lines(design), discontinuities(design)
    if args.json:
        doc = {"schema": "busbudget.estimate/1", "design": design.bus.name, "loaded_lines": loaded.to_json(),
               "discontinuities": [r.to_json() for r in recs], "reflection_rule": RESISTIVE_RULE}
        sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n")
        return EXIT_PASS
    out = [f"Quick estimates for {design.bus.name} (closed forms, not a simulation; confirm with "
           "`busbudget check`, measurement and the part makers' data)", "",
           "Loaded lines: Z0' = Z0/sqrt(1 + Cd/C0), delay' = delay*sqrt(1 + Cd/C0)",
           textwrap.fill(f"({loaded.rule})", 100, initial_indent="  ", subsequent_indent="  ")]
    head = ("", "length", "C load", "Cd", "Z0", "Z0'", "delay", "delay'", "flight", "flight/rise")
    units = ("", "mm", "pF", "pF/m", "ohm", "ohm", "ns/m", "ns/m", "ns", "")
    rows = [head, units]
    for x in (*loaded.lines, *loaded.segments):
        ll = x.loaded
        rows.append((("line " if x in loaded.lines else "  ") + x.name, f"{x.length * 1e3:.1f}",
                     f"{x.c_assigned * 1e12:.2f}", f"{ll.cd * 1e12:.1f}", f"{ll.z0:.1f}", f"{ll.z0_loaded:.1f}",
                     f"{ll.delay * 1e9:.3f}", f"{ll.delay_loaded * 1e9:.3f}", f"{x.flight * 1e9:.3f}",
                     f"{x.section_fraction:.2f}" + ("" if x.short_enough else " *")))
    out += _table(rows)
    out.append("  * a section longer than 1/6 of the rise time: the continuum estimate is rough there")
    out += ["", "Reflection coefficients: gamma = (Z load - Z line)/(Z load + Z line), T = 1 + gamma",
            textwrap.fill(f"({RESISTIVE_RULE})", 100, initial_indent="  ", subsequent_indent="  ")]
    rows = [("where", "arriving on", "Z line", "Z load", "gamma", "T", "tau"),
            ("", "", "ohm", "ohm", "", "", "ps")]
    for r in recs:
        rows.append((r.where, r.arriving_on, f"{r.z_line:.1f}", "open" if math.isinf(r.z_load) else f"{r.z_load:.1f}",
                     f"{r.gamma:+.3f}", f"{r.transmission:.3f}", f"{r.tau * 1e12:.1f}" if r.tau else "-"))
    out += _table(rows)
    sys.stdout.write("\n".join(out) + "\n")
    return EXIT_PASS


def _cmd_bounce(args) -> int:
    """``busbudget bounce RS Z0 RL``: lattice (bounce) table of a resistive source, one line and a resistive load."""
    import json
    import math

    from .errors import DesignError
    from .estimates import bounce_table
    from .units import parse_quantity

    def ohms(text, name, *, open_ok):
        if open_ok and text.strip().lower() in ("open", "inf"):
            return math.inf
        try:
            return float(text)  # a bare number is in ohms
        except ValueError:
            pass
        try:
            return parse_quantity(text, "resistance", source="command line", key=name)
        except DesignError as exc:
            raise InputError(f"bounce: {name}: {exc.reason}") from None

    try:
        step = float(args.step)  # a bare number is in volts
    except ValueError:
        step = None
    try:
        step = parse_quantity(args.step, "voltage", source="command line", key="--step") if step is None else step
    except DesignError as exc:
        raise InputError(f"bounce: --step: {exc.reason}") from None
    from .limits import MAX_BOUNCES
    if args.n > MAX_BOUNCES:
        raise InputError(f"bounce: -n {args.n:,} arrivals is above the limit of {MAX_BOUNCES:,} "
                         "(budget.limits.MAX_BOUNCES)")
    table = bounce_table(ohms(args.rs, "RS", open_ok=True), ohms(args.z0, "Z0", open_ok=False),
                         ohms(args.rl, "RL", open_ok=True), step, args.n)
    if args.json:
        rows = [{"t": r.t, "end": r.end, "incident": r.incident, "reflected": r.reflected, "voltage": r.voltage}
                for r in table.rows]
        doc = {"schema": "busbudget.bounce/1", "gamma_source": table.gamma_source, "gamma_load": table.gamma_load,
               "v_launch": table.v_launch, "v_final": table.v_final, "time_unit": "one-way delay TD", "rows": rows}
        sys.stdout.write(json.dumps(doc, indent=2, allow_nan=False) + "\n")
    else:
        sys.stdout.write(table.text())
    return EXIT_PASS


def _table(rows) -> list[str]:
    """Rows of strings as aligned text lines: the first column left-aligned, the rest right-aligned."""
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return ["  " + "  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))).rstrip()
            for r in rows]


def _count(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if n < 0:
        raise argparse.ArgumentTypeError(f"must be 0 or more, got {n}")
    return n


def _positive(text: str) -> int:
    n = _count(text)
    if n < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return n


def _analysis_options(parser) -> None:
    from .check import DISTRIBUTIONS, MAX_CORNERS, SEARCH_GENERATIONS

    from .analyses import DEFAULT_MAX_SIMULATIONS

    scope = parser.add_mutually_exclusive_group()
    scope.add_argument("--corners", action="store_true",
                       help="evaluate every corner of the [tolerances] box (2**k variants) whatever their number "
                            "(by default they are evaluated when corners x drivers x edges is at most "
                            f"{DEFAULT_MAX_SIMULATIONS})")
    scope.add_argument("--nominal", action="store_true",
                       help="evaluate the nominal design alone (no tolerance analysis)")
    parser.add_argument("--monte-carlo", type=_count, default=0, metavar="N",
                        help="also evaluate N random variants inside the tolerance box")
    parser.add_argument("--seed", type=_count, default=None, metavar="S",
                        help="seed of the Monte Carlo draws and of the search (default: a fresh one, reported)")
    parser.add_argument("--distribution", choices=DISTRIBUTIONS, default="uniform",
                        help="Monte Carlo sampling: uniform inside each interval (default), or normal with "
                             "the interval as +-3 sigma, truncated")
    parser.add_argument("--search", action="store_true",
                        help="also search the tolerance box for a case worse than every corner "
                             "(differential evolution, started from the worst corner)")
    parser.add_argument("--search-generations", type=_positive, default=SEARCH_GENERATIONS, metavar="G",
                        help=f"most generations of the search (default {SEARCH_GENERATIONS})")
    parser.add_argument("--max-corners", type=_positive, default=MAX_CORNERS, metavar="N",
                        help=f"refuse more corners than this (default {MAX_CORNERS})")
    parser.add_argument("--allow-long", action="store_true",
                        help="run a check whose estimated work (simulations x steps x nodes) is above the limit "
                             "budget.limits.MAX_WORK (refused otherwise, before any simulation)")
    parser.add_argument("--no-progress", action="store_true", help="no progress bar even on a terminal")


def _seconds(text: str) -> float:
    """argparse type: a time such as '5 ps' or a plain number of seconds."""
    from .errors import DesignError
    from .units import parse_quantity

    try:
        value = parse_quantity(text, "time", source="command line")
    except DesignError as exc:
        raise argparse.ArgumentTypeError(exc.reason) from None
    if not value > 0:
        raise argparse.ArgumentTypeError(f"{text!r} is not a positive time")
    return value


def cmd_warm(args) -> int:
    """Compile every kernel into numba's on-disk cache (or find it there): text table or busbudget.warm/1 JSON."""
    import json

    from .warm import warm

    log = None if args.json else (lambda m: print(f"  {m} ...", file=sys.stderr, flush=True))
    rep = warm(log=log, jobs=args.jobs)
    if args.json:
        sys.stdout.write(json.dumps(rep.to_json(), indent=2, allow_nan=False) + "\n")
    else:
        sys.stdout.write(rep.text())
    return EXIT_PASS


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="busbudget",
        description="Reflection budgets and worst-case noise margins of multi-drop buses. "
                    "Results are estimates from a linear model: confirm them by measurement and "
                    "with the part makers' data.")
    from . import __version__
    p.add_argument("--version", action="version", version=f"busbudget {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    w = sub.add_parser("waves", help="write pin waveforms of every tap as CSV")
    w.add_argument("design", help="design file, or example:NAME")
    w.add_argument("--driver", required=True, help="name of the driving tap")
    w.add_argument("--edge", required=True, choices=("rise", "fall"))
    w.add_argument("--csv", required=True, help="output CSV path ('-' for standard output)")
    w.add_argument("--dt", type=_seconds, default=None, help="time step, e.g. '5 ps' (default: automatic)")
    w.add_argument("--t-stop", type=_seconds, default=None, help="window, e.g. '40 ns' (default: automatic)")
    _measured_options(w, log=False)
    w.set_defaults(func=cmd_waves)

    wm = sub.add_parser("warm", help="compile every kernel into the on-disk cache (run once at install time)")
    wm.add_argument("--json", action="store_true", help="one busbudget.warm/1 JSON document instead of the table")
    wm.add_argument("--jobs", type=int, choices=(1, 2), default=2 if (os.cpu_count() or 1) >= 2 else 1,
                    help="processes compiling at once (default 2 on a machine with 2 or more cores)")
    wm.set_defaults(func=cmd_warm)

    e = sub.add_parser("examples", help="list the bundled example designs")
    e.set_defaults(func=cmd_examples)

    c = sub.add_parser(
        "check", help="budget report: every driver x receiver x edge, nominal and across tolerances",
        description="Check that every receiver keeps its noise margin whichever device drives: the nominal "
                    "design and, when the design has [tolerances], every corner of the tolerance box (unless "
                    "corners x drivers x edges exceeds the default limit: the report then says the box was not "
                    "covered). "
                    "Exit 0 = passes, 1 = a margin or absolute rating is violated, 2 = bad input, "
                    "3 = internal error. "
                    "Results are estimates: confirm by measurement and with the part makers' data.")
    c.add_argument("design", help="design file, or example:NAME")
    c.add_argument("--json", action="store_true",
                   help="write the JSON document (schema busbudget.check/1) instead of the text report")
    c.add_argument("--out", metavar="FILE", default=None,
                   help="write the report to FILE instead of standard output (a one-line verdict is printed)")
    _analysis_options(c)
    _measured_options(c)
    c.set_defaults(func=cmd_check)

    ex = sub.add_parser(
        "explain", help="where the margin goes: DC level + reflections + allocations, per driver/receiver/edge",
        description="Run the check and split the margin of each (driver, receiver, edge) -- its worst analysed "
                    "case -- into the DC level at the pin against the threshold, the reflection excursion and "
                    "the budget allocations; a case that fails on its DC level alone says so and names the "
                    "driver strength or termination that would reach it.  Exit 0 = every case shown passes, "
                    "1 = one fails, 2 = bad input.")
    ex.add_argument("design", help="design file, or example:NAME")
    ex.add_argument("--driver", help="only cases driven by this tap")
    ex.add_argument("--receiver", help="only cases received at this tap")
    ex.add_argument("--edge", choices=("rise", "fall"), help="only this edge")
    ex.add_argument("--json", action="store_true", help="write the JSON document (schema busbudget.explain/1)")
    _analysis_options(ex)
    _measured_options(ex, log=False)
    ex.set_defaults(func=cmd_explain)

    pl = sub.add_parser(
        "plot", help="pictures (PNG/SVG/PDF): pin waveforms with corners, or the driver x receiver margin map",
        description="busbudget plot DESIGN --driver TAP --edge rise|fall --out FILE.png: pin waveforms at every "
                    "receiver with the threshold region shaded, every tolerance corner in grey and the worst "
                    "one highlighted.  busbudget plot DESIGN --map --out FILE.png [--corners ...]: "
                    "the worst margin of every driver x receiver pair.  busbudget plot DESIGN --along --driver TAP "
                    "--edge rise|fall --out FILE.png [--data FILE.json]: the voltage along every segment, stub "
                    "and pin against time.")
    pl.add_argument("design", help="design file, or example:NAME")
    pl.add_argument("--out", required=True, metavar="FILE", help="output picture (.png, .svg or .pdf)")
    pl.add_argument("--driver", help="name of the driving tap (waveform plot)")
    pl.add_argument("--edge", choices=("rise", "fall"), help="edge (waveform plot)")
    pl.add_argument("--receiver", help="show only this receiver (waveform plot)")
    pl.add_argument("--no-corners", action="store_true", help="waveform plot: nominal design only")
    pl.add_argument("--map", action="store_true", help="driver x receiver map of the worst margins")
    pl.add_argument("--along", action="store_true",
                    help="space-time picture: the voltage along every segment, stub and pin against time for "
                         "--driver and --edge")
    pl.add_argument("--data", metavar="FILE", default=None,
                    help="with --along: also write its arrays to FILE (.json, schema busbudget.along/1, or .csv)")
    pl.add_argument("--t-stop", type=_seconds, default=None,
                    help="with --along: window simulated and drawn, e.g. '20 ns' (default: automatic, drawn until "
                         "the bus settles)")
    _analysis_options(pl)
    pl.set_defaults(func=cmd_plot)

    lg = sub.add_parser("log", help="print the run records of a log file (and any torn or corrupt line)")
    lg.add_argument("file", help="log file written with --log")
    lg.add_argument("--json", action="store_true", help="one JSON document (schema busbudget.log/1)")
    lg.set_defaults(func=cmd_log)

    td = sub.add_parser(
        "tdr", help="impedance profile of a TDR capture by layer peeling",
        description="Impedance vs round-trip time (and distance) from a TDR step response, by layer peeling "
                    "(multiple reflections included). Lossless-line estimate: confirm with impedance coupons "
                    "and the fabricator's data. Exit 0 = profile written, 2 = bad input.")
    td.add_argument("file", help="capture CSV: a time column and the port voltage (incident plus reflected)")
    td.add_argument("--source-r", required=True, metavar="R",
                    type=_quantity_type("resistance", lambda x: x > 0, "a positive resistance"),
                    help="TDR source resistance, e.g. '50 ohm'")
    td.add_argument("--emf", required=True, metavar="E",
                    type=_quantity_type("voltage", lambda x: x != 0, "a non-zero step"),
                    help="open-circuit step of the source, e.g. '250 mV'")
    g = td.add_mutually_exclusive_group()
    g.add_argument("--delay", metavar="D",
                   type=_quantity_type("delay_per_length", lambda x: x > 0, "a positive delay"),
                   help="delay per length for the distance axis, e.g. '6.7 ns/m'")
    g.add_argument("--er-eff", metavar="X", type=_quantity_type("dimensionless", lambda x: x >= 1, "at least 1"),
                   help="effective permittivity for the distance axis")
    td.add_argument("--channel", help="column holding the port voltage (default: the only channel)")
    td.add_argument("--rise", metavar="T", type=_seconds,
                    help="10-90 %% rise time of the (linear) edge; 0-100 %% = rise/0.8 (default: estimated)")
    td.add_argument("--t0", metavar="T", type=_quantity_type("time"), help="start of the edge (default: estimated)")
    td.add_argument("--cell", metavar="T", type=_seconds,
                    help="round-trip resolution, at least the edge's 0-100 %% duration (default: that duration)")
    td.add_argument("--json", action="store_true", help="one JSON document (schema busbudget.tdr/1)")
    td.add_argument("--design", metavar="DESIGN", default=None,
                    help="design file (or example:NAME) whose line segments the profile is assigned to; needs --port")
    td.add_argument("--port", metavar="TAP|NODE", default=None,
                    help="where the TDR port sits: a tap (its stub first) or an end node of the bus")
    td.add_argument("--match", choices=("delay", "order"), default="delay",
                    help="which profile span belongs to which segment: by the design's delays (default) or the "
                         "profile's segments in order from the port")
    td.add_argument("--values-out", metavar="FILE", default=None,
                    help="write the measured lines.NAME.z0 values as a values file (TOML, for --values); '-' for "
                         "standard output (then nothing else is printed)")
    td.set_defaults(func=cmd_tdr)

    ln = sub.add_parser(
        "line", help="Z0 and delay per length of a cross-section from its geometry",
        description="busbudget line KIND KEY=VALUE ... : quasi-static Z0 [ohm], delay [s/m] and effective "
                    "permittivity of a line from its geometry.  Kinds and keys: microstrip w h t er; "
                    "stripline w b t er (b ground-to-ground); coax d D er; two_wire d s er (s centre spacing); "
                    "edge_coupled_microstrip w s h t er; edge_coupled_stripline w s b t er (s gap).  Lengths "
                    "with units ('0.3 mm', '5 mil') or in metres; er plain.")
    ln.add_argument("kind", help="cross-section kind")
    ln.add_argument("dims", nargs="*", metavar="KEY=VALUE", help="dimensions, e.g. w='0.3 mm' h='0.2 mm'")
    ln.add_argument("--json", action="store_true", help="one JSON object (schema busbudget.line/1), SI units")
    ln.set_defaults(func=_cmd_line)

    es = sub.add_parser(
        "estimate", help="quick closed-form numbers: loaded-line impedance and delay, reflection coefficients",
        description="busbudget estimate DESIGN [--json]: the loaded-line estimate of every trunk segment and line "
                    "type, and the reflection and transmission coefficient at every junction, device and driver "
                    "(resistive rule).  Hand numbers to sanity-check a simulation, not a verdict.")
    es.add_argument("design", help="design file, or example:NAME")
    es.add_argument("--json", action="store_true", help="one JSON object (schema busbudget.estimate/1), SI units")
    es.set_defaults(func=_cmd_estimate)

    bo = sub.add_parser(
        "bounce", help="lattice (bounce) table: resistive source, one lossless line, resistive load",
        description="busbudget bounce RS Z0 RL [--step V] [-n N] [--json]: the voltages at both ends of one "
                    "lossless line after each reflection, in units of its one-way delay TD.  RS and RL may be "
                    "'open'.  Resistances with units ('25 ohm') or in ohms.")
    bo.add_argument("rs", help="source resistance (or 'open')")
    bo.add_argument("z0", help="line impedance")
    bo.add_argument("rl", help="load resistance (or 'open')")
    bo.add_argument("--step", default="1 V", help="source EMF step (default 1 V)")
    bo.add_argument("-n", type=_positive, default=6, help="arrivals at the load (default 6, at most 10,000)")
    bo.add_argument("--json", action="store_true", help="one JSON object (schema busbudget.bounce/1)")
    bo.set_defaults(func=_cmd_bounce)

    jd = sub.add_parser(
        "judge", help="judge captured edges by the simulation's metrics against the design's thresholds and budget",
        description="Judge each captured receiver channel by the metrics of the budget (the same kernels as the "
                    "simulation) against the design's thresholds, ratings and budget. Noise: estimated from the "
                    "pre-edge samples; the raw samples are judged, so noise counts against a margin. Exit 0 = every "
                    "channel passes, 1 = a margin or rating is violated, 2 = bad input (also a capture that misses "
                    "or cuts the edge). Results are estimates: confirm with the part makers' data.")
    _capture_options(jd)
    jd.add_argument("--t-edge", metavar="T", type=_quantity_type("time"), default=None,
                    help="time in the capture at which the driver's edge starts (flight times need it, or a "
                         "captured driver channel; otherwise they are reported as not available)")
    jd.add_argument("--levels", choices=("design", "capture"), default="design",
                    help="V_lo/V_hi from the design's DC solution (default) or from the capture's settled start "
                         "and end")
    jd.add_argument("--remove-offset", action="store_true",
                    help="shift each trace so its pre-edge level equals the design's DC level (a probe offset); "
                         "the offset is always reported")
    jd.add_argument("--guardband", metavar="V", default=0.0,
                    type=_quantity_type("voltage", lambda x: x >= 0, "a voltage >= 0"),
                    help="measurement uncertainty subtracted from every margin and rating headroom (default 0 V)")
    jd.add_argument("--allow-partial", action="store_true",
                    help="judge a capture whose window cuts the edge (marked partial; it cannot pass)")
    _measured_options(jd)
    jd.set_defaults(func=cmd_judge)

    co = sub.add_parser(
        "correlate", help="measured vs predicted metrics: does the model describe this unit?",
        description="Simulate the same driver and edge with the unit's measured values (--set/--values) and "
                    "compare each metric of the capture with the prediction. Aligned in time on the driver "
                    "channel when captured, else on the first 50 %% crossing at the first receiver channel. "
                    "Exit 0 = the model describes the unit (every metric within tolerance), 1 = it does not, "
                    "2 = bad input.")
    _capture_options(co)
    co.add_argument("--level-tolerance", metavar="PCT", type=_fraction, default=None,
                    help="V_lo/V_hi tolerance in %% of the swing (default 3%%)")
    co.add_argument("--voltage-tolerance", metavar="PCT", type=_fraction, default=None,
                    help="overshoot/undershoot/ringback/margin tolerance in %% of the swing (default 5%%)")
    co.add_argument("--time-tolerance", metavar="PCT", type=_fraction, default=None,
                    help="t_switch/t_valid tolerance in %% of the 10-90 %% edge time (default 10%%)")
    _measured_options(co)
    co.set_defaults(func=cmd_correlate)

    from .cli_solve import add_commands   # sensitivity, solve stub|termination|drops
    add_commands(sub, load_design=load_design, positive=_positive)
    return p


class _ClosedOutput:
    """Stands in for a closed standard output (``busbudget check ... >&-``): writing is bad input."""

    closed = False

    def write(self, text):
        raise InputError("standard output is closed; redirect it to a file or use --out/--csv FILE")

    def flush(self):
        pass


def main(argv=None) -> int:
    if sys.stdout is None:   # started with file descriptor 1 closed
        sys.stdout = _ClosedOutput()
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: usage errors exit 2, --help exits 0
        return int(exc.code or 0)
    try:
        return int(args.func(args))
    except BusBudgetError as exc:
        msg = " ".join(str(exc).split())
        print(f"busbudget: error: {msg}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("busbudget: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:   # the reader of standard output went away (``| head``)
        try:
            sys.stdout = open(os.devnull, "w")   # nothing more to flush at exit
        except OSError:
            pass
        print("busbudget: error: standard output was closed by its reader (broken pipe)", file=sys.stderr)
        return EXIT_INPUT
    except Exception as exc:   # a bug: say so in one line, never as bad input
        if os.environ.get(DEBUG_ENV, "") not in ("", "0"):
            import traceback
            traceback.print_exc()
        msg = " ".join(f"{type(exc).__name__}: {exc}".split())
        print(f"busbudget: internal error: {msg} -- this is a bug in busbudget; please report it with the "
              f"command and design file (set {DEBUG_ENV}=1 for the traceback)", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
