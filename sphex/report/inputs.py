"""Inputs of the report: a gridded netCDF variable, a coefficient file or a model file,
read and analysed into a :class:`Subject`."""
from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sphex.harmonics import Harmonics

__all__ = ["Subject", "read_subject"]

Progress = Callable[[int, int], None]


@dataclass
class Subject:
    """An input of the report, read and analysed.

    Attributes
    ----------
    path, variable : str
        The file and the variable (None for coefficient and model files).
    kind : str
        ``"grid"``, ``"coefficients"`` or ``"model"``.
    harmonics : Harmonics
        Coefficients in the "orthonormal" normalisation with the
        Condon-Shortley phase (models: in the model's own convention); one
        leading batch axis of ``steps`` entries, or none.
    steps : list of str
        Labels of the steps of a series (empty for a single field).
    step_name : str
        What the steps are (``"time"``, ...).
    grid : Grid or None
        The input's grid (gridded inputs).
    values : ndarray or None
        The input's values on ``grid`` (columns in the grid's order), with the batch axis.
    describe : str
        Grid kind and exact limit, or what the coefficients are.
    norm : str
        Normalisation stated for the input.
    units : str
    radius_km : float or None
        Planet or reference radius, when the input states one.
    model : PotentialModel or None
    long_name : str
        What the field is (its ``long_name``), for titles and colour bars.
    """

    path: str
    variable: str | None
    kind: str
    harmonics: Harmonics
    describe: str
    norm: str
    units: str = ""
    steps: list = field(default_factory=list)
    step_name: str = ""
    grid: Any = None
    values: Any = None
    radius_km: float | None = None
    model: Any = None
    long_name: str = ""

    @property
    def mean_harmonics(self) -> Harmonics:
        """The single field (or the mean of a series: the coefficients are linear)."""
        h = self.harmonics
        if not h.batch_shape:
            return h
        return Harmonics(h.coef.mean(axis=0), norm=h.norm, condon_shortley=h.condon_shortley,
                         radius=h.radius, units=h.units)

    @property
    def mean_values(self) -> np.ndarray | None:
        if self.values is None:
            return None
        return self.values.mean(axis=0) if self.steps else self.values

    @property
    def label(self) -> str:
        return f"{Path(self.path).name}" + (f" ({self.variable})" if self.variable else "")


# ---------------------------------------------------------------------------
# reading the input
# ---------------------------------------------------------------------------
def _input_kind(path: str) -> str:
    """``"model"``, ``"coefficients"`` or ``"grid"``, from the file's content."""
    from sphex.xr.coefficients import is_coefficients
    from sphex.xr.files import open_netcdf
    from sphex.xr.models import is_netcdf_head
    from sphex.xr.tables import is_table_file

    p = Path(path)
    if not p.is_file():
        raise ValueError(f"{path}: no such file; give a netCDF grid, a coefficient file or a "
                         "model file")
    with open(p, "rb") as f:
        head = f.read(1024)
    if not is_netcdf_head(p, head):
        return "coefficients" if is_table_file(p) else "model"
    ds = open_netcdf(p)
    try:
        if "model_kind" in ds.attrs:
            return "model"
        return "coefficients" if is_coefficients(ds) else "grid"
    finally:
        ds.close()


def _step_labels(da: Any, dims: list[str]) -> list[str]:
    if not dims:
        return []
    stacked = da.stack(__step__=dims)["__step__"].values
    out = []
    for idx in stacked:
        idx = idx if isinstance(idx, tuple) else (idx,)
        parts = []
        for v in idx:
            if isinstance(v, np.datetime64) or hasattr(v, "to_datetime64"):
                parts.append(str(np.datetime_as_string(np.datetime64(v, "m"))))
            else:
                parts.append(str(v))
        out.append(" ".join(parts))
    return out


