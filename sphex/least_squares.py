"""The least-squares machinery behind :func:`sphex.points.fit` and
:func:`sphex.points.fit_masked`: real unknowns, priors, the direct and the
iterative solver, and the result object.

Unknowns
--------
The solvers work with the real orthonormal form without the Condon-Shortley
phase, ``u = (C_lm for 0 <= m <= l, S_lm for 1 <= m <= l)``,

    f = sum_l sum_m (C_lm cos m phi + S_lm sin m phi) r_m Lambda_lm,
    r_0 = 1, r_m = sqrt(2),

whose basis functions all have mean square 1/(4 pi) over the sphere, so the
normal matrix of well-spread data is close to a multiple of the identity.
Results are converted to the convention the caller asks for.

Estimate
--------
Weighted, regularised least squares (Tikhonov):

    minimise  sum_j w_j (y_j - (E u)_j)^2 + damping * sum_i u_i^2 / prior_i,
    (E^T W E + damping D) u = E^T W y,     D = diag(1 / prior_i),

with ``prior_i`` the prior variance of coefficient i in the caller's
convention (1 when no prior is given).  With ``w_j`` the inverse noise
variances and ``damping = 1`` this is the Bayesian posterior mean for a
Gaussian prior, and ``(E^T W E + D)^{-1}`` its covariance.

References
----------
Tikhonov, A. N. and Arsenin, V. Y. (1977), Solutions of Ill-posed Problems.
Hestenes, M. R. and Stiefel, E. (1952), Methods of conjugate gradients for
solving linear systems, J. Res. Nat. Bur. Standards 49, 409-436.
Saad, Y. (2003), Iterative Methods for Sparse Linear Systems, 2nd ed., SIAM,
section 6.7.3 (the Lanczos tridiagonal matrix from the coefficients of
conjugate gradients).
"""
from __future__ import annotations

import math
import numbers
import warnings
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import LinearOperator, cg

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.legendre import check_norm
from sphex.transform import analyze, synthesize

__all__ = ["fit_masked", "IllPosedWarning", "LeastSquaresFit", "RealBasis", "prior_precision",
           "solve_cholesky", "solve_conjugate_gradients", "CONDITION_LIMIT"]

# Above this estimate of cond(normal matrix) a fit warns.  The normal equations
# square the conditioning of the sampling: at 1e8 some combination of
# coefficients is determined 1e4 times more weakly than the best one, so the
# data noise reaches it amplified 1e4-fold, and the rounding of a double-precision
# solve (about cond * 1.1e-16) passes 1e-8 of the solution.  Such a combination is
# set by the noise and by rounding, not by the data: add damping or a prior.
CONDITION_LIMIT = 1.0e8
DEFAULT_MAXITER = 1000


class IllPosedWarning(UserWarning):
    """The data determine some combination of coefficients poorly (or not at all)."""


