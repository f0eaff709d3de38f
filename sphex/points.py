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

import numpy as np
import scipy.linalg
import scipy.linalg.blas

from sphex.harmonics import Harmonics
from sphex.kernels import numba
from sphex.kernels.points import (
    BLOCK, adjoint_kernel, design_kernel, evaluate_kernel, gradient_kernel, recursion_tables,
)
from sphex.least_squares import (
    DEFAULT_MAXITER, IllPosedWarning, LeastSquaresFit, RealBasis, check_enough_data, check_integer,
    check_tolerance,
    fit_masked, iterative_info, prior_precision, solve_cholesky, solve_conjugate_gradients,
    warn_if_ill_posed, warn_not_converged,
)
from sphex.legendre import check_norm, sectoral_table

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


def _orthonormal_coef(h: Harmonics) -> np.ndarray:
    """Coefficients of h, orthonormal without phase, as (K, L+1, L+1)."""
    return h.to(norm="orthonormal", condon_shortley=False).coef.reshape((-1, h.lmax + 1, h.lmax + 1))


def _kernel_arrays(coef: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Real and imaginary parts of orthonormal phase-free coef (K, L+1, L+1) as the
    kernels take them: indexed [k, m, l], orders m >= 1 doubled (the -m terms of a real field)."""
    t = np.swapaxes(coef, -1, -2).copy()
    t[:, 1:, :] *= 2.0
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
    return point_values(points, factors, _orthonormal_coef(h)).reshape(h.batch_shape + shape)


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
    cr, ci = _kernel_arrays(_orthonormal_coef(h))
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
    # b = w_m (G)^T-convention: evaluate(a) = E_orthonormal(G a) with a^orthonormal = G a, so the
    # adjoint in the requested convention is G times the orthonormal one
    orthonormal = Harmonics(coef, norm="orthonormal", condon_shortley=False)
    factor = orthonormal.replace(coef=np.ones((lmax + 1, lmax + 1), complex)).to(norm, condon_shortley).coef
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


# ---------------------------------------------------------------------------
# least squares from scattered points
# ---------------------------------------------------------------------------
DIRECT_MAX_UNKNOWNS = 10_000   # (lmax+1)^2 above which "auto" never builds the normal matrix
DIRECT_MAX_WORK = 1.0e12       # n (lmax+1)^4 above which "auto" prefers conjugate gradients
DESIGN_ROWS_BYTES = 1 << 27    # rows of the design matrix formed at once (128 MB)


def fit(values, lat, lon, lmax: int, *, weights=None, damping: float = 0.0, prior=None,
        method: str = "auto", norm: str = "orthonormal", condon_shortley: bool = True,
        tol: float = 1e-10, maxiter: int | None = None, callback=None) -> LeastSquaresFit:
    """Spherical-harmonic coefficients to degree ``lmax`` from values at scattered points.

    Parameters
    ----------
    values : array_like, shape ``(...,) + np.shape(lat)``
        Real data at the points; leading axes are a batch of fields sampled
        at the same points (the direct method factors the normal matrix once
        for all of them).
    lat, lon : array_like
        Points in degrees, one shape.
    lmax : int
        Highest degree estimated; there are ``(lmax + 1)^2`` real unknowns.
    weights : array_like, optional
        Data weights, one per point (shape of ``lat``), non-negative; points
        with weight 0 are ignored.  Give the inverse noise variances
        ``1 / sigma_j^2`` to get posterior standard deviations in data units;
        without weights the noise variance is estimated from the residuals.
    damping : float
        Tikhonov regularisation strength (>= 0): the estimate minimises
        ``sum_j w_j r_j^2 + damping * sum_i c_i^2 / prior_(l_i)`` over the real
        coefficients ``c_i`` (``cos_sin()`` form) in the requested convention.
    prior : callable or array_like, optional
        Prior variance per degree (array of lmax+1 values, or a function of
        the degree array), such as Kaula's rule ``lambda l: (1e-5 / l**2)**2``
        for ``norm="full"``; inf leaves a degree unconstrained.  None: 1 for
        every degree (plain damping).  Needs ``damping > 0``.
    method : {"auto", "direct", "iterative"}
        "direct": Cholesky factorisation of the normal matrix (posterior
        standard deviations and covariance available); "iterative":
        conjugate gradients with the fast evaluation and its adjoint as
        operators (memory O(points + lmax^2)).  "auto" takes the direct method
        when ``(lmax+1)^2 <= 10^4`` and ``n (lmax+1)^4 <= 10^12`` (forming the
        normal matrix then takes seconds to a minute), else the iterative one.
    norm, condon_shortley
        Convention of the result (and of ``damping`` and ``prior``).
    tol, maxiter : optional
        Iterative method: stop when the residual of the normal equations is
        below ``tol`` times its right-hand side, or after ``maxiter``
        iterations (default 1000; a warning says so).
    callback : callable, optional
        Iterative method: called as ``callback(iteration, relative_residual)``.

    Returns
    -------
    LeastSquaresFit
        ``.harmonics``, ``.residual_rms`` (weighted), ``.sigmas`` (direct
        method), ``.info`` and ``.covariance()``.

    Raises
    ------
    ValueError
        Points or values that are not finite, latitudes outside [-90, 90],
        shapes that do not match, negative weights, more unknowns than data
        without damping, a singular normal matrix.

    Warns
    -----
    IllPosedWarning
        When the condition estimate of the normal matrix exceeds
        :data:`sphex.least_squares.CONDITION_LIMIT` (1e8), or conjugate
        gradients do not converge.

    Notes
    -----
    Normal equations ``(E^T W E + damping D) c = E^T W y`` in the real
    orthonormal unknowns (see :mod:`sphex.least_squares`).  Direct: the
    normal matrix is accumulated from blocks of design-matrix rows (BLAS
    ``syrk``), factored by Cholesky, its condition estimated by LAPACK
    ``dpocon``; the posterior covariance is ``s0^2 (E^T W E + damping D)^(-1)``
    with ``s0^2 = 1`` when weights are given and the a posteriori variance
    factor ``sum r^2 / (n - trace(H))`` otherwise.  Iterative: conjugate
    gradients (``scipy.sparse.linalg.cg``) preconditioned by the diagonal
    ``sum(w) / (4 pi) + damping D``.

    References
    ----------
    Hestenes and Stiefel (1952); Tikhonov and Arsenin (1977); Kaula, W. M.
    (1966), Theory of Satellite Geodesy (the power law of the prior).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> lat = np.degrees(np.arcsin(rng.uniform(-1, 1, 400))); lon = rng.uniform(0, 360, 400)
    >>> y = 2.0 + np.sin(np.radians(lat))                       # degrees 0 and 1
    >>> result = fit(y, lat, lon, lmax=3)
    >>> bool(abs(result.harmonics[0, 0].real - 2 * np.sqrt(4 * np.pi)) < 1e-10)
    True
    """
    check_norm(norm)
    lmax = check_integer("lmax", lmax)
    lat_a, lon_a = check_points(lat, lon)
    y = _check_values(values, lat_a.shape)
    batch = y.shape[:y.ndim - lat_a.ndim]
    y = y.reshape((-1, lat_a.size))
    w = _check_weights(weights, lat_a.shape)
    basis = RealBasis(lmax)
    precision = prior_precision(basis, damping, prior, norm, condon_shortley)
    n_data = int(np.count_nonzero(w))
    check_enough_data(n_data, basis.size, float(damping), "points with positive weight")
    method = _choose_method(method, basis.size, n_data)
    points = PointSet(lat_a, lon_a)
    maxiter = DEFAULT_MAXITER if maxiter is None else check_integer("maxiter", maxiter, 1)
    tol = check_tolerance(tol)
    if method == "direct":
        u, info, inverse = _fit_direct(points, y, w, basis, precision)
    else:
        u, info = _fit_iterative(points, y, w, basis, precision, tol, maxiter, callback)
        inverse = None
    residual = y - point_values(points, None, basis.to_complex(u))
    rms = np.sqrt(np.sum(w * residual ** 2, axis=-1) / np.sum(w))
    info.update(unknowns=basis.size, data=n_data, basis=basis)
    sigmas = covariance_scale = None
    if method == "direct":
        # s0 = 1 with weights (1 / noise variance), else the a posteriori variance factor
        freedom = info["degrees_of_freedom"]
        factor = np.sum(w * residual ** 2, axis=-1) / freedom if freedom > 0 else np.full(y.shape[0], np.nan)
        info["variance_factor"] = factor if factor.size > 1 else float(factor[0])
        s0 = np.ones(y.shape[0]) if weights is not None else np.sqrt(factor)
        info["sigma_source"] = "weights (1 / noise variance)" if weights is not None else "residuals"
        posterior = np.sqrt(np.sum(inverse ** 2, axis=1))   # sqrt(diag(N^-1)), N^-1 = U^-1 U^-T
        sigmas = basis.sigma_harmonics(posterior * s0[:, None], batch, norm, condon_shortley)
        covariance_scale = s0[:, None] * basis.convention_scale(norm, condon_shortley)[None, :]
    return LeastSquaresFit(harmonics=basis.harmonics(u, batch, norm, condon_shortley),
                           residual_rms=rms.reshape(batch) if batch else float(rms[0]),
                           sigmas=sigmas, info=info, _covariance_factor=inverse,
                           _covariance_scale=covariance_scale)


def point_values(points: PointSet, factors: RadialFactors | None, coef: np.ndarray) -> np.ndarray:
    """(K, N) values in the input's order of orthonormal phase-free complex coef (K, L+1, L+1)."""
    lmax = coef.shape[-1] - 1
    cr, ci = _kernel_arrays(coef)
    out = np.zeros((coef.shape[0], points.size))
    if points.size:
        xq, sq, q2, qf = _radius_arrays(points, factors)
        evaluate_kernel(lmax, points.x, points.s, xq, sq, q2, qf, points.phi, points.cos_phi,
                        points.sin_phi, sectoral_table(lmax), cr, ci, points.chunks(), out)
    return points.unsorted(out)


def _check_weights(weights, shape: tuple[int, ...]) -> np.ndarray:
    if weights is None:
        return np.ones(int(np.prod(shape, dtype=np.int64)))
    if not _is_real_array(weights):
        raise ValueError("weights must be real numbers, one per point")
    w = np.asarray(weights, dtype=np.float64)
    if w.shape != shape:
        raise ValueError(f"weights have shape {w.shape} but the points have shape {shape}: give "
                         "one weight per point (1 / noise variance)")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ValueError("weights must be finite and >= 0 (1 / noise variance; 0 ignores a point)")
    return w.ravel()


def _choose_method(method: str, unknowns: int, n_data: int) -> str:
    if method not in ("auto", "direct", "iterative"):
        raise ValueError(f"unknown method {method!r}; valid: 'auto', 'direct', 'iterative'")
    if method != "auto":
        return method
    if unknowns <= DIRECT_MAX_UNKNOWNS and n_data * float(unknowns) ** 2 <= DIRECT_MAX_WORK:
        return "direct"
    return "iterative"


def _fit_direct(points: PointSet, y: np.ndarray, w: np.ndarray, basis: RealBasis,
                precision: np.ndarray):
    """Normal matrix from blocks of design rows, then Cholesky.

    Returns the solution, the info (condition, degrees of freedom
    ``n - trace(H) = n - p + sum_i damping D_i (N^-1)_ii``) and ``U^-1``."""
    lmax, p = basis.lmax, basis.size
    keep = np.flatnonzero(w > 0)
    atab = np.empty((lmax + 1, lmax + 1))
    ctab = np.empty((lmax + 1, lmax + 1))
    recursion_tables(lmax, atab, ctab)
    cm = sectoral_table(lmax)
    x, s, phi = _unsorted_coordinates(points)
    normal = np.zeros((p, p), order="F")
    rows = max(1, DESIGN_ROWS_BYTES // (8 * p))
    for start in range(0, keep.size, rows):
        idx = keep[start:start + rows]
        A = np.empty((idx.size, p))
        design_kernel(lmax, x[idx], s[idx], phi[idx], cm, atab, ctab, basis.col_cos,
                      basis.col_sin, np.sqrt(w[idx]), A)
        normal = scipy.linalg.blas.dsyrk(1.0, A, beta=1.0, c=normal, trans=1, lower=0,
                                         overwrite_c=1)
    normal[np.diag_indices(p)] += precision
    rhs = basis.from_adjoint(adjoint_sums(points, None, y * w, lmax))
    u, inverse, condition = solve_cholesky(normal, rhs)
    del normal
    warn_if_ill_posed(condition, "direct", float(np.max(precision, initial=0.0)))
    finite = np.where(np.isfinite(precision), precision, 0.0)
    freedom = keep.size - p + float(np.sum(finite * np.sum(inverse ** 2, axis=1)))
    return u, dict(method="direct", condition_estimate=condition, degrees_of_freedom=freedom), inverse


def _unsorted_coordinates(points: PointSet):
    """x, s, phi in the input's order."""
    out = []
    for arr in (points.x, points.s, points.phi):
        a = np.empty_like(arr)
        a[points.order] = arr
        out.append(a)
    return out


def _fit_iterative(points: PointSet, y: np.ndarray, w: np.ndarray, basis: RealBasis,
                   precision: np.ndarray, tol: float, maxiter: int, callback):
    """Conjugate gradients, one field of the batch after the other."""
    lmax = basis.lmax

    def apply(u):
        f = point_values(points, None, basis.to_complex(u))
        return basis.from_adjoint(adjoint_sums(points, None, f * w, lmax))[0] + precision * u

    precondition = 1.0 / (np.sum(w) / (4 * np.pi) + precision)
    rhs = basis.from_adjoint(adjoint_sums(points, None, y * w, lmax))
    u = np.empty((y.shape[0], basis.size))
    runs = []
    for k in range(y.shape[0]):
        u[k], run = solve_conjugate_gradients(apply, rhs[k], precondition, tol, maxiter, callback)
        runs.append(run)
    damping = float(np.max(precision, initial=0.0))
    info = iterative_info(runs)
    warn_if_ill_posed(info["condition_estimate"], "iterative", damping)
    for run in runs:
        warn_not_converged(run, damping)
    return u, info
