"""Winds and currents as xarray: streamfunction, velocity potential, vorticity, divergence.

The adapters of :mod:`sphex.flow` for gridded DataArrays.  They take the
eastward and northward components ``u`` and ``v`` of a tangent vector field
(a wind or a current) on one latitude-longitude grid, find the grid
(:mod:`sphex.xr.coords`), hand the spatial part to the numpy core through
:func:`xarray.apply_ufunc` (extra dimensions such as time, level or member
are a batch; dask-backed inputs stay lazy, one task per chunk of whole
fields) and put coordinates and attributes back on the result:

- :func:`analyze_flow`: the coefficients of ``psi`` and ``chi`` as one
  coefficient Dataset in the layout of :mod:`sphex.xr.coefficients`, with a
  dimension ``potential`` (``"psi"``, ``"chi"``) in front: two fields of the
  scalar layout, so every scalar tool (synthesis, spectra, files) reads it;
  :func:`to_flow` and :func:`from_flow` convert to and from
  :class:`sphex.flow.Flow`; :func:`kinetic_energy` gives its energy spectrum;
- :func:`flow_fields`: vorticity, divergence, streamfunction, velocity
  potential and the rotational and divergent components on the grid;
- :func:`regrid_flow` and :func:`smooth_flow`: a wind field moved to another
  grid or smoothed through ``psi`` and ``chi``, never component by component.

The checks of the two components, the radius, the units and the CF standard
names are in :mod:`sphex.xr.flow_components`.

The radius
----------
Vorticity, divergence, ``psi`` and ``chi`` need the sphere's radius.  It is
``radius=`` (metres) when given, else the components' ``planet_radius_km`` or
``sphere_radius_km`` attribute (km; the attribute the scalar tools read) or
``reference_radius`` (metres), else Earth's mean radius, 6371.0088 km (the
IUGG mean radius R1 = (2a + b)/3 of the GRS80 ellipsoid), with a
:class:`RadiusAssumedWarning` that says so.  For components in m s-1 the
results are then in s-1 (vorticity, divergence), m2 s-1 (``psi``, ``chi``)
and m2 s-2 (kinetic energy per unit mass).
"""
from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr

from sphex.legendre import check_norm
from sphex.xr import scaleout
from sphex.xr.coefficients import (
    COS, SIN, as_coefficients, finish_coefficient_dataset, from_harmonics, harmonics_from_cos_sin,
    read_conventions, to_harmonics,
)
from sphex.xr.coords import GridInfo, check_lmax, synthesis_target
from sphex.xr.fields import _smoothing_weights, append_history
from sphex.xr.flow_components import (
    DIAGNOSTIC_STANDARD_NAMES, EARTH_MEAN_RADIUS_M, RadiusAssumedWarning, component_pair,
    components_of_block, components_units, derived_units, flow_medium, flow_radius, prepare_pair,
)

__all__ = ["EARTH_MEAN_RADIUS_M", "POTENTIAL", "RadiusAssumedWarning", "flow_radius",
           "analyze_flow", "to_flow", "from_flow", "kinetic_energy", "flow_fields",
           "regrid_flow", "smooth_flow"]

#: The dimension of a flow coefficient Dataset that holds ``"psi"`` and ``"chi"``.
POTENTIAL = "potential"
_POTENTIALS = ("psi", "chi")
_FLOW_NAME = "flow_potential"
_CONVENTION = ("u = -(1/R) dpsi/dlat + (1/(R cos lat)) dchi/dlon, "
               "v = (1/(R cos lat)) dpsi/dlon + (1/R) dchi/dlat")


def _where(da: xr.DataArray) -> str:
    return f"variable {da.name!r}"


def _batch_coordinates(da: xr.DataArray, info: GridInfo) -> dict[str, xr.Variable]:
    """The coordinates of ``da`` off the grid (time, level, ...), attributes included, which
    :func:`xarray.apply_ufunc` hands on without their attributes."""
    spatial = {info.lat_dim, info.lon_dim}
    return {str(k): c.variable for k, c in da.coords.items() if not set(c.dims) & spatial}


