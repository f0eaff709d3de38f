"""Checks of sphex.spectra: degree power (Parseval), cross power, correlation, slopes."""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from _reference import real_form_field
from sphex import Grid, Harmonics, analyze
from sphex.spectra import (
    coefficient_rms,
    correlation,
    cross_power,
    cumulative_power,
    degree_power,
    degree_rms,
    power_per_coefficient,
    spectral_slope,
)

NORMS = ("orthonormal", "full", "schmidt", "unnormalized")
PHASES = (True, False)


# ----------------------------------------------------------------- test fields
def polynomial_field(rng: np.random.Generator, degree: int):
    """A random polynomial F(x, y, z) of total degree <= `degree`, as f(lat, lon).

    Restricted to the unit sphere it is band-limited to `degree` (common practice:
    harmonic polynomials of degree <= n span the same space on the sphere).
    """
    terms = [(i, j, k) for i in range(degree + 1) for j in range(degree + 1)
             for k in range(degree + 1) if i + j + k <= degree]
    coef = rng.standard_normal(len(terms))

    def f(lat_deg, lon_deg):
        lat, lon = np.radians(lat_deg), np.radians(lon_deg)
        x, y, z = np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)
        return sum(c * x**i * y**j * z**k for c, (i, j, k) in zip(coef, terms))

    return f


def on_grid(f, grid: Grid) -> np.ndarray:
    return f(grid.lat[:, None], grid.lon[None, :])


def leggauss_mean(func, n: int = 24) -> float:
    """Area mean over the sphere by an independent product rule:
    numpy.polynomial.legendre.leggauss in sin(lat) times the trapezoid rule in longitude
    (exact for polynomials of degree < 2n in sin(lat) and trigonometric degree < nlon)."""
    x, w = np.polynomial.legendre.leggauss(n)
    lat = np.degrees(np.arcsin(x))[:, None]
    lon = np.linspace(0.0, 360.0, 2 * n + 1, endpoint=False)[None, :]
    vals = func(lat, lon)
    return float((w[:, None] * vals).sum() / (2.0 * vals.shape[1]))


# ------------------------------------------------------------------- Parseval
@pytest.mark.reference
@pytest.mark.parametrize("norm, cs", list(itertools.product(NORMS, PHASES)))
def test_parseval_against_leggauss(norm, cs):
    # the sum of the degree power is the area mean of f^2 (Parseval); the reference mean
    # comes from numpy.polynomial.legendre.leggauss quadrature of the explicit function
    f = polynomial_field(np.random.default_rng(11), 6)
    grid = Grid.gauss(8)
    h = analyze(on_grid(f, grid), grid, norm=norm, condon_shortley=cs)
    power = degree_power(h)
    assert power.shape == (9,)
    ref = leggauss_mean(lambda la, lo: f(la, lo) ** 2)
    assert abs(power.sum() - ref) <= 2e-15 * ref  # measured 1.6e-16 over the eight conventions
    assert np.all(power[7:] < 1e-24 * ref)  # band-limited to degree 6


def test_power_is_the_same_in_every_convention(rng):
    grid = Grid.gauss(10)
    f = on_grid(polynomial_field(rng, 9), grid)
    ref = degree_power(analyze(f, grid))
    for norm, cs in itertools.product(NORMS, PHASES):
        h = analyze(f, grid, norm=norm, condon_shortley=cs)
        np.testing.assert_allclose(degree_power(h), ref, rtol=1e-12, atol=1e-14 * ref.sum())
        np.testing.assert_allclose(degree_power(h.to("full", False)), ref, rtol=1e-12,
                                   atol=1e-14 * ref.sum())


