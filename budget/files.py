"""Writing output files so that a failure never leaves a partial file behind."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import ArgumentError


def write_atomically(path, write, *, binary: bool = False) -> None:
    """Call ``write(file)`` on a temporary file next to ``path``, then rename it into place.

    Raises ArgumentError (naming the path) for a missing folder, a directory
    target or a failed write (permissions, disk full); nothing is left at ``path`` or beside it if ``write`` fails.
    """
    target = Path(path)
    if target.is_dir():
        raise ArgumentError(f"{path}: is a directory")
    parent = target.parent if str(target.parent) else Path(".")
    if not parent.is_dir():
        raise ArgumentError(f"{path}: the folder {parent} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=parent)
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot write the file ({exc.strerror or exc})") from None
    try:
        with (os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", newline="")) as fh:
            write(fh)
        os.replace(tmp, target)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):   # disk full, permissions...: the user's environment, not a bug
            raise ArgumentError(f"{path}: cannot write the file ({exc.strerror or exc})") from None
        raise
