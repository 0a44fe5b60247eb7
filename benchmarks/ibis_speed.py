"""Speed of the non-linear (IBIS) engine against the linear one on the 8-drop reference bus.

The bus of ``benchmarks/reference_8drop.toml`` twice: as written (linear transceivers) and with
the part replaced by the fictional IBIS transceiver shipped with busbudget (TSX33, model
tsx33_io: I-V tables, two-waveform switching, clamps, package R/L/C).  Both run with the same
time step and window.  Runs are interleaved in one process (after a warm-up, so numba
compilation is not counted) and the median of each is compared; the machine may be shared,
so quote the ratio, not the absolute times.

Usage: ``python benchmarks/ibis_speed.py [--repeat N] [--variants N]``.
"""
from __future__ import annotations

import argparse
import re
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

import budget
from budget.simulate import simulate
from budget.sweep import sweep

HERE = Path(__file__).resolve().parent
IBS = Path(budget.__file__).parent / "examples" / "ibis" / "tansy_tsx33.ibs"


def designs(folder: Path):
    text = (HERE / "reference_8drop.toml").read_text()
    linear = budget.loads(text, source=str(HERE / "reference_8drop.toml"))
    part = re.search(r"\[parts\.xcvr\]\n(.*?)\n\n", text, re.S)
    ibis_text = text.replace(part.group(0), f'[parts.xcvr]\nibis = {{ file = "{IBS}", model = "tsx33_io" }}\n\n')
    ibis_text = re.sub(r"\[tolerances\]\n(.*?)(?=\n\[|\Z)", "", ibis_text, flags=re.S)   # linear parts' paths
    (folder / "ibis_8drop.toml").write_text(ibis_text)
    return linear, budget.load(folder / "ibis_8drop.toml")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--variants", type=int, default=64)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        linear, nonlinear = designs(Path(tmp))
        drv = linear.tap_names[0]
        dt = min(budget.netlist.choose_dt(linear, "rise"), budget.netlist.choose_dt(nonlinear, "rise"))
        t_stop = 40e-9
        n = args.variants
        z0 = np.linspace(45.0, 55.0, n)
        runs = {
            "one simulation (waveforms)": lambda d: simulate(d, drv, "rise", dt=dt, t_stop=t_stop),
            f"sweep of {n} variants (metrics, both edges, every driver)":
                lambda d: sweep(d, {"lines.trunk.z0": z0}, dt=dt, t_stop=t_stop, keep="margin"),
        }
        print(f"8-drop reference bus, dt = {dt * 1e12:.2f} ps, window {t_stop * 1e9:.0f} ns, "
              f"{round(t_stop / dt) + 1} steps; median of {args.repeat} interleaved runs (shared machine)")
        print(f"{'run':58s} {'linear':>10s} {'IBIS':>10s} {'ratio':>7s}")
        for label, fn in runs.items():
            fn(linear)
            fn(nonlinear)           # warm-up: compile / load the kernels
            tl, tn = [], []
            for _ in range(args.repeat):
                t0 = time.perf_counter()
                fn(linear)
                tl.append(time.perf_counter() - t0)
                t0 = time.perf_counter()
                fn(nonlinear)
                tn.append(time.perf_counter() - t0)
            a, b = statistics.median(tl), statistics.median(tn)
            print(f"{label:58s} {a * 1e3:8.1f}ms {b * 1e3:8.1f}ms {b / a:6.2f}x")


if __name__ == "__main__":
    main()
