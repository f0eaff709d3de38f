"""Potential models in netCDF: sphex's coefficient files with the model's constants.

A model file is a coefficient file in sphex's layout (see
:mod:`sphex.xr.coefficients`: ``cos_coef``/``sin_coef`` over ``degree`` and
``order``, the conventions and the reference radius as attributes) that also
carries

- the attribute ``model_kind`` (``"gravity"`` or ``"magnetic"``), and, when
  known, ``gm`` (with ``gm_units = "m3 s-2"``), ``model_name``,
  ``tide_system``, ``error_kind`` and ``model_header`` (the header entries
  of the file the model came from, as JSON text);
- the standard deviations of the coefficients, when known, as variables
  ``cos_sigma`` and ``sin_sigma`` of the same layout;
- for a model held at several epochs, a leading dimension ``epoch`` with
  the decimal years as its coordinate; a single epoch is the attribute
  ``epoch``.

:func:`write_model` writes a :class:`~sphex.models.PotentialModel` so that
:func:`read_model` gives it back identically (bit for bit, through the
exactness variables of the coefficient layout).  Importing :mod:`sphex.xr`
registers :func:`read_model` with :func:`sphex.models.register_model_reader`,
so that :func:`sphex.models.open_model` reads these files as well as the
exchange formats; :func:`open_model` here does the same without the import
having to come first.
"""
from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np
import xarray as xr

from sphex.harmonics import Harmonics
from sphex.models import PotentialModel, register_model_reader
from sphex.models import open_model as _open_any_model
from sphex.xr.coefficients import COS, SIN, exact_dataset_from_harmonics, is_coefficients, to_harmonics
from sphex.xr.files import open_netcdf, write_dataset
from sphex.xr.output import check_output_path

__all__ = ["write_model", "read_model", "open_model", "model_dataset", "is_netcdf_head",
           "SIGMA_COS", "SIGMA_SIN"]

SIGMA_COS = "cos_sigma"
SIGMA_SIN = "sin_sigma"
_EXACT = ("exact_re_steps", "exact_im_steps")
_SIGMA_EXACT = ("sigma_exact_re_steps", "sigma_exact_im_steps")
_NETCDF_HEADS = (b"CDF\x01", b"CDF\x02", b"CDF\x05", b"\x89HDF\r\n\x1a\n")


def is_netcdf_head(path: Path, head: bytes) -> bool:
    """Whether a file's first bytes are those of a netCDF (classic or netCDF-4) file."""
    return head.startswith(_NETCDF_HEADS)


def _with_epochs(ds: xr.Dataset, epoch) -> xr.Dataset:
    if epoch is None or np.ndim(epoch) == 0:
        return ds
    return ds.rename({"sample_0": "epoch"}).assign_coords(
        epoch=("epoch", np.asarray(epoch, dtype=np.float64), {"units": "decimal year"}))


def model_dataset(model: PotentialModel) -> xr.Dataset:
    """The Dataset :func:`write_model` writes (coefficients, sigmas, constants)."""
    if not isinstance(model, PotentialModel):
        raise ValueError(f"expected a sphex.models.PotentialModel, got {type(model).__name__}: "
                         "read one with sphex.models.open_model or build one")
    h = model.harmonics
    if h.coef.ndim > 3 or (h.coef.ndim == 3 and np.ndim(model.epoch) != 1):
        raise ValueError("a model file holds one field or one field per epoch; this model has "
                         f"batch shape {h.batch_shape} with epoch {model.epoch!r}")
    ds = _with_epochs(exact_dataset_from_harmonics(h, model.name or None), model.epoch)
    if model.sigmas is not None:
        sig = _with_epochs(exact_dataset_from_harmonics(model.sigmas, None), model.epoch)
        for old, new in zip((COS, SIN) + _EXACT, (SIGMA_COS, SIGMA_SIN) + _SIGMA_EXACT):
            if old in sig:
                ds[new] = sig[old].assign_attrs(
                    long_name=sig[old].attrs.get("long_name", "").replace("coefficient",
                                                                          "standard deviation of"))
        ds.attrs["sigma_normalization"] = model.sigmas.norm
        ds.attrs["sigma_phase_convention"] = ("condon-shortley" if model.sigmas.condon_shortley
                                              else "none")
    attrs = {"title": f"potential model {model.name}".strip() + " (sphex)",
             "model_kind": model.kind}
    if model.gm is not None:
        attrs.update(gm=float(model.gm), gm_units="m3 s-2")
    for key, value in (("model_name", model.name), ("tide_system", model.tide_system),
                       ("error_kind", model.errors), ("model_source", model.source)):
        if value:
            attrs[key] = str(value)
    if model.epoch is not None and np.ndim(model.epoch) == 0:
        attrs["epoch"] = float(model.epoch)
    if model.header:
        attrs["model_header"] = json.dumps(model.header, default=_json_value)
    ds.attrs.update(attrs)
    return ds


