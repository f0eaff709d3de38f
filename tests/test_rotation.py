"""Checks of sphex.rotation: Wigner small-d matrices, rotation of coefficients, conventions."""
from __future__ import annotations

import mpmath
import numpy as np
import pytest
import scipy.special as sps
import sympy
from scipy.spatial.transform import Rotation
from sympy.physics.wigner import wigner_d_small

from sphex import Grid, Harmonics, synthesize
from sphex.legendre import for_order
from sphex.rotation import inverse_angles, rotate, rotation_to, wigner_small_d
from sphex.spectra import degree_power

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")


# ----------------------------------------------------------------- helpers
def random_harmonics(rng: np.random.Generator, lmax: int, batch: tuple = (), slope: float = 1.0) -> Harmonics:
    """Random orthonormal Condon-Shortley coefficients with rms falling as (l + 1)^-slope."""
    shape = batch + (lmax + 1, lmax + 1)
    c = rng.standard_normal(shape) + 1j * rng.standard_normal(shape)
    c *= (np.arange(lmax + 1, dtype=float)[:, None] + 1.0) ** -slope
    c = np.where(np.tril(np.ones((lmax + 1, lmax + 1), dtype=bool)), c, 0)
    c[..., :, 0] = c[..., :, 0].real
    return Harmonics(c)


def zyz_matrix(alpha: float, beta: float, gamma: float) -> np.ndarray:
    """R = R_z(alpha) R_y(beta) R_z(gamma), angles in radians, active right-handed rotations."""
    def rz(t):
        return np.array([[np.cos(t), -np.sin(t), 0.0], [np.sin(t), np.cos(t), 0.0], [0.0, 0.0, 1.0]])

    def ry(t):
        return np.array([[np.cos(t), 0.0, np.sin(t)], [0.0, 1.0, 0.0], [-np.sin(t), 0.0, np.cos(t)]])

    return rz(alpha) @ ry(beta) @ rz(gamma)


