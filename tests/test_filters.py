"""Checks of sphex.filters (per-degree filters, spectral operators) and of spectral regridding."""
from __future__ import annotations

import itertools
import math

import mpmath
import numpy as np
import pytest
from scipy import integrate, special

from sphex import Grid, Harmonics, analyze, regrid, synthesize
from sphex.filters import (
    band_pass,
    cap,
    continue_radially,
    convolve,
    gaussian,
    gradient,
    inverse_laplacian,
    laplacian,
    per_degree,
    taper,
    zonal_weights,
)

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")


# ----------------------------------------------------------------- test fields
def polynomial(rng: np.random.Generator, degree: int):
    """Random polynomial F(x, y, z) of total degree <= `degree` with its ambient gradient.

    On the unit sphere it is band-limited to `degree` (common practice), and its surface
    gradient is the tangential projection of grad F (common practice)."""
    terms = [(i, j, k) for i in range(degree + 1) for j in range(degree + 1)
             for k in range(degree + 1) if i + j + k <= degree]
    coef = rng.standard_normal(len(terms))

    def xyz(lat_deg, lon_deg):
        lat, lon = np.radians(lat_deg), np.radians(lon_deg)
        return np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat), lat, lon

    def mono(v, p):
        return v**p if p >= 0 else 0.0 * v

    def f(lat_deg, lon_deg):
        x, y, z, _, _ = xyz(lat_deg, lon_deg)
        return sum(c * x**i * y**j * z**k for c, (i, j, k) in zip(coef, terms))

    def grad(lat_deg, lon_deg):
        x, y, z, lat, lon = xyz(lat_deg, lon_deg)
        fx = sum(c * i * mono(x, i - 1) * y**j * z**k for c, (i, j, k) in zip(coef, terms))
        fy = sum(c * j * x**i * mono(y, j - 1) * z**k for c, (i, j, k) in zip(coef, terms))
        fz = sum(c * k * x**i * y**j * mono(z, k - 1) for c, (i, j, k) in zip(coef, terms))
        east = -np.sin(lon) * fx + np.cos(lon) * fy
        north = (-np.sin(lat) * np.cos(lon) * fx - np.sin(lat) * np.sin(lon) * fy
                 + np.cos(lat) * fz)
        return east, north

    return f, grad


def mesh(grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    return grid.lat[:, None] + 0.0 * grid.lon[None, :], 0.0 * grid.lat[:, None] + grid.lon[None, :]


def angular_distance(lat_deg, lon_deg, lat0_deg, lon0_deg):
    """Great-circle angle (radians) by the haversine formula (common practice)."""
    p, p0 = np.radians(lat_deg), math.radians(lat0_deg)
    dl = np.radians(lon_deg - lon0_deg)
    a = np.sin((p - p0) / 2) ** 2 + np.cos(p) * math.cos(p0) * np.sin(dl / 2) ** 2
    return 2.0 * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))


def b_of(radius_km: float, planet_km: float) -> float:
    return math.log(2.0) / (1.0 - math.cos(radius_km / planet_km))


# ----------------------------------------------------------- Gaussian weights
def quad_gaussian_weight(b: float, l: int) -> float:
    """Normalised Legendre coefficient of exp(-b(1-x)) by scipy.integrate.quad with
    scipy.special.eval_legendre; the integral is split where the kernel lives."""
    def kern(x):
        return math.exp(-b * (1.0 - x))

    cut = max(-1.0, 1.0 - 60.0 / b)
    num = den = 0.0
    for lo, hi in ((-1.0, cut), (cut, 1.0)):
        if hi > lo:
            num += integrate.quad(lambda x: kern(x) * special.eval_legendre(l, x), lo, hi,
                                  epsabs=1e-15, epsrel=1e-13, limit=400)[0]
            den += integrate.quad(kern, lo, hi, epsabs=1e-15, epsrel=1e-13, limit=400)[0]
    return num / den


