"""Checks of sphex.harmonics.Harmonics: indexing, conventions, real form, arithmetic, truncation, filtering."""
from __future__ import annotations

import math

import numpy as np
import pytest

from _reference import NORMS, norm_factor_array, random_coef, real_form_field
from sphex import Grid, Harmonics, synthesize

CONVENTIONS = [(n, cs) for n in NORMS for cs in (True, False)]


def phase_array(lmax: int, condon_shortley: bool) -> np.ndarray:
    """cs^m as an (lmax+1, lmax+1) array: (-1)^m with the Condon-Shortley phase, else 1."""
    m = np.arange(lmax + 1)[None, :]
    return np.broadcast_to((-1.0) ** m if condon_shortley else np.ones_like(m, dtype=float), (lmax + 1, lmax + 1))


def r_m(lmax: int, norm: str) -> np.ndarray:
    """Real-form factor r_m of the core API: sqrt(2) for m > 0 except unnormalized, 1 for m = 0."""
    r = np.full(lmax + 1, 1.0 if norm == "unnormalized" else math.sqrt(2.0))
    r[0] = 1.0
    return r


# --------------------------------------------------------------------------------------
# Container basics
# --------------------------------------------------------------------------------------
def test_attributes_and_indexing(rng):
    coef = random_coef(8, rng)
    h = Harmonics(coef, radius=6.371e6, units="m")
    assert h.lmax == 8 and h.norm == "orthonormal" and h.condon_shortley is True
    assert h.radius == 6.371e6 and h.units == "m" and h.batch_shape == ()
    assert h.coef.dtype == np.complex128 and h.coef.shape == (9, 9)
    np.testing.assert_array_equal(h.degrees(), np.arange(9))
    for l in range(9):
        for m in range(l + 1):
            assert h[l, m] == coef[l, m]
            # core API: a_{l,-m} = s_m conj(a_lm), s_m = (-1)^m with the Condon-Shortley phase
            assert h[l, -m] == (-1) ** m * np.conj(coef[l, m])
    h2 = Harmonics(coef, condon_shortley=False)
    assert h2[5, -3] == np.conj(coef[5, 3])  # s_m = 1 without the phase


def test_indexing_over_a_batch(rng):
    coef = random_coef(6, rng, batch=(2, 3))
    h = Harmonics(coef)
    assert h.batch_shape == (2, 3) and h.lmax == 6
    np.testing.assert_array_equal(h[4, 2], coef[..., 4, 2])
    np.testing.assert_array_equal(h[4, -3], -np.conj(coef[..., 4, 3]))


def test_integer_or_real_coefficients_become_complex():
    h = Harmonics(np.tril(np.ones((4, 4), dtype=int)))
    assert h.coef.dtype == np.complex128
    assert h[3, 2] == 1.0


def test_non_square_coefficients_rejected():
    with pytest.raises(ValueError, match="(?i)shape|lmax"):
        Harmonics(np.zeros((4, 5), complex))


def test_imaginary_order_zero_coefficients_rejected():
    # a real field has real a_l0 (common practice: a_l,-m = (-1)^m conj(a_lm) at m = 0)
    c = np.tril(np.ones((4, 4), complex))
    c[2, 0] = 1.0 + 0.5j
    with pytest.raises(ValueError, match=r"a_l0.*imaginary.*coef\[\.\.\., :, 0\]"):
        Harmonics(c)
    with pytest.raises(ValueError, match="a_l0"):
        Harmonics(np.stack([np.tril(np.ones((4, 4), complex)), c]))  # one field of a batch


def test_rounding_level_imaginary_order_zero_is_tolerated_and_ignored():
    from sphex import Grid, synthesize

    c = np.tril(np.ones((4, 4), complex))
    h_real = Harmonics(c)
    c[1, 0] += 1e-14j
    h = Harmonics(c)
    grid = Grid.gauss(3)
    assert np.array_equal(synthesize(h, grid), synthesize(h_real, grid))


