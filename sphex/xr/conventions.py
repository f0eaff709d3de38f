"""Coefficient conventions written as attributes, and read back checked.

sphex states the conventions of every coefficient file in its attributes
(:func:`convention_attributes`): ``normalization`` and the sentence
``normalization_meaning``, ``phase_convention`` and the flag
``condon_shortley_phase``, ``lmax``, the ``real_form`` formula,
``reference_radius`` with ``reference_radius_units`` and ``units``.
:func:`read_conventions` reads each one back and checks them against each
other and against the data: an unknown value, or two attributes that
contradict each other, is a ValueError naming the attribute and the values
allowed.  A file that states no normalisation or no phase convention is read
with the documented defaults (``orthonormal``, Condon-Shortley phase) and a
:class:`MissingConventionWarning` says so.

:func:`ordered_by_labels` puts the data in the order of the values of the
``degree`` and ``order`` coordinates (refusing gaps, repeats, labels that do
not start at 0 and labels that are not whole numbers), and
:func:`check_layout` refuses values where no coefficient exists
(``order > degree``, and sine terms of order 0).
"""
from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr

from sphex.legendre import NORMS

__all__ = ["NORM_MEANING", "PHASES", "RADIUS_UNITS", "MissingConventionWarning",
           "convention_attributes", "real_form_text", "read_conventions", "conventions_stated",
           "ordered_by_labels", "check_lmax_attribute",
           "check_layout", "DEFAULT_NORM"]

COS = "cos_coef"
SIN = "sin_coef"
DEFAULT_NORM = "orthonormal"
NORM_MEANING = {
    "orthonormal": "integral of |Y_lm|^2 over the unit sphere is 1",
    "full": "integral of |Y_lm|^2 over the unit sphere is 4 pi",
    "schmidt": "integral of |Y_lm|^2 over the unit sphere is 4 pi/(2l+1)",
    "unnormalized": "plain associated Legendre functions, no normalisation",
}
#: ``phase_convention`` values and whether they mean the Condon-Shortley phase.
PHASES = {"condon-shortley": True, "none": False}
#: ``reference_radius_units`` values and their factor to metres.
RADIUS_UNITS = {"m": 1.0, "metre": 1.0, "metres": 1.0, "meter": 1.0, "meters": 1.0,
                "km": 1000.0}


class MissingConventionWarning(UserWarning):
    """A coefficient file does not state a convention; the documented default was used."""


def real_form_text(norm: str) -> str:
    """The ``real_form`` attribute: the real (cosine/sine) series of the coefficients."""
    return ("f = sum over l, m<=l of (cos_coef cos(m lon) + sin_coef sin(m lon)) r_m "
            "Lambda_lm(colat), r_0 = 1, r_m = " + ("1" if norm == "unnormalized" else "sqrt(2)")
            + " for m > 0; longitude east from the 0 meridian")


def convention_attributes(lmax: int, norm: str, cs: bool, radius: float | None,
                          units: str | None) -> dict:
    """The attributes sphex writes to state the conventions of coefficients."""
    attrs: dict[str, Any] = {
        "title": "spherical-harmonic coefficients (sphex)",
        "normalization": norm,
        "normalization_meaning": NORM_MEANING[norm],
        "phase_convention": "condon-shortley" if cs else "none",
        "condon_shortley_phase": np.int8(1 if cs else 0),
        "lmax": np.int32(lmax),
        "real_form": real_form_text(norm),
    }
    if radius is not None:
        attrs["reference_radius"] = float(radius)
        attrs["reference_radius_units"] = "m"
    if units is not None:
        attrs["units"] = str(units)
    return attrs


def _allowed(values: Any) -> str:
    return ", ".join(repr(v) for v in values)


def _shown(value: Any) -> str:
    """An attribute value as a file would show it (``3``, not ``np.int8(3)``)."""
    a = np.asarray(value)
    return repr(a.item()) if a.size == 1 else repr(a.tolist())


def _text(value: Any) -> str:
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    return " ".join(str(value).split())


