"""The field adapters: gridded DataArrays in, coefficient Datasets or gridded DataArrays out.

:func:`analyze`, :func:`synthesize`, :func:`smooth`, :func:`regrid` and
:func:`degree_power` find the grid of their input (:mod:`sphex.xr.coords`),
hand the spatial part to the numpy core through :func:`xarray.apply_ufunc`
(so extra dimensions such as time, level or member are a batch, and
dask-backed inputs stay lazy, one task per chunk of whole fields; see
:mod:`sphex.xr.scaleout`), and put coordinates and attributes back on the
result.  Coefficients are in the layout of :mod:`sphex.xr.coefficients`.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import replace
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.legendre import check_norm
from sphex.limits import check_memory, whole_number
from sphex.xr import scaleout
from sphex.xr.coefficients import (
    COS, SIN, as_coefficients, finish_coefficient_dataset, harmonics_from_cos_sin, read_conventions,
)
from sphex.xr.coords import GridInfo, analysis_columns, check_lmax, find_grid, synthesis_target
from sphex.xr.least_squares import analyze_observed, check_missing
from sphex.xr.radius import EARTH_RADIUS_KM, radius_from_attributes
from sphex.xr.units import squared_units
from sphex.xr.missing import (
    FieldNames, field_positions, refuse_missing_in_block, refuse_missing_in_memory,
)

__all__ = ["analyze", "synthesize", "smooth", "regrid", "degree_power", "append_history"]


def _progress_step(total: int) -> int:
    """Fields per block when progress is reported: about twenty reports, blocks of 1..64."""
    if total <= 1:
        return 1
    return max(1, min(64, math.ceil(total / 20)))


def _analyze_block(values: np.ndarray, pos: np.ndarray | None = None, *, info: GridInfo,
                   lmax: int, norm: str, cs: bool, allow_aliasing: bool,
                   progress: Callable[[int, int], None] | None,
                   where: FieldNames | None = None, stacked: bool = False
                   ) -> tuple[np.ndarray, np.ndarray] | np.ndarray:
    """Real-form coefficients (C, S) of a block of gridded fields (one apply_ufunc call);
    ``stacked``: as one array ``(2, *batch, lmax+1, lmax+1)`` holding C then S (one dask
    block of :func:`_analyze_chunk`)."""
    from sphex.transform import analyze as _analyze

    values = analysis_columns(np.asarray(values), info.take)
    batch = values.shape[:-2]
    flat = values.reshape((-1,) + values.shape[-2:])
    n = flat.shape[0]
    check_memory(16.0 * n * (lmax + 1) ** 2, f"the coefficients of {n} field{'s' if n != 1 else ''} "
                 f"to degree {lmax}", "use a lower lmax, or stream the fields in chunks")
    both = np.empty((2, n, lmax + 1, lmax + 1))
    c_out, s_out = both[0], both[1]
    step = _progress_step(n) if progress else max(n, 1)
    kw = {"allow_aliasing": True} if allow_aliasing else {}
    for i in range(0, n, step):
        block = np.ascontiguousarray(flat[i:i + step], dtype=np.float64)
        try:
            h = _analyze(block, info.grid, lmax=lmax, norm=norm, condon_shortley=cs, **kw)
        except ValueError as exc:
            failed: ValueError | None = exc
        else:
            failed = None
        if failed is not None:
            # the transform refuses NaN and inf in the passes it makes over the values
            # anyway; only then are the fields that hold them found and named
            refuse_missing_in_block(block, i, pos, batch, where)
            raise failed
        h.cos_sin(out=(c_out[i:i + step], s_out[i:i + step]))  # straight into the block's output
        if progress:
            progress(min(i + step, n), n)
    shape = batch + (lmax + 1, lmax + 1)
    if stacked:
        return both.reshape((2,) + shape)
    return c_out.reshape(shape), s_out.reshape(shape)


def _analyze_chunk(values: np.ndarray, pos: np.ndarray | None = None, **kwargs: Any
                   ) -> np.ndarray:
    """One dask task of :func:`_analyze_lazily`: C and S of a chunk, stacked."""
    return _analyze_block(values, pos, stacked=True, progress=None, **kwargs)


def _analyze_lazily(da: xr.DataArray, pos: xr.DataArray, info: GridInfo, lmax: int,
                    **kwargs: Any) -> tuple[xr.DataArray, xr.DataArray]:
    """C and S of dask-backed fields: one task per chunk, which gets the chunk as read.

    ``apply_ufunc`` (dask's ``apply_gufunc``) would copy every chunk first: dask
    concatenates the blocks of the core dimensions a function consumes, even a single
    block, into a new array.  Here latitude and longitude become degree and order in
    place (the same block index), so nothing is concatenated, and C and S travel as the
    two halves of one block."""
    import dask.array as dsa

    core = (info.lat_dim, info.lon_dim)
    da = da.transpose(..., *core)
    others = tuple(da.dims[:-2])
    letters = "abcdefghijklmnopqrst"
    if len(others) > len(letters):
        raise ValueError(f"{da.name!r} has {len(others)} non-spatial dimensions; at most "
                         f"{len(letters)} are supported")
    batch = letters[:len(others)]
    args: list[Any] = [da.data, batch + "uv"]
    if others:
        args += [pos.transpose(*others).data, batch]
    else:
        args += [np.asarray(pos.values), None]
    n = lmax + 1
    both = dsa.blockwise(scaleout.in_tasks(_analyze_chunk), "w" + batch + "uv", *args,
                         new_axes={"w": 2}, adjust_chunks={"u": n, "v": n}, dtype=np.float64,
                         meta=np.empty((0,) * (len(others) + 3)), info=info, lmax=lmax,
                         **kwargs)
    coords = {k: v for k, v in da.coords.items() if not set(v.dims) & set(core)}
    dims = others + ("degree", "order")
    return (xr.DataArray(both[0], dims=dims, coords=coords),
            xr.DataArray(both[1], dims=dims, coords=coords))


def _single_dataarray(da: Any) -> xr.DataArray:
    """``da`` itself, or the one gridded variable of a Dataset."""
    if isinstance(da, xr.Dataset):
        gridded = [k for k, v in da.data_vars.items() if _has_grid(v)]
        if len(gridded) == 1:
            return da[gridded[0]]
        raise ValueError(f"the Dataset holds {len(gridded)} gridded variables "
                         f"({', '.join(map(str, gridded)) or 'none'}); pick one: ds['name']")
    if not isinstance(da, xr.DataArray):
        raise TypeError(f"expected an xarray.DataArray, not {type(da).__name__}")
    return da


def _has_grid(da: xr.DataArray) -> bool:
    try:
        find_grid(da)
    except ValueError:
        return False
    return True


def refuse_non_real(da: xr.DataArray) -> None:
    """Raise a ValueError for a complex or non-numeric field (xarray would drop the
    imaginary part of a complex one with only a warning)."""
    kind = da.dtype.kind
    if kind in "fiu":
        return
    name = repr(da.name) if da.name is not None else "the field"
    parts = set(da.dtype.names or ())
    if kind == "c" or (kind == "V" and parts in ({"r", "i"}, {"real", "imag"})):
        # netCDF stores complex numbers as a compound of real and imaginary parts
        raise ValueError(f"{name} is complex; sphex analyses real fields: analyse "
                         "the real and imaginary parts as two fields (da.real and da.imag, or "
                         "two real variables in the file)")
    raise ValueError(f"{name} holds {da.dtype} values, not numbers; a spherical-harmonic "
                     "analysis needs a real numeric field (convert it with da.astype(float))")


def _prepare_fields(da: xr.DataArray, info: GridInfo
                    ) -> tuple[xr.DataArray, xr.DataArray, FieldNames | None]:
    """What every gridded adapter does before its apply_ufunc: refuse missing
    values (in memory), give each dask chunk whole fields, and hand out the
    field positions and namer its tasks report missing values with."""
    core = (info.lat_dim, info.lon_dim)
    refuse_non_real(da)
    refuse_missing_in_memory(da, core)
    da = scaleout.whole_fields(da, core)
    pos, names = field_positions(da, core)
    return da, pos, names


def analyze(da: xr.DataArray, lmax: int | None = None, *, norm: str = "orthonormal",
            condon_shortley: bool = True, radius: float | None = None,
            allow_aliasing: bool = False,
            progress: Callable[[int, int], None] | None = None, missing: str = "raise",
            damping: float = 0.0, prior: Any = None) -> xr.Dataset:
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
        input only); with ``missing="fit"`` as the fits proceed, counted in
        hundredths of a field.
    missing : {"raise", "fit"}
        What to do with missing values (NaN): ``"raise"`` refuses them with a
        ValueError naming the fields; ``"fit"`` estimates each field's
        coefficients from its observed cells by regularised least squares
        (:func:`sphex.least_squares.fit_masked`; nothing is filled, the input
        is computed in memory) and records the residual RMS, iterations,
        condition estimate and observed fraction in ``fit_*`` attributes.
    damping, prior
        Regularisation of ``missing="fit"`` (see
        :func:`sphex.points.fit`): needed when the gaps are large enough
        for functions of degree ``<= lmax`` to hide in them.

    Returns
    -------
    xarray.Dataset
        ``cos_coef`` and ``sin_coef`` over ``(*other_dims, degree, order)`` with
        the non-spatial coordinates of ``da`` and attributes stating the
        conventions (module docstring).

    Raises
    ------
    ValueError
        No usable grid, ``lmax`` too high, unknown ``norm``, missing values
        (with ``missing="raise"``), an unknown ``missing``.

    Warns
    -----
    IllPosedWarning
        With ``missing="fit"``, when the observed cells leave combinations of
        coefficients undetermined (add damping or lower ``lmax``).
    """
    da = _single_dataarray(da)
    check_norm(norm)
    info = find_grid(da)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    lmax = check_lmax(lmax, info.grid, allow_aliasing, where)
    check_missing(missing, damping, prior)
    if missing == "fit":
        return analyze_observed(da, info, lmax, norm=norm, condon_shortley=condon_shortley,
                                radius=radius, damping=damping, prior=prior, progress=progress)
    da, pos, names = _prepare_fields(da, info)
    n = lmax + 1
    opts = {"norm": norm, "cs": bool(condon_shortley), "allow_aliasing": allow_aliasing,
            "where": names}
    if da.chunks is None:
        c, s = xr.apply_ufunc(
            _analyze_block, da, pos,
            input_core_dims=[[info.lat_dim, info.lon_dim], []],
            output_core_dims=[["degree", "order"], ["degree", "order"]],
            kwargs={"info": info, "lmax": lmax, "progress": progress, **opts},
            keep_attrs=False,
        )
    else:
        c, s = _analyze_lazily(da, pos, info, lmax, **opts)
    units = da.attrs.get("units")
    label = str(da.name) if da.name is not None else "field"
    var_attrs = {"units": str(units)} if units is not None else {}
    ds = xr.Dataset({
        COS: c.assign_attrs(long_name=f"cosine coefficient C_lm of {label}", **var_attrs),
        SIN: s.assign_attrs(long_name=f"sine coefficient S_lm of {label}", **var_attrs),
    })
    return finish_coefficient_dataset(ds, lmax, norm, bool(condon_shortley), radius,
                                      None if units is None else str(units),
                                      None if da.name is None else str(da.name), da.attrs)


def _synthesize_block(c: np.ndarray, s: np.ndarray, *, conv: Mapping[str, Any],
                      lmax: int | None, info: GridInfo,
                      progress: Callable[[int, int], None] | None = None) -> np.ndarray:
    """Gridded fields of a block of real-form coefficients (one apply_ufunc call);
    ``progress(done, total)`` is called as groups of fields finish."""
    from sphex.transform import synthesize as _synthesize

    h = harmonics_from_cos_sin(c, s, conv)
    if lmax is not None and lmax < h.lmax:
        h = h.truncate(lmax)
    if not progress or not h.batch_shape:
        out = np.asarray(_synthesize(h, info.grid))[..., list(info.put)]
        if progress:
            progress(1, 1)
        return out
    batch = tuple(h.batch_shape)
    coef = np.asarray(h.coef).reshape((-1,) + np.asarray(h.coef).shape[-2:])
    n = coef.shape[0]
    out = np.empty((n, info.grid.nlat, len(info.put)))
    step = _progress_step(n)
    for i in range(0, n, step):
        part = np.asarray(_synthesize(h.replace(coef=coef[i:i + step]), info.grid))
        out[i:i + step] = part[..., list(info.put)]
        progress(min(i + step, n), n)
    return out.reshape(batch + out.shape[-2:])


def _source_attributes(ds: xr.Dataset) -> dict[str, Any]:
    """The analysed field's attributes, from the ``field_`` attributes of a coefficient Dataset."""
    out = {k[len("field_"):]: v for k, v in ds.attrs.items()
           if k.startswith("field_") and k != "field_name"}
    if "units" in ds.attrs:
        out["units"] = ds.attrs["units"]
    return out


def synthesize(ds: xr.Dataset | Harmonics, like: Any, *, lmax: int | None = None,
               progress: Callable[[int, int], None] | None = None) -> xr.DataArray:
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
    progress : callable, optional
        ``progress(done, total)`` called as groups of fields finish
        (numpy-backed coefficients only).

    Returns
    -------
    xarray.DataArray
        Named after the analysed field, with its attributes, the extra
        dimensions of ``ds`` and the target's latitude/longitude coordinates.
    """
    ds = as_coefficients(ds)
    conv = read_conventions(ds)
    info, lat, lon = synthesis_target(like)
    l_file = ds.sizes["degree"] - 1
    if lmax is not None and not whole_number(lmax, "lmax") <= l_file:
        raise ValueError(f"lmax {lmax} is outside the coefficients' range 0..{l_file}")
    ds = scaleout.whole_fields(ds, ("degree", "order"))
    out = xr.apply_ufunc(
        scaleout.task_function(_synthesize_block, ds), ds[COS], ds[SIN],
        input_core_dims=[["degree", "order"], ["degree", "order"]],
        output_core_dims=[[info.lat_dim, info.lon_dim]],
        kwargs={"conv": conv, "lmax": None if lmax is None else int(lmax), "info": info,
                "progress": progress if isinstance(ds[COS].data, np.ndarray) else None},
        dask="parallelized", output_dtypes=[np.float64],
        dask_gufunc_kwargs={"output_sizes": {info.lat_dim: len(lat), info.lon_dim: len(lon)}},
        keep_attrs=False,
    )
    out = out.assign_coords({info.lat_name: lat, info.lon_name: lon})
    out.name = ds.attrs.get("field_name")
    out.attrs = _source_attributes(ds)
    return out


def _smoothing_weights(lmax: int, gaussian_km: float | None, cap_deg: float | None,
                       band: tuple[int, int] | None, weights: Sequence[float] | None,
                       planet_radius_km: float | None) -> tuple[np.ndarray, str]:
    """Per-degree weights 0..lmax of the one smoothing asked for, and a line saying what it is."""
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
        if len(band) != 2:
            raise ValueError(f"band must be two degrees (L1, L2), not {band!r}")
        l1, l2 = whole_number(band[0], "band L1"), whole_number(band[1], "band L2")
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


def _resynthesize_block(values: np.ndarray, pos: np.ndarray | None = None, *, info: GridInfo,
                        lmax: int, w: np.ndarray | None, out_info: GridInfo | None = None,
                        where: FieldNames | None = None,
                        progress: Callable[[int, int], None] | None = None) -> np.ndarray:
    """Analyse a block of fields, weight each degree by ``w`` (if given) and synthesise
    on ``out_info``'s grid (default the same grid); ``progress(done, total)`` is called as
    groups of fields finish."""
    from sphex.transform import analyze as _analyze, synthesize as _synthesize

    v = analysis_columns(np.asarray(values), info.take)
    batch = v.shape[:-2]
    flat = v.reshape((-1,) + v.shape[-2:])
    n = flat.shape[0]
    target = out_info or info
    out = np.empty((n, target.grid.nlat, len(target.put)))
    step = _progress_step(n) if progress else max(n, 1)
    for i in range(0, n, step):
        block = np.ascontiguousarray(flat[i:i + step], dtype=np.float64)
        refuse_missing_in_block(block, i, pos, batch, where)
        h = _analyze(block, info.grid, lmax=lmax)
        if w is not None:
            h = h.filter(w)
        out[i:i + step] = np.asarray(_synthesize(h, target.grid))[..., list(target.put)]
        if progress:
            progress(min(i + step, n), n)
    return out.reshape(batch + out.shape[-2:])


def smooth(da: xr.DataArray, *, gaussian_km: float | None = None, cap_deg: float | None = None,
           band: tuple[int, int] | None = None, weights: Sequence[float] | None = None,
           planet_radius_km: float | None = None, lmax: int | None = None,
           progress: Callable[[int, int], None] | None = None) -> xr.DataArray:
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
        Radius of the sphere in km, for ``gaussian_km``.  Default: the
        ``planet_radius_km`` attribute of ``da`` (or, when ``da`` is a
        Dataset, of the Dataset), else Earth's mean radius 6371 km with a
        warning that says so.  The command line reads the same attributes and
        makes the same assumption.
    lmax : int, optional
        Degree limit of the analysis (default the grid's exact limit).
    progress : callable, optional
        ``progress(done, total)`` called as groups of fields finish
        (numpy-backed input only).

    Returns
    -------
    xarray.DataArray
        Same shape, coordinates and attributes, float64; a ``history`` note says
        what was done.
    """
    outer = dict(da.attrs) if isinstance(da, xr.Dataset) else {}
    da = _single_dataarray(da)
    info = find_grid(da)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    lmax = check_lmax(lmax, info.grid, False, where)
    if gaussian_km is not None and planet_radius_km is None:
        planet_radius_km = _default_radius_km(da.attrs, outer)
    da, pos, names = _prepare_fields(da, info)
    w, how = _smoothing_weights(lmax, gaussian_km, cap_deg, band, weights, planet_radius_km)
    out = xr.apply_ufunc(
        scaleout.task_function(_resynthesize_block, da), da, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim], []],
        output_core_dims=[[info.lat_dim, info.lon_dim]],
        kwargs={"info": info, "lmax": lmax, "w": w, "where": names,
                "progress": progress if isinstance(da.data, np.ndarray) else None},
        dask="parallelized", output_dtypes=[np.float64], keep_attrs=True,
    )
    out = out.transpose(*da.dims)
    out.attrs = dict(da.attrs)
    out.attrs["history"] = append_history(da.attrs, f"sphex smooth: {how}, degrees 0..{lmax}")
    return out


