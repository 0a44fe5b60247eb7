"""Permanent fuzz targets (issue 13, item 5), bounded so each runs in a few seconds.

The inputs and the rule each surface keeps are in tests/fuzz_surfaces.py; benchmarks/fuzz.py runs
the same surfaces for longer and prints counts.  A failure here is a defect: add its reproducer as
a row of tests/test_bad_inputs.py when fixing it.  Examples per target: FUZZ_EXAMPLES (default below)
times the multiplier of the FUZZ_SCALE environment variable (default 1).
"""
from __future__ import annotations

import os

from hypothesis import HealthCheck, given, settings

import fuzz_surfaces as fz
from budget.strategies import JIT_PROFILE

SCALE = float(os.environ.get("FUZZ_SCALE", "1"))
# the package's JIT profile (no deadline: the first example pays compile or cache-load time), no example
# database (a defect found is reported with its reproducer, not replayed from a local file), and the
# health checks that large generated texts trip
settings.register_profile("busbudget-fuzz", settings.get_profile(JIT_PROFILE), database=None,
                          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                                 HealthCheck.filter_too_much, HealthCheck.large_base_example])


def fuzz_settings(n: int):
    return settings(settings.get_profile("busbudget-fuzz"), max_examples=max(1, int(n * SCALE)))


@fuzz_settings(150)
@given(text=fz.design_texts())
def test_loader_gives_a_design_or_a_package_error_naming_the_file(text):
    fz.run_loader(text)


@fuzz_settings(40)
@given(case=fz.cli_cases())
def test_cli_exits_0_1_or_2_with_a_message_never_a_traceback(case):
    argv, files = case
    fz.run_cli(argv, files)


@fuzz_settings(12)
@given(text=fz.design_texts())
def test_cli_verdict_of_a_loaded_design_is_the_python_apis(text):
    fz.run_verdict(text)


@fuzz_settings(40)
@given(calls=fz.capi_calls())
def test_c_exports_give_only_documented_statuses(calls):
    fz.run_capi(calls)
