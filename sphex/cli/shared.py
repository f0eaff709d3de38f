"""What the subcommands share: argument types, opening inputs, grid texts, writing outputs,
the progress bar and the one-line error report.

Only the standard library is imported here at module level, so that building
the parser (and ``sphex --help``) stays quick; numpy, xarray and the adapter
layer are imported inside the functions that need them.
"""
from __future__ import annotations

import argparse
import errno
import os
import sys
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sphex.cli.progress import Progress, progress_bar

__all__ = [
    "PROG", "UserError", "FORMATTER", "add_command", "add_output_arguments",
    "whole_number", "positive_number", "distance_km", "cap_radius", "chunk_spec", "degree_range",
    "open_input", "load_variable", "grid_of", "target_grid", "count_fields", "write_field",
    "keep_precision", "Progress", "progress_bar", "say", "report_error", "report_failure",
    "check_paths", "is_coefficient_file", "grid_file", "one_line_warnings", "EXIT_USER_ERROR",
    "EXIT_INTERNAL_ERROR",
    "EXIT_INTERRUPTED", "DEBUG_VARIABLE",
]

PROG = "sphex"
FORMATTER = argparse.RawDescriptionHelpFormatter

#: Exit status of a problem the user can fix (bad input, missing file, full disk, no memory).
EXIT_USER_ERROR = 2
#: Exit status of a failure sphex did not foresee: a bug (EX_SOFTWARE of sysexits.h).
EXIT_INTERNAL_ERROR = 70
#: Exit status after Ctrl-C or SIGTERM (128 + SIGINT, the shells' convention).
EXIT_INTERRUPTED = 130
#: Environment variable that, set to 1, shows tracebacks (as the --debug option does).
DEBUG_VARIABLE = "SPHEX_DEBUG"


class UserError(Exception):
    """A problem with what the user asked for; reported in one line, exit 2."""


# ---------------------------------------------------------------------------
# building subcommands
# ---------------------------------------------------------------------------
def add_command(sub: Any, name: str, help_: str, example: str | None) -> argparse.ArgumentParser:
    """Add subcommand ``name`` with its one-line help, its example text (the epilog) and
    the ``--debug`` option every command has."""
    q = sub.add_parser(name, help=help_, description=help_ + ".", epilog=example,
                       formatter_class=FORMATTER)
    add_debug_argument(q, default=argparse.SUPPRESS)
    return q


def add_debug_argument(q: argparse.ArgumentParser, default: Any = False) -> None:
    """``--debug``: show the traceback of a failure instead of the one-line message."""
    q.add_argument("--debug", action="store_true", default=default,
                   help=f"show the full traceback of a failure (also: {DEBUG_VARIABLE}=1)")


def add_output_arguments(q: argparse.ArgumentParser, what: str = "output netCDF file") -> None:
    """``-o/--output`` and ``--overwrite``."""
    q.add_argument("-o", "--output", required=True, metavar="OUT", help=what)
    q.add_argument("--overwrite", action="store_true", help="replace OUT if it exists")


# ---------------------------------------------------------------------------
# argument types (argparse turns their ArgumentTypeError into one line)
# ---------------------------------------------------------------------------
def whole_number(text: str) -> int:
    """A whole number >= 0."""
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"{text!r} must be 0 or more")
    return v


def positive_number(text: str) -> float:
    """A finite number > 0."""
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not v > 0 or v == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive number")
    return v


def _strip_unit(text: str, units: tuple[str, ...]) -> str:
    """'300km' or '300 km' -> '300' for an option measured in units[0]."""
    t = text.strip()
    for u in units:
        if t.lower().endswith(u):
            return t[: len(t) - len(u)].strip()
    return t


def distance_km(text: str) -> float:
    """A positive distance in km; the unit 'km' may be written, metres are refused."""
    t = _strip_unit(text, ("km",))
    if t == text.strip() and t.lower().endswith("m"):  # metres, or another unit
        raise argparse.ArgumentTypeError(f"{text!r}: give the distance in km (a number, 'km' optional)")
    return positive_number(t)


def cap_radius(text: str) -> float:
    """An angular radius in (0, 180] degrees; 'deg', 'degrees' or a degree sign may follow."""
    v = positive_number(_strip_unit(text, ("degrees", "degree", "deg", "\u00b0")))
    if v > 180:
        raise argparse.ArgumentTypeError(f"{text!r} must be at most 180 degrees")
    return v


