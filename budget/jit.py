"""The one JIT policy for every numba kernel in busbudget.

- nopython mode (numba.njit) always: kernels touch only flat numpy arrays and scalars, so the
  same compiled code serves a single call, a batch sweep and the C library.
- ``cache=True``: compiled machine code is kept on disk so a fresh process
  (a production test script, the C library) does not recompile.  numba writes
  next to the package, or to ``NUMBA_CACHE_DIR`` when that is set: set it on
  read-only installs (numba reads the variable itself).
- ``error_model="numpy"``: a division by zero gives inf/nan instead of raising
  inside the kernel; kernels report problems through integer status codes and
  the Python wrappers turn those into errors with physical explanations.
- ``fastmath=False``: no reassociation, so a variant computed alone and the
  same variant inside a vectorised batch give bit-identical results.
- ``nogil=True``: host threads (the C library's callers, dask workers) can run
  kernels concurrently.
"""
from __future__ import annotations

import numba

KERNEL_OPTIONS = dict(cache=True, error_model="numpy", fastmath=False, nogil=True)


def kernel(fn=None, **extra):
    """Decorate a private kernel with the project's JIT policy (see module docstring)."""
    opts = dict(KERNEL_OPTIONS, **extra)
    if fn is None:
        return lambda f: numba.njit(**opts)(f)
    return numba.njit(**opts)(fn)


def parallel_kernel(fn):
    """Like :func:`kernel` but with ``parallel=True`` for loops written with ``prange``."""
    return numba.njit(parallel=True, **KERNEL_OPTIONS)(fn)
