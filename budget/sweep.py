"""Batch evaluation of many variants of a design: the engine behind checks, tolerances and sweeps.

``sweep(design, {"lines.trunk.z0": z0_array, ...})`` evaluates N variants for
every driver x edge and returns the metrics of every receiver as arrays.  The
variants are cut into chunks; each chunk is flattened once per (driver, edge)
with numpy arithmetic over the whole chunk (no per-variant Python work) and
evaluated by :func:`budget.kernels.evaluate.evaluate_chunk` (numba, parallel
over cores, vectorised over blocks of variants).  Waveforms are never stored,
so memory grows only with the number of variants times the metrics kept.

With ``client=`` (a ``dask.distributed.Client``) chunks run on the cluster's
workers and are gathered in order; results equal the local run bit for bit.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np

from .errors import ArgumentError
from .kernels import metrics as mk
from .early_end import settle_guard
from .kernels.evaluate import evaluate_chunk, evaluate_chunk_both
from .metrics import allocation_terms
from .model import Design
from .netlist import EDGES, FALL, RISE, auto_step, default_t_stop, flatten, ramp_time, tolerance_envelope
from .roles import driving_part
from .simulate import check_status

DEFAULT_CHUNK = 4096
KEEP = ("all", "margin")


@dataclass
class SweepResult:
    """Results of a sweep; SI units.

    Axes: variant (N), driver (``drivers``), edge (``edges``), receiver
    (``receivers``: every tap whose part can receive).  Entries where the
    receiver is the driving tap itself are NaN (metrics, margin, headroom) /
    0 (bits) and masked out of every summary.

    metrics : [N, n_drv, n_edge, n_rcv, 12] float, see budget.kernels.metrics
        (None with keep="margin")
    margin : [N, n_drv, n_edge, n_rcv] [V]
    bits : [N, n_drv, n_edge, n_rcv] int, VIOL_* bit sets
    headroom : [N, n_drv, n_edge, n_rcv] [V], lowest of margin - min_margin,
        v_max - v_peak, v_trough - v_min (budget.kernels.metrics.headroom)
    levels : [N, n_drv, n_edge, n_rcv, 2] V_lo, V_hi at each pin [V] (None with keep="margin")
    """
    drivers: tuple
    edges: tuple
    receivers: tuple
    n_variants: int
    margin: np.ndarray
    bits: np.ndarray
    metrics: np.ndarray | None
    levels: np.ndarray | None
    valid: np.ndarray  # [n_drv, n_rcv] bool: receiver != driver
    dt: dict = field(default_factory=dict)
    t_stop: dict = field(default_factory=dict)
    headroom: np.ndarray | None = None

    @property
    def passed(self) -> np.ndarray:
        """[N] bool: every (driver, edge, receiver) free of violations."""
        return ~np.any(self.bits != 0, axis=(1, 2, 3))

    @property
    def worst_margin(self) -> np.ndarray:
        """[N] lowest margin [V] over every driver, edge and receiver."""
        m = np.where(self.valid[None, :, None, :], self.margin, np.inf)
        return m.min(axis=(1, 2, 3))

    # the worst-case rule (budget.kernels.metrics.worst_along): a result with a
    # violation before one without, then the lowest headroom, then the first in
    # (driver, edge, receiver) order

    def worst_indices(self, variant: int = 0) -> tuple[int, int, int] | None:
        """(driver, edge, receiver) indices of the worst case of one variant; None if there is no case."""
        head = np.where(self.valid[:, None, :], self.headroom[variant], np.nan).ravel()
        if np.all(np.isnan(head)):
            return None
        k = int(mk.worst_along(self.bits[variant].ravel(), head))
        d, e, r = np.unravel_index(k, self.bits.shape[1:])
        return int(d), int(e), int(r)

    def worst_index(self, variant: int = 0):
        """(driver, edge, receiver) names of the worst case of one variant (see :meth:`worst_indices`)."""
        idx = self.worst_indices(variant)
        if idx is None:
            raise ArgumentError("no (driver, receiver) case: every receiver is the driving tap")
        d, e, r = idx
        return self.drivers[d], self.edges[e], self.receivers[r]

    @property
    def worst_headroom(self) -> np.ndarray:
        """[N] headroom [V] of each variant's worst case (NaN if it has no case)."""
        head = np.where(self.valid[None, :, None, :], self.headroom, np.nan).reshape(self.n_variants, -1)
        k = mk.worst_along(self.bits.reshape(self.n_variants, -1), head, axis=1)
        return np.take_along_axis(head, k[:, None], axis=1)[:, 0]

    @property
    def lowest_headroom(self) -> np.ndarray:
        """[N] lowest headroom [V] over every driver, edge and receiver (+inf if no case)."""
        h = np.where(self.valid[None, :, None, :], self.headroom, np.inf)
        return h.min(axis=(1, 2, 3))

    def worst_variant(self) -> int:
        """Index of the worst variant: the one holding the worst case over all variants."""
        head = np.where(self.valid[None, :, None, :], self.headroom, np.nan).reshape(self.n_variants, -1)
        bits = self.bits.reshape(self.n_variants, -1)
        k = int(mk.worst_along(bits.ravel(), head.ravel()))
        return k // head.shape[1]


