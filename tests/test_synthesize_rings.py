"""Checks of sphex.transform.synthesize_rings: rings at any colatitudes, per-ring degree weights."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import special

from sphex import Grid, Harmonics, synthesize, synthesize_gradient
from sphex.transform import synthesize_rings

L = 12


def random_harmonics(rng, batch=(2,)) -> Harmonics:
    coef = rng.standard_normal(batch + (L + 1, L + 1)) + 1j * rng.standard_normal(batch + (L + 1, L + 1))
    coef = np.tril(coef)
    coef[..., :, 0] = coef[..., :, 0].real
    return Harmonics(coef, norm="orthonormal", condon_shortley=True)


def reference(h: Harmonics, weights: np.ndarray, colat: float, lon_deg: np.ndarray):
    """Value, east = (1/sin theta) df/dphi and north = -df/dtheta from scipy.special.sph_harm_y
    (orthonormal, Condon-Shortley phase, with its first derivatives), summed directly over
    m >= 0 with the negative orders as complex conjugates (a real field)."""
    phi = np.radians(lon_deg) % (2 * np.pi)
    value = np.zeros(h.batch_shape + phi.shape)
    east = np.zeros_like(value)
    north = np.zeros_like(value)
    for l in range(L + 1):
        for m in range(l + 1):
            y, grad = special.sph_harm_y(l, m, colat, phi, diff_n=1)
            dtheta, dphi = grad[..., 0], grad[..., 1]
            a = h.coef[..., l, m, None] * weights[l]
            twice = 1.0 if m == 0 else 2.0
            value += twice * (a * y).real
            north -= twice * (a * dtheta).real
            if colat > 0 and colat < np.pi:
                east += twice * (a * dphi).real / np.sin(colat)
    return value, east, north


@pytest.mark.parametrize("nlon", [7, 40])
@pytest.mark.reference
def test_rings_with_their_own_weights_against_scipy(rng, nlon):
    h = random_harmonics(rng)
    colat = np.array([0.3, np.pi - 0.3, 1.1, np.pi - 1.1, np.pi / 2, 0.0, 2.9])
    W = rng.uniform(0.5, 1.5, (colat.size, L + 1))
    W[1] = W[0]  # a mirrored pair sharing weights (one pass with the north/south symmetry)
    lon0 = 13.5
    lon = lon0 + 360.0 * np.arange(nlon) / nlon
    values = synthesize_rings(h, colat, nlon, lon0, degree_weights=W)
    east, north = synthesize_rings(h, colat, nlon, lon0, degree_weights=W, gradient=True)
    assert values.shape == east.shape == north.shape == (2, colat.size, nlon)
    for i, theta in enumerate(colat):
        v, e, n = reference(h, W[i], theta, lon)
        scale = np.max(np.abs(v))
        assert np.max(np.abs(values[:, i] - v)) < 1e-13 * scale  # measured 6.4e-15
        # derivatives: measured 1.9e-14
        assert np.max(np.abs(north[:, i] - n)) < 1e-12 * scale
        if 0 < theta < np.pi:
            assert np.max(np.abs(east[:, i] - e)) < 1e-12 * scale


def test_rings_of_a_grid_are_the_grid_synthesis(rng):
    # internal consistency: one weight vector for every ring is synthesize / synthesize_gradient
    # of the filtered coefficients
    h = random_harmonics(rng, batch=()).to("schmidt", False)
    grid = Grid.equiangular(25, 50, "poles")
    w = 1.0 / (1.0 + np.arange(L + 1))
    np.testing.assert_allclose(synthesize_rings(h, grid.colat, grid.nlon, grid.lon0, degree_weights=w),
                               synthesize(h.filter(w), grid), rtol=0, atol=1e-14)
    e1, n1 = synthesize_rings(h, grid.colat, grid.nlon, grid.lon0, degree_weights=w, gradient=True)
    e2, n2 = synthesize_gradient(h.filter(w), grid)
    np.testing.assert_allclose(e1, e2, rtol=0, atol=1e-13)
    np.testing.assert_allclose(n1, n2, rtol=0, atol=1e-13)


def test_rings_errors(rng):
    h = random_harmonics(rng)
    with pytest.raises(ValueError, match="colatitudes must lie"):
        synthesize_rings(h, [4.0], 8)
    with pytest.raises(ValueError, match="degree_weights must have shape"):
        synthesize_rings(h, [1.0, 2.0], 8, degree_weights=np.ones((3, L + 1)))
    with pytest.raises(ValueError, match="nlon"):
        synthesize_rings(h, [1.0], 0)
    with pytest.raises(ValueError, match="NaN"):
        synthesize_rings(h, [1.0], 8, degree_weights=np.full(L + 1, np.nan))