def _default_radius_km(attrs: Mapping[str, Any], outer: Mapping[str, Any]) -> float:
    """The sphere's radius (km) from the attributes, else Earth's with a warning."""
    found = radius_from_attributes(("the variable's", attrs), ("the Dataset's", outer))
    if found is not None:
        return found[0]
    warnings.warn(f"no planet_radius_km given and none in the attributes: assumed Earth's mean "
                  f"radius {EARTH_RADIUS_KM:g} km; pass planet_radius_km= for another sphere",
                  UserWarning, stacklevel=3)
    return EARTH_RADIUS_KM


def append_history(attrs: Mapping[str, Any], line: str) -> str:
    """The ``history`` attribute of ``attrs`` with ``line`` added at the end."""
    old = str(attrs.get("history", "")).strip()
    return f"{old}\n{line}" if old else line


def regrid(da: xr.DataArray, like: Any, *, lmax: int | None = None,
           progress: Callable[[int, int], None] | None = None) -> xr.DataArray:
    """Spectral regridding of a field onto another grid.

    Parameters
    ----------
    da : xarray.DataArray
        Gridded field(s).
    like : DataArray, Dataset, Grid or str
        Target grid (see :func:`synthesize`).
    lmax : int, optional
        Degree limit; default the smaller exact limit of the two grids.  It may
        exceed the target's exact limit (the values at the target's points
        are right; re-analysing that grid would alias the degrees above it).
    progress : callable, optional
        ``progress(done, total)`` called as groups of fields finish
        (numpy-backed input only).

    Returns
    -------
    xarray.DataArray
        On the target grid, with the non-spatial coordinates and attributes of
        ``da``.  For a target given as a :class:`Grid` or a grid text, the
        latitude and longitude keep the source's names and attributes
        (``latitude``/``longitude`` stay so); a target given by coordinates
        brings its own.
    """
    da = _single_dataarray(da)
    info = find_grid(da)
    tinfo, lat, lon = synthesis_target(like)
    where = f"variable {da.name!r}" if da.name is not None else "the field"
    if lmax is None:
        lmax = min(info.grid.lmax_exact, tinfo.grid.lmax_exact)
    lmax = check_lmax(lmax, info.grid, False, where)
    da, pos, names = _prepare_fields(da, info)
    src_dims = {info.lat_dim, info.lon_dim}
    tmp_lat, tmp_lon = "__sphex_lat__", "__sphex_lon__"
    out = xr.apply_ufunc(
        scaleout.task_function(_resynthesize_block, da), da, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim], []],
        output_core_dims=[[tmp_lat, tmp_lon]],
        kwargs={"info": info, "lmax": lmax, "w": None, "out_info": tinfo, "where": names,
                "progress": progress if isinstance(da.data, np.ndarray) else None},
        dask="parallelized", output_dtypes=[np.float64],
        dask_gufunc_kwargs={"output_sizes": {tmp_lat: len(lat), tmp_lon: len(lon)}},
        keep_attrs=True,
    )
    out = out.drop_vars([k for k, v in out.coords.items() if set(v.dims) & src_dims], errors="ignore")
    if isinstance(like, (str, Grid)):
        lat, lon = _source_named(lat, da[info.lat_name]), _source_named(lon, da[info.lon_name])
        tinfo = replace(tinfo, lat_dim=info.lat_dim, lon_dim=info.lon_dim, lat_name=info.lat_name,
                        lon_name=info.lon_name)
    out = out.rename({tmp_lat: tinfo.lat_dim, tmp_lon: tinfo.lon_dim})
    out = out.assign_coords({tinfo.lat_name: lat, tinfo.lon_name: lon})
    out.name = da.name
    out.attrs = dict(da.attrs)
    out.attrs["history"] = append_history(
        da.attrs, f"sphex regrid: {info.grid.kind} {info.grid.nlat}x{info.grid.nlon} -> "
        f"{tinfo.grid.kind} {tinfo.grid.nlat}x{tinfo.grid.nlon}, degrees 0..{lmax}")
    return out