# ----------------------------------------------------------------------------
# Coefficients of psi and chi
# ----------------------------------------------------------------------------
def _potentials_block(east: np.ndarray, north: np.ndarray, pos: np.ndarray | None = None, *,
                      info: GridInfo, lmax: int, radius: float, norm: str, cs: bool,
                      allow_aliasing: bool, where: tuple) -> tuple[np.ndarray, ...]:
    """Real-form coefficients (C, S) of psi and of chi of a block of component pairs."""
    from sphex.flow import analyze_flow as analyze_core

    e, n = components_of_block(east, north, pos, info, where)
    flow = analyze_core(e, n, info.grid, lmax, radius, allow_aliasing=allow_aliasing)
    c_psi, s_psi = flow.psi.to(norm, cs).cos_sin()
    c_chi, s_chi = flow.chi.to(norm, cs).cos_sin()
    return tuple(np.asarray(a, dtype=np.float64) for a in (c_psi, s_psi, c_chi, s_chi))


def analyze_flow(u: xr.DataArray, v: xr.DataArray, lmax: int | None = None,
                 radius: float | None = None, *, norm: str = "orthonormal",
                 condon_shortley: bool = True, allow_aliasing: bool = False) -> xr.Dataset:
    """Streamfunction and velocity potential of a wind or current, as a coefficient Dataset.

    Parameters
    ----------
    u, v : xarray.DataArray
        Eastward and northward components on one global latitude-longitude
        grid (see :func:`sphex.xr.find_grid`), with the same other dimensions
        (time, level, member: a batch).  numpy- or dask-backed.
    lmax : int, optional
        Highest degree; default the grid's exact limit, which is also the
        exact limit for vector fields.  More raises unless ``allow_aliasing``.
    radius : float, optional
        The sphere's radius in metres (see :func:`flow_radius` for the default).
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
    condon_shortley : bool
    allow_aliasing : bool

    Returns
    -------
    xarray.Dataset
        The coefficient layout of :mod:`sphex.xr.coefficients` (``cos_coef``,
        ``sin_coef`` over ``(potential, *other_dims, degree, order)``) with
        ``potential = ["psi", "chi"]``: ``ds.sel(potential="psi")`` is the
        coefficient Dataset of the streamfunction.  ``units`` are m2 s-1 for
        components in m s-1, ``reference_radius`` is the radius; the attributes
        ``east_variable``, ``north_variable``, ``component_units`` and
        ``flow_convention`` say what was analysed.

    Raises
    ------
    ValueError
        Components on different grids or with different other dimensions,
        missing values, ``lmax`` above the exact limit, a bad radius.

    Examples
    --------
    >>> import numpy as np, xarray as xr, sphex, sphex.xr as sxr
    >>> g = sphex.Grid.gauss(15)
    >>> lat = xr.DataArray(g.lat, dims="lat")
    >>> lon = xr.DataArray(g.lon, dims="lon")
    >>> u = (10.0 * np.cos(np.radians(lat)) + 0 * lon).assign_coords(lat=lat, lon=lon)
    >>> u.attrs["units"] = "m s-1"
    >>> ds = sxr.analyze_flow(u, 0 * u, radius=6.371e6)
    >>> ds.attrs["units"], list(ds.potential.values)
    ('m2 s-1', ['psi', 'chi'])
    """
    u, v, info = component_pair(u, v)
    check_norm(norm)
    lmax = check_lmax(lmax, info.grid, allow_aliasing, _where(u))
    r, _ = flow_radius(radius, u, v)
    u, v, pos, where = prepare_pair(u, v, info)
    n = lmax + 1
    parts = xr.apply_ufunc(
        scaleout.task_function(_potentials_block, u, v), u, v, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim]] * 2 + [[]],
        output_core_dims=[["degree", "order"]] * 4,
        kwargs={"info": info, "lmax": lmax, "radius": r, "norm": norm,
                "cs": bool(condon_shortley), "allow_aliasing": allow_aliasing, "where": where},
        dask="parallelized", output_dtypes=[np.float64] * 4,
        dask_gufunc_kwargs={"output_sizes": {"degree": n, "order": n}}, keep_attrs=False,
    )
    label = xr.DataArray(list(_POTENTIALS), dims=POTENTIAL)
    cos = xr.concat([parts[0], parts[2]], dim=label)
    sin = xr.concat([parts[1], parts[3]], dim=label)
    units = derived_units(components_units(u, v))
    var_attrs = {"units": units["potential"]} if units["potential"] else {}
    what = f"psi and chi of ({u.name}, {v.name})"
    ds = xr.Dataset({COS: cos.assign_attrs(long_name=f"cosine coefficient C_lm of {what}",
                                           **var_attrs),
                     SIN: sin.assign_attrs(long_name=f"sine coefficient S_lm of {what}",
                                           **var_attrs)})
    ds = finish_coefficient_dataset(ds, lmax, norm, bool(condon_shortley), r, units["potential"],
                                    _FLOW_NAME, None).assign_coords(_batch_coordinates(u, info))
    return _label_potentials(ds, u, v, units["component"])


