r"""Spherical-cap concentration windows (Slepian functions of a polar cap).

The windows of a cap of angular radius ``theta0`` are the functions
band-limited to degree ``lwin`` that put the largest fraction ``lambda`` of
their energy inside the cap (Simons, Dahlen & Wieczorek 2006).  The
problem separates by order ``m``.  For each order ``m = 0..lwin`` sphex
diagonalises the tridiagonal matrix of the operator that commutes with the
concentration operator (Grünbaum et al. 1982; Simons et al. 2006, section 5),

    T_ll = -l (l + 1) cos theta0,
    T_l,l+1 = [l (l + 2) - lwin (lwin + 2)] sqrt(((l + 1)^2 - m^2) / ((2l + 1)(2l + 3))),

whose eigenvalues are well separated, so its eigenvectors are accurate even
where the concentration factors crowd together near 1 and near 0 (there the
concentration matrix itself determines its eigenvectors poorly).  The
concentration factor of each eigenvector is then ``lambda = g^T D g`` with
``D_ll' = 2 pi int_{cos theta0}^1 Lambda_lm Lambda_l'm dx``, evaluated
exactly by Gauss-Legendre quadrature on the cap (``lwin + 1`` nodes; the
integrand is a polynomial of degree ``l + l'`` in ``x``).  Order 0 gives the
zonal windows; every order ``m > 0`` gives a pair with the same
concentration, ``cos m phi`` and ``sin m phi``.  The factors of all
``(lwin + 1)^2`` windows sum to the Shannon number
``N = (lwin + 1)^2 (1 - cos theta0) / 2``.

The windows are used by :mod:`sphex.localize` for localised spectra.

References
----------
Simons, F. J., Dahlen, F. A., Wieczorek, M. A. (2006), Spatiospectral
concentration on a sphere, SIAM Review 48, 504-536.
Grünbaum, F. A., Longhi, L., Perlstadt, M. (1982), Differential operators
commuting with finite convolution integral operators: some non-Abelian
examples, SIAM J. Appl. Math. 42, 941-955.
"""
from __future__ import annotations

import functools
import math
import numbers
from dataclasses import dataclass

import numpy as np
from scipy.linalg import eigh_tridiagonal
from scipy.special import gammaln

from sphex.grids import gauss_nodes
from sphex.harmonics import Harmonics
from sphex.legendre import for_order

__all__ = ["CapWindows", "cap_windows", "check_min_concentration", "DEFAULT_MIN_CONCENTRATION"]

DEFAULT_MIN_CONCENTRATION = 0.99


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def _check_cap(cap_radius_deg) -> float:
    if isinstance(cap_radius_deg, bool) or not isinstance(cap_radius_deg, (numbers.Real, np.floating,
                                                                           np.integer)):
        raise ValueError(f"cap_radius_deg must be a number of degrees, got {cap_radius_deg!r}")
    r = float(cap_radius_deg)
    if not (math.isfinite(r) and 0.0 < r <= 180.0):
        raise ValueError(f"cap_radius_deg must lie in (0, 180] degrees, got {cap_radius_deg!r}")
    return r


