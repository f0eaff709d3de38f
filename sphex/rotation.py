r"""Rotation of spherical-harmonic coefficients by Euler angles.

The **field** turns, the frame stays.  With the active rotation matrices

    R_z(t) = [[cos t, -sin t, 0], [sin t, cos t, 0], [0, 0, 1]],
    R_y(t) = [[cos t, 0, sin t], [0, 1, 0], [-sin t, 0, cos t]],

and ``R = R_z(alpha) R_y(beta) R_z(gamma)`` (z-y-z Euler angles), the rotated
field is ``f'(r) = f(R^-1 r)``: the value that sat at the point ``r`` now sits
at ``R r``.  ``rotate(h, a, 0, 0)`` turns the field east by ``a`` about the
polar axis, ``f'(lat, lon) = f(lat, lon - a)``.

For the orthonormal coefficients with the Condon-Shortley phase,

    a'_lm' = sum_{m=-l..l} D^l_m'm a_lm,
    D^l_m'm = exp(-i m' alpha) d^l_m'm(beta) exp(-i m gamma),

where ``d^l(beta) = exp(-i beta J_y)`` in the basis of the ``l``-th degree, the
convention whose first column is ``d^l_m0(beta) = sqrt(4 pi/(2l+1))
Y_lm(beta, 0)``.  Other normalisations and the phase convention without the
Condon-Shortley factor are handled exactly: the normalised conventions differ
from the orthonormal one by a factor per degree, which commutes with the
rotation, and the phase ``(-1)^m`` is folded into the diagonal factors;
``"unnormalized"`` coefficients are converted to orthonormal and back.

Method
------
The small-d matrix is factored through the quarter turn
``Delta = d^l(pi/2)`` (Trapani & Navaza 2006):

    d^l(beta) = E(pi/2) Delta E(beta) Delta^T E(-pi/2),   E(t) = diag(exp(-i m t)),

which follows from ``R_y(beta) = R_z(pi/2) R_y(pi/2) R_z(beta) R_y(-pi/2)
R_z(-pi/2)``.  The angles enter only through diagonal phase factors; ``Delta``
depends on the degree alone.  With the symmetries of ``Delta`` and of a real
field's coefficients, each degree costs two passes of a real operator over
the triangle ``0 <= m <= n <= l`` of ``Delta`` (see
:mod:`sphex.kernels.rotation`), whose rows come from a three-term recursion
and are used as soon as they are made.

Why this recursion.  The quarter-turn matrix needs no trigonometry, has an
eight-fold symmetry (only the triangle is generated) and serves every
rotation; the recursion for its rows runs from the matrix edge, where the
values are exponentially small, toward the centre, the direction in which
they grow, which keeps it stable to high degree (the degree-1000 round trip
returns the coefficients to about 1e-14 relative).  Rows are generated and
used at once, so a degree in flight needs O(l) memory, and degrees are
independent, so they are spread over threads.  Risbo's (1996) half-degree
recursion would instead carry the whole ``(2l+1)^2`` matrix ``d^l(beta)``
from one degree to the next (O(L^2) memory, strictly sequential in degree)
at about four times the arithmetic per degree.

References
----------
Trapani, S., Navaza, J. (2006), Calculation of spherical harmonics and Wigner
d functions by FFT, Acta Cryst. A62, 262-269.
Risbo, T. (1996), Fourier transform summation of Legendre series and
D-functions, J. Geodesy 70, 383-396.
"""
from __future__ import annotations

import functools
import math
import numbers

import numpy as np

from sphex.harmonics import Harmonics
from sphex.kernels import numba
from sphex.kernels.rotation import quarter_turn_triangle, rotate_degrees

__all__ = ["rotate", "rotation_to", "inverse_angles", "wigner_small_d"]


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def _check_angle(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, np.floating, np.integer)):
        raise ValueError(f"{name} must be a real number (an angle), got {value!r}")
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{name} must be finite, got {value!r}")
    return v


def _check_harmonics(h) -> Harmonics:
    if not isinstance(h, Harmonics):
        raise ValueError(f"h must be a sphex.Harmonics (got {type(h).__name__}); "
                         "make one with sphex.analyze(values, grid)")
    return h


# ---------------------------------------------------------------------------
# tables and phase factors
# ---------------------------------------------------------------------------
@functools.lru_cache(maxsize=4)
def _edge_table(size: int) -> np.ndarray:
    """Delta^l[l, 0] = (-1)^l sqrt(binom(2l, l) / 4^l) for l < size.

    The product of the ratios (2k - 1) / (2k) is accumulated in long double
    and rounded once."""
    k = np.arange(1, size, dtype=np.longdouble)
    ratio = (2 * k - 1) / (2 * k)
    central = np.concatenate([[np.longdouble(1)], np.cumprod(ratio)])
    sign = np.where(np.arange(size) % 2 == 0, 1.0, -1.0)
    table = (sign * np.sqrt(central)).astype(np.float64)
    table.setflags(write=False)
    return table


