"""Atomic output files, used wherever sphex writes a file (adapters, plots, demo, command line).

Standard library only.  :func:`check_output_path` checks a destination before
any expensive work; :func:`atomic_output` writes through a temporary file in
the target directory and renames it into place, so a failed or interrupted
run never leaves a partial file, and an existing file is replaced only when
asked.
"""
from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = ["OutputExistsError", "check_output_path", "atomic_output"]


class OutputExistsError(FileExistsError):
    """The output file exists and the caller did not ask to replace it.

    The message names Python's ``overwrite=True``; :meth:`shell_message`
    gives the command line's wording (``--overwrite``).
    """

    def __init__(self, path: str | os.PathLike, appeared: bool = False) -> None:
        self.path = str(path)
        self.appeared = bool(appeared)
        super().__init__(self._message("overwrite=True"))

    def __reduce__(self) -> tuple:
        return (type(self), (self.path, self.appeared))

    def _message(self, how: str) -> str:
        what = "appeared while sphex was working" if self.appeared else "exists"
        return f"output {self.path!r} {what}; pass {how} to replace it"

    def shell_message(self) -> str:
        """The message in the command line's words."""
        return self._message("--overwrite")


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
        raise OutputExistsError(p)
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
                raise OutputExistsError(final, appeared=True) from None
            except OSError:  # file systems without hard links
                if final.exists():
                    raise OutputExistsError(final) from None
                os.replace(tmp, final)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
