"""Gravity and magnetic quantities of potential models as xarray Datasets with CF attributes.

The numbers come from :mod:`sphex.potential` (spherical approximation; the
formulas are in its docstring); this module puts them on the target grid's
coordinates with units, CF attributes, and the caution every geoid or
gravity product of sphex carries: the values are not certified for
surveying, engineering or navigation.
"""
from __future__ import annotations

import dataclasses
import os
from collections.abc import Sequence
from typing import Any

import numpy as np
import xarray as xr

from sphex import potential
from sphex.harmonics import Harmonics
from sphex.models import PotentialModel
from sphex.normal_field import normal_field
from sphex.xr.coords import synthesis_target
from sphex.xr.models import open_model

__all__ = ["gravity_fields", "magnetic_fields", "degree_variances", "error_degree_variances",
           "GRAVITY_ATTRIBUTES", "MAGNETIC_ATTRIBUTES", "CAUTION"]

CAUTION = ("Geoid heights and gravity values from sphex are not certified for surveying, "
           "engineering or navigation; the official products of the responsible agencies and "
           "licensed practice come first.")

# long name, units, CF standard name (only where the CF table has one; None otherwise)
GRAVITY_ATTRIBUTES: dict[str, tuple[str, str, str | None]] = {
    "geoid": ("geoid height (height anomaly on the reference surface, Bruns' formula)", "m",
              "geoid_height_above_reference_ellipsoid"),
    "height_anomaly": ("height anomaly (Bruns' formula)", "m", None),
    "anomaly": ("gravity anomaly (spherical approximation)", "m s-2", None),
    "disturbance": ("gravity disturbance (spherical approximation)", "m s-2", None),
    "radial_gradient": ("second radial derivative of the disturbing potential", "s-2", None),
    "deflection_north": ("north component of the deflection of the vertical (xi)", "arcsecond",
                         None),
    "deflection_east": ("east component of the deflection of the vertical (eta)", "arcsecond",
                        None),
}
MAGNETIC_ATTRIBUTES: dict[str, tuple[str, str, str | None]] = {
    "north": ("northward component X of the magnetic field", "T", None),
    "east": ("eastward component Y of the magnetic field", "T", None),
    "down": ("downward component Z of the magnetic field", "T", None),
    "horizontal": ("horizontal intensity H of the magnetic field", "T", None),
    "total": ("total intensity F of the magnetic field", "T", None),
    "declination": ("magnetic declination D, east of north", "degree", None),
    "inclination": ("magnetic inclination I, positive down", "degree", None),
}


def _model(model: Any, lmax: int | None = None) -> PotentialModel | Harmonics:
    if isinstance(model, (str, os.PathLike)):
        model = open_model(model)
    if not isinstance(model, (PotentialModel, Harmonics)):
        raise ValueError(f"model must be a PotentialModel, Harmonics or a model file path, got "
                         f"{type(model).__name__}")
    if lmax is None:
        return model
    if isinstance(lmax, bool) or int(lmax) != lmax or not 0 <= lmax <= model.lmax:
        raise ValueError(f"lmax must be a whole number from 0 to the model's degree "
                         f"{model.lmax}, got {lmax!r}")
    if isinstance(model, Harmonics):
        return model.truncate(int(lmax))
    sigmas = None if model.sigmas is None else model.sigmas.truncate(int(lmax))
    return dataclasses.replace(model, harmonics=model.harmonics.truncate(int(lmax)),
                               sigmas=sigmas)


def _batch_dims(model) -> tuple[tuple[str, ...], dict]:
    h = model.harmonics if isinstance(model, PotentialModel) else model
    batch = h.batch_shape
    if not batch:
        return (), {}
    epoch = model.epoch if isinstance(model, PotentialModel) else None
    if len(batch) == 1 and epoch is not None and np.ndim(epoch) == 1:
        return ("epoch",), {"epoch": ("epoch", np.asarray(epoch, float), {"units": "decimal year"})}
    return tuple(f"sample_{i}" for i in range(len(batch))), {}


