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
import warnings
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import LinearOperator, cg

from sphex.harmonics import Harmonics

__all__ = ["IllPosedWarning", "LeastSquaresFit", "RealBasis", "prior_precision",
           "solve_cholesky", "solve_conjugate_gradients", "CONDITION_LIMIT"]

# Above this estimate of cond(normal matrix) a fit warns.  The normal equations
# square the conditioning of the sampling: at 1e8 some combination of
# coefficients is determined 1e4 times more weakly than the best one, so the
# data noise reaches it amplified 1e4-fold, and the rounding of a double-precision
# solve (about cond * 1.1e-16) passes 1e-8 of the solution.  Such a combination is
# set by the noise and by rounding, not by the data: add damping or a prior.
CONDITION_LIMIT = 1.0e8


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
            "add damping (for example damping=1e-6 relative to the data weights; see the "
            "L-curve in the docs) or a prior, or lower lmax")
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
