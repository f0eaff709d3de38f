"""Normalised associated Legendre functions to very high degree.

``Lambda_lm(theta)`` is the colatitude part of the complex spherical harmonic
``Y_lm = Lambda_lm(theta) exp(i m phi)`` for ``m >= 0``:

    Lambda_lm = K(l, m) * cs^m * P_l^m(cos theta),
    P_l^m(x) = (1 - x^2)^(m/2) d^m/dx^m P_l(x)        (no phase in P_l^m),

with ``cs = -1`` when ``condon_shortley`` is true and ``+1`` otherwise, and

    ``"orthonormal"``    K = sqrt((2l+1)/(4 pi) (l-m)!/(l+m)!)   (integral of |Y|^2 = 1)
    ``"full"``      K = sqrt((2l+1) (l-m)!/(l+m)!)          (integral = 4 pi)
    ``"schmidt"``  K = sqrt((l-m)!/(l+m)!)                  (integral = 4 pi/(2l+1))
    ``"unnormalized"``   K = 1                                    (plain P_l^m)

The real-form functions used with cosine/sine coefficients carry an extra
factor sqrt(2) for m > 0 in the three normalised conventions (see
``docs/conventions.md``); the functions here are the complex-form ones.

Values come from the standard three-term recursion in degree, fully
normalised, started from ``P_mm = c_m sin^m(theta)`` kept in extended range
(see :mod:`sphex.kernels.recursion`), so nothing underflows or overflows to degree
10800 and beyond at any colatitude.  The colatitude derivative comes from the
same recursion differentiated term by term.
"""
from __future__ import annotations

import functools

import numpy as np

from sphex.limits import check_memory, whole_number

__all__ = ["for_order", "all_orders", "derivative_for_order", "NORMS", "norm_scale",
           "check_norm"]

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")


# the digit-led spelling of the fully normalised convention that earlier versions accepted
_RETIRED_NORMS = {'4pi': 'full'}


def _clipped(norm: str) -> str | None:
    """The full name that ``norm`` clips (a shorter beginning of it, 3 letters or more)."""
    word = norm.strip().lower()
    if len(word) < 3:
        return None
    found = [n for n in NORMS if n.startswith(word) and n != word]
    return found[0] if len(found) == 1 else None


def check_norm(norm) -> str:
    """Validate a normalisation name and return it.

    The names are the trade's full words (``NORMS``); clipped spellings are
    refused with the word that replaces them.
    """
    full = (_RETIRED_NORMS.get(norm) or _clipped(norm)) if isinstance(norm, str) else None
    if full is not None:
        raise ValueError(f"normalisation {norm!r} is no longer accepted: use "
                         f"{full!r} (valid: {', '.join(repr(n) for n in NORMS)})")
    if norm not in NORMS:
        raise ValueError(f"unknown normalisation {norm!r}; valid: {', '.join(repr(n) for n in NORMS)}")
    return norm


@functools.lru_cache(maxsize=8)
def _sectoral_table(lmax: int) -> np.ndarray:
    """c_m = sqrt(1/(4 pi) prod_{k<=m} (2k+1)/(2k)): P_mm = c_m sin^m (orthonormal, no phase).

    Accumulated in extended precision (long double) and rounded once.
    """
    k = np.arange(1, lmax + 1, dtype=np.longdouble)
    ratio = (2 * k + 1) / (2 * k)
    prod = np.concatenate([[np.longdouble(1)], np.cumprod(ratio)])
    four_pi = 4 * np.longdouble(np.pi)
    table = np.sqrt(prod / four_pi).astype(np.float64)
    table.setflags(write=False)
    return table


def sectoral_table(lmax: int) -> np.ndarray:
    """The start values ``c_m`` for m = 0..lmax (see :func:`_sectoral_table`)."""
    return _sectoral_table(_round_up(lmax))[: lmax + 1]


def _round_up(n: int) -> int:
    return max(64, 1 << int(np.ceil(np.log2(n + 1))))


def norm_scale(lmax: int, norm: str) -> np.ndarray:
    """Factor F[l, m] with Lambda^norm_lm = F[l, m] * Lambda^ortho_lm (no phase).

    ``(lmax+1, lmax+1)``; entries with m > l are 1.  For ``"unnormalized"`` the
    factor is 1/K_ortho, which leaves double range above degree ~150; callers
    check for that.
    """
    check_norm(norm)
    f = np.ones((lmax + 1, lmax + 1))
    for m in range(lmax + 1):
        f[m:, m] = norm_column(lmax, m, norm)
    return f


