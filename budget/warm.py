"""Compile (or load) every numba kernel into the on-disk cache: ``busbudget warm``.

A fresh machine pays numba's compile time once, on the first call of each
kernel; a production test rig should pay it at install time, not in its first
production slot.  :func:`warm` runs a small fixed workload through the very
code paths the commands and the C library use -- a simulation (one lane), a
batch of waveforms (a block of lanes), a budget check with its tolerance
corners (the batched evaluation), waveforms, a capture judged and correlated,
a TDR profile, the metric functions of the Python API -- so that every kernel
entry point is compiled for every argument type the package passes it, and
reports what it compiled and what it found already cached.

The cache lives where :mod:`budget.jit` puts it (``NUMBA_CACHE_DIR`` when set),
keyed on a digest of the kernel sources: run ``busbudget warm`` again after an
upgrade; it compiles nothing when the kernel sources did not change.
"""
from __future__ import annotations

import contextlib
import io
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import SimulationError

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


def _cli(*argv) -> int:
    from .cli import main

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()) as err:
        code = main(list(argv))
    if code not in (0, 1):   # 0 pass, 1 fail: both ran every kernel they need
        raise SimulationError(f"busbudget warm: 'busbudget {' '.join(argv)}' exited {code}: "
                              f"{err.getvalue().strip()}")
    return code


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


def workload(tmp: Path) -> list:
    """(label, callable) of every step of the warm-up (``tmp``: a folder for output files)."""
    cap = str(CAPTURES / "wren_unit0042_rise.csv")
    channels = ("--channel", "CH1=CTRL", "--channel", "CH2=MEM1", "--channel", "CH3=MEM3")
    return [
        ("check with tolerance corners", lambda: _cli("check", "example:short-bus", "--json")),
        ("waveforms of one edge", lambda: _cli("waves", "example:short-bus", "--driver", "CTRL", "--edge", "rise",
                                              "--csv", str(tmp / "waves.csv"))),
        ("a batch of waveforms", _batch_waveforms),
        ("judge a capture", lambda: _cli("judge", "example:short-bus", "--capture", cap, "--driver", "CTRL",
                                         "--edge", "rise", *channels)),
        ("correlate a capture", lambda: _cli("correlate", "example:short-bus", "--capture", cap, "--driver",
                                             "CTRL", "--edge", "rise", *channels)),
        ("TDR profile", lambda: _cli("tdr", str(CAPTURES / "wren_trunk_tdr.csv"), "--source-r", "50 ohm",
                                     "--emf", "250 mV", "--er-eff", "3.6")),
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
    import tempfile

    t0 = time.perf_counter()
    disp = kernel_dispatchers()
    steps = []
    with tempfile.TemporaryDirectory(prefix="busbudget-warm-") as tmp:
        for label, fn in workload(Path(tmp)):
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