def _label_potentials(ds: xr.Dataset, u: xr.DataArray | None, v: xr.DataArray | None,
                      component_units: str | None) -> xr.Dataset:
    ds = ds.assign_coords({POTENTIAL: (POTENTIAL, list(_POTENTIALS), {
        "long_name": "psi: streamfunction; chi: velocity potential"})})
    ds.attrs["flow_convention"] = _CONVENTION
    if u is not None and v is not None:
        ds.attrs["east_variable"] = str(u.name)
        ds.attrs["north_variable"] = str(v.name)
    if component_units is not None:
        ds.attrs["component_units"] = component_units
    return ds


def _check_flow_dataset(ds: Any) -> xr.Dataset:
    ds = as_coefficients(ds)
    if POTENTIAL not in ds[COS].dims or \
            [str(x) for x in ds[POTENTIAL].values] != list(_POTENTIALS):
        raise ValueError("not flow coefficients: expected a dimension 'potential' holding 'psi' and "
                         "'chi' (as sphex.xr.analyze_flow makes)")
    return ds


def to_flow(ds: xr.Dataset) -> Any:
    """A :class:`sphex.flow.Flow` from a flow coefficient Dataset (from :func:`analyze_flow`).

    The radius is the Dataset's ``reference_radius`` (the unit sphere when it
    has none); other dimensions become batch axes in their order.
    """
    from sphex.flow import Flow

    ds = _check_flow_dataset(ds)
    return Flow(*(to_harmonics(ds.sel({POTENTIAL: p})) for p in _POTENTIALS))


def from_flow(flow: Any, dims: Sequence[str] | None = None,
              coords: Mapping[str, Any] | None = None,
              component_units: str | None = None) -> xr.Dataset:
    """A flow coefficient Dataset (the layout of :func:`analyze_flow`) from a :class:`sphex.flow.Flow`.

    Parameters
    ----------
    flow : sphex.flow.Flow
    dims : sequence of str, optional
        Names of the flow's batch axes (default ``sample_0``, ...).
    coords : mapping, optional
        Coordinates of the batch dimensions.
    component_units : str, optional
        Units of the components (e.g. ``"m s-1"``); the coefficients' units
        follow from them.
    """
    from sphex.flow import Flow
    from sphex.harmonics import Harmonics

    if not isinstance(flow, Flow):
        raise ValueError(f"expected a sphex.flow.Flow, got {type(flow).__name__}")
    batch = tuple(flow.batch_shape)
    dims = tuple(dims) if dims is not None else tuple(f"sample_{i}" for i in range(len(batch)))
    units = derived_units(component_units)["potential"]
    both = Harmonics(np.stack([flow.psi.coef, flow.chi.coef]), norm=flow.psi.norm,
                     condon_shortley=flow.psi.condon_shortley, radius=flow.radius, units=units)
    ds = from_harmonics(both, dims=(POTENTIAL,) + dims, coords=coords, name=_FLOW_NAME)
    return _label_potentials(ds, None, None, component_units)


def _energy_block(c_psi: np.ndarray, s_psi: np.ndarray, c_chi: np.ndarray, s_chi: np.ndarray, *,
                  conv: Mapping[str, Any]) -> tuple[np.ndarray, np.ndarray]:
    from sphex.flow import Flow
    from sphex.spectra import kinetic_energy as energy_core

    flow = Flow(harmonics_from_cos_sin(c_psi, s_psi, conv), harmonics_from_cos_sin(c_chi, s_chi, conv))
    return energy_core(flow)


