"""Blocks of variant lanes spread over host threads (the sweep kernels' parallelism).

The batched evaluation runs blocks of ``LANES`` variants; the blocks are
independent, so they are shared among threads of this process, each calling a
sequential kernel on a range of blocks.  The kernels release the GIL
(``nogil=True``, :mod:`budget.jit`), so the threads run on separate cores.

Why not numba's ``prange``: a parallel (parfor) kernel cost about 18 s of
compile time per entry point on a 2-core machine (numba 0.68, its parfor
lowering: 3 entry points, more than a fifth of a cold compile), and starts a
threading layer in every fresh process; a plain kernel over a block range
compiled in about 4 s, and a thread makes one call per few blocks, each block
taking milliseconds.

The number of threads: ``NUMBA_NUM_THREADS`` when set, else the machine's cores
(numba's own default), or what :func:`set_threads` says.  numba's threading layer is
never started.  Threads take a few blocks at a time from a shared counter, so blocks that end
early (settled windows, :mod:`budget.kernels.stream`) do not leave a core idle.
"""
from __future__ import annotations

import itertools
import threading
from concurrent.futures import ThreadPoolExecutor

# a thread takes this many blocks at a time at most (fewer when there are few blocks)
MAX_BLOCKS_PER_TAKE = 16

_THREADS = [0]      # 0: numba.config.NUMBA_NUM_THREADS


def threads() -> int:
    """Threads the batched evaluation uses."""
    if _THREADS[0]:
        return _THREADS[0]
    import numba
    return max(1, int(numba.config.NUMBA_NUM_THREADS))


def set_threads(n: int | None) -> None:
    """Use n threads for the batched evaluation (None: back to NUMBA_NUM_THREADS / the core count)."""
    if n is not None and (isinstance(n, bool) or not isinstance(n, int) or n < 1):
        from ..errors import ArgumentError
        raise ArgumentError(f"set_threads: n must be a whole number >= 1 or None, got {n!r}")
    _THREADS[0] = 0 if n is None else n


def block_count(n: int, lanes: int) -> int:
    """Blocks of ``lanes`` variants covering n variants."""
    return (n + lanes - 1) // lanes


def over_blocks(n_blk: int, run) -> int:
    """Call ``run(blk0, blk1)`` over block ranges covering 0 .. n_blk-1, on :func:`threads`
    threads (this one included); return the sum of what the calls return."""
    workers = min(threads(), n_blk)
    if workers <= 1:
        return int(run(0, n_blk)) if n_blk else 0
    take = max(1, min(MAX_BLOCKS_PER_TAKE, n_blk // (4 * workers)))
    starts = itertools.count(0, take)
    lock = threading.Lock()

    def work() -> int:
        total = 0
        while True:
            with lock:
                b = next(starts)
            if b >= n_blk:
                return total
            total += int(run(b, min(b + take, n_blk)))

    with ThreadPoolExecutor(max_workers=workers - 1, thread_name_prefix="busbudget-blocks") as pool:
        others = [pool.submit(work) for _ in range(workers - 1)]
        mine = work()
        return mine + sum(f.result() for f in others)