@pytest.mark.reference
@pytest.mark.parametrize("radius_km, lmax", [(300.0, 200), (1000.0, 90), (3000.0, 40)])
def test_gaussian_against_quadrature(radius_km, lmax):
    # direct numerical integration of the kernel times P_l (scipy.integrate.quad,
    # scipy.special.eval_legendre). The quadrature sums an O(1) integrand whose integral is
    # small, so the reference itself carries ~4e-14 absolute (measured 3.9e-14 in the worst
    # weight, 1.6e-12 relative where the weight is 2e-2): bound 1e-11 relative plus 1e-13
    # absolute. The weights below that floor are checked relatively against the forward
    # recursion (700-digit mpmath), which reaches every degree (measured 1.3e-12 relative).
    w = gaussian(radius_km, lmax, 6371.0)
    b = b_of(radius_km, 6371.0)
    assert w[0] == 1.0 and w[-1] < 1e-10
    for l in list(range(0, 12)) + list(range(12, lmax + 1, 7)):
        ref = quad_gaussian_weight(b, l)
        assert abs(w[l] - ref) <= 1e-11 * abs(ref) + 1e-13, l
    ref = mp_gaussian_weights(b, lmax)
    assert np.all(ref > 0)
    np.testing.assert_allclose(w, ref, rtol=1e-11, atol=0)


@pytest.mark.reference
def test_gaussian_half_weight_at_radius():
    # the kernel exp(-b(1-cos psi)) built from the weights is 1/2 of its central value at
    # psi = r/R (definition, Jekeli 1981); summed Legendre series, numpy.polynomial.legendre
    r, big_r, lmax = 800.0, 6371.0, 160
    w = gaussian(r, lmax, big_r)
    series = (2 * np.arange(lmax + 1) + 1) * w
    k = np.polynomial.legendre.legval(np.cos([0.0, r / big_r]), series)
    assert abs(k[1] / k[0] - 0.5) < 1e-12


def mp_gaussian_weights(b: float, lmax: int, digits: int = 700) -> np.ndarray:
    """The classic forward recursion w_{l+1} = w_{l-1} - (2l+1)/b w_l (Jekeli 1981),
    carried in mpmath with `digits` decimals so its instability cannot reach the
    double-precision result; stops (zeros) once w < 1e-290."""
    out = np.zeros(lmax + 1)
    with mpmath.workdps(digits):
        bb = mpmath.mpf(b)
        prev, cur = mpmath.mpf(1), mpmath.coth(bb) - 1 / bb
        out[0] = 1.0
        for l in range(1, lmax + 1):
            if cur < mpmath.mpf("1e-290"):
                break
            out[l] = float(cur)
            prev, cur = cur, prev - (2 * l + 1) / bb * cur
    return out


@pytest.mark.reference
@pytest.mark.slow
@pytest.mark.parametrize("b", [0.35, 30.0, 2.0e3, 1.0e5, 1.0e7, 5.0e8, 3.0e9])
def test_gaussian_stable_to_degree_10800(b):
    # high degrees: against the recursion evaluated in 700-digit mpmath arithmetic;
    # relative accuracy wherever the weight is above 1e-290, beyond that 0
    lmax = 10800
    w, b_used = sphex_gaussian_from_b(b, lmax)
    ref = mp_gaussian_weights(b_used, lmax)
    live = ref > 0
    assert np.all(np.isfinite(w))
    rel = np.abs(w[live] - ref[live]) / ref[live]
    assert rel.max() < 1e-11
    assert np.all(w[~live] < 1e-280)


def sphex_gaussian_from_b(b: float, lmax: int) -> tuple[np.ndarray, float]:
    """gaussian() for a concentration near b, through its public arguments, and the
    concentration it then uses (ln 2 / (2 sin^2(r/2R)), rounded as in double precision;
    at high degree the weights are sensitive to the last bits of b)."""
    angle = 2.0 * math.asin(math.sqrt(math.log(2.0) / (2.0 * b)))
    r_km = angle * 1000.0
    used = r_km / 1000.0
    return gaussian(r_km, lmax, 1000.0), math.log(2.0) / (2.0 * math.sin(0.5 * used) ** 2)


