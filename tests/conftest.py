"""Shared test configuration: the hypothesis profile and small shared helpers.

Keep this file small; put each shared fixture or helper in a clearly named
function with a docstring.
"""
from __future__ import annotations

import os

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


def pytest_terminal_summary(terminalreporter):
    if _ACCURACY_LINES:
        terminalreporter.section("measured accuracy against outside references")
        for line in _ACCURACY_LINES:
            terminalreporter.write_line(line)
