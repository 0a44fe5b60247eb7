"""busbudget throughput benchmark: prints what it measured on this machine.

    python benchmarks/run.py            # full run (a few minutes on 2 cores)
    python benchmarks/run.py --quick    # reduced sizes, under a minute
    python benchmarks/run.py --json     # one JSON object on stdout

One "sim" is one transient of the bus for one driver and one edge plus the
metrics and margins at every receiver (a rising and a falling edge are two
sims).  The reference bus is benchmarks/reference_8drop.toml (it passes
nominally and fails some tolerance corners); the N-drop versions are generated
from it.  Baselines: a lean frequency-domain solve of the same bus written here
(benchmarks/fd_lean.py, numpy only), timed per variant at the accuracy both
reach against the scikit-rf oracle (tests/skrf_reference.py), whose own time is
shown as the accuracy reference it is, not as a competitor.  Absolute times
depend on the machine and its load: compare ratios measured in one run.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
REFERENCE = HERE / "reference_8drop.toml"
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))


def n_drop_text(n: int) -> str:
    """TOML text of the reference bus with ``n`` drops (same parts, lines and spacing)."""
    head = REFERENCE.read_text().split("[[segment]]")[0]
    head = head.replace("benchmark reference bus, 8 drops", f"benchmark reference bus, {n} drops")
    out = [head]
    for i in range(1, n):
        out.append(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "trunk"\nlength = "2.5 cm"\n')
    for i in range(1, n + 1):
        out.append(f'[[tap]]\nname = "U{i}"\nnode = "n{i}"\npart = "xcvr"\n'
                   'stub = { line = "stub", length = "1.5 cm" }\n')
    for node in ("n1", f"n{n}"):
        out.append(f'[[termination]]\nnode = "{node}"\ntype = "parallel"\nr = "50 ohm"\nv = "1.65 V"\n')
    tol = REFERENCE.read_text().split("[tolerances]")[1]
    out.append("[tolerances]" + tol)
    return "\n".join(out)


def long_bus_text(n: int = 32, length: float = 200.0) -> str:
    """TOML text of a long field bus: the bundled field-bus example's parts, lines, budget and
    tolerances with ``n`` nodes evenly spread over ``length`` [m] of trunk, 0.3 m drops."""
    from budget.examples import example_path
    text = example_path("fieldbus").read_text()
    head = text.split("[[segment]]")[0].replace('name = "Heron ten-node field bus"',
                                               f'name = "long field bus, {n} nodes over {length:g} m"')
    # the example's six toleranced values plus the drop impedance: 2**7 = 128 corners
    tail = "[tolerances]" + text.split("[tolerances]")[1].replace("[tolerances]\n", "")
    tail = tail.replace("[tolerances]\n", '[tolerances]\n"lines.drop.z0" = "10%"\n', 1)
    out = [head]
    for i in range(1, n):
        out.append(f'[[segment]]\nfrom = "b{i}"\nto = "b{i + 1}"\nline = "pair"\nlength = {length / (n - 1)!r}\n')
    for i in range(1, n + 1):
        out.append(f'[[tap]]\nname = "N{i}"\nnode = "b{i}"\npart = "node_xcvr"\n'
                   'stub = { line = "drop", length = "0.3 m" }\n')
    for node in ("b1", f"b{n}"):
        out.append(f'[[termination]]\nnode = "{node}"\ntype = "parallel"\nr = "120 ohm"\nv = "0 V"\n')
    out.append(tail)
    return "\n".join(out)


def random_values(design, n: int, seed: int = 1) -> dict:
    """Uniform samples inside every tolerance interval of ``design``."""
    rng = np.random.default_rng(seed)
    return {p: rng.uniform(lo, hi, n) for p, (lo, hi) in design.tolerances.items()}


def best_rate(fn, n_sims: int, repeat: int) -> float:
    """Highest sims/s over ``repeat`` runs of fn() (the least disturbed run)."""
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return n_sims / best


def measure_throughput(design, n: int, threads: int, repeat: int) -> float:
    from budget.kernels.threads import set_threads
    from budget.sweep import sweep

    values = random_values(design, n)
    set_threads(threads)
    try:
        sweep(design, {k: v[:8] for k, v in values.items()}, drivers=["U1"], edges=("rise",), keep="margin")
        return best_rate(lambda: sweep(design, values, drivers=["U1"], edges=("rise",), keep="margin"), n, repeat)
    finally:
        set_threads(None)


def child(code: str, env: dict | None = None) -> dict:
    """Run ``code`` in a fresh Python process (``env``: extra variables); it prints one JSON object
    as its last line."""
    env = dict(os.environ, **(env or {}))
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=3600)
    if proc.returncode != 0:
        raise RuntimeError(f"benchmark child failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


COLD = """
import time, json
t0 = time.perf_counter()
import budget
from budget.sweep import sweep
t1 = time.perf_counter()
d = budget.load({path!r})
w = budget.simulate(d, "U1", "rise")
t2 = time.perf_counter()
r = sweep(d, drivers=["U1"], edges=("rise",))
t3 = time.perf_counter()
print(json.dumps({{"import_s": t1 - t0, "first_simulate_s": t2 - t1, "first_sweep_s": t3 - t2, "total_s": t3 - t0}}))
"""

RSS = """
import json, resource, time
import numpy as np
import budget
from budget.sweep import sweep
d = budget.load({path!r})
rng = np.random.default_rng(3)
values = {{p: rng.uniform(lo, hi, {n}) for p, (lo, hi) in d.tolerances.items()}}
t0 = time.perf_counter()
r = sweep(d, values, drivers=["U1"], edges=("rise",), keep="margin", chunk=16384)
el = time.perf_counter() - t0
print(json.dumps({{"peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "seconds": el,
                  "n": {n}, "failures": int((~r.passed).sum())}}))
