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

A run that will need several kernels can also have some of them compiled in a
second process while it works (:func:`compile_beside`): numba compiles one
function at a time in a process, so on a machine with two cores the demo's
first run compiles its wind and batch kernels beside its scalar work.  The
helper process fills the same on-disk cache with the same compiled forms (it
makes tiny calls through the public functions, which hand the kernels the same
argument types as every other call); the run waits for a group only when it
reaches it.

Standard library only, so the command line can ask before it imports numba.
"""
from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import threading
from collections.abc import Iterable
from pathlib import Path
from typing import TextIO

__all__ = ["KERNEL_MODULES", "KERNEL_GROUPS", "kernel_cache_directories", "missing_kernels",
           "kernels_need_preparing", "compile_notice", "compile_beside", "BesideCompilation",
           "DEMO_BESIDE"]

#: Kernel modules by name: what they serve and the seconds their first compilation took
#: on the two-core development machine (all of its kernels, from an empty cache, measured
#: by docs/measurements/measure_demo_fresh.py on 2026-12-02, the vector kernels by
#: docs/measurements/measure_vector_kernels.py on 2026-12-03; update after kernel changes).
KERNEL_MODULES: dict[str, tuple[str, float]] = {
    "scalar": ("scalar transforms", 7.0),
    "gauss": ("Gauss-Legendre nodes", 1.0),
    "vector": ("wind and current transforms", 10.0),
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


def _source_time(module: str, kernels: Path) -> float | None:
    """Time of the last edit of a kernel module or of a source it inlines (None: not found)."""
    try:
        return max((kernels / name).stat().st_mtime for name in (f"{module}.py",) + _INLINED)
    except OSError:
        return None


def missing_kernels(modules: Iterable[str] = ("scalar",), kernels: Path = _KERNELS) -> list[str]:
    """The kernel modules of ``modules`` whose compiled forms numba's cache lacks.

    Cheap: looks for the index files (``scalar.*.nbi``) numba writes when it
    caches a compiled function, and compares their times with those of the
    module's source and of the sources it inlines.  A module whose source is
    not found counts as present (nothing can be said about it).
    """
    missing = []
    for module in modules:
        newest = _source_time(module, kernels)
        if newest is None:
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


def _stale_or_missing(module: str, function: str, kernels: Path = _KERNELS) -> bool:
    """Whether numba's cache lacks ``module.function`` (index ``module.function-LINE.*.nbi``)
    or holds only a form older than the module's source or the sources it inlines."""
    newest = _source_time(module, kernels)
    if newest is None:
        return False
    for directory in kernel_cache_directories(kernels):
        index = list(directory.glob(f"{module}.{function}-*.nbi"))
        if index and max(p.stat().st_mtime for p in index) >= newest:
            return False
    return True


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


# ---------------------------------------------------------------------------
# compiling beside the run
# ---------------------------------------------------------------------------
#: Groups a helper process can compile: the kernel module and its functions.
KERNEL_GROUPS: dict[str, tuple[str, tuple[str, ...]]] = {
    "single": ("scalar", ("analysis_single", "synthesis_single")),
    "batch-synthesis": ("scalar", ("synthesis_batch",)),
    "batch-analysis": ("scalar", ("analysis_batch",)),
    "vector": ("vector", ("vector_analysis_kernel", "vector_synthesis_kernel",
                          "flow_to_sequences", "sequences_to_flow")),
}

#: What the demo's first run compiles beside its scalar work: the kernels of its wind section.
DEMO_BESIDE = ("vector", "batch-synthesis")


def _group_missing(group: str, kernels: Path = _KERNELS) -> bool:
    module, functions = KERNEL_GROUPS[group]
    return any(_stale_or_missing(module, f, kernels) for f in functions)


