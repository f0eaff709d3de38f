"""Flow diagnostics of a netCDF file, streamed chunk by chunk: the work of ``sphex flow``.

:func:`stream_flow` opens a file lazily, finds the eastward and northward
components (by name or by CF standard name), and writes the diagnostics of
:func:`sphex.xr.flow_fields` with the kinetic-energy spectrum, a block of
time steps at a time, through the streaming writer of
:mod:`sphex.xr.streaming` (dask threads that follow the thread rule, or a
``dask.distributed`` scheduler; progress on stderr; a temporary file renamed
at the end).  Memory holds a few chunks, never the file.
"""
from __future__ import annotations

import math
import os
import time
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from sphex.xr.coords import check_lmax, find_grid
from sphex.xr.fields import append_history
from sphex.xr.files import open_netcdf
from sphex.xr.flow import flow_fields
from sphex.xr.flow_components import component_pair, find_components, flow_medium, flow_radius
from sphex.xr.output import check_output_path
from sphex.xr.streaming import _plan_chunks, parse_chunks, write_lazily

__all__ = ["FlowStreamResult", "ENERGY_VARIABLES", "stream_flow", "energy_table"]

#: The spectrum variables of the output file, rotational and divergent.
ENERGY_VARIABLES = ("kinetic_energy_rotational", "kinetic_energy_divergent")


@dataclass(frozen=True)
class FlowStreamResult:
    """What :func:`stream_flow` did (for the command line's report).

    Attributes
    ----------
    output : pathlib.Path
    east, north : str
        The components' variable names.
    medium : str or None
        ``"atmosphere"``, ``"sea_water"`` or None (from the standard names).
    grid : str
        One-line description of the grid.
    lmax : int
    fields : int
        Number of component pairs analysed.
    radius : float
        Metres.
    radius_source : str
        Where the radius came from.
    energy : xarray.Dataset
        The kinetic-energy spectra read back from the output (small), with
        their units.
    variables : tuple of str
        The variables written.
    seconds : float
    """

    output: Path
    east: str
    north: str
    medium: str | None
    grid: str
    lmax: int
    fields: int
    radius: float
    radius_source: str
    energy: xr.Dataset
    variables: tuple[str, ...]
    seconds: float


def _same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    try:
        return Path(a).resolve() == Path(b).resolve()
    except OSError:
        return False


