"""Reading input files within a size limit, and writing output files so that a failure never
leaves a partial file behind."""
from __future__ import annotations

import os
import stat
import tempfile
from pathlib import Path

from .errors import ArgumentError


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_atomically(path, write, *, binary: bool = False) -> None:
    """Call ``write(file)`` on a temporary file next to ``path``, then rename it into place.

    The file gets mode 0666 & ~umask, as any ordinarily created file.  An existing
    ``path`` must be a regular file: a symbolic link, a device node, a fifo, a socket
    or a directory is refused (never followed, never replaced).  Raises ArgumentError
    (naming the path) for those, a missing folder or a failed write (permissions, disk
    full); nothing is left at ``path`` or beside it if ``write`` fails.
    """
    target = Path(path)
    try:
        st = os.lstat(target)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot write the file ({exc.strerror or exc})") from None
    if st is not None:
        if stat.S_ISDIR(st.st_mode):
            raise ArgumentError(f"{path}: is a directory")
        if stat.S_ISLNK(st.st_mode):
            raise ArgumentError(f"{path}: is a symbolic link; refusing to replace it or write through it "
                                "(give the real path)")
        if not stat.S_ISREG(st.st_mode):
            raise ArgumentError(f"{path}: exists and is not a regular file (a device, fifo or socket); "
                                "refusing to replace it")
    parent = target.parent if str(target.parent) else Path(".")
    if not parent.is_dir():
        raise ArgumentError(f"{path}: the folder {parent} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=parent)
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot write the file ({exc.strerror or exc})") from None
    try:
        os.fchmod(fd, 0o666 & ~_umask())
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


def read_regular_file(path, max_bytes: int, fail, *, hint: str = "") -> bytes:
    """The bytes of the regular file ``path``, at most ``max_bytes`` of them.

    ``fail(reason)`` builds the caller's error (which names the file); it is raised for
    a directory, a device or fifo (checked before opening: opening a fifo would wait for
    a writer, reading ``/dev/zero`` would never end), a file over ``max_bytes`` (``hint``
    is appended to that message) and any operating-system error.
    """
    try:
        st = os.stat(path)
        if stat.S_ISDIR(st.st_mode):
            raise fail("is a directory, not a regular file")
        if not stat.S_ISREG(st.st_mode):
            raise fail("not a regular file (a device or fifo)")
        if st.st_size > max_bytes:
            raise fail(f"{st.st_size} bytes, more than the {max_bytes} allowed" + (f" ({hint})" if hint else ""))
        with open(path, "rb") as f:
            data = f.read(max_bytes + 1)
    except OSError as exc:
        raise fail(f"cannot read the file ({exc.strerror or exc})") from None
    if len(data) > max_bytes:   # grew while being read
        raise fail(f"more than the {max_bytes} bytes allowed" + (f" ({hint})" if hint else ""))
    return data
