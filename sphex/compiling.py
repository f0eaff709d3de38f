"""Whether a call will compile numba kernels first, and the one notice that says so.

The kernels are compiled on their first use after sphex is installed or
updated and kept in numba's on-disk cache; later processes load them.  This
module answers, without importing numba, whether the cache lacks the compiled
forms of a kernel module (or holds only ones older than its source), and
writes the notice a command prints before such a call:

    sphex analyze: compiling the numeric kernels once for this installation (scalar
    transforms, about 18 s); later runs load them from the cache and start at once

The notice goes to a terminal only, once per process and kernel module: pipes,
log files, tests and CI see nothing, unless ``SPHEX_COMPILE_NOTICE=1`` asks for
it anyway (``SPHEX_COMPILE_NOTICE=0`` silences it on a terminal too).

Standard library only, so the command line can ask before it imports numba.
"""
from __future__ import annotations

import hashlib
import os
import sys
from collections.abc import Iterable
from pathlib import Path
from typing import TextIO

__all__ = ["KERNEL_MODULES", "kernel_cache_directories", "missing_kernels",
           "kernels_need_preparing", "compile_notice"]

#: Kernel modules by name: what they serve and the seconds their first compilation took
#: on the two-core development machine (all of its kernels, from an empty cache, measured
#: by docs/measurements/measure_demo_fresh.py on 2026-12-02; update after kernel changes).
KERNEL_MODULES: dict[str, tuple[str, float]] = {
    "scalar": ("scalar transforms", 7.0),
    "gauss": ("Gauss-Legendre nodes", 1.0),
    "vector": ("wind and current transforms", 24.0),
}

#: Modules whose code the kernels of a module inline (an edit there changes them too).
_INLINED = ("recursion.py",)

_KERNELS = Path(__file__).resolve().parent / "kernels"
_told: set[str] = set()


def kernel_cache_directories(kernels: Path = _KERNELS) -> list[Path]:
    """Where numba keeps the compiled kernels of ``kernels``, in its order of preference.

    numba writes beside the source (``__pycache__``) unless ``NUMBA_CACHE_DIR``
    is set; where the source directory is read-only it uses the user's cache
    directory.  Outside ``__pycache__`` the subdirectory is the source
    directory's name and the SHA-1 of its path.
    """
    source_dir = str(kernels.resolve())
    subpath = f"{Path(source_dir).name}_{hashlib.sha1(source_dir.encode()).hexdigest()}"
    chosen = os.environ.get("NUMBA_CACHE_DIR", "")
    if chosen:
        return [Path(chosen).resolve() / subpath]
    user = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "numba"
    return [kernels / "__pycache__", user / subpath]


def missing_kernels(modules: Iterable[str] = ("scalar",), kernels: Path = _KERNELS) -> list[str]:
    """The kernel modules of ``modules`` whose compiled forms numba's cache lacks.

    Cheap: looks for the index files (``scalar.*.nbi``) numba writes when it
    caches a compiled function, and compares their times with those of the
    module's source and of the sources it inlines.  A module whose source is
    not found counts as present (nothing can be said about it).
    """
    missing = []
    for module in modules:
        try:
            newest = max((kernels / name).stat().st_mtime
                         for name in (f"{module}.py",) + _INLINED)
        except OSError:
            continue
        found = False
        for directory in kernel_cache_directories(kernels):
            index = list(directory.glob(f"{module}.*.nbi"))
            if index and min(p.stat().st_mtime for p in index) >= newest:
                found = True
                break
        if not found:
            missing.append(module)
    return missing


def kernels_need_preparing(kernels: Path | None = None) -> bool:
    """Whether numba's cache lacks the scalar transform kernels (or holds only older ones)."""
    return bool(missing_kernels(("scalar",), _KERNELS if kernels is None else kernels))


def _wanted(stream: TextIO) -> bool:
    choice = os.environ.get("SPHEX_COMPILE_NOTICE", "")
    if choice in ("0", "1"):
        return choice == "1"
    isatty = getattr(stream, "isatty", None)
    return bool(isatty and isatty())


def compile_notice(command: str, modules: Iterable[str] = ("scalar",),
                   stream: TextIO | None = None) -> bool:
    """Say once, on a terminal, that this call compiles the kernels of ``modules`` first.

    Parameters
    ----------
    command : str
        Who speaks: ``sphex analyze``, ``sphex demo``, ...
    modules : iterable of str
        The kernel modules the call needs (keys of :data:`KERNEL_MODULES`).
    stream : file, optional
        Default ``sys.stderr``.  Written to only if it is a terminal (or
        ``SPHEX_COMPILE_NOTICE=1``).

    Returns
    -------
    bool
        Whether the notice was written.

    Examples
    --------
    >>> import io
    >>> compile_notice("sphex analyze", stream=io.StringIO())   # not a terminal: silent
    False
    """
    out = sys.stderr if stream is None else stream
    if not _wanted(out):
        return False
    todo = [m for m in missing_kernels(modules) if m not in _told]
    if not todo:
        return False
    _told.update(todo)
    what = ", ".join(KERNEL_MODULES.get(m, (m, 0.0))[0] for m in todo)
    seconds = sum(KERNEL_MODULES.get(m, ("", 0.0))[1] for m in todo)
    about = f", about {seconds:.0f} s" if seconds >= 1 else ""
    out.write(f"{command}: compiling the numeric kernels once for this installation ({what}"
              f"{about}); later runs load them from the cache and start at once\n")
    out.flush()
    return True
