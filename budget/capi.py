"""Python side of the C library libbusbudget (built from ``cexport/`` with cffi's embedding mode).

The C functions declared in ``cexport/busbudget.h`` are thin: each converts its
C arguments, calls one function of this module, and turns the outcome into a
status code.  Two layers live here:

- plain-Python operations on design handles (:func:`open_file`, :func:`set_value`,
  :func:`check`, :func:`batch`...), which take and return Python values and raise
  :class:`CallFailed` or the package's own errors; they run without cffi;
- :func:`bind`, called once by the embedded runtime's init code, which registers
  one ``@ffi.def_extern`` function per C export.  No Python object or exception
  ever crosses the boundary: every failure becomes a negative status plus a
  message stored for the calling thread.

The numbers come from the same code paths as the Python API: :func:`check` and
:func:`batch` call :func:`budget.sweep.sweep` (nominal design, every driver, both
edges), :func:`waveform` calls :func:`budget.simulate`.

Concurrency (C callers may call from many threads at once):

- designs live in a table of handles (int id -> :class:`_Slot`) guarded by a lock;
  ids are never reused, so a stale handle is always detected;
- each slot holds an immutable :class:`~budget.Design`; :func:`set_value` builds the
  new design under the slot's lock and swaps it in, so concurrent readers see the
  design either before or after a change, never half of it;
- the last error message is kept per calling thread (``threading.local``; cffi
  keeps one Python thread state per C thread for the life of that thread);
- numerical work runs one call at a time (``_compute_lock``): each call already
  spreads its blocks of variants over every core on host threads
  (:mod:`budget.kernels.threads`, started per call and gone when it returns), so
  concurrent calls would only compete for the same cores.  numba's threading
  layer is never started: a rig needs no OpenMP or TBB runtime and keeps no
  worker threads between calls.
"""
from __future__ import annotations

import itertools
import math
import os
import sys
import threading
from dataclasses import dataclass

import numpy as np

from .analyses import out_of_box
from .design_file import load, loads
from .errors import ArgumentError, BusBudgetError, CaptureError, DesignError, RecordError, SimulationError
from .kernels import metrics as mk
from .capture import MAX_ROWS as MAX_CAPTURE_SAMPLES
from .capture import MIN_ROWS as MIN_CAPTURE_SAMPLES
from .limits import MAX_BATCH_VARIANTS
from .model import Design
from .records import sha256_bytes, sha256_file
from .roles import driving_part
from .simulate import simulate
from .sweep import SweepResult, limiting_term, sweep

EDGE_NAMES = ("rise", "fall")   # index = BB_RISE / BB_FALL


class CallFailed(BusBudgetError):
    """A C call failed for a reason that maps to one status code.

    ``status`` is the name of the code in busbudget.h ("BB_ERR_HANDLE"...);
    the message is what bb_last_error() gives the caller.
    """

    def __init__(self, status: str, message: str):
        self.status = status
        super().__init__(message)


@dataclass(frozen=True)
class CheckSummary:
    """What bb_check() reports; margins and headroom [V]; tap indices in design-file order (-1: no case).

    driver / receiver / edge name the worst case by the one rule
    (:meth:`budget.sweep.SweepResult.worst_indices`); worst_limit is its
    LIMIT_* code; worst_margin stays the lowest margin over every case.
    """
    passed: bool
    worst_margin: float
    driver: int
    receiver: int
    edge: int
    n_cases: int
    n_failing: int
    violations: int
    driver_name: str
    receiver_name: str
    worst_headroom: float = math.nan
    worst_limit: int = -1
    n_out_of_box: int = 0


class _Slot:
    """One open design: the current (immutable) design, results cached for it, and what a record needs.

    ``opened`` is the design as opened (what :func:`reset` returns to); ``settings``
    the ``PATH=VALUE`` lines of every value set since (one per path, the latest
    value, in the order the paths were first set), hashed into a record like the
    CLI's ``--set`` lines; ``design_sha256`` the SHA-256 of the design file's bytes
    (or of the text) at open; ``last`` the last check or judge, for :func:`log`.
    """
    __slots__ = ("lock", "design", "result", "waves", "opened", "settings", "design_sha256", "last")

    def __init__(self, design: Design, design_sha256: str | None = None):
        self.lock = threading.Lock()
        self.design = design
        self.result: SweepResult | None = None          # nominal sweep of ``design``
        self.waves: dict = {}                           # (driver, edge) -> Waveforms of ``design``
        self.opened = design
        self.settings: dict = {}                        # path -> "PATH=VALUE" line
        self.design_sha256 = design_sha256
        self.last: dict | None = None                   # {"command", "design" or "doc", "settings", ...}