@pytest.mark.reference
def test_gaussian_of_a_delta_reproduces_the_kernel():
    # delta at a grid node: its Gauss-grid analysis is exactly the truncated delta
    # sum_l (2l+1)/(4 pi) P_l(cos psi) (addition theorem, DLMF 14.30.9 from memory; common practice); filtering must give the
    # normalised kernel b exp(-b(1-cos psi)) / (2 pi (1 - exp(-2b))) (its area integral is 1 in closed
    # form; common practice)
    lmax = 95
    grid = Grid.gauss(lmax)
    j, k = 30, 17
    spike = np.zeros(grid.shape)
    spike[j, k] = 1.0 / (grid.weights[j] * 2.0 * np.pi / grid.nlon)
    h = analyze(spike, grid)
    radius_km, planet_km = 150.0, 1000.0
    b = b_of(radius_km, planet_km)
    smooth = synthesize(h.filter(gaussian(radius_km, lmax, planet_km)), grid)
    lat, lon = mesh(grid)
    psi = angular_distance(lat, lon, grid.lat[j], grid.lon[k])
    kernel = b * np.exp(-b * (1.0 - np.cos(psi))) / (2.0 * np.pi * -np.expm1(-2.0 * b))
    assert np.max(np.abs(smooth - kernel)) < 1e-12 * kernel.max()


# ---------------------------------------------------------------- cap weights
@pytest.mark.reference
@pytest.mark.parametrize("radius_deg, lmax", [(0.5, 600), (5.0, 300), (30.0, 100), (120.0, 40)])
def test_cap_against_quadrature(radius_deg, lmax):
    # (1/(1-x0)) int_{x0}^{1} P_l dx by scipy.integrate.quad with scipy.special.eval_legendre.
    # Relative 1e-9: for the 0.5-degree cap the interval is 4e-5 wide and the reference's
    # own error reaches 1.2e-10 relative (measured; the 40-digit mpmath check below puts sphex
    # at 6e-13), the larger caps are measured at 1e-11 to 1e-13
    w = cap(radius_deg, lmax)
    x0 = math.cos(math.radians(radius_deg))
    u = 2.0 * math.sin(math.radians(radius_deg) / 2) ** 2
    for l in list(range(0, 10)) + list(range(10, lmax + 1, 23)) + [lmax]:
        ref = integrate.quad(lambda x: special.eval_legendre(l, x), x0, 1.0,
                             epsabs=1e-14, epsrel=1e-12, limit=600)[0] / u
        assert abs(w[l] - ref) < 1e-9 * abs(ref), l


@pytest.mark.reference
@pytest.mark.parametrize("radius_deg", [0.05, 1.0, 20.0])
def test_cap_high_degree_against_mpmath(radius_deg):
    # (P_{l-1}(x0) - P_{l+1}(x0)) / ((2l+1)(1-x0)) with mpmath.legendre at 40 digits, to
    # degree 10800: the increment recursion does not suffer the cancellation of small caps.
    # Relative 4e-12: measured up to 6.2e-13 (a weight of 7.6e-6 at degree 2000, 20 degrees)
    w = cap(radius_deg, 10800)
    with mpmath.workdps(40):
        x0 = mpmath.cos(mpmath.radians(radius_deg))
        for l in (1, 5, 50, 500, 2000, 5400, 10800):
            diff = mpmath.legendre(l - 1, x0) - mpmath.legendre(l + 1, x0)
            ref = float(diff / ((2 * l + 1) * (1 - x0)))
            assert abs(w[l] - ref) < 4e-12 * abs(ref), l


@pytest.mark.reference
def test_cap_closed_forms():
    # w_1 = (1 + cos psi0)/2 (mean of P_1 = x over the cap, an elementary integral; common practice);
    # the whole sphere keeps the mean only
    assert abs(cap(10.0, 1)[1] - (1 + math.cos(math.radians(10.0))) / 2) < 1e-15
    np.testing.assert_allclose(cap(180.0, 30), np.r_[1.0, np.zeros(30)], atol=1e-14)


@pytest.mark.reference
def test_cap_average_on_the_grid():
    # the cap-filtered field at a point is the area mean of the field over the cap: for
    # a degree-1 field z = sin(lat) centred at the north pole this is (1 + cos psi0)/2
    # (the mean of z over the cap; common practice)
    grid = Grid.gauss(10)
    lat, _ = mesh(grid)
    z = np.sin(np.radians(lat))
    out = synthesize(analyze(z, grid).filter(cap(40.0, 10)), grid)
    np.testing.assert_allclose(out, z * (1 + math.cos(math.radians(40.0))) / 2, atol=1e-14)


