"""What the subcommands share: argument types, opening inputs, grid texts, writing outputs,
the progress bar and the one-line error report.

Only the standard library is imported here at module level, so that building
the parser (and ``sphex --help``) stays quick; numpy, xarray and the adapter
layer are imported inside the functions that need them.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from sphex.cli.progress import Progress, progress_bar

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
        da = ds[var].load()
        attrs = dict(ds.attrs)
    finally:
        ds.close()
    return da, attrs


def grid_of(da, path: str):
    """The GridInfo of a variable read from ``path`` (a UserError naming the file if none)."""
    from sphex.xr.coords import find_grid

    try:
        return find_grid(da)
    except ValueError as exc:
        raise UserError(f"{path}: {exc}") from None


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
    """``out`` in float32 when the input ``da`` was float32."""
    import numpy as np

    return out.astype(np.float32) if da.dtype == np.float32 else out


def say(*lines: str) -> None:
    """Print the report of a subcommand."""
    print("\n".join(lines))


# ---------------------------------------------------------------------------
# errors
# ---------------------------------------------------------------------------
def report_error(command: str | None, exc: BaseException) -> int:
    """Write ``sphex COMMAND: error: MESSAGE`` on one line to stderr; returns 2."""
    if callable(getattr(exc, "shell_message", None)):   # the shell's words, not Python's keywords
        exc = UserError(exc.shell_message())
    msg = " ".join(str(exc).split()) or type(exc).__name__
    where = f"{PROG} {command}" if command else PROG
    sys.stderr.write(f"{where}: error: {msg}\n")
    return 2