def _compile_group(group: str) -> None:
    """Compile the kernels of ``group`` by tiny calls of the public functions (in the helper)."""
    import numpy as np

    from sphex import Grid, Harmonics, analyze, synthesize
    from sphex.vector_transform import analyze_vector, synthesize_vector

    grid = Grid.equiangular(8, 16)  # no Gauss nodes needed
    one = np.cos(np.arange(8 * 16, dtype=np.float64).reshape(8, 16))
    two = np.stack([one, one[::-1]])
    if group == "single":
        synthesize(analyze(one, grid, 3), grid)
    elif group == "batch-synthesis":
        synthesize(Harmonics(np.ones((2, 4, 4), dtype=np.complex128)), grid)
    elif group == "batch-analysis":
        analyze(two, grid, 3)
    elif group == "vector":
        synthesize_vector(*analyze_vector(one, one[::-1], grid, 3), grid)
    else:
        raise ValueError(f"unknown kernel group {group!r}; one of {', '.join(KERNEL_GROUPS)}")


_beside: "BesideCompilation | None" = None  # the helper this process started last


class BesideCompilation:
    """A helper process compiling kernel groups into numba's cache (see :func:`compile_beside`)."""

    def __init__(self, process: subprocess.Popen, groups: tuple[str, ...],
                 asked: Iterable[str] | None = None):
        self.process = process
        self.groups = groups  # what it compiles
        self.asked = frozenset(groups if asked is None else asked)  # what it was started for
        self._done: set[str] = set()
        self._lock = threading.Lock()

    def wait(self, group: str, timeout: float = 300.0) -> bool:
        """Block until the helper has compiled ``group`` (or has ended, or ``timeout`` s passed).

        Returns whether the group is in the cache now; when not, the caller
        simply compiles it itself on first use."""
        if group not in self.groups:
            return False
        timer = threading.Timer(timeout, self.process.kill)
        timer.start()
        try:
            with self._lock:
                while group not in self._done:
                    line = self.process.stdout.readline() if self.process.stdout else ""
                    if not line:
                        break
                    if line.startswith("compiled "):
                        self._done.add(line.split()[1])
        finally:
            timer.cancel()
        return group in self._done

    def close(self) -> None:
        """Wait for the helper to finish (what it compiles stays useful to later runs)."""
        for group in self.groups:
            self.wait(group)
        self.stop()

    def stop(self) -> None:
        """End the helper now if it still runs (a cache file it was writing is never left
        half-written: numba writes a temporary file and renames it)."""
        if self.process.poll() is None:
            self.process.kill()
        self.process.wait()
        if self.process.stdout:
            self.process.stdout.close()


def compile_beside(groups: Iterable[str]) -> BesideCompilation | None:
    """Start a process that compiles the kernel groups among ``groups`` the cache lacks.

    Returns ``None`` (nothing to do) when the cache holds them all, when the
    machine has one core, or when ``SPHEX_COMPILE_BESIDE=0``.  The caller
    calls :meth:`BesideCompilation.wait` before it first uses a group and
    :meth:`BesideCompilation.close` at the end.
    """
    global _beside
    groups = tuple(groups)
    unknown = [g for g in groups if g not in KERNEL_GROUPS]
    if unknown:
        raise ValueError(f"unknown kernel group {unknown[0]!r}; one of {', '.join(KERNEL_GROUPS)}")
    if os.environ.get("SPHEX_COMPILE_BESIDE", "") == "0" or (os.cpu_count() or 1) < 2:
        return None
    if (_beside is not None and _beside.process.returncode is None
            and set(groups) <= _beside.asked):
        return _beside  # started already for these (the command line starts it early)
    todo = tuple(g for g in groups if _group_missing(g))
    if not todo:
        return None
    env = dict(os.environ, SPHEX_COMPILE_NOTICE="0")
    process = subprocess.Popen([sys.executable, "-m", "sphex.compiling", *todo],
                               stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                               stderr=subprocess.DEVNULL, text=True, env=env)
    _beside = BesideCompilation(process, todo, groups)
    return _beside


def _main(argv: list[str]) -> int:
    """``python -m sphex.compiling GROUP ...``: compile the groups, say ``compiled GROUP`` after each."""
    for group in argv:
        _compile_group(group)
        print(f"compiled {group}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