def _json_value(value):
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    return str(value)


def write_model(model: PotentialModel, path: str | os.PathLike, overwrite: bool = False) -> Path:
    """Write a potential model to a netCDF coefficient file.

    Parameters
    ----------
    model : PotentialModel
        Read from an exchange file (:func:`sphex.models.open_model`) or built.
    path : path-like
        Output file, written to a temporary file beside it and renamed.
    overwrite : bool
        Replace an existing file (default: refuse, and leave it untouched).

    Returns
    -------
    pathlib.Path

    Notes
    -----
    The file is an ordinary sphex coefficient file (any sphex command that
    reads coefficients reads it) with the model's constants as attributes;
    :func:`read_model` gives the model back identically, except ``source``,
    which becomes the new file.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from sphex import Harmonics
    >>> from sphex.models import PotentialModel
    >>> from sphex.xr import write_model, open_model
    >>> c = np.zeros((3, 3)); c[0, 0] = 1.0; c[2, 0] = -2.0e-4
    >>> h = Harmonics.from_cos_sin(c, 0 * c, norm="full", condon_shortley=False, radius=1.7e6)
    >>> path = os.path.join(tempfile.mkdtemp(), "tiny.nc")
    >>> _ = write_model(PotentialModel(harmonics=h, gm=4.9e12, name="tiny"), path)
    >>> m = open_model(path)
    >>> m.name, m.gm, m.lmax
    ('tiny', 4900000000000.0, 2)
    """
    check_output_path(path, overwrite)
    return write_dataset(model_dataset(model), path, overwrite)


def _sigmas(ds: xr.Dataset) -> Harmonics | None:
    if SIGMA_COS not in ds or SIGMA_SIN not in ds:
        return None
    names = {SIGMA_COS: COS, SIGMA_SIN: SIN, **dict(zip(_SIGMA_EXACT, _EXACT))}
    keep = [name for name in names if name in ds]
    sig = ds[keep].rename({k: names[k] for k in keep})
    sig.attrs = dict(ds.attrs)
    sig.attrs["normalization"] = ds.attrs.get("sigma_normalization", ds.attrs.get("normalization"))
    sig.attrs["phase_convention"] = ds.attrs.get("sigma_phase_convention",
                                                 ds.attrs.get("phase_convention"))
    # the attributes that restate the convention follow the sigmas' own convention
    from sphex.xr.conventions import NORM_MEANING

    norm = str(sig.attrs["normalization"])
    if norm in NORM_MEANING:
        sig.attrs["normalization_meaning"] = NORM_MEANING[norm]
    sig.attrs["condon_shortley_phase"] = np.int8(
        str(sig.attrs["phase_convention"]).lower() == "condon-shortley")
    sig.attrs.pop("real_form", None)
    return to_harmonics(sig)


