"""Checks of sphex.legendre: values, normalisations, phases, high degree, derivatives."""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
import scipy.special as sps

from _reference import (
    NORMS,
    mp_ortho_closed_form,
    mp_ortho_column,
    mp_ortho_column_dtheta,
    mp_to_float,
    norm_factor_from_orthonormal,
    scipy_lambda,
    scipy_lambda_dtheta,
    scipy_unnorm_from_x,
    sympy_plm,
    sympy_plm_dtheta,
)
from sphex import legendre

# points next to the poles included on purpose; the poles themselves are checked apart
COLAT = np.array([1e-8, 0.01, 0.3, 1.0, np.pi / 2, 2.0, np.pi - 0.01, np.pi - 1e-7])
COLAT_INTERIOR = np.array([0.01, 0.3, 1.0, np.pi / 2, 2.0, np.pi - 0.01])


def order_error(impl: np.ndarray, ref: np.ndarray, scale: np.ndarray | None = None, floor: float = 0.0) -> float:
    """max |impl - ref| over degrees, relative to the largest |ref| of the order, worst point.

    ``impl`` and ``ref`` are (degree, point); ``scale`` (degree,) divides both first
    (used to compare unnormalised values on their natural size).  Where the whole order
    is below ``floor`` times its largest value over all points, the error is measured
    against that ``floor``-scaled size instead.
    """
    impl = np.asarray(impl, dtype=float)
    ref = np.asarray(ref, dtype=float)
    if scale is not None:
        impl = impl / scale[:, None]
        ref = ref / scale[:, None]
    size = np.max(np.abs(ref), axis=0)
    size = np.maximum(size, floor * np.max(size))
    size[size == 0] = 1.0
    return float(np.max(np.max(np.abs(impl - ref), axis=0) / size))


# --------------------------------------------------------------------------------------
# Low degree against scipy.special
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_for_order_matches_scipy(norm, condon_shortley):
    # source: scipy.special.sph_legendre_p (orthonormal, with Condon-Shortley phase) and
    # scipy.special.assoc_legendre_p (unnormalized), scaled per the core API definitions
    lmax = 30
    worst = 0.0
    for m in range(lmax + 1):
        got = legendre.for_order(m, lmax, COLAT, norm=norm, condon_shortley=condon_shortley)
        assert got.shape == (lmax + 1 - m, COLAT.size)
        ref = np.array([scipy_lambda(l, m, COLAT, norm, condon_shortley) for l in range(m, lmax + 1)])
        scale = np.array([norm_factor_from_orthonormal(l, m, norm) for l in range(m, lmax + 1)])
        worst = max(worst, order_error(got, ref, scale))
    assert worst < 1e-13, worst


@pytest.mark.reference
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_all_orders_matches_scipy_and_for_order(norm, condon_shortley):
    # source: scipy.special.sph_legendre_p_all (all degrees and orders at once; orthonormal
    # with the Condon-Shortley phase, which is removed by (-1)^m for condon_shortley=False)
    lmax = 25
    got = legendre.all_orders(lmax, COLAT, norm=norm, condon_shortley=condon_shortley)
    assert got.shape == (lmax + 1, lmax + 1, COLAT.size)
    ref_all = sps.sph_legendre_p_all(lmax, lmax, COLAT)[0]  # (diff, l, m index, point)
    for m in range(lmax + 1):
        l = np.arange(m, lmax + 1)
        scale = np.array([norm_factor_from_orthonormal(int(k), m, norm) for k in l])
        phase = 1.0 if condon_shortley else (-1.0) ** m
        ref = phase * ref_all[m:, m, :] * scale[:, None]
        # 1e-13: measured 1.7e-14 (the same recursion errors as test_for_order_matches_scipy)
        assert order_error(got[m:, m, :], ref, scale) < 1e-13
        np.testing.assert_array_equal(got[:m, m, :], 0.0)  # zero where m > l
        # internal consistency beside the reference: all_orders is a loop over for_order
        np.testing.assert_array_equal(
            got[m:, m, :], legendre.for_order(m, lmax, COLAT, norm=norm, condon_shortley=condon_shortley))