_slots: dict[int, _Slot] = {}
_slots_lock = threading.Lock()
_ids = itertools.count(1)
_compute_lock = threading.Lock()
_local = threading.local()


# ---------------------------------------------------------------------------
# handles

def _slot(handle: int) -> _Slot:
    with _slots_lock:
        slot = _slots.get(handle)
    if slot is None:
        raise CallFailed("BB_ERR_HANDLE", f"design handle {handle} is not open (never opened, or closed)")
    return slot


def _register(design: Design, design_sha256: str | None = None) -> int:
    with _slots_lock:
        handle = next(_ids)
        _slots[handle] = _Slot(design, design_sha256)
    return handle


def open_file(path: str) -> int:
    """Load the design file at ``path``; returns a new handle."""
    try:
        with open(path, "rb"):
            pass
    except OSError as exc:
        raise CallFailed("BB_ERR_FILE", f"{path}: cannot open the design file ({exc.strerror or exc})") from None
    try:
        design = load(path)
    except DesignError as exc:
        raise CallFailed("BB_ERR_DESIGN", str(exc)) from None
    try:
        digest = sha256_file(path)
    except ArgumentError as exc:     # unreadable between the two reads
        raise CallFailed("BB_ERR_FILE", str(exc)) from None
    return _register(design, digest)


def open_text(text: str, source: str = "<text from C>") -> int:
    """Parse design-file text; returns a new handle."""
    try:
        design = loads(text, source=source)
    except DesignError as exc:
        raise CallFailed("BB_ERR_DESIGN", str(exc)) from None
    return _register(design, sha256_bytes(text.encode("utf-8", errors="surrogateescape")))


def close(handle: int) -> None:
    """Forget the design behind ``handle``."""
    with _slots_lock:
        if _slots.pop(handle, None) is None:
            raise CallFailed("BB_ERR_HANDLE", f"design handle {handle} is not open (never opened, or closed)")


def design_of(handle: int) -> Design:
    """The current design behind ``handle`` (with every value set so far)."""
    return _slot(handle).design


# ---------------------------------------------------------------------------
# parameters and names

def _known_path(design: Design, path: str) -> None:
    if path not in design.params:
        head = path.split(".")[0]
        near = [p for p in design.params if p.split(".")[0] == head] or list(design.params)
        hint = ", ".join(near[:8]) + (" ..." if len(near) > 8 else "")
        raise CallFailed("BB_ERR_PATH", f"{design.source}: no numeric parameter at path {path!r}; "
                                        f"known paths include: {hint}")


def set_value(handle: int, path: str, value: float | str) -> None:
    """Replace the value at dotted ``path`` by ``value`` ([SI] float, or a unit string "37 ohm").

    Goes through :meth:`Design.with_values`: the same unit, sign, plausibility
    and cross-checks as the Python API (3.1 for a c_pin is refused, with the hint
    "did you mean 3.1 pF?").
    """
    slot = _slot(handle)
    with slot.lock:
        design = slot.design
        _known_path(design, path)
        if not isinstance(value, str) and not math.isfinite(value):
            raise CallFailed("BB_ERR_VALUE", f"{design.source}: {path} = {value!r} is not a finite number")
        try:
            new = design.with_values({path: value if isinstance(value, str) else float(value)})
        except DesignError as exc:
            raise CallFailed("BB_ERR_VALUE", str(exc)) from None
        slot.design, slot.result, slot.waves = new, None, {}
        # the line a CLI user would give as --set (float repr reads back as the same double)
        slot.settings[path] = f"{path}={value if isinstance(value, str) else repr(float(value))}"


def reset(handle: int) -> None:
    """Undo every :func:`set_value` of ``handle``: back to the design as opened (nominal values)."""
    slot = _slot(handle)
    with slot.lock:
        slot.design, slot.result, slot.waves, slot.settings, slot.last = slot.opened, None, {}, {}, None


def tolerance_box(handle: int) -> list:
    """The design's tolerance box: [(dotted path, min, max)] [SI], ``[tolerances]`` order.

    The same box ``check`` varies (:attr:`budget.Design.tolerances`, absolute
    bounds); values set since the open do not change it.
    """
    return [(p, float(lo), float(hi)) for p, (lo, hi) in design_of(handle).tolerances.items()]


def get_value(handle: int, path: str) -> float:
    """Current value [SI] at dotted ``path``."""
    design = design_of(handle)
    _known_path(design, path)
    return float(design.params[path])


def param_names(handle: int) -> tuple:
    """Every dotted parameter path of the design, in design-file order."""
    return tuple(design_of(handle).params)


