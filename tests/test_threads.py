"""Blocks of variant lanes on host threads (budget/kernels/threads.py)."""
from __future__ import annotations

import threading

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import budget
from budget.analyses import sample_values
from budget.errors import ArgumentError
from budget.kernels import threads as th
from budget.sweep import sweep


@settings(max_examples=60, deadline=None)
@given(n_blk=st.integers(0, 300), workers=st.integers(1, 5))
def test_every_block_is_run_exactly_once(n_blk, workers):
    seen = np.zeros(n_blk, dtype=np.int64)
    lock = threading.Lock()

    def run(a, b):
        assert 0 <= a < b <= n_blk
        with lock:
            seen[a:b] += 1
        return b - a

    th.set_threads(workers)
    try:
        assert th.over_blocks(n_blk, run) == n_blk
    finally:
        th.set_threads(None)
    assert (seen == 1).all()


def test_an_error_in_a_thread_reaches_the_caller():
    def run(a, b):
        if a <= 7 < b:
            raise ValueError("block 7")
        return 0

    th.set_threads(2)
    try:
        with pytest.raises(ValueError, match="block 7"):
            th.over_blocks(40, run)
    finally:
        th.set_threads(None)


@pytest.mark.parametrize("bad", [0, -1, 1.5, True, "2"])
def test_set_threads_refuses_a_non_count(bad):
    with pytest.raises(ArgumentError, match="set_threads"):
        th.set_threads(bad)


def test_results_do_not_depend_on_the_thread_count():
    """Each block is computed whole by one thread: one, two or three threads give the same bits."""
    d = budget.example("short-bus")
    vals = sample_values(d, 200, np.random.default_rng(5))      # 7 blocks of 32 lanes
    out = []
    for n in (1, 2, 3):
        th.set_threads(n)
        try:
            r = sweep(d, vals, keep="all")
        finally:
            th.set_threads(None)
        out.append(r)
    for r in out[1:]:
        assert np.array_equal(r.headroom, out[0].headroom, equal_nan=True) and np.array_equal(r.bits, out[0].bits)
        assert np.array_equal(r.metrics, out[0].metrics, equal_nan=True)