def _dataset(values: dict[str, np.ndarray], table: dict, model, like, info, lat, lon,
             attrs: dict) -> xr.Dataset:
    dims, coords = _batch_dims(model)
    dims = dims + (info.lat_dim, info.lon_dim)
    variables = {}
    for name, array in values.items():
        long_name, units, standard = table[name]
        var_attrs = {"long_name": long_name, "units": units}
        if standard is not None and attrs.get("reference_surface_kind") == "ellipsoid":
            var_attrs["standard_name"] = standard
        variables[name] = (dims, np.asarray(array)[..., list(info.put)], var_attrs)
    coords = {**coords, info.lat_name: lat, info.lon_name: lon}
    return xr.Dataset(variables, coords=coords, attrs={"Conventions": "CF-1.8", **attrs})


def _model_attributes(model) -> dict:
    if not isinstance(model, PotentialModel):
        return {"reference_radius": float(model.radius)}
    out = {"model_name": model.name, "reference_radius": float(model.radius),
           "model_source": model.source}
    if model.gm is not None:
        out["model_gm"] = float(model.gm)
    if model.tide_system:
        out["tide_system"] = model.tide_system
    if model.epoch is not None and np.ndim(model.epoch) == 0:
        out["epoch"] = float(model.epoch)
    out["model_lmax_used"] = int(model.lmax)
    return {k: v for k, v in out.items() if v not in ("", None)}


def gravity_fields(model, like, *, height: float = 0.0,
                   quantities: Sequence[str] | str = ("geoid", "anomaly"), normal="grs80",
                   gm: float | None = None, surface: str = "sphere",
                   lmax: int | None = None) -> xr.Dataset:
    """Gravity quantities of a model on a grid, as a Dataset with units and CF attributes.

    Parameters
    ----------
    model : PotentialModel, Harmonics or path
        A gravity model, coefficients with ``radius`` set (then ``gm``), or a
        model file (read with :func:`sphex.xr.open_model`).
    like : DataArray, Dataset, Grid or str
        The target grid (coordinates reproduced), a Grid, or a grid text such
        as ``"gauss:359"``.
    height : float
        Metres above the reference sphere, or the ellipsoid with
        ``surface="ellipsoid"``.
    quantities : str or sequence of str
        Names of :data:`sphex.potential.GRAVITY_QUANTITIES`; one variable each.
    normal, gm, surface
        As :func:`sphex.potential.gravity` (``normal="sphere"`` removes the
        model's own ``GM/r``: for bodies other than the Earth).
    lmax : int, optional
        Use the model up to this degree only (for example below the degree
        where its errors reach its signal).

    Returns
    -------
    xarray.Dataset
        One variable per quantity (``long_name``, ``units``; the geoid has the
        CF ``standard_name`` ``geoid_height_above_reference_ellipsoid`` when it
        is computed on the ellipsoid of a normal field), the grid's
        coordinates, a leading ``epoch`` or ``sample_N`` dimension for a
        batch, and attributes naming the model, the height, the surface, the
        normal field and the caution (``comment``).

    Notes
    -----
    The caution: geoid heights and gravity values from sphex are not
    certified for surveying, engineering or navigation; the official
    products of the responsible agencies and licensed practice come first.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex import Harmonics
    >>> from sphex.xr import gravity_fields
    >>> c = np.zeros((3, 3)); c[0, 0] = 1.0; c[2, 2] = 1e-6
    >>> h = Harmonics.from_cos_sin(c, 0 * c, norm="full", condon_shortley=False, radius=1.7e6)
    >>> ds = gravity_fields(h, "gauss:8", quantities=["anomaly"], gm=4.9e12, normal=None)
    >>> ds["anomaly"].attrs["units"], ds["anomaly"].dims
    ('m s-2', ('lat', 'lon'))
    """
    model = _model(model, lmax)
    info, lat, lon = synthesis_target(like)
    values = potential.gravity(model, info.grid, list(_names(quantities)), height, normal,
                               gm=gm, surface=surface)
    field = None if isinstance(normal, str) and normal.lower() == "sphere" else normal_field(normal)
    attrs = {"title": "gravity field quantities (sphex)", "height": float(height),
             "height_units": "m", **_model_attributes(model),
             "latitude_kind": "geodetic" if surface == "ellipsoid" else "geocentric",
             "reference_surface_kind": surface,
             "normal_field": (normal if isinstance(normal, str) else
                              "none" if field is None else "user-defined"),
             "comment": CAUTION}
    return _dataset(values, GRAVITY_ATTRIBUTES, model, like, info, lat, lon, attrs)


