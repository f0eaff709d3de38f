"""Checks of sphex.transform: analysis, synthesis, gradients, regridding, input handling, errors."""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sps

from _reference import (
    NORMS,
    complex_form_field,
    gauss_nodes_weights,
    mp_ortho_column,
    norm_factor_array,
    random_coef,
)
from sphex import Grid, Harmonics, analyze, regrid, synthesize
from sphex.transform import synthesize_gradient

LAYOUTS = ("poles", "cells", "north")


def rel_err(a: np.ndarray, b: np.ndarray) -> float:
    """max |a - b| / max |b|."""
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(b)))


def mesh(grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Colatitude and true longitude (radians) on the grid, (nlat, 1) and (1, nlon)."""
    return grid.colat[:, None], np.radians(grid.lon)[None, :]


# --------------------------------------------------------------------------------------
# Round trips
# --------------------------------------------------------------------------------------
@pytest.mark.slow
def test_round_trip_gauss_high_degree(rng):
    # synthesis then analysis returns band-limited coefficients: Gauss-Legendre quadrature
    # with lmax+1 nodes is exact to degree 2 lmax + 1 (published method's stated property)
    lmax = 1023
    grid = Grid.gauss(lmax)
    coef = random_coef(lmax, rng)
    f = synthesize(Harmonics(coef), grid)
    assert f.shape == grid.shape and f.dtype == np.float64
    h = analyze(f, grid)
    assert h.lmax == lmax and h.norm == "orthonormal" and h.condon_shortley is True
    err = rel_err(h.coef, coef)
    print(f"Gauss round trip lmax={lmax}: {err:.2e}")
    assert err <= 1e-12, err  # measured 3.2e-13


@pytest.mark.parametrize("layout,lmax,nlat", [
    ("poles", 255, 512), ("cells", 255, 512), ("north", 255, 512),
    ("poles", 64, 129), ("cells", 64, 129), ("north", 64, 129),
])
def test_round_trip_equiangular_at_lmax_exact(rng, layout, lmax, nlat):
    # Clenshaw-Curtis / Fejer / Driscoll-Healy quadrature on nlat rows is exact to
    # degree 2 floor((nlat-1)/2) in cos(colat) (published methods' stated property)
    grid = Grid.equiangular(nlat, 2 * lmax + 2, layout)
    assert grid.lmax_exact == lmax
    coef = random_coef(lmax, rng)
    h = analyze(synthesize(Harmonics(coef), grid), grid)
    err = rel_err(h.coef, coef)
    print(f"{layout} nlat={nlat} round trip lmax={lmax}: {err:.2e}")
    assert err <= 5e-13, err  # measured 7.8e-14 at lmax 255, 1.1e-14 at lmax 64


@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_round_trip_every_convention(rng, norm, condon_shortley):
    lmax = 20
    grid = Grid.equiangular(2 * lmax + 2, 2 * lmax + 2, "north")
    # coefficients of O(1) terms in every convention: a_lm = b_lm / F_lm with F the
    # size of Lambda_lm relative to the orthonormal one; compared on that scale
    scale = norm_factor_array(lmax, norm)
    coef = random_coef(lmax, rng) / scale
    h = Harmonics(coef, norm=norm, condon_shortley=condon_shortley)
    back = analyze(synthesize(h, grid), grid, norm=norm, condon_shortley=condon_shortley)
    assert back.norm == norm and back.condon_shortley == condon_shortley
    assert rel_err(back.coef * scale, coef * scale) < 2e-14  # measured 2.2e-15


# --------------------------------------------------------------------------------------
# Against fields built outside sphex
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_synthesis_matches_scipy_sum(rng, norm, condon_shortley):
    # source: direct sum of a_lm Lambda_lm e^{i m phi} with scipy.special.sph_legendre_p /
    # assoc_legendre_p (tests/_reference.complex_form_field), on a grid whose
    # longitudes start at -180 + half a cell (true longitudes used in the reference)
    lmax = 12
    lat, _ = gauss_nodes_weights(lmax + 1)
    nlon = 2 * lmax + 3
    lon = -180.0 + 180.0 / nlon + 360.0 / nlon * np.arange(nlon)
    grid = Grid.from_coords(np.degrees(np.arcsin(lat)), lon)
    coef = random_coef(lmax, rng)
    f = synthesize(Harmonics(coef, norm=norm, condon_shortley=condon_shortley), grid)
    ref = complex_form_field(coef, grid.colat, np.radians(grid.lon), norm, condon_shortley)
    assert rel_err(f, ref) < 1e-13  # measured up to 9.8e-15 (unnormalized, no phase)


@pytest.mark.reference
@pytest.mark.slow
def test_synthesis_of_high_degree_terms_against_mpmath():
    # source: mpmath 45-digit recursion (tests/_reference.mp_ortho_column) for Lambda_lm at
    # a few rows of a Gauss grid; a single term a_lm = 1 synthesises to
    # 2 Re(Lambda_lm e^{i m phi}) (m > 0) or Lambda_l0 (m = 0), Condon-Shortley phase (-1)^m.
    # (scipy.special.sph_legendre_p returns nan at degree 1000, so mpmath it is.)
    lmax = 1023
    grid = Grid.gauss(lmax)
    rows = [0, 3, 200, 511, 800, 1023]
    phi = np.radians(grid.lon)
    k = np.arange(grid.nlon)
    for l, m in [(1000, 0), (1000, 500), (1000, 990), (1023, 1)]:
        coef = np.zeros((lmax + 1, lmax + 1), complex)
        coef[l, m] = 0.6 - 0.8j if m else 1.0
        f = synthesize(Harmonics(coef), grid)
        lam = np.array([float(mp_ortho_column(m, l, grid.colat[j])[-1]) for j in rows]) * (-1.0) ** m
        if m == 0:
            ref = lam[:, None] * np.ones_like(phi)[None, :]
        else:
            # m phi reduced exactly (lon[0] = 0, integer arithmetic): exp(1j*m*phi) with m*phi ~ 6e3
            # would carry ~1e-12 of rounding itself
            angle = 2 * np.pi * ((m * k) % grid.nlon) / grid.nlon
            ref = 2 * np.real(lam[:, None] * coef[l, m] * np.exp(1j * angle)[None, :])
        size = np.max(np.abs(lam))
        err = np.max(np.abs(f[rows] - ref), axis=1) / size
        print(f"synthesis of a_({l},{m}) against mpmath, per row {rows}: {err}")
        # rows 0, 3, 1023 lie within 0.01 rad of a pole, where the recursion in degree carries
        # ~l^2 eps (see test_legendre.NEAR_POLE_CASES): 1e-10 there, 1e-12 elsewhere
        assert np.all(err[[0, 1, 5]] < 1e-10), (l, m, err)
        assert np.all(err[[2, 3, 4]] < 1e-12), (l, m, err)


@pytest.mark.reference
@pytest.mark.parametrize("kind", ["gauss", "poles", "cells", "north"])
def test_analysis_of_scipy_harmonics(kind):
    # source: scipy.special.sph_harm_y (orthonormal, Condon-Shortley phase).
    # Re Y_lm = (Y_lm + conj Y_lm)/2 -> a_lm = 1/2 (m > 0), 1 (m = 0);
    # Im Y_lm -> a_lm = -i/2; everything else zero.
    lmax = 16
    grid = Grid.gauss(lmax) if kind == "gauss" else Grid.equiangular(2 * lmax + 2, 2 * lmax + 2, kind)
    th, ph = mesh(grid)
    for l, m in [(0, 0), (1, 0), (1, 1), (5, 2), (9, 9), (16, 7), (16, 16)]:
        y = sps.sph_harm_y(l, m, th, np.mod(ph, 2 * np.pi))
        for part, value in [(np.real, 1.0 if m == 0 else 0.5), (np.imag, -0.5j)]:
            if m == 0 and part is np.imag:
                continue
            h = analyze(part(y), grid)
            expected = np.zeros((lmax + 1, lmax + 1), complex)
            expected[l, m] = value
            # 5e-15 absolute on coefficients of size <= 1 (measured 9.6e-16 over all cases)
            np.testing.assert_allclose(h.coef, expected, rtol=0, atol=5e-15)
            # without the phase the same field has a_lm multiplied by (-1)^m
            h2 = analyze(part(y), grid, condon_shortley=False)
            np.testing.assert_allclose(h2.coef[l, m], (-1) ** m * value, rtol=0, atol=5e-15)


@pytest.mark.reference
def test_analysis_of_cos_colat():
    # cos(theta) = sqrt(4 pi / 3) Y_10 (common practice)
    grid = Grid.equiangular(33, 64, "poles")
    th, ph = mesh(grid)
    h = analyze(np.cos(th) + 0 * ph, grid)
    expected = np.zeros((h.lmax + 1, h.lmax + 1), complex)
    expected[1, 0] = math.sqrt(4 * math.pi / 3)
    np.testing.assert_allclose(h.coef, expected, rtol=0, atol=1e-13)
    # full normalisation: cos(theta) = (1/sqrt(3)) * sqrt(3) cos(theta) -> a_10 = 1/sqrt(3)
    h4 = analyze(np.cos(th) + 0 * ph, grid, norm="full")
    assert abs(h4.coef[1, 0] - 1 / math.sqrt(3)) < 1e-14
    # unnormalized: cos(theta) = P_1(cos theta) -> a_10 = 1
    assert abs(analyze(np.cos(th) + 0 * ph, grid, norm="unnormalized").coef[1, 0] - 1.0) < 1e-14


@pytest.mark.reference
def test_constant_field():
    # 1 = sqrt(4 pi) Y_00 (common practice)
    grid = Grid.gauss(31)
    h = analyze(np.ones(grid.shape), grid)
    assert abs(h.coef[0, 0] - math.sqrt(4 * math.pi)) < 1e-13
    assert np.max(np.abs(h.coef[1:])) < 1e-13


# --------------------------------------------------------------------------------------
# Longitude origin other than 0
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("start", [-180.0, 7.5, -172.5])
def test_longitude_origin_respected(start):
    # Y_11 (orthonormal, Condon-Shortley) = -sqrt(3/(8 pi)) sin(theta) e^{i phi} (common practice), so
    # sin(theta) cos(phi) -> a_11 = -sqrt(2 pi / 3); sin(theta) sin(phi) -> a_11 = i sqrt(2 pi / 3),
    # phi being the true longitude whatever the grid's first longitude
    lmax = 10
    lat = Grid.gauss(lmax).lat
    lon = start + 15.0 * np.arange(24)
    grid = Grid.from_coords(lat, lon)
    th, ph = mesh(grid)
    a = math.sqrt(2 * math.pi / 3)
    hc = analyze(np.sin(th) * np.cos(ph), grid)
    hs = analyze(np.sin(th) * np.sin(ph), grid)
    assert abs(hc.coef[1, 1] - (-a)) < 1e-14
    assert abs(hs.coef[1, 1] - 1j * a) < 1e-14
    rest = hc.coef.copy()
    rest[1, 1] = 0
    assert np.max(np.abs(rest)) < 1e-14
    # and synthesis of that coefficient gives the analytic field at the true longitudes
    coef = np.zeros((lmax + 1, lmax + 1), complex)
    coef[1, 1] = -a
    np.testing.assert_allclose(synthesize(Harmonics(coef), grid), np.sin(th) * np.cos(ph), rtol=0, atol=1e-14)


@pytest.mark.reference
def test_south_to_north_rows(rng):
    # rows stored south to north: the synthesis is the field at those rows, against the direct
    # scipy.special sum (tests/_reference.complex_form_field) at the flipped grid's colatitudes,
    # and the analysis of the flipped field gives the coefficients back (a round trip)
    lmax = 15
    g = Grid.equiangular(32, 32, "north")
    coef = random_coef(lmax, rng)
    f = synthesize(Harmonics(coef), g)
    flipped = Grid.from_coords(g.lat[::-1], g.lon)
    assert flipped.colat[0] > flipped.colat[-1]  # the first row is the southernmost
    ref = complex_form_field(coef, flipped.colat, np.radians(flipped.lon), "orthonormal", True)
    assert rel_err(synthesize(Harmonics(coef), flipped), ref) < 1e-13  # measured 4e-15
    np.testing.assert_array_equal(synthesize(Harmonics(coef), flipped), f[::-1])
    assert rel_err(analyze(f[::-1], flipped).coef, coef) < 1e-13


# --------------------------------------------------------------------------------------
# Conventions: conversion never changes the field
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("condon_shortley", [True, False])
@pytest.mark.parametrize("norm", NORMS)
def test_conversion_keeps_field(rng, norm, condon_shortley):
    lmax = 20  # unnormalized coefficients still representable
    grid = Grid.gauss(lmax)
    h = Harmonics(random_coef(lmax, rng))
    f0 = synthesize(h, grid)
    h2 = h.to(norm=norm, condon_shortley=condon_shortley)
    assert h2.norm == norm and h2.condon_shortley == condon_shortley
    assert rel_err(synthesize(h2, grid), f0) < 1e-13
    # analysing straight into the convention gives the converted coefficients
    direct = analyze(f0, grid, norm=norm, condon_shortley=condon_shortley)
    back = direct.to(norm="orthonormal", condon_shortley=True)
    assert rel_err(back.coef, h.coef) < 1e-12


# --------------------------------------------------------------------------------------
# Batches, dtypes, memory layouts
# --------------------------------------------------------------------------------------
def test_batch_axes_match_one_by_one(rng):
    lmax = 31
    grid = Grid.gauss(lmax)
    coef = random_coef(lmax, rng, batch=(2, 3))
    hb = Harmonics(coef)
    assert hb.batch_shape == (2, 3)
    fb = synthesize(hb, grid)
    assert fb.shape == (2, 3) + grid.shape
    ab = analyze(fb, grid)
    assert ab.coef.shape == (2, 3, lmax + 1, lmax + 1)
    for i in range(2):
        for j in range(3):
            f1 = synthesize(Harmonics(coef[i, j]), grid)
            np.testing.assert_allclose(fb[i, j], f1, rtol=0, atol=1e-13 * np.max(np.abs(f1)))
            a1 = analyze(f1, grid)
            np.testing.assert_allclose(ab.coef[i, j], a1.coef, rtol=0, atol=1e-13 * np.max(np.abs(a1.coef)))
    assert rel_err(ab.coef, coef) < 1e-12


@pytest.mark.reference
@pytest.mark.parametrize("kind", ["gauss", "poles", "cells", "north"])
@pytest.mark.parametrize("batch", [(9,), (4, 5), (17,)])
def test_large_batches_match_one_by_one(rng, kind, batch):
    # larger batches may take another code path (matrix products over the batch); every
    # field must still equal its own single-field transform
    lmax = 40
    grid = Grid.gauss(lmax) if kind == "gauss" else Grid.equiangular(2 * lmax + 2, 2 * lmax + 2, kind)
    coef = random_coef(lmax, rng, batch=batch)
    fb = synthesize(Harmonics(coef), grid)
    ab = analyze(fb, grid)
    flat_c = coef.reshape((-1,) + coef.shape[-2:])
    flat_f = fb.reshape((-1,) + grid.shape)
    flat_a = ab.coef.reshape((-1,) + coef.shape[-2:])
    for i in range(flat_c.shape[0]):
        f1 = synthesize(Harmonics(flat_c[i]), grid)
        np.testing.assert_allclose(flat_f[i], f1, rtol=0, atol=1e-13 * np.max(np.abs(f1)))
        a1 = analyze(f1, grid)
        np.testing.assert_allclose(flat_a[i], a1.coef, rtol=0, atol=1e-13 * np.max(np.abs(a1.coef)))
    assert rel_err(ab.coef, coef) < 1e-12
    if kind == "gauss" and batch == (9,):
        # and against the direct scipy sum for one member
        ref = complex_form_field(flat_c[-1], grid.colat, np.radians(grid.lon), "orthonormal", True)
        assert rel_err(flat_f[-1], ref) < 1e-12


@pytest.mark.slow
def test_large_batch_at_high_degree(rng):
    # a batch big enough for any batched path, at a degree where the near-pole skipping matters
    lmax = 383
    grid = Grid.gauss(lmax)
    coef = random_coef(lmax, rng, batch=(8,))
    fb = synthesize(Harmonics(coef), grid)
    ab = analyze(fb, grid)
    assert rel_err(ab.coef, coef) < 1e-12
    f0 = synthesize(Harmonics(coef[5]), grid)
    np.testing.assert_allclose(fb[5], f0, rtol=0, atol=1e-13 * np.max(np.abs(f0)))
    np.testing.assert_allclose(ab.coef[5], analyze(f0, grid).coef, rtol=0, atol=1e-13 * np.max(np.abs(coef[5])))


def test_large_batch_float32_non_contiguous(rng):
    grid = Grid.equiangular(40, 40, "cells")
    coef = random_coef(grid.lmax_exact, rng, batch=(10,))
    f = synthesize(Harmonics(coef), grid)
    v = np.moveaxis(np.ascontiguousarray(np.moveaxis(f, 0, -1)), -1, 0).astype(np.float32)
    h = analyze(v, grid)
    ref = np.stack([analyze(v[i].astype(np.float64), grid).coef for i in range(10)])
    np.testing.assert_allclose(h.coef, ref, rtol=0, atol=1e-13 * np.max(np.abs(ref)))


def test_float32_and_integer_input(rng):
    grid = Grid.equiangular(34, 34, "cells")
    f = synthesize(Harmonics(random_coef(grid.lmax_exact, rng)), grid)
    f32 = f.astype(np.float32)
    h32 = analyze(f32, grid)
    assert h32.coef.dtype == np.complex128
    # same result as the float64 copy of the same numbers (the arithmetic is double)
    ref = analyze(f32.astype(np.float64), grid)
    assert rel_err(h32.coef, ref.coef) < 1e-14
    ints = rng.integers(-50, 50, size=grid.shape)
    hi = analyze(ints, grid)
    assert rel_err(hi.coef, analyze(ints.astype(np.float64), grid).coef) < 1e-14
    h3 = analyze(np.full(grid.shape, 3, dtype=np.int32), grid)
    assert abs(h3.coef[0, 0] - 3 * math.sqrt(4 * math.pi)) < 1e-13  # 3 = 3 sqrt(4 pi) Y_00


def test_non_contiguous_input(rng):
    grid = Grid.gauss(23)
    coef = random_coef(23, rng, batch=(3,))
    f = synthesize(Harmonics(coef), grid)  # (3, nlat, nlon)
    ref = analyze(f, grid).coef
    fortran = np.asfortranarray(f)
    big = np.zeros((3, grid.nlat * 2, grid.nlon * 3))
    big[:, ::2, ::3] = f
    strided = big[:, ::2, ::3]
    moved = np.moveaxis(np.ascontiguousarray(np.moveaxis(f, 0, -1)), -1, 0)  # batch axis last in memory
    reversed_rows = np.ascontiguousarray(f[:, ::-1])[:, ::-1]  # negative stride
    for v in (fortran, strided, moved, reversed_rows, f.transpose(0, 2, 1).copy().transpose(0, 2, 1)):
        assert not v.flags.c_contiguous
        np.testing.assert_allclose(analyze(v, grid).coef, ref, rtol=0, atol=1e-13 * np.max(np.abs(ref)))
    # the caller's array is left untouched
    before = strided.copy()
    analyze(strided, grid)
    np.testing.assert_array_equal(strided, before)


@pytest.mark.reference
def test_low_degree_field_on_fine_oversampled_grid(rng):
    # a degree-6 field synthesised on a grid that holds far more degrees, with extra
    # longitudes (nlon = 4 lmax_exact + 3), against the direct scipy.special sum
    grid = Grid.equiangular(41, 83, "poles")
    coef = random_coef(6, rng)
    f = synthesize(Harmonics(coef), grid)
    ref = complex_form_field(coef, grid.colat, np.radians(grid.lon), "orthonormal", True)
    assert rel_err(f, ref) < 1e-13
    h = analyze(f, grid)
    assert h.lmax == 20
    expected = np.zeros((21, 21), complex)
    expected[:7, :7] = coef
    assert rel_err(h.coef, expected) < 1e-13


@pytest.mark.reference
def test_synthesis_beyond_grid_limit_is_the_series_at_the_nodes(rng):
    # synthesis evaluates the series at the grid points even when the grid could not analyse
    # that degree (orders above nlon/2 fold onto the longitudes); reference: direct scipy sum
    coef = random_coef(20, rng)
    for grid in (Grid.gauss(10), Grid.equiangular(12, 30, "cells")):
        f = synthesize(Harmonics(coef), grid)
        ref = complex_form_field(coef, grid.colat, np.radians(grid.lon), "orthonormal", True)
        assert rel_err(f, ref) < 1e-13


@pytest.mark.reference
@pytest.mark.parametrize("grid, lmax", [(Grid.gauss(20), 21), (Grid.equiangular(24, 24, "cells"), 12),
                                         (Grid.equiangular(25, 48, "poles"), 24),
                                         (Grid.equiangular(24, 48, "north"), 24)])
def test_synthesis_with_top_order_at_nyquist(rng, grid, lmax):
    # the top order equals nlon/2: the Nyquist longitude frequency, which an inverse real FFT
    # counts once where the series counts m and -m. Each layout once, with a field whose
    # orders reach exactly nlon/2; reference: direct scipy sum (tests/_reference,
    # scipy.special.sph_legendre_p). Measured 1e-15; a miscounted Nyquist term gives 1e-2.
    assert lmax == grid.nlon // 2
    coef = random_coef(lmax, rng)
    f = synthesize(Harmonics(coef), grid)
    ref = complex_form_field(coef, grid.colat, np.radians(grid.lon), "orthonormal", True)
    assert rel_err(f, ref) < 1e-13


def test_analysis_below_grid_limit_truncates(rng):
    # asking for fewer degrees than the grid holds returns the leading coefficients
    grid = Grid.gauss(40)
    coef = random_coef(40, rng)
    h = analyze(synthesize(Harmonics(coef), grid), grid, lmax=12)
    assert h.lmax == 12
    assert rel_err(h.coef, coef[:13, :13]) < 1e-12


@pytest.mark.parametrize("grid", [Grid.gauss(151), Grid.equiangular(305, 304, "poles"),
                                  Grid.equiangular(304, 304, "north")],
                         ids=["gauss", "poles-odd", "north"])
def test_latitude_bands_give_the_same_fields(rng, monkeypatch, grid):
    # high degrees are transformed in latitude bands; forcing bands of 64 pairs must change
    # nothing (internal consistency: the one-band run is checked against outside references
    # above), also with an equator ring and an unpaired pole ring in a band
    from sphex import rings

    lmax = min(grid.lmax_exact, 151)
    h = Harmonics(random_coef(lmax, rng)[None].repeat(2, axis=0))
    f = synthesize(h, grid)
    east, north = synthesize_gradient(h, grid)
    coef = analyze(f, grid).coef
    monkeypatch.setattr(rings, "BAND_BYTES", 1)
    assert len(rings.pair_bands(rings.latitude_pairs(grid).n, lmax + 1)) > 1
    assert rel_err(synthesize(h, grid), f) < 1e-14
    be, bn = synthesize_gradient(h, grid)
    assert rel_err(be, east) < 1e-14 and rel_err(bn, north) < 1e-14
    assert rel_err(analyze(f, grid).coef, coef) < 1e-14
    assert rel_err(coef, h.coef) < 1e-11


@pytest.mark.parametrize("nthreads", [1, 2, 3, 4])
def test_order_sequence_covers_each_order_once_and_balances_threads(nthreads):
    # the kernels take orders in this sequence; numba hands each thread an equal contiguous
    # chunk of the parallel loop, so each chunk must carry about the same work
    from sphex import rings

    lmax = 1023
    grid = Grid.gauss(lmax)
    live = rings.live_pairs(grid, lmax, 0, lmax, 0)
    work = (lmax + 1 - np.arange(lmax + 1)) * live
    seq = rings.order_sequence(0, lmax, nthreads)
    assert sorted(seq.tolist()) == list(range(lmax + 1))
    loads = [work[chunk].sum() for chunk in np.array_split(seq, nthreads)]
    assert max(loads) / np.mean(loads) < 1.01
    assert sorted(rings.order_sequence(1, 20, nthreads).tolist()) == list(range(1, 21))


# --------------------------------------------------------------------------------------
# Gradient and regridding
# --------------------------------------------------------------------------------------
@pytest.mark.reference
def test_gradient_of_closed_form_fields():
    # derivatives by hand (common practice): east = (1/sin t) df/dphi, north = -df/dt
    grid = Grid.gauss(20)
    th, ph = mesh(grid)
    cases = [
        (np.cos(th) + 0 * ph, 0 * th * ph, np.sin(th) + 0 * ph),
        (np.sin(th) * np.cos(ph), -np.sin(ph) + 0 * th, -np.cos(th) * np.cos(ph)),
        (np.sin(th) ** 2 * np.cos(th) * np.cos(2 * ph),
         -2 * np.sin(th) * np.cos(th) * np.sin(2 * ph),
         -(2 * np.sin(th) * np.cos(th) ** 2 - np.sin(th) ** 3) * np.cos(2 * ph)),
    ]
    for f, east, north in cases:
        e, n = synthesize_gradient(analyze(f, grid), grid)
        np.testing.assert_allclose(e, east, rtol=0, atol=1e-12)
        np.testing.assert_allclose(n, north, rtol=0, atol=1e-12)


def test_gradient_same_in_every_convention(rng):
    grid = Grid.equiangular(26, 52, "north")
    h = Harmonics(random_coef(12, rng))
    e0, n0 = synthesize_gradient(h, grid)
    for norm in NORMS:
        e, n = synthesize_gradient(h.to(norm=norm, condon_shortley=False), grid)
        np.testing.assert_allclose(e, e0, rtol=0, atol=1e-12 * np.max(np.abs(e0)))
        np.testing.assert_allclose(n, n0, rtol=0, atol=1e-12 * np.max(np.abs(n0)))


@pytest.mark.reference
def test_regrid_with_explicit_lmax(rng):
    # regrid(..., lmax=L) keeps degrees <= L of a degree-20 field: against the direct
    # scipy.special sum of the truncated coefficients at the target nodes
    # (tests/_reference.complex_form_field); 1e-13 (measured 3e-15)
    src, dst = Grid.gauss(20), Grid.equiangular(30, 60, "poles")
    coef = random_coef(20, rng)
    out = regrid(synthesize(Harmonics(coef), src), src, dst, lmax=6)
    expected = complex_form_field(coef[:7, :7], dst.colat, np.radians(dst.lon), "orthonormal", True)
    assert rel_err(out, expected) < 1e-13


@pytest.mark.reference
def test_regrid_band_limited_field_is_exact():
    # a degree-3 field is reproduced exactly on any grid that holds degree 3: against the same
    # closed-form trigonometric polynomial evaluated at the target nodes (common practice)
    def field(grid):
        th, ph = mesh(grid)
        return np.sin(th) ** 2 * np.cos(th) * np.cos(2 * ph - 0.4) + np.cos(th) + 0.5

    src = Grid.gauss(15)
    dst = Grid.equiangular(64, 128, "cells")
    out = regrid(field(src), src, dst)
    assert out.shape == dst.shape
    np.testing.assert_allclose(out, field(dst), rtol=0, atol=1e-13)
    back = regrid(out, dst, src)
    np.testing.assert_allclose(back, field(src), rtol=0, atol=1e-13)


# --------------------------------------------------------------------------------------
# Errors at the public boundary
# --------------------------------------------------------------------------------------
def test_nan_and_inf_rejected():
    grid = Grid.gauss(10)
    for bad in (np.nan, np.inf, -np.inf):
        v = np.ones(grid.shape)
        v[3, 4] = bad
        with pytest.raises(ValueError, match="(?i)nan|finite|inf"):
            analyze(v, grid)


def test_nan_and_inf_are_named_with_their_place_before_any_work():
    # refused by the check on the values, with the count and the place, not later as
    # coefficients beyond the double range
    grid = Grid.gauss(10)
    for bad in (np.nan, np.inf, -np.inf):
        v = np.ones((2,) + grid.shape)
        v[1, 3, 4] = bad
        with pytest.raises(ValueError, match=r"values contain 1 NaN or inf entries \(at latitude "
                                             r".*\(row 3, column 4 of field 1\)\)"):
            analyze(v, grid)


def test_shape_mismatch_rejected():
    grid = Grid.gauss(10)
    for shape in [(grid.nlat + 1, grid.nlon), (grid.nlon, grid.nlat), (grid.nlat * grid.nlon,)]:
        with pytest.raises(ValueError, match="(?i)shape") as info:
            analyze(np.ones(shape), grid)
        # the message shows both the given shape and the grid's
        assert str(shape) in str(info.value) and f"{grid.nlat}, {grid.nlon}" in str(info.value)


def test_lmax_above_grid_limit_rejected():
    grid = Grid.equiangular(20, 40, "poles")  # lmax_exact = 9
    v = np.ones(grid.shape)
    with pytest.raises(ValueError, match="(?i)lmax") as info:
        analyze(v, grid, lmax=10)
    assert "9" in str(info.value)  # names the grid's limit
    assert "allow_aliasing" in str(info.value)  # and the way to opt in
    h = analyze(v, grid, lmax=12, allow_aliasing=True)  # opted in: allowed
    assert h.lmax == 12


def test_unknown_normalisation_rejected():
    grid = Grid.gauss(5)
    with pytest.raises(ValueError, match="(?is)orthonormal.*full"):
        analyze(np.ones(grid.shape), grid, norm="bogus")
    with pytest.raises(ValueError, match="(?i)norm"):
        Harmonics(np.zeros((3, 3), complex), norm="bogus")


def test_non_global_or_irregular_coordinates_rejected():
    lat = np.linspace(80.0, -80.0, 17)
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, np.arange(0.0, 360.0, 10.0))
    lat = np.sort(np.random.default_rng(3).uniform(-90, 90, 17))[::-1]
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, np.arange(0.0, 360.0, 10.0))
