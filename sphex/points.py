"""Spherical-harmonic fields at scattered points, and least-squares fits to them.

Evaluation sums the series exactly at each point,

    f(theta, phi) = sum_l [a_l0 Lambda_l0 + 2 Re sum_{m>0} a_lm Lambda_lm e^{i m phi}],

with the fully normalised three-term recursion in extended range that the
transforms use (:mod:`sphex.kernels.recursion`), so any degree (10800 and
beyond) and any latitude, the poles included, are handled.  The work runs in
:mod:`sphex.kernels.points`, parallel over blocks of points.

:func:`fit` and :func:`fit_masked` estimate coefficients from scattered
points or from a grid with missing cells by regularised least squares; the
solvers and the result object are in :mod:`sphex.least_squares`.
"""
from __future__ import annotations

import math
import numbers

import numpy as np

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.kernels import numba
from sphex.kernels.points import (
    BLOCK, adjoint_kernel, design_kernel, evaluate_kernel, gradient_kernel, recursion_tables,
)
from sphex.least_squares import (
    IllPosedWarning, LeastSquaresFit, RealBasis, prior_precision, solve_cholesky,
    solve_conjugate_gradients, warn_if_ill_posed, warn_not_converged,
)
from sphex.legendre import check_norm, sectoral_table
from sphex.transform import analyze, synthesize

__all__ = ["evaluate", "evaluate_gradient", "evaluate_adjoint", "fit", "fit_masked",
           "LeastSquaresFit", "IllPosedWarning"]


# ---------------------------------------------------------------------------
# validation at the boundary
# ---------------------------------------------------------------------------
def check_harmonics(h) -> Harmonics:
    """``h`` if it is a Harmonics with finite coefficients, else a ValueError."""
    if not isinstance(h, Harmonics):
        raise ValueError(f"h must be a sphex.Harmonics, got {type(h).__name__}: make one with "
                         "sphex.analyze(values, grid) or Harmonics(coef)")
    if not np.all(np.isfinite(h.coef)):
        raise ValueError("the coefficients contain NaN or inf: check where they came from")
    return h


def check_integer(name: str, value, minimum: int = 0) -> int:
    """An integer argument (an int, or a float with an integral value) of at least ``minimum``."""
    ok = isinstance(value, (numbers.Integral, float, np.floating)) and not isinstance(value, (bool, np.bool_))
    if ok and isinstance(value, (float, np.floating)):
        ok = math.isfinite(value) and float(value).is_integer()
    if not ok or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


def check_points(lat, lon) -> tuple[np.ndarray, np.ndarray]:
    """Latitudes and longitudes (degrees) as float64 arrays of one shape, checked."""
    lat_a = np.asarray(lat, dtype=np.float64) if _is_real_array(lat) else None
    lon_a = np.asarray(lon, dtype=np.float64) if _is_real_array(lon) else None
    if lat_a is None or lon_a is None:
        raise ValueError("lat and lon must be real numbers in degrees (arrays or scalars)")
    if lat_a.shape != lon_a.shape:
        raise ValueError(f"lat has shape {lat_a.shape} but lon has shape {lon_a.shape}: give one "
                         "latitude and one longitude per point (np.broadcast_arrays(lat, lon) "
                         "makes them match, np.meshgrid builds a lat-lon mesh)")
    for name, arr in (("lat", lat_a), ("lon", lon_a)):
        bad = arr.size - int(np.count_nonzero(np.isfinite(arr)))
        if bad:
            raise ValueError(f"{name} contains {bad} NaN or inf value(s): drop those points "
                             "before evaluating or fitting")
    if lat_a.size and (lat_a.min() < -90.0 or lat_a.max() > 90.0):
        raise ValueError(f"latitudes must lie in [-90, 90] degrees, found {lat_a.min():g} to "
                         f"{lat_a.max():g}: are lat and lon swapped, or are they in radians?")
    return lat_a, lon_a


def _is_real_array(value) -> bool:
    try:
        return np.asarray(value).dtype.kind in "fiu"
    except (TypeError, ValueError):
        return False


