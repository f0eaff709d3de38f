"""Invented test fields shared by the checks of the xarray layer (seeded, band-limited)."""
from __future__ import annotations

import numpy as np
import xarray as xr

import sphex

#: Degree limit of the daily series of the dask checks (the ``series`` fixture, Gauss grid 16 x 32).
SERIES_LMAX = 15


def random_harmonics(rng, lmax, batch=(), norm="orthonormal", cs=True, radius=None, units=None):
    coef = np.zeros(batch + (lmax + 1, lmax + 1), dtype=complex)
    for l in range(lmax + 1):
        coef[..., l, : l + 1] = rng.normal(size=batch + (l + 1,)) + 1j * rng.normal(size=batch + (l + 1,))
    coef[..., 0] = coef[..., 0].real
    return sphex.Harmonics(coef, norm=norm, condon_shortley=cs, radius=radius, units=units)


def band_limited_field(lat, lon, lat0=0.0):
    """A band-limited test field (degree <= 3) written in latitude/longitude.

    Products of sin(lat), cos(lat)^k cos(k lon) of total degree <= 3 lie in the span
    of the harmonics of degree <= 3 (common practice)."""
    la, lo = np.deg2rad(lat)[:, None], np.deg2rad(lon)[None, :]
    return (1.5 + np.sin(la) + np.cos(la) ** 2 * np.cos(2 * lo - 0.3)
            + np.sin(la) * np.cos(la) ** 2 * np.sin(2 * lo) + np.cos(la) ** 3 * np.cos(3 * lo))


def field_dataarray(lat, lon, dims=("lat", "lon"), name="f", **attrs):
    return xr.DataArray(band_limited_field(lat, lon), dims=dims, coords={dims[0]: lat, dims[1]: lon},
                        name=name, attrs=attrs)


def band_limited_series(rng: np.random.Generator, n: int, lmax: int, grid: sphex.Grid) -> np.ndarray:
    """n random fields band-limited to lmax, synthesised on grid (analysis is exact)."""
    coef = rng.standard_normal((n, lmax + 1, lmax + 1)) + 1j * rng.standard_normal((n, lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[..., 0] = coef[..., 0].real
    return sphex.synthesize(sphex.Harmonics(coef), grid)
