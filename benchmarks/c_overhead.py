"""What calling busbudget from C costs: first call in a fresh process, and C vs Python per call.

    python benchmarks/c_overhead.py                # builds the library into a temp dir
    python benchmarks/c_overhead.py --lib DIR      # use a library built with cexport/build.py --out DIR
    python benchmarks/c_overhead.py --quick        # smaller sizes, for a smoke run

Measures, on the short-bus example (one driver, three receivers, both edges):

1. the first call in a fresh C process with the kernel cache warm: the time
   from main() to the first return from the library (embedded interpreter
   start + imports) and to the first bb_check (plus kernel cache load), and
   the whole process's wall time next to a Python process doing the same;
2. a single check: bb_set + bb_check from C against Design.with_values +
   sweep in Python (the same kernel path), median time per call;
3. a 10,000-variant batch: one bb_batch from C against one sweep(...,
   keep="margin") in Python;
4. judging one captured edge (the simulated CTRL rise at MEM3 as the
   capture): bb_judge from C against budget.judge.judge_capture in Python,
   median time per call (each call also simulates the design for its levels
   and window, as the CLI judge does).

Both paths spread a batch's blocks over the same host threads
(budget.kernels.threads); numba's threading layer is not used.

The C driver is cexport/bench/calls.c.  Both sides run the same workload and
the script checks that their results are identical.  Absolute times depend on
the machine and its load; quote the ratios measured in one run.
"""
from __future__ import annotations

import argparse
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
DRIVER = ROOT / "cexport" / "bench" / "calls.c"

PY_FIRST_CALL = """\
import time, sys
t0 = time.perf_counter()
import budget
from budget.sweep import sweep
r = sweep(budget.load(sys.argv[1]))
r.worst_margin[0], r.passed[0], r.worst_index(0)
print(f"first_check {time.perf_counter() - t0:.6f}")
"""


def check_z0(i: int) -> float:
    """Same as check_z0() in calls.c [ohm]."""
    return 44.0 + 0.01 * (i % 100)


def batch_values(n: int) -> dict:
    """Same as batch_z0() / batch_r() in calls.c: z0 [ohm] and driver r_high [ohm] per variant."""
    i = np.arange(n)
    return {"lines.route.z0": 40.0 + 10.0 * i / (n - 1),
            "parts.hub_ctrl.r_high": 14.0 + 10.0 * ((i * 7919) % n) / (n - 1)}


def build(lib: Path | None, work: Path) -> Path:
    """Build the library (unless given) and compile the driver; returns the driver's path."""
    if lib is None:
        lib = work / "lib"
        subprocess.run([sys.executable, str(ROOT / "cexport" / "build.py"), "--out", str(lib)], check=True,
                       stdout=subprocess.DEVNULL)
    cc = os.environ.get("CC") or shutil.which("cc") or shutil.which("gcc")
    exe = work / "calls"
    subprocess.run([cc, "-O2", "-std=c99", "-D_POSIX_C_SOURCE=200809L", f"-I{lib}", str(DRIVER), f"-L{lib}",
                    "-lbusbudget", f"-Wl,-rpath,{lib}", "-o", str(exe)], check=True)
    return exe


def run_c(exe: Path, design: Path, n_checks: int, n_variants: int) -> tuple[dict, float]:
    """Run the C driver; returns (its printed figures, whole-process wall time [s])."""
    t0 = time.perf_counter()
    proc = subprocess.run([str(exe), str(design), str(n_checks), str(n_variants)], capture_output=True,
                          text=True, check=True)
    wall = time.perf_counter() - t0
    return {k: float(v) for k, v in (line.split() for line in proc.stdout.splitlines())}, wall


def run_py_first(design: Path) -> tuple[float, float]:
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", PY_FIRST_CALL, str(design)], capture_output=True, text=True,
                          check=True)
    wall = time.perf_counter() - t0
    return float(proc.stdout.split()[1]), wall


def python_checks(design, n: int) -> tuple[float, float]:
    """Median time [s] of with_values + sweep + the summary bb_check gives, and the checksum.

    Like the C driver's bb_set on one handle, each value replaces the previous one.
    """
    from budget.sweep import sweep
    total, per_call = 0.0, []
    for i in range(n):
        t0 = time.perf_counter()
        design = design.with_values({"lines.route.z0": check_z0(i)})
        r = sweep(design)
        r.passed[0], r.worst_index(0)
        per_call.append(time.perf_counter() - t0)
        total += float(r.worst_margin[0])
    return statistics.median(per_call), total


def python_judges(design, n: int) -> tuple[float, float]:
    """Median time [s] of judge_capture on the simulated CTRL rise at MEM3, and the margin checksum."""
    from budget import simulate
    from budget.capture import Capture
    from budget.judge import judge_capture
    w = simulate(design, "CTRL", "rise")
    total, per_call = 0.0, []
    for _ in range(n):
        t0 = time.perf_counter()
        rep = judge_capture(design, Capture.from_arrays(w.t, {"MEM3": w["MEM3"]}), "CTRL", "rise")
        per_call.append(time.perf_counter() - t0)
        total += float(rep.results[0]["margin_high"])
    return statistics.median(per_call), total


