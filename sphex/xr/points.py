"""Fields at scattered points as DataArrays: a station table, a ship track, an orbit.

:func:`evaluate` sums the spherical-harmonic series of a coefficient Dataset
(or a :class:`~sphex.harmonics.Harmonics`, or a published potential model)
exactly at points given as DataArrays of latitude and longitude, and returns
a DataArray over the points' own dimensions (``station``, ``time``, ...) with
their coordinates, after the batch dimensions of the coefficients.  The work
is :func:`sphex.points.evaluate`; dask-backed points stay lazy, one task per
chunk of points.
"""
from __future__ import annotations

from collections.abc import Hashable, Mapping
from typing import Any

import numpy as np
import xarray as xr

from sphex.harmonics import Harmonics
from sphex.models import PotentialModel
from sphex.points import evaluate as evaluate_points
from sphex.xr import scaleout
from sphex.xr.coefficients import COS, as_coefficients, to_harmonics

__all__ = ["evaluate"]


class _Source:
    """What is evaluated: coefficients, their batch dimensions, a factor, a name and attributes."""

    def __init__(self, harmonics: Harmonics, dims: tuple[Hashable, ...],
                 coords: Mapping[Hashable, Any], factor: float, name: str | None,
                 attrs: dict[str, Any]):
        self.harmonics = harmonics
        self.dims = dims
        self.coords = coords
        self.factor = factor
        self.name = name
        self.attrs = attrs


def _source_of(obj: Any) -> _Source:
    """The coefficients of a coefficient Dataset, a Harmonics or a PotentialModel."""
    if isinstance(obj, PotentialModel):
        return _model_source(obj)
    if isinstance(obj, Harmonics):
        dims = tuple(f"sample_{i}" for i in range(len(obj.batch_shape)))
        attrs = {"units": obj.units} if obj.units else {}
        return _Source(obj, dims, {}, 1.0, None, attrs)
    if not isinstance(obj, xr.Dataset):
        raise ValueError(f"expected a coefficient Dataset (sphex.xr.analyze, open_coefficients), "
                         f"a sphex.Harmonics or a model (sphex.models.open_model), not "
                         f"{type(obj).__name__}")
    ds = as_coefficients(obj)
    dims = tuple(d for d in ds[COS].dims if d not in ("degree", "order"))
    coords = {k: v for k, v in ds.coords.items() if v.dims and set(v.dims) <= set(dims)}
    attrs = {k[len("field_"):]: v for k, v in ds.attrs.items()
             if k.startswith("field_") and k != "field_name"}
    if "units" in ds.attrs:
        attrs["units"] = ds.attrs["units"]
    return _Source(to_harmonics(ds), dims, coords, 1.0, ds.attrs.get("field_name"), attrs)


def _model_source(model: PotentialModel) -> _Source:
    """A model's potential: ``GM/R`` times the series (gravity), ``R`` times it (magnetic)."""
    h = model.harmonics
    dims: tuple[Hashable, ...] = ()
    coords: dict[Hashable, Any] = {}
    if h.batch_shape:
        dims = ("epoch",) if len(h.batch_shape) == 1 else \
            tuple(f"sample_{i}" for i in range(len(h.batch_shape)))
        if model.epoch is not None and np.ndim(model.epoch) == 1 and dims == ("epoch",):
            coords["epoch"] = ("epoch", np.asarray(model.epoch, dtype=np.float64),
                               {"units": "decimal year"})
    attrs: dict[str, Any] = {"model": model.name, "source": model.source,
                             "reference_radius": float(model.radius)}
    if model.kind == "gravity":
        if model.gm is None:
            raise ValueError(f"the gravity model {model.name!r} states no GM, so its potential "
                             "has no scale: evaluate model.harmonics for the dimensionless series")
        factor = model.gm / model.radius
        attrs.update(units="m2 s-2", long_name="gravitational potential GM/r sum (R/r)^l V_l")
    else:
        factor = model.radius
        attrs.update(units=f"{h.units or 'nT'} m",
                     long_name="magnetic scalar potential R sum (R/r)^(l+1) V_l")
    return _Source(h, dims, coords, factor, "potential", attrs)


def _as_points(value: Any, role: str) -> xr.DataArray:
    """Latitudes, longitudes or radii as a DataArray (plain arrays get a ``point`` dimension)."""
    if isinstance(value, xr.DataArray):
        return value
    if isinstance(value, xr.Dataset):
        raise ValueError(f"{role}= must be a DataArray, not a Dataset: pass its variable, "
                         f"e.g. {role}=stations[{role!r}]")
    arr = np.asarray(value)
    if arr.dtype.kind not in "fiu":
        raise ValueError(f"{role}= must hold numbers in "
                         f"{'metres' if role == 'radius' else 'degrees'}, got dtype {arr.dtype}")
    dims = ("point",) if arr.ndim == 1 else tuple(f"point_{i}" for i in range(arr.ndim))
    return xr.DataArray(arr, dims=dims)