# ---------------------------------------------------- taper, band, user weights
def raised_cosine(l: int, start: int, stop: int) -> float:
    """Half a cosine period from 1 at degree `start` down to 0 at `stop`, one degree at a time
    with math.cos (the raised-cosine roll-off; common practice)."""
    if l <= start:
        return 1.0
    if l >= stop:
        return 0.0
    return 0.5 * (1.0 + math.cos(math.pi * (l - start) / (stop - start)))


@pytest.mark.reference
def test_taper_and_band_pass_values():
    # against the raised-cosine roll-off written out degree by degree (common practice); the
    # band-pass rises as 1 - roll-off(l1, l2) and falls as roll-off(l3, l4); 2e-16 absolute:
    # weights of size <= 1 from one cosine each (measured 1.1e-16)
    w = taper(10, 20, lmax=30)
    assert w.shape == (31,)
    np.testing.assert_allclose(w, [raised_cosine(l, 10, 20) for l in range(31)], rtol=0, atol=2e-16)
    np.testing.assert_array_equal(w[:11], 1.0)
    np.testing.assert_array_equal(w[20:], 0.0)
    assert abs(w[15] - 0.5) < 1e-15
    assert taper(3, 7).shape == (8,)
    bp = band_pass(2, 6, 10, 14, lmax=20)
    expected = [(1.0 - raised_cosine(l, 2, 6)) * raised_cosine(l, 10, 14) for l in range(21)]
    np.testing.assert_allclose(bp, expected, rtol=0, atol=2e-16)
    np.testing.assert_array_equal(bp[:3], 0.0)
    np.testing.assert_array_equal(bp[6:11], 1.0)
    np.testing.assert_array_equal(bp[14:], 0.0)
    # a band that is flat at one degree only (l2 = l3 = 5)
    np.testing.assert_allclose(band_pass(3, 5, 5, 7), [0, 0, 0, 0, 0.5, 1, 0.5, 0], rtol=0, atol=2e-16)


def test_band_pass_keeps_only_its_band(rng):
    grid = Grid.gauss(20)
    f, _ = polynomial(rng, 20)
    lat, lon = mesh(grid)
    h = analyze(f(lat, lon), grid)
    out = h.filter(band_pass(3, 5, 8, 10, lmax=20))
    from sphex.spectra import degree_power
    p, p0 = degree_power(out), degree_power(h)
    assert np.all(p[:4] == 0) and np.all(p[10:] == 0)
    np.testing.assert_allclose(p[5:9], p0[5:9], rtol=1e-14)


def test_per_degree_weights():
    np.testing.assert_array_equal(per_degree([1, 0.5, 0.25, 0.1], 2), [1, 0.5, 0.25])
    np.testing.assert_allclose(per_degree(lambda l: np.exp(-l), 3), np.exp(-np.arange(4)))
    with pytest.raises(ValueError, match="needed"):
        per_degree([1.0, 2.0], 5)
    with pytest.raises(ValueError, match="finite"):
        per_degree([1.0, np.nan, 2.0], 2)
    with pytest.raises(ValueError, match="one value per degree"):
        per_degree(lambda l: 1.0, 3)


def test_filter_argument_errors():
    for call, word in [(lambda: gaussian(-1.0, 10, 6371.0), "radius_km"),
                       (lambda: gaussian(30000.0, 10, 6371.0), "half the circumference"),
                       (lambda: gaussian(100.0, -1, 6371.0), "lmax"),
                       (lambda: cap(200.0, 5), "180"),
                       (lambda: cap(0.0, 5), "radius_deg"),
                       (lambda: taper(5, 5), "l1 < l2"),
                       (lambda: band_pass(1, 5, 4, 8), "l1 < l2 <= l3 < l4")]:
        with pytest.raises(ValueError, match=word):
            call()