@pytest.mark.reference
@pytest.mark.parametrize("l", [0, 1, 2, 5, 12])
def test_zonal_legendre_field(l):
    # f = P_l(sin lat): mean square 1/(2l+1) (Legendre orthogonality,
    # int_{-1}^{1} P_l^2 dx = 2/(2l+1); common practice), all of it at degree l
    grid = Grid.gauss(14)
    x = np.sin(np.radians(grid.lat))[:, None] + 0.0 * grid.lon[None, :]
    from numpy.polynomial import legendre as npleg
    f = npleg.legval(x, [0.0] * l + [1.0])  # numpy.polynomial.legendre
    p = degree_power(analyze(f, grid, norm="schmidt"))
    expected = np.zeros(15)
    expected[l] = 1.0 / (2 * l + 1)
    np.testing.assert_allclose(p, expected, rtol=0, atol=1e-14)


def test_batches_keep_leading_axes(rng):
    grid = Grid.gauss(7)
    fields = np.stack([[on_grid(polynomial_field(rng, 5), grid) for _ in range(3)]
                       for _ in range(2)])  # (2, 3, nlat, nlon)
    h = analyze(fields, grid)
    for fn in (degree_power, power_per_coefficient, degree_rms, coefficient_rms,
               cumulative_power):
        assert fn(h).shape == (2, 3, 8)
    p = degree_power(h)
    for i, j in itertools.product(range(2), range(3)):
        np.testing.assert_allclose(p[i, j], degree_power(analyze(fields[i, j], grid)),
                                   rtol=1e-13, atol=1e-16)
    assert cross_power(h, h).shape == (2, 3, 8)
    assert correlation(h, h).shape == (2, 3, 8)


@pytest.mark.reference
def test_derived_spectra_against_quadrature_of_each_degree():
    # A batch of two fields built outside sphex from random fully normalised real coefficients
    # C_lm, S_lm without the phase (geodesy's convention): the degree-l part f_l of each field is
    # summed with scipy.special (tests/_reference.real_form_field) on a product rule of
    # numpy.polynomial.legendre.leggauss in x times equally spaced longitudes (exact for these
    # band-limited squares). References: degree power = area mean of f_l^2, cumulative power =
    # area mean of (f_0 + ... + f_l)^2, power per coefficient = mean of the 2l+1 squares
    # C_l0^2, C_lm^2, S_lm^2 (fully normalised functions have mean square 1; common practice).
    lmax = 8
    rng = np.random.default_rng(12)
    tri = np.tril(np.ones((lmax + 1, lmax + 1), bool))
    C = np.where(tri, rng.standard_normal((2, lmax + 1, lmax + 1)), 0.0)
    S = np.where(tri, rng.standard_normal((2, lmax + 1, lmax + 1)), 0.0)
    S[..., 0] = 0.0
    h = Harmonics.from_cos_sin(C, S, norm="full", condon_shortley=False)
    x, w = np.polynomial.legendre.leggauss(lmax + 1)
    lon = np.linspace(0.0, 2 * np.pi, 2 * lmax + 2, endpoint=False)
    area_weight = w[:, None] / 2.0 / lon.size  # sums to 1: area means
    power = np.zeros((2, lmax + 1))
    cumulative = np.zeros((2, lmax + 1))
    for b in range(2):
        total = np.zeros((x.size, lon.size))
        for l in range(lmax + 1):
            only = np.zeros((lmax + 1, lmax + 1), bool)
            only[l] = True
            part = real_form_field(np.where(only, C[b], 0.0), np.where(only, S[b], 0.0), np.arccos(x), lon,
                                   "full", False)
            total += part
            power[b, l] = np.sum(area_weight * part**2)
            cumulative[b, l] = np.sum(area_weight * total**2)
    squares = C**2 + S**2
    l = np.arange(lmax + 1)
    per_coefficient = squares.sum(axis=-1) / (2 * l + 1)  # the mean of the 2l+1 squares
    # 1e-14 relative: rounding of sums of O(1) terms (measured 1.1e-15)
    np.testing.assert_allclose(degree_power(h), power, rtol=1e-14, atol=0)
    np.testing.assert_allclose(degree_power(h), squares.sum(axis=-1), rtol=1e-14, atol=0)
    np.testing.assert_allclose(degree_rms(h), np.sqrt(power), rtol=1e-14, atol=0)
    np.testing.assert_allclose(power_per_coefficient(h), per_coefficient, rtol=1e-14, atol=0)
    np.testing.assert_allclose(coefficient_rms(h), np.sqrt(per_coefficient), rtol=1e-14, atol=0)
    np.testing.assert_allclose(cumulative_power(h), cumulative, rtol=1e-14, atol=0)