def kinetic_energy(ds: xr.Dataset) -> xr.Dataset:
    """Kinetic-energy spectrum of a flow coefficient Dataset, rotational and divergent parts.

    Parameters
    ----------
    ds : xarray.Dataset
        Flow coefficients from :func:`analyze_flow` (numpy- or dask-backed).

    Returns
    -------
    xarray.Dataset
        ``rotational``, ``divergent`` and ``total`` over ``(*other_dims,
        degree)``: the kinetic energy per unit mass of each degree (m2 s-2 for
        components in m s-1), ``l(l+1)/(2 R^2)`` times the degree power of
        ``psi`` and of ``chi`` (:func:`sphex.spectra.kinetic_energy`); the sum
        over degrees is the area mean of ``(u^2 + v^2)/2``.
    """
    ds = _check_flow_dataset(ds)
    conv = read_conventions(ds)
    core = ["degree", "order"]
    psi, chi = (ds.sel({POTENTIAL: p}, drop=True) for p in _POTENTIALS)
    rot, div = xr.apply_ufunc(
        _energy_block, psi[COS], psi[SIN], chi[COS], chi[SIN],
        input_core_dims=[core] * 4, output_core_dims=[["degree"]] * 2,
        kwargs={"conv": conv}, dask="parallelized", output_dtypes=[np.float64] * 2,
        keep_attrs=False,
    )
    units = derived_units(ds.attrs.get("component_units"))["energy"]
    extra = {"units": units} if units else {}
    text = "kinetic energy per unit mass of degree l, {} part"
    out = xr.Dataset({
        "rotational": rot.assign_attrs(long_name=text.format("rotational (non-divergent)"), **extra),
        "divergent": div.assign_attrs(long_name=text.format("divergent (irrotational)"), **extra),
        "total": (rot + div).assign_attrs(long_name=text.format("whole"), **extra),
    })
    out = out.assign_coords(degree=ds["degree"])
    out.attrs["comment"] = ("E_l = l(l+1)/(2 R^2) times the degree power of psi (rotational) or chi "
                            "(divergent); the sum over degrees is the area mean of (u^2 + v^2)/2")
    return out


# ----------------------------------------------------------------------------
# Gridded diagnostics
# ----------------------------------------------------------------------------
#: The gridded outputs of :func:`flow_fields`: name, long_name, which units.
_GRIDDED = (
    ("vorticity", "relative vorticity", "per_length"),
    ("divergence", "divergence", "per_length"),
    ("streamfunction", "streamfunction psi", "potential"),
    ("velocity_potential", "velocity potential chi", "potential"),
    ("eastward_rotational", "eastward component of the rotational (non-divergent) part", "component"),
    ("northward_rotational", "northward component of the rotational (non-divergent) part",
     "component"),
    ("eastward_divergent", "eastward component of the divergent (irrotational) part", "component"),
    ("northward_divergent", "northward component of the divergent (irrotational) part", "component"),
)


def _fields_block(east: np.ndarray, north: np.ndarray, pos: np.ndarray | None = None, *,
                  info: GridInfo, target: GridInfo, lmax: int, radius: float,
                  rotation: float | None, spectrum: bool, where: tuple) -> tuple[np.ndarray, ...]:
    """Every gridded diagnostic (and optionally the energy spectrum) of a block of pairs."""
    from sphex.flow import analyze_flow as analyze_core, synthesize_flow
    from sphex.harmonics import Harmonics
    from sphex.spectra import kinetic_energy as energy_core
    from sphex.transform import synthesize

    e, n = components_of_block(east, north, pos, info, where)
    flow = analyze_core(e, n, info.grid, lmax, radius)
    scalars = (flow.vorticity(), flow.divergence(), flow.psi, flow.chi)
    stacked = Harmonics(np.stack([h.coef for h in scalars]), norm=flow.psi.norm,
                        condon_shortley=flow.psi.condon_shortley)
    put = list(target.put)
    gridded = np.asarray(synthesize(stacked, target.grid))[..., put]
    out = [gridded[i] for i in range(4)]
    for part in (flow.rotational(), flow.divergent()):
        out += [c[..., put] for c in synthesize_flow(part, target.grid)]
    if rotation is not None:
        coriolis = 2.0 * rotation * np.sin(np.radians(np.asarray(target.grid.lat)))[:, None]
        out.append(out[0] + coriolis)
    if spectrum:
        out += list(energy_core(flow))
    return tuple(out)


