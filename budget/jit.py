"""The one JIT policy for every numba kernel in busbudget.

- nopython mode (numba.njit) always: kernels touch only flat numpy arrays and scalars, so the
  same compiled code serves a single call, a batch sweep and the C library.
- ``cache=True``: compiled machine code is kept on disk so a fresh process
  (a production test script, the C library) does not recompile; ``busbudget
  warm`` (:mod:`budget.warm`) fills the cache at install time.  The cache is
  found by :class:`ContentKeyedLocator`: a folder named after a SHA-256 of the
  kernel sources, under ``NUMBA_CACHE_DIR`` when that is set (set it on
  read-only installs and test rigs), else under the package's ``__pycache__``,
  else numba's per-user cache folder.  So the cache survives a package upgrade
  or a move to another path when the kernel sources did not change, and is
  never reused when any of them did.
- ``error_model="numpy"``: a division by zero gives inf/nan instead of raising
  inside the kernel; kernels report problems through integer status codes and
  the Python wrappers turn those into errors with physical explanations.
- ``fastmath=False``: no reassociation, so a variant computed alone and the
  same variant inside a vectorised batch give bit-identical results.
- ``nogil=True``: host threads (the C library's callers, dask workers) can run
  kernels concurrently.
"""
from __future__ import annotations

import functools
import hashlib
import os
from pathlib import Path

import numba
from numba.core import caching as _caching

KERNEL_OPTIONS = dict(cache=True, error_model="numpy", fastmath=False, nogil=True)

PACKAGE = Path(__file__).resolve().parent
KERNEL_FOLDER = PACKAGE / "kernels"
CACHE_PREFIX = "busbudget-kernels-"


# -- where the compiled kernels are kept -----------------------------------------
#
# numba (0.68) keys a cached function on its source file's content hash (the
# "source stamp" of numba.core.caching._SourceFileBackedLocatorMixin), but keeps
# it in a folder derived from the file's absolute path, and checks only the
# function's own file: a kernel in evaluate.py that inlines one from
# transient.py would keep stale machine code after transient.py changed.  The
# locator below (numba's cache-locator hook: a _CacheLocator subclass listed in
# a CacheImpl's _locator_classes, numba docs "Notes on Caching") keys both the
# folder and the stamp on one digest of every file a kernel may depend on.

@functools.lru_cache(maxsize=None)
def _digest_of(files: tuple) -> str:
    h = hashlib.sha256()
    for f in files:
        h.update(f.name.encode() + b"\0" + f.read_bytes() + b"\0")
    return h.hexdigest()


def kernel_sources(py_file) -> tuple:
    """The source files [paths] a kernel defined in ``py_file`` may depend on: this module
    (the JIT options), and every module of ``budget/kernels`` for a kernel there, else its own file."""
    f = Path(py_file).resolve()
    group = sorted(KERNEL_FOLDER.glob("*.py")) if f.parent == KERNEL_FOLDER else [f]
    return tuple([Path(__file__).resolve()] + [g for g in group if g != Path(__file__).resolve()])


def sources_digest(py_file) -> str:
    """SHA-256 [hex] over :func:`kernel_sources` of ``py_file`` (names and contents)."""
    return _digest_of(kernel_sources(py_file))


def cache_root() -> Path | None:
    """Folder holding the content-keyed kernel caches: ``NUMBA_CACHE_DIR`` if set, else the
    package's ``__pycache__`` if writable, else None (numba's own per-user folder is used)."""
    if numba.config.CACHE_DIR:
        return Path(numba.config.CACHE_DIR)
    folder = PACKAGE / "__pycache__"
    try:
        folder.mkdir(exist_ok=True)
        return folder if os.access(folder, os.W_OK) else None
    except OSError:
        return None


class ContentKeyedLocator(_caching._CacheLocator):
    """numba cache locator for busbudget kernels: folder ``<root>/busbudget-kernels-<digest>``
    and source stamp ``<digest>``, the digest from :func:`sources_digest`.

    Used only for files inside the package; anything else (and a root that cannot be
    written) falls through to numba's own locators."""

    def __init__(self, py_func, py_file, root: Path):
        self._lineno = py_func.__code__.co_firstlineno
        self._digest = sources_digest(py_file)
        self._path = str(root / f"{CACHE_PREFIX}{self._digest[:20]}")

    def get_cache_path(self):
        return self._path

    def get_source_stamp(self):
        return self._digest

    def get_disambiguator(self):
        return str(self._lineno)

    @classmethod
    def from_function(cls, py_func, py_file):
        f = Path(py_file).resolve()
        if PACKAGE not in f.parents or not f.is_file():
            return None
        root = cache_root()
        if root is None:
            return None
        self = cls(py_func, py_file, root)
        try:
            self.ensure_cache_path()
        except OSError:
            return None
        return self


class _KernelCacheImpl(_caching.CompileResultCacheImpl):
    _locator_classes = [ContentKeyedLocator] + list(_caching.CompileResultCacheImpl._locator_classes)


class _KernelCache(_caching.FunctionCache):
    _impl_class = _KernelCacheImpl


def _with_locator(dispatcher):
    # numba's own FunctionCache, with the content-keyed locator tried first (a
    # NUMBA_CACHE_LOCATOR_CLASSES setting of the user still takes precedence)
    dispatcher._cache = _KernelCache(dispatcher.py_func)
    return dispatcher


def _jit(fn, opts):
    opts = dict(opts)
    cache = opts.pop("cache")
    # numba's cache=True would first set up (and create the folder of) its own path-keyed cache
    dispatcher = numba.njit(**opts)(fn)
    return _with_locator(dispatcher) if cache else dispatcher


def kernel(fn=None, **extra):
    """Decorate a private kernel with the project's JIT policy (see module docstring)."""
    opts = dict(KERNEL_OPTIONS, **extra)
    if fn is None:
        return lambda f: _jit(f, opts)
    return _jit(fn, opts)