# ------------------------------------------------- convolution with a kernel
@pytest.mark.reference
def test_zonal_weights_funk_hecke_known_values():
    # k(psi) = P_n(cos psi): eigenvalue 4 pi/(2n+1) at l = n, 0 elsewhere
    # (Funk-Hecke theorem with Legendre orthogonality; common practice)
    for n in (0, 1, 4, 9):
        lam = zonal_weights(lambda psi: special.eval_legendre(n, np.cos(psi)), 12,
                            normalize=False)
        expected = np.zeros(13)
        expected[n] = 4 * np.pi / (2 * n + 1)
        np.testing.assert_allclose(lam, expected, atol=1e-13)


@pytest.mark.reference
def test_zonal_weights_of_gaussian_kernel_match_gaussian_filter():
    # the Legendre coefficients of the Gaussian kernel by Gauss-Legendre quadrature against the
    # Jekeli recursion carried in 700-digit mpmath (mp_gaussian_weights). The quadrature sums
    # O(1) terms, so its error is absolute, ~1e-14 whatever the size of the weight
    # (measured 1.0e-14; the true weights fall to 7e-22 here): bound 3e-14 absolute
    b = b_of(500.0, 6371.0)
    lam = zonal_weights(lambda psi: np.exp(-b * (1 - np.cos(psi))), 150)
    np.testing.assert_allclose(lam, mp_gaussian_weights(b, 150), rtol=0, atol=3e-14)
    # internal consistency: the same weights as the Bessel-function route of gaussian()
    np.testing.assert_allclose(lam, gaussian(500.0, 150, 6371.0), rtol=0, atol=3e-14)


@pytest.mark.reference
def test_convolution_against_direct_quadrature(rng):
    # (k * f)(p) = integral of k(psi(p, q)) f(q) dOmega_q, done directly with a product rule
    # independent of sphex: numpy.polynomial.legendre.leggauss (61 nodes) in sin(lat) times
    # 122 equally spaced longitudes (exact for the band-limited integrand up to the kernel's
    # tail, which is far below rounding at degree 60)
    f, _ = polynomial(rng, 6)
    kernel = lambda psi: (1 + np.cos(psi)) ** 3 * np.exp(np.cos(psi))  # noqa: E731
    coarse = Grid.gauss(6)
    lat, lon = mesh(coarse)
    out = synthesize(convolve(analyze(f(lat, lon), coarse), kernel, normalize=False), coarse)
    z, wz = np.polynomial.legendre.leggauss(61)
    nlon = 122
    flat = np.degrees(np.arcsin(z))[:, None] + np.zeros(nlon)
    flon = np.zeros_like(z)[:, None] + 360.0 * np.arange(nlon) / nlon
    fv = f(flat, flon)
    area = wz[:, None] * (2 * np.pi / nlon) + 0.0 * flon
    for j, k in [(0, 0), (2, 5), (5, 11), (6, 3)]:
        psi = angular_distance(flat, flon, coarse.lat[j], coarse.lon[k])
        direct = np.sum(area * kernel(psi) * fv)
        assert abs(out[j, k] - direct) < 1e-12 * np.sum(area * np.abs(kernel(psi) * fv))


def test_zonal_weights_errors():
    with pytest.raises(ValueError, match="elementwise"):
        zonal_weights(lambda psi: 1.0, 5)
    with pytest.raises(ValueError, match="normalize=False"):
        zonal_weights(lambda psi: np.cos(psi), 5)


# -------------------------------------------------------------------- Laplacian
@pytest.mark.reference
@pytest.mark.parametrize("norm", NORMS)
def test_laplacian_eigenvalue(norm, rng):
    # Y_lm are eigenfunctions of the surface Laplacian with eigenvalue -l(l+1)
    # (the L^2 eigenvalue; common practice)
    lmax = 12
    coef = np.zeros((lmax + 1, lmax + 1), complex)
    for l, m in [(0, 0), (1, 0), (3, 2), (7, 7), (12, 5)]:
        coef[l, m] = rng.standard_normal() + (1j * rng.standard_normal() if m else 0)
    h = Harmonics(coef, norm=norm)
    out = laplacian(h)
    l = np.arange(lmax + 1)[:, None]
    np.testing.assert_allclose(out.coef, -l * (l + 1) * coef, rtol=1e-15, atol=0)
    hr = Harmonics(coef, norm=norm, radius=2.0e6, units="m")
    outr = laplacian(hr)
    np.testing.assert_allclose(outr.coef, -l * (l + 1) * coef / 4.0e12, rtol=1e-15, atol=0)
    assert outr.units == "m m-2" and outr.radius == 2.0e6


