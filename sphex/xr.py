"""xarray and netCDF adapters: gridded DataArrays in, coefficient Datasets out.

The functions here find the latitude and longitude of a DataArray (by name or
by CF attributes), hand the spatial part to the numpy core through
:func:`xarray.apply_ufunc` (so extra dimensions such as time, level or member
are a batch, and dask-backed inputs stay lazy), and put coordinates and
attributes back on the result.

Coefficient Dataset layout (also the netCDF file layout)
--------------------------------------------------------
- dimensions ``degree`` and ``order`` (after any extra dimensions);
- variables ``cos_coef`` (C_lm) and ``sin_coef`` (S_lm), the real form
  ``f = sum_l sum_{m<=l} (C_lm cos(m lon) + S_lm sin(m lon)) r_m Lambda_lm``
  with ``r_0 = 1`` and ``r_m = sqrt(2)`` for ``m > 0`` (``r_m = 1`` for
  ``"unnormalized"``), longitude measured east from the 0 meridian; entries with
  ``order > degree`` do not exist and hold 0;
- attributes ``normalization``, ``phase_convention``, ``lmax``,
  ``reference_radius`` (metres, when known), ``units`` and ``field_name``,
  plus the attributes of the source variable prefixed with ``field_``.

Files written from a :class:`~sphex.harmonics.Harmonics` (``h.to_netcdf``,
:func:`write_harmonics`) may carry two small ``int8`` variables that record
the last-place difference between the cosine/sine values and sphex's complex
storage, so that :func:`open_harmonics` returns the very same bits.  Other
readers can ignore them.

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

import math
import os
from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from sphex import _scale
from sphex._io import atomic_output, check_output_path
from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.legendre import check_norm

__all__ = [
    "COS", "SIN", "GridInfo", "find_grid", "parse_grid", "analyze", "synthesize",
    "smooth", "regrid", "degree_power", "to_harmonics", "from_harmonics",
    "write_harmonics", "open_harmonics", "open_coefficients", "is_coefficients",
    "write_table", "read_table",
]

COS = "cos_coef"
SIN = "sin_coef"
_RE_STEPS = "exact_re_steps"
_IM_STEPS = "exact_im_steps"
_NORM_MEANING = {
    "orthonormal": "integral of |Y_lm|^2 over the unit sphere is 1",
    "full": "integral of |Y_lm|^2 over the unit sphere is 4 pi",
    "schmidt": "integral of |Y_lm|^2 over the unit sphere is 4 pi/(2l+1)",
    "unnormalized": "plain associated Legendre functions, no normalisation",
}
_LAYOUTS = {"poles", "cells", "north"}

# ----------------------------------------------------------------------------
# Finding latitude and longitude
# ----------------------------------------------------------------------------
_LAT_NAMES = {"lat", "latitude", "lats", "y", "nav_lat", "xlat", "lat_deg", "latitudes"}
_LON_NAMES = {"lon", "longitude", "lons", "x", "nav_lon", "xlong", "lon_deg", "longitudes", "long"}
# CF conventions, section 4.1 (units accepted for latitude / longitude)
_LAT_UNITS = {"degrees_north", "degree_north", "degree_n", "degrees_n", "degreen", "degreesn"}
_LON_UNITS = {"degrees_east", "degree_east", "degree_e", "degrees_e", "degreee", "degreese"}


@dataclass(frozen=True)
class GridInfo:
    """Where the grid of a DataArray lives and how its columns map to a :class:`Grid`.

    Attributes
    ----------
    grid : Grid
        The grid used for the transforms (seam column dropped, longitudes
        ascending).
    lat_dim, lon_dim : str
        Dimension names holding latitude and longitude.
    lat_name, lon_name : str
        Names of the coordinate variables (often equal to the dimensions).
    take : tuple of int
        For analysis: which original columns, in order, form ``grid``'s columns.
    put : tuple of int
        For synthesis: for each original column, which ``grid`` column fills it
        (a repeated seam column gets column 0 again).
    seam : bool
        Whether the input repeats its first longitude at the end (0 and 360).
    """

    grid: Grid
    lat_dim: str
    lon_dim: str
    lat_name: str
    lon_name: str
    take: tuple[int, ...]
    put: tuple[int, ...]
    seam: bool

    def describe(self) -> str:
        """One line: kind, size, exact degree limit, order and longitude origin."""
        g = self.grid
        lat = np.asarray(g.lat)
        order = "north to south" if lat[0] > lat[-1] else "south to north"
        seam = ", repeated seam column dropped" if self.seam else ""
        return (f"{g.nlat} x {g.nlon} {g.kind} grid ({order}, longitudes from "
                f"{float(g.lon[0]):g} deg{seam}), exact to degree {g.lmax_exact}")


def _attr(coord: xr.DataArray, key: str) -> str:
    v = coord.attrs.get(key, "")
    return str(v).strip().lower() if v is not None else ""


def _find_axis(da: xr.DataArray | xr.Dataset, which: str) -> list[str]:
    """Candidate coordinate names for latitude or longitude, best first."""
    names = _LAT_NAMES if which == "lat" else _LON_NAMES
    units = _LAT_UNITS if which == "lat" else _LON_UNITS
    std = "latitude" if which == "lat" else "longitude"
    axis = "y" if which == "lat" else "x"
    dims = set(da.dims)
    scored: list[tuple[int, int, str]] = []
    for i, (name, c) in enumerate(da.coords.items()):
        if c.ndim != 1 or c.dims[0] not in dims:
            continue
        score = 0
        if _attr(c, "standard_name") == std:
            score = 4
        elif _attr(c, "units") in units:
            score = 3
        elif _attr(c, "axis") == axis and "degree" in _attr(c, "units"):
            score = 2
        elif str(name).lower() in names:
            score = 1
        if score:
            scored.append((-score, i, str(name)))
    return [name for _, _, name in sorted(scored)]


def _lon_plan(lon: np.ndarray) -> tuple[np.ndarray, tuple[int, ...], tuple[int, ...], bool]:
    """Analysis longitudes (ascending, unwrapped, seam dropped) and column maps."""
    n = lon.size
    if n < 2:
        return lon, tuple(range(n)), tuple(range(n)), False
    d = np.diff(lon)
    dw = (d + 180.0) % 360.0 - 180.0
    reverse = bool(np.median(dw) < 0)
    asc_pos = np.arange(n)[::-1] if reverse else np.arange(n)
    lon_a = lon[asc_pos]
    dw = (np.diff(lon_a) + 180.0) % 360.0 - 180.0
    unwrapped = lon_a[0] + np.concatenate([[0.0], np.cumsum(dw)])
    seam = bool(n >= 3 and abs(unwrapped[-1] - unwrapped[0] - 360.0) < 1e-6)
    n_a = n - 1 if seam else n
    take = tuple(int(p) for p in asc_pos[:n_a])
    put = [0] * n
    for c, p in enumerate(asc_pos):
        put[int(p)] = c if c < n_a else 0
    return unwrapped[:n_a], take, tuple(put), seam


def find_grid(da: xr.DataArray | xr.Dataset) -> GridInfo:
    """Find the latitude-longitude grid of a DataArray (or of a Dataset's coordinates).

    Latitude and longitude are recognised by CF ``standard_name``
    (``latitude`` / ``longitude``), then CF ``units`` (``degrees_north`` /
    ``degrees_east`` and their spellings), then ``axis`` with degree units,
    then by name (``lat``, ``latitude``, ``y``, ...; ``lon``, ``longitude``,
    ``x``, ...).  Latitudes may run either way; longitudes may start anywhere,
    run either way and repeat the first column at the end (the seam column is
    dropped for analysis and restored on synthesis).

    Parameters
    ----------
    da : xarray.DataArray or xarray.Dataset
        Object whose coordinates define the grid.

    Returns
    -------
    GridInfo

    Raises
    ------
    ValueError
        If no latitude or longitude coordinate is found, or if the
        coordinates do not form a supported global grid (the message says why).
    """
    where = f"variable {da.name!r}" if isinstance(da, xr.DataArray) and da.name is not None else "the data"
    lats, lons = _find_axis(da, "lat"), _find_axis(da, "lon")
    if not lats or not lons:
        missing = " and ".join(w for w, n in (("latitude", lats), ("longitude", lons)) if not n)
        dims = ", ".join(map(str, da.dims)) or "none"
        raise ValueError(
            f"{where} has no {missing} coordinate (dimensions: {dims}); name it lat/lon or give it "
            "CF units degrees_north/degrees_east"
        )
    if isinstance(da, xr.Dataset):
        # a Dataset may hold several grids: the first data variable on a usable one decides
        for v in da.data_vars.values():
            try:
                return find_grid(v)
            except ValueError:
                continue
    first_error: ValueError | None = None
    pairs = sorted(((i + j, i, j) for i in range(len(lats)) for j in range(len(lons))))
    for _, i, j in pairs:
        try:
            return _grid_from_pair(da, lats[i], lons[j], where)
        except ValueError as exc:
            first_error = first_error or exc
    assert first_error is not None
    raise first_error


def _grid_from_pair(da: xr.DataArray | xr.Dataset, lat_name: str, lon_name: str,
                    where: str) -> GridInfo:
    lat_c, lon_c = da.coords[lat_name], da.coords[lon_name]
    lat_dim, lon_dim = str(lat_c.dims[0]), str(lon_c.dims[0])
    if lat_dim == lon_dim:
        raise ValueError(f"{where}: latitude and longitude share the dimension {lat_dim!r}; "
                         "sphex needs a regular latitude-longitude grid (1-D coordinates)")
    lat = np.asarray(lat_c.values, dtype=np.float64)
    lon = np.asarray(lon_c.values, dtype=np.float64)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))):
        raise ValueError(f"{where}: latitude or longitude has missing values")
    if lat.min() < -90 - 1e-9 or lat.max() > 90 + 1e-9:
        raise ValueError(f"{where}: latitudes run from {lat.min():g} to {lat.max():g}, outside "
                         "[-90, 90]; are latitude and longitude swapped?")
    lon_a, take, put, seam = _lon_plan(lon)
    try:
        grid = Grid.from_coords(lat, lon_a)
    except ValueError as exc:
        raise ValueError(f"{where}: {_one_line(exc)}") from None
    return GridInfo(grid, lat_dim, lon_dim, str(lat_name), str(lon_name), take, put, seam)


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split())


def parse_grid(spec: str) -> Grid:
    """Make a Grid from a short text form.

    Parameters
    ----------
    spec : str
        ``"gauss:LMAX"`` (Gauss-Legendre grid exact to degree LMAX) or
        ``"equiangular:NLATxNLON:LAYOUT"`` with LAYOUT ``poles``, ``cells`` or
        ``north``.

    Returns
    -------
    Grid

    Raises
    ------
    ValueError
        If the text does not have one of these forms.

    Examples
    --------
    >>> parse_grid("gauss:31").nlat
    32
    >>> parse_grid("equiangular:90x180:cells").kind
    'equiangular-cells'
    """
    hint = "use gauss:LMAX or equiangular:NLATxNLON:LAYOUT (LAYOUT poles, cells or north)"
    parts = spec.strip().split(":")
    kind = parts[0].lower()

    def whole(text: str) -> int | None:
        text = text.strip()
        return int(text) if text.isdigit() else None

    if kind == "gauss" and len(parts) == 2 and whole(parts[1]) is not None:
        return Grid.gauss(whole(parts[1]))
    if kind == "equiangular" and len(parts) == 3:
        nlat_s, _, nlon_s = parts[1].lower().partition("x")
        nlat, nlon = whole(nlat_s), whole(nlon_s)
        layout = parts[2].strip().lower()
        if layout not in _LAYOUTS:
            raise ValueError(f"unknown layout {parts[2]!r} in grid {spec!r}; {hint}")
        if nlat is not None and nlon is not None and nlat >= 2 and nlon >= 1:
            return Grid.equiangular(nlat, nlon, layout)
    raise ValueError(f"cannot read grid {spec!r}; {hint}")


def _grid_coords(grid: Grid) -> tuple[xr.DataArray, xr.DataArray]:
    lat = xr.DataArray(np.asarray(grid.lat, dtype=np.float64), dims=("lat",),
                       attrs={"standard_name": "latitude", "long_name": "latitude",
                              "units": "degrees_north"})
    lon = xr.DataArray(np.asarray(grid.lon, dtype=np.float64), dims=("lon",),
                       attrs={"standard_name": "longitude", "long_name": "longitude",
                              "units": "degrees_east"})
    return lat, lon


def _target(like: Any) -> tuple[GridInfo, xr.DataArray, xr.DataArray]:
    """GridInfo and the coordinate variables of a synthesis target."""
    if isinstance(like, str):
        like = parse_grid(like)
    if isinstance(like, Grid):
        lat, lon = _grid_coords(like)
        n = like.nlon
        info = GridInfo(like, "lat", "lon", "lat", "lon", tuple(range(n)), tuple(range(n)), False)
        return info, lat, lon
    if isinstance(like, (xr.DataArray, xr.Dataset)):
        info = find_grid(like)
        return info, like.coords[info.lat_name].variable, like.coords[info.lon_name].variable
    raise TypeError(f"like must be a DataArray, Dataset, Grid or grid text, not {type(like).__name__}")


# ----------------------------------------------------------------------------
# Conventions and conversions
# ----------------------------------------------------------------------------


def _conv_attrs(lmax: int, norm: str, cs: bool, radius: float | None, units: str | None) -> dict:
    attrs: dict[str, Any] = {
        "title": "spherical-harmonic coefficients (sphex)",
        "normalization": norm,
        "normalization_meaning": _NORM_MEANING[norm],
        "phase_convention": "condon-shortley" if cs else "none",
        "condon_shortley_phase": np.int8(1 if cs else 0),
        "lmax": np.int32(lmax),
        "real_form": ("f = sum over l, m<=l of (cos_coef cos(m lon) + sin_coef sin(m lon)) r_m "
                      "Lambda_lm(colat), r_0 = 1, r_m = "
                      + ("1" if norm == "unnormalized" else "sqrt(2)") + " for m > 0; "
                      "longitude east from the 0 meridian"),
    }
    if radius is not None:
        attrs["reference_radius"] = float(radius)
        attrs["reference_radius_units"] = "m"
    if units is not None:
        attrs["units"] = str(units)
    return attrs


def _conventions(ds: xr.Dataset) -> dict[str, Any]:
    a = ds.attrs
    norm = str(a.get("normalization", "orthonormal"))
    check_norm(norm)
    phase = str(a.get("phase_convention", "condon-shortley")).lower()
    cs = phase not in ("none", "no", "false", "0")
    radius = a.get("reference_radius")
    units = a.get("units")
    return {"norm": norm, "condon_shortley": cs,
            "radius": None if radius is None else float(radius),
            "units": None if units is None else str(units)}


def is_coefficients(ds: xr.Dataset) -> bool:
    """Whether ``ds`` holds coefficients in sphex's layout (``cos_coef``/``sin_coef``)."""
    return (isinstance(ds, xr.Dataset) and COS in ds.data_vars and SIN in ds.data_vars
            and "degree" in ds[COS].dims and "order" in ds[COS].dims)


def _check_coefficients(ds: Any) -> xr.Dataset:
    if isinstance(ds, Harmonics):
        return from_harmonics(ds)
    if not is_coefficients(ds):
        raise ValueError("not a coefficient Dataset: expected variables cos_coef and sin_coef "
                         "over dimensions degree and order (as written by sphex analyze)")
    n_l, n_m = ds.sizes["degree"], ds.sizes["order"]
    if n_l != n_m:
        raise ValueError(f"coefficients have {n_l} degrees but {n_m} orders; they must match")
    return ds


def _cs_from_coef(coef: np.ndarray, norm: str, cs: bool) -> tuple[np.ndarray, np.ndarray]:
    h = Harmonics(coef, norm=norm, condon_shortley=cs)
    c, s = h.cos_sin()
    return np.asarray(c, dtype=np.float64), np.asarray(s, dtype=np.float64)


def _harm(c: np.ndarray, s: np.ndarray, conv: Mapping[str, Any]) -> Harmonics:
    return Harmonics.from_cos_sin(np.asarray(c, dtype=np.float64), np.asarray(s, dtype=np.float64),
                                  norm=conv["norm"], condon_shortley=conv["condon_shortley"],
                                  radius=conv.get("radius"), units=conv.get("units"))


def _steps(target: np.ndarray, start: np.ndarray) -> np.ndarray | None:
    """Signed number of float64 steps from ``start`` to ``target`` (None if > 100)."""
    out = np.zeros(target.shape, dtype=np.int8)
    cur = start.copy()
    ok = np.isfinite(target) & np.isfinite(cur)
    for _ in range(100):
        diff = ok & (cur != target)
        if not diff.any():
            return out
        up = diff & (target > cur)
        out[up] += 1
        out[diff & ~up] -= 1
        cur[diff] = np.nextafter(cur[diff], target[diff])
    return None


def _apply_steps(x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    x = x.copy()
    steps = steps.astype(np.int16)
    while True:
        up, down = steps > 0, steps < 0
        if not (up.any() or down.any()):
            return x
        x[up] = np.nextafter(x[up], np.inf)
        x[down] = np.nextafter(x[down], -np.inf)
        steps[up] -= 1
        steps[down] += 1


def from_harmonics(h: Harmonics, dims: Sequence[Hashable] | None = None,
                   coords: Mapping[Hashable, Any] | None = None, name: str | None = None,
                   attrs: Mapping[str, Any] | None = None) -> xr.Dataset:
    """Coefficient Dataset (sphex layout) from a :class:`Harmonics`.

    Parameters
    ----------
    h : Harmonics
        Coefficients; leading batch axes become dimensions ``dims``.
    dims : sequence of str, optional
        Names for the batch axes (default ``sample_0``, ``sample_1``, ...).
    coords : mapping, optional
        Coordinates for the batch dimensions.
    name : str, optional
        Name of the field the coefficients describe (``field_name``).
    attrs : mapping, optional
        Attributes of the source field, stored with a ``field_`` prefix.

    Returns
    -------
    xarray.Dataset
    """
    batch = tuple(h.batch_shape)
    if dims is None:
        dims = tuple(f"sample_{i}" for i in range(len(batch)))
    dims = tuple(dims)
    if len(dims) != len(batch):
        raise ValueError(f"dims {dims} do not match the batch shape {batch} of the coefficients")
    c, s = _cs_from_coef(np.asarray(h.coef), h.norm, h.condon_shortley)
    return _make_dataset(c, s, dims, coords, h.lmax, h.norm, h.condon_shortley,
                         h.radius, h.units, name, attrs)


def _make_dataset(c: Any, s: Any, dims: tuple, coords: Mapping | None, lmax: int, norm: str,
                  cs: bool, radius: float | None, units: str | None, name: str | None,
                  field_attrs: Mapping[str, Any] | None) -> xr.Dataset:
    full = dims + ("degree", "order")
    label = name or "field"
    var_attrs = {"units": units} if units is not None else {}
    ds = xr.Dataset(
        {COS: (full, c, {"long_name": f"cosine coefficient C_lm of {label}", **var_attrs}),
         SIN: (full, s, {"long_name": f"sine coefficient S_lm of {label}", **var_attrs})},
        coords=dict(coords or {}),
    )
    return _finish_dataset(ds, lmax, norm, cs, radius, units, name, field_attrs)


def _finish_dataset(ds: xr.Dataset, lmax: int, norm: str, cs: bool, radius: float | None,
                    units: str | None, name: str | None,
                    field_attrs: Mapping[str, Any] | None) -> xr.Dataset:
    ds = ds.assign_coords(
        degree=("degree", np.arange(lmax + 1, dtype=np.int32),
                {"long_name": "spherical-harmonic degree l"}),
        order=("order", np.arange(lmax + 1, dtype=np.int32),
               {"long_name": "spherical-harmonic order m (entries with m > l are 0)"}),
    )
    attrs = _conv_attrs(lmax, norm, cs, radius, units)
    if name is not None:
        attrs["field_name"] = str(name)
    for k, v in (field_attrs or {}).items():
        if k in ("units",):
            continue
        if isinstance(v, (bool, np.bool_)):
            v = int(v)                      # netCDF has no boolean attributes
        if isinstance(v, (str, int, float, np.integer, np.floating, np.ndarray, list, tuple)):
            attrs[f"field_{k}"] = v
    ds.attrs = attrs
    return ds


def to_harmonics(ds: xr.Dataset) -> Harmonics:
    """A :class:`Harmonics` from a coefficient Dataset (batch dims in their order).

    Parameters
    ----------
    ds : xarray.Dataset
        Coefficients in sphex's layout (see the module docstring).

    Returns
    -------
    Harmonics
        Coefficients of shape ``(*batch, lmax+1, lmax+1)``; bit-exact to the
        Harmonics that was written when the file carries sphex's exactness
        variables.
    """
    ds = _check_coefficients(ds)
    conv = _conventions(ds)
    c_da = ds[COS]
    batch_dims = [d for d in c_da.dims if d not in ("degree", "order")]
    order = (*batch_dims, "degree", "order")
    c = np.asarray(c_da.transpose(*order).values, dtype=np.float64)
    s = np.asarray(ds[SIN].transpose(*order).values, dtype=np.float64)
    h = _harm(c, s, conv)
    if _RE_STEPS in ds and _IM_STEPS in ds:
        coef = np.asarray(h.coef)
        re = _apply_steps(coef.real.copy(), np.asarray(ds[_RE_STEPS].transpose(*order).values))
        im = _apply_steps(coef.imag.copy(), np.asarray(ds[_IM_STEPS].transpose(*order).values))
        h = h.replace(coef=re + 1j * im)
    return h


def _dataset_from_harmonics_exact(h: Harmonics, name: str | None) -> xr.Dataset:
    ds = from_harmonics(h, name=name)
    dims = tuple(ds[COS].dims)
    back = np.asarray(_harm(ds[COS].values, ds[SIN].values, _conventions(ds)).coef)
    coef = np.asarray(h.coef)
    re = _steps(coef.real, back.real.copy())
    im = _steps(coef.imag, back.imag.copy())
    if re is not None and im is not None and (re.any() or im.any()):
        note = ("last-place steps (float64 ulps) from the complex coefficients rebuilt from "
                "cos_coef/sin_coef to the ones sphex held; only for bit-exact reloading")
        ds[_RE_STEPS] = (dims, re, {"long_name": "exactness correction, real part", "comment": note})
        ds[_IM_STEPS] = (dims, im, {"long_name": "exactness correction, imaginary part",
                                    "comment": note})
    return ds


# ----------------------------------------------------------------------------
# netCDF files
# ----------------------------------------------------------------------------
def _netcdf_encoding(ds: xr.Dataset) -> dict:
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
    enc = _netcdf_encoding(ds)
    for k in list(enc):
        old = ds.variables[k].encoding
        if "_FillValue" in old and old["_FillValue"] is not None:
            enc.pop(k)
    with atomic_output(path, overwrite) as tmp:
        ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=enc)
    return Path(path)


def write_harmonics(h: Harmonics | xr.Dataset, path: str | os.PathLike, overwrite: bool = False,
                    name: str | None = None) -> Path:
    """Write coefficients to a netCDF file in sphex's layout.

    This is what ``Harmonics.to_netcdf(path)`` calls.

    Parameters
    ----------
    h : Harmonics or xarray.Dataset
        Coefficients (a Harmonics, or a Dataset from :func:`analyze`).
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
        ds = _dataset_from_harmonics_exact(h, name)
    else:
        ds = _check_coefficients(h)
    return write_dataset(ds, path, overwrite)


def _open(path: str | os.PathLike, cache: bool = True) -> xr.Dataset:
    """Open a netCDF file with errors that say what is wrong (cache=False reads
    slices lazily without keeping whole variables)."""
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(f"no such file: {str(p)!r}")
    if p.is_dir():
        raise IsADirectoryError(f"{str(p)!r} is a directory, not a netCDF file")
    try:
        return xr.open_dataset(p, engine="netcdf4", cache=cache)
    except Exception as exc:  # netCDF4 reports a damaged or foreign file in several ways
        raise ValueError(f"{str(p)!r} is not a readable netCDF file ({_one_line(exc)})") from None


def open_coefficients(path: str | os.PathLike) -> xr.Dataset:
    """Open a coefficient file as a Dataset (loaded into memory, file closed).

    Parameters
    ----------
    path : path-like
        netCDF file in sphex's layout, or a text table (see :func:`read_table`).

    Returns
    -------
    xarray.Dataset

    Raises
    ------
    FileNotFoundError, ValueError
        Missing file; not netCDF; not in the coefficient layout.
    """
    if _is_table(path):
        h, _ = read_table(path)
        return from_harmonics(h)
    with _open(path) as ds:
        ds.load()
    if not is_coefficients(ds):
        raise ValueError(f"{str(path)!r} holds no sphex coefficients (variables cos_coef and "
                         "sin_coef over degree and order); make them with sphex analyze")
    return _check_coefficients(ds)


def open_harmonics(path: str | os.PathLike) -> Harmonics:
    """Read coefficients written by :func:`write_harmonics` / ``h.to_netcdf`` / ``sphex analyze``.

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


# ----------------------------------------------------------------------------
# Analysis and synthesis
# ----------------------------------------------------------------------------
def _blocks(total: int) -> int:
    if total <= 1:
        return 1
    return max(1, min(64, math.ceil(total / 20)))


def _check_block(block: np.ndarray, start: int, pos: np.ndarray | None,
                 batch: tuple[int, ...], where: "_FieldNames | None") -> None:
    """In a dask task: name the fields of ``block`` (fields start.. of the
    task's batch) that hold NaN or inf.  ``pos`` holds the flat positions of
    the task's fields in the whole batch."""
    if where is None or np.isfinite(block.sum()):  # the sum: one cheap pass when all is well
        return
    finite = np.isfinite(block)
    bad = ~finite.reshape(block.shape[0], -1).all(axis=1)
    if bad.any():
        idx = np.arange(start, start + block.shape[0])[bad]
        if pos is not None:
            idx = np.broadcast_to(pos, batch).reshape(-1)[idx]
        raise ValueError(where.message(idx, int(finite.size - np.count_nonzero(finite))))


def _analyze_np(values: np.ndarray, pos: np.ndarray | None = None, *, info: GridInfo,
                lmax: int, norm: str, cs: bool, allow_aliasing: bool,
                progress: Callable[[int, int], None] | None,
                where: "_FieldNames | None" = None) -> tuple[np.ndarray, np.ndarray]:
    from sphex.transform import analyze as _analyze

    values = np.asarray(values)[..., list(info.take)]
    batch = values.shape[:-2]
    flat = values.reshape((-1,) + values.shape[-2:])
    n = flat.shape[0]
    c_out = np.empty((n, lmax + 1, lmax + 1))
    s_out = np.empty((n, lmax + 1, lmax + 1))
    step = _blocks(n) if progress else max(n, 1)
    for i in range(0, n, step):
        block = np.ascontiguousarray(flat[i:i + step], dtype=np.float64)
        kw = {"allow_aliasing": True} if allow_aliasing else {}
        _check_block(block, i, pos, batch, where)
        h = _analyze(block, info.grid, lmax=lmax, norm=norm, condon_shortley=cs, **kw)
        c, s = h.cos_sin()
        c_out[i:i + step] = c
        s_out[i:i + step] = s
        if progress:
            progress(min(i + step, n), n)
    shape = batch + (lmax + 1, lmax + 1)
    return c_out.reshape(shape), s_out.reshape(shape)


def _check_lmax(lmax: int | None, grid: Grid, allow_aliasing: bool, where: str) -> int:
    if lmax is None:
        return int(grid.lmax_exact)
    lmax = int(lmax)
    if lmax < 0:
        raise ValueError(f"lmax must be 0 or more, not {lmax}")
    if lmax > grid.lmax_exact and not allow_aliasing:
        raise ValueError(
            f"lmax {lmax} is above the exact limit {grid.lmax_exact} of the {grid.nlat} x "
            f"{grid.nlon} {grid.kind} grid of {where}; use lmax <= {grid.lmax_exact}"
        )
    return lmax


def _as_dataarray(da: Any) -> xr.DataArray:
    if isinstance(da, xr.Dataset):
        gridded = [k for k, v in da.data_vars.items() if _maybe_grid(v)]
        if len(gridded) == 1:
            return da[gridded[0]]
        raise ValueError(f"the Dataset holds {len(gridded)} gridded variables "
                         f"({', '.join(map(str, gridded)) or 'none'}); pick one: ds['name']")
    if not isinstance(da, xr.DataArray):
        raise TypeError(f"expected an xarray.DataArray, not {type(da).__name__}")
    return da


def _maybe_grid(da: xr.DataArray) -> bool:
    try:
        find_grid(da)
    except ValueError:
        return False
    return True


class _FieldNames:
    """Turns flat field indices of a batch into names like ``time=2001-03-04``.

    Small and picklable: it travels with dask tasks, which see only their own
    block of fields (their flat positions come in as an extra input)."""

    MAX_LISTED = 5

    def __init__(self, da: xr.DataArray, core: tuple[Hashable, Hashable]):
        self.name = repr(da.name) if da.name is not None else "the field"
        self.dims = [d for d in da.dims if d not in core]
        self.shape = tuple(int(da.sizes[d]) for d in self.dims)
        self.coords = {d: (np.asarray(da[d].values) if d in da.coords else None)
                       for d in self.dims}

    def _label(self, flat: int) -> str:
        if not self.dims:
            return "the only field"
        at = np.unravel_index(int(flat), self.shape)
        parts = []
        for d, k in zip(self.dims, at):
            c = self.coords[d]
            if c is None:
                parts.append(f"{d} index {int(k)}")
                continue
            v = c[k]
            if np.issubdtype(c.dtype, np.datetime64):
                v = np.datetime_as_string(v, unit="s").replace("T00:00:00", "")
            parts.append(f"{d}={v} (index {int(k)})")
        return ", ".join(parts)

    def message(self, flat_positions: np.ndarray, nbad: int | None = None) -> str:
        flat_positions = np.asarray(flat_positions).reshape(-1)
        listed = "; ".join(self._label(p) for p in flat_positions[: self.MAX_LISTED])
        more = len(flat_positions) - self.MAX_LISTED
        tail = f" and {more} more fields" if more > 0 else ""
        count = "missing values (NaN or inf)" if nbad is None else \
            f"{nbad} missing value{'s' if nbad != 1 else ''} (NaN or inf)"
        return (f"{self.name} has {count}, in {listed}{tail}; spherical-harmonic analysis "
                "needs complete global fields (fill the gaps first, or select the complete "
                "steps with .sel / .isel)")


def _prepare_fields(da: xr.DataArray, info: GridInfo
                    ) -> tuple[xr.DataArray, xr.DataArray, "_FieldNames | None"]:
    """What every gridded adapter does before its apply_ufunc: refuse missing
    values (in memory), give each dask chunk whole fields, and hand out the
    field positions and namer its tasks report missing values with."""
    core = (info.lat_dim, info.lon_dim)
    _check_complete(da, core)
    da = _scale.whole_fields(da, core)
    pos, names = _positions(da, core)
    return da, pos, names


def _positions(da: xr.DataArray, core: tuple[Hashable, Hashable]
               ) -> tuple[xr.DataArray, "_FieldNames | None"]:
    """Flat field positions over the non-core dimensions (chunked like ``da``),
    and the namer the tasks use with them; for numpy input, which is checked
    whole before any task runs, a 0-d position and no namer."""
    if isinstance(da.data, np.ndarray):
        return xr.DataArray(0), None
    names = _FieldNames(da, core)
    pos = xr.DataArray(np.arange(math.prod(names.shape), dtype=np.int64).reshape(names.shape),
                       dims=names.dims)
    chunks = {d: da.chunksizes[d] for d in names.dims}
    return (pos.chunk(chunks) if chunks else pos), names


def _check_complete(da: xr.DataArray, core: tuple[Hashable, Hashable]) -> None:
    if isinstance(da.data, np.ndarray) and da.dtype.kind in "fc":
        finite = np.isfinite(da.values)
        bad = int(finite.size - np.count_nonzero(finite))
        if bad:
            axes = tuple(da.get_axis_num(d) for d in core)
            per_field = ~finite.all(axis=axes)
            # flat positions in the order of the non-core dimensions
            raise ValueError(_FieldNames(da, core).message(np.flatnonzero(per_field), bad))


def analyze(da: xr.DataArray, lmax: int | None = None, *, norm: str = "orthonormal",
            condon_shortley: bool = True, radius: float | None = None,
            allow_aliasing: bool = False,
            progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Spherical-harmonic coefficients of a gridded DataArray.

    Parameters
    ----------
    da : xarray.DataArray
        Global field(s) on a latitude-longitude grid (see :func:`find_grid`);
        any other dimensions (time, level, member) are kept and analysed as a
        batch.  numpy- or dask-backed.
    lmax : int, optional
        Highest degree; default the grid's exact limit.
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
        Normalisation of the coefficients.
    condon_shortley : bool
        Include the Condon-Shortley phase (-1)^m.
    radius : float, optional
        Reference radius in metres to record with the coefficients.
    allow_aliasing : bool
        Allow ``lmax`` above the grid's exact limit (the result is aliased).
    progress : callable, optional
        ``progress(done, total)`` called as blocks of fields finish (numpy-backed
        input only).

    Returns
    -------
    xarray.Dataset
        ``cos_coef`` and ``sin_coef`` over ``(*other_dims, degree, order)`` with
        the non-spatial coordinates of ``da`` and attributes stating the
        conventions (module docstring).

    Raises
    ------
    ValueError
        No usable grid, ``lmax`` too high, unknown ``norm``, missing values.
    """
    da = _as_dataarray(da)
    check_norm(norm)
    info = find_grid(da)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    lmax = _check_lmax(lmax, info.grid, allow_aliasing, where)
    da, pos, names = _prepare_fields(da, info)
    n = lmax + 1
    c, s = xr.apply_ufunc(
        _scale.task_function(_analyze_np, da), da, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim], []],
        output_core_dims=[["degree", "order"], ["degree", "order"]],
        kwargs={"info": info, "lmax": lmax, "norm": norm, "cs": bool(condon_shortley),
                "allow_aliasing": allow_aliasing, "where": names,
                "progress": progress if isinstance(da.data, np.ndarray) else None},
        dask="parallelized", output_dtypes=[np.float64, np.float64],
        dask_gufunc_kwargs={"output_sizes": {"degree": n, "order": n}},
        keep_attrs=False,
    )
    units = da.attrs.get("units")
    label = str(da.name) if da.name is not None else "field"
    var_attrs = {"units": str(units)} if units is not None else {}
    ds = xr.Dataset({
        COS: c.assign_attrs(long_name=f"cosine coefficient C_lm of {label}", **var_attrs),
        SIN: s.assign_attrs(long_name=f"sine coefficient S_lm of {label}", **var_attrs),
    })
    return _finish_dataset(ds, lmax, norm, bool(condon_shortley), radius,
                           None if units is None else str(units),
                           None if da.name is None else str(da.name), da.attrs)


def _synth_np(c: np.ndarray, s: np.ndarray, *, conv: Mapping[str, Any], lmax: int | None,
              info: GridInfo) -> np.ndarray:
    from sphex.transform import synthesize as _synthesize

    h = _harm(c, s, conv)
    if lmax is not None and lmax < h.lmax:
        h = h.truncate(lmax)
    out = np.asarray(_synthesize(h, info.grid))
    return out[..., list(info.put)]


def _field_attrs(ds: xr.Dataset) -> dict[str, Any]:
    out = {k[len("field_"):]: v for k, v in ds.attrs.items()
           if k.startswith("field_") and k != "field_name"}
    if "units" in ds.attrs:
        out["units"] = ds.attrs["units"]
    return out


def synthesize(ds: xr.Dataset | Harmonics, like: Any, *, lmax: int | None = None) -> xr.DataArray:
    """Gridded field(s) from coefficients.

    Parameters
    ----------
    ds : xarray.Dataset or Harmonics
        Coefficients (from :func:`analyze` or :func:`open_coefficients`).
    like : DataArray, Dataset, Grid or str
        The target grid: an object whose latitude/longitude coordinates define
        it (its coordinates, order and any seam column are reproduced), a
        :class:`Grid`, or a grid text for :func:`parse_grid`.
    lmax : int, optional
        Truncate the coefficients to this degree first.

    Returns
    -------
    xarray.DataArray
        Named after the analysed field, with its attributes, the extra
        dimensions of ``ds`` and the target's latitude/longitude coordinates.
    """
    ds = _check_coefficients(ds)
    conv = _conventions(ds)
    info, lat, lon = _target(like)
    l_file = ds.sizes["degree"] - 1
    if lmax is not None and not 0 <= int(lmax) <= l_file:
        raise ValueError(f"lmax {lmax} is outside the coefficients' range 0..{l_file}")
    ds = _scale.whole_fields(ds, ("degree", "order"))
    out = xr.apply_ufunc(
        _scale.task_function(_synth_np, ds), ds[COS], ds[SIN],
        input_core_dims=[["degree", "order"], ["degree", "order"]],
        output_core_dims=[[info.lat_dim, info.lon_dim]],
        kwargs={"conv": conv, "lmax": None if lmax is None else int(lmax), "info": info},
        dask="parallelized", output_dtypes=[np.float64],
        dask_gufunc_kwargs={"output_sizes": {info.lat_dim: len(lat), info.lon_dim: len(lon)}},
        keep_attrs=False,
    )
    out = out.assign_coords({info.lat_name: lat, info.lon_name: lon})
    out.name = ds.attrs.get("field_name")
    out.attrs = _field_attrs(ds)
    return out


def _filter_weights(lmax: int, gaussian_km: float | None, cap_deg: float | None,
                    band: tuple[int, int] | None, weights: Sequence[float] | None,
                    planet_radius_km: float | None) -> tuple[np.ndarray, str]:
    from sphex import filters

    chosen = [x is not None for x in (gaussian_km, cap_deg, band, weights)]
    if sum(chosen) != 1:
        raise ValueError("give exactly one of gaussian_km, cap_deg, band or weights")
    if gaussian_km is not None:
        if planet_radius_km is None:
            raise ValueError("gaussian smoothing needs planet_radius_km (the sphere's radius in km)")
        if not gaussian_km > 0:
            raise ValueError(f"gaussian radius must be positive, not {gaussian_km}")
        w = filters.gaussian(float(gaussian_km), lmax, float(planet_radius_km))
        how = f"Gaussian smoothing, half-weight radius {gaussian_km:g} km on a {planet_radius_km:g} km sphere"
    elif cap_deg is not None:
        if not 0 < cap_deg <= 180:
            raise ValueError(f"cap radius must be in (0, 180] degrees, not {cap_deg}")
        w = filters.cap(float(cap_deg), lmax)
        how = f"spherical-cap averaging, radius {cap_deg:g} deg"
    elif band is not None:
        l1, l2 = (int(b) for b in band)
        if not 0 <= l1 < l2:
            raise ValueError(f"band needs 0 <= L1 < L2, not {l1}:{l2}")
        w = filters.taper(l1, l2)
        how = f"degree taper, full weight to degree {l1}, zero from degree {l2}"
    else:
        w = np.asarray(weights, dtype=np.float64)
        how = "user-supplied per-degree weights"
    w = np.asarray(w, dtype=np.float64)
    if w.size < lmax + 1:
        w = np.concatenate([w, np.zeros(lmax + 1 - w.size)])
    return w[: lmax + 1], how


def _smooth_np(values: np.ndarray, pos: np.ndarray | None = None, *, info: GridInfo,
               lmax: int, w: np.ndarray, out_info: GridInfo | None = None,
               where: "_FieldNames | None" = None) -> np.ndarray:
    from sphex.transform import analyze as _analyze, synthesize as _synthesize

    v = np.ascontiguousarray(np.asarray(values)[..., list(info.take)], dtype=np.float64)
    _check_block(v.reshape((-1,) + v.shape[-2:]), 0, pos, v.shape[:-2], where)
    h = _analyze(v, info.grid, lmax=lmax)
    if w is not None:
        h = h.filter(w)
    target = out_info or info
    return np.asarray(_synthesize(h, target.grid))[..., list(target.put)]


def smooth(da: xr.DataArray, *, gaussian_km: float | None = None, cap_deg: float | None = None,
           band: tuple[int, int] | None = None, weights: Sequence[float] | None = None,
           planet_radius_km: float | None = None, lmax: int | None = None) -> xr.DataArray:
    """Isotropic smoothing on the sphere, on the field's own grid.

    Exactly one of ``gaussian_km``, ``cap_deg``, ``band`` or ``weights``.

    Parameters
    ----------
    da : xarray.DataArray
        Gridded field(s).
    gaussian_km : float, optional
        Gaussian kernel whose weight is 1/2 at this distance (km), on a sphere
        of ``planet_radius_km``.
    cap_deg : float, optional
        Average over spherical caps of this angular radius.
    band : (int, int), optional
        ``(L1, L2)``: keep degrees up to L1, roll off smoothly to zero at L2.
    weights : sequence of float, optional
        Per-degree weights W_l (missing degrees get 0).
    planet_radius_km : float, optional
        Radius of the sphere, for ``gaussian_km``.
    lmax : int, optional
        Degree limit of the analysis (default the grid's exact limit).

    Returns
    -------
    xarray.DataArray
        Same shape, coordinates and attributes, float64; a ``history`` note says
        what was done.
    """
    da = _as_dataarray(da)
    info = find_grid(da)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    lmax = _check_lmax(lmax, info.grid, False, where)
    da, pos, names = _prepare_fields(da, info)
    w, how = _filter_weights(lmax, gaussian_km, cap_deg, band, weights, planet_radius_km)
    out = xr.apply_ufunc(
        _scale.task_function(_smooth_np, da), da, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim], []],
        output_core_dims=[[info.lat_dim, info.lon_dim]],
        kwargs={"info": info, "lmax": lmax, "w": w, "where": names},
        dask="parallelized", output_dtypes=[np.float64], keep_attrs=True,
    )
    out = out.transpose(*da.dims)
    out.attrs = dict(da.attrs)
    out.attrs["history"] = _history(da.attrs, f"sphex smooth: {how}, degrees 0..{lmax}")
    return out


def _history(attrs: Mapping[str, Any], line: str) -> str:
    old = str(attrs.get("history", "")).strip()
    return f"{old}\n{line}" if old else line


def regrid(da: xr.DataArray, like: Any, *, lmax: int | None = None) -> xr.DataArray:
    """Spectral regridding of a field onto another grid.

    Parameters
    ----------
    da : xarray.DataArray
        Gridded field(s).
    like : DataArray, Dataset, Grid or str
        Target grid (see :func:`synthesize`).
    lmax : int, optional
        Degree limit; default the smaller exact limit of the two grids.

    Returns
    -------
    xarray.DataArray
        On the target grid, with the non-spatial coordinates and attributes of
        ``da``.
    """
    da = _as_dataarray(da)
    info = find_grid(da)
    tinfo, lat, lon = _target(like)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    if lmax is None:
        lmax = min(info.grid.lmax_exact, tinfo.grid.lmax_exact)
    lmax = _check_lmax(lmax, info.grid, False, where)
    da, pos, names = _prepare_fields(da, info)
    src_dims = {info.lat_dim, info.lon_dim}
    tmp_lat, tmp_lon = "__sphex_lat__", "__sphex_lon__"
    out = xr.apply_ufunc(
        _scale.task_function(_smooth_np, da), da, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim], []],
        output_core_dims=[[tmp_lat, tmp_lon]],
        kwargs={"info": info, "lmax": lmax, "w": None, "out_info": tinfo, "where": names},
        dask="parallelized", output_dtypes=[np.float64],
        dask_gufunc_kwargs={"output_sizes": {tmp_lat: len(lat), tmp_lon: len(lon)}},
        keep_attrs=True,
    )
    out = out.drop_vars([k for k, v in out.coords.items() if set(v.dims) & src_dims], errors="ignore")
    out = out.rename({tmp_lat: tinfo.lat_dim, tmp_lon: tinfo.lon_dim})
    out = out.assign_coords({tinfo.lat_name: lat, tinfo.lon_name: lon})
    out.name = da.name
    out.attrs = dict(da.attrs)
    out.attrs["history"] = _history(
        da.attrs, f"sphex regrid: {info.grid.kind} {info.grid.nlat}x{info.grid.nlon} -> "
        f"{tinfo.grid.kind} {tinfo.grid.nlat}x{tinfo.grid.nlon}, degrees 0..{lmax}")
    return out


# ----------------------------------------------------------------------------
# Spectra
# ----------------------------------------------------------------------------
_SPECTRUM_KINDS = {
    # kind: (function in sphex.spectra, squared units?, description)
    "power": ("degree_power", True,
              "degree power of {f} (contribution of each degree to the area mean of the square)"),
    "per_coefficient": ("power_per_coefficient", True,
                        "power per coefficient of {f} (degree power / (2l+1))"),
    "rms": ("degree_rms", False, "degree RMS amplitude of {f} (square root of the degree power)"),
    "cumulative": ("cumulative_power", True, "cumulative degree power of {f} (degrees 0..l)"),
}


def _power_np(c: np.ndarray, s: np.ndarray, *, conv: Mapping[str, Any], func: str) -> np.ndarray:
    from sphex import spectra

    return np.asarray(getattr(spectra, func)(_harm(c, s, conv)), dtype=np.float64)


def _squared(units: str) -> str:
    return f"({units})^2" if any(ch in units for ch in " /*.^") else f"{units}^2"


def degree_power(obj: xr.Dataset | xr.DataArray | Harmonics, lmax: int | None = None, *,
                 kind: str = "power") -> xr.DataArray:
    """Degree spectrum as a DataArray over ``degree`` (and any extra dims), with units.

    Parameters
    ----------
    obj : coefficient Dataset, Harmonics or gridded DataArray
        A gridded field is analysed first (up to ``lmax``).
    lmax : int, optional
        Degree limit for a gridded input.
    kind : {"power", "per_coefficient", "rms", "cumulative"}
        ``"power"``: the contribution of each degree to the area mean of f^2
        (it sums to that mean; Parseval), from
        :func:`sphex.spectra.degree_power`; ``"per_coefficient"``: that divided
        by 2l+1; ``"rms"``: its square root; ``"cumulative"``: its running sum.

    Returns
    -------
    xarray.DataArray
        In the field's units squared (units for ``"rms"``).
    """
    if kind not in _SPECTRUM_KINDS:
        raise ValueError(f"unknown spectrum kind {kind!r}; choose one of {', '.join(_SPECTRUM_KINDS)}")
    func, squared, text = _SPECTRUM_KINDS[kind]
    if isinstance(obj, xr.DataArray):
        obj = analyze(obj, lmax)
    ds = _check_coefficients(obj)
    conv = _conventions(ds)
    p = xr.apply_ufunc(
        _power_np, ds[COS], ds[SIN],
        input_core_dims=[["degree", "order"], ["degree", "order"]],
        output_core_dims=[["degree"]], kwargs={"conv": conv, "func": func},
        dask="parallelized", output_dtypes=[np.float64], keep_attrs=False,
    )
    p = p.assign_coords(degree=ds["degree"])
    units = conv["units"]
    p.name = "degree_power" if kind == "power" else f"degree_{kind}"
    p.attrs = {"long_name": text.format(f=ds.attrs.get("field_name", "field"))}
    if units:
        p.attrs["units"] = _squared(units) if squared else units
    return p


# ----------------------------------------------------------------------------
# Text tables
# ----------------------------------------------------------------------------
_TABLE_MAGIC = "# sphex coefficient table"


def _is_table(path: str | os.PathLike) -> bool:
    p = Path(path)
    if p.suffix.lower() in (".txt", ".tab", ".dat", ".coef"):
        return True
    try:
        with open(p, "rb") as f:
            return f.read(len(_TABLE_MAGIC)) == _TABLE_MAGIC.encode()
    except OSError:
        return False


def write_table(h: Harmonics, path: str | os.PathLike, *,
                sigma: tuple[np.ndarray, np.ndarray] | None = None, overwrite: bool = False,
                name: str | None = None) -> Path:
    """Write one field's coefficients as a plain text table.

    One row per degree and order (``m <= l``): ``degree order cosine sine``,
    and two more columns with the uncertainties of C and S when ``sigma`` is
    given.  A ``#`` header states the conventions as ``key: value`` lines.
    Numbers have 17 significant digits, so reading back is exact.

    Parameters
    ----------
    h : Harmonics
        Coefficients of a single field (no batch axes).
    path : path-like
        Output file (written atomically).
    sigma : (array, array), optional
        Uncertainties of C and S, each ``(lmax+1, lmax+1)``.
    overwrite : bool
        Replace an existing file.
    name : str, optional
        Field name for the header.

    Returns
    -------
    pathlib.Path
    """
    if isinstance(h, xr.Dataset):
        h = to_harmonics(h)
    if tuple(h.batch_shape):
        raise ValueError(f"a text table holds one field, these coefficients hold "
                         f"{int(np.prod(h.batch_shape))} (batch shape {tuple(h.batch_shape)}); "
                         "write netCDF instead or select one field")
    c, s = (np.asarray(a, dtype=np.float64) for a in h.cos_sin())
    l_idx, m_idx = np.tril_indices(h.lmax + 1)
    cols = [l_idx, m_idx, c[l_idx, m_idx], s[l_idx, m_idx]]
    names = "degree order cosine sine"
    if sigma is not None:
        sc, ss = (np.asarray(a, dtype=np.float64) for a in sigma)
        if sc.shape != c.shape or ss.shape != s.shape:
            raise ValueError(f"sigma arrays must have shape {c.shape}")
        cols += [sc[l_idx, m_idx], ss[l_idx, m_idx]]
        names += " cosine_sigma sine_sigma"
    header = [
        f"{_TABLE_MAGIC}, text form 1",
        f"# normalization: {h.norm}",
        f"# phase_convention: {'condon-shortley' if h.condon_shortley else 'none'}",
        f"# lmax: {h.lmax}",
    ]
    if h.radius is not None:
        header.append(f"# reference_radius_m: {float(h.radius)!r}")
    if h.units is not None:
        header.append(f"# units: {h.units}")
    if name is not None:
        header.append(f"# field_name: {name}")
    header.append(f"# columns: {names}")
    fmt = ["%5d", "%5d"] + ["% .16e"] * (len(cols) - 2)
    with atomic_output(path, overwrite) as tmp:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write("\n".join(header) + "\n")
            np.savetxt(f, np.column_stack(cols).astype(object), fmt=fmt, delimiter=" ")
    return Path(path)


def read_table(path: str | os.PathLike) -> tuple[Harmonics, tuple[np.ndarray, np.ndarray] | None]:
    """Read a text table written by :func:`write_table` (or made by hand the same way).

    Rows may come in any order and degrees/orders left out are 0.  Header
    lines ``# key: value`` give ``normalization`` (default ``orthonormal``),
    ``phase_convention`` (default ``condon-shortley``), ``lmax`` (default the
    highest degree present), ``reference_radius_m`` and ``units``.

    Parameters
    ----------
    path : path-like

    Returns
    -------
    (Harmonics, (sigma_C, sigma_S) or None)

    Raises
    ------
    ValueError
        Malformed rows, order above degree, repeated rows, unknown conventions.
    """
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(f"no such file: {str(p)!r}")
    meta: dict[str, str] = {}
    rows: list[list[float]] = []
    with open(p, encoding="utf-8", errors="replace") as f:
        for i, line in enumerate(f, 1):
            t = line.strip()
            if not t:
                continue
            if t.startswith("#"):
                key, sep, val = t[1:].partition(":")
                if sep:
                    meta[key.strip().lower()] = val.strip()
                continue
            parts = t.replace(",", " ").split()
            if len(parts) not in (4, 6):
                raise ValueError(f"{str(p)!r} line {i}: expected 4 or 6 columns (degree order "
                                 f"cosine sine [sigmas]), found {len(parts)}")
            try:
                rows.append([float(x) for x in parts])
            except ValueError:
                raise ValueError(f"{str(p)!r} line {i}: not a number in {t[:60]!r}") from None
    if not rows:
        raise ValueError(f"{str(p)!r} holds no coefficient rows")
    if len({len(r) for r in rows}) != 1:
        raise ValueError(f"{str(p)!r}: rows mix 4 and 6 columns")
    a = np.array(rows, dtype=np.float64)
    l_idx, m_idx = a[:, 0].astype(int), a[:, 1].astype(int)
    if np.any(a[:, 0] != l_idx) or np.any(a[:, 1] != m_idx) or np.any(m_idx < 0):
        raise ValueError(f"{str(p)!r}: degree and order must be whole numbers >= 0")
    if np.any(m_idx > l_idx):
        raise ValueError(f"{str(p)!r}: a row has order above its degree")
    lmax = int(meta.get("lmax", l_idx.max()))
    if l_idx.max() > lmax:
        raise ValueError(f"{str(p)!r}: rows go to degree {l_idx.max()} but the header says lmax {lmax}")
    key = l_idx * (lmax + 1) + m_idx
    if np.unique(key).size != key.size:
        raise ValueError(f"{str(p)!r}: some degree/order pair appears twice")
    norm = check_norm(meta.get("normalization", "orthonormal"))
    phase = meta.get("phase_convention", "condon-shortley").lower()
    c = np.zeros((lmax + 1, lmax + 1))
    s = np.zeros((lmax + 1, lmax + 1))
    c[l_idx, m_idx] = a[:, 2]
    s[l_idx, m_idx] = a[:, 3]
    radius = meta.get("reference_radius_m")
    conv = {"norm": norm, "condon_shortley": phase not in ("none", "no", "false", "0"),
            "radius": None if radius is None else float(radius), "units": meta.get("units")}
    sigma = None
    if a.shape[1] == 6:
        sc = np.zeros_like(c)
        ss = np.zeros_like(s)
        sc[l_idx, m_idx] = a[:, 4]
        ss[l_idx, m_idx] = a[:, 5]
        sigma = (sc, ss)
    return _harm(c, s, conv), sigma


# ----------------------------------------------------------------------------
# Accessors
# ----------------------------------------------------------------------------
@xr.register_dataarray_accessor("sphex")
class _FieldAccessor:
    """``da.sphex``: spherical-harmonic tools on a gridded DataArray."""

    def __init__(self, da: xr.DataArray) -> None:
        self._da = da

    @property
    def grid(self) -> Grid:
        """The detected :class:`Grid`."""
        return find_grid(self._da).grid

    def analyze(self, lmax: int | None = None, **kwargs: Any) -> xr.Dataset:
        """Coefficients; see :func:`sphex.xr.analyze`."""
        return analyze(self._da, lmax, **kwargs)

    def smooth(self, **kwargs: Any) -> xr.DataArray:
        """Isotropic smoothing; see :func:`sphex.xr.smooth`."""
        return smooth(self._da, **kwargs)

    def regrid(self, like: Any, **kwargs: Any) -> xr.DataArray:
        """Spectral regridding; see :func:`sphex.xr.regrid`."""
        return regrid(self._da, like, **kwargs)

    def degree_power(self, lmax: int | None = None) -> xr.DataArray:
        """Degree power spectrum; see :func:`sphex.xr.degree_power`."""
        return degree_power(self._da, lmax)


@xr.register_dataset_accessor("sphex")
class _CoefficientAccessor:
    """``ds.sphex``: tools on a coefficient Dataset."""

    def __init__(self, ds: xr.Dataset) -> None:
        self._ds = ds

    def synthesize(self, like: Any, **kwargs: Any) -> xr.DataArray:
        """Gridded field(s); see :func:`sphex.xr.synthesize`."""
        return synthesize(self._ds, like, **kwargs)

    def to_harmonics(self) -> Harmonics:
        """A :class:`Harmonics`; see :func:`sphex.xr.to_harmonics`."""
        return to_harmonics(self._ds)

    def degree_power(self) -> xr.DataArray:
        """Degree power spectrum; see :func:`sphex.xr.degree_power`."""
        return degree_power(self._ds)

    def to_netcdf(self, path: str | os.PathLike, overwrite: bool = False) -> Path:
        """Write atomically in sphex's layout; see :func:`sphex.xr.write_harmonics`."""
        return write_harmonics(self._ds, path, overwrite)