# ---------------------------------------------------------------------------
# points in the kernels' layout
# ---------------------------------------------------------------------------
class PointSet:
    """Points sorted for the kernels: equator first (sin of colatitude descending).

    ``order[i]`` is the index (into the flattened input) of sorted point ``i``.
    """

    def __init__(self, lat: np.ndarray, lon: np.ndarray):
        lat = np.ravel(lat)
        lon = np.ravel(lon)
        # 90 - |lat| is exact for |lat| >= 45 (Sterbenz), so sin(colat) keeps full
        # relative precision next to both poles
        polar_distance = np.radians(90.0 - np.abs(lat))
        s = np.sin(polar_distance)
        x = np.copysign(np.cos(polar_distance), lat)
        x[lat == 0] = 0.0
        s[np.abs(lat) == 90.0] = 0.0
        lon_reduced = np.remainder(lon + 180.0, 360.0) - 180.0
        phi = np.radians(lon_reduced)
        self.order = np.argsort(-s, kind="stable")
        self.x = np.ascontiguousarray(x[self.order])
        self.s = np.ascontiguousarray(s[self.order])
        self.phi = np.ascontiguousarray(phi[self.order])
        self.cos_phi = np.cos(self.phi)
        self.sin_phi = np.sin(self.phi)
        self.size = lat.size

    def chunks(self) -> int:
        """Number of chunks the blocks of points are dealt to (several per thread)."""
        nblocks = max(1, -(-self.size // BLOCK))
        return int(min(nblocks, 4 * numba.get_num_threads()))

    def sorted(self, values: np.ndarray) -> np.ndarray:
        """(K, N) values of the input's points in the kernels' order."""
        return np.ascontiguousarray(values[:, self.order])

    def unsorted(self, values: np.ndarray) -> np.ndarray:
        """(K, N) values in the kernels' order back in the input's order."""
        out = np.empty_like(values)
        out[:, self.order] = values
        return out


class RadialFactors:
    """q = R/r per point for exterior continuation, and the arrays the kernels take."""

    def __init__(self, points: PointSet, reference_radius: float, radius, lmax: int, shape):
        r = np.asarray(radius, dtype=np.float64) if _is_real_array(radius) else None
        if r is None:
            raise ValueError("radius must be a number or an array of numbers (metres)")
        try:
            r = np.broadcast_to(r, shape).ravel()
        except ValueError:
            raise ValueError(f"radius has shape {np.shape(radius)}, which does not broadcast to the "
                             f"points' shape {shape}: give one radius or one per point") from None
        if not np.all(np.isfinite(r)) or np.any(r <= 0):
            raise ValueError("radius must be positive and finite (metres from the centre)")
        q = (reference_radius / r)[points.order]
        worst = float(q.max()) if q.size else 1.0
        if (lmax + 1) * math.log(worst) > 680.0:
            raise ValueError(
                f"a point lies at {1 / worst:.4g} times the reference radius: continuing degree "
                f"{lmax} that far down overflows double precision; truncate the coefficients "
                "(h.truncate(...)) or evaluate closer to the reference sphere")
        self.q = np.ascontiguousarray(q)
        self.q2 = self.q * self.q
        self.xq = points.x * self.q
        self.sq = points.s * self.q


def _kernel_coefficients(h: Harmonics, weight_orders: bool) -> tuple[np.ndarray, np.ndarray]:
    """Real and imaginary parts, orthonormal without phase, as (K, m, l) arrays;
    with ``weight_orders`` the orders m >= 1 are doubled (the -m terms of a real field)."""
    coef = h.to(norm="orthonormal", condon_shortley=False).coef.reshape((-1, h.lmax + 1, h.lmax + 1))
    if weight_orders:
        coef = coef.copy()
        coef[:, :, 1:] *= 2.0
    t = np.swapaxes(coef, -1, -2)
    return np.ascontiguousarray(t.real), np.ascontiguousarray(t.imag)


def _radius_arrays(points: PointSet, factors: RadialFactors | None):
    if factors is None:
        return points.x, points.s, None, None
    return factors.xq, factors.sq, factors.q2, factors.q


# ---------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------
def evaluate(h: Harmonics, lat, lon, radius=None) -> np.ndarray:
    """Values of the field(s) ``h`` at arbitrary points.

    Parameters
    ----------
    h : Harmonics
        Any degree, normalisation and phase convention; a batch of
        coefficient sets is evaluated in one pass over the points.
    lat, lon : array_like
        Latitudes and longitudes in degrees, of one shape (any shape, or
        scalars).  Latitudes in [-90, 90]; longitudes any real number.
    radius : float or array_like, optional
        Distance of the points from the centre, in metres (one value, or one
        per point).  The coefficients are then those of a potential
        harmonic outside the sphere of radius ``h.radius``, and degree l is
        multiplied by ``(h.radius / radius)^(l+1)`` (exterior continuation).

    Returns
    -------
    ndarray, shape ``h.batch_shape + np.shape(lat)``, float64

    Raises
    ------
    ValueError
        Latitudes outside [-90, 90], NaN or inf in the points, lat and lon of
        different shapes, ``radius`` without ``h.radius``, or a continuation
        so far down that it overflows.

    Notes
    -----
    ``f = sum_l (R/r)^(l+1) [a_l0 Lambda_l0 + 2 Re sum_{m>0} a_lm Lambda_lm e^{i m phi}]``,
    summed exactly (no interpolation).  The factor ``(R/r)^l`` is folded into
    the recursion, ``q^l Lambda_l = a_l (q x) q^(l-1) Lambda_(l-1) - c_l q^2 q^(l-2) Lambda_(l-2)``
    with ``q = R/r``.  Cost: about ``(lmax+1)^2 / 2`` recursion steps per point.

    References
    ----------
    Holmes, S. A. and Featherstone, W. E. (2002), A unified approach to the
    Clenshaw summation and the recursive computation of very high degree and
    order normalised associated Legendre functions, J. Geodesy 76, 279-299
    (the fully normalised recursion and the scaling that keeps it in range).

    Examples
    --------
    >>> import numpy as np
    >>> from sphex import Harmonics
    >>> c = np.zeros((2, 2), complex); c[1, 0] = np.sqrt(4 * np.pi / 3)   # f = sin(lat)
    >>> np.round(evaluate(Harmonics(c), [90.0, 30.0, -90.0], [0.0, 10.0, 0.0]), 12)
    array([ 1. ,  0.5, -1. ])
    """
    h = check_harmonics(h)
    lat_a, lon_a = check_points(lat, lon)
    shape = lat_a.shape
    points = PointSet(lat_a, lon_a)
    factors = None
    if radius is not None:
        if h.radius is None:
            raise ValueError("radius= needs the reference radius of the coefficients: set it with "
                             "h.replace(radius=R) (metres)")
        factors = RadialFactors(points, h.radius, radius, h.lmax, shape)
    cr, ci = _kernel_coefficients(h, weight_orders=True)
    out = np.zeros((cr.shape[0], points.size))
    if points.size:
        xq, sq, q2, qf = _radius_arrays(points, factors)
        evaluate_kernel(h.lmax, points.x, points.s, xq, sq, q2, qf, points.phi, points.cos_phi,
                        points.sin_phi, sectoral_table(h.lmax), cr, ci, points.chunks(), out)
    return points.unsorted(out).reshape(h.batch_shape + shape)


def evaluate_gradient(h: Harmonics, lat, lon) -> tuple[np.ndarray, np.ndarray]:
    """Surface gradient of the field(s) ``h`` at arbitrary points.

    Parameters
    ----------
    h : Harmonics
        Any degree, normalisation and phase convention; a batch is kept.
    lat, lon : array_like
        Latitudes and longitudes in degrees, of one shape.

    Returns
    -------
    east, north : ndarray, each ``h.batch_shape + np.shape(lat)``
        ``east = (1 / (R cos lat)) df/dlon`` and ``north = (1/R) df/dlat``,
        with ``R = h.radius`` in metres when it is set (units of the field per
        metre) and ``R = 1`` otherwise (per radian), as
        :func:`sphex.filters.gradient` on a grid.

    Notes
    -----
    Exact at every point, the poles included: the longitude term uses
    ``Lambda_lm / sin theta`` from the recursion started at
    ``c_m sin^(m-1) theta`` (nothing is divided by ``sin theta``), and
    ``dLambda_lm/dtheta`` comes from the recursion differentiated term by
    term.  At a pole the east and north components refer to the directions
    of the meridian ``lon``.
    """
    h = check_harmonics(h)
    lat_a, lon_a = check_points(lat, lon)
    shape = lat_a.shape
    points = PointSet(lat_a, lon_a)
    cr, ci = _kernel_coefficients(h, weight_orders=True)
    east = np.zeros((cr.shape[0], points.size))
    north = np.zeros((cr.shape[0], points.size))
    if points.size:
        gradient_kernel(h.lmax, points.x, points.s, points.phi, points.cos_phi, points.sin_phi,
                        sectoral_table(h.lmax), cr, ci, points.chunks(), east, north)
    scale = 1.0 if h.radius is None else 1.0 / h.radius
    east = points.unsorted(east).reshape(h.batch_shape + shape) * scale
    north = points.unsorted(north).reshape(h.batch_shape + shape) * scale
    return east, north


def evaluate_adjoint(values, lat, lon, lmax: int, *, radius=None, reference_radius=None,
                     norm: str = "orthonormal", condon_shortley: bool = True) -> Harmonics:
    """The adjoint (transpose) of :func:`evaluate`: point values to coefficients.

    For real point values ``y_j`` it returns ``b`` with

        b_lm = w_m sum_j y_j (R/r_j)^(l+1) Lambda_lm(theta_j) e^{-i m phi_j},

    ``w_0 = 1``, ``w_m = 2`` (m >= 1), ``Lambda`` in the requested
    convention, so that for every ``a`` in that convention

        sum_j y_j evaluate(a)_j = sum_{l, m>=0} Re(a_lm) Re(b_lm) + Im(a_lm) Im(b_lm).

    This is the operator that least-squares solvers need (``E^T y``); it is
    not an analysis (the result is not the field's coefficients).

    Parameters
    ----------
    values : array_like, shape ``(...,) + np.shape(lat)``
        Real values at the points; leading axes are a batch.
    lat, lon : array_like
        Points in degrees, as for :func:`evaluate`.
    lmax : int
        Highest degree of the result.
    radius, reference_radius : optional
        Point radii and the reference radius (metres), both or neither: the
        adjoint of ``evaluate(h, lat, lon, radius)`` with ``h.radius =
        reference_radius``.
    norm, condon_shortley
        Convention of the result (and of the ``a`` it is the adjoint for).

    Returns
    -------
    Harmonics
        Batch shape of the leading axes of ``values``.
    """
    check_norm(norm)
    lmax = check_integer("lmax", lmax)
    lat_a, lon_a = check_points(lat, lon)
    y = _check_values(values, lat_a.shape)
    batch = y.shape[:y.ndim - lat_a.ndim]
    points = PointSet(lat_a, lon_a)
    factors = None
    if (radius is None) != (reference_radius is None):
        raise ValueError("give both radius= (of the points) and reference_radius= (of the "
                         "coefficients), or neither")
    if radius is not None:
        reference_radius = float(reference_radius)
        if not (math.isfinite(reference_radius) and reference_radius > 0):
            raise ValueError(f"reference_radius must be a positive number of metres, got {reference_radius!r}")
        factors = RadialFactors(points, reference_radius, radius, lmax, lat_a.shape)
    coef = adjoint_sums(points, factors, y.reshape((-1, points.size)), lmax)
    # b = w_m (G)^T-convention: evaluate(a) = E_ortho(G a) with a^ortho = G a, so the
    # adjoint in the requested convention is G times the orthonormal one
    ortho = Harmonics(coef, norm="orthonormal", condon_shortley=False)
    factor = ortho.replace(coef=np.ones((lmax + 1, lmax + 1), complex)).to(norm, condon_shortley).coef
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.where(factor != 0, 1.0 / factor, 0.0).real
    out = coef * np.tril(g)
    return Harmonics(out.reshape(batch + (lmax + 1, lmax + 1)), norm=norm,
                     condon_shortley=condon_shortley, radius=reference_radius)


def adjoint_sums(points: PointSet, factors: RadialFactors | None, y: np.ndarray,
                 lmax: int) -> np.ndarray:
    """Orthonormal, phase-free ``w_m sum_j y_j q^(l+1) Lambda_lm e^{-i m phi_j}``,
    complex (K, lmax+1, lmax+1) indexed [l, m]; y is (K, N) in the input's order."""
    K = y.shape[0]
    outr = np.zeros((K, lmax + 1, lmax + 1))
    outi = np.zeros((K, lmax + 1, lmax + 1))
    if points.size:
        xq, sq, q2, qf = _radius_arrays(points, factors)
        adjoint_kernel(lmax, points.x, points.s, xq, sq, q2, qf, points.phi, points.cos_phi,
                       points.sin_phi, sectoral_table(lmax), points.sorted(y), points.chunks(),
                       outr, outi)
    coef = np.swapaxes(outr, -1, -2) + 1j * np.swapaxes(outi, -1, -2)
    coef[:, :, 1:] *= 2.0
    coef[:, :, 0] = coef[:, :, 0].real
    return np.tril(coef) if K else coef


def _check_values(values, shape: tuple[int, ...]) -> np.ndarray:
    """Real, finite values whose trailing axes are the points' shape."""
    if not _is_real_array(values):
        raise ValueError("values must be real numbers (float or integer)")
    y = np.asarray(values, dtype=np.float64)
    if y.shape[y.ndim - len(shape):] != shape or y.ndim < len(shape):
        raise ValueError(f"values have shape {y.shape} but the points have shape {shape}: the "
                         "trailing axes of values must be the points' (leading axes are a batch)")
    bad = y.size - int(np.count_nonzero(np.isfinite(y)))
    if bad:
        raise ValueError(f"values contain {bad} NaN or inf entries: drop those points (or give "
                         "them weight 0 in fit) instead of filling them")
    return y