#: Coordinate attributes that describe the source's values and do not carry over.
_VALUE_ATTRIBUTES = ("bounds", "valid_min", "valid_max", "valid_range", "actual_range")


def _source_named(new: Any, source: xr.DataArray) -> xr.Variable:
    """The new coordinate values on the source coordinate's dimension, with the source's
    attributes over the new ones (CF units and standard name)."""
    attrs = dict(getattr(new, "attrs", {}))
    attrs.update({k: v for k, v in source.attrs.items() if k not in _VALUE_ATTRIBUTES})
    return xr.Variable(source.dims, np.asarray(new.values, dtype=np.float64), attrs)


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


def _spectrum_block(c: np.ndarray, s: np.ndarray, *, conv: Mapping[str, Any],
                    func: str) -> np.ndarray:
    """``sphex.spectra.<func>`` of a block of real-form coefficients (one apply_ufunc call)."""
    from sphex import spectra

    return np.asarray(getattr(spectra, func)(harmonics_from_cos_sin(c, s, conv)), dtype=np.float64)


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
    ds = as_coefficients(obj)
    conv = read_conventions(ds)
    p = xr.apply_ufunc(
        _spectrum_block, ds[COS], ds[SIN],
        input_core_dims=[["degree", "order"], ["degree", "order"]],
        output_core_dims=[["degree"]], kwargs={"conv": conv, "func": func},
        dask="parallelized", output_dtypes=[np.float64], keep_attrs=False,
    )
    p = p.assign_coords(degree=ds["degree"])
    units = conv["units"]
    p.name = "degree_power" if kind == "power" else f"degree_{kind}"
    p.attrs = {"long_name": text.format(f=ds.attrs.get("field_name", "field"))}
    if units:
        p.attrs["units"] = squared_units(units) if squared else units
    return p
