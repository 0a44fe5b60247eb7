"""Numba kernels of busbudget (private): transient, metrics and batched evaluation.

numba's on-disk cache checks only the source file of each compiled function,
not the files of the functions it calls: an edit of ``transient.py`` would
leave ``evaluate.py``'s cached machine code (which inlines the old transient)
in use.  So the cached code of all kernel modules is dropped together when
any kernel source changes (a fingerprint of the sources is kept beside the
cache).  Installs replace every file at once, so this matters while editing.
"""
from __future__ import annotations

import hashlib
import os
from pathlib import Path

_MODULES = ("inputs", "stream", "transient", "metrics", "evaluate", "nonlinear")
_STAMP = "busbudget-kernel-sources.sha256"


def _cache_dirs(src: Path):
    """Folders where numba may keep this package's cached kernels."""
    yield src / "__pycache__"
    root = os.environ.get("NUMBA_CACHE_DIR")
    if root:
        yield Path(root) / src.resolve().relative_to(src.resolve().anchor)


def _drop_stale_caches() -> None:
    src = Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for name in _MODULES:
        try:
            digest.update((src / f"{name}.py").read_bytes())
        except OSError:
            return
    stamp_text = digest.hexdigest()
    for folder in _cache_dirs(src):
        stamp = folder / _STAMP
        try:
            if stamp.read_text() == stamp_text:
                continue
        except OSError:
            pass
        try:
            folder.mkdir(parents=True, exist_ok=True)
            if folder.is_dir():
                for name in _MODULES:
                    for f in list(folder.glob(f"{name}.*.nbi")) + list(folder.glob(f"{name}.*.nbc")):
                        f.unlink()
                stamp.write_text(stamp_text)
        except OSError:
            pass  # read-only install: nothing was edited there


_drop_stale_caches()
