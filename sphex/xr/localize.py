r"""Localised (multitaper) spectra and rotation of coefficient Datasets.

The adapters of :mod:`sphex.localize` and :mod:`sphex.rotation`.  The input
is a coefficient Dataset (:mod:`sphex.xr.coefficients`), a
:class:`~sphex.harmonics.Harmonics`, or a gridded DataArray, which is
analysed first (:func:`sphex.xr.analyze`, up to ``lmax``).  Any extra
dimensions (time, member, ...) are kept: one localised spectrum per field.
The coefficients are loaded into memory (a dask-backed input is computed).

Each localised result is a Dataset over ``(*extra_dims, degree)`` with the
estimate and its standard error across the windows:

============================  =====================================  =======================
function                      variables                              units
============================  =====================================  =======================
:func:`local_power`           ``power``, ``power_error``             field units squared
:func:`local_cross_power`     ``cross_power``, ``cross_power_error`` units of a times b
:func:`local_admittance`      ``admittance``, ``admittance_error``   gravity per topography
:func:`local_correlation`     ``correlation``, ``correlation_error`` 1
============================  =====================================  =======================

and attributes saying where and how the spectrum was localised:
``centre_lat``, ``centre_lon`` (degrees), ``cap_radius_deg``,
``window_degree`` (``lwin``), ``n_windows``, ``window_concentration`` (one
value per window used), ``valid_degree_min`` and ``valid_degree_max`` (the
degrees ``lwin .. lmax - lwin`` where the estimate is reliable; see
:mod:`sphex.localize`).  A coordinate ``valid`` over ``degree`` (1 inside
that range, 0 outside) marks them for plotting and selection:
``ds.where(ds.valid == 1, drop=True)``.

Examples
--------
>>> import numpy as np, xarray as xr, sphex, sphex.xr
>>> rng = np.random.default_rng(1)
>>> g = sphex.Grid.gauss(40)
>>> da = xr.DataArray(rng.standard_normal(g.shape), coords={"lat": g.lat, "lon": g.lon},
...                   dims=("lat", "lon"), name="h", attrs={"units": "m"})
>>> spec = sphex.xr.local_power(da, 10.0, 40.0, 30.0, 8)
>>> spec.power.dims, int(spec.attrs["valid_degree_max"]), spec.power.attrs["units"]
(('degree',), 32, 'm^2')
"""
from __future__ import annotations

from collections.abc import Callable, Hashable
from typing import Any

import numpy as np
import xarray as xr

from sphex.concentration import DEFAULT_MIN_CONCENTRATION
from sphex.harmonics import Harmonics
from sphex.xr.coefficients import COS, SIN, as_coefficients, to_harmonics
from sphex.xr.fields import analyze, append_history

__all__ = ["local_power", "local_cross_power", "local_admittance", "local_correlation", "rotate"]

_SPATIAL = ("degree", "order")


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------
def _coefficients(obj: Any, lmax: int | None, name: str) -> xr.Dataset:
    """A coefficient Dataset from a coefficient Dataset, a Harmonics or a gridded DataArray."""
    if isinstance(obj, xr.DataArray):
        return analyze(obj, lmax)
    if isinstance(obj, (xr.Dataset, Harmonics)):
        try:
            ds = as_coefficients(obj)
        except ValueError as exc:
            raise ValueError(f"{name}: {exc}; a gridded field must be passed as a DataArray "
                             "(ds['name'])") from None
        if lmax is not None:
            top = ds.sizes["degree"] - 1
            if not 0 <= int(lmax) <= top:
                raise ValueError(f"{name}: lmax={lmax} is outside the coefficients' degrees 0..{top}")
            ds = ds.isel(degree=slice(0, int(lmax) + 1), order=slice(0, int(lmax) + 1))
        return ds
    raise ValueError(f"{name} must be a coefficient Dataset, a Harmonics or a gridded DataArray, "
                     f"not {type(obj).__name__}")


def _batch_dims(ds: xr.Dataset) -> list[Hashable]:
    return [d for d in ds[COS].dims if d not in _SPATIAL]


