"""Bit-for-bit fingerprints of the engine's results, to compare two versions of the code.

    python benchmarks/fingerprint.py            # one line per hash
    python benchmarks/fingerprint.py --json     # one JSON object {name: sha256}

For every bundled example (``budget.example``) and every ``tests/designs/*.toml``:

- ``<design> waves <driver> <edge>``: SHA-256 of the simulated pin waveforms
  (``budget.simulate``: time axis, every pin's voltage, the DC levels);
- ``<design> sweep``: SHA-256 of ``budget.sweep.sweep`` over the nominal design
  plus every corner of its tolerance box (at most MAX_CORNERS corners): margins,
  violation bits, metrics and levels.

A refactoring that claims identical results must leave every hash unchanged.
To fingerprint another checkout with this script, put it first on the path:
``PYTHONPATH=/path/to/checkout python benchmarks/fingerprint.py`` (the script
prints which ``budget`` it imported on stderr).
"""
from __future__ import annotations

import argparse
import hashlib
import itertools
import json
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
MAX_CORNERS = 256


def _digest(*arrays) -> str:
    h = hashlib.sha256()
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str(a.dtype).encode() + str(a.shape).encode())
        h.update(a.tobytes())
    return h.hexdigest()


def designs():
    """(name, Design) of every bundled example and test design."""
    import budget

    for name in budget.EXAMPLES:
        yield f"example:{name}", budget.example(name)
    for path in sorted((ROOT / "tests" / "designs").glob("*.toml")):
        yield f"tests/designs/{path.name}", budget.load(path)


def corner_values(design) -> dict:
    """Nominal values followed by every corner of the tolerance box (capped at MAX_CORNERS)."""
    paths = sorted(design.tolerances)
    if not paths:
        return {}
    corners = list(itertools.islice(itertools.product((0, 1), repeat=len(paths)), MAX_CORNERS))
    out = {}
    for i, p in enumerate(paths):
        lo, hi = design.tolerances[p]
        col = [float(design.params[p])] + [(lo, hi)[c[i]] for c in corners]
        out[p] = np.array(col, dtype=float)
    return out


def fingerprints(log=None) -> dict:
    import budget
    from budget.sweep import sweep

    res = {}
    for name, design in designs():
        for driver in design.drivers:
            for edge in ("rise", "fall"):
                w = budget.simulate(design, driver, edge)
                res[f"{name} waves {driver} {edge}"] = _digest(w.t, w.v, w.v_start, w.v_end)
        values = corner_values(design)
        r = sweep(design, values or None)
        res[f"{name} sweep"] = _digest(r.margin, r.bits, r.metrics, r.levels)
        if log:
            log(f"{name}: {len(design.drivers)} drivers, {r.n_variants} variants")
    return res


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--json", action="store_true", help="print one JSON object {name: sha256}")
    args = ap.parse_args(argv)
    import budget

    print(f"budget imported from {budget.__file__}", file=sys.stderr)
    res = fingerprints(log=lambda m: print(m, file=sys.stderr))
    if args.json:
        print(json.dumps(res, indent=1, sort_keys=True))
    else:
        w = max(len(k) for k in res)
        for k, v in res.items():
            print(f"{k:{w}s}  {v}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
