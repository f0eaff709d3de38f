r"""Localised (multitaper) spectral analysis with spherical-cap concentration windows.

A global spectrum mixes every region of a planet.  The localised spectrum of
a region is the spectrum of the field multiplied by a window that is
concentrated in a spherical cap of angular radius ``theta0`` around the
region's centre (Wieczorek & Simons 2005).  The windows are the
band-limited functions (degrees ``0..lwin``) that put the largest fraction
``lambda`` of their energy inside the cap (Simons, Dahlen & Wieczorek
2006); averaging the spectra obtained with the several well-concentrated
windows (the multitaper method) lowers the variance of the estimate and
gives an error bar from the spread between windows.

Windows
-------
The windows of a polar cap, all orders, sorted by concentration, come from
:func:`cap_windows` (:mod:`sphex.concentration`: the tridiagonal operator
that commutes with the concentration operator, order by order, with exact
quadrature of the concentration factors).  Order 0 gives the zonal windows;
each order ``m > 0`` a cos/sin pair with one concentration factor.

Multitaper estimate
-------------------
To estimate the spectrum at a centre, the field is rotated so that the
centre lies at the north pole (:func:`sphex.rotation.rotate`), multiplied on
a Gauss grid (exact for the product, degree ``lmax + lwin``) by each window
scaled to unit mean square, and analysed; the spectra of the products are
averaged over the windows.  For a stationary random field of spectrum
``S_j`` the expectation is (Wieczorek & Simons 2005)

    E[S_local(l)] = sum_j M_lj S_j,
    M_lj = (2l + 1) sum_i P_w(i) (i j l; 0 0 0)^2,

where ``P_w(i)`` is the degree power of the windows averaged over the
windows used (it sums to 1) and ``(i j l; 0 0 0)`` a Wigner 3j symbol.  Each
localised degree ``l`` blends global degrees ``|l - lwin| .. l + lwin``;
the estimate is reliable for ``lwin <= l <= lmax - lwin``: below ``lwin``
the window's own spectrum dominates the blend, above ``lmax - lwin`` the
blend needs global degrees beyond ``lmax`` that the coefficients do not
hold.

References
----------
Wieczorek, M. A., Simons, F. J. (2005), Localized spectral analysis on the
sphere, Geophys. J. Int. 162, 655-675.
Simons, F. J., Dahlen, F. A., Wieczorek, M. A. (2006), Spatiospectral
concentration on a sphere, SIAM Review 48, 504-536.
Wieczorek, M. A., Simons, F. J. (2007), Minimum-variance multitaper
spectral estimation on the sphere, J. Fourier Anal. Appl. 13, 665-692.
"""
from __future__ import annotations

import functools
import math
import numbers
from dataclasses import dataclass

import numpy as np

from sphex.concentration import (
    DEFAULT_MIN_CONCENTRATION, CapWindows, cap_windows, check_min_concentration,
)
from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.rotation import rotate
from sphex.spectra import cross_power, degree_power
from sphex.transform import analyze, synthesize

__all__ = [
    "CapWindows",
    "cap_windows",
    "LocalSpectrum",
    "LocalRatio",
    "local_power",
    "local_cross_power",
    "local_admittance",
    "local_correlation",
    "local_coupling_matrix",
    "expected_local_power",
    "squared_3j_zero_orders",
]