def _evaluate_block(lat: np.ndarray, lon: np.ndarray, radius: np.ndarray | None = None, *,
                    harmonics: Harmonics, factor: float) -> np.ndarray:
    """Values at a block of points, the coefficients' batch axes last (one apply_ufunc call)."""
    arrays = np.broadcast_arrays(*(a for a in (lat, lon, radius) if a is not None))
    values = evaluate_points(harmonics, arrays[0], arrays[1],
                             None if radius is None else arrays[2])
    if factor != 1.0:
        values = values * factor
    nb = len(harmonics.batch_shape)
    return np.moveaxis(values, tuple(range(nb)), tuple(range(-nb, 0))) if nb else values


def evaluate(source: Any, *, lat: Any, lon: Any, radius: Any = None) -> xr.DataArray:
    """The field(s) of ``source`` at the points ``lat``, ``lon``, over the points' dimensions.

    Parameters
    ----------
    source : xarray.Dataset, Harmonics or PotentialModel
        A coefficient Dataset (:func:`sphex.xr.analyze`,
        :func:`sphex.xr.open_coefficients`; extra dimensions such as ``time``
        are evaluated together), a :class:`~sphex.harmonics.Harmonics`, or a
        model from :func:`sphex.models.open_model`, whose potential is
        evaluated: ``GM/r sum_l (R/r)^l V_l`` in m^2 s^-2 for gravity,
        ``R sum_l (R/r)^(l+1) V_l`` for magnetism (the model's units times m).
    lat, lon : DataArray or array_like
        Latitudes in [-90, 90] and longitudes in degrees (any range), for
        example ``stations["lat"]`` over a ``station`` dimension, or a track's
        ``lat`` over ``time``.  They are broadcast against each other the
        xarray way (by dimension name); plain arrays get a ``point``
        dimension.  dask-backed points are evaluated lazily, chunk by chunk.
    radius : DataArray, array_like or float, optional
        Distance of the points from the centre in metres (one value, or
        broadcast like ``lat``): degree l is then multiplied by
        ``(R/radius)^(l+1)``, R the coefficients' reference radius (exterior
        continuation; see :func:`sphex.points.evaluate`).  Default: on the
        reference sphere.

    Returns
    -------
    xarray.DataArray
        Dimensions: the coefficients' batch dimensions, then those of the
        points; the coordinates of both, and ``lat`` / ``lon`` as
        coordinates.  Named after the analysed field, with its attributes
        (units).

    Raises
    ------
    ValueError
        Not coefficients; latitudes outside [-90, 90], NaN in the points
        (when the points are computed, for dask input); ``radius`` for
        coefficients without a reference radius; a point dimension with the
        name of a batch dimension of the coefficients.

    Notes
    -----
    Exact summation of the series at each point (no interpolation from a
    grid); the cost is about ``(lmax + 1)^2 / 2`` recursion steps per point
    and coefficient set.

    Examples
    --------
    >>> import numpy as np, xarray as xr, sphex, sphex.xr
    >>> g = sphex.Grid.gauss(8)
    >>> field = xr.DataArray(np.sin(np.deg2rad(g.lat))[:, None] + 0 * g.lon, name="t",
    ...                      coords={"lat": g.lat, "lon": g.lon}, dims=("lat", "lon"))
    >>> stations = xr.Dataset({"lat": ("station", [30.0, -90.0]), "lon": ("station", [10.0, 0.0])},
    ...                       coords={"station": ["A", "B"]})
    >>> out = sphex.xr.evaluate(sphex.xr.analyze(field), lat=stations.lat, lon=stations.lon)
    >>> out.dims, [round(float(v), 12) for v in out]
    (('station',), [0.5, -1.0])
    """
    src = _source_of(source)
    lat_da = _as_points(lat, "lat")
    lon_da = _as_points(lon, "lon")
    radius_da = None if radius is None else _as_points(radius, "radius")
    if radius is not None and src.harmonics.radius is None:
        raise ValueError("radius= needs the reference radius of the coefficients, which they do "
                         "not state: analyze with radius=METRES (or Harmonics.replace(radius=...))")
    inputs = [lat_da, lon_da] + ([radius_da] if radius_da is not None else [])
    point_dims = {d for a in inputs for d in a.dims}
    clash = sorted(map(str, point_dims & set(src.dims)))
    if clash:
        raise ValueError(f"the points and the coefficients both have dimension(s) {clash}: "
                         "rename the points' dimension (e.g. lat.rename({'time': 'obs'}))")
    batch = src.harmonics.batch_shape
    out = xr.apply_ufunc(
        scaleout.task_function(_evaluate_block, *inputs), *inputs,
        input_core_dims=[[] for _ in inputs], output_core_dims=[list(src.dims)],
        kwargs={"harmonics": src.harmonics, "factor": float(src.factor)},
        dask="parallelized", output_dtypes=[np.float64],
        dask_gufunc_kwargs={"output_sizes": dict(zip(src.dims, batch))},
        keep_attrs=False,
    )
    out = out.transpose(*src.dims, *(d for d in out.dims if d not in src.dims))
    out = out.assign_coords({k: v for k, v in src.coords.items()})
    for role, da in (("lat", lat_da), ("lon", lon_da)):
        key = da.name if da.name is not None else role
        if key not in out.coords:
            out = out.assign_coords({key: da.variable})
    out.name = src.name
    out.attrs = dict(src.attrs)
    return out