def norm_column(lmax: int, m: int, norm: str) -> np.ndarray:
    """Column m of :func:`norm_scale`, degrees m..lmax, without the full table."""
    l = np.arange(m, lmax + 1, dtype=np.float64)
    if norm == "orthonormal":
        return np.ones(l.size)
    if norm == "full":
        return np.full(l.size, np.sqrt(4 * np.pi))
    if norm == "schmidt":
        return np.sqrt(4 * np.pi / (2 * l + 1))
    from scipy.special import gammaln

    with np.errstate(over="ignore", invalid="ignore"):
        return np.exp(-0.5 * (np.log(2 * l + 1) - np.log(4 * np.pi)
                              + gammaln(l - m + 1) - gammaln(l + m + 1)))


def _prepare_colat(colat):
    colat = np.asarray(colat, dtype=np.float64)
    if colat.ndim == 0:
        colat = colat[None]
    if colat.ndim != 1:
        raise ValueError(f"colat must be a 1-D array of colatitudes in radians, got shape {colat.shape}")
    if not np.all(np.isfinite(colat)) or np.any(colat < 0) or np.any(colat > np.pi):
        raise ValueError("colatitudes must be finite and lie in [0, pi] radians "
                         "(convert latitudes with colat = pi/2 - radians(lat))")
    x = np.cos(colat)
    s = np.sin(colat)
    s[colat == 0] = 0.0
    s[colat == np.pi] = 0.0
    x[colat == np.pi / 2] = 0.0
    return x, s


def _check_m_lmax(m, lmax):
    lmax = whole_number(lmax, "lmax")
    text = f"order m must be an integer with 0 <= m <= lmax={lmax}, got {m!r}"
    try:
        order = whole_number(m, "order m")
    except ValueError:
        raise ValueError(text) from None
    if order > lmax:
        raise ValueError(text)
    return order, lmax


def _order_values(m, lmax, colat, norm, condon_shortley, want_deriv):
    # imported here: conventions and scales need no kernels, so importing this module
    # (and harmonics, the adapters' coefficient layer) does not load numba
    from sphex.kernels.recursion import legendre_order

    check_norm(norm)
    m, lmax = _check_m_lmax(m, lmax)
    x, s = _prepare_colat(colat)
    out = np.empty((lmax + 1 - m, x.size))
    dout = np.empty((lmax + 1 - m, x.size)) if want_deriv else np.empty((1, 1))
    legendre_order(m, lmax, x, s, sectoral_table(lmax)[m], out, dout, want_deriv)
    res = dout if want_deriv else out
    scale = norm_column(lmax, m, norm)
    if norm == "unnormalized" and not np.all(np.isfinite(scale)):
        raise ValueError(f"unnormalised functions of order {m} overflow double precision below degree "
                         f"{lmax}: use norm='orthonormal', 'full' or 'schmidt' at this degree")
    sign = -1.0 if (condon_shortley and m % 2 == 1) else 1.0
    return res * (sign * scale)[:, None]


def for_order(m: int, lmax: int, colat, norm: str = "orthonormal", condon_shortley: bool = True) -> np.ndarray:
    """Lambda_lm(colat) for one order m and degrees l = m..lmax.

    Parameters
    ----------
    m, lmax : int
        Order and highest degree, ``0 <= m <= lmax``.
    colat : array_like
        Colatitudes in radians, 1-D, within [0, pi].
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
    condon_shortley : bool
        Include the phase ``(-1)^m``.

    Returns
    -------
    ndarray, shape ``(lmax + 1 - m, len(colat))``
        Row ``l - m`` holds degree ``l``.

    Examples
    --------
    >>> import numpy as np
    >>> v = for_order(0, 2, [0.0], norm="unnormalized")
    >>> np.allclose(v[:, 0], [1, 1, 1])
    True
    """
    return _order_values(m, lmax, colat, norm, condon_shortley, False)


def derivative_for_order(m: int, lmax: int, colat, norm: str = "orthonormal",
                         condon_shortley: bool = True) -> np.ndarray:
    """d Lambda_lm / d theta (colatitude), same layout as :func:`for_order`."""
    return _order_values(m, lmax, colat, norm, condon_shortley, True)


def all_orders(lmax: int, colat, norm: str = "orthonormal", condon_shortley: bool = True) -> np.ndarray:
    """Lambda_lm(colat) for every degree and order up to lmax.

    Returns
    -------
    ndarray, shape ``(lmax + 1, lmax + 1, len(colat))``
        Indexed ``[l, m]``; zero where ``m > l``.  Memory grows as lmax^2 times
        the number of points: use :func:`for_order` order by order at high degree.
    """
    x, _ = _prepare_colat(colat)
    lmax = whole_number(lmax, "lmax")
    check_memory(8.0 * (lmax + 1) ** 2 * x.size, f"the Legendre functions of every order to "
                 f"degree {lmax} at {x.size} colatitudes", "use for_order order by order")
    out = np.zeros((lmax + 1, lmax + 1, x.size))
    for m in range(lmax + 1):
        out[m:, m, :] = for_order(m, lmax, colat, norm, condon_shortley)
    return out