def tap_names(handle: int) -> tuple:
    """Tap names in design-file order (their index is the C tap index)."""
    return design_of(handle).tap_names


def _index(what: str, index: int, names) -> str:
    if not 0 <= index < len(names):
        raise ArgumentError(f"{what} index {index} is out of range 0..{len(names) - 1}")
    return names[index]


# ---------------------------------------------------------------------------
# evaluation

def _nominal(handle: int) -> tuple[Design, SweepResult]:
    """The design behind ``handle`` and its nominal sweep (computed once per design)."""
    slot = _slot(handle)
    with slot.lock:
        design, result = slot.design, slot.result
    if result is None:
        with _compute_lock:
            result = sweep(design)
        with slot.lock:
            if slot.design is design:
                slot.result = result
    return design, result


def check(handle: int) -> CheckSummary:
    """Nominal budget check: every driver, both edges, every receiver (as :func:`budget.sweep.sweep`)."""
    design, r = _nominal(handle)
    names = design.tap_names
    valid = np.broadcast_to(r.valid[:, None, :], r.margin.shape[1:])
    bits = r.bits[0]
    worst = float(r.worst_margin[0])
    idx = r.worst_indices(0)
    head, limit = math.nan, -1
    if idx is not None:
        d, e, k = idx
        drv, edge, rcv = r.drivers[d], r.edges[e], r.receivers[k]
        d_i, r_i, e_i = names.index(drv), names.index(rcv), EDGE_NAMES.index(edge)
        head = float(r.headroom[0, d, e, k])
        limit = limiting_term(design, rcv, r.metrics[0, d, e, k])
    else:   # no (driver, receiver) pair at all
        drv = rcv = ""
        d_i = r_i = e_i = -1
    _remember(handle, design, {"command": "check", "design": design})
    return CheckSummary(
        passed=bool(r.passed[0]), worst_margin=worst, driver=d_i, receiver=r_i, edge=e_i,
        n_cases=int(np.count_nonzero(valid)), n_failing=int(np.count_nonzero(bits[valid] != 0)),
        violations=int(np.bitwise_or.reduce(bits[valid], initial=0)), driver_name=drv, receiver_name=rcv,
        worst_headroom=head, worst_limit=int(limit), n_out_of_box=len(out_of_box(design)))


def _remember(handle: int, design: Design, entry: dict) -> None:
    """Keep ``entry`` as the last check or judge of ``handle`` (if the design was not replaced meanwhile)."""
    slot = _slot(handle)
    with slot.lock:
        if slot.design is design:
            slot.last = {**entry, "settings": tuple(slot.settings.values())}


def out_of_box_entries(handle: int) -> list:
    """Values of the design behind ``handle`` outside their tolerance interval (:func:`budget.analyses.out_of_box`)."""
    return out_of_box(design_of(handle))


def margin_table(handle: int) -> np.ndarray:
    """Margins [V] as [driver tap, edge (rise, fall), receiver tap]; NaN where no such case."""
    design, r = _nominal(handle)
    names = design.tap_names
    n = len(names)
    out = np.full((n, 2, n), np.nan)
    for i, drv in enumerate(r.drivers):
        for j, edge in enumerate(r.edges):
            for k, rcv in enumerate(r.receivers):
                if r.valid[i, k]:
                    out[names.index(drv), EDGE_NAMES.index(edge), names.index(rcv)] = r.margin[0, i, j, k]
    return out


def receiver_margins(handle: int) -> np.ndarray:
    """Worst margin [V] each tap sees as a receiver, over every driver and edge; NaN: cannot receive."""
    table = margin_table(handle)
    out = np.full(table.shape[0], np.nan)
    for k in range(table.shape[0]):
        col = table[:, :, k]
        col = col[~np.isnan(col)]
        if col.size:
            out[k] = col.min()
    return out


def waveform(handle: int, driver: str, edge: int, tap: str) -> tuple[np.ndarray, np.ndarray]:
    """(t [s], v [V]) at tap ``tap``'s die node when ``driver`` drives ``edge`` (0 rise, 1 fall)."""
    if edge not in (0, 1):
        raise ArgumentError(f"edge must be BB_RISE (0) or BB_FALL (1), got {edge}")
    edge_name = EDGE_NAMES[edge]
    slot = _slot(handle)
    with slot.lock:
        design, w = slot.design, slot.waves.get((driver, edge_name))
    if w is None:
        driving_part(design, driver)   # unknown tap or one that cannot drive -> ArgumentError
        with _compute_lock:
            w = simulate(design, driver, edge_name)
        with slot.lock:
            if slot.design is design:
                slot.waves = {(driver, edge_name): w}
    return w.t, w[tap]


