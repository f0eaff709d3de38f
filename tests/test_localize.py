"""Checks of sphex.localize: cap concentration windows, 3j symbols, multitaper localised spectra."""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
import scipy.special as sps
import sympy
from sympy.physics.wigner import wigner_3j

from sphex import Grid, Harmonics, analyze, synthesize
from sphex.grids import gauss_nodes
from sphex.legendre import for_order
from sphex.localize import (
    cap_windows,
    expected_local_power,
    local_admittance,
    local_correlation,
    local_coupling_matrix,
    local_cross_power,
    local_power,
    squared_3j_zero_orders,
)
from sphex.rotation import rotate, rotation_to


# ----------------------------------------------------------------- helpers
def stationary_fields(rng: np.random.Generator, spectrum: np.ndarray, count: int) -> Harmonics:
    """`count` realisations of a stationary isotropic random field with degree power `spectrum`
    (orthonormal coefficients with E|a_lm|^2 = 4 pi S_l / (2l + 1), common practice)."""
    lmax = spectrum.size - 1
    l = np.arange(lmax + 1)
    sd = np.sqrt(4 * np.pi * spectrum / (2 * l + 1))
    shape = (count, lmax + 1, lmax + 1)
    c = (rng.standard_normal(shape) + 1j * rng.standard_normal(shape)) / np.sqrt(2.0)
    c[..., 0] = rng.standard_normal((count, lmax + 1))
    c = c * sd[:, None]
    return Harmonics(np.where(np.tril(np.ones((lmax + 1, lmax + 1), dtype=bool)), c, 0))


def window_profile(windows, k: int, colat: np.ndarray) -> np.ndarray:
    """g_k(theta) = sum_l g_l Lambda_l|m|(theta) (orthonormal, no phase) with sphex.legendre."""
    m = abs(int(windows.order[k]))
    lam = for_order(m, windows.lwin, colat, norm="orthonormal", condon_shortley=False)
    return windows.coefficients[k, m:] @ lam


def scipy_lambda(l: int, m: int, x: float) -> float:
    """Orthonormal Lambda_lm at x = cos(theta) from scipy.special.sph_legendre_p (its Condon-Shortley
    sign is irrelevant here: only products of equal orders are integrated)."""
    return float(sps.sph_legendre_p(l, m, np.arccos(x))[0])


# ----------------------------------------------------------------- windows
@pytest.mark.parametrize("cap, lwin", [(20.0, 20), (5.0, 40), (60.0, 7), (150.0, 12), (180.0, 5)])
@pytest.mark.reference
def test_concentrations_sum_to_the_shannon_number(cap, lwin):
    # source: Simons, Dahlen & Wieczorek 2006 (SIAM Review 48), N = (L+1)^2 (1 - cos theta0) / 2
    w = cap_windows(cap, lwin)
    shannon = (lwin + 1) ** 2 * (1 - math.cos(math.radians(cap))) / 2
    assert w.concentration.size == (lwin + 1) ** 2
    assert w.shannon == pytest.approx(shannon, rel=1e-14)
    assert w.concentration.sum() == pytest.approx(shannon, rel=1e-12)
    assert np.all(np.diff(w.concentration) <= 0) and w.concentration[0] <= 1.0


@pytest.mark.reference
def test_zonal_partial_sum_matches_direct_integral():
    # source: scipy.integrate.quad with scipy.special.eval_legendre; the zonal windows' factors sum to
    # the trace of the order-0 concentration matrix, sum_l (2l+1)/2 int_{cos theta0}^1 P_l(x)^2 dx
    cap, lwin = 25.0, 15
    w = cap_windows(cap, lwin)
    x0 = math.cos(math.radians(cap))
    direct = sum((2 * l + 1) / 2 * scipy.integrate.quad(lambda x: sps.eval_legendre(l, x) ** 2, x0, 1.0,
                                                        epsabs=1e-15, epsrel=1e-13)[0]
                 for l in range(lwin + 1))
    assert w.concentration[w.zonal()].sum() == pytest.approx(direct, rel=1e-12)
    assert w.zonal().size == lwin + 1