def _read_norm(a: Mapping[str, Any]) -> str | None:
    if "normalization" not in a:
        return None
    norm = _text(a["normalization"]).lower()
    if norm not in NORMS:
        raise ValueError(f"unknown normalisation: attribute normalization = "
                         f"{_text(a['normalization'])!r} is not one of the values allowed: "
                         f"{_allowed(NORMS)}; correct the attribute")
    meaning = a.get("normalization_meaning")
    if meaning is not None and _text(meaning).lower() != NORM_MEANING[norm].lower():
        others = [n for n, text in NORM_MEANING.items() if text.lower() == _text(meaning).lower()]
        said = f"describes {others[0]!r}" if others else f"is {_text(meaning)!r}"
        raise ValueError(f"attribute normalization = {norm!r} but normalization_meaning {said}; "
                         f"for {norm!r} it reads {NORM_MEANING[norm]!r}: correct one of them")
    form = a.get("real_form")
    if form is not None:
        text = _text(form)
        r_m = "1" if norm == "unnormalized" else "sqrt(2)"
        other = "sqrt(2)" if r_m == "1" else "1"
        if f"r_m = {other} for m > 0" in text:
            raise ValueError(f"attribute real_form says r_m = {other} for m > 0, which contradicts "
                             f"normalization = {norm!r} (r_m = {r_m}); correct one of them")
    return norm


def _read_phase(a: Mapping[str, Any]) -> bool | None:
    text = flag = None
    if "phase_convention" in a:
        word = _text(a["phase_convention"]).lower()
        if word not in PHASES:
            raise ValueError(f"unknown phase convention: attribute phase_convention = "
                             f"{_text(a['phase_convention'])!r} is not one of the values allowed: "
                             f"{_allowed(PHASES)}; correct the attribute")
        text = PHASES[word]
    if "condon_shortley_phase" in a:
        raw = a["condon_shortley_phase"]
        value = np.asarray(raw).reshape(-1)
        if value.size != 1 or value.dtype.kind not in "iub" or int(value[0]) not in (0, 1):
            raise ValueError(f"attribute condon_shortley_phase = {_shown(raw)} is not one of the values "
                             "allowed: 1 (with the phase (-1)^m), 0 (without); correct the attribute")
        flag = bool(int(value[0]))
    if text is not None and flag is not None and text != flag:
        raise ValueError(f"attributes phase_convention = {_text(a['phase_convention'])!r} and "
                         f"condon_shortley_phase = {int(flag)} contradict each other; correct one "
                         "of them ('condon-shortley' goes with 1, 'none' with 0)")
    return text if text is not None else flag


def _read_radius(a: Mapping[str, Any]) -> float | None:
    if "reference_radius" not in a:
        if "reference_radius_units" in a:
            raise ValueError("attribute reference_radius_units is set but reference_radius is "
                             "missing; add reference_radius or remove the units")
        return None
    raw = a["reference_radius"]
    try:
        value = float(np.asarray(raw).reshape(-1)[0]) if np.size(raw) == 1 else math.nan
    except (TypeError, ValueError):
        value = math.nan
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"attribute reference_radius = {_shown(raw)} is not a positive number; "
                         "give the radius in metres")
    units = _text(a.get("reference_radius_units", "m")).lower()
    if units not in RADIUS_UNITS:
        raise ValueError(f"attribute reference_radius_units = "
                         f"{_text(a['reference_radius_units'])!r} is not one of the values "
                         f"allowed: {_allowed(RADIUS_UNITS)}; correct the attribute")
    return value * RADIUS_UNITS[units]


def _read_units(ds: xr.Dataset) -> str | None:
    units = ds.attrs.get("units")
    for name in (COS, SIN):
        if name in ds and "units" in ds[name].attrs:
            var_units = _text(ds[name].attrs["units"])
            if units is None:
                units = var_units
            elif var_units != _text(units):
                raise ValueError(f"attribute units = {_text(units)!r} but variable {name} has "
                                 f"units {var_units!r}; correct one of them")
    return None if units is None else _text(units)


