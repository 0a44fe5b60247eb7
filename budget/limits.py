"""Stated limits on what busbudget accepts, each enforced before the work starts.

Every limit is a size a real bus design stays far below; it exists so that a mistyped
or hostile input is refused at once, with a message naming the limit and the numbers,
instead of exhausting memory or running for hours.  Raise one here if a real design
needs it (and say why in the commit).

MAX_FILE_BYTES = 16 MiB
    A design file is a few kilobytes; reading a device (``/dev/zero``) or a data dump
    whole would grow without bound.  Also: only regular files are read.
MAX_TAPS = 512
    Devices on one bus.  Multi-drop buses carry tens of devices (an RS-485 segment at
    most 256 unit loads, from memory); 512 leaves room, and bounds the drivers x
    receivers x edges x corners product that ``check`` evaluates.
MAX_NODES = 8192
    Segments of one bus (each joins two bus nodes), so the bus nodes stay below it too;
    checked when the design is built.
MAX_STEPS = 5_000_000
    Time steps of one simulation (window / step).  A 40 ns window at 10 ps is 4,000
    steps; millions mean a mistyped step or window.
MAX_BLOCK_VALUES = 64 * 1024 * 1024
    Samples held in memory for one simulated block (steps x pins x variants), about
    512 MiB of float64: refused before allocation rather than failing inside the kernel.
MAX_MONTE_CARLO = 1_000_000
    Random variants of one ``check --monte-carlo`` run.
MAX_WORK = 100_000_000_000
    Work of one ``check`` in node-steps: simulations x time steps x netlist nodes,
    estimated before the first simulation (:mod:`budget.workload`).  Measured on the
    project's shared 2-core machine: 2.1e8 to 3.0e8 node-steps per second over the
    bundled designs, so the limit is roughly 6 to 8 minutes there.  A larger check is
    refused unless long runs are allowed (``check --allow-long``, ``max_work=None``).
STEP_ESTIMATE_WORK = 1_000_000_000
    Work of one variant at the largest step tried (a lower bound, found without
    simulating) up to which the work bound also runs the step's accuracy estimate (a
    few simulations of the tolerance envelope, seconds at most) to state the exact
    work; above it a check already above ``MAX_WORK`` on the lower bound is refused
    at once, and the counts in the message are upper bounds.
MAX_BATCH_VARIANTS = 10_000_000
    Variants of one ``bb_batch`` call from C (n_variants x n_paths doubles read from the
    caller's buffer): a count beyond it is a caller's bug, refused with BB_ERR_SIZE
    before the buffer is touched.
MAX_CORNERS_RAISED = 1_048_576
    Tolerance corners of one analysis however far ``--max-corners`` (``max_corners=``)
    raises the default of 4,096: 2**20, i.e. 20 toleranced values.  The corner table is
    built before the work bound is estimated; 2**40 corners would take terabytes.
    Beyond 20 values use the Monte Carlo analysis or the worst-case search.
MAX_BOUNCES = 10_000
    Arrivals at the load of one ``bounce`` table (``bounce_table(n=)``, ``bounce -n``):
    a lattice table is read by a person; tens of rows show any settling there is.
MAX_NAME_CHARS = 256
    Characters of a name or other text value of a design (bus name, tap, node, part and
    line names); names appear in every report line and CSV header.
MAX_NAMES_LISTED = 12
    Names listed in one error message (allowed keys, nodes, taps); the rest is "...".
    Keys and tables shown in a message are cut at 80 characters, the reason at 1,000.
"""
from __future__ import annotations

MAX_FILE_BYTES = 16 * 1024 * 1024
MAX_TAPS = 512
MAX_NODES = 8192
MAX_STEPS = 5_000_000
MAX_BLOCK_VALUES = 64 * 1024 * 1024
MAX_MONTE_CARLO = 1_000_000
MAX_WORK = 100_000_000_000
STEP_ESTIMATE_WORK = 1_000_000_000
MAX_BATCH_VARIANTS = 10_000_000
MAX_CORNERS_RAISED = 1_048_576
MAX_BOUNCES = 10_000
MAX_NAME_CHARS = 256
MAX_NAMES_LISTED = 12


def listed(names, limit: int = MAX_NAMES_LISTED) -> str:
    """``names`` joined by ", ", at most ``limit`` of them, then "... (N in all)"."""
    names = [str(n) for n in names]
    if len(names) <= limit:
        return ", ".join(names)
    return ", ".join(names[:limit]) + f", ... ({len(names)} in all)"