@pytest.mark.reference
@pytest.mark.parametrize("norm", NORMS)
def test_values_at_the_poles(norm):
    # at colatitude 0: P_l^0 = 1, P_l^m = 0 for m > 0; at pi: P_l^0 = (-1)^l (common practice)
    lmax = 40
    for m in range(lmax + 1):
        l = np.arange(m, lmax + 1)
        scale = np.array([norm_factor_from_orthonormal(int(k), m, norm) for k in l])
        size = np.sqrt((2 * l + 1) / (4 * np.pi)) * scale  # |Lambda_l0| at a pole
        north = legendre.for_order(m, lmax, np.array([0.0]), norm=norm)[:, 0]
        south = legendre.for_order(m, lmax, np.array([np.pi]), norm=norm)[:, 0]
        if m == 0:
            np.testing.assert_allclose(north, size, rtol=1e-13)
            np.testing.assert_allclose(south, (-1.0) ** l * size, rtol=1e-13)
        else:
            # exactly 0 at theta = 0; at the double nearest pi, sin = 1.2e-16, so ~1e-16 * size
            assert np.all(np.abs(north) <= 1e-14 * size)
            assert np.all(np.abs(south) <= 1e-14 * size * l)


@pytest.mark.reference
def test_unnormalised_matches_scipy_assoc_legendre_in_x():
    # source: scipy.special.assoc_legendre_p (plain P_l^m of x, Condon-Shortley phase), away
    # from the poles where x = cos(theta) represents theta well
    lmax = 20
    colat = np.array([0.4, 1.0, np.pi / 2, 2.2, 2.9])
    for m in range(lmax + 1):
        got = legendre.for_order(m, lmax, colat, norm="unnormalized", condon_shortley=True)
        ref = np.array([scipy_unnorm_from_x(l, m, np.cos(colat)) for l in range(m, lmax + 1)])
        scale = np.array([norm_factor_from_orthonormal(l, m, "unnormalized") for l in range(m, lmax + 1)])
        assert order_error(got, ref, scale) < 1e-13


@pytest.mark.reference
def test_unnormalised_no_phase_matches_sympy_derivative_form():
    # source: sympy, P_l^m(x) = (1-x^2)^{m/2} d^m/dx^m P_l(x) from sympy.legendre
    # (the definition in the core API; common practice)
    lmax = 12
    colat = np.array([0.2, 0.9, 1.7, 2.9])
    worst = 0.0
    for m in range(lmax + 1):
        got = legendre.for_order(m, lmax, colat, norm="unnormalized", condon_shortley=False)
        ref = np.array([[sympy_plm(l, m, t) for t in colat] for l in range(m, lmax + 1)])
        worst = max(worst, order_error(got, ref))
    assert worst < 1e-13, worst


@pytest.mark.reference
def test_phase_convention_and_low_order_closed_forms():
    # closed forms (common practice): Y_00 = 1/sqrt(4 pi), Y_10 = sqrt(3/(4 pi)) cos,
    # Y_11 = -sqrt(3/(8 pi)) sin with the Condon-Shortley phase, +... without it
    t = np.linspace(0.0, np.pi, 7)
    y0 = legendre.for_order(0, 1, t)
    np.testing.assert_allclose(y0[0], 1 / math.sqrt(4 * math.pi), rtol=1e-15)
    np.testing.assert_allclose(y0[1], math.sqrt(3 / (4 * math.pi)) * np.cos(t), rtol=0, atol=1e-15)
    y1 = legendre.for_order(1, 1, t, condon_shortley=True)
    np.testing.assert_allclose(y1[0], -math.sqrt(3 / (8 * math.pi)) * np.sin(t), rtol=0, atol=1e-15)
    y1n = legendre.for_order(1, 1, t, condon_shortley=False)
    np.testing.assert_allclose(y1n[0], math.sqrt(3 / (8 * math.pi)) * np.sin(t), rtol=0, atol=1e-15)
    # full and schmidt at l = m = 1: sqrt(3/2) sin and sqrt(1/2) sin (no phase), from K(l, m)
    np.testing.assert_allclose(legendre.for_order(1, 1, t, norm="full", condon_shortley=False)[0],
                               math.sqrt(1.5) * np.sin(t), rtol=0, atol=1e-15)
    np.testing.assert_allclose(legendre.for_order(1, 1, t, norm="schmidt", condon_shortley=False)[0],
                               math.sqrt(0.5) * np.sin(t), rtol=0, atol=1e-15)