# --------------------------------------------------------------------------------------
# Convention conversion
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("target", CONVENTIONS)
@pytest.mark.parametrize("source", CONVENTIONS)
def test_to_matches_definition_and_round_trips(rng, source, target):
    # a_lm Lambda_lm is the same term in every convention, Lambda_lm = F_lm cs^m Lambda_lm(orthonormal,
    # no phase) with F the closed form of K(l, m) in each convention (tests/_reference.norm_factor_array,
    # exact integer factorials with math.factorial), so a_new = a_old F_old cs_old^m / (F_new cs_new^m)
    lmax = 20
    (n0, c0), (n1, c1) = source, target
    coef = random_coef(lmax, rng)
    h = Harmonics(coef, norm=n0, condon_shortley=c0, radius=2.0, units="km")
    g = h.to(norm=n1, condon_shortley=c1)
    assert g.norm == n1 and g.condon_shortley == c1 and g.radius == 2.0 and g.units == "km"
    expected = coef * (norm_factor_array(lmax, n0) * phase_array(lmax, c0)) / (
        norm_factor_array(lmax, n1) * phase_array(lmax, c1))
    # 5e-14: the unnormalized factors sqrt((l+m)!/(l-m)!) reach 1e24 at lmax 20; sphex's are good to
    # ~1.5e-14 relative there (measured), the exact-factorial reference to a few ulp
    np.testing.assert_allclose(g.coef, expected, rtol=5e-14, atol=0)
    back = g.to(norm=n0, condon_shortley=c0)
    # exact to rounding: each coefficient back to ~1e-15 of itself
    np.testing.assert_allclose(back.coef, coef, rtol=1e-15, atol=0)


def test_to_defaults_keep_conventions(rng):
    h = Harmonics(random_coef(5, rng), norm="schmidt", condon_shortley=False)
    g = h.to(norm="full")
    assert g.condon_shortley is False and g.norm == "full"
    g2 = h.to(condon_shortley=True)
    assert g2.norm == "schmidt" and g2.condon_shortley is True
    np.testing.assert_array_equal(h.to().coef, h.coef)


def test_to_unnormalized_out_of_double_range_is_refused(rng):
    # the unnormalised a_lm of an orthonormal field are a_lm K(l, m) with K = sqrt((2l+1)/(4 pi)
    # (l-m)!/(l+m)!) below 1e-308 at l = m = 200: sphex refuses instead of returning zeros or
    # inf, and says how to go on; at lmax 20 the conversion works
    with pytest.raises(ValueError, match=r"(?s)double range.*truncate"):
        Harmonics(random_coef(200, rng)).to(norm="unnormalized")
    assert np.all(np.isfinite(Harmonics(random_coef(20, rng)).to(norm="unnormalized").coef))


def test_to_unknown_normalisation_rejected(rng):
    h = Harmonics(random_coef(3, rng))
    with pytest.raises(ValueError, match="(?i)norm"):
        h.to(norm="bogus")


# --------------------------------------------------------------------------------------
# Real (cosine / sine) form
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("norm,condon_shortley", CONVENTIONS)
def test_cos_sin_definition_and_round_trip(rng, norm, condon_shortley):
    # internal consistency: restates the definition C_lm = (2/r_m) Re a_lm, S_lm = -(2/r_m) Im a_lm
    # for m > 0, C_l0 = a_l0, S_l0 = 0; the real form is checked against scipy.special in
    # test_real_form_gives_the_synthesised_field
    lmax = 12
    coef = random_coef(lmax, rng)
    h = Harmonics(coef, norm=norm, condon_shortley=condon_shortley)
    C, S = h.cos_sin()
    assert C.shape == S.shape == (lmax + 1, lmax + 1)
    assert C.dtype == np.float64 and S.dtype == np.float64
    r = r_m(lmax, norm)
    fac = np.where(np.arange(lmax + 1) == 0, 1.0, 2.0 / r)[None, :]
    np.testing.assert_allclose(C, np.tril(fac * coef.real), rtol=1e-15, atol=0)
    np.testing.assert_allclose(S[:, 1:], np.tril(-fac * coef.imag)[:, 1:], rtol=1e-15, atol=0)
    np.testing.assert_array_equal(S[:, 0], 0.0)
    back = Harmonics.from_cos_sin(C, S, norm=norm, condon_shortley=condon_shortley, radius=3.0, units="nT")
    assert back.norm == norm and back.condon_shortley == condon_shortley
    assert back.radius == 3.0 and back.units == "nT"
    np.testing.assert_allclose(back.coef, coef, rtol=1e-15, atol=0)
    C2, S2 = back.cos_sin()
    np.testing.assert_allclose(C2, C, rtol=1e-15, atol=0)
    np.testing.assert_allclose(S2, S, rtol=1e-15, atol=0)


