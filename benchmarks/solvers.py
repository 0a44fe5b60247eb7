"""Solver and sensitivity run times on this machine, on a bundled example (default: the backplane).

    python benchmarks/solvers.py [--example NAME] [--series E12]

Times one check (every corner) and then each solver and the sensitivity table, once each,
after a warm-up check that loads the compiled kernels, and prints each time with its ratio
to the check's time and the number of variants it simulated.  Absolute times depend on the
machine and on what else runs on it; the ratios much less.  Run it on a quiet machine.
"""
from __future__ import annotations

import argparse
import time


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--example", default="backplane", help="bundled example (default backplane)")
    ap.add_argument("--series", default="E12", help="preferred series for the termination solver (default E12)")
    args = ap.parse_args(argv)

    from budget import examples, sweep as sweep_module
    from budget.check import check
    from budget.design_file import load
    from budget.sensitivity import sensitivities
    from budget.solve import best_termination, longest_stub, most_drops, smallest_spacing

    d = load(examples.example_path(args.example))
    counted = [0]
    real_sweep = sweep_module.sweep

    def counting_sweep(design, values=None, **kw):
        res = real_sweep(design, values, **kw)
        counted[0] += res.n_variants * len(res.drivers) * len(res.edges)
        return res

    # every batch of the solvers goes through budget.sweep.sweep: count simulations (variant x driver x edge)
    import sys

    import budget.candidates
    sys.modules["budget.candidates"].sweep = counting_sweep
    sys.modules["budget.check"].sweep = counting_sweep     # (budget.check the attribute is the function)

    check(d)                                    # warm-up: compiled kernels loaded
    spacing = sum(float(s.length) for s in d.segments) / len(d.segments)
    jobs = [("check (every corner)", lambda: check(d, corners=True)),
            ("sensitivity", lambda: sensitivities(d)),
            ("solve stub", lambda: longest_stub(d)),
            (f"solve termination --series {args.series}", lambda: best_termination(d, series=args.series)),
            (f"solve drops --spacing {spacing * 1e3:g} mm", lambda: most_drops(d, spacing)),
            (f"solve drops --count {len(d.taps)}", lambda: smallest_spacing(d, len(d.taps)))]
    print(f"example:{args.example}: {len(d.taps)} taps, {len(d.drivers)} drivers; times on this machine "
          "(shared machines vary by 2x between runs)")
    print(f"{'what':<34} {'seconds':>9} {'x check':>8} {'simulations':>12}  answer")
    base = None
    for name, fn in jobs:
        counted[0] = 0
        t0 = time.perf_counter()
        res = fn()
        dt = time.perf_counter() - t0
        base = base or dt
        answer = getattr(res, "answer", None)
        if isinstance(answer, dict):
            answer = answer.get("label")
        elif isinstance(answer, float):
            answer = f"{answer * 1e3:.2f} mm"
        passes = getattr(res, "passes", getattr(res, "passed", None))
        print(f"{name:<34} {dt:>9.1f} {dt / base:>8.1f} {counted[0]:>12,}  {answer if answer is not None else ''}"
              f"{'' if passes is None else (' (passes)' if passes else ' (fails)')}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
