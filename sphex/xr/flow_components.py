"""The two components of a wind or current: checked as a pair, and what they say about themselves.

Used by the flow adapters (:mod:`sphex.xr.flow`) and the streaming of flow
diagnostics (:mod:`sphex.xr.flow_streaming`):

- :func:`component_pair` checks that the eastward and northward components
  are on one grid with the same other dimensions, coordinates and units;
  :func:`prepare_pair` and :func:`components_of_block` refuse missing values
  (in memory, or inside each dask task) and give each dask chunk whole fields;
- :func:`flow_radius` finds the sphere's radius (argument, attribute, or
  Earth's mean radius with a :class:`RadiusAssumedWarning`);
- :func:`derived_units` gives the units of the diagnostics from those of the
  components; :func:`flow_medium` tells winds from sea-water currents by
  their CF standard names, which decide the standard names of the outputs
  (:data:`DIAGNOSTIC_STANDARD_NAMES`);
- :func:`find_components` picks the components of a Dataset by name or by
  CF standard name.

The CF standard names here are from memory of the CF standard name table;
where we know of no name (the sea-water vorticity, streamfunction and
velocity potential of a velocity field) the outputs carry a ``long_name`` only.
"""
from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
import xarray as xr

from sphex.xr import scaleout
from sphex.xr.coords import GridInfo, find_grid
from sphex.xr.units import squared_units
from sphex.xr.missing import (
    FieldNames, field_positions, refuse_missing_in_block, refuse_missing_in_memory,
)

__all__ = ["EARTH_MEAN_RADIUS_M", "RadiusAssumedWarning", "EAST_STANDARD_NAMES",
           "NORTH_STANDARD_NAMES", "DIAGNOSTIC_STANDARD_NAMES", "flow_radius", "derived_units",
           "flow_medium", "component_pair", "components_units", "prepare_pair",
           "components_of_block", "find_components"]

#: Earth's mean radius in metres, R1 = (2a + b)/3 of the GRS80 ellipsoid (IUGG; common practice).
EARTH_MEAN_RADIUS_M = 6371008.8

# spellings of metres per second (lower case, single spaces)
_METRES_PER_SECOND = {
    "m s-1", "m/s", "m s**-1", "m s^-1", "m.s-1", "m*s-1", "m sec-1", "ms-1", "m.s**-1",
    "meter second-1", "metre second-1", "meters/second", "metres/second", "meter/second",
    "metre/second", "meters per second", "metres per second", "meter per second",
    "metre per second",
}
#: CF standard names of the components by medium (from memory of the CF table)
EAST_STANDARD_NAMES = {"atmosphere": "eastward_wind", "sea_water": "eastward_sea_water_velocity"}
NORTH_STANDARD_NAMES = {"atmosphere": "northward_wind", "sea_water": "northward_sea_water_velocity"}
#: CF standard names of the diagnostics by medium; none where we know of no name
DIAGNOSTIC_STANDARD_NAMES = {
    "atmosphere": {"vorticity": "atmosphere_relative_vorticity",
                   "absolute_vorticity": "atmosphere_absolute_vorticity",
                   "divergence": "divergence_of_wind",
                   "streamfunction": "atmosphere_horizontal_streamfunction",
                   "velocity_potential": "atmosphere_horizontal_velocity_potential"},
    "sea_water": {"divergence": "divergence_of_sea_water_velocity"},
}


class RadiusAssumedWarning(UserWarning):
    """No radius was given or found, so sphex used Earth's mean radius."""


# ----------------------------------------------------------------------------
# The radius, the units and the medium
# ----------------------------------------------------------------------------
def _radius_attribute(obj: xr.DataArray | xr.Dataset) -> tuple[float, str] | None:
    """The radius (metres) an object's attributes state, and which attribute said it."""
    owner = f"of {obj.name!r}" if isinstance(obj, xr.DataArray) else "of the file"
    for key, scale in (("planet_radius_km", 1e3), ("sphere_radius_km", 1e3),
                       ("reference_radius", 1.0)):
        if key in obj.attrs:
            try:
                value = float(obj.attrs[key]) * scale
            except (TypeError, ValueError):
                value = float("nan")
            if not (np.isfinite(value) and value > 0):
                raise ValueError(f"attribute {key}={obj.attrs[key]!r} {owner} is not a positive "
                                 "number; fix it or give the radius")
            return value, f"attribute {key} {owner}"
    return None