def _edge_values(lmax: int) -> np.ndarray:
    size = max(64, 1 << int(np.ceil(np.log2(lmax + 1))))
    return _edge_table(size)[: lmax + 1]


_I_POWERS = np.array([1, 1j, -1, -1j])


def _turn_phase(angle: float, lmax: int, degrees: bool) -> np.ndarray:
    """exp(-i m angle) for m = 0..lmax, with m * angle reduced to one turn first."""
    m = np.arange(lmax + 1, dtype=np.float64)
    if degrees:
        turn = np.radians(np.mod(m * angle, 360.0))
    else:
        turn = np.mod(m * angle, 2.0 * np.pi)
    return np.exp(-1j * turn)


@functools.lru_cache(maxsize=64)
def _degree_sequence(lmax: int, nthreads: int) -> np.ndarray:
    """Degrees 0..lmax in the sequence the threads take them.

    numba splits a parallel loop into equal contiguous chunks, one per
    thread.  A degree costs about l^2, so degrees are paired cheap with
    costly (0 with lmax, 1 with lmax - 1, ...) and the pairs dealt to the
    chunks in turn."""
    lo, hi = 0, lmax
    pairs = []
    while lo <= hi:
        pairs.append((hi, lo) if lo < hi else (lo,))
        lo += 1
        hi -= 1
    t = max(int(nthreads), 1)
    seq = [l for k in range(t) for pair in pairs[k::t] for l in pair]
    out = np.array(seq, dtype=np.int64)
    out.setflags(write=False)
    return out


# ---------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------
def rotate(h: Harmonics, alpha: float, beta: float, gamma: float, *,
           degrees: bool = True) -> Harmonics:
    r"""Coefficients of the field turned by the z-y-z Euler angles (alpha, beta, gamma).

    Parameters
    ----------
    h : Harmonics
        Any degree, normalisation and phase convention; a batch is rotated
        field by field with the same angles.
    alpha, beta, gamma : float
        Euler angles of ``R = R_z(alpha) R_y(beta) R_z(gamma)`` (any real
        values, negative ones included).
    degrees : bool, default True
        Angles in degrees; False for radians.

    Returns
    -------
    Harmonics
        Same lmax, batch shape, normalisation, phase convention, radius and
        units as ``h``; the field ``f'(r) = f(R^-1 r)``.

    Raises
    ------
    ValueError
        ``h`` is not a Harmonics, an angle is not a finite number, or
        unnormalised coefficients leave double range (above degree ~150).

    Notes
    -----
    For orthonormal Condon-Shortley coefficients
    :math:`a'_{lm'} = \sum_m e^{-im'\alpha} d^l_{m'm}(\beta) e^{-im\gamma} a_{lm}`,
    evaluated through the quarter-turn factorisation
    :math:`d^l(\beta) = E(\pi/2)\,\Delta\,E(\beta)\,\Delta^T E(-\pi/2)` with
    :math:`\Delta = d^l(\pi/2)` generated row by row by a stable three-term
    recursion (module docstring).  Cost ``O(lmax^3)`` per field, memory
    ``O(lmax)`` per degree in flight beyond input and output; degrees are
    spread over numba's threads.  The inverse rotation is
    ``rotate(h, -gamma, -beta, -alpha)`` (see :func:`inverse_angles`).

    References
    ----------
    Trapani, S., Navaza, J. (2006), Acta Cryst. A62, 262-269.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex import Harmonics
    >>> c = np.zeros((3, 3), complex); c[1, 0] = 1.0      # Y_10, peaked at the north pole
    >>> turned = rotate(Harmonics(c), 0.0, 90.0, 0.0)      # pole moved to (lat 0, lon 0)
    >>> np.round(turned.coef[1], 12)[:2]                   # now -sqrt(1/2) (Y_11 - Y_1,-1)
    array([ 0.        +0.j, -0.70710678+0.j])
    """
    h = _check_harmonics(h)
    alpha = _check_angle(alpha, "alpha")
    beta = _check_angle(beta, "beta")
    gamma = _check_angle(gamma, "gamma")
    work = h.to("orthonormal") if h.norm == "unnormalized" else h
    lmax = work.lmax
    coef = np.ascontiguousarray(work.coef.reshape((-1, lmax + 1, lmax + 1)))
    if not np.all(np.isfinite(coef)):
        raise ValueError("coefficients contain NaN or inf: check the input")
    m = np.arange(lmax + 1)
    i_power = _I_POWERS[m % 4]
    # no Condon-Shortley phase: a^CS_m = (-1)^m a_m on the way in and out
    phase_sign = np.where(m % 2 == 1, -1.0, 1.0) if not work.condon_shortley else np.ones(lmax + 1)
    first = i_power * phase_sign * _turn_phase(gamma, lmax, degrees)
    middle = np.where(m % 2 == 1, -1.0, 1.0) * _turn_phase(beta, lmax, degrees)
    last = i_power * phase_sign * _turn_phase(alpha, lmax, degrees)
    out = np.zeros_like(coef)
    seq = _degree_sequence(lmax, numba.get_num_threads())
    rotate_degrees(coef, out, seq, _edge_values(lmax), first, middle, last)
    result = work.replace(coef=out.reshape(h.coef.shape))
    if h.norm == "unnormalized":
        return result.to("unnormalized")
    return result


