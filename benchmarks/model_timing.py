"""Time of the model layer on this machine: loading, one with_values, and a corners check.

Prints what it measured (median of several runs, milliseconds):

- ``loads`` of the bundled backplane design text (parse + validate),
- one ``Design.with_values`` of a single value on that design,
- ``check`` of the bundled fieldbus design with ``corners=True`` (after a warm-up
  run, so numba compilation is not counted).

Usage: ``python benchmarks/model_timing.py [--repeat N]``.
"""
from __future__ import annotations

import argparse
import statistics
import time

import budget
from budget.check import check


def median_time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args(argv)
    text = budget.example_path("backplane").read_text(encoding="utf-8")
    design = budget.loads(text)          # warm the unit parser's registry
    path = "lines.backplane.z0"
    z0 = float(design.params[path])
    fieldbus = budget.example("fieldbus")
    check(fieldbus, corners=True)        # compile / load the kernels
    t_loads = median_time(lambda: budget.loads(text), args.repeat)
    t_with = median_time(lambda: design.with_values({path: z0 * 1.01}), max(args.repeat, 50))
    t_check = median_time(lambda: check(fieldbus, corners=True), max(3, args.repeat // 2))
    print("model layer timing on this machine (median)")
    print(f"  loads(backplane)                 {1e3 * t_loads:9.3f} ms")
    print(f"  with_values (one value)          {1e3 * t_with:9.3f} ms")
    print(f"  check(fieldbus, corners=True)    {1e3 * t_check:9.3f} ms")


if __name__ == "__main__":
    main()
