"""busbudget throughput benchmark: prints what it measured on this machine.

    python benchmarks/run.py            # full run (a few minutes on 2 cores)
    python benchmarks/run.py --quick    # reduced sizes, under a minute
    python benchmarks/run.py --json     # one JSON object on stdout

One "sim" is one transient of the bus for one driver and one edge plus the
metrics and margins at every receiver.  The reference bus is
benchmarks/reference_8drop.toml; the N-drop versions are generated from it.
Absolute times depend on the machine and its load: compare ratios measured in
one run.
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
    import numba

    from budget.sweep import sweep

    values = random_values(design, n)
    numba.set_num_threads(threads)
    try:
        sweep(design, {k: v[:8] for k, v in values.items()}, drivers=["U1"], edges=("rise",), keep="margin")
        return best_rate(lambda: sweep(design, values, drivers=["U1"], edges=("rise",), keep="margin"), n, repeat)
    finally:
        numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)


def child(code: str) -> dict:
    """Run ``code`` in a fresh Python process; it prints one JSON object as its last line."""
    env = dict(os.environ)
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
    "full": dict(n_thr=8192, repeat=3, drops=(4, 8, 16, 32, 64), n_mc=100_000, n_rss=1_000_000),
    "quick": dict(n_thr=1024, repeat=2, drops=(4, 8, 16, 32, 64), n_mc=10_000, n_rss=100_000),
    "smoke": dict(n_thr=64, repeat=1, drops=(4, 8), n_mc=64, n_rss=256),   # the test suite's tiny case
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

    n_mc = cfg["n_mc"]
    log(f"Monte Carlo, {n_mc} variants, one driver, both edges, all cores ...")
    values = random_values(design, n_mc, seed=11)
    t0 = time.perf_counter()
    r = sweep(design, values, drivers=["U1"], edges=("rise", "fall"), keep="margin")
    el = time.perf_counter() - t0
    res["mc_100k_s" if not quick else "mc_s"] = el
    res["mc_variants"] = n_mc
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

    log("scikit-rf frequency-domain reference on the same response ...")
    sk = skrf_ratio(design, repeat)
    res["skrf_ratio"] = sk.get("ratio")
    res["skrf_detail"] = sk
    return res


def table(res: dict) -> str:
    rows = [
        ("sims/s, one core", f"{res['sims_per_s_per_core']:.0f}", ">= 5000"),
        ("sims/s, all cores", f"{res['sims_per_s_all_cores']:.0f}", ""),
    ]
    for n, t in res["scaling"].items():
        rows.append((f"per-sim time, {n} drops", f"{t * 1e6:.0f} us", ""))
    if res["scaling_64_over_8"] is not None:
        rows.append(("64 drops / 8 drops", f"{res['scaling_64_over_8']:.2f}x", "<= 10x"))
    if "mc_100k_s" in res:
        rows.append(("Monte Carlo 100k, 2 edges", f"{res['mc_100k_s']:.1f} s", "<= 60 s"))
    else:
        rows.append((f"Monte Carlo {res['mc_variants']}, 2 edges", f"{res['mc_s']:.1f} s", "(reduced)"))
    if "peak_rss_mb_1m" in res:
        rows.append(("peak RSS, 1M-variant sweep", f"{res['peak_rss_mb_1m']:.0f} MB", "<= 1000 MB"))
    else:
        rows.append((f"peak RSS, {res['rss_variants']}-variant sweep", f"{res['peak_rss_mb']:.0f} MB", "(reduced)"))
    rows.append(("cold start (cache warm)", f"{res['cold_start_s']:.2f} s", "<= 3 s"))
    ratio = res["skrf_ratio"]
    rows.append(("scikit-rf time / ours", "n/a" if ratio is None else f"{ratio:.0f}x", ">= 100x"))
    w = max(len(r[0]) for r in rows)
    out = [f"{'measure':{w}s}  {'measured':>12s}  target", "-" * (w + 30)]
    out += [f"{a:{w}s}  {b:>12s}  {c}" for a, b, c in rows]
    rb = res["reference_bus"]
    out.append(f"(reference bus: dt {rb['dt_s'] * 1e12:.1f} ps over its tolerance box, "
               f"{rb['dt_nominal_only_s'] * 1e12:.1f} ps for the nominal values alone; "
               f"{rb['steps']} steps over {rb['t_stop_s'] * 1e9:.0f} ns; "
               f"{res['machine']['cores']} cores, numba {res['machine']['numba']})")
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