def _common_fields(datasets: list[xr.Dataset]) -> tuple[list[Harmonics], list[Hashable], dict]:
    """Harmonics of the fields truncated to their common lmax, with broadcast batch axes in
    one order; the batch dimensions and their coordinates."""
    top = min(ds.sizes["degree"] for ds in datasets)
    datasets = [ds.isel(degree=slice(0, top), order=slice(0, top)) for ds in datasets]
    dims: list[Hashable] = []
    for ds in datasets:
        dims += [d for d in _batch_dims(ds) if d not in dims]
    try:
        xr.align(*(ds[COS] for ds in datasets), join="exact")
    except ValueError:
        raise ValueError("the two fields' coordinates differ along a dimension they share; "
                         "select matching fields first (for example with .sel)") from None
    cos = xr.broadcast(*(ds[COS] for ds in datasets))
    sin = xr.broadcast(*(ds[SIN] for ds in datasets))
    order = (*dims, *_SPATIAL)
    fields = []
    for ds, c, s in zip(datasets, cos, sin):
        one = xr.Dataset({COS: c.transpose(*order), SIN: s.transpose(*order)}, attrs=ds.attrs)
        fields.append(to_harmonics(one))
    coords = {k: v for k, v in cos[0].coords.items()
              if not set(v.dims) & set(_SPATIAL) and k not in _SPATIAL}
    return fields, dims, coords


def _units(ds: xr.Dataset) -> str | None:
    u = ds.attrs.get("units")
    return None if u is None or str(u) == "" else str(u)


def _product_units(a: str | None, b: str | None) -> str | None:
    if a is None or b is None:
        return None
    if a == b:
        return f"{a}^2" if not any(ch in a for ch in " /*.^") else f"({a})^2"
    return f"{a} {b}"


def _ratio_units(a: str | None, b: str | None) -> str | None:
    if a is None or b is None:
        return None
    if a == b:
        return "1"
    wrap = (lambda u: f"({u})" if " " in u else u)
    return f"{wrap(a)}/{wrap(b)}"


def _field_label(ds: xr.Dataset, fallback: str) -> str:
    return str(ds.attrs.get("field_name", fallback))


# ---------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------
def _result(name: str, value: np.ndarray, error: np.ndarray, meta: Any, dims: list[Hashable],
            coords: dict, units: str | None, long_name: str) -> xr.Dataset:
    """The Dataset of one localised estimate and its error, with the localisation attributes."""
    full = (*dims, "degree")
    degrees = np.arange(value.shape[-1], dtype=np.int32)
    lo, hi = meta.valid_range
    unit_attrs = {"units": units} if units is not None else {}
    ds = xr.Dataset(
        {name: (full, value, {"long_name": long_name, **unit_attrs}),
         f"{name}_error": (full, error, {
             "long_name": f"standard error of the {name.replace('_', ' ')} across the windows "
                          "(jackknife; NaN with one window)", **unit_attrs})},
        coords={**coords,
                "degree": ("degree", degrees, {"long_name": "spherical-harmonic degree l"}),
                "valid": ("degree", ((degrees >= lo) & (degrees <= hi)).astype(np.int8),
                          {"long_name": "1 where the localised estimate is reliable "
                                        "(window_degree <= l <= lmax - window_degree)"})},
    )
    ds.attrs = {
        "title": "localised multitaper spectrum (sphex)",
        "centre_lat": float(meta.lat),
        "centre_lon": float(meta.lon),
        "cap_radius_deg": float(meta.cap_radius_deg),
        "window_degree": np.int32(meta.lwin),
        "n_windows": np.int32(meta.n_windows),
        "window_concentration": np.asarray(meta.concentration, dtype=np.float64),
        "valid_degree_min": np.int32(lo),
        "valid_degree_max": np.int32(hi),
        "method": "multitaper with spherical-cap concentration windows "
                  "(Wieczorek & Simons 2005, Geophys. J. Int. 162)",
    }
    return ds


def _localise(objects: list[Any], names: list[str], lmax: int | None,
              compute: Callable[..., Any]) -> tuple[Any, list[xr.Dataset], list[Hashable], dict]:
    datasets = [_coefficients(obj, lmax, n) for obj, n in zip(objects, names)]
    fields, dims, coords = _common_fields(datasets)
    return compute(*fields), datasets, dims, coords


