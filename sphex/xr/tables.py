"""Plain text tables of one field's coefficients (``degree order cosine sine [sigmas]``).

:func:`write_table` writes 17 significant digits, so reading back with
:func:`read_table` is exact; a ``#`` header states the conventions as
``key: value`` lines.  Tables made by hand the same way are read too.
"""
from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import xarray as xr

from sphex.harmonics import Harmonics
from sphex.limits import check_memory
from sphex.xr.coefficients import harmonics_from_cos_sin, to_harmonics
from sphex.xr.conventions import read_conventions
from sphex.xr.output import atomic_output

__all__ = ["is_table_file", "write_table", "read_table"]

_TABLE_MAGIC = "# sphex coefficient table"


def is_table_file(path: str | os.PathLike) -> bool:
    """Whether ``path`` names a text table (by its suffix, or by sphex's first line)."""
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

    Rows may come in any order and orders left out are 0; the table runs to
    the highest degree of its rows.  Header lines ``# key: value`` give
    ``normalization`` (default ``orthonormal``), ``phase_convention``
    (``condon-shortley`` or ``none``; default ``condon-shortley``), ``lmax``
    (when given, it must be the highest degree of the rows),
    ``reference_radius_m`` and ``units``.  A missing normalisation or phase
    convention is warned about (``MissingConventionWarning``).

    Parameters
    ----------
    path : path-like

    Returns
    -------
    (Harmonics, (sigma_C, sigma_S) or None)

    Raises
    ------
    ValueError
        Malformed rows, order above degree, repeated rows, unknown
        conventions, a header ``lmax`` other than the rows' highest degree.
    """
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(f"no such file: {str(p)!r}")
    meta, a = _read_rows(p)
    l_idx, m_idx = a[:, 0].astype(int), a[:, 1].astype(int)
    if np.any(a[:, 0] != l_idx) or np.any(a[:, 1] != m_idx) or np.any(m_idx < 0):
        raise ValueError(f"{str(p)!r}: degree and order must be whole numbers >= 0")
    if np.any(m_idx > l_idx):
        raise ValueError(f"{str(p)!r}: a row has order above its degree")
    lmax = int(l_idx.max())  # sized from the rows read, never from the header alone
    _check_header_lmax(p, meta, lmax)
    key = l_idx * (lmax + 1) + m_idx
    if np.unique(key).size != key.size:
        raise ValueError(f"{str(p)!r}: some degree/order pair appears twice")
    check_memory(16.0 * (lmax + 1) ** 2 * (2 if a.shape[1] == 6 else 1),
                 f"the coefficient table {str(p)!r} to degree {lmax}", "use a smaller table")
    conv = read_conventions(_header_attributes(p, meta), str(p), term="header line")
    c = np.zeros((lmax + 1, lmax + 1))
    s = np.zeros((lmax + 1, lmax + 1))
    c[l_idx, m_idx] = a[:, 2]
    s[l_idx, m_idx] = a[:, 3]
    sigma = None
    if a.shape[1] == 6:
        sc = np.zeros_like(c)
        ss = np.zeros_like(s)
        sc[l_idx, m_idx] = a[:, 4]
        ss[l_idx, m_idx] = a[:, 5]
        sigma = (sc, ss)
    return harmonics_from_cos_sin(c, s, conv), sigma


def _check_header_lmax(p: Path, meta: dict[str, str], lmax: int) -> None:
    """Refuse a header ``lmax`` that is not the highest degree of the rows."""
    if "lmax" not in meta:
        return
    text = meta["lmax"]
    if not text.strip().isdigit():
        raise ValueError(f"{str(p)!r}: header lmax {text!r} is not a whole number; it should be "
                         f"{lmax}, the highest degree of the rows")
    if int(text) != lmax:
        raise ValueError(f"{str(p)!r}: the header says lmax {int(text)} but the rows run to "
                         f"degree {lmax}; the table is truncated or its header is wrong: correct "
                         f"the header (lmax: {lmax}) or add the missing rows (zeros included)")


def _header_attributes(p: Path, meta: dict[str, str]) -> xr.Dataset:
    """The header's conventions as the attributes of a coefficient file, for checking."""
    attrs: dict[str, object] = {}
    for key in ("normalization", "phase_convention", "units"):
        if key in meta:
            attrs[key] = meta[key]
    if "reference_radius_m" in meta:
        try:
            attrs["reference_radius"] = float(meta["reference_radius_m"])
        except ValueError:
            raise ValueError(f"{str(p)!r}: header reference_radius_m "
                             f"{meta['reference_radius_m']!r} is not a number; give the radius "
                             "in metres") from None
        attrs["reference_radius_units"] = "m"
    return xr.Dataset(attrs=attrs)


def _read_rows(p: Path) -> tuple[dict[str, str], np.ndarray]:
    """The ``# key: value`` header lines and the numeric rows (4 or 6 columns) of a table."""
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
                row = [float(x) for x in parts]
            except ValueError:
                raise ValueError(f"{str(p)!r} line {i}: not a number in {t[:60]!r}") from None
            if not all(math.isfinite(x) for x in row):
                raise ValueError(f"{str(p)!r} line {i}: NaN or inf in {t[:60]!r}; every entry "
                                 "must be a finite number")
            rows.append(row)
    if not rows:
        raise ValueError(f"{str(p)!r} holds no coefficient rows")
    if len({len(r) for r in rows}) != 1:
        raise ValueError(f"{str(p)!r}: rows mix 4 and 6 columns")
    return meta, np.array(rows, dtype=np.float64)
