"""Coefficient Datasets: sphex's layout of spherical-harmonic coefficients in xarray.

Layout (also the netCDF file layout)
------------------------------------
- dimensions ``degree`` and ``order`` (after any extra dimensions);
- variables ``cos_coef`` (C_lm) and ``sin_coef`` (S_lm), the real form
  ``f = sum_l sum_{m<=l} (C_lm cos(m lon) + S_lm sin(m lon)) r_m Lambda_lm``
  with ``r_0 = 1`` and ``r_m = sqrt(2)`` for ``m > 0`` (``r_m = 1`` for
  ``"unnormalized"``), longitude measured east from the 0 meridian; entries with
  ``order > degree`` do not exist and hold 0;
- attributes ``normalization``, ``phase_convention``, ``lmax``,
  ``reference_radius`` (metres, when known), ``units`` and ``field_name``,
  plus the attributes of the source variable prefixed with ``field_``
  (written and read back, checked, by :mod:`sphex.xr.conventions`).

Coefficients are read by the values of their ``degree`` and ``order``
coordinates, not by position (:func:`as_coefficients`).

A Dataset made from a :class:`~sphex.harmonics.Harmonics` for writing
(:func:`exact_dataset_from_harmonics`) may carry two small ``int8`` variables
that record the last-place difference between the cosine/sine values and
sphex's complex storage, so that :func:`to_harmonics` returns the very same
bits.  Other readers can ignore them.
"""
from __future__ import annotations

from collections.abc import Hashable, Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr

from sphex.harmonics import Harmonics
from sphex.xr.conventions import (
    check_layout, check_lmax_attribute, convention_attributes, ordered_by_labels, read_conventions,
)

__all__ = ["COS", "SIN", "is_coefficients", "as_coefficients", "from_harmonics", "to_harmonics",
           "harmonics_from_cos_sin", "read_conventions", "finish_coefficient_dataset",
           "exact_dataset_from_harmonics"]

COS = "cos_coef"
SIN = "sin_coef"
_RE_STEPS = "exact_re_steps"
_IM_STEPS = "exact_im_steps"
def is_coefficients(ds: xr.Dataset) -> bool:
    """Whether ``ds`` holds coefficients in sphex's layout (``cos_coef``/``sin_coef``)."""
    return (isinstance(ds, xr.Dataset) and COS in ds.data_vars and SIN in ds.data_vars
            and "degree" in ds[COS].dims and "order" in ds[COS].dims)


def as_coefficients(ds: Any, where: str = "the coefficients", *,
                    from_file: bool = False) -> xr.Dataset:
    """A checked coefficient Dataset from a Dataset in sphex's layout or a Harmonics.

    The data are put in the order of their ``degree`` and ``order`` labels
    (:func:`~sphex.xr.conventions.ordered_by_labels`), the ``lmax`` attribute
    of a file is held against them, and values where no coefficient exists
    are refused (:func:`~sphex.xr.conventions.check_layout`).

    Parameters
    ----------
    ds : xarray.Dataset or Harmonics
    where : str
        What the Dataset is, for the messages (a file name).
    from_file : bool
        ``ds`` was just read from a file: an ``lmax`` attribute that
        disagrees with the data is an error.  Otherwise (a Dataset cut with
        ``.isel`` in memory, say) the attribute is set to the data's.

    Raises
    ------
    ValueError
        Not in the layout; as many degrees as orders missing; labels that
        repeat, skip, do not start at 0 or are not whole numbers; an ``lmax``
        attribute that disagrees with the data; values above the diagonal;
        complex values.
    """
    if isinstance(ds, Harmonics):
        return from_harmonics(ds)
    if not is_coefficients(ds):
        raise ValueError(f"{where}: not a coefficient Dataset: expected variables cos_coef and "
                         "sin_coef over dimensions degree and order (as written by sphex analyze)")
    for name in (COS, SIN):
        kind = ds[name].dtype.kind
        if kind not in "fiu":
            what = "complex" if kind == "c" else f"of type {ds[name].dtype}"
            raise ValueError(f"{where}: {name} is {what}; coefficient files hold the real form "
                             "(cos_coef and sin_coef as real numbers): convert the data")
    n_l, n_m = ds.sizes["degree"], ds.sizes["order"]
    if n_l != n_m:
        raise ValueError(f"{where}: coefficients have {n_l} degrees but {n_m} orders; they must "
                         "match")
    ds = ordered_by_labels(ds, where)
    if from_file:
        try:
            check_lmax_attribute(ds)
        except ValueError as exc:
            raise ValueError(f"{where}: {exc}") from None
    elif "lmax" in ds.attrs and ds.attrs["lmax"] != n_l - 1:
        ds = ds.assign_attrs(lmax=np.int32(n_l - 1))
    check_layout(ds, where)
    return ds


