"""Progress of a subcommand on stderr, and the notice of a first run that prepares the kernels.

One display for every subcommand (:class:`Progress`):

- on a terminal, one line redrawn in place,
  ``sphex smooth |==========>         | 12/24 fields    3.4 s``, moved on as
  fields finish; a background thread redraws it twice a second, so the
  elapsed time ticks even while one long field is being worked on;
- elsewhere (pipes, log files), at most four plain lines, at a quarter, half,
  three quarters and the end of the work, and only once the run has lasted two
  seconds, so short runs print nothing.

:func:`announce_kernel_preparation` says once, on a terminal's stderr, that the
numeric kernels are being compiled when numba's on-disk cache holds no compiled
kernels of the run yet (or only ones older than their source): the first run
after installing or updating sphex compiles them, later runs load them
(:mod:`sphex.compiling`).

Standard library only (imported when the parser is built).
"""
from __future__ import annotations

import sys
import threading
import time
from typing import TextIO

__all__ = ["Progress", "progress_bar", "announce_kernel_preparation", "elapsed_text"]


def elapsed_text(seconds: float) -> str:
    """``3.4 s`` below a minute, ``2 min 05 s`` above."""
    if seconds < 60:
        return f"{seconds:5.1f} s"
    minutes, secs = divmod(int(seconds), 60)
    return f"{minutes} min {secs:02d} s"


class Progress:
    """The progress display of a subcommand (see the module docstring).

    Parameters
    ----------
    total : int
        Number of fields the run will do.
    label : str
        Text in front of the bar: ``sphex SUBCOMMAND``.
    stream : file, optional
        Where to write; default ``sys.stderr``.
    log_after : float
        Seconds a run must last before plain lines (no terminal) are written.
    tick : float
        Seconds between redraws of the terminal line while nothing finishes
        (0: no background redraws).

    Examples
    --------
    >>> import io
    >>> with Progress(10, "sphex smooth", stream=io.StringIO()) as bar:   # not a terminal, short
    ...     bar(10, 10)
    """

    width = 28
    quarters = (0.25, 0.5, 0.75, 1.0)

    def __init__(self, total: int, label: str = "", stream: TextIO | None = None, *,
                 log_after: float = 2.0, tick: float = 0.5) -> None:
        self.total = max(int(total), 0)
        self.label = label
        self.stream = sys.stderr if stream is None else stream
        isatty = getattr(self.stream, "isatty", None)
        self.tty = bool(isatty and isatty())
        self.log_after = log_after
        self.done = 0
        self.enabled = self.total >= 1
        self._start = time.monotonic()
        self._last_draw = 0.0
        self._next_quarter = 0
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._ticker: threading.Thread | None = None
        if self.enabled and self.tty:
            self._draw()
            if tick > 0:
                self._ticker = threading.Thread(target=self._tick, args=(tick,), daemon=True)
                self._ticker.start()

    # -- recording work --------------------------------------------------------------
    def update(self, n: int = 1) -> None:
        """Record ``n`` more fields done."""
        self._set(self.done + n)

    def __call__(self, done: int, total: int) -> None:
        """Callback form: ``done`` of ``total`` fields are finished."""
        if total != self.total and total > 0:
            self.total = int(total)
        self._set(done)

    def _set(self, done: int) -> None:
        if not self.enabled:
            return
        with self._lock:
            self.done = min(max(int(done), self.done), self.total)
            now = time.monotonic()
            if self.tty:
                if now - self._last_draw > 0.1 or self.done == self.total:
                    self._draw()
            else:
                self._log_line(now)

    # -- drawing ------------------------------------------------------------------------
    def _tick(self, every: float) -> None:
        while not self._stop.wait(every):
            with self._lock:
                if self._stop.is_set():
                    return
                self._draw()

    def _line(self) -> str:
        fields = "field" if self.total == 1 else "fields"
        return (f"{self.done}/{self.total} {fields} "
                f"{elapsed_text(time.monotonic() - self._start)}")

    def _draw(self) -> None:
        frac = self.done / self.total if self.total else 1.0
        full = int(round(frac * self.width))
        bar = ("=" * full + (">" if full < self.width else "")).ljust(self.width)[: self.width]
        self.stream.write(f"\r{self.label} |{bar}| {self._line()}  ")
        self.stream.flush()
        self._last_draw = time.monotonic()

    def _log_line(self, now: float) -> None:
        """A plain line when a quarter is passed, once the run has lasted ``log_after``."""
        frac = self.done / self.total if self.total else 1.0
        passed = self._next_quarter
        while passed < len(self.quarters) and frac >= self.quarters[passed] - 1e-12:
            passed += 1
        if passed == self._next_quarter:
            return
        self._next_quarter = passed
        if now - self._start >= self.log_after:
            self.stream.write(f"{self.label}: {self._line()} ({100 * frac:.0f} %)\n")
            self.stream.flush()

    def close(self) -> None:
        """Stop the redraws and finish the terminal line."""
        self._stop.set()
        if self._ticker is not None:
            self._ticker.join()
            self._ticker = None
        with self._lock:
            if self.enabled and self.tty:
                self._draw()
                self.stream.write("\n")
                self.stream.flush()
            self.enabled = False

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def progress_bar(total: int, command: str) -> Progress:
    """The progress display of ``sphex COMMAND`` on stderr for ``total`` fields."""
    return Progress(total, f"sphex {command}")


# ---------------------------------------------------------------------------------------
# the first run's kernel compilation (the logic lives in sphex.compiling, standard library only)
# ---------------------------------------------------------------------------------------
def announce_kernel_preparation(command: str, stream: TextIO | None = None,
                                kernels: tuple[str, ...] = ("scalar",)) -> bool:
    """Say once on a terminal's stderr that this run compiles the kernels it needs first.

    ``kernels`` names the kernel modules the run uses (see
    :data:`sphex.compiling.KERNEL_MODULES`); nothing is said when numba's cache
    holds them, nor when stderr is not a terminal (unless ``SPHEX_COMPILE_NOTICE=1``).
    Returns whether the notice was written.
    """
    from sphex.compiling import compile_notice

    return compile_notice(f"sphex {command}", kernels, stream)