def _as_values(design: Design, values: Mapping[str, Sequence[float]] | None):
    if not values:
        return {}, 1
    if not isinstance(values, Mapping):
        raise ArgumentError(f"values must be a mapping of dotted path -> 1-D array, got {type(values).__name__}")
    out, n = {}, None
    for path, arr in values.items():
        if not isinstance(path, str):
            raise ArgumentError(f"values: keys must be dotted parameter paths (strings), got {path!r}")
        try:
            a = np.asarray(arr, dtype=float)
        except (TypeError, ValueError, OverflowError):
            raise ArgumentError(f"values[{path!r}] must be numbers in SI units (use Design.with_values for "
                                "unit strings)") from None
        if a.ndim != 1:
            raise ArgumentError(f"values[{path!r}] must be a 1-D array, got shape {a.shape}")
        if n is not None and a.shape[0] != n:
            raise ArgumentError(f"values[{path!r}] has {a.shape[0]} entries where others have {n}")
        n = a.shape[0]
        out[path] = a
    if n == 0:
        raise ArgumentError("no variants: the value arrays are empty")
    return out, n


def plan(design: Design, values: dict, edges, dt=None, t_stop=None):
    """Time step and window [s] per edge, fixed for a whole sweep.

    Chosen from :func:`budget.netlist.tolerance_envelope` over the tolerance box
    and the swept values, so a variant gives the same result in any batch.
    """
    env = tolerance_envelope(design, values)
    dts, tss = {}, {}
    for e in edges:
        dts[e] = float(dt) if dt is not None else auto_step(env, e).dt
        if t_stop is not None:
            tss[e] = float(t_stop)
        elif design.bus.t_stop is not None:
            tss[e] = float(np.max(design.bus.t_stop))
        else:
            tss[e] = default_t_stop(env, e)
    return env, dts, tss


def _receiver_arrays(design: Design, receivers, n):
    """Per-receiver thresholds, ratings and allocations as [n_rcv, n] arrays."""
    def arr(x, default):
        return np.broadcast_to(np.asarray(default if x is None else x, dtype=float), (n,))
    vil, vih, vmax, vmin, av, af = [], [], [], [], [], []
    alloc_v, alloc_f = allocation_terms(design.budget)
    for r in receivers:
        part = design.parts[design.tap(r).part]
        vil.append(arr(part.vil, 0))
        vih.append(arr(part.vih, 0))
        vmax.append(arr(part.v_max, np.inf))
        vmin.append(arr(part.v_min, -np.inf))
        av.append(arr(alloc_v, 0))
        af.append(arr(alloc_f, 0))
    return [np.ascontiguousarray(np.stack(x)) if x else np.zeros((0, n)) for x in (vil, vih, vmax, vmin, av, af)]


def limiting_term(design: Design, receiver: str, m, values: Mapping[str, float] | None = None) -> int:
    """LIMIT_* code of the term that sets the headroom of metrics vector ``m`` at tap ``receiver``.

    ``values``: the variant's overrides {path: value [SI]} (its v_max / v_min are
    used when given); the arithmetic is the kernel's
    (:func:`budget.kernels.metrics.headroom_terms`).
    """
    part = design.parts[design.tap(receiver).part]
    values = values or {}
    lim = []
    for key, default in (("v_max", math.inf), ("v_min", -math.inf)):
        x = values.get(f"parts.{part.name}.{key}", getattr(part, key))
        lim.append(default if x is None else float(x))
    return int(mk.headroom_terms(np.asarray(m, dtype=float), lim[0], lim[1], float(design.budget.min_margin))[1])


