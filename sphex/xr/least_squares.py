"""Least-squares analysis of gridded DataArrays with missing cells (``analyze(..., missing="fit")``).

Each field is estimated from its observed cells alone by
:func:`sphex.least_squares.fit_masked` (NaN marks a missing cell; nothing is
filled), and the coefficient Dataset records how: the method, the damping,
and per field the weighted residual RMS, the iterations, whether conjugate
gradients converged, a (lower) condition estimate and the observed fraction
of the area.

The fit is made to the anomalies about the area-weighted mean of the
observed cells, and that mean is added back to degree 0.  Without damping
this changes nothing (a constant is in the span of the degree-0 function);
with damping it makes the poorly determined combinations of coefficients
relax towards the observed mean instead of towards zero, which for a field
such as a temperature in kelvin would be far from any value it takes.  The core's :class:`~sphex.least_squares.IllPosedWarning` is
passed on to the caller unchanged.
"""
from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
import xarray as xr

from sphex.xr.coefficients import COS, SIN, finish_coefficient_dataset
from sphex.xr.coords import GridInfo

__all__ = ["MISSING_CHOICES", "analyze_observed", "check_missing"]

#: What :func:`sphex.xr.analyze` does with missing values (NaN): refuse them, or fit around them.
MISSING_CHOICES = ("raise", "fit")

#: Progress steps per field of a fit (``progress(done, total)`` counts in these).
STEPS_PER_FIELD = 100

METHOD_TEXT = ("least squares over the observed cells (area weights, conjugate gradients); "
               "missing cells were not filled")


def check_missing(missing: str, damping: float, prior: Any) -> None:
    """A ValueError unless ``missing`` is a known choice and damping/prior go with "fit"."""
    if missing not in MISSING_CHOICES:
        raise ValueError(f"missing={missing!r} is not one of {', '.join(map(repr, MISSING_CHOICES))}: "
                         "'raise' refuses fields with NaN, 'fit' estimates the coefficients "
                         "from the observed cells by least squares")
    if missing == "raise" and (damping or prior is not None):
        raise ValueError("damping and prior only apply to missing='fit' (a least-squares fit "
                         "around missing cells); add missing='fit' or drop them")


class _FitProgress:
    """``callback(iteration, residual)`` of one field's fit, reported as ``progress(done, total)``.

    The share of a field done is the decades of residual reduction so far over
    those the tolerance asks for (conjugate gradients converge about
    geometrically, though not monotonically: the count never goes back), held
    below one step until the field is finished."""

    def __init__(self, progress: Callable[[int, int], None], fields: int, tol: float):
        self.progress = progress
        self.total = fields * STEPS_PER_FIELD
        self.decades = -math.log10(tol)
        self.field = 0
        self.steps = 0

    def __call__(self, iteration: int, residual: float) -> None:
        share = -math.log10(residual) / self.decades if residual > 0 else 1.0
        steps = int(min(max(share, 0.0), 1.0) * (STEPS_PER_FIELD - 1))
        if steps > self.steps:
            self.steps = steps
            self.progress(self.field * STEPS_PER_FIELD + steps, self.total)

    def field_done(self) -> None:
        self.field += 1
        self.steps = 0
        self.progress(self.field * STEPS_PER_FIELD, self.total)


