"""Compile (or load) every numba kernel into the on-disk cache: ``busbudget warm``.

A fresh machine pays numba's compile time once, on the first call of each
kernel; a production test rig should pay it at install time, not in its first
production slot.  :func:`warm` runs a small fixed workload through the very
Python calls the commands and the C library make -- a budget check with its
tolerance corners (the batched evaluation), one simulation (one lane), a batch
of waveforms (a block of lanes), a capture judged and correlated, a TDR
profile, the metric functions of the Python API -- so that every kernel
entry point is compiled for every argument type the package passes it, and
reports what it compiled and what it found already cached.

It also leaves beside the kernels pint's parsed unit definitions (``pint-definitions``) and the
SI factor of every unit a design can write (``unit-factors-pint-<version>.json``,
:mod:`budget.units`), so a fresh process neither parses the definitions nor imports pint.

The cache lives where :mod:`budget.jit` puts it (``NUMBA_CACHE_DIR`` when set),
keyed on a digest of the kernel sources: run ``busbudget warm`` again after an
upgrade; it compiles nothing when the kernel sources did not change.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

CAPTURES = Path(__file__).resolve().parent / "examples" / "captures"
IBIS_BUS = Path(__file__).resolve().parent / "examples" / "ibis" / "tansy_bus.toml"


def kernel_dispatchers() -> dict:
    """{"module.name": numba dispatcher} of every kernel of the package."""
    import importlib
    import pkgutil

    import numba

    from . import kernels

    names = [f"budget.kernels.{m.name}" for m in pkgutil.iter_modules(kernels.__path__)] + ["budget.tdr"]
    out = {}
    for modname in names:
        mod = importlib.import_module(modname)
        for name, obj in vars(mod).items():
            if isinstance(obj, numba.core.registry.CPUDispatcher) and obj.py_func.__module__ == modname:
                out[f"{modname.removeprefix('budget.')}.{name}"] = obj
    return out


def _batch_waveforms():
    """Waveforms of a 2-variant batch (the plots' path: a block of lanes through run_block)."""
    import budget
    from .netlist import flatten
    from .simulate import run_netlist

    d = budget.example("short-bus")
    p = sorted(d.tolerances)[0]
    batch = d.with_values({p: np.array([0.95, 1.05]) * d.params[p]})
    run_netlist(flatten(batch, "CTRL", "rise"))


def _metric_api():
    """budget.metrics.edge_metrics and smooth on a simulated edge (the Python API's own kernels)."""
    import budget
    from . import metrics

    d = budget.example("short-bus")
    w = budget.simulate(d, "CTRL", "rise")
    k = w.index("MEM1")
    v = metrics.smooth(w.t, w.v[:, k], 4 * w.dt)
    metrics.edge_metrics(w.t, v, edge="rise", v_lo=float(w.v_start[k]), v_hi=float(w.v_end[k]), vil=0.7, vih=1.7)


def _captured(edge_file: str):
    import budget
    from .capture import read_capture

    return budget.example("short-bus"), read_capture(CAPTURES / edge_file)


CHANNELS = {"CH1": "CTRL", "CH2": "MEM1", "CH3": "MEM3"}


def _check():
    import budget
    budget.check(budget.example("short-bus"))


def _check_mirrored():
    """A bus whose falling edge is the rising one's mirror: one transient for both edges."""
    import budget
    budget.check(budget.example("backplane"), nominal=True)


def _check_ibis():
    """A bus of IBIS buffers: the non-linear kernel, one lane and a block of lanes."""
    import budget
    d = budget.load(IBIS_BUS)
    budget.check(d, nominal=True)
    budget.simulate(d, d.drivers[0], "rise")


def _waves():
    import budget
    budget.simulate(budget.example("short-bus"), "CTRL", "rise")


def _judge():
    from .judge import judge_capture
    d, cap = _captured("wren_unit0042_rise.csv")
    judge_capture(d, cap, "CTRL", "rise", channels=CHANNELS)


def _correlate():
    from .correlate import correlate
    d, cap = _captured("wren_unit0042_rise.csv")
    correlate(d, cap, "CTRL", "rise", channels=CHANNELS)


def _tdr():
    from .capture import read_capture
    from .tdr import tdr_profile
    cap = read_capture(CAPTURES / "wren_trunk_tdr.csv")
    tdr_profile(cap.t, cap[cap.names[0]], source_r=50.0, emf=0.25, er_eff=3.6, source=cap.source)


def _unit_factors():
    """Enter every unit a design can write into the unit-factor table (budget.units)."""
    from .units import FACTORS
    FACTORS.fill()


def workload() -> list:
    """(label, callable) of every step of the warm-up: the Python calls behind ``check`` (with tolerance
    corners, of a bus whose edges mirror and of IBIS buffers), ``waves``, ``plot`` (a batch of
    waveforms), ``judge``, ``correlate`` and ``tdr``, and the metric functions of the Python API."""
    return [
        ("check with tolerance corners", _check),
        ("check of mirrored edges", _check_mirrored),
        ("check of IBIS buffers", _check_ibis),
        ("waveforms of one edge", _waves),
        ("a batch of waveforms", _batch_waveforms),
        ("judge a capture", _judge),
        ("correlate a capture", _correlate),
        ("TDR profile", _tdr),
        ("metric functions", _metric_api),
        ("unit factors", _unit_factors),
    ]


@dataclass
class WarmReport:
    """What :func:`warm` did: per kernel, the signatures compiled now and those loaded from the cache."""
    cache_folders: list
    seconds: float
    steps: list = field(default_factory=list)        # (label, seconds)
    kernels: list = field(default_factory=list)      # dicts: name, signatures, compiled, loaded
    helper_compiled: int = 0                         # signatures a helper process compiled (jobs=2)

    @property
    def compiled(self) -> int:
        """Signatures compiled by this warm-up (this process and its helper)."""
        return sum(k["compiled"] for k in self.kernels) + self.helper_compiled

    @property
    def loaded(self) -> int:
        """Signatures found in the cache (those the helper had just compiled not counted)."""
        return max(0, sum(k["loaded"] for k in self.kernels) - self.helper_compiled)

    def to_json(self) -> dict:
        return {"schema": "busbudget.warm/1", "cache_folders": self.cache_folders, "seconds": self.seconds,
                "compiled": self.compiled, "loaded": self.loaded, "helper_compiled": self.helper_compiled,
                "steps": [{"step": s, "seconds": t} for s, t in self.steps], "kernels": self.kernels}

    def text(self) -> str:
        w = max(len(k["name"]) for k in self.kernels)
        out = [f"busbudget warm: {self.compiled} kernel signatures compiled, {self.loaded} loaded from the cache "
               f"in {self.seconds:.1f} s"]
        out += [f"cache: {c}" for c in self.cache_folders]
        out.append(f"{'kernel':{w}s}  signatures  compiled  loaded")
        out += [f"{k['name']:{w}s}  {k['signatures']:10d}  {k['compiled']:8d}  {k['loaded']:6d}" for k in self.kernels]
        out.append("(kernels with no signature are compiled into the ones that call them)")
        return "\n".join(out) + "\n"


# Steps a second process compiles meanwhile when jobs > 1: numba compiles under the GIL, so
# the non-linear (IBIS) kernels and the production-line kernels, independent of the linear
# transient and the batched evaluation that the first check compiles, go to a helper process.
HELPER_STEPS = ("check of IBIS buffers", "judge a capture", "TDR profile", "metric functions")


def compiled_count(disp: dict) -> int:
    """Signatures the dispatchers in ``disp`` compiled (not loaded from the cache) in this process."""
    return sum(sum(d.stats.cache_misses.values()) for d in disp.values())


def run_steps(labels) -> int:
    """Run the workload steps named in ``labels``; return the signatures compiled meanwhile."""
    disp = kernel_dispatchers()
    for label, fn in workload():
        if label in labels:
            fn()
    return compiled_count(disp)


def _start_helper(labels):
    import os
    import subprocess
    import sys

    env = dict(os.environ)
    root = str(Path(__file__).resolve().parent.parent)      # this very package, wherever it lives
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    code = f"from budget.warm import run_steps; print(run_steps({tuple(labels)!r}))"
    return subprocess.Popen([sys.executable, "-c", code], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def warm(log=None, jobs: int = 1, steps=None) -> WarmReport:
    """Compile or load every kernel; ``log(message)`` is called before each step.

    jobs: processes that compile at once (1 or 2): with 2, a helper process compiles
    HELPER_STEPS while this one compiles the rest; then this process runs every step, now
    loading what the helper compiled (the report counts both).
    steps: labels of :func:`workload` to run (default: all of them)."""
    from .errors import ArgumentError
    if jobs not in (1, 2):
        raise ArgumentError(f"jobs must be 1 or 2, got {jobs!r}")
    labels = [label for label, _ in workload()]
    if steps is None:
        steps = labels
    unknown = [s for s in steps if s not in labels]
    if unknown:
        raise ArgumentError(f"unknown warm-up steps {unknown!r}; steps: {', '.join(labels)}")
    chosen = [(label, fn) for label, fn in workload() if label in steps]
    helper_steps = [label for label, _ in chosen if label in HELPER_STEPS]
    t0 = time.perf_counter()
    disp = kernel_dispatchers()
    helper, helper_compiled = None, 0
    if jobs == 2 and helper_steps:
        helper = _start_helper(helper_steps)
    done = []
    for label, fn in chosen:
        if helper is not None and label in HELPER_STEPS:
            continue
        if log:
            log(label)
        ts = time.perf_counter()
        fn()
        done.append((label, time.perf_counter() - ts))
    if helper is not None:
        if log:
            log("waiting for the helper process")
        out, err = helper.communicate()
        if helper.returncode == 0 and out.strip().splitlines():
            helper_compiled = int(out.strip().splitlines()[-1])
        elif log:
            log(f"helper process failed ({err.strip().splitlines()[-1:]}); compiling its steps here")
        for label, fn in chosen:
            if label in HELPER_STEPS:
                ts = time.perf_counter()
                fn()
                done.append((label, time.perf_counter() - ts))
    kernels, folders = [], []
    for name, d in sorted(disp.items()):
        st = d.stats
        kernels.append({"name": name, "signatures": len(d.signatures),
                        "compiled": sum(st.cache_misses.values()), "loaded": sum(st.cache_hits.values())})
        if st.cache_path and st.cache_path not in folders:
            folders.append(st.cache_path)
    return WarmReport(cache_folders=folders, seconds=time.perf_counter() - t0, steps=done, kernels=kernels,
                      helper_compiled=helper_compiled)