def flow_radius(radius: float | None, *sources: xr.DataArray | xr.Dataset) -> tuple[float, str]:
    """The sphere's radius in metres for a flow, and where it came from.

    Parameters
    ----------
    radius : float or None
        The radius in metres, or None to look at the attributes of ``sources``
        (``planet_radius_km``, ``sphere_radius_km`` in km, ``reference_radius``
        in metres) and then fall back on Earth's mean radius.
    *sources : xarray.DataArray or xarray.Dataset
        The components (and the file they come from) whose attributes are read.

    Returns
    -------
    (float, str)
        Metres, and a few words on the source (for messages).

    Raises
    ------
    ValueError
        A radius that is not a positive finite number, or attributes that
        disagree.

    Warns
    -----
    RadiusAssumedWarning
        When Earth's mean radius was assumed.
    UserWarning
        A radius under 100 km, which looks like kilometres given as metres.
    """
    if radius is not None:
        if isinstance(radius, bool) or not isinstance(radius, numbers.Real) \
                or not (np.isfinite(radius) and radius > 0):
            raise ValueError(f"radius must be a positive number of metres, got {radius!r}")
        if radius < 1e5:
            warnings.warn(f"radius {radius:g} m is under 100 km; the radius is in metres (Earth: "
                          "6.371e6)", UserWarning, stacklevel=3)
        return float(radius), "given"
    found = [a for a in (_radius_attribute(c) for c in sources) if a is not None]
    if found:
        if any(abs(r - found[0][0]) > 1e-9 * found[0][0] for r, _ in found):
            listed = ", ".join(f"{r:g} m from the {s}" for r, s in found)
            raise ValueError(f"the attributes disagree about the radius ({listed}); give the "
                             "radius")
        return found[0]
    warnings.warn(f"no radius given and no planet_radius_km attribute: assumed Earth's mean radius "
                  f"{EARTH_MEAN_RADIUS_M / 1e3:.4f} km; give the radius for another sphere",
                  RadiusAssumedWarning, stacklevel=3)
    return EARTH_MEAN_RADIUS_M, "Earth's mean radius, assumed"


def derived_units(units: str | None) -> dict[str, str | None]:
    """Units of the diagnostics of components in ``units``, on a sphere of radius in metres."""
    if units is None:
        return {"component": None, "per_length": None, "potential": None, "energy": None}
    if " ".join(str(units).lower().split()) in _METRES_PER_SECOND:
        return {"component": units, "per_length": "s-1", "potential": "m2 s-1", "energy": "m2 s-2"}
    group = f"({units})" if any(ch in units for ch in "/*") else units
    return {"component": units, "per_length": f"{group} m-1", "potential": f"m {group}",
            "energy": squared_units(units)}


def flow_medium(u: xr.DataArray, v: xr.DataArray, medium: str | None) -> str | None:
    """``"atmosphere"``, ``"sea_water"`` or None, from ``medium`` or the CF standard names."""
    if medium is not None:
        if medium not in EAST_STANDARD_NAMES:
            raise ValueError(f"medium must be 'atmosphere', 'sea_water' or None, not {medium!r}")
        return medium
    east = str(u.attrs.get("standard_name", ""))
    north = str(v.attrs.get("standard_name", ""))
    if east.startswith("northward") or north.startswith("eastward"):
        raise ValueError(f"{u.name!r} has standard_name {east or 'none'!r} and {v.name!r} "
                         f"{north or 'none'!r}: are the components swapped? Give the eastward "
                         "component first")
    for kind in EAST_STANDARD_NAMES:
        if east.endswith(EAST_STANDARD_NAMES[kind]) and north.endswith(NORTH_STANDARD_NAMES[kind]):
            return kind
    return None


# ----------------------------------------------------------------------------
# The two components
# ----------------------------------------------------------------------------
def _as_component(obj: Any, which: str) -> xr.DataArray:
    if not isinstance(obj, xr.DataArray):
        raise TypeError(f"{which} must be an xarray.DataArray, not {type(obj).__name__}")
    if obj.name is None:
        obj = obj.rename(which)
    if obj.dtype.kind not in "fiu":
        raise ValueError(f"{which} {obj.name!r} has dtype {obj.dtype}; give real components "
                         "(float or integer)")
    return obj


def component_pair(u: Any, v: Any) -> tuple[xr.DataArray, xr.DataArray, GridInfo]:
    """Both components checked to be on one grid with the same other dimensions; ``v`` in
    ``u``'s dimension order."""
    u, v = _as_component(u, "u"), _as_component(v, "v")
    info = find_grid(u)
    other = find_grid(v)
    u_lat, u_lon = (np.asarray(u[n].values) for n in (info.lat_name, info.lon_name))
    v_lat, v_lon = (np.asarray(v[n].values) for n in (other.lat_name, other.lon_name))
    if (u_lat.shape != v_lat.shape or u_lon.shape != v_lon.shape
            or not (np.array_equal(u_lat, v_lat) and np.array_equal(u_lon, v_lon))):
        raise ValueError(
            f"{u.name!r} and {v.name!r} are not on the same grid ({u.name!r}: {info.describe()}; "
            f"{v.name!r}: {other.describe()}); a flow needs both components at the same points: "
            "interpolate a staggered component onto the other's points first")
    if (info.lat_dim, info.lon_dim) != (other.lat_dim, other.lon_dim):
        v = v.rename({other.lat_dim: info.lat_dim, other.lon_dim: info.lon_dim})
    if set(u.dims) != set(v.dims):
        raise ValueError(f"{u.name!r} has dimensions {tuple(map(str, u.dims))} but {v.name!r} "
                         f"{tuple(map(str, v.dims))}; select the same levels and steps of both")
    v = v.transpose(*u.dims)
    for d in u.dims:
        if u.sizes[d] != v.sizes[d]:
            raise ValueError(f"{u.name!r} and {v.name!r} differ in size along {str(d)!r} "
                             f"({u.sizes[d]} and {v.sizes[d]}); select the same steps of both")
        if d in u.coords and d in v.coords and d not in (info.lat_dim, info.lon_dim) \
                and not np.array_equal(np.asarray(u[d].values), np.asarray(v[d].values)):
            raise ValueError(f"{u.name!r} and {v.name!r} have different {str(d)!r} coordinates; "
                             "select the same steps of both (for example with .sel)")
    units = [c.attrs.get("units") for c in (u, v)]
    if None not in units and " ".join(str(units[0]).split()) != " ".join(str(units[1]).split()):
        raise ValueError(f"{u.name!r} is in {units[0]!r} but {v.name!r} in {units[1]!r}; "
                         "convert one so both components have the same units")
    return u, v, info