"""


COLD_COMPILE = """
import json, time
t0 = time.perf_counter()
from budget.warm import warm
rep = warm(jobs={jobs})
print(json.dumps({{"seconds": time.perf_counter() - t0, "compiled": rep.compiled, "loaded": rep.loaded,
                  "steps": dict(rep.steps)}}))
"""

LONG_BUS = """
import json, resource, sys, time
sys.path.insert(0, {here!r})
import budget
from budget.analyses import corner_values
from budget.sweep import sweep
from run import long_bus_text
d = budget.loads(long_bus_text(), source="<long field bus>")
values = corner_values(d)[0]
n = len(next(iter(values.values())))
drivers = list(d.drivers)[:{n_drivers}]
t0 = time.perf_counter()
r = sweep(d, values, drivers=drivers, edges=("rise", "fall"), keep="margin")
el = time.perf_counter() - t0
print(json.dumps({{"seconds": el, "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                  "corners": n, "drivers": len(drivers), "sims": n * len(drivers) * 2,
                  "failures": int((~r.passed).sum())}}))
"""


def fd_lean_comparison(design, engine_s_per_sim: float, repeat: int) -> dict:
    """The lean frequency-domain solve (benchmarks/fd_lean.py) against the engine, both measured
    against the scikit-rf oracle on the nominal bus, U1 rising: its points ladder until it meets
    1 % of the swing and the engine's own error; time per variant / the engine's per-sim time
    (batched sweep, one core)."""
    sys.path.insert(0, str(ROOT / "tests"))
    try:
        from skrf_reference import reference_waveforms
    except ImportError as exc:  # scikit-rf is a test extra
        return {"skipped": f"scikit-rf reference unavailable ({exc})"}
    import budget
    import fd_lean

    w = budget.simulate(design, "U1", "rise")
    t_end = float(w.t[-1])
    ref = reference_waveforms(design, "U1", "rise", t_end=t_end, step=w.dt / 4)
    swing = np.abs(w.v_end - w.v_start)
    engine_err = float((np.max(np.abs(w.v - ref.at(w.t)), axis=0) / swing).max())
    ladder = []
    out = {"engine_error": engine_err, "engine_dt_s": w.dt, "engine_s_per_sim": engine_s_per_sim,
           "t_window_over_t_stop": FD_WINDOW, "ladder": ladder}
    for n in FD_POINTS:
        def solve():
            return fd_lean.waveforms(design, "U1", "rise", t_window=FD_WINDOW * t_end, n_points=n, window="none")
        t, v, _, _ = solve()
        keep = t <= t_end
        err = float((np.max(np.abs(v[keep] - ref.at(t[keep])), axis=0) / swing).max())
        sec = min(_timed(solve) for _ in range(repeat))
        ladder.append({"points": n, "error": err, "s_per_variant": sec})
        if err <= 0.01 and "at_1pct" not in out:
            out["at_1pct"] = ladder[-1]
        if err <= engine_err:
            out["at_engine_accuracy"] = ladder[-1]
            break
    for key in ("at_1pct", "at_engine_accuracy"):
        if key in out:
            out[key] = dict(out[key], ratio=out[key]["s_per_variant"] / engine_s_per_sim)
    return out


# The lean solve's inverse-transform window (x the engine's window: the response must settle
# inside it) and its points ladder.
FD_WINDOW = 1.5
FD_POINTS = (128, 192, 256, 384, 512, 768, 1024, 1536, 2048, 3072, 4096)


def skrf_ratio(design, repeat: int) -> dict:
    """Time of the same single bus response in the frequency domain (scikit-rf) / ours."""
    sys.path.insert(0, str(ROOT / "tests"))
    try:
        from skrf_reference import reference_waveforms
    except ImportError as exc:  # scikit-rf is a test extra
        return {"skipped": f"scikit-rf reference unavailable ({exc})"}
    import budget

    w = budget.simulate(design, "U1", "rise")
    t_ours = min(_timed(lambda: budget.simulate(design, "U1", "rise")) for _ in range(repeat))
    t_ref = min(_timed(lambda: reference_waveforms(design, "U1", "rise", t_end=float(w.t[-1]), step=w.dt))
                for _ in range(max(1, repeat // 3)))
    return {"ours_s": t_ours, "skrf_s": t_ref, "ratio": t_ref / t_ours}


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


SIZES = {
    # throughput variants, repeats, drop counts, Monte Carlo variants, memory-test variants
    # long-bus drivers (all 32 in the full run: 128 corners x 32 drivers x 2 edges)
    "full": dict(n_thr=8192, repeat=3, drops=(4, 8, 16, 32, 64, 128), n_mc=100_000, n_rss=1_000_000, long_drivers=32),
    "quick": dict(n_thr=1024, repeat=2, drops=(4, 8, 16, 32, 64), n_mc=10_000, n_rss=100_000, long_drivers=2),
    "smoke": dict(n_thr=64, repeat=1, drops=(4, 8), n_mc=64, n_rss=256, long_drivers=0),  # the test suite's tiny case
}


def run(size: str = "full", log=print) -> dict:
    import numba

    import budget
    from budget.sweep import sweep

    cfg = SIZES[size]
    quick = size != "full"
    design = budget.load(REFERENCE)
    n_thr, repeat = cfg["n_thr"], cfg["repeat"]
    res = {"machine": {"cores": os.cpu_count(), "numba_threads": numba.config.NUMBA_NUM_THREADS,
                       "numba": numba.__version__, "numpy": np.__version__}, "size": size}
    from budget.netlist import flatten
    net = flatten(design, "U1", "rise")  # the step sweeps use: chosen over the whole tolerance box
    nominal = flatten(design.with_values({p: design.params[p] for p in design.tolerances}), "U1", "rise",
                      envelope=budget.loads(REFERENCE.read_text().split("[tolerances]")[0]))
    res["reference_bus"] = {"drops": 8, "dt_s": net.dt, "t_stop_s": float(design.bus.t_stop),
                            "steps": net.n_steps, "dt_nominal_only_s": nominal.dt}
    log("reference bus verdict: nominal and every tolerance corner, every driver, both edges ...")
    from budget.analyses import corner_values
    nom = sweep(design, drivers=list(design.drivers), edges=("rise", "fall"), keep="margin")
    corners = sweep(design, corner_values(design)[0], drivers=list(design.drivers), edges=("rise", "fall"),
                    keep="margin")
    res["reference_bus"]["nominal_passes"] = bool(nom.passed.all())
    res["reference_bus"]["corner_failure_fraction"] = float((~corners.passed).mean())

    log("throughput, 8-drop reference bus, one driver, one edge ...")
    res["sims_per_s_per_core"] = measure_throughput(design, n_thr, 1, repeat)
    res["sims_per_s_all_cores"] = measure_throughput(design, n_thr, numba.config.NUMBA_NUM_THREADS, repeat)

    log("scaling with the number of drops ...")
    scaling = {}
    for n in cfg["drops"]:
        d = budget.loads(n_drop_text(n), source=f"<{n}-drop>")
        k = max(64, (n_thr // 4) * 8 // n)
        rate = measure_throughput(d, k, 1, repeat)
        scaling[str(n)] = 1.0 / rate
    res["scaling"] = scaling
    res["scaling_64_over_8"] = scaling["64"] / scaling["8"] if "64" in scaling else None
    res["scaling_128_over_8"] = scaling["128"] / scaling["8"] if "128" in scaling else None

    n_mc = cfg["n_mc"]
    log(f"Monte Carlo, {n_mc} variants, one driver, both edges, all cores ...")
    values = random_values(design, n_mc, seed=11)
    t0 = time.perf_counter()
    r = sweep(design, values, drivers=["U1"], edges=("rise", "fall"), keep="margin")
    el = time.perf_counter() - t0
    res["mc_100k_s" if not quick else "mc_s"] = el
    res["mc_variants"] = n_mc
    res["mc_sims"] = 2 * n_mc          # a rising and a falling edge per variant: two simulations
    res["mc_sims_per_s"] = 2 * n_mc / el
    res["mc_failure_fraction"] = float((~r.passed).mean())

    n_rss = cfg["n_rss"]
    log(f"peak memory of a {n_rss}-variant sweep (fresh process) ...")
    rss = child(RSS.format(path=str(REFERENCE), n=n_rss))
    res["peak_rss_mb_1m" if not quick else "peak_rss_mb"] = rss["peak_rss_mb"]
    res["rss_variants"] = n_rss
    res["rss_sweep_s"] = rss["seconds"]

    log("cold start (fresh process, compiled-kernel cache warm) ...")
    child(COLD.format(path=str(REFERENCE)))  # make sure the cache is warm
    cold = child(COLD.format(path=str(REFERENCE)))
    res["cold_start_s"] = cold["total_s"]
    res["cold_start_detail"] = cold

    log("cold compile of every kernel (fresh process, empty NUMBA_CACHE_DIR: busbudget warm) ...")
    import tempfile
    with tempfile.TemporaryDirectory(prefix="bench-numba-cache-") as cache_dir:
        cc = child(COLD_COMPILE.format(jobs=2), env={"NUMBA_CACHE_DIR": cache_dir})
        warm_first = child(COLD.format(path=str(REFERENCE)), env={"NUMBA_CACHE_DIR": cache_dir})
    if not quick:
        with tempfile.TemporaryDirectory(prefix="bench-numba-cache-") as cache_dir:
            res["cold_compile_one_process_s"] = child(COLD_COMPILE.format(jobs=1),
                                                      env={"NUMBA_CACHE_DIR": cache_dir})["seconds"]
    res["cold_compile_s"] = cc["seconds"]        # busbudget warm (two compiling processes on 2+ cores)
    res["cold_compile_detail"] = cc
    res["first_call_after_warm_s"] = warm_first["total_s"]

    log("lean frequency-domain solve of the same bus (numpy), at matched accuracy ...")
    fd = fd_lean_comparison(design, 1.0 / res["sims_per_s_per_core"], repeat)
    res["fd_lean_detail"] = fd
    matched = fd.get("at_engine_accuracy") or fd.get("at_1pct")
    res["fd_lean_ratio"] = None if matched is None else matched["ratio"]

    log("scikit-rf oracle (the accuracy reference, not a competitor) on the same response ...")
    sk = skrf_ratio(design, repeat)
    res["skrf_ratio"] = sk.get("ratio")
    res["skrf_detail"] = sk

    if cfg["long_drivers"]:
        log(f"long bus: 32 nodes over 200 m, 128 corners x {cfg['long_drivers']} drivers x 2 edges "
            "(fresh process) ...")
        lb = child(LONG_BUS.format(here=str(HERE), n_drivers=cfg["long_drivers"]))
        res["long_bus"] = lb
        res["long_bus_s"] = lb["seconds"]
        res["long_bus_peak_rss_mb"] = lb["peak_rss_mb"]
    return res


def table(res: dict) -> str:
    rows = [
        ("sims/s, one core", f"{res['sims_per_s_per_core']:.0f}", ">= 15000 (aim 25000)"),
        ("sims/s, all cores", f"{res['sims_per_s_all_cores']:.0f}", ""),
    ]
    for n, t in res["scaling"].items():
        rows.append((f"per-sim time, {n} drops", f"{t * 1e6:.0f} us", ""))
    if res["scaling_64_over_8"] is not None:
        rows.append(("64 drops / 8 drops", f"{res['scaling_64_over_8']:.2f}x", "(ideal 8x)"))
    if res.get("scaling_128_over_8") is not None:
        rows.append(("128 drops / 8 drops", f"{res['scaling_128_over_8']:.2f}x", "<= 17x (ideal 16x)"))
    if "mc_100k_s" in res:
        rows.append(("Monte Carlo 100k, 2 edges (200k sims)", f"{res['mc_100k_s']:.1f} s", "<= 15 s"))
    else:
        rows.append((f"Monte Carlo {res['mc_variants']}, 2 edges", f"{res['mc_s']:.1f} s", "(reduced)"))
    if "peak_rss_mb_1m" in res:
        rows.append(("peak RSS, 1M-variant sweep", f"{res['peak_rss_mb_1m']:.0f} MB", "<= 1000 MB"))
    else:
        rows.append((f"peak RSS, {res['rss_variants']}-variant sweep", f"{res['peak_rss_mb']:.0f} MB", "(reduced)"))
    rows.append(("first call, fresh process, cache warm", f"{res['cold_start_s']:.2f} s", "<= 0.5 s"))
    rows.append(("cold compile of every kernel (warm)", f"{res['cold_compile_s']:.1f} s", "<= 20 s"))
    if "cold_compile_one_process_s" in res:
        rows.append(("  the same, one process (--jobs 1)", f"{res['cold_compile_one_process_s']:.1f} s", ""))
    fd = res.get("fd_lean_detail", {})
    for key, label in (("at_1pct", "lean FD solve / ours, both <= 1 %"),
                       ("at_engine_accuracy", "lean FD solve / ours, same accuracy")):
        if key in fd:
            m = fd[key]
            rows.append((label, f"{m['ratio']:.1f}x", f"{m['points']} points, FD {100 * m['error']:.2f} % vs "
                         f"ours {100 * fd['engine_error']:.2f} % (>= 10x)"))
    ratio = res["skrf_ratio"]
    rows.append(("accuracy reference (scikit-rf oracle) / ours", "n/a" if ratio is None else f"{ratio:.0f}x",
                 "(the oracle, not a baseline)"))
    if "long_bus_s" in res:
        lb = res["long_bus"]
        rows.append((f"long bus 32 nodes 200 m, {lb['sims']} sims", f"{res['long_bus_s']:.0f} s", "<= 60 s"))
        rows.append(("long bus peak RSS", f"{res['long_bus_peak_rss_mb']:.0f} MB", "<= 500 MB"))
    w = max(len(r[0]) for r in rows)
    out = [f"{'measure':{w}s}  {'measured':>12s}  target", "-" * (w + 40)]
    out += [f"{a:{w}s}  {b:>12s}  {c}" for a, b, c in rows]
    rb = res["reference_bus"]
    out.append(f"(reference bus: dt {rb['dt_s'] * 1e12:.1f} ps over its tolerance box, "
               f"{rb['dt_nominal_only_s'] * 1e12:.1f} ps for the nominal values alone; "
               f"{rb['steps']} steps over {rb['t_stop_s'] * 1e9:.0f} ns; nominal "
               f"{'passes' if rb.get('nominal_passes') else 'FAILS'}, "
               f"{100 * rb.get('corner_failure_fraction', float('nan')):.0f} % of corner sims fail; "
               f"{res['machine']['cores']} cores, numba {res['machine']['numba']})")
    out.append("Absolute times depend on this machine and its load (it may be shared): compare ratios "
               "measured in one run.")
    return "\n".join(out)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="reduced sizes (under a minute)")
    ap.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    args = ap.parse_args(argv)
    log = (lambda m: print(m, file=sys.stderr)) if args.json else print
    res = run("quick" if args.quick else "full", log=log)
    if args.json:
        print(json.dumps(res, indent=1))
    else:
        print(table(res))
    return 0


if __name__ == "__main__":
    sys.exit(main())