# -------------------------------------------------------------- cross spectra
@pytest.mark.reference
def test_cross_power_against_leggauss_and_mixed_conventions():
    # sum of the cross power = area mean of f1 f2, the reference mean from
    # numpy.polynomial.legendre.leggauss quadrature of the explicit functions
    rng = np.random.default_rng(5)
    f1, f2 = polynomial_field(rng, 5), polynomial_field(rng, 6)
    grid = Grid.gauss(8)
    ref = leggauss_mean(lambda la, lo: f1(la, lo) * f2(la, lo))
    h1 = analyze(on_grid(f1, grid), grid)
    for norm, cs in itertools.product(NORMS, PHASES):
        h2 = analyze(on_grid(f2, grid), grid, norm=norm, condon_shortley=cs)
        x = cross_power(h1, h2)
        # 5e-15 of the mean square of f1 (measured 6.5e-16 over the eight conventions)
        assert abs(x.sum() - ref) <= 5e-15 * leggauss_mean(lambda la, lo: f1(la, lo) ** 2)
        np.testing.assert_allclose(cross_power(h2, h1), x, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(cross_power(h1, h1), degree_power(h1), rtol=1e-14)


def test_cross_power_uses_common_degrees(rng):
    grid = Grid.gauss(9)
    f = on_grid(polynomial_field(rng, 9), grid)
    h, ht = analyze(f, grid), analyze(f, grid, lmax=4)
    x = cross_power(h, ht)
    assert x.shape == (5,)
    np.testing.assert_allclose(x, degree_power(h)[:5], rtol=1e-12)


@pytest.mark.reference
def test_correlation_values(rng):
    grid = Grid.gauss(8)
    h = analyze(on_grid(polynomial_field(rng, 7), grid), grid)
    np.testing.assert_allclose(correlation(h, h)[:8], 1.0, atol=1e-14)
    np.testing.assert_allclose(correlation(h, -h)[:8], -1.0, atol=1e-14)
    np.testing.assert_allclose(correlation(h, 2.5 * h.to("schmidt", False))[:8], 1.0,
                               atol=1e-13)
    w = np.ones(9)
    w[8] = 0.0
    assert np.isnan(correlation(h.filter(w), h)[8])  # no power at degree 8: undefined, NaN
    # cos(m lon) and sin(m lon) parts of one (l, m) are orthogonal (common practice): correlation 0
    c = np.zeros((5, 5))
    s = np.zeros((5, 5))
    c[3, 2] = 1.0
    s[3, 2] = 1.0
    hc = Harmonics.from_cos_sin(c, np.zeros((5, 5)))
    hs = Harmonics.from_cos_sin(np.zeros((5, 5)), s)
    assert abs(correlation(hc, hs)[3]) < 1e-15
    # a known mixture: f2 = f1 + g with g orthogonal and of equal power -> 1/sqrt(2)
    # (correlation of orthogonal components; common practice)
    assert abs(correlation(hc, hc + hs)[3] - 1 / np.sqrt(2)) < 1e-14


# ------------------------------------------------------------------- slopes
@pytest.mark.reference
def test_spectral_slope_recovers_power_law():
    l = np.arange(200, dtype=float)
    p = np.zeros(200)
    p[1:] = 3.0 * l[1:] ** -2.5
    s, c = spectral_slope(p, 2, 150)
    assert abs(s + 2.5) < 1e-12 and abs(10**c - 3.0) < 1e-11
    batch = np.stack([p, np.r_[0.0, 7.0 * l[1:] ** -4.0]])
    s, c = spectral_slope(batch, 10, 199)
    np.testing.assert_allclose(s, [-2.5, -4.0], atol=1e-12)
    np.testing.assert_allclose(10**c, [3.0, 7.0], rtol=1e-11)
    # a spectrum with scatter: the least-squares line of numpy.polynomial.polynomial.polyfit
    # through (log10 l, log10 P) (an independent least-squares solver); 2e-13 (measured 1.8e-14)
    noisy = p * np.exp(np.random.default_rng(4).normal(0.0, 0.3, p.size))
    s, c = spectral_slope(noisy, 3, 180)
    c_ref, s_ref = np.polynomial.polynomial.polyfit(np.log10(l[3:181]), np.log10(noisy[3:181]), 1)
    assert abs(s - s_ref) < 2e-13 and abs(c - c_ref) < 2e-13


def test_spectral_slope_of_a_random_field_with_a_power_law():
    # coefficients drawn with variance l^-3 per coefficient: the fitted slope of the
    # power per coefficient is near -3 (sampling scatter only)
    rng = np.random.default_rng(3)
    lmax = 120
    l = np.arange(lmax + 1)
    c = rng.standard_normal((lmax + 1, lmax + 1)) * np.r_[0.0, l[1:] ** -1.5][:, None]
    s_ = rng.standard_normal((lmax + 1, lmax + 1)) * np.r_[0.0, l[1:] ** -1.5][:, None]
    tri = np.tril(np.ones((lmax + 1, lmax + 1), bool))
    s_[:, 0] = 0
    h = Harmonics.from_cos_sin(np.where(tri, c, 0), np.where(tri, s_, 0), norm="full")
    slope, _ = spectral_slope(power_per_coefficient(h), 10, lmax)
    assert abs(slope + 3.0) < 0.15


def test_spectral_slope_errors():
    p = np.ones(10)
    with pytest.raises(ValueError, match="lmin"):
        spectral_slope(p, 0, 5)
    with pytest.raises(ValueError, match="lmin"):
        spectral_slope(p, 5, 10)
    with pytest.raises(ValueError, match="lmin"):
        spectral_slope(p, 5, 5)
    q = p.copy()
    q[4] = 0.0
    with pytest.raises(ValueError, match="positive"):
        spectral_slope(q, 2, 8)


def test_non_harmonics_input_is_refused():
    with pytest.raises(ValueError, match="sphex.Harmonics"):
        degree_power(np.zeros((3, 3)))
    h = Harmonics(np.zeros((3, 3)))
    with pytest.raises(ValueError, match="h2"):
        cross_power(h, [1, 2])


# ----------------------------------------------------------------- isotropy table
def _isotropic_coefficients(rng: np.random.Generator, lmax: int, slope: float = -2.0) -> Harmonics:
    """A Gaussian isotropic random field: at each degree every real coefficient (cosine and
    sine, orthonormal) has the same variance (common practice: an isotropic field's spectrum
    is spread evenly over the 2l+1 coefficients of a degree)."""
    l = np.arange(lmax + 1)[:, None]
    scale = np.where(l > 0, np.maximum(l, 1.0) ** (slope / 2), 0.0)
    coef = (rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1)))
    coef = np.tril(coef) / np.sqrt(2.0) * scale
    coef[:, 0] = rng.standard_normal(lmax + 1) * scale[:, 0]        # m = 0: one real coefficient
    return Harmonics(coef)


