"""xarray and netCDF adapters: gridded DataArrays in, coefficient Datasets out.

The functions here find the latitude and longitude of a DataArray (by name or
by CF attributes), hand the spatial part to the numpy core through
:func:`xarray.apply_ufunc` (so extra dimensions such as time, level or member
are a batch, and dask-backed inputs stay lazy), and put coordinates and
attributes back on the result.

Modules
-------
``coords``        finding the grid from coordinates: :func:`find_grid`, :class:`GridInfo`,
                  :func:`parse_grid`
``coefficients``  coefficient Datasets (the layout, also that of the netCDF files):
                  :func:`from_harmonics`, :func:`to_harmonics`, :func:`is_coefficients`
``models``        potential models in netCDF: :func:`write_model`, :func:`read_model`,
                  :func:`open_model` (also registered with :func:`sphex.models.open_model`)
``potential``     gravity and magnetic quantities as Datasets: :func:`gravity_fields`,
                  :func:`magnetic_fields`, :func:`degree_variances`,
                  :func:`error_degree_variances`
``tables``        plain text tables: :func:`write_table`, :func:`read_table`
``files``         netCDF files: :func:`write_dataset`, :func:`write_harmonics`,
                  :func:`open_coefficients`, :func:`open_harmonics`
``output``        atomic output files (temporary file, then rename)
``missing``       missing values found and named by their coordinates
``fields``        the field adapters: :func:`analyze`, :func:`synthesize`, :func:`smooth`,
                  :func:`regrid`, :func:`degree_power`
``points``        fields at scattered points (stations, tracks): :func:`evaluate`
``scaleout``      dask: whole-field chunks, numba threads inside dask tasks
``streaming``     streaming analysis of a series larger than memory
``flow``          winds and currents: :func:`analyze_flow`, :func:`flow_fields`,
                  :func:`kinetic_energy`, :func:`regrid_flow`, :func:`smooth_flow`,
                  :func:`to_flow`, :func:`from_flow`
``flow_components`` the two components checked as a pair, the radius, units and CF names
``flow_streaming`` flow diagnostics of a file streamed chunk by chunk: :func:`stream_flow`

``localize``      localised (multitaper) spectra and rotation: :func:`local_power`,
                  :func:`local_cross_power`, :func:`local_admittance`,
                  :func:`local_correlation`, :func:`rotate`
``accessors``     ``da.sphex`` and ``ds.sphex`` (registered on import of this package)

Examples
--------
>>> import numpy as np, xarray as xr, sphex, sphex.xr
>>> g = sphex.Grid.gauss(15)
>>> lat, lon = g.lat, g.lon
>>> da = xr.DataArray(np.cos(np.deg2rad(lat))[:, None] * np.cos(np.deg2rad(lon)),
...                   coords={"lat": lat, "lon": lon}, dims=("lat", "lon"), name="t")
>>> ds = sphex.xr.analyze(da)
>>> back = sphex.xr.synthesize(ds, like=da)
>>> bool(abs(back - da).max() < 1e-12)
True
"""
from __future__ import annotations

from sphex.xr import accessors  # noqa: F401  (registers da.sphex and ds.sphex)
from sphex.xr.coefficients import COS, SIN, from_harmonics, is_coefficients, to_harmonics
from sphex.xr.coords import GridInfo, find_grid, parse_grid
from sphex.xr.fields import analyze, degree_power, regrid, smooth, synthesize
from sphex.xr.flow import (
    analyze_flow, flow_fields, from_flow, kinetic_energy, regrid_flow, smooth_flow, to_flow,
)
from sphex.xr.flow_components import EARTH_MEAN_RADIUS_M, RadiusAssumedWarning

from sphex.xr.localize import (
    local_admittance, local_correlation, local_cross_power, local_power, rotate,
)
from sphex.xr.files import open_coefficients, open_harmonics, write_dataset, write_harmonics
from sphex.xr.models import open_model, read_model, write_model
from sphex.xr.potential import (
    degree_variances, error_degree_variances, gravity_fields, magnetic_fields,
)
from sphex.xr.output import OutputExistsError, atomic_output, check_output_path
from sphex.xr.points import evaluate
from sphex.xr.tables import read_table, write_table

__all__ = [
    "COS", "SIN", "GridInfo", "find_grid", "parse_grid", "analyze", "synthesize",
    "smooth", "regrid", "degree_power", "evaluate", "to_harmonics", "from_harmonics",
    "write_harmonics", "write_dataset", "open_harmonics", "open_coefficients", "is_coefficients",
    "write_table", "read_table", "OutputExistsError", "atomic_output", "check_output_path",
    "analyze_flow", "flow_fields", "kinetic_energy", "regrid_flow", "smooth_flow", "to_flow",
    "from_flow", "EARTH_MEAN_RADIUS_M", "RadiusAssumedWarning",

    "local_power", "local_cross_power", "local_admittance", "local_correlation", "rotate",

    "open_model", "read_model", "write_model", "gravity_fields", "magnetic_fields",
    "degree_variances", "error_degree_variances",
]