def check_lmax_attribute(ds: xr.Dataset) -> None:
    """Refuse an ``lmax`` attribute that disagrees with the degrees the data hold."""
    if "lmax" not in ds.attrs:
        return
    raw = ds.attrs["lmax"]
    value = np.asarray(raw).reshape(-1)
    data_lmax = ds.sizes["degree"] - 1
    if value.size != 1 or value.dtype.kind not in "iu":
        raise ValueError(f"attribute lmax = {_shown(raw)} is not a whole number; it should be "
                         f"{data_lmax}, the highest degree of the data")
    if int(value[0]) != data_lmax:
        raise ValueError(f"attribute lmax = {int(value[0])} but the data hold degrees "
                         f"0..{data_lmax}; the file is inconsistent (truncated or edited): correct "
                         "the attribute or the data")


def read_conventions(ds: xr.Dataset, where: str = "the coefficients",
                     term: str = "attribute") -> dict[str, Any]:
    """The conventions a coefficient Dataset states in its attributes, checked.

    Parameters
    ----------
    ds : xarray.Dataset
    where : str
        What the Dataset is, for the messages (a file name).
    term : str
        What holds the conventions, for the warning (a text table's ``"header line"``).

    Returns
    -------
    dict
        ``norm``, ``condon_shortley``, ``radius`` (metres or None) and
        ``units`` (or None), as :func:`~sphex.xr.coefficients.harmonics_from_cos_sin`
        takes them.

    Raises
    ------
    ValueError
        An attribute with a value not allowed, or two that contradict each
        other; the message names them and the values allowed.

    Warns
    -----
    MissingConventionWarning
        When the normalisation or the phase convention is not stated (the
        defaults, ``orthonormal`` and the Condon-Shortley phase, are used).
    """
    a = ds.attrs
    try:
        norm = _read_norm(a)
        cs = _read_phase(a)
        radius = _read_radius(a)
        units = _read_units(ds)
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None
    missing = []
    if norm is None:
        norm = DEFAULT_NORM
        missing.append(f"no normalization {term}, read as {DEFAULT_NORM!r}")
    if cs is None:
        cs = True
        missing.append(f"no phase_convention or condon_shortley_phase {term}, read with the "
                       "Condon-Shortley phase")
    if missing:
        warnings.warn(f"{where}: {'; '.join(missing)} (the documented defaults); if that is "
                      f"wrong, state the conventions ({term}s normalization and phase_convention)",
                      MissingConventionWarning, stacklevel=3)
    return {"norm": norm, "condon_shortley": bool(cs), "radius": radius, "units": units}


def conventions_stated(ds: xr.Dataset, where: str = "the coefficients") -> xr.Dataset:
    """``ds`` with its conventions checked (:func:`read_conventions`, which warns about
    missing ones) and the defaults it was read with written into its attributes, so
    that later readers of the Dataset see them stated."""
    conv = read_conventions(ds, where)
    if "normalization" in ds.attrs and ("phase_convention" in ds.attrs
                                        or "condon_shortley_phase" in ds.attrs):
        return ds
    cs = conv["condon_shortley"]
    stated = {"normalization": conv["norm"], "phase_convention": "condon-shortley" if cs else "none",
              "condon_shortley_phase": np.int8(1 if cs else 0)}
    return ds.assign_attrs({k: v for k, v in stated.items() if k not in ds.attrs})


def _whole_labels(ds: xr.Dataset, dim: str) -> np.ndarray | None:
    """The labels of ``dim`` as int64 (None when the dimension has no coordinate)."""
    if dim not in ds.coords:
        return None
    raw = np.asarray(ds[dim].values)
    if raw.dtype.kind in "iu":
        return raw.astype(np.int64)
    if raw.dtype.kind == "f" and np.all(np.isfinite(raw)) and np.all(raw == np.round(raw)):
        return raw.astype(np.int64)
    shown = ", ".join(str(v) for v in raw[:5])
    raise ValueError(f"the {dim} coordinate holds labels that are not whole numbers "
                     f"({shown}{', ...' if raw.size > 5 else ''}); label {dim}s 0, 1, 2, ...")