def t_ref_of(design: Design, driver: str, edge: str, n: int, net=None) -> np.ndarray:
    """Driver timing reference [s] per variant (ideal ramp or reference load; IBIS drivers: budget.ibis_timing)."""
    part = design.parts[design.tap(driver).part]
    if part.ibis is not None:
        from .ibis_timing import t_ref_ibis
        return t_ref_ibis(design, driver, edge, n, net)

    def arr(x, default=0.0):
        # always a writable copy: a read-only view would compile a second signature of ref_times
        return np.array(np.broadcast_to(np.asarray(default if x is None else x, dtype=float), (n,)))
    lo, hi = (part.v_low, part.r_low), (part.v_high, part.r_high)
    (v0, r0), (v1, r1) = (lo, hi) if edge == "rise" else (hi, lo)
    ref = part.ref_load
    out = np.empty(n)
    mk.ref_times(arr(ramp_time(design, edge)), arr(v0), arr(r0), arr(v1), arr(r1), ref is not None,
                 arr(ref.r if ref else 1.0), arr(ref.v if ref else 0.0), arr(ref.c if ref else 0.0),
                 arr(part.v_meas), part.v_meas is not None, out)
    return out


def _kernel_inputs(design: Design, driver: str, edge: str, n: int):
    receivers = tuple(r for r in design.receivers if r != driver)
    rcv_out = np.array([design.tap_names.index(r) for r in receivers], dtype=np.int64)
    return receivers, rcv_out, _receiver_arrays(design, receivers, n)


def evaluate(design: Design, driver: str, edge: str, *, dt: float, t_stop: float,
             envelope: Design | None = None, guard: float = math.inf):
    """Evaluate every variant of ``design`` (scalar or array values) for one driver and edge.

    guard [s]: end a block's window once its metrics are final and its pins have
    stayed settled this long (:mod:`budget.early_end`); math.inf: the whole window.
    Returns (receivers, metrics [N, n_rcv, 12], bits [N, n_rcv], headroom [N, n_rcv] [V],
    levels [N, n_rcv, 2]).
    """
    n = design.batch_size or 1
    net = flatten(design, driver, edge, dt=dt, t_stop=t_stop, envelope=envelope)
    receivers, rcv_out, (vil, vih, vmax, vmin, av, af) = _kernel_inputs(design, driver, edge, n)
    t_ref = t_ref_of(design, driver, edge, n, net)
    metrics = np.empty((n, len(receivers), mk.N_METRICS))
    bits = np.empty((n, len(receivers)), dtype=np.int64)
    head = np.empty((n, len(receivers)))
    levels = np.empty((n, len(receivers), 2))
    status = np.empty(n, dtype=np.int64)
    if net.devices is not None:     # IBIS parts: the non-linear kernel (budget.kernels.nonlinear)
        from .kernels.nonlinear import evaluate_chunk_nl
        evaluate_chunk_nl(net.topology, net.values, net.devices, edge == RISE, rcv_out, vil, vih, vmax, vmin, av,
                          af, float(design.budget.settle_band), float(design.budget.min_margin), t_ref,
                          metrics, bits, head, levels, status)
        check_status(status, net, design)
        return receivers, metrics, bits, head, levels
    evaluate_chunk(net.topology, net.values, edge == RISE, rcv_out, vil, vih, vmax, vmin, av, af,
                   float(design.budget.settle_band), float(design.budget.min_margin), t_ref,
                   metrics, bits, head, levels, status, float(guard))
    check_status(status, net, design)
    return receivers, metrics, bits, head, levels


def _mirrors(net_r, net_f) -> bool:
    """True when the falling edge of net_f is the mirror of net_r's rising edge (linear reuse).

    Both netlists equal except the driver's states swapped, and the driver's
    output resistance the same in both states in every variant: then the bus is
    one linear network driven by one ramped Thevenin source, and the falling
    pin waveform is V_lo + V_hi - v_rise(t) (superposition).
    """
    if net_r.devices is not None or net_f.devices is not None:   # IBIS buffers are not linear
        return False
    a, b = net_r.values, net_f.values
    if a.dt != b.dt or a.n_steps != b.n_steps:
        return False
    if not (np.array_equal(a.drv_r0, a.drv_r1) and np.array_equal(a.drv_r0, b.drv_r0)
            and np.array_equal(a.drv_v0, b.drv_v1) and np.array_equal(a.drv_v1, b.drv_v0)
            and np.array_equal(a.t_ramp, b.t_ramp)):
        return False
    for name in ("line_z0", "line_td", "res_r", "cap_c", "ind_l", "src_r", "src_v"):
        x, y = getattr(a, name), getattr(b, name)
        if x.shape != y.shape or not np.array_equal(x, y):
            return False
    for x, y in zip(net_r.topology, net_f.topology):
        if isinstance(x, np.ndarray):
            if x.shape != y.shape or not np.array_equal(x, y):
                return False
        elif x != y:
            return False
    return True


