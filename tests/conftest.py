"""Shared test configuration: the hypothesis profile and small shared helpers.

Keep this file small; put each shared fixture or helper in a clearly named
function with a docstring.
"""
from __future__ import annotations

import os

import pytest
from hypothesis import settings

from budget.strategies import JIT_PROFILE

# Hypothesis profiles built on the package's JIT profile (project rules: deadline=None): no
# deadline, because the first example of a test pays the numba JIT compile (or cache load)
# time.  Modest example counts keep the suite fast on a 2-core machine;
# HYPOTHESIS_PROFILE=thorough runs more.
settings.register_profile("busbudget", settings.get_profile(JIT_PROFILE), max_examples=25)
settings.register_profile("thorough", settings.get_profile(JIT_PROFILE), max_examples=300)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "busbudget"))


# -- accuracy figures, printed in the terminal summary ---------------------------------
_ACCURACY_LINES: list[str] = []


def accuracy_record(line: str) -> None:
    """Record one measured-accuracy line; pytest prints them all at the end of the run."""
    _ACCURACY_LINES.append(line)


def pytest_sessionfinish(session):
    """In an xdist worker: hand the accuracy lines to the controller, which prints them."""
    out = getattr(session.config, "workeroutput", None)
    if out is not None:
        out["busbudget_accuracy"] = list(_ACCURACY_LINES)


@pytest.hookimpl(optionalhook=True)
def pytest_testnodedown(node, error):
    """In the xdist controller: collect the accuracy lines of a finished worker."""
    _ACCURACY_LINES.extend(getattr(node, "workeroutput", {}).get("busbudget_accuracy", []))


def pytest_terminal_summary(terminalreporter):
    if _ACCURACY_LINES:
        terminalreporter.section("measured accuracy against outside references")
        for line in _ACCURACY_LINES:
            terminalreporter.write_line(line)


# -- parallel runs: compile every kernel once, before the workers start ----------------
def pytest_sessionstart(session):
    """Under pytest-xdist, run ``busbudget warm`` once in the controller.

    Without it each worker compiles the same kernels itself (numba's cache is per
    process until written), paying the cold compile once per worker.  Serial runs
    (``-n 0``) compile on first use as before.
    """
    config = session.config
    if hasattr(config, "workerinput"):          # a worker: the controller has warmed
        return
    workers = getattr(config.option, "numprocesses", None)
    if not workers or getattr(config.option, "collectonly", False):
        return
    import subprocess
    import sys
    import time
    t0 = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", "import sys; from budget.cli import main; sys.exit(main(['warm', '--json']))"],
                          capture_output=True, text=True)
    reporter = config.pluginmanager.get_plugin("terminalreporter")
    line = f"busbudget warm before the workers: exit {done.returncode} in {time.perf_counter() - t0:.1f} s"
    if reporter is not None:
        reporter.write_line(line)
    if done.returncode != 0:   # the workers then compile what they need; test_warm reports the defect
        if reporter is not None:
            reporter.write_line(done.stderr[-2000:])