def test_isotropy_table_of_an_isotropic_field_is_flat_above_degree_50(rng):
    from sphex.spectra import isotropy_table

    t = isotropy_table(_isotropic_coefficients(rng, 255))
    above = t.degree_last > 50
    assert above.sum() >= 40
    # each cell averages n real coefficients whose shares are chi-squared draws: its ratio has a
    # standard deviation of about sqrt(2/n) (common practice), well inside a factor 2 for n >= 100
    assert t.coefficients[above].min() >= 100
    assert np.all(np.abs(t.log2_ratio[above]) <= 1.0)
    assert np.abs(t.log2_ratio[above]).max() < 0.5          # measured 0.29 with this seed
    # the spread: a cell's share s of k of a degree's N coefficients is Beta(k/2, (N-k)/2)
    # (common practice for normalised chi-squared draws), so its ratio has a variance of
    # about (2/k)(1 - k/N): sqrt(7/8) = 0.94 of sqrt(2/n) with eight cells a row.  Measured
    # 0.72 with this seed (0.74 to 1.15 over seeds 0..19, 0.95 pooled).
    z = (t.ratio[above] - 1.0) / np.sqrt(2.0 / t.coefficients[above])
    assert 0.6 < z.std() < 1.3 and abs(z.mean()) < 0.4