def _output_attributes(name: str, long_name: str, units: str | None, medium: str | None,
                       component_names: tuple[str, str]) -> dict[str, Any]:
    attrs: dict[str, Any] = {"long_name": f"{long_name} of ({component_names[0]}, "
                                          f"{component_names[1]})"}
    standard = DIAGNOSTIC_STANDARD_NAMES.get(medium or "", {}).get(name)
    if standard:
        attrs["standard_name"] = standard
    if units:
        attrs["units"] = units
    return attrs


def flow_fields(u: xr.DataArray, v: xr.DataArray, like: Any = None, radius: float | None = None,
                *, lmax: int | None = None, planetary_rotation: float | None = None,
                spectrum: bool = False, medium: str | None = None) -> xr.Dataset:
    """Vorticity, divergence, streamfunction, velocity potential and the parts of a flow, on a grid.

    Parameters
    ----------
    u, v : xarray.DataArray
        Eastward and northward components on one global grid, any other
        dimensions (a batch); numpy- or dask-backed (the result is then lazy).
    like : DataArray, Dataset, Grid or str, optional
        The grid of the outputs (see :func:`sphex.xr.synthesize`); default
        the components' own grid.
    radius : float, optional
        The sphere's radius in metres (see :func:`flow_radius` for the default).
    lmax : int, optional
        Degree limit of the analysis; default the components' exact limit, or
        the smaller exact limit of the two grids when ``like`` is given.
    planetary_rotation : float, optional
        Rotation rate in rad s-1 (Earth: 7.292115e-5): adds
        ``absolute_vorticity``, the relative vorticity plus ``2 Omega sin(lat)``.
    spectrum : bool
        Also give ``kinetic_energy_rotational`` and ``kinetic_energy_divergent``
        over ``(*other_dims, degree)`` (:func:`sphex.spectra.kinetic_energy`).
    medium : {"atmosphere", "sea_water"}, optional
        Which CF standard names the outputs get; default from the components'
        standard names (``eastward_wind`` / ``northward_wind``,
        ``eastward_sea_water_velocity`` / ``northward_sea_water_velocity``),
        none when they have none.

    Returns
    -------
    xarray.Dataset
        ``vorticity``, ``divergence`` (s-1 for components in m s-1),
        ``streamfunction``, ``velocity_potential`` (m2 s-1),
        ``eastward_rotational``, ``northward_rotational``,
        ``eastward_divergent``, ``northward_divergent`` (the components'
        units), over the components' other dimensions and the target's
        latitude and longitude, with their coordinates; attributes with
        ``long_name``, ``units`` and, where CF has one, ``standard_name``.
        Degree 0 of ``psi`` and ``chi`` is zero (their area mean).

    Raises
    ------
    ValueError
        Components on different grids or with different other dimensions,
        missing values, ``lmax`` above the exact limit, a bad radius.

    Notes
    -----
    One analysis per field pair (:func:`sphex.flow.analyze_flow`), then one
    scalar synthesis of ``zeta = -l(l+1)/R^2 psi``, ``delta``, ``psi`` and
    ``chi`` together and two vector syntheses (rotational and divergent
    parts).  Nothing is differenced on the grid.
    """
    u, v, info = component_pair(u, v)
    tinfo, lat, lon = (info, u[info.lat_name].variable, u[info.lon_name].variable) \
        if like is None else synthesis_target(like)
    if lmax is None:
        lmax = min(info.grid.lmax_exact, tinfo.grid.lmax_exact)
    lmax = check_lmax(lmax, info.grid, False, _where(u))
    r, _ = flow_radius(radius, u, v)
    if planetary_rotation is not None and (
            isinstance(planetary_rotation, bool) or not isinstance(planetary_rotation, numbers.Real)
            or not np.isfinite(planetary_rotation)):
        raise ValueError(f"planetary_rotation must be a rotation rate in rad s-1 (Earth: "
                         f"7.292115e-5), got {planetary_rotation!r}")
    kind = flow_medium(u, v, medium)
    units = derived_units(components_units(u, v))
    source = u
    u, v, pos, where = prepare_pair(u, v, info)
    tmp_lat, tmp_lon = "__sphex_lat__", "__sphex_lon__"
    gridded = [name for name, _, _ in _GRIDDED]
    if planetary_rotation is not None:
        gridded.append("absolute_vorticity")
    energies = ["kinetic_energy_rotational", "kinetic_energy_divergent"] if spectrum else []
    sizes = {tmp_lat: tinfo.grid.nlat, tmp_lon: len(tinfo.put)}
    if spectrum:
        sizes["degree"] = lmax + 1
    results = xr.apply_ufunc(
        scaleout.task_function(_fields_block, u, v), u, v, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim]] * 2 + [[]],
        output_core_dims=[[tmp_lat, tmp_lon]] * len(gridded) + [["degree"]] * len(energies),
        kwargs={"info": info, "target": tinfo, "lmax": lmax, "radius": r,
                "rotation": None if planetary_rotation is None else float(planetary_rotation),
                "spectrum": spectrum, "where": where},
        dask="parallelized", output_dtypes=[np.float64] * (len(gridded) + len(energies)),
        dask_gufunc_kwargs={"output_sizes": sizes}, keep_attrs=False,
    )
    results = results if isinstance(results, tuple) else (results,)
    spatial = {info.lat_dim, info.lon_dim}
    names = (str(u.name), str(v.name))
    meta = {name: (long_name, units[which]) for name, long_name, which in _GRIDDED}
    meta["absolute_vorticity"] = ("absolute vorticity", units["per_length"])
    order = [tinfo.lat_dim if d == info.lat_dim else tinfo.lon_dim if d == info.lon_dim else d
             for d in source.dims]
    data = {}
    for name, da in zip(gridded, results):
        da = da.drop_vars([k for k, c in da.coords.items() if set(c.dims) & spatial],
                          errors="ignore")
        da = da.rename({tmp_lat: tinfo.lat_dim, tmp_lon: tinfo.lon_dim}).transpose(*order)
        data[name] = da.assign_attrs(_output_attributes(name, *meta[name], kind, names))
    for name, da in zip(energies, results[len(gridded):]):
        part = name.rsplit("_", 1)[1]
        data[name] = da.assign_attrs(long_name=f"kinetic energy per unit mass of degree l, {part} "
                                               "part", **({"units": units["energy"]}
                                                          if units["energy"] else {}))
    out = xr.Dataset(data).assign_coords({tinfo.lat_name: lat, tinfo.lon_name: lon,
                                          **_batch_coordinates(source, info)})
    if spectrum:
        out = out.assign_coords(degree=("degree", np.arange(lmax + 1, dtype=np.int32),
                                        {"long_name": "spherical-harmonic degree l"}))
    out.attrs = {"planet_radius_km": r / 1e3, "flow_convention": _CONVENTION,
                 "history": append_history(source.attrs, f"sphex flow: {names[0]}, {names[1]} "
                                           f"to degree {lmax}, radius {r / 1e3:.10g} km")}
    return out


