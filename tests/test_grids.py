"""Checks of sphex.grids.Grid: nodes, quadrature weights, exact degree limit, detection from coordinates."""
from __future__ import annotations

import pickle

import numpy as np
import pytest

from _reference import (
    exact_monomial_integral,
    gauss_nodes_weights,
    legendre_poly,
    legendre_polys,
    mp_gauss_colatitude,
    mp_gauss_node_weight,
)
from sphex.grids import (
    GAUSS_ESTIMATE_MAX, Grid, equiangular_nodes, gauss_colatitudes_estimate, gauss_nodes,
)

LAYOUTS = ("poles", "cells", "north")


def equiangular_lat(nlat: int, layout: str) -> np.ndarray:
    """Latitudes (deg, north to south) of each layout, as defined in the core API."""
    j = np.arange(nlat)
    if layout == "poles":
        return 90.0 - 180.0 * j / (nlat - 1)
    if layout == "cells":
        return 90.0 - 180.0 * (j + 0.5) / nlat
    if layout == "north":
        return 90.0 - 180.0 * j / nlat
    raise KeyError(layout)


def gauss_lat(nlat: int) -> np.ndarray:
    """Gauss-Legendre latitudes (deg, north to south) from numpy.polynomial.legendre.leggauss."""
    x, _ = gauss_nodes_weights(nlat)
    return np.degrees(np.arcsin(x))


def make(kind: str, nlat: int, nlon: int) -> Grid:
    if kind == "gauss":
        return Grid.gauss(nlat - 1, nlon=nlon)
    return Grid.equiangular(nlat, nlon, kind)


# --------------------------------------------------------------------------------------
# Gauss-Legendre nodes and weights
# --------------------------------------------------------------------------------------
@pytest.mark.reference
@pytest.mark.parametrize("lmax", [0, 1, 4, 15, 63, 200, 255])
def test_gauss_matches_numpy_leggauss(lmax):
    # source: numpy.polynomial.legendre.leggauss (nodes in x = cos(colat), weights)
    g = Grid.gauss(lmax)
    x_ref, w_ref = gauss_nodes_weights(lmax + 1)
    assert g.nlat == lmax + 1
    assert g.kind == "gauss"
    assert g.lmax_exact == lmax
    np.testing.assert_allclose(np.cos(g.colat), x_ref, rtol=0, atol=1e-14)
    np.testing.assert_allclose(g.weights, w_ref, rtol=0, atol=1e-14)
    np.testing.assert_allclose(g.lat, np.degrees(np.arcsin(x_ref)), rtol=0, atol=1e-12)
    np.testing.assert_allclose(g.colat, np.radians(90.0 - g.lat), rtol=0, atol=1e-14)