CAPTURE_SOURCE = "<capture from C>"   # how a capture passed in C arrays is named in messages and records


def capture_sha256(t: np.ndarray, v: np.ndarray) -> str:
    """SHA-256 of a capture passed in arrays: the little-endian float64 bytes of t, then of v."""
    return sha256_bytes(np.ascontiguousarray(t, dtype="<f8").tobytes() + np.ascontiguousarray(v, dtype="<f8").tobytes())


def judge(handle: int, driver: str, edge: int, receiver: str, t: np.ndarray, v: np.ndarray, *,
          guardband: float = 0.0, t_edge: float | None = None) -> dict:
    """Judge one captured edge at ``receiver``: t [s], v [V]; guardband [V]; t_edge [s] or None.

    The CLI ``judge`` path: :func:`budget.judge.judge_capture` on a one-channel
    :class:`budget.capture.Capture` whose column is named like the receiver
    (defaults of the command: levels from the design, offset kept, noise
    estimated, a window that cuts the edge refused).  Returns its result row
    (the ``results[0]`` of ``busbudget.judge/1``) with the violation bits added.
    """
    from .capture import Capture
    from .judge import judge_capture

    if edge not in (0, 1):
        raise ArgumentError(f"edge must be BB_RISE (0) or BB_FALL (1), got {edge}")
    design = design_of(handle)
    if receiver == driver:
        raise ArgumentError(f"tap {receiver!r} is the driver; judge another receiver")
    design.tap(receiver)          # unknown tap: ArgumentError naming the taps
    cap = Capture.from_arrays(t, {receiver: v}, source=CAPTURE_SOURCE)
    with _compute_lock:
        rep = judge_capture(design, cap, driver, EDGE_NAMES[edge], guardband=float(guardband), t_edge=t_edge)
    doc = rep.to_json()
    row = dict(doc["results"][0])
    row["bits"] = sum(bit for bit, name in mk.VIOLATION_NAMES if name in row["violations"])
    _remember(handle, design, {"command": "judge", "doc": doc, "capture_sha256": capture_sha256(t, v)})
    return row


def record(handle: int, serial: str) -> dict:
    """The run record (busbudget.record/1) of the last check or judge of ``handle``, as the CLI writes it.

    A check is recorded as ``busbudget check --nominal --set ...`` records it (the
    nominal report of :func:`budget.check.check`); a judge as ``busbudget judge``
    records it.  ``inputs_sha256`` holds the hash of the values set (label
    ``--set``, the ``PATH=VALUE`` lines of :func:`set_value`) and, for a judge,
    of the capture arrays (label :data:`CAPTURE_SOURCE`, :func:`capture_sha256`).
    """
    from .check import check as budget_check
    from .records import hash_inputs, make_record, margins_by_receiver

    slot = _slot(handle)
    with slot.lock:
        last, digest = slot.last, slot.design_sha256
    if last is None:
        raise ArgumentError("nothing to record: no bb_check or bb_judge has run on this handle since it was "
                            "opened or reset")
    if last["command"] == "check":
        with _compute_lock:
            doc = budget_check(last["design"], nominal=True).to_json()
    else:
        doc = last["doc"]
    inputs = hash_inputs(settings=last["settings"])
    if last["command"] == "judge":
        inputs[CAPTURE_SOURCE] = last["capture_sha256"]
    return make_record(serial=serial, command=last["command"], verdict=doc["verdict"], design_sha256=digest,
                       inputs_sha256=inputs, worst=doc.get("worst"),
                       margins=margins_by_receiver(doc.get("results", ())))


def log(handle: int, path: str, serial: str) -> dict:
    """Append :func:`record` to the log at ``path`` (:func:`budget.records.append_record`); returns it."""
    from .records import append_record

    rec = record(handle, serial)
    try:
        return append_record(path, rec)
    except ArgumentError as exc:
        if str(exc).startswith(f"{path}:"):       # the log path itself is unusable
            raise CallFailed("BB_ERR_FILE", str(exc)) from None
        raise
    except RecordError as exc:
        raise CallFailed("BB_ERR_RECORD", str(exc)) from None


def batch_counts(handle: int, n_paths: int, n_variants: int) -> None:
    """Refuse impossible bb_batch counts (BB_ERR_SIZE) before any C buffer is read.

    n_paths is at most the number of the design's parameters (a path may appear
    once) and n_variants at most :data:`budget.limits.MAX_BATCH_VARIANTS`.
    """
    n_params = len(design_of(handle).params)
    if n_paths > n_params:
        raise CallFailed("BB_ERR_SIZE", f"n_paths is {n_paths} but the design has {n_params} parameters "
                                        "(each path may be given once)")
    if n_variants > MAX_BATCH_VARIANTS:
        raise CallFailed("BB_ERR_SIZE", f"n_variants is {n_variants}; at most {MAX_BATCH_VARIANTS} per call "
                                        "(budget.limits.MAX_BATCH_VARIANTS): split the batch")