def chunk_spec(text: str) -> dict[str, int]:
    """``DIM=N[,DIM=N]`` for ``--chunks``."""
    from sphex.xr.streaming import parse_chunks

    try:
        return parse_chunks(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def degree_range(text: str) -> tuple[int, int]:
    """``L1:L2`` with 0 <= L1 < L2."""
    a, sep, b = text.partition(":")
    try:
        l1, l2 = int(a), int(b)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not L1:L2 (two whole numbers)") from None
    if not sep or not 0 <= l1 < l2:
        raise argparse.ArgumentTypeError(f"{text!r} must be L1:L2 with 0 <= L1 < L2")
    return l1, l2


# ---------------------------------------------------------------------------
# inputs and grids
# ---------------------------------------------------------------------------
def open_input(path: str):
    """Open a netCDF file lazily (errors say what is wrong with it)."""
    from sphex.xr.files import open_netcdf

    return open_netcdf(path)


def load_variable(path: str, var: str | None):
    """Open ``path`` and return (DataArray loaded in memory, file global attrs).

    Without ``var`` the file's only variable on a usable grid is taken; when
    none is usable and one variable looks like a field, its own reason is
    the message.
    """
    from sphex.xr.coords import choose_variable

    ds = open_input(path)
    try:
        try:
            var = choose_variable(ds, var, path)
        except ValueError as exc:
            raise UserError(str(exc)) from None
        check_fits_in_memory(ds[var], path)
        try:
            da = ds[var].load()
        except RuntimeError as exc:  # the netCDF/HDF5 library on a file damaged past its header
            from sphex.xr.files import read_failure

            raise read_failure(path, exc) from None
        attrs = dict(ds.attrs)
    finally:
        ds.close()
    return da, attrs


def check_fits_in_memory(var, path: str) -> None:
    """Refuse to load a variable that cannot fit in memory (read as float64, twice over:
    the input and the result), before reading it."""
    from sphex.limits import check_memory

    nbytes = 16.0 * float(var.size)
    check_memory(nbytes, f"{path}: variable {var.name!r} ({' x '.join(map(str, var.shape))})",
                 "analyse it in parts (select steps with a smaller file), or use sphex analyze, "
                 "which streams a series in chunks")


def grid_of(da, path: str):
    """The GridInfo of a variable read from ``path`` (a UserError naming the file if none)."""
    from sphex.xr.coords import find_grid

    try:
        return find_grid(da)
    except ValueError as exc:
        raise UserError(f"{path}: {exc}") from None


def grid_file(spec: str) -> str | None:
    """The file a ``--grid`` text names, or None for a grid text such as gauss:LMAX."""
    return spec if Path(spec).exists() else None


def target_grid(spec: str):
    """A Grid (from text) or a Dataset whose coordinates define the grid (from a file)."""
    from sphex.xr.coords import find_grid, is_grid_text, parse_grid

    if is_grid_text(spec) and not Path(spec).exists():
        return parse_grid(spec)
    if Path(spec).exists():
        ds = open_input(spec)
        try:
            info = find_grid(ds)
        except ValueError as exc:
            ds.close()
            raise UserError(f"--grid {spec}: {exc}") from None
        import xarray as xr

        coords = xr.Dataset(coords={info.lat_name: ds[info.lat_name],
                                    info.lon_name: ds[info.lon_name]}).load()
        ds.close()
        return coords
    raise UserError(f"--grid {spec!r} is neither a file nor a grid text (gauss:LMAX, "
                    "equiangular:NLATxNLON:LAYOUT or equiangular:SPACINGdeg)")


def count_fields(da, info) -> int:
    """Number of fields in ``da``: the product of its non-spatial sizes."""
    n = 1
    for d, size in da.sizes.items():
        if d not in (info.lat_dim, info.lon_dim):
            n *= size
    return n


# ---------------------------------------------------------------------------
# outputs
# ---------------------------------------------------------------------------
def write_field(da, path: str, overwrite: bool, global_attrs: dict, line: str) -> None:
    """Write a gridded field atomically, keeping the input's global attributes and history."""
    from sphex.xr.fields import append_history
    from sphex.xr.files import write_dataset

    ds = da.to_dataset(name=da.name if da.name is not None else "field")
    attrs = {k: v for k, v in global_attrs.items() if k != "history"}
    attrs["history"] = append_history(global_attrs, line)
    ds.attrs = attrs
    write_dataset(ds, path, overwrite)


def keep_precision(out, da):
    """``out`` in float32 when the input ``da`` was float32, unless its values leave the
    float32 range (then float64 is kept, and a warning says so)."""
    import numpy as np

    if da.dtype != np.float32:
        return out
    top = float(np.finfo(np.float32).max)
    peak = float(abs(out).max()) if out.size else 0.0
    if peak > top:
        warnings.warn(f"the result reaches {peak:.4g}, beyond the float32 range of the input "
                      f"({top:.4g}): written as float64", UserWarning, stacklevel=2)
        return out
    return out.astype(np.float32)


def say(*lines: str) -> None:
    """Print the report of a subcommand."""
    print("\n".join(lines))


# ---------------------------------------------------------------------------
# errors
# ---------------------------------------------------------------------------
def _where(command: str | None) -> str:
    return f"{PROG} {command}" if command else PROG


def report_error(command: str | None, exc: BaseException) -> int:
    """Write ``sphex COMMAND: error: MESSAGE`` on one line to stderr; returns 2."""
    if callable(getattr(exc, "shell_message", None)):   # the shell's words, not Python's keywords
        exc = UserError(exc.shell_message())
    msg = " ".join(str(exc).split()) or type(exc).__name__
    sys.stderr.write(f"{_where(command)}: error: {msg}\n")
    return EXIT_USER_ERROR


_OS_FIXES = {
    errno.ENOSPC: "free some space or write elsewhere",
    errno.EDQUOT: "free some space or write elsewhere",
    errno.EACCES: "check the permissions, or choose another path",
    errno.EPERM: "check the permissions, or choose another path",
    errno.EROFS: "the file system is read-only: choose another path",
    errno.ENOENT: "check the path",
    errno.EISDIR: "give a file, not a directory",
    errno.EMFILE: "too many open files: raise the limit (ulimit -n) or use fewer at once",
}


def _os_message(exc: OSError) -> str:
    """An OSError in one line with what to do (sphex's own OSErrors already say it)."""
    if exc.errno is None or exc.strerror is None:
        return " ".join(str(exc).split())
    text = " ".join(str(exc.strerror).split())
    if text != os.strerror(exc.errno):
        return text  # a message of sphex's own: OSError(errno, message)
    where = f" ({exc.filename})" if exc.filename else ""
    return f"{text}{where}; {_OS_FIXES.get(exc.errno, 'check the path and try again')}"


def report_failure(command: str | None, exc: BaseException) -> int:
    """Report any failure of a command in one line on stderr and return its exit status.

    Problems the user can fix (bad input, a missing, unreadable or damaged
    file, a full disk, a folder without permission, not enough memory) give
    ``sphex COMMAND: error: ...`` and status 2.  Anything else is a bug in
    sphex: ``sphex COMMAND: internal error: ...`` with a hint to rerun with
    ``--debug`` for the traceback, and status 70.
    """
    if isinstance(exc, (UserError, ValueError)) or callable(getattr(exc, "shell_message", None)):
        return report_error(command, exc)
    if isinstance(exc, OSError):
        sys.stderr.write(f"{_where(command)}: error: {_os_message(exc)}\n")
        return EXIT_USER_ERROR
    if isinstance(exc, MemoryError):
        sys.stderr.write(f"{_where(command)}: error: ran out of memory"
                         f"{' (' + ' '.join(str(exc).split()) + ')' if str(exc) else ''}; use a "
                         "lower --lmax, a coarser grid, or fewer fields at a time (--chunks)\n")
        return EXIT_USER_ERROR
    text = " ".join(str(exc).split())
    if isinstance(exc, RuntimeError) and text.startswith(("NetCDF:", "HDF")):
        sys.stderr.write(f"{_where(command)}: error: the netCDF library failed ({text}); an "
                         "input file may be damaged, or the output folder full or not writable\n")
        return EXIT_USER_ERROR
    sys.stderr.write(f"{_where(command)}: internal error: {type(exc).__name__}"
                     f"{': ' + text if text else ''}; this is a bug in sphex: rerun with --debug "
                     f"(or {DEBUG_VARIABLE}=1) to see the traceback, and report it\n")
    return EXIT_INTERNAL_ERROR


@contextmanager
def one_line_warnings(command: str | None) -> Iterator[None]:
    """Show warnings raised while the body runs as ``sphex COMMAND: warning: ...`` lines."""
    def show(message: Any, category: Any, filename: str, lineno: int, file: Any = None,
             line: Any = None) -> None:
        sys.stderr.write(f"{_where(command)}: warning: {' '.join(str(message).split())}\n")

    with warnings.catch_warnings():
        # what sphex warns about (defaults it assumed, data it changed) always shows,
        # once per place, whatever PYTHONWARNINGS says about other warnings
        warnings.simplefilter("default", UserWarning)
        warnings.showwarning = show
        yield


def check_paths(inputs: list, outputs: list, overwrite: bool) -> None:
    """Before any work: no output is an input or another output, and each output can be
    written (its folder exists and is writable; it does not exist unless ``overwrite``)."""
    from sphex.xr.output import check_distinct, check_output_path

    check_distinct(inputs, outputs)
    for path in outputs:
        if path is not None:
            check_output_path(path, overwrite)


def is_coefficient_file(path: str) -> bool:
    """Whether ``path`` holds coefficients (a text table, or netCDF in sphex's layout) rather
    than a gridded field."""
    from sphex.xr.coefficients import is_coefficients
    from sphex.xr.tables import is_table_file

    if is_table_file(path):
        return True
    ds = open_input(path)
    try:
        return is_coefficients(ds)
    finally:
        ds.close()