def _cos_sin_from_complex(coef: np.ndarray, norm: str, cs: bool) -> tuple[np.ndarray, np.ndarray]:
    h = Harmonics(coef, norm=norm, condon_shortley=cs)
    c, s = h.cos_sin()
    return np.asarray(c, dtype=np.float64), np.asarray(s, dtype=np.float64)


def harmonics_from_cos_sin(c: np.ndarray, s: np.ndarray, conv: Mapping[str, Any]) -> Harmonics:
    """A :class:`Harmonics` from real-form arrays and the conventions of :func:`read_conventions`."""
    return Harmonics.from_cos_sin(np.asarray(c, dtype=np.float64), np.asarray(s, dtype=np.float64),
                                  norm=conv["norm"], condon_shortley=conv["condon_shortley"],
                                  radius=conv.get("radius"), units=conv.get("units"))


def _ulp_steps(target: np.ndarray, start: np.ndarray) -> np.ndarray | None:
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


def _apply_ulp_steps(x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """``x`` moved by ``steps`` float64 steps per element (the inverse of :func:`_ulp_steps`)."""
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
    c, s = _cos_sin_from_complex(np.asarray(h.coef), h.norm, h.condon_shortley)
    return _dataset_from_cos_sin(c, s, dims, coords, h.lmax, h.norm, h.condon_shortley,
                                 h.radius, h.units, name, attrs)


def _dataset_from_cos_sin(c: Any, s: Any, dims: tuple, coords: Mapping | None, lmax: int,
                          norm: str, cs: bool, radius: float | None, units: str | None,
                          name: str | None, field_attrs: Mapping[str, Any] | None) -> xr.Dataset:
    full = dims + ("degree", "order")
    label = name or "field"
    var_attrs = {"units": units} if units is not None else {}
    ds = xr.Dataset(
        {COS: (full, c, {"long_name": f"cosine coefficient C_lm of {label}", **var_attrs}),
         SIN: (full, s, {"long_name": f"sine coefficient S_lm of {label}", **var_attrs})},
        coords=dict(coords or {}),
    )
    return finish_coefficient_dataset(ds, lmax, norm, cs, radius, units, name, field_attrs)


def finish_coefficient_dataset(ds: xr.Dataset, lmax: int, norm: str, cs: bool,
                               radius: float | None, units: str | None, name: str | None,
                               field_attrs: Mapping[str, Any] | None) -> xr.Dataset:
    """Put the ``degree``/``order`` coordinates and the convention attributes on ``ds``.

    ``ds`` holds ``cos_coef`` and ``sin_coef``; ``field_attrs`` (the source
    field's attributes) are stored with a ``field_`` prefix, booleans as 0/1.
    """
    ds = ds.assign_coords(
        degree=("degree", np.arange(lmax + 1, dtype=np.int32),
                {"long_name": "spherical-harmonic degree l"}),
        order=("order", np.arange(lmax + 1, dtype=np.int32),
               {"long_name": "spherical-harmonic order m (entries with m > l are 0)"}),
    )
    attrs = convention_attributes(lmax, norm, cs, radius, units)
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
    ds = as_coefficients(ds)
    conv = read_conventions(ds)
    c_da = ds[COS]
    batch_dims = [d for d in c_da.dims if d not in ("degree", "order")]
    order = (*batch_dims, "degree", "order")
    c = np.asarray(c_da.transpose(*order).values, dtype=np.float64)
    s = np.asarray(ds[SIN].transpose(*order).values, dtype=np.float64)
    h = harmonics_from_cos_sin(c, s, conv)
    if _RE_STEPS in ds and _IM_STEPS in ds:
        coef = np.asarray(h.coef)
        re = _apply_ulp_steps(coef.real.copy(), np.asarray(ds[_RE_STEPS].transpose(*order).values))
        im = _apply_ulp_steps(coef.imag.copy(), np.asarray(ds[_IM_STEPS].transpose(*order).values))
        h = h.replace(coef=re + 1j * im)
    return h


def exact_dataset_from_harmonics(h: Harmonics, name: str | None) -> xr.Dataset:
    """:func:`from_harmonics`, plus the last-place corrections that make reading back bit-exact."""
    ds = from_harmonics(h, name=name)
    dims = tuple(ds[COS].dims)
    rebuilt = harmonics_from_cos_sin(ds[COS].values, ds[SIN].values, read_conventions(ds))
    back = np.asarray(rebuilt.coef)
    coef = np.asarray(h.coef)
    re = _ulp_steps(coef.real, back.real.copy())
    im = _ulp_steps(coef.imag, back.imag.copy())
    if re is not None and im is not None and (re.any() or im.any()):
        note = ("last-place steps (float64 ulps) from the complex coefficients rebuilt from "
                "cos_coef/sin_coef to the ones sphex held; only for bit-exact reloading")
        ds[_RE_STEPS] = (dims, re, {"long_name": "exactness correction, real part", "comment": note})
        ds[_IM_STEPS] = (dims, im, {"long_name": "exactness correction, imaginary part",
                                    "comment": note})
    return ds