def _check_degree(value, name: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
        raise ValueError(f"{name} must be a non-negative integer, got {value!r}")
    return int(value)


def check_min_concentration(value) -> float:
    """Validate a concentration threshold (0 < value <= 1) and return it as a float."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"min_concentration must be a number in (0, 1], got {value!r}") from None
    if not 0.0 < v <= 1.0:
        raise ValueError(f"min_concentration must lie in (0, 1], got {value!r}")
    return v


# ---------------------------------------------------------------------------
# concentration windows
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class CapWindows:
    """Concentration windows of a polar cap, best concentrated first.

    Attributes
    ----------
    cap_radius_deg : float
        Angular radius of the cap (degrees), centred on the north pole.
    lwin : int
        Highest degree of the windows.
    concentration : ndarray, shape (n,)
        Fraction of each window's energy inside the cap, sorted best first;
        ``n = (lwin + 1)^2``.
    order : ndarray of int, shape (n,)
        Order of each window: ``m >= 0`` for ``g(theta) cos(m phi)`` (0: zonal),
        ``-m`` for ``g(theta) sin(m phi)``.
    coefficients : ndarray, shape (n, lwin + 1)
        Row ``k``: the window's coefficients ``g_l`` on the orthonormal real
        functions of its order (degrees below ``|m|`` are zero); each row has
        unit norm, so each window has unit integral of its square over the
        sphere.  For a zonal window they are its orthonormal coefficients
        ``a_l0``.  Sign: positive next to the pole.
    shannon : float
        Shannon number ``(lwin + 1)^2 (1 - cos theta0) / 2``, the sum of the
        concentration factors of all windows.
    """

    cap_radius_deg: float
    lwin: int
    concentration: np.ndarray
    order: np.ndarray
    coefficients: np.ndarray
    shannon: float

    def count_above(self, min_concentration: float = DEFAULT_MIN_CONCENTRATION) -> int:
        """Number of windows with concentration at least ``min_concentration``."""
        return int(np.count_nonzero(self.concentration >= check_min_concentration(min_concentration)))

    def zonal(self) -> np.ndarray:
        """Indices of the zonal (order 0) windows, best first."""
        return np.flatnonzero(self.order == 0)

    def harmonics(self, index=None) -> Harmonics:
        """The windows as a batch of coefficients (orthonormal, no Condon-Shortley phase).

        ``index``: window indices (an int or a sequence; all windows by
        default).  The batch axis comes first, one entry per index.
        """
        idx = self._indices(index)
        L1 = self.lwin + 1
        C = np.zeros((idx.size, L1, L1))
        S = np.zeros((idx.size, L1, L1))
        for k, w in enumerate(idx):
            m = int(self.order[w])
            if m >= 0:
                C[k, :, m] = self.coefficients[w]
            else:
                S[k, :, -m] = self.coefficients[w]
        return Harmonics.from_cos_sin(C, S, norm="orthonormal", condon_shortley=False)

    def values(self, colat, lon, index=None) -> np.ndarray:
        """The windows on a latitude-longitude product grid (cap centred on the north pole).

        Parameters
        ----------
        colat : array_like
            Colatitudes in radians, 1-D.
        lon : array_like
            Longitudes in degrees, 1-D.
        index : int or sequence of int, optional
            Windows to evaluate (all by default).

        Returns
        -------
        ndarray, shape ``(len(index), len(colat), len(lon))``
            ``g(theta)`` for zonal windows, ``sqrt(2) g(theta) cos(m phi)`` or
            ``sqrt(2) g(theta) sin(m phi)`` otherwise, with
            ``g = sum_l g_l Lambda_lm`` (orthonormal): each window has unit
            integral of its square over the sphere.  Computed from the
            Legendre functions of each order, without a transform.
        """
        idx = self._indices(index)
        colat = np.atleast_1d(np.asarray(colat, dtype=float))
        phi = np.radians(np.atleast_1d(np.asarray(lon, dtype=float)))
        out = np.empty((idx.size, colat.size, phi.size))
        profiles: dict[int, np.ndarray] = {}
        for k, w in enumerate(idx):
            m = int(self.order[w])
            if abs(m) not in profiles:
                profiles[abs(m)] = for_order(abs(m), self.lwin, colat, norm="orthonormal",
                                             condon_shortley=False)
            g = self.coefficients[w, abs(m):] @ profiles[abs(m)]
            if m == 0:
                out[k] = g[:, None]
            else:
                turn = np.cos(m * phi) if m > 0 else np.sin(-m * phi)
                np.multiply(math.sqrt(2.0) * g[:, None], turn[None, :], out=out[k])
        return out

    def _indices(self, index) -> np.ndarray:
        total = self.concentration.size
        idx = np.arange(total) if index is None else np.atleast_1d(np.asarray(index))
        if idx.ndim != 1 or idx.dtype.kind not in "iu" or np.any((idx < -total) | (idx >= total)):
            raise ValueError(f"index must be window numbers from 0 to {total - 1}, got {index!r}")
        return idx

    def __repr__(self):
        return (f"CapWindows(cap_radius_deg={self.cap_radius_deg:g}, lwin={self.lwin}, "
                f"shannon={self.shannon:.4g}, best={self.concentration[0]:.6f}, "
                f"above_0.99={self.count_above()})")


def _cap_quadrature(cap_radius_deg: float, lwin: int) -> tuple[np.ndarray, np.ndarray]:
    """Colatitudes and weights (in x = cos theta) of the Gauss rule on the cap,
    exact for polynomials of degree 2 lwin + 1 in x."""
    colat, w = gauss_nodes(lwin + 1)
    x = np.cos(colat)
    u0 = 2.0 * math.sin(math.radians(cap_radius_deg) / 2.0) ** 2   # 1 - cos theta0
    # x in [-1, 1] -> [cos theta0, 1]; 1 - x_cap = u0 (1 - x) / 2 keeps precision near the pole
    one_minus = u0 * (1.0 - x) / 2.0
    cap_colat = 2.0 * np.arcsin(np.sqrt(one_minus / 2.0))
    return cap_colat, w * (u0 / 2.0)


def _commuting_matrix(m: int, lwin: int, cos0: float) -> tuple[np.ndarray, np.ndarray]:
    """Diagonal and off-diagonal of the tridiagonal operator commuting with the
    cap's concentration matrix of order m (degrees m..lwin)."""
    l = np.arange(m, lwin + 1, dtype=float)
    diag = -l * (l + 1.0) * cos0
    lo = l[:-1]
    off = (lo * (lo + 2.0) - lwin * (lwin + 2.0)) * np.sqrt(((lo + 1.0) ** 2 - m * m)
                                                         / ((2 * lo + 1.0) * (2 * lo + 3.0)))
    return diag, off


def _polar_sign_weights(m: int, lwin: int) -> np.ndarray:
    """Proportional to the limit of Lambda_lm(theta) / sin^m(theta) at theta = 0
    (no phase), l = m..lwin: sqrt((2l+1) (l+m)! / (l-m)!), scaled to at most 1."""
    l = np.arange(m, lwin + 1, dtype=float)
    log_t = 0.5 * (np.log(2 * l + 1.0) + gammaln(l + m + 1.0) - gammaln(l - m + 1.0))
    return np.exp(log_t - log_t.max())


def _order_windows(m: int, lwin: int, cos0: float, colat: np.ndarray,
                   weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Concentration factors and unit eigenvectors (rows, degrees m..lwin) of order m."""
    diag, off = _commuting_matrix(m, lwin, cos0)
    if diag.size == 1:
        vectors = np.ones((1, 1))
    else:
        _, vectors = eigh_tridiagonal(diag, off)
    lam = for_order(m, lwin, colat, norm="orthonormal", condon_shortley=False)
    D = 2.0 * np.pi * (lam * weights) @ lam.T
    conc = np.einsum("ik,ij,jk->k", vectors, D, vectors)
    sign = np.sign(_polar_sign_weights(m, lwin) @ vectors)
    sign[sign == 0] = 1.0
    return np.clip(conc, 0.0, 1.0), (vectors * sign).T


@functools.lru_cache(maxsize=32)
def _cap_windows(cap_radius_deg: float, lwin: int) -> CapWindows:
    colat, weights = _cap_quadrature(cap_radius_deg, lwin)
    u0 = 2.0 * math.sin(math.radians(cap_radius_deg) / 2.0) ** 2
    cos0 = 1.0 - u0
    concs, orders, rows = [], [], []
    for m in range(lwin + 1):
        conc, vec = _order_windows(m, lwin, cos0, colat, weights)
        padded = np.zeros((vec.shape[0], lwin + 1))
        padded[:, m:] = vec
        for sign in ((1,) if m == 0 else (1, -1)):
            concs.append(conc)
            orders.append(np.full(conc.size, sign * m))
            rows.append(padded)
    conc = np.concatenate(concs)
    order = np.concatenate(orders)
    coef = np.concatenate(rows)
    # best first; ties (the cos/sin pairs) by |m|, cosine first
    sort = np.lexsort((order < 0, np.abs(order), -conc))
    fields = dict(concentration=conc[sort], order=order[sort], coefficients=coef[sort])
    for arr in fields.values():
        arr.setflags(write=False)
    return CapWindows(cap_radius_deg=cap_radius_deg, lwin=lwin,
                      shannon=(lwin + 1) ** 2 * u0 / 2.0, **fields)


def cap_windows(cap_radius_deg: float, lwin: int) -> CapWindows:
    r"""The concentration windows of a polar cap up to degree ``lwin``.

    Parameters
    ----------
    cap_radius_deg : float
        Angular radius of the cap, ``0 < cap_radius_deg <= 180`` (degrees).
    lwin : int
        Highest degree of the windows (their band limit).

    Returns
    -------
    CapWindows
        All ``(lwin + 1)^2`` windows, every order, sorted by concentration
        (best first), with ``.concentration``, ``.order``, ``.coefficients``
        and ``.shannon``.

    Notes
    -----
    For each order ``m`` the eigenvectors of the tridiagonal commuting
    operator (module docstring) are the windows; their concentration factors
    :math:`\lambda = g^T D g` come from the concentration matrix
    :math:`D_{ll'} = 2\pi\int_{\cos\theta_0}^1 \Lambda_{lm}\Lambda_{l'm}\,dx`
    by exact Gauss quadrature.  The factors of all windows sum to the
    Shannon number :math:`N = (L+1)^2 (1-\cos\theta_0)/2`.  Cost
    ``O(lwin^3)``; results are cached.

    References
    ----------
    Simons, F. J., Dahlen, F. A., Wieczorek, M. A. (2006), SIAM Review 48,
    504-536 (the commuting operator, section 5; the Shannon number).

    Examples
    --------
    >>> w = cap_windows(20.0, 20)
    >>> round(w.shannon, 6), w.order[:3].tolist(), w.count_above(0.99)
    (13.297777, [0, 1, -1], 3)
    >>> round(float(w.concentration[0]), 6)
    0.999933
    """
    return _cap_windows(_check_cap(cap_radius_deg), _check_degree(lwin, "lwin"))