def inverse_angles(alpha: float, beta: float, gamma: float) -> tuple[float, float, float]:
    """Euler angles of the inverse rotation: ``(-gamma, -beta, -alpha)``.

    ``rotate(rotate(h, a, b, c), *inverse_angles(a, b, c))`` returns ``h``
    (to rounding).  Works in degrees or radians alike.
    """
    alpha = _check_angle(alpha, "alpha")
    beta = _check_angle(beta, "beta")
    gamma = _check_angle(gamma, "gamma")
    return (-gamma, -beta, -alpha)


def rotation_to(lat: float, lon: float) -> tuple[float, float, float]:
    """Euler angles (degrees) of the rotation that brings the north pole to (lat, lon).

    Parameters
    ----------
    lat, lon : float
        Target point in degrees, ``-90 <= lat <= 90``.

    Returns
    -------
    alpha, beta, gamma : float
        ``(lon, 90 - lat, 0)``: ``R = R_z(lon) R_y(90 - lat)``.  The meridian
        through the pole on which longitude 0 lies is carried onto the
        meridian of the target, so the direction toward longitude 180 at the
        pole becomes north at the target (toward longitude 0: south).

    Examples
    --------
    >>> rotation_to(30.0, 45.0)
    (45.0, 60.0, 0.0)
    """
    lat = _check_angle(lat, "lat")
    lon = _check_angle(lon, "lon")
    if not -90.0 <= lat <= 90.0:
        raise ValueError(f"lat must lie in [-90, 90] degrees, got {lat!r} "
                         "(are latitude and longitude swapped?)")
    return (lon, 90.0 - lat, 0.0)


def _quarter_turn_full(l: int) -> np.ndarray:
    """Delta = d^l(pi/2) as a (2l+1, 2l+1) array indexed [n + l, m + l]."""
    tri = np.zeros((l + 1, l + 1))
    quarter_turn_triangle(l, float(_edge_values(l)[l]), tri)
    n = np.arange(-l, l + 1)[:, None] * np.ones(2 * l + 1, dtype=np.int64)[None, :]
    m = n.T.copy()
    sign = np.ones(n.shape)
    # Delta[n, -m] = (-1)^(l+n) Delta[n, m];  Delta[-n, m] = (-1)^(l+m) Delta[n, m]
    sign = np.where(m < 0, sign * (-1.0) ** (l + n), sign)
    m = np.abs(m)
    sign = np.where(n < 0, sign * (-1.0) ** (l + m), sign)
    n = np.abs(n)
    # Delta[n, m] = (-1)^(n-m) Delta[m, n]
    swap = n < m
    sign = np.where(swap, sign * (-1.0) ** (n - m), sign)
    big = np.where(swap, m, n)
    small = np.where(swap, n, m)
    return sign * tri[big, small]


def wigner_small_d(l: int, beta: float, *, degrees: bool = True) -> np.ndarray:
    r"""The Wigner small-d matrix ``d^l(beta)`` of one degree, for inspection and checks.

    Parameters
    ----------
    l : int
        Degree, ``l >= 0``.
    beta : float
        Angle (degrees unless ``degrees=False``).

    Returns
    -------
    ndarray, shape ``(2l+1, 2l+1)``
        ``d[m' + l, m + l] = d^l_{m'm}(beta)``, the matrix of
        :math:`e^{-i\beta J_y}` (first column ``sqrt(4 pi/(2l+1)) Y_lm(beta, 0)``
        with the Condon-Shortley phase).

    Notes
    -----
    Built from the same quarter-turn rows as :func:`rotate`, as
    :math:`d^l(\beta) = E(\pi/2)\Delta E(\beta)\Delta^T E(-\pi/2)`; it costs
    ``O(l^3)`` and is never formed by :func:`rotate`.

    Examples
    --------
    >>> import numpy as np
    >>> d = wigner_small_d(1, 90.0)
    >>> np.round(d, 12)[1]                 # d^1_{0m}(90 deg), m = -1, 0, 1
    array([-0.70710678,  0.        ,  0.70710678])
    """
    if isinstance(l, bool) or not isinstance(l, (int, np.integer)) or l < 0:
        raise ValueError(f"l must be a non-negative integer, got {l!r}")
    l = int(l)
    beta = _check_angle(beta, "beta")
    b = math.radians(beta) if degrees else beta
    delta = _quarter_turn_full(l)
    m = np.arange(-l, l + 1)
    quarter = np.exp(-0.5j * np.pi * m)
    inner = (delta * np.exp(-1j * m * b)[None, :]) @ delta.T
    d = quarter[:, None] * inner * np.conj(quarter)[None, :]
    return np.ascontiguousarray(d.real)