@pytest.mark.reference
@pytest.mark.slow
@pytest.mark.parametrize("n", [512, 2048, 5401])
def test_gauss_polar_weights_against_mpmath(n):
    # source: mpmath, Newton on P_n and w = 2(1-x^2)/(n P_{n-1})^2 at 30 digits
    # (tests/_reference.mp_gauss_node_weight). sphex takes w = 2 / (dP_n/dtheta)^2 with
    # P_n, P_{n-1} in double-double at every node; measured worst 6e-16 relative at
    # n = 5401 over the indices below, so 4e-15 leaves a factor ~6 for other CPUs.
    # Indices include both sides of the 128 nodes whose positions are polished in
    # double-double and the interior, where plain doubles once gave 5.7e-12.
    # (numpy's leggauss itself is only ~1e-10 relative near the poles at n=512,
    # which is why the numpy comparison above stops at n=256.)
    # The colatitude itself is compared relatively (mpmath arccos of the node at 40 digits,
    # tests/_reference.mp_gauss_colatitude): next to a pole x = cos(theta) hides its errors,
    # while a degree-l function there moves by ~l times the relative error of theta. Measured
    # 2e-16 relative at every index; plain doubles without the polish give 9.6e-12 at n = 5401.
    g = Grid.gauss(n - 1)
    np.testing.assert_allclose(g.weights.sum(), 2.0, rtol=0, atol=1e-13)
    for i in (0, 1, 2, 5, 127, 128, 129, 200, 400, n // 6, n // 3, n // 2 - 1):
        x_ref, w_ref = mp_gauss_node_weight(n, np.cos(g.colat[i]))
        assert abs(np.cos(g.colat[i]) - x_ref) < 2e-16
        theta_ref = mp_gauss_colatitude(n, np.cos(g.colat[i]))
        assert abs(g.colat[i] - theta_ref) < 1e-15 * theta_ref, (i, g.colat[i], theta_ref)
        assert abs(g.weights[i] - w_ref) < 4e-15 * w_ref, (i, g.weights[i], w_ref)
        j = n - 1 - i  # the mirror node in the southern hemisphere
        assert abs(g.weights[j] - w_ref) < 4e-15 * w_ref, (j, g.weights[j], w_ref)


@pytest.mark.reference
def test_gauss_five_points_handbook_table():
    # source: Abramowitz & Stegun, Table 25.4, n = 5 (values from memory)
    g = Grid.gauss(4)
    nodes = np.array([0.9061798459386640, 0.5384693101056831, 0.0, -0.5384693101056831, -0.9061798459386640])
    weights = np.array([0.2369268850561891, 0.4786286704993665, 0.5688888888888889,
                        0.4786286704993665, 0.2369268850561891])
    np.testing.assert_allclose(np.cos(g.colat), nodes, rtol=0, atol=1e-15)
    np.testing.assert_allclose(g.weights, weights, rtol=0, atol=1e-15)


def test_gauss_default_longitudes():
    # core API: nlon = 2*lmax + 2 by default, equally spaced from 0
    g = Grid.gauss(31)
    assert g.nlon == 64 and g.shape == (32, 64)
    np.testing.assert_allclose(g.lon, 360.0 * np.arange(64) / 64, rtol=0, atol=1e-12)
    assert Grid.gauss(31, nlon=63).lmax_exact == 31


def test_unknown_layout_rejected():
    with pytest.raises(ValueError, match="(?is)layout.*poles"):
        Grid.equiangular(10, 20, "middle")


def test_gauss_too_few_longitudes_rejected():
    # core API: nlon >= 2*lmax + 1
    with pytest.raises(ValueError, match="(?i)nlon|longitude"):
        Grid.gauss(31, nlon=40)


# --------------------------------------------------------------------------------------
# Equiangular layouts
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("layout", LAYOUTS)
@pytest.mark.parametrize("nlat", [5, 8, 33, 64])
def test_equiangular_nodes_and_limit(layout, nlat):
    # core API: node formulas per layout; lmax_exact = floor((nlat-1)/2)
    nlon = 2 * nlat
    g = Grid.equiangular(nlat, nlon, layout)
    assert g.kind == f"equiangular-{layout}"
    assert g.shape == (nlat, nlon) and g.nlat == nlat and g.nlon == nlon
    np.testing.assert_allclose(g.lat, equiangular_lat(nlat, layout), rtol=0, atol=1e-12)
    np.testing.assert_allclose(g.lon, 360.0 * np.arange(nlon) / nlon, rtol=0, atol=1e-12)
    assert g.lmax_exact == (nlat - 1) // 2


@pytest.mark.parametrize("layout", LAYOUTS)
@pytest.mark.parametrize("nlat", [2, 3, 16, 33, 181])
def test_weights_on_first_use_are_the_layouts_rule_in_grid_order(layout, nlat):
    # an equiangular grid computes its weights when first asked (recognising a grid needs
    # none): the same numbers as equiangular_nodes, bit for bit, in the grid's latitude
    # order, read-only, and part of its identity and its pickle
    colat, w = equiangular_nodes(nlat, layout)
    g = Grid.equiangular(nlat, 2 * nlat + 1, layout)
    assert np.array_equal(g.colat, colat) and np.array_equal(g.weights, w)
    flipped = Grid.from_coords(g.lat[::-1], g.lon)
    assert not flipped.north_first
    assert np.array_equal(flipped.colat, colat[::-1])
    assert np.array_equal(flipped.weights, w[::-1])
    assert not flipped.weights.flags.writeable
    given = Grid(g.kind, colat, w, 8, north_first=False)   # weights handed to the constructor
    assert np.array_equal(given.weights, w[::-1]) and np.array_equal(given.colat, colat[::-1])
    fresh = Grid.from_coords(g.lat[::-1], g.lon)
    assert pickle.loads(pickle.dumps(fresh)) == flipped and hash(fresh) == hash(flipped)
    with pytest.raises(AttributeError, match="no attribute 'weight'"):
        g.weight
    with pytest.raises(ValueError, match="Grid.gauss"):
        Grid("gauss", colat, None, 8)


@pytest.mark.parametrize("nlat", [2, 3, 16, 64, 181, 600])
def test_gauss_grid_from_coordinates_computes_its_nodes_on_first_use(nlat):
    # recognising a Gauss grid uses a numpy estimate of its latitudes; the grid's nodes
    # and weights are then those of Grid.gauss, bit for bit, computed when first asked, in
    # the grid's latitude order, read-only, and part of its identity and its pickle
    exact, w = gauss_nodes(nlat)
    assert np.max(np.abs(np.degrees(gauss_colatitudes_estimate(nlat) - exact))) < 1e-11
    g = Grid.gauss(nlat - 1, max(2 * nlat, 4))
    for north_first, lat in ((True, g.lat), (False, g.lat[::-1])):
        found = Grid.from_coords(lat, g.lon)
        assert found.kind == "gauss" and found.north_first is north_first
        assert found.nlat == nlat and found.lmax_exact == g.lmax_exact
        assert pickle.loads(pickle.dumps(found)) == found
        order = slice(None) if north_first else slice(None, None, -1)
        assert np.array_equal(found.lat, lat)
        assert np.array_equal(found.colat, exact[order]) and np.array_equal(found.weights, w[order])
        assert not (found.colat.flags.writeable or found.lat.flags.writeable
                    or found.weights.flags.writeable)
        assert (found == g) is north_first
    with pytest.raises(ValueError, match="only a Gauss grid may leave its nodes"):
        Grid("equiangular-cells", None, None, 8, nlat=4)


def test_large_gauss_grid_recognised_from_the_kernels_nodes():
    # above GAUSS_ESTIMATE_MAX latitudes the kernel's nodes are computed at once
    g = Grid.gauss(GAUSS_ESTIMATE_MAX + 40)
    found = Grid.from_coords(g.lat, g.lon)
    assert found == g and np.array_equal(found.weights, g.weights)


def test_lmax_exact_limited_by_longitudes():
    # core API: lmax_exact <= (nlon - 1) // 2 (a degree-l field needs 2l+1 longitudes)
    assert Grid.equiangular(65, 20, "poles").lmax_exact == 9
    assert Grid.equiangular(65, 21, "cells").lmax_exact == 10
    assert Grid.equiangular(64, 200, "north").lmax_exact == 31


@pytest.mark.reference
@pytest.mark.parametrize("kind", ("gauss",) + LAYOUTS)
@pytest.mark.parametrize("nlat", [9, 10, 33, 34, 257, 1024])
def test_quadrature_exact_to_twice_lmax_exact(kind, nlat):
    # The weights integrate polynomials in x = cos(colat) over [-1, 1].
    # Exact integrals: x^k -> 2/(k+1) (k even), 0 (k odd); Legendre P_k -> 2 delta_k0
    # (common practice; P_k from numpy.polynomial.legendre).
    g = make(kind, nlat, 2 * nlat + 2)
    x = np.cos(g.colat)
    w = g.weights
    np.testing.assert_allclose(w.sum(), 2.0, rtol=0, atol=1e-14)
    top = 2 * g.lmax_exact + (1 if kind == "gauss" else 0)  # Gauss: 2n-1 with n = lmax+1 nodes
    k = np.arange(top + 1)
    mono = np.array([exact_monomial_integral(int(j)) for j in k])
    err_mono = np.abs(x[None, :] ** k[:, None] @ w - mono)
    assert np.all(err_mono < 1e-14), (kind, nlat, int(np.argmax(err_mono)), err_mono.max())
    err_leg = np.abs(legendre_polys(top, x) @ w - np.where(k == 0, 2.0, 0.0))
    assert np.all(err_leg < 1e-13), (kind, nlat, int(np.argmax(err_leg)), err_leg.max())


@pytest.mark.reference
@pytest.mark.parametrize("kind", ("gauss",) + LAYOUTS)
@pytest.mark.parametrize("nlat", [9, 10, 33, 34])
def test_quadrature_limit_is_sharp(kind, nlat):
    # An nlat-point interpolatory rule (Clenshaw-Curtis, Fejer, Driscoll-Healy, Gauss) is not
    # exact for every polynomial of degree 2*lmax_exact + 2; checked here with P_{2L+1}, P_{2L+2}
    # (common practice; for these nlat the interpolatory error is >= 4e-5, measured with
    # weights solved from the Legendre moments).
    g = make(kind, nlat, 2 * nlat + 2)
    x = np.cos(g.colat)
    L = g.lmax_exact
    err = max(abs(g.weights @ legendre_poly(k, x)) for k in (2 * L + 1, 2 * L + 2))
    assert err > 1e-6, (kind, nlat, err)


def closed_form_weights(nlat: int, layout: str) -> np.ndarray:
    """Published closed forms of the equiangular weights in x, north to south (from memory).

    poles: Clenshaw-Curtis, n = nlat-1 intervals, theta_j = pi j/n,
        w_j = (c_j/n) [1 - sum_{k=1}^{n/2} b_k cos(2k theta_j)/(4k^2-1)], c_j = 1 at the ends else 2,
        b_k = 1 for k = n/2 else 2 (Waldvogel 2006, BIT 46, section 2).
    cells: Fejer's first rule, theta_j = pi (j+1/2)/nlat,
        w_j = (2/nlat) [1 - 2 sum_{k=1}^{nlat/2} cos(2k theta_j)/(4k^2-1)] (Waldvogel 2006).
    north (even nlat = 2B): Driscoll-Healy, theta_j = pi j/(2B),
        w_j = (2/B) sin(theta_j) sum_{l=0}^{B-1} sin((2l+1) theta_j)/(2l+1)
        (Driscoll & Healy 1994, Adv. Appl. Math. 15, Theorem 3, rescaled to sum 2).
    """
    if layout == "poles":
        n = nlat - 1
        th = np.pi * np.arange(nlat) / n
        k = np.arange(1, n // 2 + 1)
        b = np.where(2 * k == n, 1.0, 2.0)
        c = np.full(nlat, 2.0)
        c[[0, -1]] = 1.0
        return c / n * (1.0 - np.cos(np.outer(th, 2 * k)) @ (b / (4 * k**2 - 1)))
    if layout == "cells":
        th = np.pi * (np.arange(nlat) + 0.5) / nlat
        k = np.arange(1, nlat // 2 + 1)
        return 2.0 / nlat * (1.0 - 2.0 * np.cos(np.outer(th, 2 * k)) @ (1.0 / (4 * k**2 - 1)))
    if layout == "north":
        assert nlat % 2 == 0
        B = nlat // 2
        th = np.pi * np.arange(nlat) / nlat
        l = np.arange(B)
        return 2.0 / B * np.sin(th) * (np.sin(np.outer(th, 2 * l + 1)) @ (1.0 / (2 * l + 1)))
    raise KeyError(layout)


@pytest.mark.reference
@pytest.mark.parametrize("layout,nlat", [("poles", 9), ("poles", 10), ("poles", 257), ("cells", 9), ("cells", 256),
                                         ("north", 10), ("north", 256)])
def test_equiangular_weights_match_published_closed_forms(layout, nlat):
    # source: the closed forms in closed_form_weights (Clenshaw-Curtis, Fejer, Driscoll-Healy)
    g = Grid.equiangular(nlat, 2 * nlat, layout)
    np.testing.assert_allclose(g.weights, closed_form_weights(nlat, layout), rtol=0, atol=1e-15)


@pytest.mark.reference
@pytest.mark.parametrize("kind", ("gauss",) + LAYOUTS)
def test_area_integral(kind):
    # core API: integral of f over the sphere = (2 pi / nlon) sum_j w_j sum_k f[j, k];
    # exact values (common practice): 1 -> 4 pi, cos^2(colat) -> 4 pi / 3,
    # sin^2(colat) cos^2(lon) -> 4 pi / 3.
    g = make(kind, 17, 36)
    lon = np.radians(g.lon)[None, :]
    th = g.colat[:, None]

    def integral(f):
        return 2 * np.pi / g.nlon * np.sum(g.weights[:, None] * f)

    assert integral(np.ones(g.shape)) == pytest.approx(4 * np.pi, abs=1e-13)
    assert integral(np.cos(th) ** 2 + 0 * lon) == pytest.approx(4 * np.pi / 3, abs=1e-13)
    assert integral(np.sin(th) ** 2 * np.cos(lon) ** 2) == pytest.approx(4 * np.pi / 3, abs=1e-13)


# --------------------------------------------------------------------------------------
# Value semantics
# --------------------------------------------------------------------------------------
def test_grid_equal_hashable_pickles_immutable():
    # core API: immutable, hashable/equal by value, pickles
    a, b = Grid.gauss(20), Grid.gauss(20)
    assert a == b and hash(a) == hash(b)
    assert a != Grid.gauss(21)
    assert a != Grid.equiangular(21, 42, "poles")
    assert len({a, b, Grid.gauss(21)}) == 2
    c = pickle.loads(pickle.dumps(Grid.equiangular(16, 32, "north")))
    assert c == Grid.equiangular(16, 32, "north") and c.kind == "equiangular-north"


def test_grid_is_immutable():
    # core API: Grid objects are immutable (they are hashed by value, so a change after
    # hashing would corrupt dicts and caches keyed by grids)
    a = Grid.gauss(20)
    for name, value in [("nlat", 3), ("nlon", 7), ("lmax_exact", 50), ("kind", "gauss")]:
        with pytest.raises((AttributeError, TypeError)):
            setattr(a, name, value)
    with pytest.raises((ValueError, TypeError)):
        a.weights[0] = 1.0  # arrays exposed read-only
    with pytest.raises((ValueError, TypeError)):
        a.lat[0] = 1.0
    assert a == Grid.gauss(20)


# --------------------------------------------------------------------------------------
# Grid.from_coords
# --------------------------------------------------------------------------------------
def lon_vector(nlon: int, origin: str) -> np.ndarray:
    d = 360.0 / nlon
    start = {"0": 0.0, "-180": -180.0, "half": 0.5 * d, "-180half": -180.0 + 0.5 * d}[origin]
    return start + d * np.arange(nlon)


def lat_vector(kind: str, nlat: int) -> np.ndarray:
    return gauss_lat(nlat) if kind == "gauss" else equiangular_lat(nlat, kind)


@pytest.mark.parametrize("origin", ["0", "-180", "half", "-180half"])
@pytest.mark.parametrize("order", ["north_to_south", "south_to_north"])
@pytest.mark.parametrize("kind", ("gauss",) + LAYOUTS)
@pytest.mark.parametrize("nlat", [16, 17])
def test_from_coords_detects_kind(kind, order, origin, nlat):
    # core API: kind detected for any latitude order and longitude origin; lat/lon kept as given
    nlon = 2 * nlat + 2
    lat = lat_vector(kind, nlat)
    if order == "south_to_north":
        lat = lat[::-1].copy()
    lon = lon_vector(nlon, origin)
    g = Grid.from_coords(lat, lon)
    expected_kind = "gauss" if kind == "gauss" else f"equiangular-{kind}"
    assert g.kind == expected_kind
    assert g.shape == (nlat, nlon)
    np.testing.assert_allclose(g.lat, lat, rtol=0, atol=1e-12)
    np.testing.assert_allclose(g.lon, lon, rtol=0, atol=1e-12)
    np.testing.assert_allclose(g.colat, np.radians(90.0 - lat), rtol=0, atol=1e-13)
    ref = make(kind, nlat, nlon)
    assert g.lmax_exact == ref.lmax_exact
    w = ref.weights if order == "north_to_south" else ref.weights[::-1]
    np.testing.assert_allclose(g.weights, w, rtol=0, atol=1e-14)


def test_from_coords_accepts_lists_and_float32_equiangular():
    # degrees stored in single precision (common in files: a 1/3-degree grid whose
    # coordinates are rounded to float32) still describe the regular grid
    lat = equiangular_lat(541, "poles").astype(np.float32)
    lon = (np.arange(1080) / 3.0).astype(np.float32)
    g = Grid.from_coords(list(lat), list(lon))
    assert g.kind == "equiangular-poles" and g.lmax_exact == 270
    # the same longitudes from -180 (smaller magnitudes, finer float32 steps) and Gauss
    # latitudes in float32
    g2 = Grid.from_coords(lat, (np.arange(1080) / 3.0 - 180.0).astype(np.float32))
    assert g2.kind == "equiangular-poles"
    g3 = Grid.from_coords(Grid.gauss(639).lat.astype(np.float32), (np.arange(1280) * 0.28125).astype(np.float32))
    assert g3.kind == "gauss" and g3.lmax_exact == 639


@pytest.mark.parametrize("origin", ["0", "-180"])
@pytest.mark.parametrize("kind,nlat,nlon", [("gauss", 2048, 4096), ("cells", 2048, 4096),
                                            ("poles", 2049, 4096), ("cells", 1800, 3600)])
def test_from_coords_at_high_resolution(kind, nlat, nlon, origin):
    # 2048 rows: Gauss latitudes come close to equal spacing near the equator but must not be
    # mistaken for (or mistake) an equiangular grid (the Gauss nodes themselves are checked
    # against mpmath above); 3600 longitudes is the common 0.1-degree grid
    lat = Grid.gauss(nlat - 1).lat if kind == "gauss" else equiangular_lat(nlat, kind)
    g = Grid.from_coords(lat, lon_vector(nlon, origin))
    assert g.kind == ("gauss" if kind == "gauss" else f"equiangular-{kind}")
    assert g.shape == (nlat, nlon)
    assert g.lmax_exact == min(nlat - 1 if kind == "gauss" else (nlat - 1) // 2, (nlon - 1) // 2)


def test_from_coords_rejects_repeated_seam():
    lon = np.linspace(0.0, 360.0, 65)  # 0 and 360 both present
    with pytest.raises(ValueError, match="(?i)360|repeat|seam"):
        Grid.from_coords(equiangular_lat(33, "poles"), lon)


def test_from_coords_rejects_regional_latitudes():
    lat = np.linspace(60.0, -60.0, 31)  # equally spaced but not global
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, lon_vector(64, "0"))


def test_from_coords_rejects_irregular_latitudes():
    lat = equiangular_lat(33, "poles")
    lat[5] += 0.3  # one row off the regular spacing, not a Gauss latitude either
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, lon_vector(64, "0"))


def test_from_coords_rejects_irregular_longitudes():
    lon = lon_vector(64, "0")
    lon[10] += 1.0
    with pytest.raises(ValueError, match="(?i)lon"):
        Grid.from_coords(equiangular_lat(33, "poles"), lon)


def test_from_coords_rejects_regional_longitudes():
    lon = np.arange(0.0, 181.0, 5.0)  # half the globe
    with pytest.raises(ValueError, match="(?i)lon"):
        Grid.from_coords(equiangular_lat(33, "poles"), lon)


@pytest.mark.parametrize("nlon", [0, 1, 2])
def test_from_coords_rejects_too_few_longitudes(nlon):
    with pytest.raises(ValueError, match="(?i)lon"):
        Grid.from_coords(equiangular_lat(33, "poles"), lon_vector(nlon, "0") if nlon else np.array([]))


def test_from_coords_rejects_latitude_out_of_range():
    lat = equiangular_lat(33, "poles") * 2.0  # -180..180 is not a latitude
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, lon_vector(64, "0"))


def test_from_coords_rejects_unsorted_latitudes(rng):
    lat = equiangular_lat(33, "poles")
    lat = lat[rng.permutation(lat.size)]
    with pytest.raises(ValueError, match="(?i)lat"):
        Grid.from_coords(lat, lon_vector(64, "0"))


def test_grids_with_different_nodes_are_different():
    # the transforms cache latitude tables by grid: two grids built directly with the same kind
    # and size but other colatitudes must not compare (or hash) equal, or one would be
    # synthesised on the other's rings
    g = Grid.gauss(7)
    moved = Grid("gauss", g.colat * 0.99, g.weights, g.nlon)
    assert moved != g
    assert Grid("gauss", g.colat.copy(), g.weights.copy(), g.nlon) == g
    assert hash(Grid("gauss", g.colat.copy(), g.weights.copy(), g.nlon)) == hash(g)
