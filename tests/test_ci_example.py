"""The copy-me CI example (examples/ci/test_bus_design.py) run as a user would run it.

It must pass on the bundled example "short-bus" and fail on a marginal design
(tests/designs/marginal_bus.toml: tighter receiver levels) with a message
naming the breaking case, shrunk by hypothesis to one changed stub.
"""
from __future__ import annotations

from pathlib import Path

import pytest

pytest_plugins = ["pytester"]

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "ci" / "test_bus_design.py"
MARGINAL = ROOT / "tests" / "designs" / "marginal_bus.toml"


def _run(pytester, monkeypatch, design: Path | None):
    pytester.makepyfile(test_bus_design=EXAMPLE.read_text())
    # the same search every run: derandomized, no example database
    pytester.makeconftest("from hypothesis import settings\n"
                          "settings.register_profile('fixed', derandomize=True, database=None)\n"
                          "settings.load_profile('fixed')\n")
    if design is None:
        monkeypatch.delenv("BUSBUDGET_DESIGN", raising=False)
    else:
        monkeypatch.setenv("BUSBUDGET_DESIGN", str(design))
    # in a subprocess, as a user runs it (in-process runs would re-import numpy and pint)
    return pytester.runpytest_subprocess("-q", "-p", "no:cacheprovider", "-o", "filterwarnings=error")


@pytest.mark.slow
def test_example_passes_on_the_good_design(pytester, monkeypatch):
    result = _run(pytester, monkeypatch, None)
    result.assert_outcomes(passed=3)


@pytest.mark.slow
def test_example_fails_on_the_marginal_design_naming_the_case(pytester, monkeypatch):
    result = _run(pytester, monkeypatch, MARGINAL)
    result.assert_outcomes(passed=2, failed=1)
    out = result.stdout.str()
    assert "test_every_stub_length_at_every_corner" in out
    # the message names driver, receiver, edge, metric and value of the worst case ...
    assert "worst case: driver CTRL -> receiver MEM3" in out
    assert "metric: margin_high = " in out
    assert "below the required 35 mV" in out
    # ... and the changed values with units; shrinking leaves one stub changed
    assert "values that differ from nominal:" in out
    falsifying = [ln for ln in out.splitlines() if "variant=<variant of" in ln]
    assert falsifying, out
    assert falsifying[-1].count("stub.length") == 1, falsifying[-1]
    assert " mm (nominal 4 mm)" in falsifying[-1]
