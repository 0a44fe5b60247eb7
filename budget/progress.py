"""A plain progress bar for long analyses, drawn on standard error only when it is a terminal.

Scripts that capture or redirect the output (CI, production benches) see
nothing: the bar draws only when its stream is an interactive terminal.
"""
from __future__ import annotations

import sys
import time


class ProgressBar:
    """Callable ``bar(done, total)`` that redraws one line on ``stream`` (default: stderr).

    Draws nothing unless the stream is a terminal (``isatty()``); redraws at
    most every ``interval`` seconds [s] and always at the end.  Use as a
    context manager so the line is finished (or cleared) afterwards.
    """

    def __init__(self, label: str = "", *, stream=None, width: int = 30, interval: float = 0.2,
                 force: bool = False):
        self.stream = sys.stderr if stream is None else stream
        self.label = label
        self.width = width
        self.interval = interval
        isatty = getattr(self.stream, "isatty", None)
        self.enabled = bool(force or (isatty is not None and isatty()))
        self.start = time.monotonic()
        self._last = -1.0
        self._drawn = False
        self._shown = None

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if done < total and now - self._last < self.interval:
            return
        if (done, total) == self._shown:
            return
        self._last = now
        self._shown = (done, total)
        frac = 0.0 if total <= 0 else min(max(done / total, 0.0), 1.0)
        filled = int(round(frac * self.width))
        elapsed = now - self.start
        eta = ""
        if 0.05 <= frac < 1 and elapsed > 1:
            eta = f", about {elapsed * (1 - frac) / frac:.0f} s left"
        line = f"{self.label} [{'#' * filled}{'.' * (self.width - filled)}] {done}/{total}{eta}"
        self.stream.write("\r" + line.ljust(79))
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        """End the bar's line (only if something was drawn)."""
        if self.enabled and self._drawn:
            self.stream.write("\n")
            self.stream.flush()
            self._drawn = False

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


__all__ = ["ProgressBar"]