PRODUCT_BYTES = 1 << 25  # grid values of windowed fields held at once (32 MB)


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def _check_degree(value, name: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
        raise ValueError(f"{name} must be a non-negative integer, got {value!r}")
    return int(value)


def _check_centre(lat, lon) -> tuple[float, float]:
    for name, v in (("lat", lat), ("lon", lon)):
        if isinstance(v, bool) or not isinstance(v, (numbers.Real, np.floating, np.integer)) \
                or not math.isfinite(float(v)):
            raise ValueError(f"{name} must be a finite number of degrees, got {v!r}")
    if not -90.0 <= float(lat) <= 90.0:
        raise ValueError(f"lat must lie in [-90, 90] degrees, got {lat!r} "
                         "(are latitude and longitude swapped?)")
    return float(lat), float(lon)


def _check_harmonics(h, name: str) -> Harmonics:
    if not isinstance(h, Harmonics):
        raise ValueError(f"{name} must be a sphex.Harmonics (got {type(h).__name__}); "
                         "make one with sphex.analyze(values, grid)")
    return h



def _select_windows(windows: CapWindows, n_windows, min_concentration) -> np.ndarray:
    total = windows.concentration.size
    if n_windows is not None:
        if isinstance(n_windows, bool) or not isinstance(n_windows, (int, np.integer)) \
                or not 1 <= n_windows <= total:
            raise ValueError(f"n_windows must be an integer from 1 to {total} (the number of windows "
                             f"up to degree {windows.lwin}), got {n_windows!r}")
        return np.arange(int(n_windows))
    count = windows.count_above(min_concentration)
    if count == 0:
        raise ValueError(
            f"no window of a {windows.cap_radius_deg:g}-degree cap up to degree {windows.lwin} is "
            f"concentrated to {min_concentration:g} (the best reaches "
            f"{windows.concentration[0]:.4f}): raise lwin or the cap radius, lower "
            "min_concentration, or pass n_windows")
    return np.arange(count)


def _window_power(windows: CapWindows, index: np.ndarray) -> np.ndarray:
    """Degree power of the unit-mean-square windows, averaged over ``index``: sums to 1."""
    return np.mean(np.asarray(windows.coefficients)[index] ** 2, axis=0)


# ---------------------------------------------------------------------------
# Wigner 3j symbols with zero orders and the coupling matrix
# ---------------------------------------------------------------------------
@functools.lru_cache(maxsize=4)
def _central_table(size: int) -> np.ndarray:
    """binom(2a, a) / 4^a for a < size, accumulated in long double."""
    a = np.arange(1, size, dtype=np.longdouble)
    table = np.concatenate([[np.longdouble(1)], np.cumprod((2 * a - 1) / (2 * a))]).astype(np.float64)
    table.setflags(write=False)
    return table


def _central(n: int) -> np.ndarray:
    return _central_table(max(64, 1 << int(np.ceil(np.log2(n + 1)))))[: n + 1]


def _squared_3j_steps(l1: int, l2: np.ndarray):
    """Yield (L, W) for s = 0..l1: L = |l1 - l2| + 2 s and W = (l1 l2 L; 0 0 0)^2,
    with W = 0 where L > l1 + l2 (vectorised over the array l2).

    Start (L = |l1 - l2|): W = c(lo) c(hi - lo) / (c(hi) (2 hi + 1)), c(a) =
    binom(2a, a) / 4^a, lo/hi = min/max(l1, l2); then the ratio of the closed
    form for zero orders,

        W(L + 2) / W(L) = (l2 - l1 + L + 1)(l1 - l2 + L + 1)(J + 2)(l1 + l2 - L)
                          / ((l1 + l2 - L - 1)(J + 3)(l2 - l1 + L + 2)(l1 - l2 + L + 2)),

    J = l1 + l2 + L: every factor is positive, so the running product keeps
    full relative precision."""
    l2 = np.asarray(l2, dtype=np.int64)
    lo = np.minimum(l1, l2)
    hi = np.maximum(l1, l2)
    c = _central(int(hi.max(initial=0)))
    W = c[lo] * c[hi - lo] / (c[hi] * (2.0 * hi + 1.0))
    L = hi - lo
    for s in range(l1 + 1):
        live = s <= lo
        yield L, np.where(live, W, 0.0)
        if s == l1:
            break
        J = l1 + l2 + L
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = ((l2 - l1 + L + 1.0) * (l1 - l2 + L + 1.0) * (J + 2.0) * (l1 + l2 - L)
                     / ((l1 + l2 - L - 1.0) * (J + 3.0) * (l2 - l1 + L + 2.0) * (l1 - l2 + L + 2.0)))
        W = np.where(s < lo, W * ratio, 0.0)
        L = L + 2


def squared_3j_zero_orders(l1: int, l2: int) -> np.ndarray:
    r"""Squared Wigner 3j symbols :math:`(l_1\, l_2\, L;\, 0\, 0\, 0)^2` for ``L = 0..l1 + l2``.

    Zero where ``L < |l1 - l2|`` or ``l1 + l2 + L`` is odd.  Evaluated from the
    closed form for zero orders as a running product of positive ratios (see
    the Notes of :func:`local_coupling_matrix`), stable at any degree.

    Examples
    --------
    >>> import numpy as np
    >>> squared_3j_zero_orders(1, 1) * 15              # (1 1 L; 0 0 0)^2 = 1/3, 0, 2/15
    array([5., 0., 2.])
    """
    l1 = _check_degree(l1, "l1")
    l2 = _check_degree(l2, "l2")
    out = np.zeros(l1 + l2 + 1)
    a, b = (l1, l2) if l1 <= l2 else (l2, l1)
    for L, W in _squared_3j_steps(a, np.array([b])):
        if L[0] <= l1 + l2:
            out[L[0]] = W[0]
    return out


def _coupling(window_power: np.ndarray, lmax_out: int, lmax_in: int) -> np.ndarray:
    """M[l, j] = (2l + 1) sum_i P_w(i) (i j l; 0 0 0)^2, l <= lmax_out, j <= lmax_in."""
    M = np.zeros((lmax_out + 1, lmax_in + 1))
    j = np.arange(lmax_in + 1)
    for i, pw in enumerate(window_power):
        if pw == 0.0:
            continue
        for L, W in _squared_3j_steps(i, j):
            keep = L <= lmax_out
            M[L[keep], j[keep]] += pw * W[keep]
    M *= (2.0 * np.arange(lmax_out + 1) + 1.0)[:, None]
    return M


def local_coupling_matrix(cap_radius_deg: float, lwin: int, lmax: int, n_windows: int | None = None,
                          *, min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> np.ndarray:
    r"""Matrix relating the expected multitaper localised spectrum to the global spectrum.

    Parameters
    ----------
    cap_radius_deg, lwin, n_windows, min_concentration
        The windows, chosen as in :func:`local_power`.
    lmax : int
        Highest degree of both spectra.

    Returns
    -------
    ndarray, shape ``(lmax + 1, lmax + 1)``
        ``M`` with ``E[local](l) = sum_j M[l, j] S(j)`` for a stationary
        random field whose global spectrum ``S`` vanishes above ``lmax``.

    Notes
    -----
    Wieczorek & Simons (2005):
    :math:`M_{lj} = (2l+1)\sum_{i=0}^{L_w} P_w(i)\,(i\;j\;l;\,0\;0\;0)^2`, with
    :math:`P_w` the degree power of the unit-mean-square windows averaged
    over the windows used (:math:`\sum_i P_w(i) = 1`).  Each column sums to
    1 over ``l = 0..lmax + lwin`` (power is conserved); rows ``l > lmax -
    lwin`` of this truncated matrix miss part of it.  The 3j symbols with zero
    orders come from their closed form (for even :math:`J = l_1+l_2+l_3`,
    :math:`(l_1 l_2 l_3; 0 0 0)^2 = \Delta\,[g!/((g-l_1)!(g-l_2)!(g-l_3)!)]^2`,
    :math:`g = J/2`, :math:`\Delta = (J-2l_1)!(J-2l_2)!(J-2l_3)!/(J+1)!`) as a
    running product of ratios in :math:`l_3`, which never subtracts and
    never leaves double range, instead of the three-term recursion needed
    for general orders.

    References
    ----------
    Wieczorek, M. A., Simons, F. J. (2005), Geophys. J. Int. 162, 655-675.
    """
    windows = cap_windows(cap_radius_deg, lwin)
    lmax = _check_degree(lmax, "lmax")
    index = _select_windows(windows, n_windows, check_min_concentration(min_concentration))
    return _coupling(_window_power(windows, index), lmax, lmax)


def expected_local_power(global_power, cap_radius_deg: float, lwin: int, n_windows: int | None = None,
                         *, min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> np.ndarray:
    r"""Expectation of the multitaper localised spectrum of a stationary field.

    Parameters
    ----------
    global_power : array_like, shape ``(..., lmax + 1)``
        Global degree power spectrum (for example
        :func:`sphex.spectra.degree_power`), zero above ``lmax``.
    cap_radius_deg, lwin, n_windows, min_concentration
        The windows, chosen as in :func:`local_power`.

    Returns
    -------
    ndarray, shape ``(..., lmax + 1)``
        ``sum_j M[l, j] global_power[j]`` (see :func:`local_coupling_matrix`),
        what :func:`local_power` returns on average for a stationary random
        field with this spectrum.

    Examples
    --------
    >>> import numpy as np
    >>> l = np.arange(41)
    >>> white = 2.0 * l + 1.0                      # white noise: equal power per coefficient
    >>> e = expected_local_power(white, 30.0, 8, n_windows=3)
    >>> bool(np.allclose(e[8:33], white[8:33]))    # stays white in the valid range
    True
    """
    S = np.asarray(global_power, dtype=float)
    if S.ndim == 0 or S.shape[-1] < 1:
        raise ValueError("global_power must be an array indexed by degree along its last axis")
    if not np.all(np.isfinite(S)):
        raise ValueError("global_power contains NaN or inf")
    M = local_coupling_matrix(cap_radius_deg, lwin, S.shape[-1] - 1, n_windows,
                              min_concentration=min_concentration)
    return S @ M.T


# ---------------------------------------------------------------------------
# multitaper estimates
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class LocalSpectrum:
    """A localised (multitaper) spectrum at one centre.

    Attributes
    ----------
    power : ndarray, shape ``(..., lmax + 1)``
        Average over the windows of the degree power (or cross power) of the
        windowed field, in the field's units squared; degrees ``0..lmax``.
    error : ndarray
        Standard error of that average from the spread between windows
        (NaN with one window).
    per_window : ndarray, shape ``(n_windows, ..., lmax + 1)``
        The spectrum obtained with each window.
    valid_range : (int, int)
        Degrees ``lwin .. lmax - lwin`` (inclusive) where the estimate is
        reliable (empty when ``lmax < 2 lwin``).
    concentration : ndarray
        Concentration factors of the windows used.
    lat, lon, cap_radius_deg, lwin
        Where and how the spectrum was localised.
    """

    power: np.ndarray
    error: np.ndarray
    per_window: np.ndarray
    valid_range: tuple[int, int]
    concentration: np.ndarray
    lat: float
    lon: float
    cap_radius_deg: float
    lwin: int

    @property
    def degrees(self) -> np.ndarray:
        return np.arange(self.power.shape[-1])

    @property
    def n_windows(self) -> int:
        return int(self.concentration.size)

    @property
    def valid(self) -> np.ndarray:
        """Boolean mask over the degrees: True inside ``valid_range``."""
        d = self.degrees
        return (d >= self.valid_range[0]) & (d <= self.valid_range[1])


@dataclass(frozen=True, eq=False)
class LocalRatio:
    """A localised admittance or correlation per degree, with its standard error.

    Attributes
    ----------
    value : ndarray, shape ``(..., lmax + 1)``
        The estimate per degree (NaN where a denominator vanishes).
    error : ndarray
        Jackknife standard error over the windows (NaN with one window).
    valid_range, concentration, lat, lon, cap_radius_deg, lwin
        As in :class:`LocalSpectrum`.
    """

    value: np.ndarray
    error: np.ndarray
    valid_range: tuple[int, int]
    concentration: np.ndarray
    lat: float
    lon: float
    cap_radius_deg: float
    lwin: int

    @property
    def degrees(self) -> np.ndarray:
        return np.arange(self.value.shape[-1])

    @property
    def n_windows(self) -> int:
        return int(self.concentration.size)

    @property
    def valid(self) -> np.ndarray:
        d = self.degrees
        return (d >= self.valid_range[0]) & (d <= self.valid_range[1])


def _to_pole(h: Harmonics, lat: float, lon: float) -> Harmonics:
    """The field rotated so that (lat, lon) lies at the north pole: the inverse of
    the rotation (lon, 90 - lat, 0) that brings the pole to the centre."""
    return rotate(h, 0.0, lat - 90.0, -lon)


def _windowed_spectra(fields: list[Harmonics], lat: float, lon: float, windows: CapWindows,
                      index: np.ndarray, pairs: list[tuple[int, int]]) -> list[np.ndarray]:
    """Per-window spectra of the windowed fields: one array (n_windows, batch..., lmax+1)
    per pair (a, b) of field indices (a == b: degree power, else cross power)."""
    lmax = fields[0].lmax
    lwin = windows.lwin
    grid = Grid.gauss(lmax + lwin)
    values = [synthesize(_to_pole(h, lat, lon), grid) for h in fields]
    batch = np.broadcast_shapes(*(v.shape[:-2] for v in values))
    per_value = 8 * grid.nlat * grid.nlon * max(1, int(np.prod(batch, dtype=np.int64))) * len(fields)
    chunk = int(max(1, PRODUCT_BYTES // per_value))
    scale = math.sqrt(4.0 * math.pi)  # unit mean square
    out = [np.empty((index.size,) + batch + (lmax + 1,)) for _ in pairs]
    for start in range(0, index.size, chunk):
        sel = index[start:start + chunk]
        taper = windows.values(grid.colat, grid.lon, sel) * scale
        taper = taper.reshape((sel.size,) + (1,) * len(batch) + grid.shape)
        spectra = [analyze(taper * v, grid, lmax=lmax) for v in values]
        for p, (a, b) in enumerate(pairs):
            if a == b:
                out[p][start:start + sel.size] = degree_power(spectra[a])
            else:
                out[p][start:start + sel.size] = cross_power(spectra[a], spectra[b])
    return out


def _jackknife(estimator, *spectra: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Estimate from the window averages of ``spectra`` (each (K, ...)) and its
    delete-one jackknife standard error over the K windows.

    For the plain average this is the standard error of the mean,
    std / sqrt(K) (Thomson & Chave 1991)."""
    K = spectra[0].shape[0]
    means = [s.mean(axis=0) for s in spectra]
    with np.errstate(invalid="ignore", divide="ignore"):
        value = estimator(*means)
        if K < 2:
            return value, np.full_like(value, np.nan)
        sums = [s.sum(axis=0) for s in spectra]
        leave_one_out = np.stack([estimator(*[(tot - s[k]) / (K - 1) for tot, s in zip(sums, spectra)])
                                  for k in range(K)])
        centre = leave_one_out.mean(axis=0)
        error = np.sqrt((K - 1) / K * ((leave_one_out - centre) ** 2).sum(axis=0))
    return value, error


def _prepare(fields, names, lat, lon, cap_radius_deg, lwin, n_windows, min_concentration):
    fields = [_check_harmonics(h, name) for h, name in zip(fields, names)]
    lat, lon = _check_centre(lat, lon)
    windows = cap_windows(cap_radius_deg, lwin)
    lmax = min(h.lmax for h in fields)
    if windows.lwin > lmax:
        raise ValueError(f"lwin={windows.lwin} exceeds the field's lmax={lmax}: no degree could be "
                         f"localised reliably (valid range lwin..lmax-lwin); lower lwin")
    fields = [h.truncate(lmax) if h.lmax > lmax else h for h in fields]
    try:
        np.broadcast_shapes(*(h.batch_shape for h in fields))
    except ValueError:
        raise ValueError(f"batch shapes {[h.batch_shape for h in fields]} do not broadcast; "
                         "give both fields the same leading axes") from None
    index = _select_windows(windows, n_windows, check_min_concentration(min_concentration))
    meta = dict(valid_range=(windows.lwin, lmax - windows.lwin),
                concentration=np.asarray(windows.concentration)[index], lat=lat, lon=lon,
                cap_radius_deg=windows.cap_radius_deg, lwin=windows.lwin)
    return fields, windows, index, meta


def local_power(h: Harmonics, lat: float, lon: float, cap_radius_deg: float, lwin: int,
                n_windows: int | None = None, *,
                min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> LocalSpectrum:
    r"""Multitaper estimate of the localised degree power spectrum at a centre.

    Parameters
    ----------
    h : Harmonics
        The field (any convention; a batch gives one spectrum per field).
    lat, lon : float
        Centre of the region (degrees).
    cap_radius_deg : float
        Angular radius of the region (degrees).
    lwin : int
        Highest degree of the windows, at most ``h.lmax``; the spectral
        resolution is about ``lwin`` degrees.
    n_windows : int, optional
        Use the ``n_windows`` best-concentrated windows.  By default every
        window with concentration at least ``min_concentration``.
    min_concentration : float, default 0.99
        Threshold for the default choice of windows.

    Returns
    -------
    LocalSpectrum
        ``.power`` and ``.error`` per degree ``0..h.lmax`` (units of ``h``
        squared), reliable in ``.valid_range = (lwin, lmax - lwin)``.

    Raises
    ------
    ValueError
        Bad centre, cap, ``lwin`` above ``h.lmax``, or no window reaching the
        concentration threshold (the message gives the best one).

    Notes
    -----
    With the field rotated so that the centre is at the north pole and
    windows :math:`h_k` of unit mean square,

    .. math:: \hat S(l) = \frac{1}{K}\sum_{k=1}^{K} S_{\Phi_k}(l),
              \quad \Phi_k = h_k f,

    where :math:`S_\Phi` is the degree power of :func:`sphex.spectra.degree_power`.
    For a stationary field its expectation is
    :func:`expected_local_power` of the global spectrum (Wieczorek & Simons
    2005).  The error is the standard error of the mean over the windows.
    The windows of an order ``m > 0`` come in cos/sin pairs; with the
    default threshold both members are always used together, which makes
    the estimate independent of how the windows are turned about the centre.
    A count ``n_windows`` that splits a pair loses that property.

    References
    ----------
    Wieczorek, M. A., Simons, F. J. (2005), Geophys. J. Int. 162, 655-675.
    Wieczorek, M. A., Simons, F. J. (2007), J. Fourier Anal. Appl. 13, 665-692.
    """
    (h,), windows, index, meta = _prepare([h], ["h"], lat, lon, cap_radius_deg, lwin, n_windows,
                                          min_concentration)
    (per,) = _windowed_spectra([h], meta["lat"], meta["lon"], windows, index, [(0, 0)])
    power, error = _jackknife(lambda s: s, per)
    return LocalSpectrum(power=power, error=error, per_window=per, **meta)


def local_cross_power(h1: Harmonics, h2: Harmonics, lat: float, lon: float, cap_radius_deg: float,
                      lwin: int, n_windows: int | None = None, *,
                      min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> LocalSpectrum:
    """Multitaper estimate of the localised cross power of two fields at a centre.

    As :func:`local_power`, with the cross power
    :func:`sphex.spectra.cross_power` of the two windowed fields (units of
    ``h1`` times units of ``h2``); degrees above the smaller lmax are dropped.
    """
    fields, windows, index, meta = _prepare([h1, h2], ["h1", "h2"], lat, lon, cap_radius_deg, lwin,
                                            n_windows, min_concentration)
    (per,) = _windowed_spectra(fields, meta["lat"], meta["lon"], windows, index, [(0, 1)])
    power, error = _jackknife(lambda s: s, per)
    return LocalSpectrum(power=power, error=error, per_window=per, **meta)


def local_admittance(h_gravity: Harmonics, h_topo: Harmonics, lat: float, lon: float,
                     cap_radius_deg: float, lwin: int, n_windows: int | None = None, *,
                     min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> LocalRatio:
    r"""Localised admittance of gravity to topography per degree, with its error.

    Parameters
    ----------
    h_gravity, h_topo : Harmonics
        The two fields (any conventions; the gravity-like field first).
    lat, lon, cap_radius_deg, lwin, n_windows, min_concentration
        As in :func:`local_power`.

    Returns
    -------
    LocalRatio
        ``.value`` :math:`Z(l) = \hat S_{gt}(l) / \hat S_{tt}(l)` (units of
        gravity per unit of topography) and its jackknife ``.error``.

    Notes
    -----
    The multitaper averages of the cross power and of the topography power
    enter the ratio; the error is the delete-one jackknife over the windows
    (Thomson & Chave 1991), the usual error of multitaper transfer
    functions.  A gravity field that is the topography filtered by a
    transfer function :math:`Z_l` gives back :math:`Z_l` where it varies
    slowly over ``2 lwin + 1`` degrees (exactly for a constant).

    References
    ----------
    Wieczorek, M. A., Simons, F. J. (2005), Geophys. J. Int. 162, 655-675.
    Thomson, D. J., Chave, A. D. (1991), Jackknifed error estimates for
    spectra, coherences, and transfer functions, in Advances in Spectrum
    Analysis and Array Processing, vol. 1, ed. S. Haykin, Prentice Hall, 58-113.
    """
    fields, windows, index, meta = _prepare([h_gravity, h_topo], ["h_gravity", "h_topo"], lat, lon,
                                            cap_radius_deg, lwin, n_windows, min_concentration)
    cross, topo = _windowed_spectra(fields, meta["lat"], meta["lon"], windows, index,
                                    [(0, 1), (1, 1)])
    value, error = _jackknife(lambda x, t: np.where(t > 0, x / np.where(t > 0, t, 1.0), np.nan),
                              cross, topo)
    return LocalRatio(value=value, error=error, **meta)


def local_correlation(h1: Harmonics, h2: Harmonics, lat: float, lon: float, cap_radius_deg: float,
                      lwin: int, n_windows: int | None = None, *,
                      min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> LocalRatio:
    r"""Localised correlation of two fields per degree, with its error.

    ``.value`` is :math:`\hat S_{12} / \sqrt{\hat S_{11}\hat S_{22}}` from the
    multitaper averages, between -1 and 1 (NaN where a field has no local
    power); ``.error`` the jackknife standard error over the windows.
    Arguments as in :func:`local_power`.
    """
    fields, windows, index, meta = _prepare([h1, h2], ["h1", "h2"], lat, lon, cap_radius_deg, lwin,
                                            n_windows, min_concentration)
    cross, p1, p2 = _windowed_spectra(fields, meta["lat"], meta["lon"], windows, index,
                                      [(0, 1), (0, 0), (1, 1)])

    def ratio(x, a, b):
        den = np.sqrt(a * b)
        return np.clip(np.where(den > 0, x / np.where(den > 0, den, 1.0), np.nan), -1.0, 1.0)

    value, error = _jackknife(ratio, cross, p1, p2)
    return LocalRatio(value=value, error=error, **meta)