# ----------------------------------------------------------------------------
# Regridding and smoothing through psi and chi
# ----------------------------------------------------------------------------
def _resynthesize_flow_block(east: np.ndarray, north: np.ndarray, pos: np.ndarray | None = None,
                             *, info: GridInfo, target: GridInfo, lmax: int,
                             weights: np.ndarray | None, where: tuple
                             ) -> tuple[np.ndarray, np.ndarray]:
    """Analyse a block of pairs, weight each degree of psi and chi (if asked), synthesise on
    ``target``."""
    from sphex.flow import analyze_flow as analyze_core, synthesize_flow

    e, n = components_of_block(east, north, pos, info, where)
    flow = analyze_core(e, n, info.grid, lmax)
    if weights is not None:
        flow = flow.filter(weights)
    put = list(target.put)
    east_out, north_out = synthesize_flow(flow, target.grid)
    return east_out[..., put], north_out[..., put]


def _moved_pair(u: xr.DataArray, v: xr.DataArray, info: GridInfo, tinfo: GridInfo,
                lat: Any, lon: Any, lmax: int, weights: np.ndarray | None,
                line: str) -> xr.Dataset:
    source = u
    u, v, pos, where = prepare_pair(u, v, info)
    tmp_lat, tmp_lon = "__sphex_lat__", "__sphex_lon__"
    pair = xr.apply_ufunc(
        scaleout.task_function(_resynthesize_flow_block, u, v), u, v, pos,
        input_core_dims=[[info.lat_dim, info.lon_dim]] * 2 + [[]],
        output_core_dims=[[tmp_lat, tmp_lon]] * 2,
        kwargs={"info": info, "target": tinfo, "lmax": lmax, "weights": weights, "where": where},
        dask="parallelized", output_dtypes=[np.float64] * 2,
        dask_gufunc_kwargs={"output_sizes": {tmp_lat: tinfo.grid.nlat, tmp_lon: len(tinfo.put)}},
        keep_attrs=False,
    )
    spatial = {info.lat_dim, info.lon_dim}
    order = [tinfo.lat_dim if d == info.lat_dim else tinfo.lon_dim if d == info.lon_dim else d
             for d in source.dims]
    data = {}
    for original, da in zip((source, v), pair):
        da = da.drop_vars([k for k, c in da.coords.items() if set(c.dims) & spatial],
                          errors="ignore")
        da = da.rename({tmp_lat: tinfo.lat_dim, tmp_lon: tinfo.lon_dim}).transpose(*order)
        attrs = dict(original.attrs)
        attrs["history"] = append_history(original.attrs, line)
        data[str(original.name)] = da.assign_attrs(attrs)
    return xr.Dataset(data).assign_coords({tinfo.lat_name: lat, tinfo.lon_name: lon,
                                           **_batch_coordinates(source, info)})


