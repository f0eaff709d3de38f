"""The numbers of the report: shares of the variance, the fit range, smoothing radii,
degree bands and the table of key numbers of a field."""
from __future__ import annotations

import numpy as np

from sphex.harmonics import Harmonics
from sphex.report.page import Row
from sphex.spectra import degree_power

__all__ = ["SHARES", "EARTH_RADIUS_KM", "variance_degrees", "default_slope_range",
           "smoothing_radii", "degree_bands", "field_rows"]

#: Shares of the variance (degree 0 left out) whose degree the page states.
SHARES = (0.5, 0.9, 0.99)
#: Mean radius assumed for smoothing radii when the input states none (km; common practice).
EARTH_RADIUS_KM = 6371.0


def variance_degrees(power: np.ndarray, shares: tuple[float, ...] = SHARES) -> list[int]:
    """The smallest degree L at which degrees 1..L hold each share of the variance.

    Parameters
    ----------
    power : array over degree
        Degree power from degree 0; degree 0 (the mean) is left out.
    shares : tuple of float

    Returns
    -------
    list of int

    Examples
    --------
    >>> import numpy as np
    >>> variance_degrees(np.array([5.0, 1.0, 1.0, 2.0]), (0.5, 0.9))
    [2, 3]
    """
    p = np.asarray(power, dtype=float)[1:]
    total = p.sum()
    if p.size == 0 or not total > 0:
        raise ValueError("no variance above degree 0: the field is constant")
    cum = np.cumsum(p) / total
    return [int(np.searchsorted(cum, s * (1 - 1e-12)) + 1) for s in shares]


def default_slope_range(power: np.ndarray) -> tuple[int, int] | None:
    """Degrees of the power-law fit: from about a tenth of the top degree (at least 2) to nine
    tenths of it, within the positive part of the spectrum.  The top degree is the last one
    above 1e-10 of the largest power (beyond it a band-limited field has only rounding
    noise).  None when fewer than 4 degrees remain."""
    p = np.asarray(power, dtype=float)
    if p.size < 2:
        return None
    live = np.nonzero(p[1:] > 1e-10 * np.nanmax(p[1:]))[0]
    if live.size == 0:
        return None
    lmax = int(live[-1]) + 1
    l1 = max(2, int(round(lmax / 10)))
    l2 = lmax - max(1, int(round(lmax / 10))) if lmax >= 10 else lmax
    while l2 > l1 and not p[l2] > 0:
        l2 -= 1
    bad = np.nonzero(~(p[l1: l2 + 1] > 0))[0]
    if bad.size:
        l1 = l1 + int(bad[-1]) + 1
    return (l1, l2) if l2 - l1 >= 3 else None


def _nice(x: float) -> float:
    """x rounded to 1, 2, 3 or 5 times a power of ten."""
    e = 10.0 ** np.floor(np.log10(x))
    return float(min((1, 2, 3, 5, 10), key=lambda k: abs(np.log(k * e / x))) * e)


def smoothing_radii(lmax: int, radius_km: float) -> list[float]:
    """Three Gaussian radii (km) for the smoothed maps: round numbers near pi R / L for
    L = lmax/2, lmax/6 and lmax/18 (at least degree 1)."""
    out = []
    for div in (2, 6, 18):
        r = _nice(np.pi * radius_km / max(lmax / div, 1.0))
        if r not in out:
            out.append(r)
    return out


def degree_bands(lmax: int) -> list[tuple[int, int]]:
    """Degree bands of the series section: 1..lmax^(1/3), then ..lmax^(2/3), then ..lmax."""
    e1 = max(1, int(round(lmax ** (1 / 3))))
    e2 = max(e1 + 1, int(round(lmax ** (2 / 3))))
    edges = [b for b in ((1, e1), (e1 + 1, e2), (e2 + 1, lmax)) if b[0] <= b[1] <= lmax]
    return edges or [(1, lmax)]


def _degree_one(h: Harmonics) -> tuple[float, float, float]:
    """Amplitude (the maximum of the degree-1 part) and the latitude and longitude of that
    maximum: with orthonormal real coefficients the degree-1 part is v . x with
    v = sqrt(3 / 4 pi) (C_11, S_11, C_10) and x the unit position vector."""
    c, s = (np.asarray(a) for a in h.to(norm="orthonormal", condon_shortley=False).cos_sin())
    v = np.sqrt(3.0 / (4.0 * np.pi)) * np.array([c[1, 1], s[1, 1], c[1, 0]])
    amp = float(np.linalg.norm(v))
    if amp == 0.0:
        return 0.0, float("nan"), float("nan")
    return amp, float(np.degrees(np.arcsin(v[2] / amp))), float(np.degrees(np.arctan2(v[1], v[0])))



def field_rows(h: Harmonics, units: str, slope: tuple[float, int, int] | None,
                degrees: list[int]) -> list[Row]:
    p = degree_power(h)
    orthonormal = h.to(norm="orthonormal", condon_shortley=True)
    mean = float(orthonormal.coef[0, 0].real / np.sqrt(4.0 * np.pi))
    amp, lat1, lon1 = _degree_one(h)
    sq = _squared(units)
    rows = [
        Row("mean", "mean over the sphere", mean, units, "degree-0 term"),
        Row("rms", "RMS over the sphere", float(np.sqrt(p.sum())), units, "square root of the total power"),
        Row("variance", "variance without degree 0", float(p[1:].sum()), sq, "sum of degrees 1..lmax"),
        Row("power_0", "degree-0 power", float(p[0]), sq, "the mean squared"),
        Row("power_1", "degree-1 power", float(p[1]) if p.size > 1 else 0.0, sq, ""),
        Row("degree1_amplitude", "degree-1 amplitude", amp, units,
            f"largest at {lat1:.2f}\u00b0 N, {lon1:.2f}\u00b0 E" if amp else ""),
        Row("total_power", "total power", float(p.sum()), sq, "area mean of the square, degrees 0..lmax"),
    ]
    if slope is not None:
        rows.append(Row("slope", "power-law slope", slope[0], "",
                        f"fit over degrees {slope[1]}-{slope[2]}"))
    for share, deg in zip(SHARES, degrees):
        rows.append(Row(f"degree_{round(100 * share)}", f"{100 * share:g} % of the variance by degree",
                        float(deg), "", "degree 0 left out"))
    return rows


def _squared(units: str) -> str:
    if not units:
        return ""
    return f"({units})^2" if any(ch in units for ch in " /*.^") else f"{units}^2"