# ---------------------------------------------------------------------------
# real unknowns
# ---------------------------------------------------------------------------
class RealBasis:
    """Index of the real unknowns of degree ``lmax`` and their conversions.

    Attributes
    ----------
    size : int
        ``(lmax + 1)^2`` unknowns: first ``C_lm`` (l, m with m <= l, degree
        major), then ``S_lm`` (m >= 1).
    degree, order, part : ndarray
        Degree, order and 0 (cosine) / 1 (sine) of each unknown.
    col_cos, col_sin : ndarray
        ``(lmax+1, lmax+1)`` position of ``C_lm`` / ``S_lm`` (-1 where absent).
    """

    def __init__(self, lmax: int):
        self.lmax = lmax
        l, m = np.tril_indices(lmax + 1)
        sin = m > 0
        self.size = l.size + int(np.count_nonzero(sin))
        self.degree = np.concatenate([l, l[sin]])
        self.order = np.concatenate([m, m[sin]])
        self.part = np.concatenate([np.zeros(l.size, int), np.ones(int(np.count_nonzero(sin)), int)])
        self.col_cos = np.full((lmax + 1, lmax + 1), -1, dtype=np.int64)
        self.col_sin = np.full((lmax + 1, lmax + 1), -1, dtype=np.int64)
        self.col_cos[l, m] = np.arange(l.size)
        self.col_sin[l[sin], m[sin]] = l.size + np.arange(int(np.count_nonzero(sin)))
        self._l, self._m, self._sin = l, m, sin

    def to_complex(self, u: np.ndarray) -> np.ndarray:
        """(K, size) real unknowns -> complex orthonormal phase-free a_lm (K, L+1, L+1).

        a_l0 = C_l0 and a_lm = (C_lm - i S_lm) / sqrt(2) for m >= 1."""
        u = np.atleast_2d(u)
        n = self._l.size
        coef = np.zeros((u.shape[0], self.lmax + 1, self.lmax + 1), dtype=np.complex128)
        scale = np.where(self._m > 0, 1.0 / math.sqrt(2.0), 1.0)
        coef[:, self._l, self._m] = u[:, :n] * scale
        coef[:, self._l[self._sin], self._m[self._sin]] -= 1j * u[:, n:] / math.sqrt(2.0)
        return coef

    def from_adjoint(self, b: np.ndarray) -> np.ndarray:
        """Adjoint sums ``b_lm = w_m sum_j y_j Lambda_lm e^{-i m phi_j}`` -> E^T y in the unknowns.

        ``sum_j y_j f_j = sum Re(a) Re(b) + Im(a) Im(b)``; with a as in
        :meth:`to_complex` the derivative by C_lm is Re(b_lm) (m = 0) or
        Re(b_lm)/sqrt(2), and by S_lm it is -Im(b_lm)/sqrt(2)."""
        b = b.reshape((-1, self.lmax + 1, self.lmax + 1))
        scale = np.where(self._m > 0, 1.0 / math.sqrt(2.0), 1.0)
        cos = b[:, self._l, self._m].real * scale
        sin = -b[:, self._l[self._sin], self._m[self._sin]].imag / math.sqrt(2.0)
        return np.concatenate([cos, sin], axis=1)

    def convention_scale(self, norm: str, condon_shortley: bool) -> np.ndarray:
        """|R_i| with (unknown i in the given convention) = R_i (orthonormal phase-free unknown i)."""
        ones = np.tril(np.ones((self.lmax + 1, self.lmax + 1)))
        unit = Harmonics.from_cos_sin(ones, ones, norm="orthonormal", condon_shortley=False)
        C, S = unit.to(norm, condon_shortley).cos_sin()
        return np.abs(np.concatenate([C[self._l, self._m], S[self._l[self._sin], self._m[self._sin]]]))

    def harmonics(self, u: np.ndarray, batch: tuple[int, ...], norm: str, condon_shortley: bool,
                  radius: float | None = None) -> Harmonics:
        """Harmonics in the requested convention from (K, size) unknowns."""
        coef = self.to_complex(u).reshape(batch + (self.lmax + 1, self.lmax + 1))
        h = Harmonics(coef, norm="orthonormal", condon_shortley=False, radius=radius)
        return h.to(norm, condon_shortley)

    def sigma_harmonics(self, sigma: np.ndarray, batch: tuple[int, ...], norm: str,
                        condon_shortley: bool, radius: float | None = None) -> Harmonics:
        """Standard deviations of the unknowns (K, size), orthonormal phase-free, as
        Harmonics whose real form ``cos_sin()`` gives (sigma of C_lm, sigma of S_lm)
        in the requested convention."""
        sigma = np.atleast_2d(sigma) * self.convention_scale(norm, condon_shortley)
        C = np.zeros((sigma.shape[0], self.lmax + 1, self.lmax + 1))
        S = np.zeros_like(C)
        n = self._l.size
        C[:, self._l, self._m] = sigma[:, :n]
        S[:, self._l[self._sin], self._m[self._sin]] = sigma[:, n:]
        shape = batch + (self.lmax + 1, self.lmax + 1)
        return Harmonics.from_cos_sin(C.reshape(shape), S.reshape(shape), norm=norm,
                                      condon_shortley=condon_shortley, radius=radius)


