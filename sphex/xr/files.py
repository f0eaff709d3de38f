"""Coefficient and field files: netCDF writes (atomic), opening netCDF with clear errors,
opening coefficients from a netCDF file or a text table.
"""
from __future__ import annotations

import contextlib
import errno
import os
from pathlib import Path

import xarray as xr

from sphex.harmonics import Harmonics
from sphex.xr.coefficients import (
    as_coefficients, exact_dataset_from_harmonics, from_harmonics, is_coefficients, to_harmonics,
)
from sphex.xr.conventions import conventions_stated
from sphex.xr.coords import one_line
from sphex.xr.damage import check_complete
from sphex.xr.output import atomic_output, check_distinct, check_output_path, folder_problem
from sphex.xr.scaleout import thread_pool
from sphex.xr.tables import is_table_file, read_table

__all__ = ["netcdf_encoding", "write_dataset", "write_netcdf", "write_harmonics", "open_netcdf",
           "open_coefficients", "open_harmonics", "read_failure", "write_failure"]


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

    Raises
    ------
    OutputExistsError, OSError, ValueError
        An existing file without ``overwrite``; a folder that cannot be
        written, a full disk; ``path`` is the file lazy data are read from.
    """
    if _is_lazy(ds):  # still read from its file: never replace that file while reading it
        sources = {ds.encoding.get("source")} | {v.encoding.get("source")
                                                 for v in ds.variables.values()}
        check_distinct(sources - {None}, [path])
    with atomic_output(path, overwrite) as tmp:
        write_netcdf(ds, tmp, target=path)
    return Path(path)


def write_netcdf(ds: xr.Dataset, path: str | os.PathLike,
                 source: str | os.PathLike | None = None,
                 target: str | os.PathLike | None = None) -> None:
    """Write ``ds`` to ``path`` as :func:`write_dataset` does, but in place: the caller
    makes it atomic (writes into the temporary file of :func:`~sphex.xr.output.atomic_output`).

    Dask-backed data are computed on a thread pool of sphex's that is left (every task
    finished) before this returns or raises, so no task writes into ``path`` after a
    failure or an interruption, unless a scheduler of the caller's is configured.
    A failure of the netCDF library is raised as the problem it is (:func:`write_failure`);
    ``source`` names the file lazy data are read from and ``target`` the final output
    (``path`` being its temporary file), for that message.
    """
    enc = netcdf_encoding(ds)
    for k in list(enc):
        old = ds.variables[k].encoding
        if "_FillValue" in old and old["_FillValue"] is not None:
            enc.pop(k)
    lazy = _is_lazy(ds)
    own_pool = lazy and _default_scheduler()
    try:
        if not lazy and _write_loaded(ds, path, enc):
            return
        with thread_pool() if own_pool else contextlib.nullcontext():
            ds.to_netcdf(path, format="NETCDF4", engine="netcdf4", encoding=enc)
    except (RuntimeError, OSError) as exc:
        raise write_failure(target if target is not None else path, exc, source) from None


def _write_loaded(ds: xr.Dataset, path: str | os.PathLike, enc: dict) -> bool:
    """Write a Dataset held in memory through xarray's netCDF4 store; False if this xarray
    has no such store (the caller then uses ``to_netcdf``).

    ``to_netcdf`` asks dask which scheduler would run the write, and that question imports
    ``dask.distributed`` (about 0.3 s) even when nothing is to be computed; here the file
    is opened with the netCDF library's own lock, which is what ``to_netcdf`` uses too
    for a write outside dask, and the variables are stored the same way.
    """
    try:
        from xarray.backends.netCDF4_ import NETCDF4_PYTHON_LOCK, NetCDF4DataStore
    except ImportError:  # pragma: no cover - another xarray layout
        return False
    unlimited = ds.encoding.get("unlimited_dims") or ()
    unlimited = [unlimited] if isinstance(unlimited, str) else list(unlimited)
    store = NetCDF4DataStore.open(str(path), mode="w", format="NETCDF4", lock=NETCDF4_PYTHON_LOCK)
    try:
        ds.dump_to_store(store, encoding=enc,
                         unlimited_dims=[d for d in unlimited if d in ds.dims] or None)
    finally:
        store.close()
    return True


def _is_lazy(ds: xr.Dataset) -> bool:
    return any(v.chunks is not None for v in ds.variables.values())


def _default_scheduler() -> bool:
    """Whether dask would run on its default threads (no scheduler or pool of the caller's)."""
    import dask

    return dask.config.get("scheduler", None) in (None, "threads") and \
        dask.config.get("pool", None) is None


#: Below this many bytes free, a failed write is taken for a full disk.
LOW_SPACE = 1 << 20


def _free_bytes(folder: Path) -> int | None:
    try:
        st = os.statvfs(folder)
    except (OSError, AttributeError):
        return None
    blocks = st.f_bfree if hasattr(os, "geteuid") and os.geteuid() == 0 else st.f_bavail
    return int(blocks) * int(st.f_frsize)


def write_failure(path: str | os.PathLike, exc: BaseException,
                  source: str | os.PathLike | None = None) -> Exception:
    """The error to raise when writing ``path`` failed with ``exc``.

    A full disk (ENOSPC, or a netCDF/HDF5 library error while the folder has
    less than ``LOW_SPACE`` bytes free), a folder without permission or on a
    read-only file system become an OSError that says so and what to do; any
    other library error names the file (and the input ``source`` the data
    were read from, which may be the damaged one).
    """
    p = Path(path)
    parent = p.parent if str(p.parent) else Path(".")
    code = getattr(exc, "errno", None)
    if isinstance(exc, OSError) and code in (errno.EACCES, errno.EPERM, errno.EROFS,
                                             errno.ENOSPC, errno.EDQUOT):
        return folder_problem(parent, exc)
    free = _free_bytes(parent)
    if free is not None and free < LOW_SPACE:
        return OSError(errno.ENOSPC, f"no space left while writing {str(p)!r}: the disk holding "
                       f"{str(parent)!r} is full ({free} bytes free); free some space or choose "
                       "another folder")
    text = one_line(exc)
    if source is not None:
        return ValueError(f"reading {str(source)!r} or writing {str(p)!r} failed ({text}); if "
                          f"{str(source)!r} is damaged, copy or download it again")
    return OSError(code or errno.EIO, f"writing {str(p)!r} failed ({text}); check the output "
                   "folder (space, permissions) and try again")


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
    FileNotFoundError, IsADirectoryError, PermissionError, ValueError
        Missing file; a directory; not readable; not a netCDF file, or one
        shorter than its header promises (:mod:`sphex.xr.damage`).
    """
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(f"no such file: {str(p)!r}")
    if p.is_dir():
        raise IsADirectoryError(f"{str(p)!r} is a directory, not a netCDF file")
    check_complete(p)
    try:
        return xr.open_dataset(p, engine="netcdf4", cache=cache)
    except PermissionError:
        raise PermissionError(f"cannot read {str(p)!r}: permission denied; check the file's "
                              "permissions") from None
    except Exception as exc:  # netCDF4 reports a damaged or foreign file in several ways
        raise ValueError(f"{str(p)!r} is not a readable netCDF file ({one_line(exc)}); if it "
                         "is netCDF it is damaged: copy or download it again") from None


def read_failure(path: str | os.PathLike, exc: BaseException) -> ValueError:
    """The error to raise when reading data from an opened file fails in the netCDF or
    HDF5 library (a file damaged past its header)."""
    return ValueError(f"reading {str(path)!r} failed ({one_line(exc)}); the file is damaged: copy "
                      "or download it again")


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
        try:
            ds.load()
        except RuntimeError as exc:
            raise read_failure(path, exc) from None
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
