"""What the compiler made of the time loop: vector, scalar and gather instructions in the kernels.

    python benchmarks/inspect_loop.py           # table
    python benchmarks/inspect_loop.py --json    # one JSON object

Compiles (or loads) the sweep kernel ``evaluate_blocks`` and the waveform
kernel ``run_block`` for the 8-drop reference bus and counts, in numba's
assembly (``inspect_asm``): packed double-precision arithmetic (``*pd``
with ymm/xmm registers: vectorised over variant lanes), scalar double
arithmetic (``*sd``), gathers (``vgather*``) and divisions.  A regression of
the per-lane loops to scalar code, or new gathers from index arithmetic the
compiler cannot prove affine, shows here.  The counts are of instructions in
the code, not of executions.
"""
from __future__ import annotations

import argparse
import json
import re
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

PATTERNS = {
    "packed_fp": r"\bv?(add|sub|mul|div|fmadd\w*|max|min)pd\b",
    "scalar_fp": r"\bv?(add|sub|mul|div|max|min)sd\b",
    "gathers": r"\bv?gather\w+\b",
    "packed_div": r"\bv?divpd\b",
    "scalar_div": r"\bv?divsd\b",
    "ymm_ops": r"%ymm\d+",
}


def count(asm: str) -> dict:
    """Instruction counts by PATTERNS in an assembly listing."""
    return {k: len(re.findall(p, asm)) for k, p in PATTERNS.items()}


def kernels_asm() -> dict:
    """{kernel name: assembly} of the compiled kernels, after one call on the reference bus."""
    import budget
    from budget.kernels import evaluate as ev
    from budget.kernels import transient as tk
    from budget.simulate import run_netlist
    from budget.sweep import sweep
    from budget.netlist import flatten

    d = budget.load(ROOT / "benchmarks" / "reference_8drop.toml")
    sweep(d, drivers=["U1"], edges=("rise",), keep="margin")
    run_netlist(flatten(d, "U1", "rise"))
    out = {}
    for name, fn in (("evaluate_blocks", ev.evaluate_blocks), ("run_block", tk.run_block)):
        asm = "\n".join(fn.inspect_asm(sig) for sig in fn.signatures)
        out[name] = asm
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args(argv)
    res = {name: count(asm) for name, asm in kernels_asm().items()}
    if args.json:
        print(json.dumps(res, indent=1))
        return 0
    keys = list(PATTERNS)
    print(f"{'kernel':16s}" + "".join(f"{k:>12s}" for k in keys))
    for name, c in res.items():
        print(f"{name:16s}" + "".join(f"{c[k]:12d}" for k in keys))
    return 0


if __name__ == "__main__":
    sys.exit(main())