def analyze_observed(da: xr.DataArray, info: GridInfo, lmax: int, *, norm: str,
                     condon_shortley: bool, radius: float | None, damping: float, prior: Any,
                     tol: float = 1e-10,
                     progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Coefficient Dataset of ``da`` fitted to its observed (non-NaN) cells, field by field.

    Parameters
    ----------
    da : xarray.DataArray
        Gridded field(s) on the grid of ``info``; NaN marks missing cells.
        dask-backed input is computed (a fit needs the whole field).
    info : GridInfo
        Where the grid is (:func:`sphex.xr.find_grid`).
    lmax : int
        Highest degree estimated.
    norm, condon_shortley, radius
        Conventions of the coefficients, as for :func:`sphex.xr.analyze`.
    damping, prior
        Regularisation, as for :func:`sphex.least_squares.fit_masked`.
    tol : float
        Stopping tolerance of conjugate gradients.
    progress : callable, optional
        ``progress(done, total)`` as the fits proceed, in hundredths of a field.

    Returns
    -------
    xarray.Dataset
        As :func:`sphex.xr.analyze`, plus the attributes ``fit_method``,
        ``fit_damping``, ``fit_prior``, ``fit_residual_rms`` (units of the
        field), ``fit_iterations``, ``fit_converged``,
        ``fit_condition_estimate`` (a lower estimate; NaN when none),
        ``fit_observed_fraction`` and ``fit_reference_mean`` (the observed
        mean the anomalies were taken about): one value for a single field, else one per
        field in the order of ``fit_fields`` (the batch dimensions, last
        varying fastest).

    Warns
    -----
    IllPosedWarning
        From :func:`~sphex.least_squares.fit_masked`, when the gaps leave
        combinations of coefficients undetermined.
    """
    from sphex.least_squares import fit_masked  # scipy.linalg only for fields with gaps

    core = (info.lat_dim, info.lon_dim)
    batch_dims = [d for d in da.dims if d not in core]
    values = np.asarray(da.transpose(*batch_dims, *core).values)[..., list(info.take)]
    batch = values.shape[:-2]
    fields = values.reshape((-1,) + values.shape[-2:])
    n = lmax + 1
    c_out = np.empty((fields.shape[0], n, n))
    s_out = np.empty((fields.shape[0], n, n))
    report = _FitProgress(progress, fields.shape[0], tol) if progress else None
    per_field: dict[str, list] = {k: [] for k in ("residual_rms", "iterations", "converged",
                                                  "condition_estimate", "observed_fraction",
                                                  "reference_mean")}
    cell_area = np.repeat(np.asarray(info.grid.weights)[:, None], info.grid.nlon, axis=1)
    for k, field in enumerate(fields):
        observed = np.isfinite(field)
        mean = float(np.sum(np.where(observed, field, 0.0) * cell_area)
                     / max(np.sum(cell_area * observed), np.finfo(float).tiny))
        result = fit_masked(field - mean, info.grid, lmax, damping=damping, prior=prior, norm=norm,
                            condon_shortley=condon_shortley, tol=tol, callback=report)
        c_out[k], s_out[k] = result.harmonics.cos_sin()
        c_out[k, 0, 0] += mean * _degree_zero_value(norm)
        per_field["reference_mean"].append(mean)
        fit_info = result.info
        condition = fit_info.get("condition_estimate")
        per_field["residual_rms"].append(float(result.residual_rms))
        per_field["iterations"].append(int(fit_info["iterations"]))
        per_field["converged"].append(int(bool(fit_info["converged"])))
        per_field["condition_estimate"].append(math.nan if condition is None else float(condition))
        per_field["observed_fraction"].append(float(fit_info["observed_fraction"]))
        if report:
            report.field_done()
    dims = (*batch_dims, "degree", "order")
    coords = {k: v for k, v in da.coords.items() if not (set(v.dims) & set(core))}
    units = da.attrs.get("units")
    label = str(da.name) if da.name is not None else "field"
    var_attrs = {"units": str(units)} if units is not None else {}
    ds = xr.Dataset(
        {COS: (dims, c_out.reshape(batch + (n, n)),
               {"long_name": f"cosine coefficient C_lm of {label}", **var_attrs}),
         SIN: (dims, s_out.reshape(batch + (n, n)),
               {"long_name": f"sine coefficient S_lm of {label}", **var_attrs})},
        coords=coords)
    ds = finish_coefficient_dataset(ds, lmax, norm, bool(condon_shortley), radius,
                                    None if units is None else str(units),
                                    None if da.name is None else str(da.name), da.attrs)
    ds.attrs.update(_fit_attributes(per_field, batch_dims, damping, prior))
    return ds


def _degree_zero_value(norm: str) -> float:
    """C_00 of the constant field 1 in normalisation ``norm`` (the degree-0 function is
    ``1 / sqrt(4 pi)`` orthonormal, 1 in the other three conventions)."""
    return math.sqrt(4 * math.pi) if norm == "orthonormal" else 1.0


def _fit_attributes(per_field: dict[str, list], batch_dims: list, damping: float,
                    prior: Any) -> dict[str, Any]:
    """The ``fit_*`` attributes: scalars for one field, arrays (one per field) for a batch."""
    attrs: dict[str, Any] = {
        "fit_method": METHOD_TEXT,
        "fit_damping": float(damping),
        "fit_prior": "none (identity)" if prior is None else "per-degree prior variances",
    }
    dtypes = {"iterations": np.int32, "converged": np.int8}
    for key, vals in per_field.items():
        arr = np.asarray(vals, dtype=dtypes.get(key, np.float64))
        attrs[f"fit_{key}"] = arr if batch_dims else arr[0]
    if batch_dims:
        attrs["fit_fields"] = " ".join(map(str, batch_dims))
    return attrs
