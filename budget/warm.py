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


def workload() -> list:
    """(label, callable) of every step of the warm-up: the Python calls behind ``check`` (with tolerance
    corners), ``waves``, ``plot`` (a batch of waveforms), ``judge``, ``correlate`` and ``tdr``, and the
    metric functions of the Python API."""
    return [
        ("check with tolerance corners", _check),
        ("waveforms of one edge", _waves),
        ("a batch of waveforms", _batch_waveforms),
        ("judge a capture", _judge),
        ("correlate a capture", _correlate),
        ("TDR profile", _tdr),
        ("metric functions", _metric_api),
    ]


@dataclass
class WarmReport:
    """What :func:`warm` did: per kernel, the signatures compiled now and those loaded from the cache."""
    cache_folders: list
    seconds: float
    steps: list = field(default_factory=list)        # (label, seconds)
    kernels: list = field(default_factory=list)      # dicts: name, signatures, compiled, loaded

    @property
    def compiled(self) -> int:
        return sum(k["compiled"] for k in self.kernels)

    @property
    def loaded(self) -> int:
        return sum(k["loaded"] for k in self.kernels)

    def to_json(self) -> dict:
        return {"schema": "busbudget.warm/1", "cache_folders": self.cache_folders, "seconds": self.seconds,
                "compiled": self.compiled, "loaded": self.loaded,
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


def warm(log=None) -> WarmReport:
    """Compile or load every kernel; ``log(message)`` is called before each step."""
    t0 = time.perf_counter()
    disp = kernel_dispatchers()
    steps = []
    for label, fn in workload():
        if log:
            log(label)
        ts = time.perf_counter()
        fn()
        steps.append((label, time.perf_counter() - ts))
    kernels, folders = [], []
    for name, d in sorted(disp.items()):
        st = d.stats
        kernels.append({"name": name, "signatures": len(d.signatures),
                        "compiled": sum(st.cache_misses.values()), "loaded": sum(st.cache_hits.values())})
        if st.cache_path and st.cache_path not in folders:
            folders.append(st.cache_path)
    return WarmReport(cache_folders=folders, seconds=time.perf_counter() - t0, steps=steps, kernels=kernels)
