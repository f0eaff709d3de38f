"""Checks of sphex.points: evaluation at scattered points, its adjoint, the
surface gradient, least-squares fits from points and from grids with gaps."""
from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import scipy.special as sps

from _reference import mp_ortho_column, mp_to_float, random_coef, scipy_lambda
from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.least_squares import CONDITION_LIMIT
from sphex.points import (
    IllPosedWarning, evaluate, evaluate_adjoint, evaluate_gradient, fit, fit_masked,
)
from sphex.transform import synthesize, synthesize_gradient

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")


def random_points(rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Points uniform in area (sin(lat) uniform), longitudes over two turns and negative."""
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    lon = rng.uniform(-360.0, 360.0, n)
    return lat, lon


def scipy_field(coef: np.ndarray, lat: np.ndarray, lon: np.ndarray, diff: bool = False):
    """sum over l and m = -l..l of a_lm Y_lm with scipy.special.sph_harm_y (orthonormal,
    Condon-Shortley phase), a_{l,-m} = (-1)^m conj(a_lm) for a real field.  With ``diff``
    also d/dtheta and d/dphi (sph_harm_y(diff_n=1))."""
    theta = np.radians(90.0 - lat)
    phi = np.radians(np.remainder(lon, 360.0))
    lmax = coef.shape[-1] - 1
    f = np.zeros(lat.shape, complex)
    dt = np.zeros(lat.shape, complex)
    dp = np.zeros(lat.shape, complex)
    for l in range(lmax + 1):
        for m in range(-l, l + 1):
            a = coef[l, m] if m >= 0 else (-1) ** m * np.conj(coef[l, -m])
            if diff:
                y, grad = sps.sph_harm_y(l, m, theta, phi, diff_n=1)
                dt += a * grad[..., 0]
                dp += a * grad[..., 1]
            else:
                y = sps.sph_harm_y(l, m, theta, phi)
            f += a * y
    if diff:
        return f.real, dt.real, dp.real
    return f.real


# --------------------------------------------------------------------------------------
# evaluation against outside references
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
@pytest.mark.reference
def test_evaluate_matches_scipy_sph_harm_y(rng, norm, condon_shortley):
    # source: scipy.special.sph_harm_y (orthonormal, Condon-Shortley phase), summed over
    # m = -l..l directly; the same field given in every convention must evaluate the same
    lmax = 9
    coef = random_coef(lmax, rng, batch=(2,))
    lat, lon = random_points(rng, 60)
    lat = np.concatenate([lat, [90.0, -90.0, 90.0 - 1e-9, -90.0 + 1e-7, 0.0]])
    lon = np.concatenate([lon, [0.0, 123.0, 45.0, -30.0, 359.999]])
    h = Harmonics(coef).to(norm, condon_shortley)
    got = evaluate(h, lat, lon)
    assert got.shape == (2, lat.size)
    for k in range(2):
        ref = scipy_field(coef[k], lat, lon)
        assert np.max(np.abs(got[k] - ref)) < 1e-13 * np.max(np.abs(ref))


@pytest.mark.reference
def test_evaluate_gradient_matches_scipy_derivatives(rng):
    # source: scipy.special.sph_harm_y(diff_n=1) gives d/dtheta and d/dphi of each term;
    # east = (1/sin theta) df/dphi, north = -df/dtheta (common practice)
    lmax = 10
    coef = random_coef(lmax, rng)
    lat, lon = random_points(rng, 80)
    lat = np.concatenate([lat, [89.9999, -89.99]])
    lon = np.concatenate([lon, [10.0, 200.0]])
    f, dtheta, dphi = scipy_field(coef, lat, lon, diff=True)
    east, north = evaluate_gradient(Harmonics(coef, norm="orthonormal").to("schmidt"), lat, lon)
    scale = np.max(np.abs(dtheta))
    assert np.max(np.abs(north + dtheta)) < 1e-13 * scale
    # compared as cos(lat) * east: dividing the reference by cos(lat) next to the poles would
    # amplify its own rounding
    assert np.max(np.abs(east * np.cos(np.radians(lat)) - dphi)) < 1e-13 * scale
    # with a radius the gradient is per metre
    e2, n2 = evaluate_gradient(Harmonics(coef, radius=2.0e6), lat, lon)
    np.testing.assert_allclose(n2 * 2.0e6, north, rtol=1e-13, atol=1e-14 * scale)


# (m, colatitude in degrees; negative = measured from the south pole)
POLAR_POINTS = [0.001, 0.05, 0.5, -0.002, -0.3]


@pytest.mark.slow
@pytest.mark.reference
def test_evaluate_degree_2700_next_to_poles_against_mpmath(rng):
    # source: mpmath, fully normalised recursion at 45 digits with an unbounded exponent
    # (tests/_reference.mp_ortho_column), parity Lambda_lm(pi - t) = (-1)^(l+m) Lambda_lm(t)
    # (DLMF 14.7.17) for the southern points
    lmax = 2700
    orders = [0, 1, 3, 40]
    coef = np.zeros((lmax + 1, lmax + 1), complex)
    for m in orders:
        coef[m:, m] = rng.standard_normal(lmax + 1 - m) + (1j * rng.standard_normal(lmax + 1 - m) if m else 0)
    h = Harmonics(coef, condon_shortley=False)
    lat = np.array([90.0 - d if d > 0 else -90.0 - d for d in POLAR_POINTS])
    lon = np.array([17.0, 123.0, -40.0, 250.0, 5.0])
    got = evaluate(h, lat, lon)
    del h
    for j, d in enumerate(POLAR_POINTS):
        theta = math.radians(90.0 - abs(lat[j]))  # polar distance as the double the code uses
        phi = math.radians(lon[j])
        ref = 0.0
        size = 0.0
        for m in orders:
            lam = mp_to_float(mp_ortho_column(m, lmax, theta))
            if d < 0:
                lam = lam * (-1.0) ** np.arange(lmax + 1 - m)
            term = coef[m:, m] * lam
            w = 1.0 if m == 0 else 2.0
            ref += w * np.real(np.sum(term) * np.exp(1j * m * phi))
            size += w * np.sum(np.abs(term))
        err = abs(got[j] - ref) / size
        print(f"degree 2700, polar distance {abs(d)} deg: error / sum|terms| = {err:.2e}")
        # next to the poles the recursion in degree loses up to ~0.15 l^2 eps = 1.2e-10 at
        # l = 2700 (the bound of test_legendre's near-pole checks); measured up to 6.4e-12 here,
        # the same as sphex.legendre.for_order gives for these sums
        assert err < 1.2e-10


def test_points_on_a_full_grid_match_synthesize(rng):
    # internal consistency: point evaluation and the transform sum the same series
    lmax = 48
    coef = random_coef(lmax, rng, batch=(2,))
    for grid in (Grid.gauss(lmax), Grid.equiangular(2 * lmax + 2, 2 * lmax + 2, "poles"),
                 Grid.equiangular(101, 98, "north")):
        h = Harmonics(coef, norm="full", condon_shortley=False)
        lat, lon = np.meshgrid(grid.lat, grid.lon, indexing="ij")
        got = evaluate(h, lat, lon)
        ref = synthesize(h, grid)
        assert got.shape == ref.shape
        assert np.max(np.abs(got - ref)) < 1e-13 * np.max(np.abs(ref))
        east, north = evaluate_gradient(h, lat, lon)
        east_ref, north_ref = synthesize_gradient(h, grid)
        assert np.max(np.abs(north - north_ref)) < 1e-13 * np.max(np.abs(north_ref))
        assert np.max(np.abs(east - east_ref)) < 1e-13 * np.max(np.abs(east_ref))


def test_shapes_scalars_and_batches(rng):
    coef = random_coef(6, rng, batch=(3,))
    h = Harmonics(coef)
    lat, lon = random_points(rng, 12)
    grid_lat, grid_lon = lat.reshape(3, 4), lon.reshape(3, 4)
    batch = evaluate(h, grid_lat, grid_lon)
    assert batch.shape == (3, 3, 4)
    for k in range(3):
        single = evaluate(Harmonics(coef[k]), lat, lon)
        np.testing.assert_allclose(batch[k].ravel(), single, rtol=0, atol=1e-14 * np.abs(single).max())
    scalar = evaluate(Harmonics(coef[0]), float(lat[0]), float(lon[0]))
    assert np.shape(scalar) == ()
    assert abs(scalar - batch[0].ravel()[0]) < 1e-13
    assert evaluate(h, np.zeros(0), np.zeros(0)).shape == (3, 0)


# --------------------------------------------------------------------------------------
# the adjoint
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_adjoint_identity(rng, norm, condon_shortley):
    # <E a, y> = <a, E^T y> with <a, b> = sum Re(a) Re(b) + Im(a) Im(b) (definition of the adjoint)
    lmax = 20
    coef = random_coef(lmax, rng, batch=(2,))
    h = Harmonics(coef, norm=norm, condon_shortley=condon_shortley)
    lat, lon = random_points(rng, 700)
    y = rng.standard_normal((2, 700))
    lhs = np.sum(evaluate(h, lat, lon) * y, axis=-1)
    b = evaluate_adjoint(y, lat, lon, lmax, norm=norm, condon_shortley=condon_shortley)
    assert b.norm == norm and b.condon_shortley == condon_shortley and b.batch_shape == (2,)
    rhs = np.sum((np.conj(h.coef) * b.coef).real, axis=(-2, -1))
    assert np.all(np.abs(lhs - rhs) <= 1e-12 * np.abs(lhs)), (lhs, rhs)


def test_adjoint_identity_with_radius(rng):
    # definition of the adjoint, for the exterior continuation (R/r)^(l+1)
    lmax = 30
    R = 6.0e6
    h = Harmonics(random_coef(lmax, rng), radius=R)
    lat, lon = random_points(rng, 500)
    r = R * rng.uniform(0.99, 1.6, 500)
    y = rng.standard_normal(500)
    lhs = float(np.sum(evaluate(h, lat, lon, radius=r) * y))
    b = evaluate_adjoint(y, lat, lon, lmax, radius=r, reference_radius=R)
    rhs = float(np.sum((np.conj(h.coef) * b.coef).real))
    assert abs(lhs - rhs) <= 1e-12 * abs(lhs)


# --------------------------------------------------------------------------------------
# exterior potential: a point mass
# --------------------------------------------------------------------------------------
def point_mass_coefficients(lmax: int, radius: float, source: np.ndarray) -> np.ndarray:
    """Exterior expansion of 1/|x - s| on the sphere of radius R, orthonormal with the phase.

    1/|x - s| = sum_l |s|^l / r^(l+1) P_l(cos gamma) (Legendre generating function) and the
    addition theorem P_l(cos gamma) = 4 pi/(2l+1) sum_m Y_lm(x) conj(Y_lm(s)) (common
    practice), so a_lm = 4 pi/(2l+1) |s|^l / R^(l+1) conj(Y_lm(s)), Y from scipy.special.sph_harm_y.
    """
    d = float(np.linalg.norm(source))
    theta = math.acos(source[2] / d)
    phi = math.atan2(source[1], source[0]) % (2 * math.pi)
    coef = np.zeros((lmax + 1, lmax + 1), complex)
    for l in range(lmax + 1):
        for m in range(l + 1):
            coef[l, m] = (4 * math.pi / (2 * l + 1) * d ** l / radius ** (l + 1)
                          * np.conj(sps.sph_harm_y(l, m, theta, phi)))
    coef[:, 0] = coef[:, 0].real
    return coef


def point_mass_potential(lat, lon, r, source):
    """1 / |x - s| at points (lat, lon in degrees, r in metres): the closed form."""
    la, lo = np.radians(lat), np.radians(lon)
    x = np.stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)], axis=-1)
    return 1.0 / np.linalg.norm(np.asarray(r)[..., None] * x - source, axis=-1)


@pytest.mark.reference
def test_point_mass_potential_evaluated_and_fitted_back(rng):
    # source: closed form 1/|x - s| of a unit point mass and its exterior expansion
    # (Legendre generating function + addition theorem, common practice; Y from scipy)
    R = 1.7e6
    source = 0.3 * R * np.array([math.cos(0.4) * math.cos(1.1), math.cos(0.4) * math.sin(1.1), math.sin(0.4)])
    lmax = 30   # terms beyond degree 30 are below 0.3^31 ~ 6e-17 of the field on r >= R
    coef = point_mass_coefficients(lmax, R, source)
    h = Harmonics(coef, radius=R)
    lat, lon = random_points(rng, 600)
    r = R * rng.uniform(1.0, 2.0, lat.size)
    ref = point_mass_potential(lat, lon, r, source)
    got = evaluate(h, lat, lon, radius=r)
    assert np.max(np.abs(got - ref)) < 1e-13 * np.max(ref)
    # fitted back from scattered samples on the reference sphere, in geodesy's normalisation
    lat2, lon2 = random_points(rng, 3000)
    data = point_mass_potential(lat2, lon2, R, source)
    result = fit(data, lat2, lon2, lmax, norm="full", method="direct")
    back = result.harmonics.to("orthonormal", True).coef
    assert np.linalg.norm(back - coef) < 1e-10 * np.linalg.norm(coef)
    assert result.residual_rms < 1e-13 * np.max(data)


# --------------------------------------------------------------------------------------
# least squares from scattered points
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("method,bound", [("direct", 1e-9), ("iterative", 1e-8)])
@pytest.mark.reference
def test_fit_recovers_band_limited_field(rng, method, bound):
    # band-limited truth at random points, more points than unknowns, no damping:
    # least squares is exact up to rounding (common practice)
    lmax = 14
    coef = random_coef(lmax, rng)
    truth = Harmonics(coef)
    lat, lon = random_points(rng, 1500)
    data = evaluate(truth, lat, lon)
    result = fit(data, lat, lon, lmax, method=method)
    assert result.info["method"] == method
    err = np.linalg.norm(result.harmonics.coef - coef) / np.linalg.norm(coef)
    assert err < bound, err
    assert result.residual_rms < 1e-8 * np.std(data)
    if method == "direct":
        assert result.sigmas is not None and result.info["condition_estimate"] < 100
    else:
        assert result.sigmas is None and result.info["converged"] and result.info["iterations"] > 2
    # requested convention
    full = fit(data, lat, lon, lmax, method=method, norm="schmidt", condon_shortley=False)
    assert full.harmonics.norm == "schmidt" and not full.harmonics.condon_shortley
    err = np.linalg.norm(full.harmonics.to("orthonormal", True).coef - coef) / np.linalg.norm(coef)
    assert err < bound


def scipy_design(lat: np.ndarray, lon: np.ndarray, lmax: int, norm: str, condon_shortley: bool):
    """Real design matrix, one column per C_lm (m <= l) then per S_lm (m >= 1): the functions
    r_m Lambda_lm cos(m phi) and r_m Lambda_lm sin(m phi) with r_0 = 1, r_m = sqrt(2) (the
    real form of the core API), Lambda from scipy.special (tests/_reference.scipy_lambda).
    Returns the matrix and the (degree, order, part) of each column."""
    theta = np.radians(90.0 - lat)
    phi = np.radians(lon)
    cols, labels = [], []
    for part in (0, 1):
        for l in range(lmax + 1):
            for m in range(part, l + 1):
                r = 1.0 if m == 0 else math.sqrt(2.0)
                turn = np.cos(m * phi) if part == 0 else np.sin(m * phi)
                cols.append(r * scipy_lambda(l, m, theta, norm, condon_shortley) * turn)
                labels.append((l, m, part))
    return np.stack(cols, axis=1), labels


@pytest.mark.parametrize("norm,condon_shortley", [("full", True), ("schmidt", False)])
@pytest.mark.reference
def test_weighted_damped_fit_matches_numpy_normal_equations(rng, norm, condon_shortley):
    # source: the regularised weighted normal equations written out with numpy (common practice
    # for Tikhonov least squares): design matrix A from scipy.special (scipy_design),
    # (A^T W A + damping diag(1 / prior_l)) c = A^T W y in the caller's convention, posterior
    # sigmas sqrt(diag((A^T W A + damping D)^-1)) with weights = 1 / noise variance, and the
    # weighted residual rms sqrt(sum w r^2 / sum w)
    lmax = 6
    lat, lon = random_points(rng, 300)
    w = rng.uniform(0.2, 5.0, lat.size)
    y = np.sin(np.radians(lat)) ** 3 + np.cos(np.radians(lon)) + 0.3 * rng.standard_normal(lat.size)
    prior = 2.0 / (np.arange(lmax + 1) + 1.0) ** 3
    damping = 0.7
    result = fit(y, lat, lon, lmax, weights=w, damping=damping, prior=prior, norm=norm,
                 condon_shortley=condon_shortley, method="direct")
    A, labels = scipy_design(lat, lon, lmax, norm, condon_shortley)
    normal = A.T @ (w[:, None] * A) + damping * np.diag([1.0 / prior[l] for l, _, _ in labels])
    ref = np.linalg.solve(normal, A.T @ (w * y))
    ref_sigma = np.sqrt(np.diag(np.linalg.inv(normal)))
    ref_rms = math.sqrt(np.sum(w * (y - A @ ref) ** 2) / np.sum(w))
    C, S = result.harmonics.cos_sin()
    sC, sS = result.sigmas.cos_sin()
    got = np.array([(C if part == 0 else S)[l, m] for l, m, part in labels])
    got_sigma = np.array([(sC if part == 0 else sS)[l, m] for l, m, part in labels])
    # measured at most 2.3e-15 (coefficients), 1.2e-15 (sigmas), 4.4e-16 (rms) relative: the
    # rounding of two different solves; a damping term on the wrong scale or degree, or a weight
    # applied twice, moves them by 1e-3 or more
    assert np.max(np.abs(got - ref)) < 2e-14 * np.max(np.abs(ref))
    np.testing.assert_allclose(got_sigma, ref_sigma, rtol=1e-14)
    assert abs(result.residual_rms / ref_rms - 1) < 1e-14


@pytest.mark.reference
def test_iterative_fit_does_not_depend_on_the_data_units(rng):
    # least squares is linear in the data (common practice): data given in units a billion
    # times smaller (a gravity gradient in s^-2 rather than E) must give the same relative
    # accuracy and the same number of iterations; a stopping test on the absolute residual
    # stops such data after the first iterations
    lmax = 10
    coef = random_coef(lmax, rng)
    lat, lon = random_points(rng, 800)
    data = evaluate(Harmonics(coef), lat, lon)
    plain = fit(data, lat, lon, lmax, method="iterative")
    small = fit(1e-9 * data, lat, lon, lmax, method="iterative")
    for result, scale in ((plain, 1.0), (small, 1e-9)):
        err = np.linalg.norm(result.harmonics.coef - scale * coef) / np.linalg.norm(scale * coef)
        assert err < 1e-8, (scale, err)
    assert small.info["iterations"] == plain.info["iterations"]


def test_auto_method_chooses_by_size(rng):
    lat, lon = random_points(rng, 300)
    data = np.cos(np.radians(lat))
    assert fit(data, lat, lon, 4).info["method"] == "direct"
    # 101^2 unknowns is above the direct method's limit of 10^4
    with pytest.warns(IllPosedWarning, match="stopped after 3 iterations"):
        assert fit(data, lat, lon, 100, damping=1e-3, maxiter=3).info["method"] == "iterative"


@pytest.mark.reference
def test_posterior_sigmas_match_monte_carlo_scatter(rng):
    # Monte Carlo (seeded): the scatter of repeated fits with new noise matches the posterior
    # standard deviations sqrt(diag((E^T W E)^-1)) of linear least squares (common practice)
    lmax = 5
    truth = Harmonics(random_coef(lmax, rng))
    lat, lon = random_points(rng, 400)
    clean = evaluate(truth, lat, lon)
    noise = 0.05
    runs = 2000
    data = clean + noise * rng.standard_normal((runs, lat.size))
    # weights = inverse noise variance: sigmas from the weights
    result = fit(data, lat, lon, lmax, weights=np.full(lat.size, noise ** -2), method="direct")
    C, S = result.harmonics.cos_sin()
    sC, sS = result.sigmas.cos_sin()
    l, m = np.tril_indices(lmax + 1)
    ratio_c = np.std(C[:, l, m], axis=0) / sC[0, l, m]
    ratio_s = np.std(S[:, l[m > 0], m[m > 0]], axis=0) / sS[0, l[m > 0], m[m > 0]]
    ratios = np.concatenate([ratio_c, ratio_s])
    print(f"Monte Carlo / posterior sigma: {ratios.min():.3f} .. {ratios.max():.3f}")
    assert np.all(np.abs(ratios - 1) < 0.10)
    # the a posteriori variance factor is ~1 when the weights are right
    assert abs(np.mean(result.info["variance_factor"]) - 1) < 0.02
    # without weights the noise variance is estimated from the residuals
    plain = fit(data[:200], lat, lon, lmax, method="direct")
    sC2, _ = plain.sigmas.cos_sin()
    assert abs(np.median(sC2[:, l, m] / sC[0, l, m]) - 1) < 0.10
    # the covariance's diagonal is the square of the sigmas
    cov = result.covariance(0)
    basis = result.info["basis"]
    assert cov.shape == (basis.size, basis.size)
    np.testing.assert_allclose(np.sqrt(np.diag(cov))[: l.size], sC[0, l, m], rtol=1e-12)


@pytest.mark.reference
def test_condition_estimate_of_conjugate_gradients_matches_dense(rng):
    # Lanczos values from the coefficients of conjugate gradients (Saad 2003, section 6.7.3)
    # against the eigenvalues of the dense normal matrix (its inverse is the direct method's
    # covariance with unit weights)
    lmax = 8
    lat, lon = random_points(rng, 150)
    lat[lat > 50] *= 0.5            # a sparse polar region makes the problem less trivial
    data = evaluate(Harmonics(random_coef(lmax, rng)), lat, lon)
    direct = fit(data, lat, lon, lmax, method="direct", weights=np.ones(lat.size))
    eig = 1.0 / np.linalg.eigvalsh(direct.covariance())
    dense = eig.max() / eig.min()
    iterative = fit(data, lat, lon, lmax, method="iterative", tol=1e-13)
    assert abs(iterative.info["condition_estimate"] / dense - 1) < 0.01, (iterative.info, dense)


def test_damping_and_prior_shrink_toward_zero(rng):
    # Tikhonov: with n < p the damped solution fits the data and has the smallest
    # weighted norm; a Kaula-like prior damps high degrees more than low ones
    lmax = 20
    truth = Harmonics(random_coef(lmax, rng))
    lat, lon = random_points(rng, 200)       # 441 unknowns > 200 points
    data = evaluate(truth, lat, lon)
    with pytest.raises(ValueError, match="damping"):
        fit(data, lat, lon, lmax)
    with pytest.warns(IllPosedWarning, match="condition estimate"):  # barely damped
        small = fit(data, lat, lon, lmax, damping=1e-8, method="direct")
    assert small.residual_rms < 1e-3 * np.std(data)
    big = fit(data, lat, lon, lmax, damping=1e2, method="direct")
    assert np.linalg.norm(big.harmonics.coef) < np.linalg.norm(small.harmonics.coef)
    kaula = fit(data, lat, lon, lmax, damping=1.0, prior=lambda l: 1.0 / np.maximum(l, 1) ** 4,
                method="direct")
    power = np.sum(np.abs(kaula.harmonics.coef) ** 2, axis=1)
    assert power[15:].sum() < 1e-2 * power[:5].sum()
    # the same estimate from the iterative method
    it = fit(data, lat, lon, lmax, damping=1.0, prior=1.0 / np.maximum(np.arange(lmax + 1), 1) ** 4,
             method="iterative", tol=1e-12, maxiter=5000)
    assert np.linalg.norm(it.harmonics.coef - kaula.harmonics.coef) < 1e-6 * np.linalg.norm(kaula.harmonics.coef)


# --------------------------------------------------------------------------------------
# grids with missing cells
# --------------------------------------------------------------------------------------
def cap_mask(grid: Grid, lat0: float, lon0: float, fraction: float) -> np.ndarray:
    """True inside a spherical cap covering ``fraction`` of the sphere: cap area
    2 pi (1 - cos a) (common practice)."""
    cos_a = 1.0 - 2.0 * fraction
    lat, lon = np.meshgrid(np.radians(grid.lat), np.radians(grid.lon), indexing="ij")
    la0, lo0 = math.radians(lat0), math.radians(lon0)
    cos_d = np.sin(lat) * math.sin(la0) + np.cos(lat) * math.cos(la0) * np.cos(lon - lo0)
    return cos_d > cos_a


@pytest.mark.reference
def test_fit_masked_recovers_low_degree_field_under_a_30_percent_cap(rng):
    # an ocean-style gap: a cap of missing cells covering 30 % of the sphere (cap area
    # 2 pi (1 - cos a), common practice); degree 5 is well posed there
    grid = Grid.gauss(47)
    missing = cap_mask(grid, 20.0, 200.0, 0.30)
    assert abs(grid.integrate(missing.astype(float)) / (4 * np.pi) - 0.30) < 0.01
    lmax = 5
    coef = random_coef(lmax, rng, batch=(2,))
    field = synthesize(Harmonics(coef), grid)
    with warnings.catch_warnings():
        warnings.simplefilter("error", IllPosedWarning)
        gappy = np.where(missing, np.nan, field)
        result = fit_masked(gappy, grid, lmax)
    err = np.linalg.norm(result.harmonics.coef - coef) / np.linalg.norm(coef)
    assert err < 1e-8, err
    assert result.sigmas is None and abs(result.info["observed_fraction"][0] - 0.70) < 0.01
    # an explicit mask gives the same estimate; the values under it are never used
    masked = fit_masked(np.where(missing, 1e6, field), grid, lmax, mask=missing)
    np.testing.assert_allclose(masked.harmonics.coef, result.harmonics.coef, rtol=0, atol=1e-9)
    # the fit is not a fill: the input is untouched
    assert np.all(np.isnan(gappy[:, missing]))


def test_fit_masked_warns_when_ill_posed_and_damping_cures_it(rng):
    # degree 12 resolves functions concentrated inside the 30 % cap (Slepian concentration,
    # Simons et al. 2006): the normal matrix is nearly singular
    grid = Grid.gauss(47)
    missing = cap_mask(grid, -10.0, 40.0, 0.30)
    lmax = 12
    field = synthesize(Harmonics(random_coef(lmax, rng)), grid)
    gappy = np.where(missing, np.nan, field)
    with pytest.warns(IllPosedWarning, match="damping"):
        result = fit_masked(gappy, grid, lmax, maxiter=400)
    assert result.info["condition_estimate"] > CONDITION_LIMIT or not result.info["converged"]
    with warnings.catch_warnings():
        warnings.simplefilter("error", IllPosedWarning)
        damped = fit_masked(gappy, grid, lmax, damping=1e-4)
    assert damped.info["converged"] and damped.info["condition_estimate"] < 1e5
    # the damped estimate still fits the observed cells closely
    assert damped.residual_rms < 1e-2 * np.nanstd(gappy)


# --------------------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------------------
def test_bad_points_rejected(rng):
    h = Harmonics(random_coef(3, rng))
    with pytest.raises(ValueError, match=r"\[-90, 90\].*swapped"):
        evaluate(h, [10.0, 95.0], [0.0, 0.0])
    with pytest.raises(ValueError, match="lat contains 1 NaN"):
        evaluate(h, [np.nan, 1.0], [0.0, 0.0])
    with pytest.raises(ValueError, match="lon contains 1 NaN"):
        fit([1.0, 2.0], [0.0, 1.0], [np.inf, 0.0], 0)
    with pytest.raises(ValueError, match="shape"):
        evaluate(h, [0.0, 1.0], [0.0, 1.0, 2.0])
    with pytest.raises(ValueError, match="values have shape"):
        fit(np.ones(3), [0.0, 1.0], [0.0, 1.0], 0)
    with pytest.raises(ValueError, match="values contain 1 NaN"):
        fit([1.0, np.nan], [0.0, 1.0], [0.0, 1.0], 0)
    with pytest.raises(ValueError, match="weights have shape"):
        fit([1.0, 2.0], [0.0, 1.0], [0.0, 1.0], 0, weights=[1.0])
    with pytest.raises(ValueError, match="weights must be finite and >= 0"):
        fit([1.0, 2.0], [0.0, 1.0], [0.0, 1.0], 0, weights=[1.0, -1.0])
    with pytest.raises(ValueError, match="h.replace"):
        evaluate(h, [0.0], [0.0], radius=2.0)
    with pytest.raises(ValueError, match="sphex.Harmonics"):
        evaluate(np.zeros((4, 4)), [0.0], [0.0])


@pytest.mark.parametrize("bad", [np.nan, np.inf, 2.5, -1, True, "3"])
def test_bad_integers_rejected(bad):
    with pytest.raises(ValueError, match="lmax must be an integer"):
        fit([1.0, 2.0], [0.0, 1.0], [0.0, 1.0], bad)
    with pytest.raises(ValueError, match="lmax must be an integer"):
        evaluate_adjoint([1.0], [0.0], [0.0], bad)


def test_bad_fit_options_rejected(rng):
    lat, lon = random_points(rng, 50)
    y = np.sin(np.radians(lat))
    with pytest.raises(ValueError, match="49 unknowns.*only 20 points.*damping"):
        fit(y[:20], lat[:20], lon[:20], 6)
    with pytest.raises(ValueError, match="maxiter must be an integer"):
        fit(y, lat, lon, 2, maxiter=2.5)
    with pytest.raises(ValueError, match="tol must be a number between 0 and 1"):
        fit(y, lat, lon, 2, tol=np.nan)
    with pytest.raises(ValueError, match="unknown method"):
        fit(y, lat, lon, 2, method="qr")
    with pytest.raises(ValueError, match="damping must be a finite number"):
        fit(y, lat, lon, 2, damping=np.nan)
    with pytest.raises(ValueError, match="prior has no effect with damping=0"):
        fit(y, lat, lon, 2, prior=np.ones(3))
    with pytest.raises(ValueError, match="prior variances must be positive"):
        fit(y, lat, lon, 2, damping=1.0, prior=np.array([1.0, 0.0, 1.0]))
    with pytest.raises(ValueError, match="one prior variance per degree"):
        fit(y, lat, lon, 2, damping=1.0, prior=np.ones(2))
    with pytest.raises(ValueError, match="no data"):
        fit(y, lat, lon, 2, weights=np.zeros(lat.size))


def test_bad_masked_input_rejected(rng):
    grid = Grid.gauss(15)
    field = np.ones(grid.shape)
    with pytest.raises(ValueError, match="every cell is missing"):
        fit_masked(np.full(grid.shape, np.nan), grid, 3)
    with pytest.raises(ValueError, match="every cell is missing"):
        fit_masked(field, grid, 3, mask=np.ones(grid.shape, bool))
    holes = field.copy()
    holes[3, 4] = np.nan
    with pytest.raises(ValueError, match="1 cell.*mask marks them observed"):
        fit_masked(holes, grid, 3, mask=np.zeros(grid.shape, bool))
    with pytest.raises(ValueError, match="mask has shape"):
        fit_masked(field, grid, 3, mask=np.zeros((3, 3), bool))
    with pytest.raises(ValueError, match="mask must be boolean"):
        fit_masked(field, grid, 3, mask=np.zeros(grid.shape))
    with pytest.raises(ValueError, match="values have shape"):
        fit_masked(field.T, grid, 3)
    with pytest.raises(ValueError, match="use lmax <= 15"):
        fit_masked(field, grid, 16)
    sparse = np.full(grid.shape, np.nan)
    sparse[0, :5] = 1.0
    with pytest.raises(ValueError, match="16 unknowns.*only 5 observed cells.*damping"):
        fit_masked(sparse, grid, 3)