def _choose_epoch(path: Path, h: Harmonics, sigmas, epochs: np.ndarray, epoch, extrapolate: bool):
    """The model at an epoch of a file with an ``epoch`` dimension (exact or linear)."""
    if epoch is None:
        return h, sigmas, epochs
    try:
        t = float(epoch)
    except (TypeError, ValueError):
        raise ValueError(f"epoch must be a decimal year such as 2020.5, got {epoch!r}") from None
    exact = np.flatnonzero(np.abs(epochs - t) <= 1e-9 * max(1.0, abs(t)))
    if exact.size:
        k = int(exact[0])
        picked = None if sigmas is None else sigmas.replace(coef=sigmas.coef[k])
        return h.replace(coef=h.coef[k]), picked, float(epochs[k])
    if not (epochs[0] < t < epochs[-1]) and not extrapolate:
        raise ValueError(f"{path}: epoch {t:g} is outside the file's epochs ({epochs[0]:g} to "
                         f"{epochs[-1]:g}); choose one in that range, or pass extrapolate=True")
    if epochs.size < 2:
        raise ValueError(f"{path}: one epoch ({epochs[0]:g}) cannot be extrapolated to {t:g}")
    k = int(np.clip(np.searchsorted(epochs, t) - 1, 0, epochs.size - 2))
    w = (t - epochs[k]) / (epochs[k + 1] - epochs[k])
    return h.replace(coef=(1.0 - w) * h.coef[k] + w * h.coef[k + 1]), None, t


def read_model(path: str | os.PathLike, epoch=None, *, extrapolate: bool = False,
               radius: float | None = None) -> PotentialModel:
    """Read a potential model from a netCDF coefficient file (as :func:`write_model` writes).

    Parameters
    ----------
    path : path-like
    epoch : float, optional
        For files with an ``epoch`` dimension: an epoch of the file, or one
        between two (linear interpolation; the sigmas are then dropped).
    extrapolate : bool
        Accept an epoch outside the file's range.
    radius : float, optional
        Reference radius (metres) for a coefficient file that does not state
        one; refused when the file states it.

    Returns
    -------
    PotentialModel

    Raises
    ------
    ValueError
        Not netCDF, not in the coefficient layout, no reference radius, an
        unknown ``model_kind``, an epoch the file cannot give.
    """
    path = Path(os.fspath(path))
    with open_netcdf(path) as opened:
        ds = opened.load()
    if not is_coefficients(ds):
        raise ValueError(f"{path} holds no sphex coefficients (variables cos_coef and sin_coef "
                         "over degree and order): it is not a model file")
    attrs = ds.attrs
    if radius is not None and "reference_radius" in attrs:
        raise ValueError(f"{path}: the file states its reference radius; drop radius={radius!r}")
    h = to_harmonics(ds)
    if radius is not None:
        h = h.replace(radius=float(radius))
    if h.radius is None:
        raise ValueError(f"{path} has no reference_radius attribute: pass radius= (metres), or "
                         "write the file with the radius set (Harmonics(..., radius=metres))")
    kind = str(attrs.get("model_kind", "magnetic" if h.units in ("nT", "T") else "gravity"))
    sigmas = _sigmas(ds)
    if "epoch" in ds.dims:
        h, sigmas, chosen = _choose_epoch(path, h, sigmas, np.asarray(ds["epoch"].values),
                                          epoch, extrapolate)
    elif epoch is not None:
        raise ValueError(f"{path}: the model has no epochs to choose from; drop epoch={epoch!r}")
    else:
        chosen = float(attrs["epoch"]) if "epoch" in attrs else None
    gm = float(attrs["gm"]) if "gm" in attrs else None
    if gm is not None and not (math.isfinite(gm) and gm > 0):
        raise ValueError(f"{path}: attribute gm must be a positive number of m3 s-2, got {gm!r}")
    header = json.loads(attrs["model_header"]) if "model_header" in attrs else {}
    return PotentialModel(harmonics=h, gm=gm, sigmas=sigmas,
                          name=str(attrs.get("model_name", attrs.get("field_name", path.stem))),
                          tide_system=_text(attrs.get("tide_system")), kind=kind, epoch=chosen,
                          errors=_text(attrs.get("error_kind")), source=str(path), header=header)


def _text(value) -> str | None:
    return None if value is None else str(value)


def open_model(path: str | os.PathLike, epoch=None, *, extrapolate: bool = False,
               radius: float | None = None) -> PotentialModel:
    """:func:`sphex.models.open_model` with the netCDF reader registered: reads the
    exchange formats and sphex's netCDF model files alike (same parameters)."""
    register_model_reader(is_netcdf_head, read_model)
    return _open_any_model(path, epoch, extrapolate=extrapolate, radius=radius)


register_model_reader(is_netcdf_head, read_model)