@pytest.mark.reference
def test_parity_at_high_degree():
    # Lambda_lm(pi - theta) = (-1)^{l+m} Lambda_lm(theta) (DLMF 14.7.17, from memory). The double pi - t is
    # not exactly the mirror of t (~1e-16 rad), which moves a degree-2000 function by ~l*1e-16,
    # so 5e-12 (measured 1.1e-12)
    lmax = 2000
    t = np.array([0.2, 0.7, 1.3])
    for m in (0, 3, 700, 1999):
        a = legendre.for_order(m, lmax, t)
        b = legendre.for_order(m, lmax, np.pi - t)
        sign = (-1.0) ** (np.arange(m, lmax + 1) + m)
        assert order_error(b, sign[:, None] * a) < 5e-12


# --------------------------------------------------------------------------------------
# High degree against mpmath
# --------------------------------------------------------------------------------------
SIN06 = math.asin(0.6)  # sin(colat) = 0.6
HIGH_CASES = [
    # (m, lmax, colat): m=2700 at sin=0.6: Lambda_mm ~ 2e-599, far below the double range,
    # while Lambda_{5400,2700} ~ 0.19.
    (2700, 5400, SIN06),
    (2700, 5400, math.pi - SIN06),
    (0, 5400, 0.6435),
    (1, 5400, 1.2),
    (100, 5400, 0.05),
    (5400, 5400, math.pi / 2 - 0.001),
    (1350, 2700, SIN06),
    (2, 2700, 0.3),
    (2000, 2700, math.pi / 2),
    # nothing may under- or overflow to degree 10800; Lambda_{5400,5400} ~ 1e-1198 here
    (5400, 10800, SIN06),
    (0, 10800, 1.0),
]
# Next to the poles the recursion in degree (the method sphex uses) loses
# accuracy like ~l^2 eps (a plain double recursion for P_l at colat 1e-4, l = 1000, is off by
# 2e-11, measured against the mpmath reference); these get their own bound.
NEAR_POLE_CASES = [
    (0, 5400, 0.01),
    (0, 5400, math.pi - 0.001),
    (3, 5400, 0.002),
]


@pytest.mark.reference
@pytest.mark.slow
@pytest.mark.parametrize("m,lmax,colat", HIGH_CASES)
def test_high_degree_against_mpmath_recursion(m, lmax, colat):
    # source: mpmath, fully normalised recursion at 45 digits with an unbounded exponent
    # (tests/_reference.mp_ortho_column), at the same double colatitude.
    # Tolerance relative to the largest |value| of the order at that point.
    ref_mp = mp_ortho_column(m, lmax, colat)
    ref = mp_to_float(ref_mp)[:, None]
    assert np.max(np.abs(ref)) > 1e-3  # the order matters at this point
    got = legendre.for_order(m, lmax, np.array([colat]), norm="orthonormal", condon_shortley=False)
    assert np.all(np.isfinite(got))
    err = order_error(got, ref)
    print(f"legendre m={m} lmax={lmax} colat={colat:.6f}: error/max = {err:.2e}")
    assert err < 1e-11, err
    # with the phase: multiplied by (-1)^m
    got_cs = legendre.for_order(m, lmax, np.array([colat]), norm="orthonormal", condon_shortley=True)
    np.testing.assert_array_equal(got_cs, (-1.0) ** m * got)