def batch(handle: int, paths, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Evaluate variants: ``values[i, p]`` [SI] replaces ``paths[p]`` in variant i.

    Returns (worst margin [V] per variant, passed per variant); same path as
    ``sweep(design, {path: column}, keep="margin")``.
    """
    design = design_of(handle)
    paths = list(paths)
    if not paths:
        raise CallFailed("BB_ERR_SIZE", "n_paths is 0: give at least one parameter path to vary")
    if values.shape[0] == 0:
        raise CallFailed("BB_ERR_SIZE", "n_variants is 0: nothing to evaluate")
    for p in paths:
        _known_path(design, p)
    if len(set(paths)) != len(paths):
        dup = next(p for p in paths if paths.count(p) > 1)
        raise ArgumentError(f"path {dup!r} is given more than once")
    bad = ~np.isfinite(values)
    if bad.any():
        i, p = (int(x) for x in np.argwhere(bad)[0])
        raise CallFailed("BB_ERR_VALUE", f"{design.source}: variant {i}: {paths[p]} = {float(values[i, p])!r} "
                                         "is not a finite number")
    cols = {p: np.ascontiguousarray(values[:, k]) for k, p in enumerate(paths)}
    try:
        with _compute_lock:
            r = sweep(design, cols, keep="margin")     # validates every value first
    except DesignError as exc:
        raise CallFailed("BB_ERR_VALUE", str(exc)) from None
    return r.worst_margin, r.passed


def kernel_cache_dirs() -> list:
    """[(directory, numba locator class)] numba caches this package's compiled kernels in.

    numba's own view, from the kernels themselves (each cached dispatcher's
    cache locator, chosen when the kernel was decorated): with
    ``NUMBA_CACHE_DIR`` set and writable it is a directory under it; otherwise
    the package's ``__pycache__`` if writable, else the per-user cache.
    """
    seen = {}
    for name, module in sorted(sys.modules.items()):
        if not (name == "budget" or name.startswith("budget.")) or module is None:
            continue
        for obj in list(vars(module).values()):
            cache = getattr(obj, "_cache", None)
            path = getattr(cache, "_cache_path", None)
            if isinstance(path, str) and path not in seen:
                locator = getattr(getattr(cache, "_impl", None), "locator", None)
                seen[path] = type(locator).__name__ if locator is not None else "?"
    return sorted(seen.items())


def runtime_info() -> str:
    """What the embedded runtime found: interpreter, package location, kernel cache."""
    import numba

    from . import __version__
    from .kernels.threads import threads
    lines = [
        f"busbudget {__version__} from {os.path.dirname(os.path.abspath(__file__))}",
        f"python {sys.version.split()[0]}: executable {sys.executable}",
        f"prefix {sys.prefix} (base {sys.base_prefix})",
        f"numba {numba.__version__}; {threads()} host threads for a batch's blocks (NUMBA_NUM_THREADS)",
    ]
    env = os.environ.get("NUMBA_CACHE_DIR")
    dirs = kernel_cache_dirs()
    for path, locator in dirs:
        lines.append(f"kernel cache {path} ({locator})")
    if not dirs:
        lines.append("kernel cache: none (no cached kernel found)")
    if env and not any(p.startswith(os.path.join(env, "")) or p == env for p, _ in dirs):
        lines.append(f"NUMBA_CACHE_DIR {env} is not used (not writable?): numba caches where the line above says")
    else:
        lines.append(f"NUMBA_CACHE_DIR {env or '(unset)'}")
    lines.append(f"BUSBUDGET_PYTHON {os.environ.get('BUSBUDGET_PYTHON') or '(unset: the build environment)'}")
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# per-thread error message

def last_error() -> str:
    """Message of the calling thread's most recent failed call ("" if none failed yet)."""
    return getattr(_local, "message", "")


def _set_error(message: str) -> None:
    _local.message = message


# ---------------------------------------------------------------------------
# the C boundary

STATUS_NAMES = ("BB_NOT_STARTED", "BB_OK", "BB_FAIL", "BB_ERR_NULL", "BB_ERR_HANDLE", "BB_ERR_FILE",
                "BB_ERR_DESIGN", "BB_ERR_PATH", "BB_ERR_VALUE", "BB_ERR_SIZE", "BB_ERR_ARGUMENT",
                "BB_ERR_SIMULATION", "BB_ERR_INTERNAL", "BB_ERR_CAPTURE", "BB_ERR_RECORD")