# ---------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------
def local_power(obj: xr.Dataset | xr.DataArray | Harmonics, lat: float, lon: float,
                cap_radius_deg: float, lwin: int, n_windows: int | None = None, *,
                min_concentration: float = DEFAULT_MIN_CONCENTRATION,
                lmax: int | None = None) -> xr.Dataset:
    r"""Multitaper localised degree power at a centre, as a Dataset over ``degree``.

    Parameters
    ----------
    obj : coefficient Dataset, Harmonics or gridded DataArray
        The field(s); a gridded DataArray is analysed first.  Extra
        dimensions are kept (one spectrum per field).
    lat, lon : float
        Centre of the region (degrees).
    cap_radius_deg : float
        Angular radius of the cap (degrees), in (0, 180].
    lwin : int
        Highest degree of the windows, at most the field's lmax.
    n_windows : int, optional
        Use this many best-concentrated windows (default: all with
        concentration at least ``min_concentration``).
    min_concentration : float, default 0.99
    lmax : int, optional
        Degree limit (of the analysis of a gridded field, or a truncation of
        coefficients).

    Returns
    -------
    xarray.Dataset
        ``power`` and ``power_error`` over ``(*extra_dims, degree)`` in the
        field's units squared, the ``valid`` coordinate and the localisation
        attributes (module docstring).

    Raises
    ------
    ValueError
        As :func:`sphex.localize.local_power` (bad centre, cap, ``lwin``
        above lmax, no window concentrated enough), or an input that is
        neither coefficients nor a gridded field.

    Notes
    -----
    :math:`\hat S(l) = K^{-1}\sum_k S_{h_k f}(l)` over the ``K`` windows
    :math:`h_k` centred on ``(lat, lon)``; see :func:`sphex.localize.local_power`.

    References
    ----------
    Wieczorek, M. A., Simons, F. J. (2005), Geophys. J. Int. 162, 655-675.
    """
    from sphex import localize

    res, (ds,), dims, coords = _localise(
        [obj], ["obj"], lmax,
        lambda h: localize.local_power(h, lat, lon, cap_radius_deg, lwin, n_windows,
                                       min_concentration=min_concentration))
    label = _field_label(ds, "field")
    return _result("power", res.power, res.error, res, dims, coords,
                   _product_units(_units(ds), _units(ds)),
                   f"localised degree power of {label} (multitaper average over the windows)")


def local_cross_power(a: xr.Dataset | xr.DataArray | Harmonics,
                      b: xr.Dataset | xr.DataArray | Harmonics, lat: float, lon: float,
                      cap_radius_deg: float, lwin: int, n_windows: int | None = None, *,
                      min_concentration: float = DEFAULT_MIN_CONCENTRATION,
                      lmax: int | None = None) -> xr.Dataset:
    """Multitaper localised cross power of two fields: ``cross_power`` and ``cross_power_error``.

    Arguments as :func:`local_power`; the fields' extra dimensions are
    broadcast against each other and degrees above the smaller lmax are
    dropped.  See :func:`sphex.localize.local_cross_power`.
    """
    from sphex import localize

    res, (da, db), dims, coords = _localise(
        [a, b], ["a", "b"], lmax,
        lambda h1, h2: localize.local_cross_power(h1, h2, lat, lon, cap_radius_deg, lwin, n_windows,
                                                  min_concentration=min_concentration))
    return _result("cross_power", res.power, res.error, res, dims, coords,
                   _product_units(_units(da), _units(db)),
                   f"localised cross power of {_field_label(da, 'a')} and {_field_label(db, 'b')}")