def evaluate_both(design: Design, driver: str, *, dt: float, t_stop: float, envelope: Design | None = None,
                  guard: float = math.inf):
    """Both edges from one transient when the bus is linear in the driver (see :func:`_mirrors`).

    Returns {edge: (receivers, metrics, bits, headroom, levels)} for RISE and FALL
    (as :func:`evaluate`), or None when the falling edge is not the rising one's mirror.
    The mirrored falling edge equals a simulated one to round-off
    (tests/test_stream_metrics.py states the bound).
    """
    n = design.batch_size or 1
    net_r = flatten(design, driver, RISE, dt=dt, t_stop=t_stop, envelope=envelope)
    net_f = flatten(design, driver, FALL, dt=dt, t_stop=t_stop, envelope=envelope)
    if not _mirrors(net_r, net_f):
        return None
    receivers, rcv_out, (vil, vih, vmax, vmin, av, af) = _kernel_inputs(design, driver, RISE, n)
    t_ref = np.ascontiguousarray(np.stack([t_ref_of(design, driver, RISE, n), t_ref_of(design, driver, FALL, n)]))
    nr = len(receivers)
    metrics = np.empty((2, n, nr, mk.N_METRICS))
    bits = np.empty((2, n, nr), dtype=np.int64)
    head = np.empty((2, n, nr))
    levels = np.empty((2, n, nr, 2))
    status = np.empty(n, dtype=np.int64)
    evaluate_chunk_both(net_r.topology, net_r.values, True, rcv_out, vil, vih, vmax, vmin, av, af,
                        float(design.budget.settle_band), float(design.budget.min_margin), t_ref,
                        metrics, bits, head, levels, status, float(guard))
    check_status(status, net_r, design)
    return {e: (receivers, metrics[i], bits[i], head[i], levels[i]) for i, e in enumerate((RISE, FALL))}


def _run_chunk(design: Design, values: dict, lo: int, hi: int, drivers, edges, receivers, dts, tss,
               envelope, keep, guards=None):
    """Evaluate variants lo..hi-1; returns arrays for that slice (used locally and on dask workers).

    guards: {edge: guard [s]} to end windows early and reuse the rising edge for the
    falling one where the bus is linear; None: every edge simulated over its whole window.
    """
    # the values were validated once, for the whole sweep, in sweep(): slices need no second check
    d = design._with_values_trusted({p: a[lo:hi] for p, a in values.items()}) if values else design
    n = hi - lo
    nd, ne, nr = len(drivers), len(edges), len(receivers)
    margin = np.full((n, nd, ne, nr), np.nan)
    bits = np.zeros((n, nd, ne, nr), dtype=np.int64)
    head = np.full((n, nd, ne, nr), np.nan)
    metrics = np.full((n, nd, ne, nr, mk.N_METRICS), np.nan) if keep == "all" else None
    levels = np.full((n, nd, ne, nr, 2), np.nan) if keep == "all" else None
    for i, drv in enumerate(drivers):
        both = None
        if guards is not None and RISE in edges and FALL in edges and dts[RISE] == dts[FALL] \
                and tss[RISE] == tss[FALL]:
            both = evaluate_both(d, drv, dt=dts[RISE], t_stop=tss[RISE], envelope=envelope,
                                 guard=max(guards[RISE], guards[FALL]))
        for j, e in enumerate(edges):
            if both is not None:
                rcv, m, bt, hd, lv = both[e]
            else:
                rcv, m, bt, hd, lv = evaluate(d, drv, e, dt=dts[e], t_stop=tss[e], envelope=envelope,
                                              guard=math.inf if guards is None else guards[e])
            cols = [receivers.index(r) for r in rcv]
            margin[:, i, j, cols] = m[:, :, mk.MARGIN]
            bits[:, i, j, cols] = bt
            head[:, i, j, cols] = hd
            if metrics is not None:
                metrics[:, i, j, cols, :] = m
                levels[:, i, j, cols, :] = lv
    return margin, bits, metrics, levels, head


