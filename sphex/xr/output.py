"""Atomic output files, used wherever sphex writes a file (adapters, plots, demo, command line).

Standard library only.  :func:`check_output_path` checks a destination before
any expensive work (that it is not a directory, does not exist unless it may
be replaced, and that its folder exists and can be written: a file is
created there and removed); :func:`check_distinct` refuses an output that is
one of the inputs, or two outputs that are one file.  :func:`atomic_output`
writes through a hidden temporary file in the target directory and renames
it into place, so a failed or interrupted run never leaves a partial file,
and an existing file is replaced only when asked.

Temporary files are named ``.NAME.pidPID@HOST.XXXXXXXX.sphex-partial``: a run
killed with SIGKILL cannot remove its own, so every later write into the
folder removes those whose process (on this host) no longer runs
(:func:`sweep_stale_partials`); files of live runs, of other hosts and of any
other naming are never touched.
"""
from __future__ import annotations

import contextlib
import errno
import os
import re
import socket
import tempfile
from collections.abc import Iterable, Iterator
from pathlib import Path

__all__ = ["OutputExistsError", "check_output_path", "check_distinct", "atomic_output",
           "sweep_stale_partials", "partial_prefix", "folder_problem", "PARTIAL_SUFFIX"]

PARTIAL_SUFFIX = ".sphex-partial"
_PARTIAL = re.compile(r"\.pid(\d+)@([A-Za-z0-9_-]*)\.[A-Za-z0-9_]+" + re.escape(PARTIAL_SUFFIX) + "$")


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


def _host() -> str:
    return re.sub(r"[^A-Za-z0-9_-]", "_", socket.gethostname())[:40]


def partial_prefix(final: Path) -> str:
    """The start of the name of a temporary file for ``final`` written by this process."""
    return f".{final.name[:120]}.pid{os.getpid()}@{_host()}."  # within 255 bytes


def folder_problem(parent: Path, exc: OSError) -> OSError:
    """An OSError saying why the output folder cannot be written, and what to do."""
    where = str(parent)
    if exc.errno in (errno.EACCES, errno.EPERM):
        return PermissionError(exc.errno, f"output folder {where!r} is not writable (permission "
                               "denied); choose another folder or fix its permissions")
    if exc.errno == errno.EROFS:
        return OSError(exc.errno, f"output folder {where!r} is on a read-only file system; "
                       "choose another folder")
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return OSError(exc.errno, f"no space left for output in {where!r} (disk or quota full); "
                       "free some space or choose another folder")
    return OSError(exc.errno, f"cannot write in output folder {where!r} ({exc.strerror}); "
                   "choose another folder")


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
    PermissionError, OSError
        If the folder cannot be written (permissions, a read-only or full
        file system): a file is created there and removed at once to find out.
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
    try:
        fd, probe = tempfile.mkstemp(prefix=partial_prefix(p), suffix=PARTIAL_SUFFIX, dir=parent)
    except OSError as exc:
        raise folder_problem(parent, exc) from None
    os.close(fd)
    with contextlib.suppress(OSError):
        os.unlink(probe)
    return p


def _same_file(a: Path, b: Path) -> bool:
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet)
        return False


def check_distinct(inputs: Iterable[str | os.PathLike | None],
                   outputs: Iterable[str | os.PathLike | None]) -> None:
    """Refuse an output that is one of the inputs, and two outputs that are one file.

    Paths are compared resolved (symbolic links followed) and by identity on
    disk (hard links), so another spelling of the same file is caught too.
    An input is never written over, not even when replacing outputs is allowed.

    Raises
    ------
    ValueError
        Naming the two paths and what to do.
    """
    ins = [Path(p) for p in inputs if p is not None]
    outs = [Path(p) for p in outputs if p is not None]
    for o in outs:
        for i in ins:
            if _same_file(o, i):
                raise ValueError(f"output {str(o)!r} is the input file {str(i)!r}; sphex never "
                                 "writes over an input, not even with --overwrite: choose "
                                 "another output name")
    for k, a in enumerate(outs):
        for b in outs[k + 1:]:
            if _same_file(a, b):
                raise ValueError(f"two outputs are the same file ({str(a)!r} and {str(b)!r}); "
                                 "give them different names")


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # PermissionError: it exists, under another user
        return True
    return True


def sweep_stale_partials(folder: str | os.PathLike) -> list[Path]:
    """Remove the temporary files that runs killed on this host left in ``folder``.

    Only files named by :func:`atomic_output` (``.NAME.pidPID@HOST.XXXXXXXX.sphex-partial``)
    whose HOST is this one and whose process no longer exists are removed; a
    file of a live run (whatever its user), of another host sharing the
    folder, or of any other naming stays.  A reused process number makes a
    stale file look live: it then stays (the safe side).

    Returns
    -------
    list of pathlib.Path
        The files removed.
    """
    host = _host()
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        if not entry.name.startswith(".") or not entry.name.endswith(PARTIAL_SUFFIX):
            continue
        m = _PARTIAL.search(entry.name)
        if m is None or m.group(2) != host:
            continue
        pid = int(m.group(1))
        if pid == os.getpid() or _process_alive(pid):
            continue
        with contextlib.suppress(OSError):
            os.unlink(entry.path)
            removed.append(Path(entry.path))
    return removed


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, overwrite: bool = False) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; move it into place on success.

    The temporary file lives in the target directory (so the final rename is
    atomic on one file system), starts with a dot and carries this process's
    number and host; stale ones of killed runs are swept first
    (:func:`sweep_stale_partials`).  If the body raises (including
    ``KeyboardInterrupt``), the temporary file is removed and ``path`` is
    left exactly as it was.

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
    sweep_stale_partials(parent)
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=partial_prefix(final), suffix=PARTIAL_SUFFIX,
                                        dir=parent)
    except OSError as exc:
        raise folder_problem(parent, exc) from None
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