def _read_grid(path: str, variable: str | None, lmax: int | None, progress: Progress | None):
    import sphex.xr as sxr
    from sphex.xr.coords import check_lmax, find_grid
    from sphex.xr.files import open_netcdf

    ds = open_netcdf(path)
    try:
        if variable is None:
            names = []
            for k, v in ds.data_vars.items():
                try:
                    find_grid(v)
                    names.append(str(k))
                except ValueError:
                    pass
            if len(names) != 1:
                listed = ", ".join(map(str, ds.data_vars)) or "none"
                raise ValueError(f"{path}: choose a variable with -v (variables: {listed})")
            variable = names[0]
        if variable not in ds.data_vars:
            listed = ", ".join(map(str, ds.data_vars)) or "none"
            raise ValueError(f"{path} has no variable {variable!r} (variables: {listed})")
        da = ds[variable].load()
        attrs = dict(ds.attrs)
    finally:
        ds.close()
    info = find_grid(da)
    lmax = check_lmax(lmax, info.grid, False, f"variable {variable!r}")
    extra = [str(d) for d in da.dims if d not in (info.lat_dim, info.lon_dim)]
    coef = sxr.analyze(da, lmax, progress=progress)
    h = sxr.to_harmonics(coef)
    values = np.asarray(da.transpose(*extra, info.lat_dim, info.lon_dim).values, dtype=float)
    values = values.reshape((-1,) + values.shape[-2:])[..., list(info.take)]
    steps = _step_labels(da, extra)
    h = Harmonics(h.coef.reshape((-1,) + h.coef.shape[-2:]) if steps else h.coef,
                  norm=h.norm, condon_shortley=h.condon_shortley, units=h.units)
    radius = attrs.get("planet_radius_km")
    return Subject(path, variable, "grid", h, info.describe(), "orthonormal (sphex's analysis)",
                   units=str(da.attrs.get("units", "")), steps=steps, step_name=" ".join(extra),
                   grid=info.grid, values=values if steps else values[0],
                   radius_km=float(radius) if radius is not None else None,
                   long_name=str(da.attrs.get("long_name", variable)))


def _read_coefficients(path: str, lmax: int | None) -> Subject:
    import sphex.xr as sxr

    ds = sxr.open_coefficients(path)
    top = ds.sizes["degree"] - 1
    if lmax is not None:
        if lmax > top:
            raise ValueError(f"--lmax {lmax} is above the file's highest degree {top}; "
                             f"give at most {top}")
        ds = ds.isel(degree=slice(0, lmax + 1), order=slice(0, lmax + 1))
    extra = [str(d) for d in ds[sxr.COS].dims if d not in ("degree", "order")]
    h0 = sxr.to_harmonics(ds)
    h = h0.to(norm="orthonormal", condon_shortley=True)
    steps = _step_labels(ds[sxr.COS].isel(degree=0, order=0), extra)
    coef = h.coef.reshape((-1,) + h.coef.shape[-2:]) if steps else h.coef
    radius = ds.attrs.get("reference_radius")
    return Subject(path, None, "coefficients", Harmonics(coef, units=h.units),
                   f"coefficients to degree {h.lmax} (no grid)", h0.norm,
                   units=str(ds.attrs.get("units", "") or ""), steps=steps,
                   step_name=" ".join(extra),
                   radius_km=float(radius) / 1e3 if radius is not None else None,
                   long_name=str(ds.attrs.get("field_name", "field")))


def _read_model(path: str, lmax: int | None) -> Subject:
    from sphex.models import open_model

    model = open_model(path)
    if model.harmonics.batch_shape:
        raise ValueError(f"{path} holds {model.harmonics.batch_shape[0]} epochs; the report takes "
                         "one model (write one epoch with 'sphex geomagnetic --epoch')")
    if lmax is not None:
        if lmax > model.lmax:
            raise ValueError(f"--lmax {lmax} is above the model's degree {model.lmax}")
    h = model.harmonics if lmax is None else model.harmonics.truncate(lmax)
    return Subject(path, None, "model", h,
                   f"{model.kind} model {model.name or Path(path).name} to degree {h.lmax}",
                   h.norm, units=h.units or "", radius_km=h.radius / 1e3 if h.radius else None,
                   model=model, long_name=f"{model.kind} potential coefficients")


def read_subject(path: str | os.PathLike, variable: str | None = None, lmax: int | None = None,
                 progress: Progress | None = None) -> Subject:
    """Read and analyse an input of the report.

    Parameters
    ----------
    path : path-like
        netCDF grid file, coefficient file (netCDF or text table) or model
        file (gravity exchange, ``.shc``, sphex netCDF model).
    variable : str, optional
        Variable of a grid file (needed when it holds several).
    lmax : int, optional
        Degree limit (default the grid's exact limit, or all of the file's degrees).
    progress : callable, optional
        ``progress(done, total)`` during the analysis of a series.

    Returns
    -------
    Subject

    Raises
    ------
    ValueError
        No such file, no usable variable, ``lmax`` too high.
    """
    path = str(path)
    kind = _input_kind(path)
    if kind == "model":
        return _read_model(path, lmax)
    if variable is not None and kind == "coefficients":
        raise ValueError(f"{path} is a coefficient file; -v chooses a variable of a grid file, "
                         "leave it out")
    if kind == "coefficients":
        return _read_coefficients(path, lmax)
    return _read_grid(path, variable, lmax, progress)