@pytest.mark.reference
def test_laplacian_against_finite_differences(rng):
    # second-order central differences of the explicit field on a fine (0.375 deg)
    # cell-centred grid, in the spherical form of the Laplacian
    # (1/sin t) d/dt (sin t df/dt) + (1/sin^2 t) d2f/dphi2 (common practice)
    f, _ = polynomial(rng, 5)
    fine = Grid.equiangular(480, 960, "cells")
    lat, lon = mesh(fine)
    vals = f(lat, lon)
    gauss = Grid.gauss(5)
    glat, glon = mesh(gauss)
    lap = synthesize(laplacian(analyze(f(glat, glon), gauss)), fine)
    d = math.radians(0.375)
    t = np.radians(90.0 - fine.lat)[:, None]
    ftt = (vals[2:] - 2 * vals[1:-1] + vals[:-2]) / d**2
    ft = (vals[2:] - vals[:-2]) / (2 * d)  # rows run north -> south: colatitude increases
    fpp = (np.roll(vals, -1, axis=1) - 2 * vals + np.roll(vals, 1, axis=1))[1:-1] / d**2
    tt = t[1:-1]
    fd = ftt + np.cos(tt) / np.sin(tt) * ft + fpp / np.sin(tt) ** 2
    keep = np.abs(fine.lat[1:-1]) < 80.0
    err = np.max(np.abs(fd[keep] - lap[1:-1][keep])) / np.max(np.abs(lap))
    assert err < 2e-4  # measured 5.7e-5: the O(d^2) truncation error of the differences


def test_inverse_laplacian_undoes_laplacian(rng):
    grid = Grid.gauss(16)
    f, _ = polynomial(rng, 16)
    lat, lon = mesh(grid)
    for radius in (None, 3.4e6):
        h = analyze(f(lat, lon), grid, norm="full", radius=radius, units="K")
        back = inverse_laplacian(laplacian(h))
        expected = h.coef.copy()
        expected[0, 0] = 0.0  # the l = 0 term is set to zero
        np.testing.assert_allclose(back.coef, expected, rtol=1e-13, atol=1e-15)
        fwd = laplacian(inverse_laplacian(h))
        np.testing.assert_allclose(fwd.coef, expected, rtol=1e-13, atol=1e-15)
        if radius is not None:
            assert inverse_laplacian(h).units == "K m2"


@pytest.mark.reference
def test_poisson_solution_of_a_known_field():
    # u = z^2 = (2 P_2(z) + 1)/3 has Laplacian 6 * (-2/3 P_2 ... ) = 2 - 6 z^2; the
    # inverse Laplacian of f = 2 - 6 z^2 is z^2 - 1/3 (zero mean; common practice)
    grid = Grid.gauss(6)
    lat, _ = mesh(grid)
    z = np.sin(np.radians(lat))
    u = synthesize(inverse_laplacian(analyze(2 - 6 * z**2, grid)), grid)
    np.testing.assert_allclose(u, z**2 - 1 / 3, atol=1e-14)


# --------------------------------------------------------------------- gradient
@pytest.mark.reference
def test_gradient_of_cos_lat_cos_lon():
    # f = cos(lat) cos(lon): east = -sin(lon), north = -sin(lat) cos(lon) (elementary calculus; common practice)
    for grid in (Grid.gauss(8), Grid.equiangular(18, 36, "poles"),
                 Grid.equiangular(18, 36, "cells"), Grid.equiangular(18, 36, "north")):
        lat, lon = mesh(grid)
        la, lo = np.radians(lat), np.radians(lon)
        east, north = gradient(analyze(np.cos(la) * np.cos(lo), grid), grid)
        np.testing.assert_allclose(east, -np.sin(lo), atol=1e-13)
        np.testing.assert_allclose(north, -np.sin(la) * np.cos(lo), atol=1e-13)


@pytest.mark.reference
@pytest.mark.parametrize("norm, cs", [("orthonormal", True), ("full", False), ("schmidt", True),
                                      ("unnormalized", False)])