# ---------------------------------------------------------------------------
# regularisation
# ---------------------------------------------------------------------------
def _check_damping(damping) -> float:
    try:
        d = float(damping)
    except (TypeError, ValueError):
        raise ValueError(f"damping must be a number >= 0, got {damping!r}") from None
    if not (math.isfinite(d) and d >= 0):
        raise ValueError(f"damping must be a finite number >= 0, got {damping!r}")
    return d


def _prior_variances(prior, lmax: int) -> np.ndarray:
    degrees = np.arange(lmax + 1, dtype=np.float64)
    if callable(prior):
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            var = prior(degrees)
        source = "prior(degrees)"
    else:
        var = prior
        source = "prior"
    try:
        var = np.asarray(var, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(f"{source} must give one prior variance per degree 0..{lmax}") from None
    if var.ndim == 0:
        var = np.full(lmax + 1, float(var))
    if var.ndim != 1 or var.size < lmax + 1:
        raise ValueError(f"{source} must give one prior variance per degree 0..{lmax} "
                         f"({lmax + 1} values), got shape {var.shape}")
    var = var[: lmax + 1]
    if np.any(np.isnan(var)) or np.any(var <= 0):
        bad = int(np.flatnonzero(np.isnan(var) | (var <= 0))[0])
        raise ValueError(f"{source} gives {var[bad]!r} at degree {bad}: prior variances must be "
                         "positive (use inf to leave a degree unconstrained)")
    return var


def prior_precision(basis: RealBasis, damping, prior, norm: str, condon_shortley: bool) -> np.ndarray:
    """Diagonal ``damping * D`` of the regularisation for the orthonormal unknowns.

    The penalty is ``damping * sum_i u_i^2 / prior_(l_i)`` on the unknowns in
    the caller's convention ``u_i = R_i u^ortho_i``, so on the orthonormal
    unknowns it is ``damping * R_i^2 / prior_(l_i)``.  ``prior`` is None
    (variance 1 for every degree: plain damping toward zero), an array with
    one variance per degree, or a callable taking the degrees (float array)
    and returning them, such as Kaula's rule ``lambda l: (1e-5 / l**2)**2``
    (inf at degree 0 leaves it unconstrained).
    """
    d = _check_damping(damping)
    if prior is not None and d == 0:
        raise ValueError("a prior has no effect with damping=0: set damping=1 to use the prior "
                         "variances as given (with data weights = 1 / noise variance), or scale it")
    if d == 0:
        return np.zeros(basis.size)
    var = np.ones(basis.lmax + 1) if prior is None else _prior_variances(prior, basis.lmax)
    scale = basis.convention_scale(norm, condon_shortley)
    with np.errstate(divide="ignore"):
        return d * scale ** 2 / var[basis.degree]


# ---------------------------------------------------------------------------
# result
# ---------------------------------------------------------------------------
@dataclass
class LeastSquaresFit:
    """Result of :func:`sphex.points.fit` and :func:`sphex.points.fit_masked`.

    Attributes
    ----------
    harmonics : Harmonics
        The estimated coefficients (batch shape of the values' leading axes).
    residual_rms : float or ndarray
        ``sqrt(sum_j w_j r_j^2 / sum_j w_j)`` of the residuals ``r = y - f``
        over the data used (per field of a batch).
    sigmas : Harmonics or None
        Posterior standard deviations of the coefficients (direct method
        only): ``sigmas.cos_sin()`` gives those of ``C_lm`` and ``S_lm`` in
        the requested convention; ``sigmas.coef`` holds them in the complex
        layout of :meth:`Harmonics.from_cos_sin`.
    info : dict
        ``method`` ("direct" or "iterative"), ``unknowns``, ``data``,
        ``condition_estimate`` (of the normal matrix; a lower estimate from
        the Lanczos values for the iterative method), ``iterations``
        (iterative), ``variance_factor`` (a posteriori variance of unit weight,
        ``sum w r^2 / (n - trace of the hat matrix)``, direct), and more per method.
    """

    harmonics: Harmonics
    residual_rms: float | np.ndarray
    sigmas: Harmonics | None
    info: dict
    _covariance_factor: np.ndarray | None = field(default=None, repr=False)
    _covariance_scale: np.ndarray | None = field(default=None, repr=False)

    def covariance(self, index: int = 0) -> np.ndarray:
        """Posterior covariance of the real unknowns (direct method only).

        Ordered as :class:`RealBasis` (``info["basis"]``: ``C_lm`` for
        m <= l degree by degree, then ``S_lm``), in the requested convention;
        ``index`` picks the field of a batch (the variance factor may differ).
        """
        if self._covariance_factor is None:
            raise ValueError("the covariance is only available from the direct method: "
                             "fit(..., method='direct')")
        inverse = self._covariance_factor
        scale = self._covariance_scale[index]
        cov = inverse @ inverse.T
        return cov * scale[:, None] * scale[None, :]


# ---------------------------------------------------------------------------
# direct solver
# ---------------------------------------------------------------------------
def solve_cholesky(normal: np.ndarray, rhs: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Solve ``normal u = rhs`` (upper triangle of ``normal`` used, overwritten).

    Returns ``(u, inverse_factor, condition)`` with ``u`` shaped like ``rhs``
    (K, p), ``inverse_factor`` the inverse ``U^{-1}`` of the Cholesky factor
    (``normal = U^T U``, so ``normal^{-1} = U^{-1} U^{-T}``) and ``condition``
    LAPACK's estimate of the 1-norm condition number (dpocon).
    """
    upper = np.triu(normal)
    symmetric = upper + np.triu(normal, 1).T
    anorm = float(np.max(np.sum(np.abs(symmetric), axis=0))) if normal.size else 0.0
    del symmetric
    try:
        factor, lower = scipy.linalg.cho_factor(normal, lower=False, overwrite_a=True, check_finite=False)
    except np.linalg.LinAlgError:
        raise ValueError("the normal matrix is singular: the data do not determine every "
                         "coefficient (too few points, or gaps larger than the degree resolves); "
                         "add damping (damping=1e-6 or more, see the L-curve in the docs) or "
                         "lower lmax") from None
    rcond, info = scipy.linalg.lapack.dpocon(factor, anorm, uplo="U")
    condition = math.inf if rcond <= 0 else 1.0 / rcond
    u = scipy.linalg.cho_solve((factor, lower), rhs.T, check_finite=False).T
    inverse, info = scipy.linalg.lapack.dtrtri(np.triu(factor), lower=0)
    if info != 0:  # pragma: no cover - a successful Cholesky factor is invertible
        raise ValueError("inverting the Cholesky factor failed: add damping")
    return u, inverse, condition


# ---------------------------------------------------------------------------
# iterative solver
# ---------------------------------------------------------------------------
class _LanczosRecorder:
    """Operators for scipy's cg that record what the Lanczos matrix needs.

    Preconditioned conjugate gradients apply the preconditioner once to each
    residual r_k (giving z_k) and the operator once to each direction p_k
    (giving q_k).  With rho_k = r_k . z_k, alpha_k = rho_k / (p_k . q_k) and
    beta_k = rho_(k+1) / rho_k, the Lanczos tridiagonal matrix of the
    preconditioned operator has diagonal 1/alpha_k + beta_(k-1)/alpha_(k-1)
    and off-diagonal sqrt(beta_k)/alpha_k (Saad 2003, section 6.7.3); its
    eigenvalues approach the extreme eigenvalues from inside.
    """

    def __init__(self, apply: Callable, precondition: np.ndarray, size: int, norm_rhs: float,
                 callback: Callable | None):
        self.rho: list[float] = []
        self.curvature: list[float] = []
        self.residuals: list[float] = []
        self.norm_rhs = norm_rhs
        self.callback = callback

        def matvec(p):
            q = apply(p)
            self.curvature.append(float(np.dot(p, q)))
            return q

        def psolve(r):
            z = precondition * r
            self.rho.append(float(np.dot(r, z)))
            self.residuals.append(float(np.linalg.norm(r)) / norm_rhs)
            if self.callback is not None and len(self.residuals) > 1:
                self.callback(len(self.residuals) - 1, self.residuals[-1])
            return z

        self.operator = LinearOperator((size, size), matvec=matvec, dtype=np.float64)
        self.preconditioner = LinearOperator((size, size), matvec=psolve, dtype=np.float64)

    def condition(self) -> float | None:
        k = min(len(self.curvature), len(self.rho))
        if k == 0:
            return None
        rho = np.array(self.rho[: k + 1])
        alpha = rho[:k] / np.array(self.curvature[:k])
        beta = rho[1:k + 1] / rho[:k] if rho.size > k else rho[1:] / rho[:-1]
        diag = 1.0 / alpha
        diag[1:] += beta[: k - 1] / alpha[: k - 1]
        off = np.sqrt(np.abs(beta[: k - 1])) / alpha[: k - 1]
        if not (np.all(np.isfinite(diag)) and np.all(np.isfinite(off))):
            return None
        values = scipy.linalg.eigvalsh_tridiagonal(diag, off)
        if values[0] <= 0:
            return math.inf
        return float(values[-1] / values[0])


def solve_conjugate_gradients(apply: Callable[[np.ndarray], np.ndarray], rhs: np.ndarray,
                              precondition: np.ndarray, tol: float, maxiter: int,
                              callback: Callable | None = None) -> tuple[np.ndarray, dict]:
    """Preconditioned conjugate gradients on the normal equations (scipy.sparse.linalg.cg).

    ``apply(u)`` returns the normal matrix times ``u``; ``precondition`` is
    the diagonal of an approximate inverse.  Stops when the residual of the
    normal equations is below ``tol`` times ``|rhs|``.  Returns the solution
    and ``{"iterations", "converged", "relative_residual",
    "condition_estimate"}`` (the condition of the preconditioned operator,
    from the Lanczos values).
    """
    norm_rhs = float(np.linalg.norm(rhs))
    if norm_rhs == 0:
        return np.zeros_like(rhs), dict(iterations=0, converged=True, relative_residual=0.0,
                                        condition_estimate=None)
    recorder = _LanczosRecorder(apply, precondition, rhs.size, norm_rhs, callback)
    u, status = cg(recorder.operator, rhs, rtol=tol, atol=0.0, maxiter=maxiter,
                   M=recorder.preconditioner)
    iterations = len(recorder.curvature)
    residual = float(np.linalg.norm(rhs - apply(u))) / norm_rhs
    return u, dict(iterations=iterations, converged=status == 0, relative_residual=residual,
                   condition_estimate=recorder.condition())


def warn_if_ill_posed(condition: float | None, method: str, damping: float) -> None:
    """IllPosedWarning when the condition estimate passes CONDITION_LIMIT."""
    if condition is None or condition <= CONDITION_LIMIT:
        return
    hint = ("increase damping" if damping > 0 else
            "add damping (scan it over decades and take the corner of the L-curve, "
            "docs/points-and-fits.md) or a prior, or lower lmax")
    warnings.warn(
        f"ill-posed fit: the normal matrix has a condition estimate of {condition:.2g} ({method} "
        f"method), above {CONDITION_LIMIT:.0e}; some combinations of coefficients are hardly "
        f"constrained by the data (gaps, or too high a degree for the sampling) and are set by "
        f"noise and rounding: {hint}", IllPosedWarning, stacklevel=3)


def warn_not_converged(info: dict, damping: float) -> None:
    """IllPosedWarning when conjugate gradients stopped at maxiter."""
    if info["converged"]:
        return
    hint = "increase damping" if damping > 0 else "add damping"
    warnings.warn(
        f"conjugate gradients stopped after {info['iterations']} iterations with a relative "
        f"residual of {info['relative_residual']:.2g}, above the tolerance: the problem is "
        f"probably ill-posed; {hint}, lower lmax, or raise maxiter", IllPosedWarning, stacklevel=3)


# ---------------------------------------------------------------------------
# checks shared by the estimators
# ---------------------------------------------------------------------------
def check_integer(name: str, value, minimum: int = 0) -> int:
    """An integer argument (an int, or a float with an integral value) of at least ``minimum``."""
    ok = isinstance(value, (numbers.Integral, float, np.floating)) and not isinstance(value, (bool, np.bool_))
    if ok and isinstance(value, (float, np.floating)):
        ok = math.isfinite(value) and float(value).is_integer()
    if not ok or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


def _is_real_array(value) -> bool:
    try:
        return np.asarray(value).dtype.kind in "fiu"
    except (TypeError, ValueError):
        return False


def check_tolerance(tol) -> float:
    """The stopping tolerance of conjugate gradients: a number in (0, 1)."""
    try:
        value = float(tol)
    except (TypeError, ValueError):
        value = math.nan
    if not (0.0 < value < 1.0):
        raise ValueError(f"tol must be a number between 0 and 1 (relative residual of the normal "
                         f"equations, default 1e-10), got {tol!r}")
    return value


def check_enough_data(n_data: int, unknowns: int, damping: float, what: str) -> None:
    if n_data == 0:
        raise ValueError(f"no data: there are no {what}, so nothing can be fitted")
    if unknowns > n_data and damping == 0:
        raise ValueError(f"{unknowns} unknowns ((lmax+1)^2) but only {n_data} {what}: the fit is "
                         "underdetermined; lower lmax, or add damping (damping > 0, optionally "
                         "with a prior) to pick the smallest solution that fits the data")


def iterative_info(runs: list[dict]) -> dict:
    conditions = [r["condition_estimate"] for r in runs if r["condition_estimate"] is not None]
    info = dict(method="iterative",
                condition_estimate=max(conditions) if conditions else None,
                iterations=runs[0]["iterations"] if len(runs) == 1 else [r["iterations"] for r in runs],
                converged=all(r["converged"] for r in runs),
                relative_residual=max(r["relative_residual"] for r in runs))
    return info


# ---------------------------------------------------------------------------
# least squares on a grid with missing cells
# ---------------------------------------------------------------------------
def fit_masked(values, grid: Grid, lmax: int, *, mask=None, damping: float = 0.0, prior=None,
               norm: str = "orthonormal", condon_shortley: bool = True, tol: float = 1e-10,
               maxiter: int | None = None, callback=None) -> LeastSquaresFit:
    """Spherical-harmonic coefficients from a grid with missing cells, by least squares.

    Only the observed cells enter: the estimate fits them in the area-weighted
    least-squares sense (the grid's quadrature weights are the data weights)
    and says nothing about the missing ones except through the coefficients.
    Nothing is filled in; evaluate the result with
    :func:`sphex.transform.synthesize` to see what it implies under the gaps.

    Parameters
    ----------
    values : array_like, shape ``(..., nlat, nlon)``
        Real field(s) on ``grid``; leading axes are a batch.  Missing cells are
        NaN unless ``mask`` is given.
    grid : Grid
        The grid of the values.
    lmax : int
        Highest degree estimated, at most ``(nlon - 1) // 2``.
    mask : array_like of bool, optional
        ``True`` marks a MISSING cell (shape ``(nlat, nlon)`` or that of
        ``values``).  Without it the NaN cells are the missing ones.  Values at
        cells not marked missing must be finite.
    damping, prior, norm, condon_shortley, tol, maxiter, callback
        As for :func:`sphex.points.fit`.

    Returns
    -------
    LeastSquaresFit
        ``.sigmas`` is None (the operator is never formed as a matrix);
        ``.info`` has ``method="iterative"``, ``iterations``,
        ``condition_estimate`` and ``observed_fraction`` (of the area).

    Raises
    ------
    ValueError
        Every cell missing, NaN in a cell the mask says is observed, a mask
        of the wrong shape, more unknowns than observed cells without damping.

    Warns
    -----
    IllPosedWarning
        When the gaps leave combinations of coefficients undetermined: the
        condition estimate passes 1e8 (for a cap of missing cells this
        happens once ``lmax`` resolves functions concentrated inside the cap),
        or conjugate gradients stop without converging.

    Notes
    -----
    With ``E`` the synthesis restricted to the observed cells and ``W`` their
    area weights ``(2 pi / nlon) w_j``, conjugate gradients solve
    ``(E^T W E + damping D) c = E^T W y``; ``E^T W`` is the analysis of the
    field set to zero on the missing cells.  Up to the grid's exact degree,
    ``E^T W E = I - M`` where ``M`` is the same operator over the missing
    cells, whose eigenvalues are the concentrations of band-limited functions
    inside the gaps (Simons, Dahlen and Wieczorek 2006): the problem is
    ill-posed when a band-limited function can hide in the gaps.  The
    condition estimate comes from the Lanczos values of the run and is a
    lower estimate; a run that stops at ``maxiter`` warns as well.

    References
    ----------
    Simons, F. J., Dahlen, F. A. and Wieczorek, M. A. (2006), Spatiospectral
    concentration on a sphere, SIAM Review 48, 504-536.
    """
    check_norm(norm)
    if not isinstance(grid, Grid):
        raise ValueError(f"grid must be a sphex.Grid, got {type(grid).__name__}")
    lmax = check_integer("lmax", lmax)
    if lmax > (grid.nlon - 1) // 2:
        raise ValueError(f"lmax={lmax} needs at least {2 * lmax + 1} longitudes, the grid has "
                         f"{grid.nlon}: use lmax <= {(grid.nlon - 1) // 2}")
    fields, missing = _masked_fields(values, grid, mask)
    batch = fields.shape[:-2]
    fields = fields.reshape((-1,) + grid.shape)
    missing = np.broadcast_to(missing, (fields.shape[0],) + grid.shape) if missing.ndim == 2 else \
        missing.reshape((-1,) + grid.shape)
    cell_area = (2 * np.pi / grid.nlon) * np.repeat(grid.weights[:, None], grid.nlon, axis=1)
    if np.any(cell_area < 0):
        raise ValueError("the grid has negative quadrature weights, which cannot serve as data "
                         "weights: use a Gauss grid or the 'cells' or 'poles' layout")
    basis = RealBasis(lmax)
    precision = prior_precision(basis, damping, prior, norm, condon_shortley)
    maxiter = DEFAULT_MAXITER if maxiter is None else check_integer("maxiter", maxiter, 1)
    tol = check_tolerance(tol)
    u = np.empty((fields.shape[0], basis.size))
    runs, rms, observed_fraction, counts = [], [], [], []
    for k in range(fields.shape[0]):
        observed = ~missing[k] & (cell_area > 0)
        counts.append(int(np.count_nonzero(observed)))
        check_enough_data(counts[-1], basis.size, float(damping), "observed cells")
        weight = np.where(observed, cell_area, 0.0)
        data = np.where(observed, fields[k], 0.0)
        u[k], run = _solve_masked(data, weight, grid, basis, precision, tol, maxiter, callback)
        runs.append(run)
        residual = data - synthesize(_orthonormal(basis, u[k]), grid)
        rms.append(math.sqrt(float(np.sum(weight * residual ** 2) / np.sum(weight))))
        observed_fraction.append(float(np.sum(weight) / (4 * np.pi)))
    info = iterative_info(runs)
    info.update(unknowns=basis.size, data=counts if batch else counts[0], basis=basis,
                observed_fraction=observed_fraction if batch else observed_fraction[0])
    damping_level = float(np.max(precision, initial=0.0))
    warn_if_ill_posed(info["condition_estimate"], "iterative", damping_level)
    for run in runs:
        warn_not_converged(run, damping_level)
    return LeastSquaresFit(harmonics=basis.harmonics(u, batch, norm, condon_shortley),
                           residual_rms=np.array(rms).reshape(batch) if batch else rms[0],
                           sigmas=None, info=info)


def _orthonormal(basis: RealBasis, u: np.ndarray) -> Harmonics:
    return Harmonics(basis.to_complex(u)[0], norm="orthonormal", condon_shortley=False)


def _solve_masked(data, weight, grid: Grid, basis: RealBasis, precision: np.ndarray, tol: float,
                  maxiter: int, callback):
    """Conjugate gradients with synthesis and analysis as the operator pair.

    ``analyze`` of a field is ``sum over cells of (2 pi / nlon) w_j f Lambda_lm e^{-i m phi}``,
    so analysing the field set to zero on the missing cells is ``E^T W``."""
    lmax = basis.lmax
    observed = (weight > 0).astype(np.float64)

    def adjoint(field):
        a = analyze(observed * field, grid, lmax, norm="orthonormal", condon_shortley=False,
                    allow_aliasing=True).coef
        a[..., 1:] *= 2.0     # the -m terms of a real field: b_lm = w_m sum y Lambda e^{-i m phi}
        return basis.from_adjoint(a)[0]

    def apply(u):
        return adjoint(synthesize(_orthonormal(basis, u), grid)) + precision * u

    precondition = 1.0 / (np.sum(weight) / (4 * np.pi) + precision)
    return solve_conjugate_gradients(apply, adjoint(data), precondition, tol, maxiter, callback)


def _masked_fields(values, grid: Grid, mask) -> tuple[np.ndarray, np.ndarray]:
    """Values (..., nlat, nlon) as float64 and the missing cells (True = missing)."""
    if not _is_real_array(values):
        raise ValueError("values must be real numbers (float or integer)")
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim < 2 or arr.shape[-2:] != grid.shape:
        raise ValueError(f"values have shape {arr.shape} but the grid is (nlat, nlon) = {grid.shape}: "
                         "the last two axes must be latitude then longitude")
    if np.any(np.isinf(arr)):
        raise ValueError("values contain inf: mark those cells missing (NaN or mask=True) "
                         "or correct them")
    if mask is None:
        missing = np.isnan(arr)
    else:
        m = np.asarray(mask)
        if m.dtype != bool:
            raise ValueError(f"mask must be boolean (True = missing cell), got dtype {m.dtype}")
        if m.shape not in (grid.shape, arr.shape):
            raise ValueError(f"mask has shape {m.shape}; it must be {grid.shape} (one mask for all "
                             f"fields) or {arr.shape} (True = missing cell)")
        bad = int(np.count_nonzero(np.isnan(arr) & ~np.broadcast_to(m, arr.shape)))
        if bad:
            raise ValueError(f"{bad} cell(s) hold NaN but the mask marks them observed: mark them "
                             "missing in the mask (True = missing), or leave mask=None to treat "
                             "every NaN as missing")
        missing = m
    if np.all(missing):
        raise ValueError("every cell is missing (masked or NaN): there is nothing to fit")
    return arr, missing
