"""The terminal progress bar of the command line and the demo (standard library only)."""
from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress"]


class Progress:
    """A one-line progress bar on a terminal stream (silent elsewhere).

    Parameters
    ----------
    total : int
        Number of items (fields) the run will do.
    label : str
        Short text in front of the bar.
    stream : file, optional
        Where to draw; default ``sys.stderr``.  Nothing is drawn unless the
        stream is a terminal, so logs and pipes stay clean.
    min_total : int
        Runs with fewer items than this draw nothing.

    Examples
    --------
    >>> import io
    >>> bar = Progress(10, "fields", stream=io.StringIO())  # not a terminal: silent
    >>> bar.update(10); bar.close()
    """

    width = 28

    def __init__(self, total: int, label: str = "", stream: TextIO | None = None,
                 min_total: int = 2) -> None:
        self.total = max(int(total), 0)
        self.label = label
        self.stream = sys.stderr if stream is None else stream
        isatty = getattr(self.stream, "isatty", None)
        self.enabled = bool(isatty and isatty()) and self.total >= min_total
        self.done = 0
        self._start = time.monotonic()
        self._last = 0.0
        if self.enabled:
            self._draw()

    def update(self, n: int = 1) -> None:
        """Record ``n`` more items done and redraw (at most ten times a second)."""
        self.done = min(self.done + n, self.total)
        now = time.monotonic()
        if self.enabled and (now - self._last > 0.1 or self.done == self.total):
            self._last = now
            self._draw()

    def __call__(self, done: int, total: int) -> None:
        """Callback form: set the count to ``done`` out of ``total``."""
        self.total = total
        self.update(done - self.done)

    def _draw(self) -> None:
        frac = self.done / self.total if self.total else 1.0
        full = int(round(frac * self.width))
        elapsed = time.monotonic() - self._start
        bar = "=" * full + (">" if full < self.width else "") + " " * (self.width - full - 1)
        self.stream.write(
            f"\r{self.label} |{bar[:self.width]}| {self.done}/{self.total} {elapsed:5.1f} s"
        )
        self.stream.flush()

    def close(self) -> None:
        """Finish the line."""
        if self.enabled:
            self._draw()
            self.stream.write("\n")
            self.stream.flush()
            self.enabled = False

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