def _names(names: Sequence[str] | str) -> list[str]:
    if isinstance(names, str):
        return [names]
    try:
        return list(names)
    except TypeError:
        raise ValueError(f"expected a name or a list of names, got {names!r}") from None


def magnetic_fields(model, like, *, height: float = 0.0,
                    components: Sequence[str] | str = ("north", "east", "down"),
                    surface: str = "sphere", ellipsoid="wgs84",
                    lmax: int | None = None) -> xr.Dataset:
    """Magnetic field components of a model on a grid, as a Dataset with units.

    Parameters
    ----------
    model : PotentialModel, Harmonics or path
        A magnetic model (``.shc`` or a sphex model file), or coefficients
        with ``radius`` and ``units`` ("nT" or "T") set.
    like : DataArray, Dataset, Grid or str
        The target grid.
    height : float
        Metres above the reference sphere (or ellipsoid).
    components : str or sequence of str
        Names of :data:`sphex.potential.MAGNETIC_COMPONENTS`.
    surface, ellipsoid
        As :func:`sphex.potential.magnetic`.
    lmax : int, optional
        Use the model up to this degree only.

    Returns
    -------
    xarray.Dataset
        One variable per component, tesla (X, Y, Z, H, F) or degrees (D, I).
    """
    model = _model(model, lmax)
    info, lat, lon = synthesis_target(like)
    values = potential.magnetic(model, info.grid, list(_names(components)), height,
                                surface=surface, ellipsoid=ellipsoid)
    attrs = {"title": "magnetic field components (sphex)", "height": float(height),
             "height_units": "m", **_model_attributes(model),
             "latitude_kind": "geodetic" if surface == "ellipsoid" else "geocentric",
             "reference_surface_kind": surface,
             "frame": ("local geodetic (X, Z rotated to the ellipsoid's normal)"
                       if surface == "ellipsoid" else "local geocentric")}
    return _dataset(values, MAGNETIC_ATTRIBUTES, model, like, info, lat, lon, attrs)


def _spectrum(values: np.ndarray, model, norm: str, units: str | None, what: str) -> xr.DataArray:
    dims, coords = _batch_dims(model)
    units = "1" if units is None else f"{units}2"
    degree = np.arange(values.shape[-1], dtype=np.int32)
    return xr.DataArray(values, dims=dims + ("degree",),
                        coords={**coords, "degree": ("degree", degree,
                                                     {"long_name": "spherical-harmonic degree l"})},
                        name=what.replace(" ", "_"),
                        attrs={"long_name": f"{what} (sum over orders of squared {norm} "
                                            "coefficients)",
                               "units": units, "normalization": norm})


def degree_variances(model, norm: str | None = None) -> xr.DataArray:
    """Degree variances of a model as a DataArray over ``degree`` with units.

    As :func:`sphex.potential.degree_variances` (``sum_m C_lm^2 + S_lm^2``):
    dimensionless (``units = "1"``) for gravity coefficients, ``nT2`` for
    magnetic ones in nT.  ``model`` may be a model file path.
    """
    model = _model(model)
    h = model.harmonics if isinstance(model, PotentialModel) else model
    values = potential.degree_variances(model, norm)
    return _spectrum(values, model, norm or h.norm, h.units, "degree variances")


def error_degree_variances(model, norm: str | None = None) -> xr.DataArray:
    """Error degree variances of a model (its sigmas) as a DataArray over ``degree``.

    ``sum_m sigma_C_lm^2 + sigma_S_lm^2``; where they meet the degree
    variances the model stops carrying information.
    """
    model = _model(model)
    values = potential.error_degree_variances(model, norm)
    sig = model.sigmas if isinstance(model, PotentialModel) else model
    return _spectrum(values, model, norm or sig.norm, sig.units, "error degree variances")
