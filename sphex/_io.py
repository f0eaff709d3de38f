"""Small file helpers shared by the xarray layer, the plots and the command line.

Everything here is standard library only, so that the command line can import
it without paying for numpy or xarray.

- :func:`atomic_output` writes a file through a temporary file in the target
  directory and renames it into place, so a failed or interrupted run never
  leaves a partial file and an existing file is replaced only when asked.
- :class:`Progress` is a one-line progress bar for long runs on a terminal.
"""
from __future__ import annotations

import contextlib
import os
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path
from typing import TextIO

__all__ = ["OutputExistsError", "check_output_path", "atomic_output", "Progress"]


class OutputExistsError(FileExistsError):
    """The output file exists and the caller did not ask to replace it."""


def check_output_path(path: str | os.PathLike, overwrite: bool = False) -> Path:
    """Check early that ``path`` can be written, before any expensive work.

    Parameters
    ----------
    path : path-like
        The output file.
    overwrite : bool
        Whether an existing file may be replaced.

    Returns
    -------
    pathlib.Path
        ``path`` as a Path.

    Raises
    ------
    OutputExistsError
        If the file exists and ``overwrite`` is false.
    FileNotFoundError
        If the directory that should hold the file does not exist.
    IsADirectoryError
        If ``path`` names a directory.
    """
    p = Path(path)
    if p.is_dir():
        raise IsADirectoryError(f"output {str(p)!r} is a directory; give a file name")
    if p.exists() and not overwrite:
        raise OutputExistsError(
            f"output {str(p)!r} exists; pass --overwrite (overwrite=True) to replace it"
        )
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise FileNotFoundError(
            f"output directory {str(parent)!r} does not exist; create it first"
        )
    return p


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, overwrite: bool = False) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; move it into place on success.

    The temporary file lives in the target directory (so the final rename is
    atomic on one file system) and starts with a dot.  If the body raises
    (including ``KeyboardInterrupt``), the temporary file is removed and
    ``path`` is left exactly as it was.

    Parameters
    ----------
    path : path-like
        The final file.
    overwrite : bool
        Replace an existing file.  Without it an existing file is never
        touched, even if it appears while the body runs.

    Yields
    ------
    pathlib.Path
        Where the body should write.

    Examples
    --------
    >>> import os, tempfile
    >>> d = tempfile.mkdtemp()
    >>> with atomic_output(os.path.join(d, "a.txt")) as tmp:
    ...     _ = tmp.write_text("hello")
    >>> sorted(os.listdir(d))
    ['a.txt']
    """
    final = check_output_path(path, overwrite)
    parent = final.parent if str(final.parent) else Path(".")
    fd, tmp_name = tempfile.mkstemp(
        prefix=f".{final.name}.", suffix=".sphex-partial", dir=parent
    )
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        os.chmod(tmp, 0o666 & ~_umask())
        if overwrite:
            os.replace(tmp, final)
        else:
            # os.link refuses to replace an existing file, so a file that
            # appeared while we were working is still never overwritten.
            try:
                os.link(tmp, final)
            except FileExistsError:
                raise OutputExistsError(
                    f"output {str(final)!r} appeared while sphex was working; "
                    "pass --overwrite (overwrite=True) to replace it"
                ) from None
            except OSError:  # file systems without hard links
                if final.exists():
                    raise OutputExistsError(
                        f"output {str(final)!r} exists; pass --overwrite to replace it"
                    ) from None
                os.replace(tmp, final)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


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