@pytest.mark.reference
@pytest.mark.parametrize("norm,condon_shortley", CONVENTIONS)
def test_real_form_gives_the_synthesised_field(rng, norm, condon_shortley):
    # source: real-form sum (C cos m phi + S sin m phi) r_m Lambda_lm with Lambda from
    # scipy.special.sph_legendre_p (tests/_reference.real_form_field)
    lmax = 10
    grid = Grid.gauss(lmax)
    scale = norm_factor_array(lmax, norm)  # O(1) terms in every normalisation
    h = Harmonics(random_coef(lmax, rng) / scale, norm=norm, condon_shortley=condon_shortley)
    C, S = h.cos_sin()
    ref = real_form_field(C, S, grid.colat, np.radians(grid.lon), norm, condon_shortley)
    f = synthesize(h, grid)
    assert np.max(np.abs(f - ref)) < 3e-14 * np.max(np.abs(ref))  # measured 3.2e-15


def test_cos_sin_of_a_batch(rng):
    coef = random_coef(5, rng, batch=(4,))
    C, S = Harmonics(coef).cos_sin()
    assert C.shape == S.shape == (4, 6, 6)
    back = Harmonics.from_cos_sin(C, S)
    np.testing.assert_allclose(back.coef, coef, rtol=1e-15, atol=0)


@pytest.mark.parametrize("norm", ["orthonormal", "unnormalized"])
def test_cos_sin_into_given_arrays_is_the_same_to_the_bit(rng, norm):
    # internal consistency: the streamed analysis writes the real form straight into its
    # output block; it must hold exactly what cos_sin() returns, zeros of S_l0 included
    coef = random_coef(9, rng, batch=(3,))
    coef[0, 4, 2] = -0.0 + 0.0j
    h = Harmonics(coef, norm=norm)
    C, S = h.cos_sin()
    Cb, Sb = np.full((3, 10, 10), np.nan), np.full((3, 10, 10), np.nan)
    got = h.cos_sin(out=(Cb, Sb))
    assert got[0] is Cb and got[1] is Sb
    assert Cb.tobytes() == C.tobytes() and Sb.tobytes() == S.tobytes()


@pytest.mark.reference
def test_known_real_form_of_y11():
    # sin(theta) cos(phi) (common practice): orthonormal with the phase, a_11 = -sqrt(2 pi/3), so
    # C_11 = (2/sqrt 2) a_11 = -sqrt(4 pi / 3); in 4pi without the phase the real function
    # sqrt(3) sin(theta) cos(phi) has coefficient C_11 = 1/sqrt(3)
    coef = np.zeros((2, 2), complex)
    coef[1, 1] = -math.sqrt(2 * math.pi / 3)
    C, S = Harmonics(coef).cos_sin()
    assert abs(C[1, 1] + math.sqrt(4 * math.pi / 3)) < 1e-15 and S[1, 1] == 0
    C4, _ = Harmonics(coef).to(norm="full", condon_shortley=False).cos_sin()
    assert abs(C4[1, 1] - 1 / math.sqrt(3)) < 1e-15


@pytest.mark.reference
def test_parseval(rng):
    # core API (Parseval, common practice): integral of f^2 = sum_l [a_l0^2 + 2 sum_{m>0} |a_lm|^2]
    lmax = 15
    grid = Grid.gauss(lmax)  # f^2 has degree 2*lmax: integrated exactly
    coef = random_coef(lmax, rng)
    f = synthesize(Harmonics(coef), grid)
    integral = 2 * np.pi / grid.nlon * np.sum(grid.weights[:, None] * f**2)
    spectral = np.sum(coef[:, 0].real ** 2) + 2 * np.sum(np.abs(coef[:, 1:]) ** 2)
    assert integral == pytest.approx(spectral, rel=1e-13)


