"""Longer fuzz run of the loader, the command line and the C API, outside the test suite.

Usage::

    .venv/bin/python benchmarks/fuzz.py                      # 60 s per surface
    .venv/bin/python benchmarks/fuzz.py --seconds 240 --surfaces loader cli capi verdict
    .venv/bin/python benchmarks/fuzz.py --count 500 --c-library   # also the compiled C library

The inputs and the rule each surface keeps are tests/fuzz_surfaces.py (the same as the bounded
targets of tests/test_fuzz.py).  Prints, per surface, how many cases ran, the outcomes by kind and
every defect found with its reproducer (deduplicated by kind and message); exit 1 when any defect was
found.  ``--c-library`` builds libbusbudget (cexport/build.py, a few seconds) and sends the C-API call
sequences through the real compiled library as well (surface "clib"), loaded with cffi's ABI mode
into this process: the embedded runtime then uses this interpreter.
"""
from __future__ import annotations

import argparse
import collections
import signal
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests"))

import fuzz_surfaces as fz  # noqa: E402
from hypothesis import HealthCheck, Phase, given, settings  # noqa: E402

SURFACES = ("loader", "cli", "verdict", "capi")


def _strategy_and_runner(surface):
    if surface == "loader":
        return fz.design_texts(), fz.run_loader
    if surface == "cli":
        return fz.cli_cases(), lambda case: fz.run_cli(*case)
    if surface == "verdict":
        return fz.design_texts(), fz.run_verdict
    if surface == "capi":
        return fz.capi_calls(), fz.run_capi
    if surface == "clib":
        return fz.capi_calls(), run_clib
    raise SystemExit(f"unknown surface {surface!r}")


class _CaseTooLong(KeyboardInterrupt):
    """Raised by the alarm; the command line may catch it (as an interrupt), so the flag decides."""


_FIRED = [False]


def _alarm(signum, frame):
    _FIRED[0] = True
    raise _CaseTooLong()


def fuzz(surface: str, seconds: float, count: int | None, round_size: int = 50, case_seconds: float = 60.0):
    """Run one surface until ``seconds`` pass or ``count`` cases ran; (cases, outcomes, defects, elapsed).

    A case still running after ``case_seconds`` is stopped (SIGALRM, taken when control is back in
    Python) and counted as a defect "hang": every input must be refused or finished in bounded time."""
    strategy, runner = _strategy_and_runner(surface)
    outcomes = collections.Counter()
    defects = {}
    n = [0]
    t0 = time.monotonic()
    signal.signal(signal.SIGALRM, _alarm)

    def hang(case):
        outcomes["DEFECT hang"] += 1
        defects.setdefault(("hang", repr(case)[:120]),
                           (fz.Defect("hang", f"still running after {case_seconds:g} s"), case))

    def one(case):
        if time.monotonic() - t0 > seconds or (count is not None and n[0] >= count):
            return
        n[0] += 1
        _FIRED[0] = False
        try:
            signal.setitimer(signal.ITIMER_REAL, case_seconds)
            try:
                res = runner(case)
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0)
        except (_CaseTooLong, fz.Defect) as exc:
            if _FIRED[0]:
                return hang(case)
            if not isinstance(exc, fz.Defect):
                raise
            d = exc
            outcomes[f"DEFECT {d.kind}"] += 1
            key = (d.kind, d.detail[:120])
            defects.setdefault(key, (d, case))
            return
        if _FIRED[0]:       # the interrupt was caught and the command returned: still a hang
            return hang(case)
        for kind in (res if isinstance(res, list) else [res]):
            outcomes[kind] += 1

    s = settings(max_examples=round_size, deadline=None, database=None, phases=[Phase.generate],
                 suppress_health_check=list(HealthCheck))
    test = s(given(case=strategy)(one))
    while time.monotonic() - t0 < seconds and (count is None or n[0] < count):
        test()
    return n[0], outcomes, defects, time.monotonic() - t0


# ---------------------------------------------------------------------------
# the real compiled library

_CLIB = {}


def load_clib(out_dir: Path):
    """Build libbusbudget into ``out_dir`` and load it with cffi's ABI mode."""
    import subprocess

    import cffi

    subprocess.run([sys.executable, str(HERE.parent / "cexport" / "build.py"), "--out", str(out_dir)], check=True,
                   stdout=subprocess.DEVNULL)
    sys.path.insert(0, str(HERE.parent / "cexport"))
    from build import api_declarations
    sys.path.pop(0)
    ffi = cffi.FFI()
    ffi.cdef(api_declarations((HERE.parent / "cexport" / "busbudget.h").read_text()))
    lib = ffi.dlopen(str(next(out_dir.glob("libbusbudget.*"))))
    _CLIB.update(ffi=ffi, lib=lib)


class _CExports(dict):
    """The compiled library's functions under their C names (as run_capi expects the bound exports)."""

    def __missing__(self, name):
        return getattr(_CLIB["lib"], name)


def run_clib(calls):
    """The same call sequence through the compiled library (fuzz_surfaces.run_capi with its functions)."""
    saved = dict(fz._BOUND)
    try:
        fz.bind_exports()
        codes = fz._BOUND["codes"]
        fz._BOUND.update(ffi=_CLIB["ffi"], lib=_CLIB["lib"], exports=_CExports(), codes=codes)
        return fz.run_capi(calls)
    finally:
        fz._BOUND.clear()
        fz._BOUND.update(saved)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seconds", type=float, default=60.0, help="time per surface [s] (default 60)")
    ap.add_argument("--count", type=int, default=None, help="at most this many cases per surface")
    ap.add_argument("--surfaces", nargs="+", default=list(SURFACES), choices=(*SURFACES, "clib"))
    ap.add_argument("--c-library", action="store_true", help="also fuzz the compiled C library (surface clib)")
    ap.add_argument("--case-seconds", type=float, default=60.0,
                    help="a case running longer is stopped and reported as a hang (default 60)")
    args = ap.parse_args(argv)
    surfaces = list(args.surfaces) + (["clib"] if args.c_library and "clib" not in args.surfaces else [])
    found = 0
    with tempfile.TemporaryDirectory(prefix="bbfuzz-lib-") as tmp:
        if "clib" in surfaces:
            load_clib(Path(tmp))
        print("busbudget fuzz run (machine shared; counts depend on its load)")
        for surface in surfaces:
            n, outcomes, defects, elapsed = fuzz(surface, args.seconds, args.count, case_seconds=args.case_seconds)
            print(f"\n== {surface}: {n} cases in {elapsed:.0f} s ({n / max(elapsed, 1e-9):.1f} per second)")
            for kind, k in outcomes.most_common():
                print(f"  {k:7d}  {kind}")
            for (kind, _), (d, case) in defects.items():
                found += 1
                print(f"  DEFECT {kind}: {d.detail}\n    reproducer: {case!r:.2000}")
            sys.stdout.flush()
    print(f"\n{found} distinct defect(s) found")
    return 1 if found else 0


if __name__ == "__main__":
    sys.exit(main())