@pytest.mark.reference
def test_windows_orthonormal_on_the_sphere_and_orthogonal_over_the_cap_sphex_quadrature():
    # quadrature from sphex.grids (Gauss grid over the sphere; Gauss nodes mapped onto the cap, exact
    # for these polynomials); the windows are orthonormal on the sphere and diagonalise the cap
    # integral with their concentration factors (Simons et al. 2006)
    cap, lwin = 20.0, 20
    w = cap_windows(cap, lwin)
    grid = Grid.gauss(lwin)
    values = synthesize(w.harmonics(), grid)
    n = values.shape[0]
    area = (2 * np.pi / grid.nlon) * grid.weights[:, None] * np.ones(grid.nlon)   # sphex Gauss weights
    gram = (values * area).reshape(n, -1) @ values.reshape(n, -1).T
    assert grid.integrate(values[0] * values[0]) == pytest.approx(1.0, abs=1e-13)
    np.testing.assert_allclose(gram, np.eye(n), rtol=0, atol=1e-12)
    # the values from the window profiles (sphex.legendre, no transform) agree with the synthesis
    np.testing.assert_allclose(w.values(grid.colat, grid.lon), values, rtol=0, atol=1e-12)
    colat, weights = gauss_nodes(lwin + 1)
    x0 = math.cos(math.radians(cap))
    xc = x0 + (1 - x0) * (np.cos(colat) + 1) / 2
    on_cap = w.values(np.arccos(xc), grid.lon)
    cap_area = (2 * np.pi / grid.nlon) * (weights * (1 - x0) / 2)[:, None] * np.ones(grid.nlon)
    cap_gram = (on_cap * cap_area).reshape(n, -1) @ on_cap.reshape(n, -1).T
    np.testing.assert_allclose(cap_gram, np.diag(w.concentration), rtol=0, atol=1e-12)


@pytest.mark.reference
def test_windows_orthogonal_over_the_cap_scipy_quad():
    # source: scipy.integrate.quad with scipy.special.sph_legendre_p; same-order windows:
    # 2 pi int_{x0}^1 g_i g_j dx = lambda_i delta_ij, and = delta_ij over [-1, 1]
    cap, lwin = 30.0, 10
    w = cap_windows(cap, lwin)
    x0 = math.cos(math.radians(cap))
    for m in (0, 3):
        ks = np.flatnonzero(w.order == m)[:3]
        for a in ks:
            for b in ks:
                def product(x, a=a, b=b):
                    lam = np.array([scipy_lambda(l, m, x) for l in range(m, lwin + 1)])
                    return (w.coefficients[a, m:] @ lam) * (w.coefficients[b, m:] @ lam)

                on_cap = 2 * np.pi * scipy.integrate.quad(product, x0, 1.0, epsabs=1e-14, epsrel=1e-12)[0]
                whole = 2 * np.pi * scipy.integrate.quad(product, -1.0, 1.0, epsabs=1e-14, epsrel=1e-12,
                                                         limit=200)[0]
                assert on_cap == pytest.approx(w.concentration[a] if a == b else 0.0, abs=1e-10)
                assert whole == pytest.approx(1.0 if a == b else 0.0, abs=1e-10)


@pytest.mark.reference
def test_best_window_of_a_20_degree_cap_at_lwin_20_matches_scipy_eigenproblem():
    # source: scipy.integrate.quad (concentration matrix of order 0 from Legendre polynomials,
    # scipy.special.eval_legendre) and scipy.linalg.eigh
    cap, lwin = 20.0, 20
    x0 = math.cos(math.radians(cap))
    n = lwin + 1
    D = np.empty((n, n))
    for i in range(n):
        for j in range(i, n):
            norm = math.sqrt((2 * i + 1) * (2 * j + 1)) / 2      # 2 pi * sqrt((2i+1)(2j+1)) / (4 pi)
            D[i, j] = D[j, i] = norm * scipy.integrate.quad(
                lambda x: sps.eval_legendre(i, x) * sps.eval_legendre(j, x), x0, 1.0,
                epsabs=1e-15, epsrel=1e-13)[0]
    values, vectors = scipy.linalg.eigh(D)
    w = cap_windows(cap, lwin)
    assert w.order[0] == 0
    assert w.concentration[0] == pytest.approx(values[-1], abs=1e-12)
    best = vectors[:, -1] * np.sign(vectors[:, -1].sum())     # positive at the pole: sum of P_l(1) terms
    np.testing.assert_allclose(w.coefficients[0], best, rtol=0, atol=1e-8)
    # the next zonal window too
    k = w.zonal()[1]
    assert w.concentration[k] == pytest.approx(values[-2], abs=1e-12)


def test_window_sign_and_harmonics_round_trip():
    # internal consistency: windows are positive next to the cap centre; harmonics() is the same function
    w = cap_windows(15.0, 25)
    small = np.array([1e-3])
    for k in range(8):
        g = window_profile(w, k, small)
        assert g[0] > 0
    h = w.harmonics([0, 1, 2])
    assert h.coef.shape == (3, 26, 26) and h.norm == "orthonormal" and not h.condon_shortley


