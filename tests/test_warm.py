"""`busbudget warm` and the content-keyed kernel cache (budget/warm.py, budget/jit.py)."""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from budget import jit
from budget.cli import main

ROOT = Path(__file__).resolve().parent.parent

# Kernels the package calls with more than one argument-type signature, and why: none.  Every
# kernel is compiled once (a single simulation runs as a block of one lane, budget/run_blocks.py);
# a second signature would be a second cold compile of that kernel and of everything it calls.
MULTI_SIGNATURE: dict = {}


def test_warm_compiles_or_loads_every_entry_kernel_once(capsys):
    assert main(["warm", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["schema"] == "busbudget.warm/1"
    kernels = {k["name"]: k for k in doc["kernels"]}
    # the entry points of the commands, the sweeps and the C library are all reached
    for name in ("kernels.transient.run_block", "kernels.evaluate.evaluate_blocks", "kernels.metrics.edge_metrics",
                 "kernels.metrics.edge_metrics_hyst", "kernels.metrics.ref_times", "kernels.metrics.headroom_terms",
                 "kernels.metrics.moving_average", "kernels.metrics.first_peak_time", "tdr.peel_layers",
                 "kernels.nonlinear.run_block_nl", "kernels.nonlinear.evaluate_blocks_nl"):
        assert kernels[name]["signatures"] >= 1, name
    # fewer specialisations: one signature per kernel unless listed (this process ran other tests too)
    for name, k in kernels.items():
        assert k["signatures"] <= MULTI_SIGNATURE.get(name, 1), f"{name}: {k['signatures']} signatures"
    assert all(Path(f).name.startswith(jit.CACHE_PREFIX) for f in doc["cache_folders"])


def test_cache_folder_is_named_after_the_kernel_sources():
    from budget.kernels import transient
    from budget import tdr

    files = jit.kernel_sources(transient.__file__)
    assert Path(jit.__file__).resolve() in files
    assert {f.name for f in files} >= {"transient.py", "metrics.py", "evaluate.py", "inputs.py", "jit.py"}
    assert {f.name for f in jit.kernel_sources(tdr.__file__)} == {"jit.py", "tdr.py"}
    digest = jit.sources_digest(transient.__file__)
    assert transient.run_block.stats.cache_path.endswith(jit.CACHE_PREFIX + digest[:20])


def _run(code: str, cwd: Path, cache: Path | None) -> dict:
    """Run ``code`` in a fresh interpreter on the package at ``cwd``, the kernel cache at ``cache``
    (None: the cache this test run uses); its last output line is JSON."""
    env = dict(os.environ, PYTHONPATH=str(cwd))
    if cache:
        env["NUMBA_CACHE_DIR"] = str(cache)
    proc = subprocess.run([sys.executable, "-c", code], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=1800)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


# the production-line steps of the warm-up: few, quickly compiled kernels (the TDR peeling, the metrics)
FEW = ("TDR profile", "metric functions")
WARM = "import json; from budget.warm import warm; print(json.dumps(warm(jobs={jobs}, steps={steps!r}).to_json()))"

SIGNATURES = """
import json, budget
from budget.warm import kernel_dispatchers, IBIS_BUS
d = kernel_dispatchers()
{work}
print(json.dumps({{k: sorted(str(s) for s in v.signatures) for k, v in d.items()}}))
"""
WARM_ALL = "from budget.warm import warm; warm(jobs=1)"
CHECK_ALL = """for name in budget.EXAMPLES:
    budget.check(budget.example(name))
budget.check(budget.load(IBIS_BUS))"""

EDITED = """
import json, numpy as np
from budget.metrics import smooth
from budget.kernels import metrics as mk
smooth(np.arange(10.0), np.ones(10), 2.0)
print(json.dumps({"misses": sum(mk.moving_average.stats.cache_misses.values()),
                  "hits": sum(mk.moving_average.stats.cache_hits.values())}))
"""


def test_warm_covers_every_kernel_signature_the_checks_use():
    """Every (kernel, argument types) a budget check of every bundled example and of the IBIS demo
    compiles is one ``busbudget warm`` compiles: after warm, those checks compile nothing."""
    warmed = _run(SIGNATURES.format(work=WARM_ALL), ROOT, None)
    checked = _run(SIGNATURES.format(work=CHECK_ALL), ROOT, None)
    missing = {k: sorted(set(v) - set(warmed.get(k, []))) for k, v in checked.items()}
    assert not {k: v for k, v in missing.items() if v}
    assert sum(len(v) for v in checked.values()) > 0


def test_cache_survives_a_move_and_is_dropped_when_a_kernel_source_changes(tmp_path):
    """A cold warm-up (helper process) fills an empty cache; a copy of the package at another path
    (an upgrade with the same kernel sources: new path, new modification times) compiles nothing;
    an edited kernel source compiles anew."""
    cache = tmp_path / "cache"
    first, second = tmp_path / "v1", tmp_path / "v2"
    for dst in (first, second):
        shutil.copytree(ROOT / "budget", dst / "budget", ignore=shutil.ignore_patterns("__pycache__"))
    cold = _run(WARM.format(jobs=2, steps=FEW), first, cache)     # the steps compiled by the helper process
    assert cold["helper_compiled"] > 0 and cold["compiled"] == cold["helper_compiled"]   # then loaded here
    again = _run(WARM.format(jobs=1, steps=FEW), second, cache)
    assert again["compiled"] == 0 and again["loaded"] > 0
    src = second / "budget" / "kernels" / "evaluate.py"     # not the edited kernel's own file
    src.write_text(src.read_text() + "\n# edited\n")
    edited = _run(EDITED, second, cache)
    assert edited["misses"] == 1 and edited["hits"] == 0


def test_warm_refuses_an_unknown_step():
    from budget.errors import ArgumentError
    from budget.warm import warm

    with pytest.raises(ArgumentError, match="unknown warm-up steps"):
        warm(steps=("check everything",))
