"""Finding the latitude-longitude grid of xarray objects from their coordinates.

Latitude and longitude are recognised by CF attributes or by name
(:func:`find_grid`); the coordinates are matched to a :class:`~sphex.grids.Grid`
and the longitude columns mapped to it (any origin, either direction, an
optional repeated seam column).  :func:`parse_grid` reads the short text form
of a grid, :func:`synthesis_target` turns any grid description into the grid
and coordinates of a synthesis, and :func:`check_lmax` holds a degree limit
against a grid's exact limit.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from sphex.grids import Grid
from sphex.limits import whole_number

__all__ = ["GridInfo", "find_grid", "parse_grid", "is_grid_text", "choose_variable", "synthesis_target",
           "check_lmax", "one_line", "GRID_WORDS", "analysis_columns"]

_LAYOUTS = {"poles", "cells", "north"}
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
        order = "north to south" if g.north_first else "south to north"
        seam = ", repeated seam column dropped" if self.seam else ""
        return (f"{g.nlat} x {g.nlon} {g.kind} grid ({order}, longitudes from "
                f"{float(g.lon[0]):g} deg{seam}), exact to degree {g.lmax_exact}")


def _attribute_text(coord: xr.DataArray, key: str) -> str:
    v = coord.attrs.get(key, "")
    return str(v).strip().lower() if v is not None else ""


def _axis_candidates(da: xr.DataArray | xr.Dataset, which: str) -> list[str]:
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
        if _attribute_text(c, "standard_name") == std:
            score = 4
        elif _attribute_text(c, "units") in units:
            score = 3
        elif _attribute_text(c, "axis") == axis and "degree" in _attribute_text(c, "units"):
            score = 2
        elif str(name).lower() in names:
            score = 1
        if score:
            scored.append((-score, i, str(name)))
    return [name for _, _, name in sorted(scored)]


def _longitude_plan(lon: np.ndarray) -> tuple[np.ndarray, tuple[int, ...], tuple[int, ...], bool]:
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


def analysis_columns(values: np.ndarray, take: tuple[int, ...]) -> np.ndarray:
    """``values[..., take]``: a view where ``take`` is a run of columns, forward or
    backward (every grid :func:`find_grid` accepts), else a copy.

    The view spares each streamed chunk a gather of all its values (about a fifth of
    the transform's own time at L=255); callers copy it when they need it contiguous.
    """
    n = len(take)
    first = take[0] if n else 0
    if take == tuple(range(first, first + n)):
        return values[..., first:first + n]
    if take == tuple(range(first, first - n, -1)):
        stop = first - n
        return values[..., first:(None if stop < 0 else stop):-1]
    return values[..., list(take)]


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
    lats, lons = _axis_candidates(da, "lat"), _axis_candidates(da, "lon")
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
    lon_a, take, put, seam = _longitude_plan(lon)
    try:
        grid = Grid.from_coords(lat, lon_a)
    except ValueError as exc:
        raise ValueError(f"{where}: {one_line(exc)}") from None
    return GridInfo(grid, lat_dim, lon_dim, str(lat_name), str(lon_name), take, put, seam)


def one_line(exc: BaseException) -> str:
    """The message of ``exc`` on one line (for errors that quote another error)."""
    return " ".join(str(exc).split())


#: Spellings of the Gauss-Legendre grid's kind in grid texts.
GAUSS_WORDS = ("gauss", "gaussian")
#: The first word of every grid text.
GRID_WORDS = GAUSS_WORDS + ("equiangular",)
_GRID_HINT = ("write gauss:LMAX (or gaussian:LMAX), equiangular:NLATxNLON:LAYOUT (latitudes "
              "first; LAYOUT poles, cells or north) or equiangular:SPACINGdeg[:LAYOUT] (layout "
              "poles unless given)")


def parse_grid(spec: str) -> Grid:
    """Make a Grid from a short text form.

    Parameters
    ----------
    spec : str
        ``"gauss:LMAX"`` or ``"gaussian:LMAX"`` (Gauss-Legendre grid exact to
        degree LMAX); ``"equiangular:NLATxNLON:LAYOUT"`` with LAYOUT
        ``poles``, ``cells`` or ``north`` (the latitude count first); or
        ``"equiangular:SPACINGdeg"`` / ``"equiangular:SPACINGdeg:LAYOUT"``, a
        grid spacing that divides 180 degrees, in the ``poles`` layout unless
        another is given (``equiangular:2.5deg`` is 73 x 144 with both poles,
        ``equiangular:2.5deg:cells`` 72 x 144 cell centres).

    Returns
    -------
    Grid

    Raises
    ------
    ValueError
        If the text does not have one of these forms, or gives fewer
        longitudes than latitudes (the sizes swapped: NLONxNLAT).

    Examples
    --------
    >>> parse_grid("gauss:31").nlat
    32
    >>> parse_grid("equiangular:90x180:cells").kind
    'equiangular-cells'
    >>> parse_grid("equiangular:2.5deg").shape
    (73, 144)
    """
    parts = [p.strip() for p in spec.strip().split(":")]
    kind = parts[0].lower()
    if kind in GAUSS_WORDS and len(parts) == 2 and parts[1].isdigit():
        return Grid.gauss(int(parts[1]))
    if kind == "equiangular" and len(parts) in (2, 3):
        layout = parts[2].lower() if len(parts) == 3 else None
        if layout is not None and layout not in _LAYOUTS:
            raise ValueError(f"unknown layout {parts[2]!r} in grid {spec!r}; {_GRID_HINT}")
        size = parts[1].lower()
        if size.endswith(("deg", "degrees", "degree", "\u00b0")):
            return _grid_of_spacing(spec, size, layout or "poles")
        nlat_s, sep, nlon_s = size.partition("x")
        if sep and nlat_s.isdigit() and nlon_s.isdigit() and layout is not None:
            nlat, nlon = int(nlat_s), int(nlon_s)
            if nlat >= 2 and nlon >= 1:
                if nlon < nlat:
                    raise ValueError(
                        f"grid {spec!r} has fewer longitudes ({nlon}) than latitudes ({nlat}); "
                        f"the sizes are NLATxNLON, latitudes first: did you mean "
                        f"equiangular:{nlon}x{nlat}:{layout}?")
                return Grid.equiangular(nlat, nlon, layout)
    raise ValueError(f"cannot read grid {spec!r}; {_GRID_HINT}")


def _grid_of_spacing(spec: str, size: str, layout: str) -> Grid:
    """The equiangular grid of a spacing such as ``2.5deg`` in ``layout``."""
    number = size.rstrip("degrees\u00b0 ")
    try:
        step = float(number)
    except ValueError:
        raise ValueError(f"cannot read the spacing {size!r} in grid {spec!r}; {_GRID_HINT}") from None
    bands = 180.0 / step if step > 0 else float("nan")
    if not (step > 0 and abs(bands - round(bands)) < 1e-9 and round(bands) >= 1):
        raise ValueError(f"grid {spec!r}: a spacing of {number} degrees does not divide 180 "
                         "degrees; choose one that does (for example 0.25deg, 1deg, 2.5deg)")
    n = int(round(bands))
    return Grid.equiangular(n + 1 if layout == "poles" else n, 2 * n, layout)


def is_grid_text(spec: str) -> bool:
    """Whether ``spec`` is meant as a grid text (its first word is a grid kind)."""
    return ":" in spec and spec.split(":", 1)[0].strip().lower() in GRID_WORDS


def _looks_like_field(da: xr.DataArray, bounds: set[str]) -> bool:
    """At least two dimensions, and not the bounds of a coordinate."""
    name = str(da.name)
    return da.ndim >= 2 and name not in bounds and not name.endswith(("_bnds", "_bounds"))


def choose_variable(ds: xr.Dataset, var: str | None, where: str,
                    how_to_choose: str = "choose one with -v") -> str:
    """The name of the variable to work on: ``var``, or the file's only usable one.

    Parameters
    ----------
    ds : xarray.Dataset
    var : str or None
        The variable asked for (None: the only variable on a usable grid).
    where : str
        What ``ds`` is, for messages (a file name).
    how_to_choose : str
        How the caller names a variable, for messages.

    Returns
    -------
    str

    Raises
    ------
    ValueError
        ``var`` is not in ``ds``; several variables are usable; none is. When
        exactly one variable looks like a field (two or more dimensions, not
        coordinate bounds), the message is that variable's own reason.
    """
    listed = ", ".join(map(str, ds.data_vars)) or "none"
    if var is not None:
        if var not in ds.data_vars:
            raise ValueError(f"{where} has no variable {var!r} (variables: {listed})")
        return var
    usable, reasons = [], {}
    for name, v in ds.data_vars.items():
        try:
            find_grid(v)
        except ValueError as exc:
            reasons[str(name)] = one_line(exc)
            continue
        usable.append(str(name))
    if len(usable) == 1:
        return usable[0]
    if usable:
        raise ValueError(f"{where} has {len(usable)} variables on a usable grid "
                         f"({', '.join(usable)}); {how_to_choose}")
    bounds = {str(c.attrs["bounds"]) for c in ds.coords.values() if "bounds" in c.attrs}
    fields = [n for n in reasons if _looks_like_field(ds[n], bounds)]
    if len(fields) == 1:
        raise ValueError(f"{where}: {reasons[fields[0]]}")
    if not fields:
        raise ValueError(f"{where} holds no field on a latitude-longitude grid "
                         f"(variables: {listed})")
    raise ValueError(f"{where}: no variable is on a usable global grid: "
                     + "; ".join(reasons[n] for n in fields))


def _coordinate_variables(grid: Grid) -> tuple[xr.DataArray, xr.DataArray]:
    lat = xr.DataArray(np.asarray(grid.lat, dtype=np.float64), dims=("lat",),
                       attrs={"standard_name": "latitude", "long_name": "latitude",
                              "units": "degrees_north"})
    lon = xr.DataArray(np.asarray(grid.lon, dtype=np.float64), dims=("lon",),
                       attrs={"standard_name": "longitude", "long_name": "longitude",
                              "units": "degrees_east"})
    return lat, lon


def synthesis_target(like: Any) -> tuple[GridInfo, xr.DataArray, xr.DataArray]:
    """The grid and coordinate variables of a synthesis target.

    Parameters
    ----------
    like : DataArray, Dataset, Grid or str
        An object whose latitude/longitude coordinates define the grid, a
        :class:`Grid`, or a grid text for :func:`parse_grid`.

    Returns
    -------
    (GridInfo, latitude variable, longitude variable)

    Raises
    ------
    ValueError, TypeError
        An unusable grid or grid text; an object of another type.
    """
    if isinstance(like, str):
        like = parse_grid(like)
    if isinstance(like, Grid):
        lat, lon = _coordinate_variables(like)
        n = like.nlon
        info = GridInfo(like, "lat", "lon", "lat", "lon", tuple(range(n)), tuple(range(n)), False)
        return info, lat, lon
    if isinstance(like, (xr.DataArray, xr.Dataset)):
        info = find_grid(like)
        return info, like.coords[info.lat_name].variable, like.coords[info.lon_name].variable
    raise TypeError(f"like must be a DataArray, Dataset, Grid or grid text, not {type(like).__name__}")


def check_lmax(lmax: int | None, grid: Grid, allow_aliasing: bool, where: str) -> int:
    """The degree limit to use on ``grid``: ``lmax``, or the grid's exact limit when None.

    Parameters
    ----------
    lmax : int or None
    grid : Grid
    allow_aliasing : bool
        Accept ``lmax`` above the grid's exact limit.
    where : str
        What the grid belongs to, for the message (``"variable 'topo'"``).

    Returns
    -------
    int

    Raises
    ------
    ValueError
        ``lmax`` not a whole number >= 0 (2.5, NaN, inf are refused, not rounded), or
        above the exact limit without ``allow_aliasing``.
    """
    if lmax is None:
        return int(grid.lmax_exact)
    lmax = whole_number(lmax, "lmax")
    if lmax > grid.lmax_exact and not allow_aliasing:
        raise ValueError(
            f"lmax {lmax} is above the exact limit {grid.lmax_exact} of the {grid.nlat} x "
            f"{grid.nlon} {grid.kind} grid of {where}; use lmax <= {grid.lmax_exact}"
        )
    return lmax