def local_admittance(gravity: xr.Dataset | xr.DataArray | Harmonics,
                     topography: xr.Dataset | xr.DataArray | Harmonics, lat: float, lon: float,
                     cap_radius_deg: float, lwin: int, n_windows: int | None = None, *,
                     min_concentration: float = DEFAULT_MIN_CONCENTRATION,
                     lmax: int | None = None) -> xr.Dataset:
    """Localised admittance of gravity to topography: ``admittance`` and ``admittance_error``.

    The ratio of the multitaper cross power to the topography's localised
    power per degree, in gravity units per topography unit, with its
    jackknife error; see :func:`sphex.localize.local_admittance`.
    Arguments as :func:`local_cross_power`.
    """
    from sphex import localize

    res, (dg, dt), dims, coords = _localise(
        [gravity, topography], ["gravity", "topography"], lmax,
        lambda h1, h2: localize.local_admittance(h1, h2, lat, lon, cap_radius_deg, lwin, n_windows,
                                                 min_concentration=min_concentration))
    return _result("admittance", res.value, res.error, res, dims, coords,
                   _ratio_units(_units(dg), _units(dt)),
                   f"localised admittance of {_field_label(dg, 'gravity')} to "
                   f"{_field_label(dt, 'topography')}")


def local_correlation(a: xr.Dataset | xr.DataArray | Harmonics,
                      b: xr.Dataset | xr.DataArray | Harmonics, lat: float, lon: float,
                      cap_radius_deg: float, lwin: int, n_windows: int | None = None, *,
                      min_concentration: float = DEFAULT_MIN_CONCENTRATION,
                      lmax: int | None = None) -> xr.Dataset:
    """Localised correlation of two fields per degree: ``correlation`` and ``correlation_error``.

    Between -1 and 1, with its jackknife error; see
    :func:`sphex.localize.local_correlation`.  Arguments as
    :func:`local_cross_power`.
    """
    from sphex import localize

    res, (da, db), dims, coords = _localise(
        [a, b], ["a", "b"], lmax,
        lambda h1, h2: localize.local_correlation(h1, h2, lat, lon, cap_radius_deg, lwin, n_windows,
                                                  min_concentration=min_concentration))
    return _result("correlation", res.value, res.error, res, dims, coords, "1",
                   f"localised correlation of {_field_label(da, 'a')} and {_field_label(db, 'b')}")


def rotate(ds: xr.Dataset | Harmonics, alpha: float, beta: float, gamma: float, *,
           degrees: bool = True) -> xr.Dataset:
    r"""Coefficient Dataset of the field turned by the z-y-z Euler angles.

    Parameters
    ----------
    ds : coefficient Dataset or Harmonics
        Any normalisation and phase convention (read from the attributes);
        extra dimensions are rotated field by field.
    alpha, beta, gamma : float
        Euler angles of ``R = R_z(alpha) R_y(beta) R_z(gamma)``.
    degrees : bool, default True
        Angles in degrees; False for radians.

    Returns
    -------
    xarray.Dataset
        Same layout, coordinates, conventions and attributes, with a
        ``history`` line giving the angles; the field
        :math:`f'(\mathbf r) = f(R^{-1}\mathbf r)` (see
        :func:`sphex.rotation.rotate`; ``rotate(ds, a, 0, 0)`` turns the
        field east by ``a``).

    Examples
    --------
    >>> import numpy as np, sphex, sphex.xr
    >>> c = np.zeros((3, 3), complex); c[1, 0] = 1.0
    >>> ds = sphex.xr.rotate(sphex.xr.from_harmonics(sphex.Harmonics(c)), 0.0, 90.0, 0.0)
    >>> round(float(ds.cos_coef.sel(degree=1, order=1)), 12)      # Y_10 turned onto the equator
    -1.0
    """
    from sphex import rotation

    ds = as_coefficients(ds)
    dims = _batch_dims(ds)
    order = (*dims, *_SPATIAL)
    h = to_harmonics(ds)
    turned = rotation.rotate(h, alpha, beta, gamma, degrees=degrees)
    c, s = (np.asarray(x, dtype=np.float64) for x in turned.cos_sin())
    out = ds.drop_vars([k for k in ds.data_vars if k not in (COS, SIN)])
    out[COS] = ds[COS].transpose(*order).copy(data=c).transpose(*ds[COS].dims)
    out[SIN] = ds[SIN].transpose(*order).copy(data=s).transpose(*ds[SIN].dims)
    unit = "deg" if degrees else "rad"
    out.attrs = dict(ds.attrs)
    out.attrs["history"] = append_history(
        ds.attrs, f"sphex rotate: z-y-z Euler angles alpha={alpha:g}, beta={beta:g}, "
        f"gamma={gamma:g} {unit} (the field turns)")
    return out