# ----------------------------------------------------------------- 3j symbols and coupling
@pytest.mark.reference
def test_squared_3j_matches_sympy():
    # source: sympy.physics.wigner.wigner_3j (exact)
    for l1 in range(0, 7):
        for l2 in range(0, 9):
            ref = np.array([float(wigner_3j(l1, l2, L, 0, 0, 0) ** 2) for L in range(l1 + l2 + 1)])
            np.testing.assert_allclose(squared_3j_zero_orders(l1, l2), ref, rtol=1e-14, atol=1e-16)


@pytest.mark.reference
def test_squared_3j_high_degree_against_sympy_and_orthogonality():
    # source: sympy.physics.wigner.wigner_3j (exact) at degree 700; orthogonality
    # sum_L (2L + 1) (l1 l2 L; 0 0 0)^2 = 1 (common practice)
    l1, l2 = 37, 700
    w = squared_3j_zero_orders(l1, l2)
    for L in (663, 701, 737):
        ref = float(sympy.N(wigner_3j(l1, l2, L, 0, 0, 0) ** 2, 30))
        assert w[L] == pytest.approx(ref, rel=1e-13)
    L = np.arange(w.size)
    assert np.sum((2 * L + 1) * w) == pytest.approx(1.0, rel=1e-13)


@pytest.mark.reference
def test_coupling_matrix_conserves_power():
    # source: Wieczorek & Simons 2005 (the localised field's power is the global power times the
    # window's mean square, 1): each column of M sums to 1 where it is complete
    lmax, lwin = 50, 8
    M = local_coupling_matrix(35.0, lwin, lmax)
    np.testing.assert_allclose(M.sum(axis=0)[: lmax - lwin + 1], 1.0, rtol=1e-13)
    assert np.all(M >= 0)
    # a degree only couples to degrees within lwin of it
    l, j = np.indices(M.shape)
    assert np.all(M[np.abs(l - j) > lwin] == 0)


# ----------------------------------------------------------------- multitaper estimates
@pytest.mark.reference
def test_multitaper_estimate_is_unbiased_for_a_stationary_field(rng):
    # source: Wieczorek & Simons 2005 (Geophys. J. Int. 162): E[local power] = M S for a stationary
    # field; 200 seeded realisations of a power-law spectrum, mean within 4 standard errors
    lmax, lwin, cap, count = 60, 10, 40.0, 200
    l = np.arange(lmax + 1)
    spectrum = np.zeros(lmax + 1)
    spectrum[1:] = 2.0 * l[1:] ** -2.0
    fields = stationary_fields(rng, spectrum, count)
    est = local_power(fields, -12.0, 75.0, cap, lwin)
    assert est.power.shape == (count, lmax + 1) and est.n_windows == 3
    mean = est.power.mean(axis=0)
    standard_error = est.power.std(axis=0, ddof=1) / np.sqrt(count)
    expected = expected_local_power(spectrum, cap, lwin)
    lo, hi = est.valid_range
    assert (lo, hi) == (lwin, lmax - lwin)
    z = (mean - expected)[lo:hi + 1] / standard_error[lo:hi + 1]
    assert np.all(np.abs(z) < 4.0), z
    assert np.all(np.abs(mean / expected - 1)[lo:hi + 1] < 0.15)


