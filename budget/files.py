"""Writing output files so that a failure never leaves a partial file behind."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import ArgumentError


def write_atomically(path, write, *, binary: bool = False) -> None:
    """Call ``write(file)`` on a temporary file next to ``path``, then rename it into place.

    Raises ArgumentError (naming the path) for a missing folder or a directory
    target; nothing is left at ``path`` or beside it if ``write`` fails.
    """
    target = Path(path)
    if target.is_dir():
        raise ArgumentError(f"{path}: is a directory")
    parent = target.parent if str(target.parent) else Path(".")
    if not parent.is_dir():
        raise ArgumentError(f"{path}: the folder {parent} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=parent)
    try:
        with (os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", newline="")) as fh:
            write(fh)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