def test_gradient_of_a_polynomial_field(norm, cs):
    # the surface gradient is the tangential projection of the ambient gradient of the
    # polynomial (common practice), evaluated on the same grid; with a radius, / R
    f, grad = polynomial(np.random.default_rng(8), 7)
    grid = Grid.gauss(9)
    lat, lon = mesh(grid)
    e_ref, n_ref = grad(lat, lon)
    scale = max(np.abs(e_ref).max(), np.abs(n_ref).max())
    h = analyze(f(lat, lon), grid, norm=norm, condon_shortley=cs)
    east, north = gradient(h, grid)
    assert np.max(np.abs(east - e_ref)) < 1e-12 * scale
    assert np.max(np.abs(north - n_ref)) < 1e-12 * scale
    east_r, north_r = gradient(h.replace(radius=2.5e5), grid)
    np.testing.assert_allclose(east_r, east / 2.5e5, rtol=1e-15, atol=0)
    np.testing.assert_allclose(north_r, north / 2.5e5, rtol=1e-15, atol=0)


def test_gradient_batch_shape(rng):
    grid = Grid.gauss(6)
    lat, lon = mesh(grid)
    fields = np.stack([polynomial(rng, 4)[0](lat, lon) for _ in range(3)])
    east, north = gradient(analyze(fields, grid), grid)
    assert east.shape == north.shape == (3,) + grid.shape
    e1, n1 = gradient(analyze(fields[1], grid), grid)
    np.testing.assert_allclose(east[1], e1, rtol=1e-13, atol=1e-14)
    np.testing.assert_allclose(north[1], n1, rtol=1e-13, atol=1e-14)


@pytest.mark.reference
@pytest.mark.parametrize("l, m", [(1, 1), (4, 2), (9, 5), (10, 10)])
def test_longitude_derivative_is_m_times_quadrature_partner(l, m):
    # d/dlon of Lambda_lm cos(m lon) is -m Lambda_lm sin(m lon), and of the sine part
    # m times the cosine part (the L_z eigenvalue m; common practice); cos(lat) * east
    # is d/dlon
    lmax = 10
    grid = Grid.gauss(lmax)
    lat, _ = mesh(grid)
    coslat = np.cos(np.radians(lat))
    one = np.zeros((lmax + 1, lmax + 1))
    one[l, m] = 1.0
    zero = np.zeros_like(one)
    hc = Harmonics.from_cos_sin(one, zero, norm="schmidt")
    hs = Harmonics.from_cos_sin(zero, one, norm="schmidt")
    fc, fs = synthesize(hc, grid), synthesize(hs, grid)
    ec, _ = gradient(hc, grid)
    es, _ = gradient(hs, grid)
    scale = np.abs(fc).max() * m
    assert np.max(np.abs(coslat * ec + m * fs)) < 1e-13 * scale
    assert np.max(np.abs(coslat * es - m * fc)) < 1e-13 * scale


# ---------------------------------------------------------- radial continuation
@pytest.mark.reference
def test_continue_radially_point_mass():
    # potential of a unit point mass at s, |s| = 0.3 R: 1/|x - s| is harmonic outside
    # |s| and its expansion on r = R continues as (R/r)^(l+1) (Legendre generating
    # function / exterior Laplace solution; common practice); check at r = 1.5 R
    big_r = 1.7e6
    s = 0.3 * big_r * np.array([math.cos(0.4) * math.cos(1.1), math.cos(0.4) * math.sin(1.1),
                                math.sin(0.4)])
    grid = Grid.gauss(47)
    lat, lon = mesh(grid)
    la, lo = np.radians(lat), np.radians(lon)
    unit = np.stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)], axis=-1)

    def potential(r):
        return 1.0 / np.linalg.norm(r * unit - s, axis=-1)

    h = analyze(potential(big_r), grid, radius=big_r)
    up = continue_radially(h, 1.5 * big_r)
    assert up.radius == 1.5 * big_r
    ref = potential(1.5 * big_r)
    assert np.max(np.abs(synthesize(up, grid) - ref)) < 1e-13 * ref.max()
    # without a radius, r is the ratio to the reference radius
    h1 = h.replace(radius=None)
    up1 = continue_radially(h1, 1.5)
    assert up1.radius is None
    np.testing.assert_allclose(up1.coef, up.coef, rtol=1e-15, atol=0)
    # downward to 0.8 R (still outside |s|) is the inverse; it amplifies the rounding
    # of degree 47 by 1.25**48 ~ 4e4, hence the looser bound
    down = continue_radially(h, 0.8 * big_r)
    ref_d = potential(0.8 * big_r)
    assert np.max(np.abs(synthesize(down, grid) - ref_d)) < 2e-10 * ref_d.max()


