"""Coefficient and field files: netCDF writes (atomic), opening netCDF with clear errors,
opening coefficients from a netCDF file or a text table.
"""
from __future__ import annotations

import os
from pathlib import Path

import xarray as xr

from sphex.harmonics import Harmonics
from sphex.xr.coefficients import (
    as_coefficients, exact_dataset_from_harmonics, from_harmonics, is_coefficients, to_harmonics,
)
from sphex.xr.conventions import conventions_stated
from sphex.xr.coords import one_line
from sphex.xr.output import atomic_output, check_output_path
from sphex.xr.tables import is_table_file, read_table

__all__ = ["netcdf_encoding", "write_dataset", "write_netcdf", "write_harmonics", "open_netcdf",
           "open_coefficients", "open_harmonics"]


def netcdf_encoding(ds: xr.Dataset) -> dict:
    """Encoding for ``to_netcdf`` that writes float variables without a fill value."""
    enc: dict[str, dict] = {}
    for k, v in ds.variables.items():
        if v.dtype.kind == "f":
            enc[str(k)] = {"_FillValue": None}
    return enc


def write_dataset(ds: xr.Dataset, path: str | os.PathLike, overwrite: bool = False) -> Path:
    """Write any Dataset to netCDF atomically (temporary file, then rename).

    Parameters
    ----------
    ds : xarray.Dataset
    path : path-like
    overwrite : bool
        Replace an existing file; otherwise an existing file is an error and is
        left untouched.

    Returns
    -------
    pathlib.Path
    """
    with atomic_output(path, overwrite) as tmp:
        write_netcdf(ds, tmp)
    return Path(path)


def write_netcdf(ds: xr.Dataset, path: str | os.PathLike) -> None:
    """Write ``ds`` to ``path`` as :func:`write_dataset` does, but in place: the caller
    makes it atomic (writes into the temporary file of :func:`~sphex.xr.output.atomic_output`).
    """
    enc = netcdf_encoding(ds)
    for k in list(enc):
        old = ds.variables[k].encoding
        if "_FillValue" in old and old["_FillValue"] is not None:
            enc.pop(k)
    ds.to_netcdf(path, format="NETCDF4", engine="netcdf4", encoding=enc)


def write_harmonics(h: Harmonics | xr.Dataset, path: str | os.PathLike, overwrite: bool = False,
                    name: str | None = None) -> Path:
    """Write coefficients to a netCDF file in sphex's layout.

    Parameters
    ----------
    h : Harmonics or xarray.Dataset
        Coefficients (a Harmonics, or a Dataset from :func:`sphex.xr.analyze`).
    path : path-like
        Output file; written to a temporary file beside it and renamed.
    overwrite : bool
        Replace an existing file (default: refuse, and leave it untouched).
    name : str, optional
        Name of the field, stored as ``field_name``.

    Returns
    -------
    pathlib.Path

    Notes
    -----
    A Harmonics reads back bit-exactly with :func:`open_harmonics`.
    """
    check_output_path(path, overwrite)
    if isinstance(h, Harmonics):
        ds = exact_dataset_from_harmonics(h, name)
    else:
        ds = as_coefficients(h)
    return write_dataset(ds, path, overwrite)


def open_netcdf(path: str | os.PathLike, cache: bool = True) -> xr.Dataset:
    """Open a netCDF file lazily, with errors that say what is wrong.

    Parameters
    ----------
    path : path-like
    cache : bool
        ``False`` reads slices without keeping whole variables in memory.

    Returns
    -------
    xarray.Dataset

    Raises
    ------
    FileNotFoundError, IsADirectoryError, ValueError
        Missing file; a directory; not a readable netCDF file.
    """
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(f"no such file: {str(p)!r}")
    if p.is_dir():
        raise IsADirectoryError(f"{str(p)!r} is a directory, not a netCDF file")
    try:
        return xr.open_dataset(p, engine="netcdf4", cache=cache)
    except Exception as exc:  # netCDF4 reports a damaged or foreign file in several ways
        raise ValueError(f"{str(p)!r} is not a readable netCDF file ({one_line(exc)})") from None


def open_coefficients(path: str | os.PathLike) -> xr.Dataset:
    """Open a coefficient file as a Dataset (loaded into memory, file closed).

    Parameters
    ----------
    path : path-like
        netCDF file in sphex's layout, or a text table (see :func:`read_table`).

    Returns
    -------
    xarray.Dataset
        In the order of the file's ``degree`` and ``order`` labels, with its
        conventions stated in the attributes.

    Raises
    ------
    FileNotFoundError, ValueError
        Missing file; not netCDF; damaged; not in the coefficient layout;
        degree or order labels that repeat, skip or do not start at 0; an
        ``lmax`` attribute that disagrees with the data; unknown or
        contradictory convention attributes (the message names them and the
        values allowed).

    Warns
    -----
    sphex.xr.conventions.MissingConventionWarning
        The file states no normalisation or no phase convention; the
        defaults (orthonormal, Condon-Shortley phase) were used.
    """
    if is_table_file(path):
        h, _ = read_table(path)
        return from_harmonics(h)
    with open_netcdf(path) as ds:
        ds.load()
    if not is_coefficients(ds):
        raise ValueError(f"{str(path)!r} holds no sphex coefficients (variables cos_coef and "
                         "sin_coef over degree and order); make them with sphex analyze")
    ds = as_coefficients(ds, str(path), from_file=True)
    # unknown or contradictory conventions refused now; missing ones named in a warning
    # and stated in the attributes with the defaults used
    return conventions_stated(ds, str(path))


def open_harmonics(path: str | os.PathLike) -> Harmonics:
    """Read coefficients written by :func:`write_harmonics` / ``ds.sphex.to_netcdf`` / ``sphex analyze``.

    Parameters
    ----------
    path : path-like
        A netCDF coefficient file (or a text table).

    Returns
    -------
    Harmonics
        With the file's normalisation, phase convention, radius and units;
        extra dimensions become leading batch axes in file order.
    """
    return to_harmonics(open_coefficients(path))