LIMIT_CODES = {"BB_LIMIT_MARGIN": mk.LIMIT_MARGIN, "BB_LIMIT_V_MAX": mk.LIMIT_V_MAX,
               "BB_LIMIT_V_MIN": mk.LIMIT_V_MIN}
VIOLATION_BITS = {"BB_VIOL_MARGIN": mk.VIOL_MARGIN, "BB_VIOL_NEVER_VALID": mk.VIOL_NEVER_VALID,
                  "BB_VIOL_OVER_MAX": mk.VIOL_OVER_MAX, "BB_VIOL_UNDER_MIN": mk.VIOL_UNDER_MIN,
                  "BB_VIOL_NON_MONOTONIC": mk.VIOL_NON_MONOTONIC, "BB_VIOL_NOT_SETTLED": mk.VIOL_NOT_SETTLED}


def status_of(exc: BaseException) -> tuple[str, str]:
    """(status name, message) for an exception raised while serving a C call."""
    if isinstance(exc, CallFailed):
        return exc.status, str(exc)
    if isinstance(exc, CaptureError):
        return "BB_ERR_CAPTURE", str(exc)
    if isinstance(exc, RecordError):
        return "BB_ERR_RECORD", str(exc)
    if isinstance(exc, ArgumentError):
        return "BB_ERR_ARGUMENT", str(exc)
    if isinstance(exc, SimulationError):
        return "BB_ERR_SIMULATION", str(exc)
    if isinstance(exc, DesignError):
        return "BB_ERR_DESIGN", str(exc)
    return "BB_ERR_INTERNAL", f"internal error in busbudget (please report it): {type(exc).__name__}: {exc}"


