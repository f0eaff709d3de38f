"""Reference values for the core checks, built from general-purpose libraries only.

Nothing here imports sphex: every function is an independent way of getting the
number that sphex is checked against (scipy.special, mpmath, sympy,
numpy.polynomial), written out from the textbook definitions.

Conventions follow the core API: colatitude ``theta`` in radians, ``x = cos(theta)``,
``Lambda_lm = K(l, m) * cs**m * P_l^m(x)`` with
``P_l^m(x) = (1 - x**2)**(m/2) d^m/dx^m P_l(x)`` (no phase), ``cs = -1`` with the
Condon-Shortley phase.
"""
from __future__ import annotations

import math
from functools import lru_cache

import mpmath
import numpy as np
import scipy.special as sps
import sympy

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")


# ---------------------------------------------------------------------------
# scipy.special based values (double precision, low degree)
# ---------------------------------------------------------------------------
def scipy_lambda(l: int, m: int, theta, norm: str, condon_shortley: bool) -> np.ndarray:
    """Lambda_lm(theta) for one (l, m >= 0) from scipy.special.

    ``scipy.special.sph_legendre_p`` is the orthonormal function *with* the
    Condon-Shortley phase (its docstring: the factor sqrt((2n+1)(n-m)!/(4 pi (n+m)!))
    times assoc_legendre_p, which carries (-1)^m).  The other normalisations are
    the definitions of the core API: full = sqrt(4 pi) orthonormal, schmidt =
    sqrt(4 pi / (2l+1)) orthonormal; unnormalized from scipy.special.assoc_legendre_p.
    """
    theta = np.asarray(theta, dtype=float)
    phase = 1.0 if condon_shortley else (-1.0) ** m
    # scipy >= 1.15 returns a leading axis over derivative orders (diff_n + 1 entries).
    # sph_legendre_p takes theta itself, so sin(theta) keeps full relative precision next to
    # the poles (assoc_legendre_p takes x = cos(theta), where 1 - x^2 loses digits there).
    orthonormal = sps.sph_legendre_p(l, m, theta)[0]
    return phase * norm_factor_from_orthonormal(l, m, norm) * orthonormal


def scipy_unnorm_from_x(l: int, m: int, x) -> np.ndarray:
    """Plain P_l^m(x) with the Condon-Shortley phase, scipy.special.assoc_legendre_p."""
    return sps.assoc_legendre_p(l, m, np.asarray(x, dtype=float))[0]


def scipy_lambda_dtheta(l: int, m: int, theta, norm: str, condon_shortley: bool) -> np.ndarray:
    """d Lambda_lm / d theta from scipy.special.sph_legendre_p(diff_n=1) (derivative in theta)."""
    theta = np.asarray(theta, dtype=float)
    phase = 1.0 if condon_shortley else (-1.0) ** m
    d = sps.sph_legendre_p(l, m, theta, diff_n=1)[1]
    if norm == "unnormalized":
        k = math.sqrt((2 * l + 1) / (4 * math.pi) * math.factorial(l - m) / math.factorial(l + m))
        return phase * d / k
    factor = {"orthonormal": 1.0, "full": math.sqrt(4 * math.pi), "schmidt": math.sqrt(4 * math.pi / (2 * l + 1))}[norm]
    return phase * factor * d


def norm_factor_from_orthonormal(l: int, m: int, norm: str) -> float:
    """Lambda_lm(norm) / Lambda_lm(orthonormal), from the definitions of the core API (exact factorials)."""
    if norm == "orthonormal":
        return 1.0
    if norm == "full":
        return math.sqrt(4 * math.pi)
    if norm == "schmidt":
        return math.sqrt(4 * math.pi / (2 * l + 1))
    if norm == "unnormalized":
        # 1 / sqrt((2l+1)/(4 pi) (l-m)!/(l+m)!) with exact integer factorials
        ratio = math.factorial(l + m) / math.factorial(l - m)
        return math.sqrt(4 * math.pi / (2 * l + 1) * ratio)
    raise KeyError(norm)