def direct_sum(h: Harmonics, colat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """f at points by the direct sum over all (l, m) with scipy.special.sph_harm_y_all
    (orthonormal, Condon-Shortley phase: the 'orthonormal' convention of sphex).

    f = sum_l [a_l0 Y_l0 + 2 Re sum_{m>0} a_lm Y_lm] for a real field."""
    lmax = h.lmax
    a = h.to("orthonormal", True).coef
    Y = sps.sph_harm_y_all(lmax, lmax, colat, lon)[:, : lmax + 1]   # (l, m >= 0, point)
    terms = np.einsum("lm,lmp->mp", a, Y)
    return terms[0].real + 2.0 * terms[1:].sum(axis=0).real


def sympy_small_d(l: int, beta: float) -> np.ndarray:
    """d^l_{m'm}(beta) of exp(-i beta J_y) indexed [m' + l, m + l], from
    sympy.physics.wigner.wigner_d_small.

    sympy's docstring states that its matrix is exp(+i beta J_y) with element
    [J - m', J - m] = d_{m'm}; exp(+i beta J_y) is the transpose of
    exp(-i beta J_y) (d is real orthogonal and d(-beta) = d(beta)^T), so ours
    is sympy's matrix reversed in both axes and transposed."""
    s = np.array(wigner_d_small(l, sympy.Float(beta, 30)).evalf(30), dtype=float)
    return s[::-1, ::-1].T


# ----------------------------------------------------------------- Wigner d
@pytest.mark.parametrize("beta", [0.0, 0.37, np.pi / 2, 2.5, -1.2, 4.0])
@pytest.mark.reference
def test_wigner_small_d_matches_sympy(beta):
    # source: sympy.physics.wigner.wigner_d_small (exact; convention matched in sympy_small_d)
    for l in range(0, 7):
        np.testing.assert_allclose(wigner_small_d(l, beta, degrees=False), sympy_small_d(l, beta),
                                   rtol=0, atol=2e-15)


@pytest.mark.reference
def test_quarter_turn_exact_values_from_sympy():
    # source: sympy.physics.wigner.wigner_d_small at beta = pi/2 (exact symbolic values)
    for l in range(0, 9):
        exact = np.array(wigner_d_small(l, sympy.pi / 2).evalf(30), dtype=float)[::-1, ::-1].T
        np.testing.assert_allclose(wigner_small_d(l, 90.0), exact, rtol=0, atol=2e-15)


@pytest.mark.reference
def test_small_d_first_column_is_spherical_harmonic_at_high_degree():
    # source: scipy.special.sph_harm_y; d^l_{m0}(beta) = sqrt(4 pi / (2l + 1)) Y_lm(beta, 0)
    # (common practice: the relation between the zonal column of D and Y_lm)
    beta = 1.1
    for l in (40, 250):
        d = wigner_small_d(l, beta, degrees=False)
        m = np.arange(-l, l + 1)
        ref = np.sqrt(4 * np.pi / (2 * l + 1)) * sps.sph_harm_y(l, m, beta, 0.0).real
        np.testing.assert_allclose(d[:, l], ref, rtol=0, atol=1e-13)
        np.testing.assert_allclose(d @ d.T, np.eye(2 * l + 1), rtol=0, atol=1e-13)


@pytest.mark.slow
@pytest.mark.reference
def test_rotated_zonal_degrees_match_reference_to_degree_1500():
    # Rotating the zonal Y_l0 by (alpha, beta, 0) gives
    # a'_lm = sqrt(4 pi / (2l + 1)) conj(Y_lm(beta, alpha)) (common practice).
    # Sources: mpmath.spherharm at a few (l, m) (scipy.special.sph_harm_y returns NaN above
    # degree ~646 at this colatitude), and every (l, m) against sphex.legendre.for_order,
    # itself checked against scipy.special and mpmath in test_legendre.py.
    lmax = 1500
    alpha, beta = 0.7, 2.2
    c = np.zeros((lmax + 1, lmax + 1), complex)
    c[:, 0] = 1.0
    turned = rotate(Harmonics(c), alpha, beta, 0.0, degrees=False)
    mpmath.mp.dps = 30
    for l, m in [(1500, 0), (1500, 7), (1500, 800), (1499, 1200), (1201, 1201), (977, 300)]:
        y = complex(mpmath.spherharm(l, m, beta, alpha))
        ref = np.sqrt(4 * np.pi / (2 * l + 1)) * np.conj(y)
        assert abs(turned.coef[l, m] - ref) < 1e-13, (l, m)   # |a'_lm| <= 1 for every degree
    worst = 0.0
    for m in range(lmax + 1):
        lam = for_order(m, lmax, np.array([beta]))[:, 0]
        l = np.arange(m, lmax + 1)
        ref = np.sqrt(4 * np.pi / (2 * l + 1)) * lam * np.exp(-1j * m * alpha)
        worst = max(worst, np.max(np.abs(turned.coef[m:, m] - ref)))
    assert worst < 1e-13


# ----------------------------------------------------------------- rotation of coefficients
@pytest.mark.reference
def test_rotation_equals_sympy_d_matrix_product(rng):
    # source: sympy.physics.wigner.wigner_d_small; a'_{m'} = sum_m e^{-i m' alpha} d_{m'm}(beta)
    # e^{-i m gamma} a_m over all orders, with a_{l,-m} = (-1)^m conj(a_lm) (reality, common practice)
    lmax = 6
    alpha, beta, gamma = 0.4, 1.3, -2.1
    h = random_harmonics(rng, lmax, slope=0.0)
    turned = rotate(h, alpha, beta, gamma, degrees=False)
    for l in range(lmax + 1):
        m = np.arange(-l, l + 1)
        pos = h.coef[l, : l + 1]
        full = np.concatenate([(-1.0) ** np.arange(l, 0, -1) * np.conj(pos[:0:-1]), pos])
        D = np.exp(-1j * m * alpha)[:, None] * sympy_small_d(l, beta) * np.exp(-1j * m * gamma)[None, :]
        np.testing.assert_allclose(turned.coef[l, : l + 1], (D @ full)[l:], rtol=0, atol=1e-14)


@pytest.mark.reference
def test_rotate_then_synthesize_equals_resampling_at_rotated_points(rng):
    # source: scipy.special.sph_harm_y_all (direct sum of the original field at R^-1 r);
    # f'(r) = f(R^-1 r) is the definition of rotating the field
    lmax = 256
    h = random_harmonics(rng, lmax)
    alpha, beta, gamma = 31.0, 118.5, -47.25
    grid = Grid.gauss(lmax)
    turned = synthesize(rotate(h, alpha, beta, gamma), grid)
    rows = rng.integers(0, grid.nlat, 40)
    cols = rng.integers(0, grid.nlon, 40)
    colat = grid.colat[rows]
    lon = np.radians(grid.lon[cols])
    points = np.stack([np.sin(colat) * np.cos(lon), np.sin(colat) * np.sin(lon), np.cos(colat)])
    R = zyz_matrix(*np.radians([alpha, beta, gamma]))
    # scipy.spatial.transform.Rotation agrees on the matrix of intrinsic z-y-z angles
    np.testing.assert_allclose(Rotation.from_euler("ZYZ", [alpha, beta, gamma], degrees=True).as_matrix(),
                               R, atol=1e-15)
    back = R.T @ points
    q_colat = np.arccos(np.clip(back[2], -1.0, 1.0))
    q_lon = np.mod(np.arctan2(back[1], back[0]), 2 * np.pi)
    expected = direct_sum(h, q_colat, q_lon)
    assert np.max(np.abs(turned[rows, cols] - expected)) < 1e-12 * np.max(np.abs(expected))


@pytest.mark.reference
def test_degree_power_is_invariant(rng):
    # source: common practice (a rotation is unitary within each degree, so the power is unchanged)
    h = random_harmonics(rng, 256)
    turned = rotate(h, 12.0, 77.0, 203.0)
    p0, p1 = degree_power(h), degree_power(turned)
    assert np.max(np.abs(p1 - p0) / p0) < 1e-13


def test_rotation_then_inverse_is_identity_at_degree_1000(rng):
    # internal consistency: R^-1 R = 1 (inverse Euler angles (-gamma, -beta, -alpha))
    h = random_harmonics(rng, 1000)
    angles = (-63.0, 141.2, 17.9)
    back = rotate(rotate(h, *angles), *inverse_angles(*angles))
    assert np.max(np.abs(back.coef - h.coef)) < 1e-12 * np.max(np.abs(h.coef))


@pytest.mark.reference
def test_composition_of_two_rotations(rng):
    # source: scipy.spatial.transform.Rotation (the Euler angles of the product R2 R1)
    h = random_harmonics(rng, 128)
    first, second = (20.0, 50.0, -75.0), (-140.0, 33.0, 61.0)
    R12 = zyz_matrix(*np.radians(second)) @ zyz_matrix(*np.radians(first))
    composed = Rotation.from_matrix(R12).as_euler("ZYZ", degrees=True)
    np.testing.assert_allclose(zyz_matrix(*np.radians(composed)), R12, atol=1e-14)
    two_steps = rotate(rotate(h, *first), *second)
    one_step = rotate(h, *composed)
    assert np.max(np.abs(two_steps.coef - one_step.coef)) < 1e-12 * np.max(np.abs(h.coef))


@pytest.mark.reference
def test_turn_about_the_polar_axis_is_a_longitude_shift(rng):
    # source: common practice; rotate(h, a, 0, 0) is f'(lon) = f(lon - a), i.e. a'_lm = e^{-i m a} a_lm
    lmax = 63
    grid = Grid.gauss(lmax)
    h = random_harmonics(rng, lmax)
    shift = 5
    a = shift * 360.0 / grid.nlon
    turned = rotate(h, a, 0.0, 0.0)
    np.testing.assert_allclose(synthesize(turned, grid), np.roll(synthesize(h, grid), shift, axis=-1),
                               rtol=0, atol=1e-12)
    m = np.arange(lmax + 1)
    np.testing.assert_allclose(turned.coef, h.coef * np.exp(-1j * m * np.radians(a)), rtol=0, atol=1e-14)


@pytest.mark.reference
def test_rotation_to_brings_the_pole_to_the_point(rng):
    # source: scipy.special.sph_harm_y_all (direct sum); f'(target) = f(north pole) by definition
    h = random_harmonics(rng, 40)
    lat, lon = -23.5, 251.0
    turned = rotate(h, *rotation_to(lat, lon))
    at_target = direct_sum(turned, np.array([np.radians(90.0 - lat)]), np.array([np.radians(lon)]))
    at_pole = direct_sum(h, np.array([0.0]), np.array([0.0]))
    np.testing.assert_allclose(at_target, at_pole, rtol=1e-12)
    assert rotation_to(lat, lon) == (251.0, 113.5, 0.0)


# ----------------------------------------------------------------- conventions and batches
@pytest.mark.parametrize("norm", NORMS)
@pytest.mark.parametrize("cs", [True, False])
def test_every_convention_rotates_the_same_field(rng, norm, cs):
    # internal consistency: the conventions describe the same field, so the rotated fields agree
    lmax = 20
    h = random_harmonics(rng, lmax)
    angles = (10.0, 100.0, -30.0)
    reference = rotate(h, *angles)
    turned = rotate(h.to(norm, cs), *angles)
    assert turned.norm == norm and turned.condon_shortley == cs
    back = turned.to("orthonormal", True)
    assert np.max(np.abs(back.coef - reference.coef)) < 1e-13 * np.max(np.abs(reference.coef))


def test_batch_equals_fields_one_by_one(rng):
    # internal consistency
    h = random_harmonics(rng, 50, batch=(2, 3))
    angles = (1.0, 2.0, 3.0)
    turned = rotate(h, *angles, degrees=False)
    assert turned.coef.shape == h.coef.shape
    for i in range(2):
        for j in range(3):
            one = rotate(Harmonics(h.coef[i, j]), *angles, degrees=False)
            np.testing.assert_allclose(turned.coef[i, j], one.coef, rtol=0, atol=1e-14)


def test_degrees_and_radians_agree_and_metadata_kept(rng):
    # internal consistency
    h = random_harmonics(rng, 30).replace(radius=6.371e6, units="m")
    a = rotate(h, 40.0, 70.0, 10.0)
    b = rotate(h, *np.radians([40.0, 70.0, 10.0]), degrees=False)
    np.testing.assert_allclose(a.coef, b.coef, rtol=0, atol=1e-13)
    assert a.radius == 6.371e6 and a.units == "m"


def test_bad_input_is_refused_with_a_clear_message():
    h = Harmonics(np.zeros((3, 3), complex))
    with pytest.raises(ValueError, match="sphex.Harmonics"):
        rotate(np.zeros((3, 3)), 0, 0, 0)
    with pytest.raises(ValueError, match="beta must be finite"):
        rotate(h, 0.0, np.nan, 0.0)
    with pytest.raises(ValueError, match="gamma must be a real number"):
        rotate(h, 0.0, 0.0, "90")
    with pytest.raises(ValueError, match=r"lat must lie in \[-90, 90\]"):
        rotation_to(120.0, 10.0)
    with pytest.raises(ValueError, match="non-negative integer"):
        wigner_small_d(-1, 0.0)