def scipy_series(coef: np.ndarray, theta: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """sum_l [a_l0 Y_l0 + 2 Re sum_{m>0} a_lm Y_lm] on the mesh (theta, phi) (radians) with
    scipy.special.sph_harm_y (orthonormal, Condon-Shortley phase) for a real field."""
    lmax = coef.shape[-1] - 1
    f = np.zeros((theta.size, phi.size))
    for l in range(lmax + 1):
        for m in range(l + 1):
            y = sps.sph_harm_y(l, m, theta[:, None], phi[None, :])
            f += (1.0 if m == 0 else 2.0) * np.real(coef[l, m] * y)
    return f


@pytest.mark.reference
def test_local_power_at_the_pole_is_the_power_of_each_windowed_field_at_every_degree(rng):
    # source: direct quadrature (numpy.polynomial.legendre.leggauss in latitude, equal steps in
    # longitude, exact for these polynomial integrands) of the field times each window, both summed
    # with scipy.special.sph_harm_y; the degree power of a field is the area mean of the square of
    # its degree-l part, (|a_l0|^2 + 2 sum_m |a_lm|^2) / (4 pi) (common practice).  At the north
    # pole no rotation is involved: each per-window spectrum must be that of the window, scaled to
    # unit mean square, times the field, at every degree 0..lmax (the valid range and above it)
    lmax, lwin, cap = 16, 4, 30.0
    field = stationary_fields(rng, np.r_[0.0, 1.0 / np.arange(1, lmax + 1)], 1)
    est = local_power(field, 90.0, 0.0, cap, lwin, n_windows=3)
    n = lmax + lwin + 1                        # exact to degree 2n - 1 >= 2 lmax + lwin in cos(theta)
    x, wx = np.polynomial.legendre.leggauss(n)
    theta = np.arccos(x)
    nlon = 2 * (lmax + lwin) + 2               # exact for orders up to 2 lmax + lwin
    phi = 2 * np.pi * np.arange(nlon) / nlon
    f = scipy_series(field.to("orthonormal", True).coef[0], theta, phi)
    windows = cap_windows(cap, lwin)
    for k in range(3):
        # the window's coefficients are orthonormal without the phase: (-1)^m to the phase convention
        g = windows.harmonics([k]).to("orthonormal", True).coef[0]
        product = math.sqrt(4 * np.pi) * scipy_series(g, theta, phi) * f
        power = np.zeros(lmax + 1)
        for l in range(lmax + 1):
            for m in range(l + 1):
                y = sps.sph_harm_y(l, m, theta[:, None], phi[None, :])
                a = np.sum(wx[:, None] * (2 * np.pi / nlon) * product * np.conj(y))
                power[l] += (1.0 if m == 0 else 2.0) * abs(a) ** 2 / (4 * np.pi)
        # measured at most 8.1e-15 of the largest degree's power
        np.testing.assert_allclose(est.per_window[k, 0], power, rtol=0, atol=1e-13 * power.max())


@pytest.mark.reference
def test_localised_spectrum_is_the_same_wherever_the_cap_is_turned_to(rng):
    # source: common practice (rotation consistency): a field that vanishes outside the cap (a random
    # field times a well-concentrated window) has the same localised spectrum at any centre, however
    # it is turned about that centre (complete cos/sin window pairs); the error, a spread between
    # single windows, is the same when the turn about the centre is the same
    lmax, lwin, cap = 48, 10, 30.0
    grid = Grid.gauss(lmax)
    base = stationary_fields(rng, 1.0 / (np.arange(lmax - 11) + 1.0), 1)            # degree 36
    mask = cap_windows(22.0, 12).harmonics([0]).truncate(lmax)       # concentrated in 22 degrees
    at_pole = analyze(synthesize(base.truncate(lmax), grid) * synthesize(mask, grid)[0], grid)
    first = rotate(at_pole, *rotation_to(35.0, 200.0))
    second = rotate(at_pole, 310.0, 90.0 + 52.0, 117.0)   # centre (-52, 310), turned 117 deg about it
    a = local_power(first, 35.0, 200.0, cap, lwin, n_windows=5)
    b = local_power(second, -52.0, 310.0, cap, lwin, n_windows=5)
    c = local_power(at_pole, 90.0, 0.0, cap, lwin, n_windows=5)
    scale = a.power.max()
    np.testing.assert_allclose(a.power, b.power, rtol=0, atol=1e-12 * scale)
    np.testing.assert_allclose(a.power, c.power, rtol=0, atol=1e-12 * scale)
    np.testing.assert_allclose(a.error, c.error, rtol=0, atol=1e-12 * scale)


@pytest.mark.reference
def test_admittance_of_a_scaled_field_returns_the_transfer_function(rng):
    # source: common practice: gravity = Z * topography gives admittance Z and correlation 1
    lmax, lwin = 80, 12
    l = np.arange(lmax + 1)
    topo = stationary_fields(rng, np.r_[0.0, (l[1:] + 0.0) ** -2.5], 1)
    gravity = 2.5 * topo
    z = local_admittance(gravity, topo, 10.0, 45.0, 35.0, lwin)
    lo, hi = z.valid_range
    np.testing.assert_allclose(z.value[..., lo:hi + 1], 2.5, rtol=1e-12)
    assert np.all(z.error[..., lo:hi + 1] < 1e-12)
    r = local_correlation(gravity, topo, 10.0, 45.0, 35.0, lwin)
    np.testing.assert_allclose(r.value[..., lo:hi + 1], 1.0, rtol=1e-12)
    # a transfer function that changes from 1 to 3 at degree 40: a localised degree l blends global
    # degrees l - lwin .. l + lwin, so it returns 1 up to degree 39 - lwin and 3 from 40 + lwin
    transfer = np.where(l < 40, 1.0, 3.0)
    z = local_admittance(topo.filter(transfer), topo, 10.0, 45.0, 35.0, lwin)
    np.testing.assert_allclose(z.value[0, lo:40 - lwin], 1.0, rtol=1e-12)
    np.testing.assert_allclose(z.value[0, 40 + lwin:hi + 1], 3.0, rtol=1e-12)
    # opposite fields: correlation -1
    r = local_correlation(-1.0 * topo, topo, 10.0, 45.0, 35.0, lwin)
    np.testing.assert_allclose(r.value[..., lo:hi + 1], -1.0, rtol=1e-12)


def test_cross_power_of_a_field_with_itself_is_its_power(rng):
    # internal consistency
    h = stationary_fields(rng, np.r_[0.0, np.ones(40)], 2)
    p = local_power(h, 20.0, 30.0, 40.0, 6, n_windows=3)
    x = local_cross_power(h, h.to("full", False), 20.0, 30.0, 40.0, 6, n_windows=3)
    np.testing.assert_allclose(x.power, p.power, rtol=1e-12)
    # the error is the standard error of the mean over the windows
    K = p.per_window.shape[0]
    np.testing.assert_allclose(p.error, p.per_window.std(axis=0, ddof=1) / np.sqrt(K), rtol=1e-10)
    np.testing.assert_allclose(p.power, p.per_window.mean(axis=0), rtol=1e-13)


def test_local_correlation_is_the_cross_power_over_the_root_of_the_powers(rng):
    # internal consistency with the documented definition S12 / sqrt(S11 S22) of the multitaper
    # averages, for two partly correlated fields (values well inside (-1, 1), so that the clip to
    # [-1, 1] hides nothing), and invariance under scaling either field
    lmax, lwin, cap = 40, 8, 35.0
    spectrum = np.r_[0.0, 1.0 / np.arange(1, lmax + 1)]
    f = stationary_fields(rng, spectrum, 1)
    g = f + 1.5 * stationary_fields(rng, spectrum, 1)
    args = (-20.0, 140.0, cap, lwin, 4)      # the four best windows
    r = local_correlation(f, g, *args)
    x = local_cross_power(f, g, *args).power
    p1 = local_power(f, *args).power
    p2 = local_power(g, *args).power
    lo, hi = r.valid_range
    ref = x / np.sqrt(p1 * p2)
    assert np.all(np.abs(ref[..., lo:hi + 1]) < 0.9)
    np.testing.assert_allclose(r.value, ref, rtol=1e-12)
    scaled = local_correlation(1e3 * f, 1e-2 * g, *args)
    np.testing.assert_allclose(scaled.value, r.value, rtol=1e-12)
    np.testing.assert_allclose(scaled.error, r.error, rtol=1e-9)


def test_conventions_and_batches_give_the_same_localised_spectrum(rng):
    # internal consistency
    h = stationary_fields(rng, np.r_[0.0, 1.0 / np.arange(1, 31)], 3)
    base = local_power(h, -30.0, 10.0, 50.0, 5)
    for norm, cs in (("full", False), ("schmidt", True), ("unnormalized", False)):
        other = local_power(h.to(norm, cs), -30.0, 10.0, 50.0, 5)
        np.testing.assert_allclose(other.power, base.power, rtol=1e-11)
    one = local_power(Harmonics(h.coef[1]), -30.0, 10.0, 50.0, 5)
    np.testing.assert_allclose(one.power, base.power[1], rtol=1e-12)


def test_bad_input_is_refused_with_a_clear_message(rng):
    h = stationary_fields(rng, np.r_[0.0, np.ones(20)], 1)
    with pytest.raises(ValueError, match=r"cap_radius_deg must lie in \(0, 180\]"):
        cap_windows(0.0, 5)
    with pytest.raises(ValueError, match="lwin must be a non-negative integer"):
        cap_windows(10.0, 2.5)
    with pytest.raises(ValueError, match="exceeds the field's lmax"):
        local_power(h, 0.0, 0.0, 30.0, 25)
    with pytest.raises(ValueError, match="raise lwin or the cap radius"):
        local_power(h, 0.0, 0.0, 2.0, 3)
    with pytest.raises(ValueError, match="n_windows must be an integer from 1 to 16"):
        local_power(h, 0.0, 0.0, 30.0, 3, n_windows=17)
    with pytest.raises(ValueError, match=r"lat must lie in \[-90, 90\]"):
        local_power(h, 100.0, 0.0, 30.0, 3)
    with pytest.raises(ValueError, match="sphex.Harmonics"):
        local_admittance(h, np.zeros(3), 0.0, 0.0, 30.0, 3)