# ---------------------------------------------------------------------------
# sympy: the derivative form of the associated Legendre function
# ---------------------------------------------------------------------------
_X = sympy.Symbol("x")
_T = sympy.Symbol("t")


@lru_cache(maxsize=None)
def _sympy_dm_legendre(l: int, m: int):
    """d^m/dx^m P_l(x) as an exact sympy polynomial (sympy.legendre)."""
    return sympy.expand(sympy.diff(sympy.legendre(l, _X), _X, m))


def sympy_plm(l: int, m: int, theta: float, dps: int = 30) -> float:
    """(1-x^2)^{m/2} d^m/dx^m P_l(x) at x = cos(theta), no phase (sympy, exact polynomial).

    The polynomial is exact (rational coefficients); it is evaluated with
    mpmath at ``dps`` digits at the double ``theta`` given.
    """
    with mpmath.workdps(dps):
        t = mpmath.mpf(float(theta))
        x = mpmath.cos(t)
        poly = sympy.Poly(_sympy_dm_legendre(l, m), _X)
        val = mpmath.mpf(0)
        for (power,), c in poly.terms():
            val += mpmath.mpf(c.p) / mpmath.mpf(c.q) * x**power
        return float(mpmath.sin(t) ** m * val)


@lru_cache(maxsize=None)
def _sympy_plm_theta_derivative(l: int, m: int):
    """d/dt [ sin(t)^m * (d^m P_l/dx^m)(cos t) ] as a sympy expression in t."""
    expr = sympy.sin(_T) ** m * _sympy_dm_legendre(l, m).subs(_X, sympy.cos(_T))
    return sympy.lambdify(_T, sympy.diff(expr, _T), "mpmath")


def sympy_plm_dtheta(l: int, m: int, theta: float, dps: int = 30) -> float:
    """d/dtheta of the no-phase unnormalised P_l^m(cos theta), by sympy differentiation."""
    f = _sympy_plm_theta_derivative(l, m)
    with mpmath.workdps(dps):
        return float(f(mpmath.mpf(float(theta))))


# ---------------------------------------------------------------------------
# mpmath: fully normalised recursion in extended precision (and closed form)
# ---------------------------------------------------------------------------
def mp_ortho_column(m: int, lmax: int, theta: float, dps: int = 45):
    """Orthonormal, no-phase Lambda_lm(theta) for l = m..lmax as mpmath numbers.

    Standard three-term recursion in degree for the fully normalised functions
    (common practice), with the starting value in closed form
    Lambda_mm = sqrt((2m+1) / (4 pi (2m)!)) (2m-1)!! sin(theta)^m.
    mpmath numbers have an unbounded exponent, so values far below the double
    range (1e-600 and less) are represented exactly to ``dps`` digits.
    ``theta`` is taken as the given double, exactly.
    """
    with mpmath.workdps(dps):
        t = mpmath.mpf(float(theta))
        x, s = mpmath.cos(t), mpmath.sin(t)
        if m == 0:
            pmm = 1 / mpmath.sqrt(4 * mpmath.pi)
        else:
            pmm = mpmath.sqrt((2 * m + 1) / (4 * mpmath.pi) / mpmath.factorial(2 * m)) * mpmath.fac2(2 * m - 1) * s**m
        out = [pmm]
        if lmax > m:
            out.append(mpmath.sqrt(2 * m + 3) * x * pmm)
        for l in range(m + 2, lmax + 1):
            a = mpmath.sqrt(mpmath.mpf(4 * l * l - 1) / (l * l - m * m))
            b = mpmath.sqrt(mpmath.mpf((2 * l + 1) * (l + m - 1) * (l - m - 1)) / ((2 * l - 3) * (l * l - m * m)))
            out.append(a * x * out[-1] - b * out[-2])
        return out