def stream_flow(input: str | os.PathLike, output: str | os.PathLike, east: str | None = None,
                north: str | None = None, *, lmax: int | None = None, radius: float | None = None,
                planetary_rotation: float | None = None,
                chunks: Mapping[str, int] | str | None = None, scheduler: str | None = None,
                overwrite: bool = False, progress: bool = True, history: str | None = None,
                options: tuple[str, str] = ("east=", "north=")) -> FlowStreamResult:
    """Vorticity, divergence, streamfunction, velocity potential, the parts of the flow and its
    kinetic-energy spectrum, from a file of winds or currents into a netCDF file.

    Parameters
    ----------
    input : path-like
        netCDF file with the eastward and northward components on one global
        grid (any other dimensions: time, level, member).
    output : path-like
        The netCDF file to write (atomically; an existing one only with
        ``overwrite``).
    east, north : str, optional
        The components' variable names; default the variables with the CF
        standard names (see :func:`sphex.xr.flow_components.find_components`).
    lmax : int, optional
        Degree limit (default the grid's exact limit).
    radius : float, optional
        The sphere's radius in metres; default the components' or the file's
        ``planet_radius_km`` attribute, else Earth's mean radius (with a
        :class:`~sphex.xr.flow_components.RadiusAssumedWarning`).
    planetary_rotation : float, optional
        Rotation rate in rad s-1: adds ``absolute_vorticity``.
    chunks : mapping or str, optional
        Fields per chunk along a dimension (``"time=32"``); default about
        16 MiB of a component per chunk along ``time``.
    scheduler : str, optional
        Address of a ``dask.distributed`` scheduler; default dask's threads here.
    overwrite, progress : bool
    history : str, optional
        The line added to the ``history`` attribute (default: the equivalent
        ``sphex flow`` command).
    options : (str, str)
        How the caller names ``east`` and ``north`` in messages.

    Returns
    -------
    FlowStreamResult

    Raises
    ------
    ValueError
        Unreadable file, components not found or on different grids, no
        global grid, ``lmax`` above the exact limit, missing values, the
        output the same file as the input.
    FileNotFoundError, OutputExistsError
    """
    t0 = time.monotonic()
    if _same_file(input, output):
        raise ValueError(f"the output {str(output)!r} is the input file; write to another file")
    check_output_path(output, overwrite)
    if isinstance(chunks, str):
        chunks = parse_chunks(chunks)
    path = str(input)
    src = open_netcdf(path, cache=False)   # slices are read, never whole variables kept
    try:
        east, north = find_components(src, east, north, options)
        for name in (east, north):
            try:
                find_grid(src[name])
            except ValueError as exc:
                raise ValueError(f"{path}: {exc}") from None
        u, v, info = component_pair(src[east], src[north])
        lmax = check_lmax(lmax, info.grid, False, f"variable {east!r}")
        r, source = flow_radius(radius, u, v, src)
        medium = flow_medium(u, v, None)
        spec, _, _ = _plan_chunks(u, info, chunks)
        fields = math.prod(int(u.sizes[d]) for d in u.dims if d not in (info.lat_dim, info.lon_dim))
        ds = flow_fields(u.chunk(spec), v.chunk(spec), radius=r, lmax=lmax,
                         planetary_rotation=planetary_rotation, spectrum=True)
        if u.dtype == np.float32 and v.dtype == np.float32:
            for name in ds.data_vars:
                if name not in ENERGY_VARIABLES:
                    ds[name] = ds[name].astype(np.float32)
        line = history or (f"sphex flow {path} --east {east} --north {north} --lmax {lmax} "
                           f"--radius {r / 1e3:.10g}km")
        attrs = {k: val for k, val in src.attrs.items() if k != "history"}
        attrs.update({k: val for k, val in ds.attrs.items() if k != "history"})
        attrs["history"] = append_history(src.attrs, line)
        ds.attrs = attrs
        write_lazily(ds, output, overwrite, scheduler=scheduler, fields=fields,
                     label="sphex flow", progress=progress)
    finally:
        src.close()
    with open_netcdf(output) as written:
        energy = written[list(ENERGY_VARIABLES)].load()
    return FlowStreamResult(Path(output), east, north, medium, info.describe(), int(lmax),
                            int(fields), float(r), source, energy,
                            tuple(str(k) for k in ds.data_vars), time.monotonic() - t0)


def energy_table(energy: xr.Dataset) -> tuple[list[str], list[list[Any]]]:
    """The spectra of :attr:`FlowStreamResult.energy` as plain rows for a CSV file.

    Returns
    -------
    (header, rows)
        Columns: each other dimension (time, level, ...), ``degree``,
        ``rotational``, ``divergent``, ``total``; one row per field and degree.
    """
    rot = energy[ENERGY_VARIABLES[0]]
    div = energy[ENERGY_VARIABLES[1]]
    extra = [str(d) for d in rot.dims if d != "degree"]
    rot = rot.transpose(*extra, "degree")
    div = div.transpose(*extra, "degree")
    header = extra + ["degree", "rotational", "divergent", "total"]
    shape = [rot.sizes[d] for d in extra]
    labels = {d: (rot[d].values if d in rot.coords else np.arange(rot.sizes[d])) for d in extra}
    r_vals, d_vals = np.asarray(rot.values), np.asarray(div.values)
    degrees = np.asarray(rot["degree"].values) if "degree" in rot.coords \
        else np.arange(rot.sizes["degree"])
    rows = []
    for index in np.ndindex(*shape):
        keys = [_plain(labels[d][k]) for d, k in zip(extra, index)]
        for j, l in enumerate(degrees):
            a, b = float(r_vals[index + (j,)]), float(d_vals[index + (j,)])
            rows.append(keys + [int(l), a, b, a + b])
    return header, rows


def _plain(value: Any) -> str:
    """A coordinate value as CSV text (times as ISO 8601, to the second)."""
    if isinstance(value, np.datetime64):
        return str(np.datetime_as_string(value, unit="s"))
    if hasattr(value, "isoformat"):
        return value.isoformat()
    return str(value)