def bind(ffi, lib) -> None:
    """Register the Python implementation of every function of busbudget.h with cffi.

    Called once by the embedded runtime's init code with the compiled module's
    ``ffi`` and ``lib``.  Status values come from the header (via ``lib``), not
    from this file.
    """
    code = {name: getattr(lib, name) for name in STATUS_NAMES}
    if code["BB_NOT_STARTED"] != 0 or any(code[n] == 0 for n in STATUS_NAMES[1:]):
        raise RuntimeError("busbudget.h: only BB_NOT_STARTED may be 0 (cffi returns 0 when start-up fails)")
    for name, bit in {**VIOLATION_BITS, **LIMIT_CODES}.items():
        if getattr(lib, name) != bit:
            raise RuntimeError(f"busbudget.h: {name} = {getattr(lib, name)} but the kernels use {bit}")
    NULL = ffi.NULL

    def export(fn):
        def call(*args):
            try:
                return code[fn(*args)]
            except BaseException as exc:  # nothing may cross the C boundary
                status, message = status_of(exc)
                _set_error(message)
                return code[status]
        call.__name__ = fn.__name__
        ffi.def_extern(name=fn.__name__, error=code["BB_ERR_INTERNAL"])(call)
        return fn

    def need(**pointers):
        for name, p in pointers.items():
            if p == NULL:
                raise CallFailed("BB_ERR_NULL", f"argument {name} is NULL")

    def text_arg(name, p):
        need(**{name: p})
        return ffi.string(p).decode("utf-8", errors="surrogateescape")

    def put_text(buf, size, text, what):
        data = text.encode("utf-8", errors="surrogateescape")
        if len(data) + 1 > size:
            if size > 0:
                buf[0] = b"\0"
            raise CallFailed("BB_ERR_SIZE", f"{what} needs {len(data) + 1} bytes, the buffer has {size}")
        ffi.memmove(buf, data + b"\0", len(data) + 1)

    def doubles(p, n):
        return np.frombuffer(ffi.buffer(p, 8 * n), dtype=np.float64) if n else np.empty(0)

    @export
    def bb_version(api_version, text, text_size):
        from . import __version__
        if api_version != NULL:
            api_version[0] = lib.BB_API_VERSION
        if text != NULL:
            put_text(text, text_size, __version__, "the version text")
        return "BB_OK"

    @export
    def bb_runtime_info(buf, size):
        need(buf=buf)
        put_text(buf, size, runtime_info(), "the runtime description")
        return "BB_OK"

    def bb_last_error(buf, size):
        if buf == NULL or size == 0:
            return "BB_ERR_NULL"
        data = last_error().encode("utf-8", errors="replace")
        fits = len(data) + 1 <= size
        data = data[:size - 1]
        ffi.memmove(buf, data + b"\0", len(data) + 1)
        return "BB_OK" if fits else "BB_ERR_SIZE"
    export(bb_last_error)

    @export
    def bb_open_file(path, design):
        need(path=path, design=design)
        design[0] = open_file(os.fsdecode(ffi.string(path)))
        return "BB_OK"

    @export
    def bb_open_text(toml, design):
        need(toml=toml, design=design)
        try:
            text = ffi.string(toml).decode("utf-8")
        except UnicodeDecodeError as exc:
            raise CallFailed("BB_ERR_DESIGN", f"<text from C>: the design text is not UTF-8 ({exc})") from None
        design[0] = open_text(text)
        return "BB_OK"

    @export
    def bb_close(design):
        close(design)
        return "BB_OK"

    @export
    def bb_set(design, path, value):
        p = text_arg("path", path)
        set_value(design, p, float(value))
        return "BB_OK"

    @export
    def bb_set_text(design, path, value):
        p = text_arg("path", path)
        v = text_arg("value", value)
        set_value(design, p, v)
        return "BB_OK"

    @export
    def bb_get(design, path, value):
        p = text_arg("path", path)
        need(value=value)
        value[0] = get_value(design, p)
        return "BB_OK"

    @export
    def bb_param_count(design, count):
        need(count=count)
        count[0] = len(param_names(design))
        return "BB_OK"

    @export
    def bb_param_name(design, index, buf, size):
        need(buf=buf)
        put_text(buf, size, _index("parameter", index, param_names(design)), "the parameter path")
        return "BB_OK"

    @export
    def bb_tap_count(design, count):
        need(count=count)
        count[0] = len(tap_names(design))
        return "BB_OK"

    @export
    def bb_tap_name(design, index, buf, size):
        need(buf=buf)
        put_text(buf, size, _index("tap", index, tap_names(design)), "the tap name")
        return "BB_OK"

    def cut(name):
        data = name.encode("utf-8")[:lib.BB_NAME_SIZE - 1]
        return data.decode("utf-8", errors="ignore").encode("utf-8")

    @export
    def bb_check(design, result):
        need(result=result)
        s = check(design)
        result.passed = int(s.passed)
        result.worst_margin = s.worst_margin
        result.driver, result.receiver, result.edge = s.driver, s.receiver, s.edge
        result.n_cases, result.n_failing, result.violations = s.n_cases, s.n_failing, s.violations
        result.driver_name = cut(s.driver_name)
        result.receiver_name = cut(s.receiver_name)
        result.worst_headroom, result.worst_limit = s.worst_headroom, s.worst_limit
        result.n_out_of_box = s.n_out_of_box
        return "BB_OK" if s.passed else "BB_FAIL"

    @export
    def bb_out_of_box_count(design, count):
        need(count=count)
        count[0] = len(out_of_box_entries(design))
        return "BB_OK"

    @export
    def bb_out_of_box(design, index, path, size, value, vmin, vmax):
        need(path=path)
        entries = out_of_box_entries(design)
        if not 0 <= index < len(entries):
            raise ArgumentError(f"out-of-box entry index {index} is out of range: the design has "
                                f"{len(entries)} value(s) outside its tolerance box")
        e = entries[index]
        put_text(path, size, e["path"], "the parameter path")
        for p, x in ((value, e["value"]), (vmin, e["min"]), (vmax, e["max"])):
            if p != NULL:
                p[0] = x
        return "BB_OK"

    def sized(design, count, per_tap_squared):
        n = len(tap_names(design))
        want = 2 * n * n if per_tap_squared else n
        if count != want:
            what = "2 * n_taps * n_taps" if per_tap_squared else "n_taps"
            raise CallFailed("BB_ERR_SIZE", f"count is {count} but must be {what} = {want} for this design")

    @export
    def bb_receiver_margins(design, margins, count):
        need(margins=margins)
        sized(design, count, False)
        doubles(margins, count)[:] = receiver_margins(design)
        return "BB_OK"

    @export
    def bb_margin_table(design, margins, count):
        need(margins=margins)
        sized(design, count, True)
        doubles(margins, count)[:] = margin_table(design).ravel()
        return "BB_OK"

    @export
    def bb_waveform(design, driver, edge, tap, t, v, capacity, n_samples):
        drv = text_arg("driver", driver)
        tp = text_arg("tap", tap)
        need(n_samples=n_samples)
        if capacity > 0:
            need(t=t, v=v)
        design_of(design).tap(tp)   # unknown receiving tap: ArgumentError before simulating
        tt, vv = waveform(design, drv, edge, tp)
        n_samples[0] = tt.shape[0]
        if capacity == 0 and t == NULL and v == NULL:
            return "BB_OK"
        if capacity < tt.shape[0]:
            raise CallFailed("BB_ERR_SIZE", f"the waveform has {tt.shape[0]} samples, capacity is {capacity}")
        doubles(t, tt.shape[0])[:] = tt
        doubles(v, tt.shape[0])[:] = vv
        return "BB_OK"

    @export
    def bb_batch(design, n_paths, paths, n_variants, values, worst_margin, passed):
        need(paths=paths, values=values, worst_margin=worst_margin)
        design_of(design)
        batch_counts(design, n_paths, n_variants)
        names = [text_arg(f"paths[{k}]", paths[k]) for k in range(n_paths)]
        vals = doubles(values, n_paths * n_variants).reshape(n_variants, n_paths).copy()
        worst, ok = batch(design, names, vals)
        doubles(worst_margin, n_variants)[:] = worst
        if passed != NULL:
            out = np.frombuffer(ffi.buffer(passed, ffi.sizeof("int") * n_variants), dtype=np.intc)
            out[:] = ok.astype(np.intc)
        return "BB_OK" if bool(np.all(ok)) else "BB_FAIL"

    # ---- API version 3 ----

    @export
    def bb_tolerance_count(design, count):
        need(count=count)
        count[0] = len(tolerance_box(design))
        return "BB_OK"

    @export
    def bb_tolerance(design, index, path, size, vmin, vmax):
        need(path=path)
        box = tolerance_box(design)
        if not 0 <= index < len(box):
            raise ArgumentError(f"tolerance index {index} is out of range: the design's tolerance box has "
                                f"{len(box)} entr{'y' if len(box) == 1 else 'ies'}")
        name, lo, hi = box[index]
        put_text(path, size, name, "the parameter path")
        for p, x in ((vmin, lo), (vmax, hi)):
            if p != NULL:
                p[0] = x
        return "BB_OK"

    @export
    def bb_reset(design):
        reset(design)
        return "BB_OK"

    @export
    def bb_judge(design, driver, edge, receiver, t, v, n_samples, guardband, t_edge, result):
        drv = text_arg("driver", driver)
        rcv = text_arg("receiver", receiver)
        need(t=t, v=v, result=result)
        design_of(design)
        if not MIN_CAPTURE_SAMPLES <= n_samples <= MAX_CAPTURE_SAMPLES:
            raise CallFailed("BB_ERR_SIZE", f"n_samples is {n_samples}; a capture has {MIN_CAPTURE_SAMPLES} to "
                                            f"{MAX_CAPTURE_SAMPLES} samples (budget.capture.MAX_ROWS)")
        g, te = float(guardband), float(t_edge)
        if not (math.isfinite(g) and g >= 0):
            raise ArgumentError(f"guardband must be a finite voltage >= 0, got {g!r}")
        if math.isinf(te):
            raise ArgumentError(f"t_edge must be finite, or NaN when not known; got {te!r}")
        row = judge(design, drv, edge, rcv, doubles(t, n_samples).copy(), doubles(v, n_samples).copy(),
                    guardband=g, t_edge=None if math.isnan(te) else te)
        num = (lambda x: math.nan if x is None else float(x))
        margin = row["margin_high"] if edge == 0 else row["margin_low"]
        result.passed, result.violations = int(row["pass"]), int(row["bits"])
        result.margin, result.headroom = num(margin), num(row["headroom"])
        result.limit = mk.LIMIT_NAMES.index(row["limit"])
        result.monotonic = int(bool(row["monotonic"]))
        for name in ("v_lo", "v_hi", "overshoot", "undershoot", "ringback", "v_peak", "v_trough", "t_switch",
                     "t_valid", "settle_time", "flight_min", "flight_max", "offset", "noise_sigma", "hysteresis"):
            setattr(result, name, num(row[name]))
        return "BB_OK" if row["pass"] else "BB_FAIL"

    @export
    def bb_log(design, log_path, serial):
        need(log_path=log_path)
        sn = text_arg("serial", serial)
        log(design, os.fsdecode(ffi.string(log_path)), sn)
        return "BB_OK"


__all__ = [
    "CallFailed", "CheckSummary", "open_file", "open_text", "close", "design_of", "set_value", "get_value",
    "param_names", "tap_names", "check", "out_of_box_entries", "reset", "tolerance_box", "judge", "record", "log",
    "capture_sha256", "CAPTURE_SOURCE", "margin_table", "receiver_margins", "waveform", "batch_counts", "batch",
    "runtime_info", "kernel_cache_dirs", "last_error", "status_of", "bind",
]