def components_units(u: xr.DataArray, v: xr.DataArray) -> str | None:
    units = u.attrs.get("units", v.attrs.get("units"))
    return None if units is None else str(units)


def prepare_pair(u: xr.DataArray, v: xr.DataArray, info: GridInfo
                  ) -> tuple[xr.DataArray, xr.DataArray, xr.DataArray, tuple]:
    """Refuse missing values (in memory), whole-field chunks for both components, and the
    field positions and namers the dask tasks report missing values with."""
    core = (info.lat_dim, info.lon_dim)
    for c in (u, v):
        refuse_missing_in_memory(c, core)
    u = scaleout.whole_fields(u, core)
    v = scaleout.whole_fields(v, core)
    if u.chunks is not None and v.chunks is None:
        v = v.chunk(dict(zip(u.dims, u.chunks)))
    elif v.chunks is not None and u.chunks is None:
        u = u.chunk(dict(zip(v.dims, v.chunks)))
    pos, east_names = field_positions(u, core)
    north_names = FieldNames(v, core) if east_names is not None else None
    return u, v, pos, (east_names, north_names)


def components_of_block(east: np.ndarray, north: np.ndarray, pos: np.ndarray | None,
                         info: GridInfo, where: tuple) -> tuple[np.ndarray, np.ndarray]:
    """The analysis columns of a block of both components, float64, checked for gaps."""
    out = []
    for values, names in zip((east, north), where):
        block = np.ascontiguousarray(np.asarray(values)[..., list(info.take)], dtype=np.float64)
        refuse_missing_in_block(block.reshape((-1,) + block.shape[-2:]), 0, pos, block.shape[:-2],
                                names)
        out.append(block)
    return out[0], out[1]


def find_components(ds: xr.Dataset, east: str | None = None, north: str | None = None,
                    options: tuple[str, str] = ("east=", "north=")) -> tuple[str, str]:
    """The names of the eastward and northward components in ``ds``.

    Parameters
    ----------
    ds : xarray.Dataset
    east, north : str, optional
        The variables' names; when both are None, the variables whose CF
        ``standard_name`` is ``eastward_wind`` and ``northward_wind`` (or
        ``eastward_sea_water_velocity`` and ``northward_sea_water_velocity``).
    options : (str, str)
        How the caller names the two choices, for the messages (the command
        line passes ``("--east", "--north")``).

    Returns
    -------
    (str, str)

    Raises
    ------
    ValueError
        A named variable that is not there; only one of the two named; no
        variable, or several, with the standard names.
    """
    listed = ", ".join(map(str, ds.data_vars)) or "none"
    if (east is None) != (north is None):
        raise ValueError(f"give both {options[0]} and {options[1]} (or neither, to find the "
                         "components by their CF standard_name)")
    if east is not None and north is not None:
        for name in (east, north):
            if name not in ds.data_vars:
                raise ValueError(f"there is no variable {name!r} (variables: {listed})")
        return str(east), str(north)
    found: dict[str, list[str]] = {}
    for name, da in ds.data_vars.items():
        standard = str(da.attrs.get("standard_name", ""))
        if standard in EAST_STANDARD_NAMES.values() or standard in NORTH_STANDARD_NAMES.values():
            found.setdefault(standard, []).append(str(name))
    for medium in EAST_STANDARD_NAMES:
        e = found.get(EAST_STANDARD_NAMES[medium], [])
        n = found.get(NORTH_STANDARD_NAMES[medium], [])
        if len(e) == 1 and len(n) == 1:
            return e[0], n[0]
        if e or n:
            many = ", ".join(e + n)
            raise ValueError(f"the components are ambiguous: {many} carry the standard names "
                             f"{EAST_STANDARD_NAMES[medium]} / {NORTH_STANDARD_NAMES[medium]}; "
                             f"choose with {options[0]} VAR {options[1]} VAR")
    wanted = " or ".join(f"{EAST_STANDARD_NAMES[m]}/{NORTH_STANDARD_NAMES[m]}"
                         for m in EAST_STANDARD_NAMES)
    raise ValueError(f"no variables with the CF standard_name {wanted} (variables: {listed}); "
                     f"name the components with {options[0]} VAR {options[1]} VAR")
