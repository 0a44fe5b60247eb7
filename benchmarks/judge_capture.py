"""Production-line timings on this machine: reading, judging and correlating the bundled Wren capture.

    python benchmarks/judge_capture.py [--repeat N]

Prints the median of N runs of each step (after one warm-up call that loads the
compiled kernels) and the ratios between them; absolute times depend on the
machine, the ratios much less.
"""
from __future__ import annotations

import argparse
import statistics
import time


def median_time(fn, repeat: int) -> float:
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return statistics.median(out)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=20, help="runs per step (default 20)")
    args = ap.parse_args(argv)

    import budget
    from budget.capture import read_capture
    from budget.correlate import correlate
    from budget.examples import capture_path
    from budget.judge import judge_capture

    design = budget.example("short-bus")
    path = capture_path("wren_unit0042_rise.csv")
    ch = {"CH1": "CTRL", "CH2": "MEM1", "CH3": "MEM3"}
    cap = read_capture(path)
    judge_capture(design, cap, "CTRL", "rise", channels=ch)          # warm-up: kernels loaded / compiled
    correlate(design, cap, "CTRL", "rise", channels=ch)
    sim = budget.simulate(design, "CTRL", "rise")
    steps = {
        "read the capture (1800 rows x 3 channels)": lambda: read_capture(path),
        "simulate the design (driver CTRL, rise)": lambda: budget.simulate(design, "CTRL", "rise"),
        "judge, simulation given": lambda: judge_capture(design, cap, "CTRL", "rise", channels=ch, sim=sim),
        "judge (simulation included)": lambda: judge_capture(design, cap, "CTRL", "rise", channels=ch),
        "correlate (simulation included)": lambda: correlate(design, cap, "CTRL", "rise", channels=ch),
    }
    times = {k: median_time(fn, args.repeat) for k, fn in steps.items()}
    base = times["judge (simulation included)"]
    print(f"median of {args.repeat} runs on this machine:")
    for k, t in times.items():
        print(f"  {k:45s} {t * 1e3:9.2f} ms   {t / base:6.2f} x judge")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