def mp_ortho_column_dtheta(m: int, lmax: int, theta: float, dps: int = 45):
    """d Lambda_lm / d theta (orthonormal, no phase) for l = m..lmax, in mpmath.

    From the identity (1-x^2) dP_l^m/dx = -l x P_l^m + (l+m) P_{l-1}^m
    (DLMF 14.10.5 form, from memory; common practice), written for the normalised functions:
    dLambda_l/dtheta = (l x Lambda_l - sqrt((2l+1)/(2l-1) (l-m)(l+m)) Lambda_{l-1}) / sin(theta).
    """
    with mpmath.workdps(dps):
        vals = mp_ortho_column(m, lmax, theta, dps)
        t = mpmath.mpf(float(theta))
        x, s = mpmath.cos(t), mpmath.sin(t)
        out = []
        for i, l in enumerate(range(m, lmax + 1)):
            prev = vals[i - 1] if l > m else mpmath.mpf(0)
            c = mpmath.sqrt(mpmath.mpf(2 * l + 1) / (2 * l - 1) * (l - m) * (l + m)) if l > m else 0
            out.append((l * x * vals[i] - c * prev) / s)
        return out


def mp_ortho_closed_form(l: int, m: int, theta: float, dps: int = 45):
    """Orthonormal, no-phase Lambda_lm via mpmath.legenp (hypergeometric closed form).

    mpmath.legenp(type=2) carries the Condon-Shortley phase (-1)^m; it is removed here.
    """
    with mpmath.workdps(dps):
        x = mpmath.cos(mpmath.mpf(float(theta)))
        k = mpmath.sqrt((2 * l + 1) / (4 * mpmath.pi) * mpmath.factorial(l - m) / mpmath.factorial(l + m))
        return (-1) ** m * k * mpmath.legenp(l, m, x, type=2)


def mp_to_float(values) -> np.ndarray:
    """mpmath numbers to doubles (values below the double range become 0 or subnormal)."""
    return np.array([float(v) for v in values])


# ---------------------------------------------------------------------------
# Quadrature references
# ---------------------------------------------------------------------------
def gauss_nodes_weights(n: int) -> tuple[np.ndarray, np.ndarray]:
    """numpy.polynomial.legendre.leggauss, reordered north to south (x descending)."""
    x, w = np.polynomial.legendre.leggauss(n)
    return x[::-1].copy(), w[::-1].copy()


def exact_monomial_integral(k: int) -> float:
    """Integral of x^k over [-1, 1] (common practice): 2/(k+1) for even k, 0 for odd."""
    return 0.0 if k % 2 else 2.0 / (k + 1)


def legendre_polys(kmax: int, x: np.ndarray) -> np.ndarray:
    """P_0..P_kmax at x, shape (kmax+1, len(x)), by Bonnet's recurrence (common practice)."""
    x = np.asarray(x, dtype=float)
    out = np.empty((kmax + 1, x.size))
    out[0] = 1.0
    if kmax >= 1:
        out[1] = x
    for k in range(2, kmax + 1):
        out[k] = ((2 * k - 1) * x * out[k - 1] - (k - 1) * out[k - 2]) / k
    return out


def legendre_poly(k: int, x: np.ndarray) -> np.ndarray:
    """P_k(x) by numpy.polynomial.legendre.legval (integral over [-1,1] is 2 delta_k0)."""
    c = np.zeros(k + 1)
    c[k] = 1.0
    return np.polynomial.legendre.legval(x, c)


# ---------------------------------------------------------------------------
# Coefficients and fields
# ---------------------------------------------------------------------------
def random_coef(lmax: int, rng: np.random.Generator, batch: tuple[int, ...] = ()) -> np.ndarray:
    """Random coefficients of a real band-limited field: (..., lmax+1, lmax+1), zero for m > l, a_l0 real."""
    shape = batch + (lmax + 1, lmax + 1)
    coef = rng.standard_normal(shape) + 1j * rng.standard_normal(shape)
    coef = np.tril(coef)  # keep m <= l (rows are l, columns m)
    coef[..., :, 0] = coef[..., :, 0].real
    return coef


