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
- numerical work runs one call at a time (``_compute_lock``): numba's workqueue
  threading layer must not be entered from two threads at once, and each call
  already spreads its work over every core.  Because launches are serialised,
  :func:`bind` selects the workqueue layer for the embedded runtime (unless
  ``NUMBA_THREADING_LAYER`` says otherwise): with the OpenMP layer, its worker
  threads spinning between calls made a single check from C several times
  slower than the same check in a Python process (measured with
  benchmarks/c_overhead.py), and a rig then needs no OpenMP runtime.
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
from .errors import ArgumentError, BusBudgetError, DesignError, SimulationError
from .kernels import metrics as mk
from .limits import MAX_BATCH_VARIANTS
from .model import Design
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
    """One open design: the current (immutable) design and results cached for it."""
    __slots__ = ("lock", "design", "result", "waves")

    def __init__(self, design: Design):
        self.lock = threading.Lock()
        self.design = design
        self.result: SweepResult | None = None          # nominal sweep of ``design``
        self.waves: dict = {}                           # (driver, edge) -> Waveforms of ``design``


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


def _register(design: Design) -> int:
    with _slots_lock:
        handle = next(_ids)
        _slots[handle] = _Slot(design)
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
    return _register(design)


def open_text(text: str, source: str = "<text from C>") -> int:
    """Parse design-file text; returns a new handle."""
    try:
        design = loads(text, source=source)
    except DesignError as exc:
        raise CallFailed("BB_ERR_DESIGN", str(exc)) from None
    return _register(design)


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
    return CheckSummary(
        passed=bool(r.passed[0]), worst_margin=worst, driver=d_i, receiver=r_i, edge=e_i,
        n_cases=int(np.count_nonzero(valid)), n_failing=int(np.count_nonzero(bits[valid] != 0)),
        violations=int(np.bitwise_or.reduce(bits[valid], initial=0)), driver_name=drv, receiver_name=rcv,
        worst_headroom=head, worst_limit=int(limit), n_out_of_box=len(out_of_box(design)))


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


def runtime_info() -> str:
    """What the embedded runtime found: interpreter, package location, kernel cache."""
    import numba

    from . import __version__
    cache = os.environ.get("NUMBA_CACHE_DIR") or "(unset: next to the package's modules, " \
                                                "or numba's per-user cache if that is read-only)"
    try:
        layer = numba.threading_layer()
    except ValueError:          # no parallel kernel has run yet
        layer = f"{numba.config.THREADING_LAYER} (not started yet)"
    return "\n".join([
        f"busbudget {__version__} from {os.path.dirname(os.path.abspath(__file__))}",
        f"python {sys.version.split()[0]}: executable {sys.executable}",
        f"prefix {sys.prefix} (base {sys.base_prefix})",
        f"numba {numba.__version__}, threading layer {layer}, NUMBA_CACHE_DIR {cache}",
        f"BUSBUDGET_PYTHON {os.environ.get('BUSBUDGET_PYTHON') or '(unset: the build environment)'}",
    ])


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
                "BB_ERR_SIMULATION", "BB_ERR_INTERNAL")
LIMIT_CODES = {"BB_LIMIT_MARGIN": mk.LIMIT_MARGIN, "BB_LIMIT_V_MAX": mk.LIMIT_V_MAX,
               "BB_LIMIT_V_MIN": mk.LIMIT_V_MIN}
VIOLATION_BITS = {"BB_VIOL_MARGIN": mk.VIOL_MARGIN, "BB_VIOL_NEVER_VALID": mk.VIOL_NEVER_VALID,
                  "BB_VIOL_OVER_MAX": mk.VIOL_OVER_MAX, "BB_VIOL_UNDER_MIN": mk.VIOL_UNDER_MIN,
                  "BB_VIOL_NON_MONOTONIC": mk.VIOL_NON_MONOTONIC, "BB_VIOL_NOT_SETTLED": mk.VIOL_NOT_SETTLED}


def status_of(exc: BaseException) -> tuple[str, str]:
    """(status name, message) for an exception raised while serving a C call."""
    if isinstance(exc, CallFailed):
        return exc.status, str(exc)
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
    if not os.environ.get("NUMBA_THREADING_LAYER"):   # see the module docstring
        import numba
        numba.config.THREADING_LAYER = "workqueue"

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


__all__ = [
    "CallFailed", "CheckSummary", "open_file", "open_text", "close", "design_of", "set_value", "get_value",
    "param_names", "tap_names", "check", "out_of_box_entries", "margin_table", "receiver_margins", "waveform", "batch_counts", "batch",
    "runtime_info", "last_error", "status_of", "bind",
]