def test_continue_radially_errors():
    coef = np.zeros((1101, 1101), complex)
    coef[:, 0] = 1.0
    h = Harmonics(coef, radius=1.0)  # 2**1101 overflows double
    with pytest.raises(ValueError, match="positive"):
        continue_radially(h, -2.0)
    with pytest.raises(ValueError, match="overflows"):
        continue_radially(h, 0.5)


# ------------------------------------------------------------- spectral regridding
def regrid_grids(size: int):
    """One grid of each kind able to hold degree `size` exactly."""
    return [Grid.gauss(size), Grid.equiangular(2 * size + 2, 2 * size + 4, "poles"),
            Grid.equiangular(2 * size + 2, 2 * size + 2, "cells"),
            Grid.equiangular(2 * size + 2, 2 * size + 2, "north")]


@pytest.mark.reference
@pytest.mark.parametrize("i, j", list(itertools.product(range(4), range(4))))
def test_regrid_all_pairs_of_grid_kinds(i, j):
    # a field band-limited to degree 8 (explicit polynomial, evaluated at the target
    # nodes directly) is reproduced to 1e-11 between every pair of grid kinds
    f, _ = polynomial(np.random.default_rng(100 + 4 * i + j), 8)
    source, target = regrid_grids(9)[i], regrid_grids(13)[j]
    slat, slon = mesh(source)
    tlat, tlon = mesh(target)
    out = regrid(f(slat, slon), source, target)
    ref = f(tlat, tlon)
    assert out.shape == target.shape
    assert np.max(np.abs(out - ref)) < 1e-11 * np.max(np.abs(ref))
    back = regrid(out, target, source)
    assert np.max(np.abs(back - f(slat, slon))) < 1e-11 * np.max(np.abs(ref))


@pytest.mark.reference
def test_regrid_shifted_longitudes_and_batch():
    # from_coords grids with a shifted longitude origin and south-to-north rows
    f, _ = polynomial(np.random.default_rng(7), 6)
    src = Grid.gauss(8)
    lon = np.arange(-180.0, 180.0, 10.0)
    lat = 90.0 - 180.0 * (np.arange(18) + 0.5) / 18
    target = Grid.from_coords(lat[::-1], lon)
    slat, slon = mesh(src)
    tlat, tlon = mesh(target)
    vals = np.stack([f(slat, slon), 2 * f(slat, slon)])
    out = regrid(vals, src, target)
    ref = f(tlat, tlon)
    assert out.shape == (2,) + target.shape
    assert np.max(np.abs(out[0] - ref)) < 1e-11 * np.max(np.abs(ref))
    assert np.max(np.abs(out[1] - 2 * ref)) < 2e-11 * np.max(np.abs(ref))


@pytest.mark.reference
def test_regrid_with_lmax_drops_higher_degrees():
    # f (degree <= 4) plus the zonal P_7(sin lat) (numpy.polynomial.legendre), which is
    # orthogonal to every degree below 7 (common practice): regridding with lmax=5 keeps f
    f, _ = polynomial(np.random.default_rng(21), 4)
    source, target = Grid.equiangular(24, 24, "north"), Grid.gauss(9, nlon=25)
    slat, slon = mesh(source)
    tlat, tlon = mesh(target)
    p7 = np.polynomial.legendre.legval(np.sin(np.radians(slat)), [0.0] * 7 + [1.0])
    out = regrid(f(slat, slon) + p7, source, target, lmax=5)
    ref = f(tlat, tlon)
    assert np.max(np.abs(out - ref)) < 1e-12 * np.max(np.abs(ref))