def python_batch(design, n: int) -> tuple[float, float]:
    from budget.sweep import sweep
    values = batch_values(n)
    t0 = time.perf_counter()
    r = sweep(design, values, keep="margin")
    seconds = time.perf_counter() - t0
    total = 0.0
    for w in r.worst_margin:        # same order of additions as the C driver
        total += float(w)
    return seconds, total


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--lib", type=Path, help="directory holding libbusbudget.so and busbudget.h")
    ap.add_argument("--checks", type=int, default=60, help="single checks per timing run (default 60)")
    ap.add_argument("--variants", type=int, default=10_000, help="variants in the batch (default 10000)")
    ap.add_argument("--repeat", type=int, default=4, help="timing runs per path; the fastest counts (default 4)")
    ap.add_argument("--fresh", type=int, default=5, help="fresh processes for the first-call figures (default 5)")
    ap.add_argument("--quick", action="store_true", help="10 checks, 1000 variants, 2 repeats, 3 fresh processes")
    args = ap.parse_args(argv)
    if args.quick:
        args.checks, args.variants, args.repeat, args.fresh = 10, 1000, 2, 3

    import numba

    import budget
    from budget.kernels.threads import threads
    design_path = budget.example_path("short-bus")
    design = budget.load(design_path)
    print(f"busbudget {budget.__version__}, Python {platform.python_version()}, numba {numba.__version__}, "
          f"{os.cpu_count()} CPUs, {platform.machine()}")
    print(f"design: {design.bus.name} ({len(design.drivers)} driver, {len(design.receivers)} receivers, "
          f"both edges); {threads()} host threads for the blocks on both paths")

    with tempfile.TemporaryDirectory(prefix="bb-c-overhead-") as tmp:
        exe = build(args.lib, Path(tmp))
        # warm the kernel cache and this process's kernels before timing anything
        run_c(exe, design_path, 2, 16)
        python_checks(design, 2)
        python_batch(design, 16)

        firsts = [run_c(exe, design_path, 0, 0) for _ in range(args.fresh)]
        py_firsts = [run_py_first(design_path) for _ in range(args.fresh)]
        c_runtime = statistics.median(f["first_runtime"] for f, _ in firsts)
        c_first = statistics.median(f["first_check"] for f, _ in firsts)
        c_wall = statistics.median(w for _, w in firsts)
        py_first = statistics.median(f for f, _ in py_firsts)
        py_wall = statistics.median(w for _, w in py_firsts)

        c_check = c_batch = py_check = py_batch = c_judge = py_judge = np.inf
        same_check = same_batch = same_judge = True
        for _ in range(args.repeat):     # interleaved, so both paths see the same machine load
            figs, _ = run_c(exe, design_path, args.checks, args.variants)
            c_check, c_batch = min(c_check, figs["check_median"]), min(c_batch, figs["batch_seconds"])
            per_call, check_sum = python_checks(design, args.checks)
            seconds, batch_sum = python_batch(design, args.variants)
            py_check, py_batch = min(py_check, per_call), min(py_batch, seconds)
            same_check &= check_sum == figs["check_checksum"]
            same_batch &= batch_sum == figs["batch_checksum"]
            c_judge = min(c_judge, figs["judge_median"])
            per_call, judge_sum = python_judges(design.with_values({"lines.route.z0": 45.0}), args.checks)
            py_judge = min(py_judge, per_call)
            same_judge &= judge_sum == figs["judge_checksum"]
            n_samples = int(figs["judge_samples"])

    print()
    print(f"first call in a fresh process, kernel cache warm (median of {args.fresh} processes):")
    print(f"  C  main() -> first bb_version returns (runtime start)   {c_runtime:8.3f} s")
    print(f"  C  main() -> first bb_check returns                     {c_first:8.3f} s")
    print(f"  C  whole process (exec to exit)                         {c_wall:8.3f} s")
    print(f"  Python  import -> first sweep returns                   {py_first:8.3f} s")
    print(f"  Python  whole process (exec to exit)                    {py_wall:8.3f} s")
    print(f"  ratio C / Python, whole process                         {c_wall / py_wall:8.2f}")
    print()
    print(f"per call (single checks: median of {args.checks} calls; fastest of {args.repeat} interleaved runs):")
    print(f"  single check, C (bb_set + bb_check)           {1e3 * c_check:10.2f} ms")
    print(f"  single check, Python (with_values + sweep)    {1e3 * py_check:10.2f} ms")
    print(f"  ratio C / Python                              {c_check / py_check:10.3f}")
    print(f"  {args.variants}-variant batch, C (bb_batch)        {c_batch:10.3f} s")
    print(f"  {args.variants}-variant batch, Python (sweep)      {py_batch:10.3f} s")
    print(f"  ratio C / Python                              {c_batch / py_batch:10.3f}")
    print(f"  judge one captured edge ({n_samples} samples), C (bb_judge)  {1e3 * c_judge:8.2f} ms")
    print(f"  judge one captured edge, Python (judge_capture)    {1e3 * py_judge:8.2f} ms")
    print(f"  ratio C / Python                              {c_judge / py_judge:10.3f}")
    print()
    print(f"results identical to the last bit: single checks {'yes' if same_check else 'NO'}, "
          f"batch {'yes' if same_batch else 'NO'}, judge {'yes' if same_judge else 'NO'}")
    print("Absolute times depend on this machine and its load; compare the ratios.")
    return 0 if (same_check and same_batch and same_judge) else 1


if __name__ == "__main__":
    sys.exit(main())