def ordered_by_labels(ds: xr.Dataset, where: str = "the coefficients") -> xr.Dataset:
    """``ds`` with its data in the order of the ``degree`` and ``order`` labels (0, 1, ...).

    The coefficients are read by the values of their ``degree`` and ``order``
    coordinates, not by position: labels in any order are sorted.  Without a
    coordinate the position is the label.

    Raises
    ------
    ValueError
        Labels that repeat, skip a value, do not start at 0, or are not whole
        numbers.
    """
    take = {}
    for dim in ("degree", "order"):
        try:
            labels = _whole_labels(ds, dim)
        except ValueError as exc:
            raise ValueError(f"{where}: {exc}") from None
        if labels is None:
            continue
        values, counts = np.unique(labels, return_counts=True)
        if np.any(counts > 1):
            raise ValueError(f"{where}: {dim} {int(values[np.argmax(counts > 1)])} appears "
                             f"{int(counts.max())} times in the {dim} coordinate; each {dim} "
                             "must appear once")
        if values[0] != 0:
            raise ValueError(f"{where}: the {dim} labels start at {int(values[0])}, not 0; "
                             f"sphex needs every {dim} from 0 (add the missing ones as zeros)")
        if values[-1] != values.size - 1:
            gap = int(np.flatnonzero(np.diff(values) > 1)[0])
            raise ValueError(f"{where}: the {dim} labels skip {int(values[gap]) + 1} (they run "
                             f"0..{int(values[-1])} with gaps); add the missing {dim}s as zeros")
        if np.any(np.diff(labels) < 0):
            take[dim] = np.argsort(labels, kind="stable")
    if take:
        ds = ds.isel(take)
    return ds


def check_layout(ds: xr.Dataset, where: str = "the coefficients") -> None:
    """Refuse NaN or inf, and values where no coefficient exists: ``order > degree`` in
    either variable, and ``sin_coef`` at order 0.  Such values mean the data are not in sphex's layout
    (degree and order swapped, for instance) and would be dropped silently.
    Only in-memory data are checked."""
    for name in (COS, SIN):
        var = ds[name]
        if not isinstance(var.data, np.ndarray):
            continue
        v = np.asarray(var.transpose(..., "degree", "order").values)
        if v.dtype.kind == "f" and not np.all(np.isfinite(v)):
            bad = ~np.isfinite(v)
            at = np.unravel_index(int(np.flatnonzero(bad)[0]), v.shape)
            raise ValueError(f"{where}: {name} holds {int(bad.sum())} NaN or inf value"
                             f"{'s' if bad.sum() != 1 else ''} (first at degree {int(at[-2])}, "
                             f"order {int(at[-1])}; a fill value decodes to NaN); every "
                             "coefficient must be a number: store missing ones as 0")
        n = v.shape[-1]
        upper = np.triu(np.ones((v.shape[-2], n), dtype=bool), k=1)
        bad = np.abs(v[..., upper]) > 0
        if np.any(bad):
            l_idx, m_idx = np.nonzero(upper)
            k = int(np.flatnonzero(bad.reshape(-1, bad.shape[-1]).any(axis=0))[0])
            raise ValueError(f"{where}: {name} is not zero at degree {int(l_idx[k])}, order "
                             f"{int(m_idx[k])}, where no coefficient exists (order > degree); "
                             "are the degree and order dimensions swapped? Store C_lm at "
                             "[degree=l, order=m] with zeros above the diagonal")
        if name == SIN and np.any(v[..., :, 0] != 0):
            raise ValueError(f"{where}: sin_coef is not zero at order 0, where the sine term "
                             "vanishes (sin(0 lon) = 0); the data are not in sphex's layout: "
                             "store S_lm at [degree=l, order=m]")