@pytest.mark.reference
@pytest.mark.parametrize("m,lmax,colat", NEAR_POLE_CASES)
def test_high_degree_next_to_pole_against_mpmath(m, lmax, colat):
    # source: mpmath recursion at 45 digits, as above; bound 5e-10 ~ 0.15 l^2 eps at l = 5400
    # (measured up to 7.9e-11)
    ref = mp_to_float(mp_ortho_column(m, lmax, colat))[:, None]
    got = legendre.for_order(m, lmax, np.array([colat]), norm="orthonormal", condon_shortley=False)
    err = order_error(got, ref)
    print(f"legendre near pole m={m} lmax={lmax} colat={colat:.6f}: error/max = {err:.2e}")
    assert err < 5e-10, err


@pytest.mark.reference
def test_underflowing_start_really_underflows():
    # the case above is meaningful: Lambda_mm is ~1e-599 (mpmath), far below the double range,
    # yet the top degree is O(1)
    col = mp_ortho_column(2700, 5400, SIN06)
    assert col[0] < mpmath.mpf("1e-590")
    assert abs(col[-1]) > 0.1


@pytest.mark.reference
@pytest.mark.slow
def test_mpmath_recursion_reference_matches_closed_form():
    # the reference itself against mpmath.legenp (hypergeometric closed form), at the
    # hardest point above and one moderate one
    for l, m, t in [(5400, 2700, SIN06), (1000, 3, 0.4)]:
        rec = mp_ortho_column(m, l, t)[-1]
        closed = mp_ortho_closed_form(l, m, t)
        assert abs(rec - closed) < mpmath.mpf("1e-30") * abs(closed)


@pytest.mark.reference
def test_all_orders_unsold_theorem():
    # sum_{m=-l..l} |Y_lm|^2 = (2l+1)/(4 pi) for orthonormal functions
    # (Unsold's theorem, DLMF 14.30.9 / addition theorem, from memory), here to degree 1000
    # Away from the poles 1e-12 (measured 2e-13); next to them the recursion in degree
    # carries ~l^2 eps (see NEAR_POLE_CASES), bound 1e-10 (measured 2.9e-11 at pi - 1e-4).
    lmax = 1000
    colat = np.array([0.3, 1.0, np.pi / 2, 2.5, 1e-3, np.pi - 1e-4])
    p = legendre.all_orders(lmax, colat, norm="orthonormal", condon_shortley=True)
    total = p[:, 0, :] ** 2 + 2.0 * np.sum(p[:, 1:, :] ** 2, axis=1)
    expected = (2 * np.arange(lmax + 1) + 1) / (4 * np.pi)
    rel = np.max(np.abs(total / expected[:, None] - 1.0), axis=0)
    print(f"Unsold to degree {lmax}: max relative deviation per colatitude {rel}")
    assert np.all(rel[:4] < 1e-12), rel
    assert np.all(rel[4:] < 1e-10), rel


# --------------------------------------------------------------------------------------
# Derivatives in colatitude
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_derivative_matches_scipy(norm, condon_shortley):
    # source: scipy.special.sph_legendre_p(..., diff_n=1), derivative in theta
    lmax = 24
    worst = 0.0
    for m in range(lmax + 1):
        got = legendre.derivative_for_order(m, lmax, COLAT_INTERIOR, norm=norm, condon_shortley=condon_shortley)
        assert got.shape == (lmax + 1 - m, COLAT_INTERIOR.size)
        ref = np.array([scipy_lambda_dtheta(l, m, COLAT_INTERIOR, norm, condon_shortley) for l in range(m, lmax + 1)])
        scale = np.array([norm_factor_from_orthonormal(l, m, norm) for l in range(m, lmax + 1)])
        # floor: where an order's derivative vanishes at a point (l = m at the equator) the
        # error is measured against 1% of the order's size over all points
        worst = max(worst, order_error(got, ref, scale, floor=1e-2))
    assert worst < 1e-12, worst


