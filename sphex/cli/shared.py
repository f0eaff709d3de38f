"""What the subcommands share: argument types, opening inputs, grid texts, writing outputs,
the progress bar and the one-line error report.

Only the standard library is imported here at module level, so that building
the parser (and ``sphex --help``) stays quick; numpy, xarray and the adapter
layer are imported inside the functions that need them.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import Any, TextIO

__all__ = [
    "PROG", "UserError", "FORMATTER", "add_command", "add_output_arguments",
    "whole_number", "positive_number", "distance_km", "cap_radius", "chunk_spec", "degree_range",
    "open_input", "load_variable", "grid_of", "target_grid", "count_fields", "write_field",
    "keep_precision", "Progress", "progress_bar", "say", "report_error",
]

PROG = "sphex"
FORMATTER = argparse.RawDescriptionHelpFormatter


class UserError(Exception):
    """A problem with what the user asked for; reported in one line, exit 2."""


# ---------------------------------------------------------------------------
# building subcommands
# ---------------------------------------------------------------------------
def add_command(sub: Any, name: str, help_: str, example: str | None) -> argparse.ArgumentParser:
    """Add subcommand ``name`` with its one-line help and its example text (the epilog)."""
    return sub.add_parser(name, help=help_, description=help_ + ".", epilog=example,
                          formatter_class=FORMATTER)


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


def _gridded_variables(ds) -> list[str]:
    from sphex.xr.coords import find_grid

    out = []
    for k, v in ds.data_vars.items():
        try:
            find_grid(v)
        except ValueError:
            continue
        out.append(str(k))
    return out


def load_variable(path: str, var: str | None):
    """Open ``path`` and return (DataArray loaded in memory, file global attrs)."""
    ds = open_input(path)
    try:
        if var is None:
            names = _gridded_variables(ds)
            if len(names) != 1:
                listed = ", ".join(map(str, ds.data_vars)) or "none"
                raise UserError(f"{path}: choose a variable with -v (variables: {listed})")
            var = names[0]
        if var not in ds.data_vars:
            listed = ", ".join(map(str, ds.data_vars)) or "none"
            raise UserError(f"{path} has no variable {var!r} (variables: {listed})")
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


def target_grid(spec: str):
    """A Grid (from text) or a Dataset whose coordinates define the grid (from a file)."""
    from sphex.xr.coords import find_grid, parse_grid

    head = spec.split(":", 1)[0].lower()
    if ":" in spec and head in ("gauss", "equiangular") and not Path(spec).exists():
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
    raise UserError(f"--grid {spec!r} is neither a file nor gauss:LMAX or "
                    "equiangular:NLATxNLON:LAYOUT")


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
    """``out`` in float32 when the input ``da`` was float32."""
    import numpy as np

    return out.astype(np.float32) if da.dtype == np.float32 else out


def say(*lines: str) -> None:
    """Print the report of a subcommand."""
    print("\n".join(lines))


# ---------------------------------------------------------------------------
# progress
# ---------------------------------------------------------------------------
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


def progress_bar(total: int, label: str) -> Progress:
    """A progress bar on stderr for ``total`` fields."""
    return Progress(total, label)


# ---------------------------------------------------------------------------
# errors
# ---------------------------------------------------------------------------
def report_error(command: str | None, exc: BaseException) -> int:
    """Write ``sphex COMMAND: error: MESSAGE`` on one line to stderr; returns 2."""
    msg = " ".join(str(exc).split()) or type(exc).__name__
    where = f"{PROG} {command}" if command else PROG
    sys.stderr.write(f"{where}: error: {msg}\n")
    return 2