def test_isotropy_table_of_single_harmonics_has_the_exact_ratios():
    from sphex.spectra import isotropy_table

    # a zonal degree-6 field: all of the degree's power in m = 0, whose isotropic share is 1/13
    c, s = np.zeros((9, 9)), np.zeros((9, 9))
    c[6, 0] = 2.0
    t = isotropy_table(Harmonics.from_cos_sin(c, s), fraction_bins=8)
    row = (t.degree_first <= 6) & (t.degree_last >= 6)
    zonal = t.find(6, 0)
    assert t.ratio[zonal] == pytest.approx(13.0, rel=1e-12)
    others = np.flatnonzero(row & (np.arange(t.ratio.size) != zonal))
    np.testing.assert_allclose(t.ratio[others], 0.0, atol=1e-15)
    # a sectoral degree-5 field (cosine and sine of order 5): isotropic share 2/11
    c, s = np.zeros((9, 9)), np.zeros((9, 9))
    c[5, 5], s[5, 5] = 1.0, -3.0
    t = isotropy_table(Harmonics.from_cos_sin(c, s))
    assert t.ratio[t.find(5, 5)] == pytest.approx(11.0 / 2.0, rel=1e-12)
    assert t.fraction_high[t.find(5, 5)] == 1.0 and t.find(5, 5) != t.find(5, 4)
    # one cell per order while a degree has fewer orders than cells: degree 3 has 4 cells
    assert np.count_nonzero((t.degree_first == 3) & (t.degree_last == 3)) == 4
    with pytest.raises(ValueError, match="no cell holds"):
        t.find(0, 0)


def test_isotropy_table_is_the_same_in_every_convention_and_pools_a_batch(rng):
    from sphex.spectra import isotropy_table

    h = _isotropic_coefficients(rng, 40)
    ref = isotropy_table(h)
    for norm, cs in itertools.product(NORMS, PHASES):
        t = isotropy_table(h.to(norm=norm, condon_shortley=cs))
        np.testing.assert_allclose(t.ratio, ref.ratio, rtol=1e-9)
    # shares add over a batch: two copies of a field give the same ratios from twice the counts
    twice = Harmonics(np.stack([h.coef, 3.0 * h.coef]))
    t2 = isotropy_table(twice)
    np.testing.assert_allclose(t2.ratio, ref.ratio, rtol=1e-12)
    np.testing.assert_array_equal(t2.coefficients, 2 * ref.coefficients)
    # every single-degree row shares out exactly its degree's power:
    # sum over its cells of ratio x isotropic share (counted coefficients / (2l+1)) is 1
    for l in (3, 4, 5):
        row = (t2.degree_first == l) & (t2.degree_last == l)
        assert np.sum(t2.ratio[row] * t2.coefficients[row] / 2 / (2 * l + 1)) == pytest.approx(1.0)