def regrid_flow(u: xr.DataArray, v: xr.DataArray, like: Any, *,
                lmax: int | None = None) -> xr.Dataset:
    """A wind or current moved to another grid through its streamfunction and velocity potential.

    Parameters
    ----------
    u, v : xarray.DataArray
        Eastward and northward components on one global grid.
    like : DataArray, Dataset, Grid or str
        The target grid (see :func:`sphex.xr.synthesize`).
    lmax : int, optional
        Degree limit; default the smaller exact limit of the two grids.

    Returns
    -------
    xarray.Dataset
        Both components, named and with attributes as given, on the target
        grid; a flow band-limited to ``lmax`` arrives exactly.  Never done
        component by component: near the poles the components turn with the
        longitude and are not band-limited as scalars.
    """
    u, v, info = component_pair(u, v)
    tinfo, lat, lon = synthesis_target(like)
    if lmax is None:
        lmax = min(info.grid.lmax_exact, tinfo.grid.lmax_exact)
    lmax = check_lmax(lmax, info.grid, False, _where(u))
    g, t = info.grid, tinfo.grid
    line = (f"sphex regrid_flow: {g.kind} {g.nlat}x{g.nlon} -> {t.kind} {t.nlat}x{t.nlon} through "
            f"psi and chi, degrees 0..{lmax}")
    return _moved_pair(u, v, info, tinfo, lat, lon, lmax, None, line)


def smooth_flow(u: xr.DataArray, v: xr.DataArray, *, gaussian_km: float | None = None,
                cap_deg: float | None = None, band: tuple[int, int] | None = None,
                weights: Sequence[float] | None = None, radius: float | None = None,
                lmax: int | None = None) -> xr.Dataset:
    """A wind or current smoothed isotropically through its streamfunction and velocity potential.

    Exactly one of ``gaussian_km``, ``cap_deg``, ``band`` or ``weights`` (as
    in :func:`sphex.xr.smooth`); the weights multiply each degree of ``psi``
    and ``chi``, so vorticity and divergence are smoothed alike and the
    rotational and divergent parts stay apart.

    Parameters
    ----------
    u, v : xarray.DataArray
        Eastward and northward components on one global grid.
    gaussian_km, cap_deg, band, weights
        The smoothing (see :func:`sphex.xr.smooth`).
    radius : float, optional
        The sphere's radius in metres for ``gaussian_km`` (see
        :func:`flow_radius` for the default).
    lmax : int, optional
        Degree limit of the analysis (default the grid's exact limit).

    Returns
    -------
    xarray.Dataset
        Both components on their own grid, named and with attributes as given,
        and a ``history`` line saying what was done.
    """
    u, v, info = component_pair(u, v)
    lmax = check_lmax(lmax, info.grid, False, _where(u))
    planet_km = flow_radius(radius, u, v)[0] / 1e3 if gaussian_km is not None else None
    w, how = _smoothing_weights(lmax, gaussian_km, cap_deg, band, weights, planet_km)
    line = f"sphex smooth_flow: {how}, through psi and chi, degrees 0..{lmax}"
    return _moved_pair(u, v, info, info, u[info.lat_name].variable, u[info.lon_name].variable,
                       lmax, w, line)

