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

Importing this package registers the accessors and the netCDF model reader;
the other names are imported on first use (``sphex.xr.analyze`` loads the
transform, its kernels and numba then), so a program that only reads a file's
coordinates or coefficients does not pay for what it does not use.

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

import importlib

from sphex.xr import accessors  # noqa: F401  (registers da.sphex and ds.sphex)
from sphex.xr import models  # noqa: F401  (registers the netCDF model reader with sphex.models)

#: The public names and the modules they come from (imported on first use).
_NAMES = {
    "COS": "coefficients", "SIN": "coefficients", "from_harmonics": "coefficients",
    "is_coefficients": "coefficients", "to_harmonics": "coefficients",
    "GridInfo": "coords", "find_grid": "coords", "parse_grid": "coords",
    "analyze": "fields", "degree_power": "fields", "regrid": "fields", "smooth": "fields",
    "synthesize": "fields",
    "analyze_flow": "flow", "flow_fields": "flow", "from_flow": "flow",
    "kinetic_energy": "flow", "regrid_flow": "flow", "smooth_flow": "flow", "to_flow": "flow",
    "EARTH_MEAN_RADIUS_M": "flow_components", "RadiusAssumedWarning": "flow_components",
    "local_admittance": "localize", "local_correlation": "localize",
    "local_cross_power": "localize", "local_power": "localize", "rotate": "localize",
    "open_coefficients": "files", "open_harmonics": "files", "write_dataset": "files",
    "write_harmonics": "files",
    "open_model": "models", "read_model": "models", "write_model": "models",
    "degree_variances": "potential", "error_degree_variances": "potential",
    "gravity_fields": "potential", "magnetic_fields": "potential",
    "OutputExistsError": "output", "atomic_output": "output", "check_output_path": "output",
    "evaluate": "points",
    "read_table": "tables", "write_table": "tables",
}

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


def __getattr__(name: str):
    if name not in _NAMES:
        raise AttributeError(f"module 'sphex.xr' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"sphex.xr.{_NAMES[name]}"), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