def test_isotropy_table_of_the_demo_topography_shows_its_tidal_figure():
    """The invented moon's degree-2 figure is C20 and C22 (flattened, elongated towards its
    planet); the basin and ridge add some degree-2 power in other orders."""
    from pathlib import Path

    import xarray as xr

    import sphex.xr as sxr
    from sphex.spectra import isotropy_table

    path = Path(__file__).resolve().parent.parent / "data_demo" / "velanthe_topography.nc"
    with xr.open_dataset(path) as f:
        h = sxr.to_harmonics(sxr.analyze(f["topography"].load()))
    t = isotropy_table(h)
    zonal, tesseral, sectoral = (t.log2_ratio[t.find(2, m)] for m in (0, 1, 2))
    assert zonal > 0.5 and sectoral > 0.25          # measured +0.72 and +0.36: above their share
    assert tesseral < -1.0                          # measured -1.33: m = 1 below half its share
    # the zonal and sectoral cells carry more than 80 % of degree 2's power (isotropic: 60 %)
    share = (t.ratio[t.find(2, 0)] * 1 + t.ratio[t.find(2, 2)] * 2) / 5
    assert share > 0.8
    # above degree 20 the ridge belt, a great circle tilted 35 degrees, puts its power into
    # orders up to about sin(35 deg) = 0.57 of the degree and little near sectoral
    high = t.degree_first >= 20
    near_sectoral = high & (t.fraction_low >= 0.75)
    middle = high & (t.fraction_low >= 0.375) & (t.fraction_high <= 0.625)
    assert t.log2_ratio[near_sectoral].mean() < -0.3 < 0.2 < t.log2_ratio[middle].mean()


def test_isotropy_table_errors():
    from sphex.spectra import isotropy_table

    h = Harmonics(np.ones((4, 4), dtype=complex))
    with pytest.raises(ValueError, match="degree_step"):
        isotropy_table(h, degree_step=1.0)
    with pytest.raises(ValueError, match="fraction_bins"):
        isotropy_table(h, fraction_bins=0)
    with pytest.raises(ValueError, match="degrees above 0"):
        isotropy_table(Harmonics(np.ones((1, 1), dtype=complex)))

@pytest.mark.reference
def test_correlation_significance_against_student_t_and_the_hat_box_theorem():
    # source: scipy.stats.t.ppf.  For a direction uniform on the sphere of n = 2l + 1
    # dimensions the cosine r with any fixed vector has r sqrt(n - 1) / sqrt(1 - r^2)
    # distributed as Student's t with n - 1 degrees of freedom (common practice: the first of
    # n normal numbers over the norm of the others), so the two-sided critical value is
    # r_c = t / sqrt(t^2 + n - 1) with t = t.ppf((1 + level) / 2, n - 1).  At l = 1 (n = 3) the
    # cosine is uniform on [-1, 1] (Archimedes' hat-box theorem, common practice): r_c = level.
    from scipy.stats import t as student_t

    from sphex.spectra import correlation_significance

    for level in (0.5, 0.9, 0.95, 0.99):
        r = correlation_significance(300, level=level)
        n = 2.0 * np.arange(301) + 1.0
        t = student_t.ppf((1.0 + level) / 2.0, n[1:] - 1.0)
        ref = t / np.sqrt(t * t + n[1:] - 1.0)
        # measured at most 2.1e-15 relative (two routes through the incomplete beta function)
        np.testing.assert_allclose(r[1:], ref, rtol=1e-13)
        assert abs(r[1] - level) < 1e-14
        assert np.isnan(r[0])


def test_correlation_significance_checks_its_arguments():
    from sphex.spectra import correlation_significance

    r = correlation_significance(3, level=0.99)
    assert np.isnan(r[0]) and np.all(np.diff(r[1:]) < 0) and np.all(r[1:] < 1)
    for bad in (dict(lmax=-1), dict(lmax=2.5), dict(lmax=3, level=1.0), dict(lmax=3, level=0)):
        with pytest.raises(ValueError):
            correlation_significance(**bad)