def real_form_field(C: np.ndarray, S: np.ndarray, colat: np.ndarray, lon_rad: np.ndarray,
                    norm: str, condon_shortley: bool) -> np.ndarray:
    """f = sum_l sum_m (C_lm cos m phi + S_lm sin m phi) r_m Lambda_lm, Lambda from scipy.special.

    r_m = sqrt(2) for m > 0 except for "unnormalized" (r_m = 1), as in the core API.
    """
    lmax = C.shape[-1] - 1
    f = np.zeros((colat.size, lon_rad.size))
    for m in range(lmax + 1):
        r = 1.0 if (m == 0 or norm == "unnormalized") else math.sqrt(2.0)
        cm, sm = np.cos(m * lon_rad), np.sin(m * lon_rad)
        for l in range(m, lmax + 1):
            lam = scipy_lambda(l, m, colat, norm, condon_shortley)
            f += r * np.outer(lam, C[l, m] * cm + S[l, m] * sm)
    return f


def complex_form_field(coef: np.ndarray, colat: np.ndarray, lon_rad: np.ndarray,
                       norm: str, condon_shortley: bool) -> np.ndarray:
    """f = sum_l [a_l0 Lambda_l0 + 2 Re sum_{m>0} a_lm Lambda_lm e^{i m phi}], Lambda from scipy.special.

    This is sum over m = -l..l of a_lm Y_lm with a_{l,-m} = s_m conj(a_lm) and
    Y_{l,-m} = s_m conj(Y_lm) (core API), written out for one field.
    """
    lmax = coef.shape[-1] - 1
    f = np.zeros((colat.size, lon_rad.size))
    for m in range(lmax + 1):
        e = np.exp(1j * m * lon_rad)
        w = 1.0 if m == 0 else 2.0
        for l in range(m, lmax + 1):
            lam = scipy_lambda(l, m, colat, norm, condon_shortley)
            f += w * np.real(np.outer(lam, coef[l, m] * e))
    return f


def norm_factor_array(lmax: int, norm: str) -> np.ndarray:
    """(lmax+1, lmax+1) array [l, m] of norm_factor_from_orthonormal (1 where m > l)."""
    out = np.ones((lmax + 1, lmax + 1))
    for l in range(lmax + 1):
        for m in range(l + 1):
            out[l, m] = norm_factor_from_orthonormal(l, m, norm)
    return out


def mp_gauss_node_weight(n: int, x0: float, dps: int = 30) -> tuple[float, float]:
    """Gauss-Legendre node and weight near ``x0`` for n nodes, in mpmath.

    Newton's method on P_n (three-term recurrence, common practice) started from x0,
    weight w = 2 (1 - x^2) / (n P_{n-1}(x))^2 (DLMF 3.5.19 form, from memory). Returns doubles.
    """
    with mpmath.workdps(dps):
        x = mpmath.mpf(float(x0))

        def p_pair(xx):
            p0, p1 = mpmath.mpf(1), xx
            for k in range(2, n + 1):
                p0, p1 = p1, ((2 * k - 1) * xx * p1 - (k - 1) * p0) / k
            return p1, p0

        for _ in range(4):
            pn, pn1 = p_pair(x)
            dp = n * (x * pn - pn1) / (x * x - 1)
            x -= pn / dp
        pn, pn1 = p_pair(x)
        w = 2 * (1 - x * x) / (n * pn1) ** 2
        return float(x), float(w)


def mp_gauss_colatitude(n: int, x0: float, dps: int = 40) -> float:
    """Colatitude arccos(x) of the Gauss-Legendre node near ``x0`` for n nodes, in mpmath.

    The node is found as in :func:`mp_gauss_node_weight` and its colatitude taken at ``dps``
    digits, so that nodes next to the poles (where x = cos(theta) rounds away the relative
    precision of theta) are resolved to full double precision. Returns a double.
    """
    with mpmath.workdps(dps):
        x = mpmath.mpf(float(x0))
        for _ in range(5):
            p0, p1 = mpmath.mpf(1), x
            for k in range(2, n + 1):
                p0, p1 = p1, ((2 * k - 1) * x * p1 - (k - 1) * p0) / k
            x -= p1 / (n * (x * p1 - p0) / (x * x - 1))
        return float(mpmath.acos(x))