def sweep(design: Design, values: Mapping[str, Sequence[float]] | None = None, *,
          drivers: Sequence[str] | None = None, edges: Sequence[str] = EDGES,
          dt: float | None = None, t_stop: float | None = None, keep: str = "all",
          chunk: int = DEFAULT_CHUNK, client=None,
          progress: Callable[[int, int], None] | None = None, shortcuts: bool = True) -> SweepResult:
    """Evaluate N variants of ``design`` for every driver x edge x receiver.

    Parameters
    ----------
    design : Design
    values : mapping of dotted path -> 1-D array (N,) in SI units
        Values replacing the design's, one entry per variant (e.g.
        ``{"lines.trunk.z0": np.linspace(45, 55, 101)}``).  None: the nominal design.
    drivers : taps that drive (default: every tap whose part can drive)
    edges : subset of ("rise", "fall")
    dt, t_stop : float [s], optional
        Fixed for the whole sweep; default from the envelope of the values.
    keep : "all" (every metric) or "margin" (margins and violation bits only, for huge sweeps)
    chunk : variants per chunk (memory and progress granularity)
    client : dask.distributed.Client, optional; chunks run on its workers
    progress : callable(done, total), optional
    shortcuts : bool
        True (default): a block of variants ends its window once every metric is
        final (:mod:`budget.early_end`), and a bus linear in its driver gets its
        falling edge as the mirror of the rising one (one transient for both,
        equal to round-off).  False: every edge simulated over its whole window
        (the reference the tests compare with).
    """
    if keep not in KEEP:
        raise ArgumentError(f"keep must be one of {', '.join(KEEP)}, got {keep!r}")
    for e in edges:
        if e not in EDGES:
            raise ArgumentError(f"edge must be one of {', '.join(EDGES)}, got {e!r}")
    if not edges:
        raise ArgumentError("edges is empty")
    if isinstance(edges, str):
        raise ArgumentError(f"edges must be a list of edges, got the string {edges!r}")
    if drivers is None:
        drivers = design.drivers
        if not drivers:
            raise ArgumentError("the design has no tap whose part can drive")
    else:
        if isinstance(drivers, str) or not hasattr(drivers, "__iter__"):
            raise ArgumentError(f"drivers must be a list of tap names, got {drivers!r}")
        drivers = tuple(drivers)
        if not drivers:
            raise ArgumentError("drivers is empty: give at least one tap name, or None for every driver")
    for d in drivers:
        if not isinstance(d, str):
            raise ArgumentError(f"drivers: expected tap names, got {d!r}")
        driving_part(design, d)
    if isinstance(chunk, bool) or not isinstance(chunk, (int, np.integer)) or chunk < 1:
        raise ArgumentError(f"chunk must be a positive whole number of variants, got {chunk!r}")
    for name, x in (("dt", dt), ("t_stop", t_stop)):
        if x is None:
            continue
        if isinstance(x, bool) or not isinstance(x, (int, float, np.integer, np.floating)) \
                or not math.isfinite(x) or x <= 0:
            raise ArgumentError(f"{name} must be a finite positive time in seconds (or None), got {x!r}")
    values, n = _as_values(design, values)
    edges = tuple(edges)
    receivers = design.receivers
    # validate every value once, up front, vectorised over all variants (chunks are not checked again)
    if values:
        design.with_values(values)
    env, dts, tss = plan(design, values, edges, dt, t_stop)
    nd, ne, nr = len(drivers), len(edges), len(receivers)
    margin = np.empty((n, nd, ne, nr))
    bits = np.empty((n, nd, ne, nr), dtype=np.int64)
    head = np.empty((n, nd, ne, nr))
    metrics = np.empty((n, nd, ne, nr, mk.N_METRICS)) if keep == "all" else None
    levels = np.empty((n, nd, ne, nr, 2)) if keep == "all" else None
    bounds = [(lo, min(n, lo + chunk)) for lo in range(0, n, chunk)]

    def store(lo, hi, res):
        margin[lo:hi], bits[lo:hi], head[lo:hi] = res[0], res[1], res[4]
        if metrics is not None:
            metrics[lo:hi], levels[lo:hi] = res[2], res[3]

    guards = {e: settle_guard(env, e) for e in edges} if shortcuts else None
    args = (drivers, edges, receivers, dts, tss, env, keep, guards)
    done = 0
    if client is None:
        for lo, hi in bounds:
            store(lo, hi, _run_chunk(design, values, lo, hi, *args))
            done += hi - lo
            if progress:
                progress(done, n)
    else:
        d_f = client.scatter(design, broadcast=True)
        futures = [client.submit(_run_chunk, d_f, {p: a[lo:hi] for p, a in values.items()}, 0, hi - lo, *args,
                                 pure=False) for lo, hi in bounds]
        for (lo, hi), fut in zip(bounds, futures):
            store(lo, hi, fut.result())
            done += hi - lo
            if progress:
                progress(done, n)
    valid = np.array([[r != d for r in receivers] for d in drivers], dtype=bool).reshape(nd, nr)
    return SweepResult(drivers=drivers, edges=edges, receivers=receivers, n_variants=n, margin=margin,
                       bits=bits, metrics=metrics, levels=levels, valid=valid, dt=dts, t_stop=tss,
                       headroom=head)
