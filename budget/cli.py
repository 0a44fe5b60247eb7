"""Command line: ``busbudget COMMAND ...`` (see ``busbudget --help``).

Exit codes (a contract): 0 = the bus passes / the command succeeded,
1 = a margin or rating is violated, 2 = bad input (one-line message on
stderr, no output file written).

A DESIGN argument is a path to a design file, or ``example:NAME`` for a
design bundled with the package (``busbudget examples`` lists them).
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

EXIT_PASS, EXIT_FAIL, EXIT_INPUT = 0, 1, 2


class InputError(Exception):
    """Bad input found by the CLI itself (exit 2)."""


def load_design(arg: str):
    """Load a design from a path or ``example:NAME``."""
    from . import examples
    from .design_file import load

    if arg.startswith("example:"):
        return load(examples.example_path(arg.split(":", 1)[1]))
    return load(arg)


def write_atomically(path: str, write) -> None:
    """Call write(file) on a temporary file next to ``path``, then rename it into place.

    Nothing is left at ``path`` if writing fails.
    """
    target = Path(path)
    if target.is_dir():
        raise InputError(f"{path}: is a directory")
    parent = target.parent if str(target.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"{path}: the folder {parent} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=parent)
    try:
        with os.fdopen(fd, "w", newline="") as fh:
            write(fh)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


# ---------------------------------------------------------------------------
# commands

def cmd_waves(args) -> int:
    """Pin waveforms as CSV: t [s], then one column per tap [V]."""
    import numpy as np

    from .simulate import simulate

    design = load_design(args.design)
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
    return EXIT_PASS


def cmd_examples(args) -> int:
    """List the bundled example designs and where they are."""
    from .examples import EXAMPLES, example_path

    for name in EXAMPLES:
        print(f"example:{name}\t{example_path(name)}")
    return EXIT_PASS


def _seconds(text: str) -> float:
    from .units import parse_quantity

    return parse_quantity(text, "time", source="command line", key="time")


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
    w.set_defaults(func=cmd_waves)

    e = sub.add_parser("examples", help="list the bundled example designs")
    e.set_defaults(func=cmd_examples)

    for register in COMMANDS:
        register(sub)
    return p


# Other modules add sub-commands here: each entry is a function(subparsers).
COMMANDS = []


def main(argv=None) -> int:
    from .errors import BusBudgetError

    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: usage errors exit 2, --help exits 0
        return int(exc.code or 0)
    try:
        return int(args.func(args))
    except (BusBudgetError, ValueError, InputError) as exc:
        msg = " ".join(str(exc).split())
        print(f"busbudget: error: {msg}", file=sys.stderr)
        return EXIT_INPUT
    except OSError as exc:
        print(f"busbudget: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("busbudget: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