# --------------------------------------------------------------------------------------
# Arithmetic
# --------------------------------------------------------------------------------------
def test_add_subtract_scale_negate(rng):
    a, b = random_coef(9, rng), random_coef(9, rng)
    ha, hb = Harmonics(a, units="m"), Harmonics(b, units="m")
    np.testing.assert_array_equal((ha + hb).coef, a + b)
    np.testing.assert_array_equal((ha - hb).coef, a - b)
    np.testing.assert_array_equal((2.5 * ha).coef, 2.5 * a)
    np.testing.assert_array_equal((ha * 2.5).coef, 2.5 * a)
    np.testing.assert_array_equal((-ha).coef, -a)
    assert (ha + hb).units == "m" and (ha + hb).norm == "orthonormal"
    # inputs unchanged
    np.testing.assert_array_equal(ha.coef, a)


def test_add_converts_to_left_conventions(rng):
    a, b = random_coef(9, rng), random_coef(9, rng)
    ha, hb = Harmonics(a), Harmonics(b)
    other = hb.to(norm="schmidt", condon_shortley=False)
    s = ha + other
    assert s.norm == "orthonormal" and s.condon_shortley is True
    np.testing.assert_allclose(s.coef, a + b, rtol=1e-14, atol=1e-15)
    d = ha - other
    np.testing.assert_allclose(d.coef, a - b, rtol=1e-14, atol=1e-15)


def test_sum_synthesises_to_sum_of_fields(rng):
    grid = Grid.equiangular(24, 24, "cells")
    ha = Harmonics(random_coef(11, rng))
    hb = Harmonics(random_coef(11, rng), norm="full")
    f = synthesize(ha + hb, grid)
    np.testing.assert_allclose(f, synthesize(ha, grid) + synthesize(hb, grid), rtol=0, atol=1e-12)


# --------------------------------------------------------------------------------------
# Truncate, filter, replace
# --------------------------------------------------------------------------------------
def test_truncate(rng):
    coef = random_coef(12, rng, batch=(2,))
    h = Harmonics(coef, norm="schmidt", condon_shortley=False, radius=1.0, units="nT")
    t = h.truncate(5)
    assert t.lmax == 5 and t.norm == "schmidt" and t.condon_shortley is False
    assert t.radius == 1.0 and t.units == "nT"
    np.testing.assert_array_equal(t.coef, coef[..., :6, :6])
    np.testing.assert_array_equal(h.coef, coef)  # original untouched


def test_filter(rng):
    coef = random_coef(10, rng)
    h = Harmonics(coef)
    w = np.exp(-0.1 * np.arange(15))  # longer than lmax + 1: the extra entries are unused
    f = h.filter(w)
    assert isinstance(f, Harmonics) and f.lmax == 10
    np.testing.assert_allclose(f.coef, coef * w[:11, None], rtol=1e-15, atol=0)
    np.testing.assert_array_equal(h.coef, coef)
    with pytest.raises(ValueError, match="(?i)weight|length|lmax"):
        h.filter(np.ones(5))  # too short to cover every degree


def test_filter_of_a_batch(rng):
    coef = random_coef(4, rng, batch=(3,))
    w = np.array([1.0, 0.5, 0.25, 0.125, 0.0])
    np.testing.assert_allclose(Harmonics(coef).filter(w).coef, coef * w[:, None], rtol=1e-15, atol=0)


def test_replace(rng):
    coef = random_coef(4, rng)
    h = Harmonics(coef, units="m")
    g = h.replace(units="km", radius=10.0)
    assert g.units == "km" and g.radius == 10.0 and h.units == "m" and h.radius is None
    np.testing.assert_array_equal(g.coef, coef)
    k = h.replace(coef=2 * coef)
    np.testing.assert_array_equal(k.coef, 2 * coef)
    np.testing.assert_array_equal(h.coef, coef)