@pytest.mark.reference
def test_derivative_matches_sympy():
    # source: sympy differentiation in theta of sin^m(t) (d^m P_l/dx^m)(cos t), no phase
    lmax = 10
    colat = np.array([0.25, 1.1, 2.6])
    worst = 0.0
    for m in range(lmax + 1):
        got = legendre.derivative_for_order(m, lmax, colat, norm="unnormalized", condon_shortley=False)
        ref = np.array([[sympy_plm_dtheta(l, m, t) for t in colat] for l in range(m, lmax + 1)])
        worst = max(worst, order_error(got, ref))
    assert worst < 1e-13, worst


@pytest.mark.reference
def test_derivative_matches_finite_difference():
    # fourth-order central difference (common practice) of the values of
    # scipy.special.sph_legendre_p (tests/_reference.scipy_lambda), not of sphex's own values;
    # step 1e-4: truncation ~h^4 l^5 / 30 ~ 3e-10 and rounding ~eps/h at degree 40, so 5e-10
    # (measured 6.8e-11)
    lmax = 40
    h = 1e-4
    t = np.array([0.5, 0.8, 1.5, 2.3, 2.6])
    for m in (0, 1, 7, 20, 40):
        def f(tt):
            return np.array([scipy_lambda(l, m, tt, "orthonormal", True) for l in range(m, lmax + 1)])
        fd = (-f(t + 2 * h) + 8 * f(t + h) - 8 * f(t - h) + f(t - 2 * h)) / (12 * h)
        got = legendre.derivative_for_order(m, lmax, t, norm="orthonormal", condon_shortley=True)
        assert order_error(got, fd) < 5e-10


@pytest.mark.reference
@pytest.mark.parametrize("m,lmax,colat", [(0, 2700, 0.6435), (1, 2700, 1.2), (1350, 2700, SIN06), (2700, 5400, SIN06)])
def test_derivative_high_degree_against_mpmath(m, lmax, colat):
    # source: mpmath recursion plus the degree-raising identity for dP/dtheta
    # (tests/_reference.mp_ortho_column_dtheta), relative to the largest |derivative| of the order
    ref = mp_to_float(mp_ortho_column_dtheta(m, lmax, colat))[:, None]
    got = legendre.derivative_for_order(m, lmax, np.array([colat]), norm="orthonormal", condon_shortley=False)
    err = order_error(got, ref)
    print(f"derivative m={m} lmax={lmax} colat={colat:.6f}: error/max = {err:.2e}")
    assert err < 1e-11, err


# --------------------------------------------------------------------------------------
# Bad input at this public boundary
# --------------------------------------------------------------------------------------
def test_unnormalized_overflow_is_refused_with_the_fix():
    # plain P_l^m of order 150 exceed the double range (1.8e308) below degree 200: sphex refuses
    # rather than return inf, and names the normalisations that work
    with pytest.raises(ValueError, match="(?s)overflow.*norm='orthonormal'"):
        legendre.for_order(150, 200, np.array([0.5]), norm="unnormalized")
    assert np.all(np.isfinite(legendre.for_order(150, 200, np.array([0.5]), norm="schmidt")))


def test_unknown_normalisation_rejected():
    # the message names the argument and lists the valid values
    with pytest.raises(ValueError, match="(?is)orthonormal.*full"):
        legendre.for_order(0, 5, np.array([0.5]), norm="bogus")
    # clipped spellings (any shorter beginning of a name, 3 letters or more) and the
    # digit-led one of earlier versions are refused with the word that replaces each
    cases = [(name[:k], name) for name in legendre.NORMS for k in {3, 5, len(name) - 1}
             if 3 <= k < len(name)]
    for old, new in cases + [('4pi', 'full')]:
        with pytest.raises(ValueError, match=f"(?s)no longer accepted: use '{new}'"):
            legendre.all_orders(5, np.array([0.5]), norm=old)
