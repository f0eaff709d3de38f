"""Checks of sphex.flow: tangent vector fields, streamfunction, velocity potential, energy spectra."""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sps
import sympy
from numpy.polynomial import legendre as npleg

from _reference import random_coef
from sphex import Grid, Harmonics, synthesize
from sphex.filters import gaussian, gradient
from sphex.flow import Flow, analyze_flow, regrid_flow, smooth_flow, synthesize_flow
from sphex.spectra import kinetic_energy
from sphex.transform import regrid

LAYOUTS = ("poles", "cells", "north")
EARTH_RADIUS = 6.37122e6  # m, the radius of the shallow-water test suite (Williamson et al. 1992)


def rel_err(a, b) -> float:
    """max |a - b| / max |b|."""
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(b)))


def lat_lon(grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Latitude (nlat, 1) and longitude (1, nlon) in radians."""
    return np.radians(grid.lat)[:, None], np.radians(grid.lon)[None, :]


def potential(lmax: int, rng, batch=(), radius=None) -> Harmonics:
    """Random band-limited coefficients with a zero degree-0 term (no flow has one)."""
    coef = random_coef(lmax, rng, batch)
    coef[..., 0, 0] = 0.0
    return Harmonics(coef, radius=radius)


def random_flow(lmax: int, rng, batch=(), radius=None) -> Flow:
    """Random band-limited psi and chi whose winds have the same energy in every coefficient:
    psi_lm = g_lm / sqrt(l(l+1)) with g_lm standard normal (likewise chi)."""
    l = np.arange(lmax + 1, dtype=float)[:, None]
    scale = 1.0 / np.sqrt(np.maximum(l * (l + 1), 1.0))
    return Flow(potential(lmax, rng, batch, radius), potential(lmax, rng, batch, radius)).filter(scale[:, 0])


def flow_error(a: Flow, b: Flow) -> float:
    """Largest relative error of the psi and chi coefficients, max |a - b| / max |b|."""
    return max(rel_err(a.psi.coef, b.psi.coef), rel_err(a.chi.coef, b.chi.coef))


def wind_error(a: Flow, b: Flow) -> float:
    """The same for sqrt(l(l+1)) psi_lm and sqrt(l(l+1)) chi_lm: the coefficients of the winds
    in orthonormal vector harmonics."""
    l = np.arange(b.lmax + 1, dtype=float)
    w = np.sqrt(l * (l + 1))
    return flow_error(a.filter(w), b.filter(w))


def gauss_mean(values: np.ndarray, grid: Grid) -> np.ndarray:
    """Area mean over the sphere with numpy's Gauss-Legendre rule on the grid's rows."""
    x, w = npleg.leggauss(grid.nlat)  # numpy.polynomial.legendre.leggauss, ascending x
    assert np.max(np.abs(np.sort(np.cos(grid.colat)) - x)) < 1e-13  # the grid's rows are its nodes
    order = np.argsort(np.cos(grid.colat))
    return np.einsum("...jk,j->...", values[..., order, :], w) / (2 * grid.nlon)


# --------------------------------------------------------------------------------------
# Closed-form flows
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("alpha", [0.0, math.pi / 4, math.pi / 2 - 0.05])
@pytest.mark.parametrize("grid", [Grid.gauss(15), Grid.equiangular(33, 36, "poles")],
                         ids=["gauss", "poles"])
@pytest.mark.reference
def test_solid_body_rotation(grid, alpha):
    # Williamson et al. 1992, J. Comput. Phys. 102, 211-224, the advecting flow of test
    # cases 1 and 2 (formulas from memory): u = u0 (cos lat cos a + sin lat cos lon sin a),
    # v = -u0 sin lon sin a, psi = -R u0 (sin lat cos a - cos lon cos lat sin a),
    # vorticity 2 psi / (-R^2) = 2 u0 / R (...), divergence 0
    R = EARTH_RADIUS
    u0 = 2 * math.pi * R / (12 * 86400.0)
    lat, lon = lat_lon(grid)
    u = u0 * (np.cos(lat) * math.cos(alpha) + np.sin(lat) * np.cos(lon) * math.sin(alpha))
    v = -u0 * np.sin(lon) * math.sin(alpha) + 0 * lat
    shape = np.sin(lat) * math.cos(alpha) - np.cos(lon) * np.cos(lat) * math.sin(alpha)
    flow = analyze_flow(u, v, grid, radius=R)
    assert flow.radius == R and flow.lmax == grid.lmax_exact
    assert rel_err(synthesize(flow.psi, grid), -R * u0 * shape) < 1e-13
    assert np.max(np.abs(flow.chi.coef)) < 1e-13 * np.max(np.abs(flow.psi.coef))
    zeta = synthesize(flow.vorticity(), grid)
    assert rel_err(zeta, 2 * u0 / R * shape) < 1e-13
    assert np.max(np.abs(synthesize(flow.divergence(), grid))) < 1e-13 * np.max(np.abs(zeta))
    east, north = synthesize_flow(flow, grid)
    assert np.max(np.abs(east - u)) < 1e-13 * u0 and np.max(np.abs(north - v)) < 1e-13 * u0


def rossby_haurwitz(R: float, omega: float, K: float, n: int):
    """Williamson et al. 1992 test case 6 (formulas from memory): streamfunction, u, v, vorticity
    as functions of (lat, lon) in radians."""
    def psi(lat, lon):
        return -R**2 * omega * np.sin(lat) + R**2 * K * np.cos(lat) ** n * np.sin(lat) * np.cos(n * lon)

    def u(lat, lon):
        return (R * omega * np.cos(lat) + R * K * np.cos(lat) ** (n - 1)
                * (n * np.sin(lat) ** 2 - np.cos(lat) ** 2) * np.cos(n * lon))

    def v(lat, lon):
        return -R * K * n * np.cos(lat) ** (n - 1) * np.sin(lat) * np.sin(n * lon)

    def zeta(lat, lon):
        return 2 * omega * np.sin(lat) - K * np.sin(lat) * np.cos(lat) ** n * (n * n + 3 * n + 2) * np.cos(n * lon)

    return psi, u, v, zeta


def sympy_laplacian_of(psi_expr, lat, lon, R):
    """Surface Laplacian in latitude/longitude, symbolically (sympy; common practice formula
    lap f = (1/(R^2 cos lat)) d/dlat(cos lat df/dlat) + (1/(R^2 cos^2 lat)) d2f/dlon2)."""
    expr = (sympy.diff(sympy.cos(lat) * sympy.diff(psi_expr, lat), lat) / (R**2 * sympy.cos(lat))
            + sympy.diff(psi_expr, lon, 2) / (R**2 * sympy.cos(lat) ** 2))
    return sympy.lambdify((lat, lon), sympy.simplify(expr), "numpy")


@pytest.mark.parametrize("grid", [Grid.gauss(31), Grid.equiangular(64, 64, "north")],
                         ids=["gauss", "north"])
@pytest.mark.reference
def test_rossby_haurwitz_wave_4(grid):
    # Williamson et al. 1992 test case 6: omega = K = 7.848e-6 s-1, wavenumber 4 (from memory)
    R, omega, K, n = EARTH_RADIUS, 7.848e-6, 7.848e-6, 4
    psi, u, v, zeta = rossby_haurwitz(R, omega, K, n)
    lat, lon = lat_lon(grid)
    flow = analyze_flow(u(lat, lon) + 0 * lon, v(lat, lon) + 0 * lat, grid, radius=R)
    psi_nodes = psi(lat, lon) + 0 * lon
    err_psi = rel_err(synthesize(flow.psi, grid), psi_nodes)
    chi_size = np.max(np.abs(flow.chi.coef)) / np.max(np.abs(flow.psi.coef))
    print(f"{grid.kind}: psi {err_psi:.1e}, chi / psi {chi_size:.1e}")
    assert err_psi < 1e-12
    assert chi_size < 1e-14  # rounding (measured 2e-17 to 7e-17)
    # the wave is degree 5 at most: psi has nothing above it
    assert np.max(np.abs(flow.psi.coef[6:])) < 1e-14 * np.max(np.abs(flow.psi.coef))
    # vorticity against the analytic Laplacian of psi, taken by sympy, and the textbook formula
    s_lat, s_lon = sympy.symbols("lat lon", real=True)
    s_psi = (-R**2 * omega * sympy.sin(s_lat)
             + R**2 * K * sympy.cos(s_lat) ** n * sympy.sin(s_lat) * sympy.cos(n * s_lon))
    laplacian = sympy_laplacian_of(s_psi, s_lat, s_lon, R)
    zeta_nodes = laplacian(lat, lon) + 0 * lon
    assert rel_err(zeta(lat, lon) + 0 * lon, zeta_nodes) < 1e-14
    assert rel_err(synthesize(flow.vorticity(), grid), zeta_nodes) < 1e-12
    east, north = synthesize_flow(flow, grid)
    assert rel_err(east, u(lat, lon) + 0 * lon) < 1e-13
    assert rel_err(north, v(lat, lon) + 0 * lat) < 1e-13


@pytest.mark.parametrize("radius", [None, 3.3895e6])
@pytest.mark.reference
def test_pure_gradient_and_pure_rotational_flows(rng, radius):
    # (u, v) = grad chi has no vorticity and psi = 0; k x grad psi has no divergence and
    # chi = 0; the divergence of grad chi is lap chi, -l(l+1)/R^2 per degree (common
    # practice). The gradient comes from sphex.filters.gradient, a scalar synthesis of
    # dLambda_lm/dtheta through orders m-1 and m+1, independent of the vector kernels.
    lmax = 40
    grid = Grid.gauss(lmax)
    chi = potential(lmax, rng, radius=radius)
    east, north = gradient(chi, grid)
    flow = analyze_flow(east, north, grid, radius=radius)
    assert rel_err(flow.chi.coef, chi.coef) < 1e-12
    assert np.max(np.abs(flow.psi.coef)) < 1e-13 * np.max(np.abs(chi.coef))
    r = 1.0 if radius is None else radius
    l = np.arange(lmax + 1)[:, None]
    assert rel_err(flow.divergence().coef, -l * (l + 1) / r**2 * chi.coef) < 1e-12
    assert np.max(np.abs(flow.vorticity().coef)) < 1e-13 * np.max(np.abs(flow.divergence().coef))
    psi = potential(lmax, rng, radius=radius)
    east, north = gradient(psi, grid)
    flow = analyze_flow(-north, east, grid, radius=radius)  # k x grad psi
    assert rel_err(flow.psi.coef, psi.coef) < 1e-12
    assert np.max(np.abs(flow.chi.coef)) < 1e-13 * np.max(np.abs(psi.coef))


def direct_sum(a: Harmonics, b: Harmonics, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """u = sum a dLambda/dtheta + i m b Lambda/sin(theta), v = sum i m a Lambda/sin(theta)
    - b dLambda/dtheta (times e^{i m lon}, both signs of m) at the grid's nodes, with Lambda and
    its theta derivative from scipy.special.sph_legendre_p(diff_n=1); the definition of the
    convention, summed term by term (no FFT)."""
    lmax = a.lmax
    theta = grid.colat
    phi = np.radians(grid.lon)
    u = np.zeros(grid.shape, dtype=complex)
    v = np.zeros(grid.shape, dtype=complex)
    for m in range(-lmax, lmax + 1):
        for l in range(abs(m), lmax + 1):
            lam, dlam = sps.sph_legendre_p(l, m, theta, diff_n=1)
            am = a[l, m]
            bm = b[l, m]
            z = 1j * m * lam / np.sin(theta)
            e = np.exp(1j * m * phi)
            u += np.outer(am * dlam + bm * z, e)
            v += np.outer(am * z - bm * dlam, e)
    assert np.max(np.abs(u.imag)) < 1e-12 * np.max(np.abs(u))
    return u.real, v.real


@pytest.mark.reference
def test_synthesis_matches_direct_sum_with_scipy(rng):
    # the components against the term-by-term sum of the convention with scipy.special
    # (see direct_sum)
    lmax = 12
    grid = Grid.equiangular(30, 27, "cells")  # below the degree: plain point evaluation
    a, b = potential(lmax, rng), potential(lmax, rng)
    u, v = direct_sum(a, b, grid)
    east, north = synthesize_flow(Flow(a, b), grid)
    assert rel_err(east, u) < 1e-13
    assert rel_err(north, v) < 1e-13


@pytest.mark.parametrize("grid", [Grid.equiangular(30, 26, "cells"),
                                  Grid.from_coords(Grid.gauss(14).lat, 360.0 * np.arange(26) / 26)],
                         ids=["cells", "gauss"])
@pytest.mark.reference
def test_synthesis_at_the_nyquist_order_matches_direct_sum_with_scipy(rng, grid):
    # a flow whose top order is nlon / 2 = 13: the inverse real FFT keeps only the real part
    # of that frequency, so the order must be folded onto the grid's longitudes first (the
    # term-by-term sum of the convention with scipy.special is the reference; see direct_sum)
    lmax = 13
    assert grid.nlon == 2 * lmax
    a, b = potential(lmax, rng), potential(lmax, rng)
    u, v = direct_sum(a, b, grid)
    east, north = synthesize_flow(Flow(a, b), grid)
    err = max(rel_err(east, u), rel_err(north, v))
    print(f"{grid.kind}: top order at nlon/2: {err:.1e}")
    assert err < 1e-13  # rounding (measured below 1e-14)


@pytest.mark.reference
def test_flow_on_a_grid_whose_longitudes_start_at_37_degrees():
    # the tilted solid-body rotation of Williamson et al. 1992 (formulas from memory, as in
    # test_solid_body_rotation) on a Gauss grid whose first longitude is 37 degrees, not 0:
    # psi (synthesised by the scalar transform) and the components synthesised from the flow
    # must be the closed forms at the grid's own longitudes
    R, alpha = EARTH_RADIUS, 0.7
    u0 = 2 * math.pi * R / (12 * 86400.0)
    grid = Grid.from_coords(Grid.gauss(15).lat, 37.0 + 360.0 * np.arange(32) / 32)
    assert grid.kind == "gauss" and grid.lon0 == 37.0
    lat, lon = lat_lon(grid)
    u = u0 * (np.cos(lat) * math.cos(alpha) + np.sin(lat) * np.cos(lon) * math.sin(alpha))
    v = -u0 * np.sin(lon) * math.sin(alpha) + 0 * lat
    shape = np.sin(lat) * math.cos(alpha) - np.cos(lon) * np.cos(lat) * math.sin(alpha)
    flow = analyze_flow(u, v, grid, radius=R)
    assert rel_err(synthesize(flow.psi, grid), -R * u0 * shape) < 1e-13
    assert np.max(np.abs(flow.chi.coef)) < 1e-13 * np.max(np.abs(flow.psi.coef))
    east, north = synthesize_flow(flow, grid)
    assert np.max(np.abs(east - u)) < 1e-13 * u0 and np.max(np.abs(north - v)) < 1e-13 * u0


@pytest.mark.parametrize("top", [True, False], ids=["near-the-largest-double", "tiny"])
@pytest.mark.reference
def test_extreme_values_of_one_component_are_rescaled_exactly(rng, top):
    # multiplying by a power of two is exact in binary floating point (common practice), so a
    # flow scaled by 2**k analyses and synthesises to 2**k times the unscaled results, bit for
    # bit, also when one component (or one potential) is zero and only the other is extreme:
    # near the top of the double range (largest value in [2**1021, 2**1022), where the sums
    # of the unscaled transform would overflow) and at 2**-1000
    lmax = 20
    grid = Grid.gauss(lmax)
    flow = random_flow(lmax, rng)
    _, north = synthesize_flow(flow, grid)
    east = np.zeros_like(north)
    power = 1022 - math.frexp(np.max(np.abs(north)))[1] if top else -1000
    plain = analyze_flow(east, north, grid)
    scaled = analyze_flow(east, np.ldexp(north, power), grid)
    for part in ("psi", "chi"):
        got, want = getattr(scaled, part).coef, getattr(plain, part).coef
        assert np.array_equal(np.ldexp(got.real, -power), want.real)
        assert np.array_equal(np.ldexp(got.imag, -power), want.imag)
    zero = Harmonics(np.zeros_like(flow.chi.coef))
    e1, n1 = synthesize_flow(Flow(zero, flow.chi), grid)
    power = 1021 - math.frexp(max(np.max(np.abs(e1)), np.max(np.abs(n1))))[1] if top else -1000
    chi = flow.chi.coef
    big = Harmonics(np.ldexp(chi.real, power) + 1j * np.ldexp(chi.imag, power))
    e2, n2 = synthesize_flow(Flow(zero, big), grid)
    assert np.array_equal(np.ldexp(e2, -power), e1) and np.array_equal(np.ldexp(n2, -power), n1)


# --------------------------------------------------------------------------------------
# Round trips and the degree limit
# --------------------------------------------------------------------------------------
@pytest.mark.slow
@pytest.mark.reference
def test_round_trip_gauss_high_degree(rng):
    # Gauss-Legendre with lmax+1 nodes integrates the vector products, polynomials of degree
    # <= 2 lmax in cos(colat), exactly (published method's stated property)
    lmax = 1023
    grid = Grid.gauss(lmax)
    flow = random_flow(lmax, rng, radius=EARTH_RADIUS)
    back = analyze_flow(*synthesize_flow(flow, grid), grid, radius=EARTH_RADIUS)
    err = flow_error(back, flow)
    print(f"Gauss vector round trip lmax={lmax}: {err:.2e}")
    assert err <= 1e-12, err
    # White psi and chi (the same size at every degree) give winds about lmax times larger
    # than the coefficients; like the scalar transform of a field of that size, the
    # analysis is then exact to rounding relative to the winds: the error of psi_lm is about
    # 1e-16 max|u| / sqrt(l(l+1)), 1e-10 at degree 1 here (measured), 2e-11 of max |psi_lm|.
    # Relative to the wind coefficients sqrt(l(l+1)) psi_lm it is rounding again.
    white = Flow(potential(lmax, rng), potential(lmax, rng))
    back = analyze_flow(*synthesize_flow(white, grid), grid)
    err = wind_error(back, white)
    print(f"Gauss vector round trip lmax={lmax}, white psi and chi: winds {err:.2e}, "
          f"psi and chi {flow_error(back, white):.2e}")
    assert err <= 1e-12, err


@pytest.mark.parametrize("layout,lmax,nlat", [
    ("poles", 255, 512), ("cells", 255, 512), ("north", 255, 512),
    ("poles", 64, 129), ("cells", 64, 129), ("north", 64, 129),
])
@pytest.mark.reference
def test_round_trip_equiangular_at_vector_limit(rng, layout, lmax, nlat):
    # Clenshaw-Curtis / Fejer / Driscoll-Healy rules on nlat rows are exact to degree
    # nlat - 1 in cos(colat) (published methods' stated property); the vector products
    # have degree <= 2 lmax
    grid = Grid.equiangular(nlat, 2 * lmax + 2, layout)
    assert grid.lmax_exact == lmax
    flow = random_flow(lmax, rng)
    err = flow_error(analyze_flow(*synthesize_flow(flow, grid), grid), flow)
    print(f"{layout} nlat={nlat} vector round trip lmax={lmax}: {err:.2e}")
    assert err <= 1e-11, err


VECTOR_LIMIT_GRIDS = [Grid.gauss(20, nlon=64)] + [
    Grid.equiangular(nlat, 64, layout) for layout in LAYOUTS for nlat in (41, 42)]


@pytest.mark.parametrize("grid", VECTOR_LIMIT_GRIDS, ids=lambda g: f"{g.kind}-{g.nlat}")
@pytest.mark.reference
def test_vector_limit_is_exact_and_sharp(rng, grid):
    # at the limit the round trip holds to rounding; one degree more is refused, and with
    # allow_aliasing=True the result is not exact: the quadrature meets polynomials of degree
    # 2 lmax + 2 in cos(colat), beyond its exactness (published rules' stated property;
    # measured errors 8e-6 (Clenshaw-Curtis) to 0.4 (Gauss), against rounding below 1e-14)
    limit = grid.lmax_exact
    flow = random_flow(limit, rng)
    exact = flow_error(analyze_flow(*synthesize_flow(flow, grid), grid), flow)
    above = random_flow(limit + 1, rng)
    east, north = synthesize_flow(above, grid)
    with pytest.raises(ValueError, match=rf"lmax={limit + 1} is above this grid's exact degree "
                                         rf"limit {limit}.*allow_aliasing=True"):
        analyze_flow(east, north, grid, lmax=limit + 1)
    aliased = flow_error(analyze_flow(east, north, grid, lmax=limit + 1, allow_aliasing=True), above)
    print(f"{grid.kind} nlat={grid.nlat}: at the limit {exact:.1e}, one degree above {aliased:.1e}")
    assert exact < 1e-13
    assert aliased > 1e-6


@pytest.mark.reference
def test_limit_in_longitude(rng):
    # 2 lmax + 1 longitudes separate orders |m| <= lmax (discrete orthogonality of
    # e^{i m lon}; common practice); with 2 lmax the top order aliases
    lmax = 10
    grid = Grid.gauss(lmax, nlon=2 * lmax + 1)
    flow = random_flow(lmax, rng)
    assert flow_error(analyze_flow(*synthesize_flow(flow, grid), grid), flow) < 1e-12
    coarse = Grid.equiangular(2 * lmax + 2, 2 * lmax, "cells")
    assert coarse.lmax_exact == lmax - 1
    aliased = analyze_flow(*synthesize_flow(flow, coarse), coarse, lmax=lmax, allow_aliasing=True)
    assert flow_error(aliased, flow) > 1e-3


# --------------------------------------------------------------------------------------
# Vorticity and divergence against finite differences; the divergence theorem
# --------------------------------------------------------------------------------------
def fourth_order_derivative(f: np.ndarray, step: float, axis: int, periodic: bool) -> np.ndarray:
    """(f[i-2] - 8 f[i-1] + 8 f[i+1] - f[i+2]) / (12 step); common practice. Non-periodic
    axes lose two points at each end (returned shorter)."""
    n = f.shape[axis]

    def shifted(k):  # f[i + k] for the points that keep two neighbours on each side
        if periodic:
            return np.roll(f, -k, axis=axis)
        return np.take(f, np.arange(2 + k, n - 2 + k), axis=axis)

    return (shifted(-2) - 8 * shifted(-1) + 8 * shifted(1) - shifted(2)) / (12 * step)


def finite_difference_errors(flow: Flow, degrees: float) -> list[float]:
    """Relative differences between sphex and fourth-order centred differences on an
    equiangular grid of the given spacing, rows within 80 degrees of the equator: the
    components from synthesised psi and chi, vorticity and divergence from the components."""
    R = flow.radius
    grid = Grid.equiangular(round(180 / degrees), round(360 / degrees), "cells")
    step = math.radians(degrees)
    inner = slice(2, -2)  # rows with two neighbours on each side
    keep = np.abs(grid.lat[inner]) <= 80.0
    coslat = np.cos(np.radians(grid.lat))[:, None]
    cos_inner = coslat[inner]

    def d_lat(f):  # rows run north to south
        return -fourth_order_derivative(f, step, 0, False)

    def d_lon(f):
        return fourth_order_derivative(f, 2 * math.pi / grid.nlon, 1, True)[inner]

    psi = synthesize(flow.psi, grid)
    chi = synthesize(flow.chi, grid)
    east, north = synthesize_flow(flow, grid)
    u_fd = -d_lat(psi) / R + d_lon(chi) / (R * cos_inner)
    v_fd = d_lon(psi) / (R * cos_inner) + d_lat(chi) / R
    analysed = analyze_flow(east, north, grid, lmax=flow.lmax, radius=R)
    zeta_fd = (d_lon(north) - d_lat(east * coslat)) / (R * cos_inner)
    delta_fd = (d_lon(east) + d_lat(north * coslat)) / (R * cos_inner)
    zeta = synthesize(analysed.vorticity(), grid)[inner]
    delta = synthesize(analysed.divergence(), grid)[inner]
    return [rel_err(fd[keep], exact[keep]) for fd, exact in
            ((u_fd, east[inner]), (v_fd, north[inner]), (zeta_fd, zeta), (delta_fd, delta))]


@pytest.mark.reference
def test_against_fourth_order_finite_differences(rng):
    # components, vorticity and divergence from fourth-order centred differences of
    # synthesised scalar values, away from the poles (common practice):
    # u = -(1/R) psi_lat + chi_lon / (R cos lat), v = psi_lon / (R cos lat) + chi_lat / R;
    # zeta = (v_lon - (u cos lat)_lat) / (R cos lat), delta = (u_lon + (v cos lat)_lat) / (R cos lat)
    R = EARTH_RADIUS
    flow = Flow(potential(10, rng, radius=R) * 1e7, potential(10, rng, radius=R) * 1e7)  # m2 s-1
    coarse = finite_difference_errors(flow, 0.5)
    fine = finite_difference_errors(flow, 0.25)
    print("FD errors (u, v, vorticity, divergence) at 0.5 deg:", " ".join(f"{e:.1e}" for e in coarse),
          "at 0.25 deg:", " ".join(f"{e:.1e}" for e in fine))
    for c, f in zip(coarse, fine):
        # the truncation error of the differences (measured 4e-8 to 1.4e-7 at 0.25 degrees)
        # falls like the fourth power of the spacing; a sign or factor error in the
        # convention would leave an O(1) difference
        assert f < 3e-7
        assert 12 < c / f < 20


@pytest.mark.reference
def test_divergence_theorem(rng):
    # Gauss's theorem on the sphere (common practice): the area mean of the divergence is
    # zero, and over the cap north of latitude lat0 the integral of the divergence equals
    # the outward flux -R cos(lat0) integral v(lat0, lon) dlon through its rim
    lmax, R = 12, EARTH_RADIUS
    flow = Flow(potential(lmax, rng, radius=R) * 1e7, potential(lmax, rng, radius=R) * 1e6)
    delta = flow.divergence()
    check = Grid.gauss(lmax + 4)
    values = synthesize(delta, check)
    assert abs(gauss_mean(values, check)) < 1e-15 * np.max(np.abs(values))
    ring = Grid.equiangular(37, 72, "poles")  # rows every 5 degrees
    row = int(np.argmin(np.abs(ring.lat - 30.0)))
    lat0 = math.radians(ring.lat[row])
    _, north = synthesize_flow(flow, ring)
    flux = -R * math.cos(lat0) * (2 * math.pi / ring.nlon) * north[row].sum()
    # cap integral: R^2 2 pi sum_l delta_l0 sqrt((2l+1)/(4 pi)) integral_{sin lat0}^1 P_l(x) dx,
    # the integral by numpy.polynomial.legendre (legint of the unit series)
    d = delta.coef[:, 0].real
    total = 0.0
    for l in range(lmax + 1):
        antiderivative = npleg.legint(np.eye(lmax + 1)[l])
        piece = npleg.legval(1.0, antiderivative) - npleg.legval(math.sin(lat0), antiderivative)
        total += d[l] * math.sqrt((2 * l + 1) / (4 * math.pi)) * piece
    cap = R**2 * 2 * math.pi * total
    print(f"cap integral {cap:.6e}, rim flux {flux:.6e}")
    assert abs(cap - flux) < 1e-12 * abs(flux)


# --------------------------------------------------------------------------------------
# Energy
# --------------------------------------------------------------------------------------
@pytest.mark.reference
def test_parseval_and_helmholtz_orthogonality(rng):
    # Parseval for vector fields: the kinetic-energy spectrum sums to the area mean of
    # (u^2 + v^2)/2, integrated with numpy.polynomial.legendre.leggauss on a grid fine enough
    # for |V|^2 (Cartesian components of a degree-L flow are polynomials of degree L + 1, so
    # |V|^2 has degree 2L + 2; common practice); the rotational and divergent parts are
    # orthogonal (Helmholtz), so their energies add up to the total
    lmax, R = 24, EARTH_RADIUS
    flow = Flow(potential(lmax, rng, radius=R) * 1e7, potential(lmax, rng, radius=R) * 3e6)
    fine = Grid.gauss(lmax + 8)
    rotational, divergent = kinetic_energy(flow)
    assert rotational.shape == divergent.shape == (lmax + 1,)
    assert rotational[0] == 0 and divergent[0] == 0
    east, north = synthesize_flow(flow, fine)
    total = gauss_mean((east**2 + north**2) / 2, fine)
    assert abs(rotational.sum() + divergent.sum() - total) < 1e-12 * total
    er, nr = synthesize_flow(flow.rotational(), fine)
    ed, nd = synthesize_flow(flow.divergent(), fine)
    assert abs(gauss_mean((er**2 + nr**2) / 2, fine) - rotational.sum()) < 1e-12 * total
    assert abs(gauss_mean((ed**2 + nd**2) / 2, fine) - divergent.sum()) < 1e-12 * total
    assert abs(gauss_mean(er * ed + nr * nd, fine)) < 1e-13 * total
    # per degree: the energy of the degree-l part alone
    only = np.zeros(lmax + 1)
    only[7] = 1.0
    e7, n7 = synthesize_flow(flow.filter(only), fine)
    assert abs(gauss_mean((e7**2 + n7**2) / 2, fine) - rotational[7] - divergent[7]) < 1e-12 * total


def test_kinetic_energy_conventions_batches_and_units(rng):
    # internal consistency: any convention gives the same spectrum; batches keep their axes;
    # the unit sphere is R = 1
    flow = random_flow(16, rng, batch=(2, 3), radius=2.0)
    rot, div = kinetic_energy(flow)
    assert rot.shape == div.shape == (2, 3, 17)
    other = Flow(flow.psi.to("schmidt", False), flow.chi.to("full", True))
    r2, d2 = kinetic_energy(other)
    assert np.allclose(r2, rot, rtol=1e-13, atol=0) and np.allclose(d2, div, rtol=1e-13, atol=0)
    unit = Flow(flow.psi.replace(radius=None), flow.chi.replace(radius=None))
    ru, du = kinetic_energy(unit)
    assert np.allclose(ru, 4 * rot, rtol=1e-14) and np.allclose(du, 4 * div, rtol=1e-14)
    with pytest.raises(ValueError, match="must be a sphex.flow.Flow.*analyze_flow"):
        kinetic_energy(flow.psi)


# --------------------------------------------------------------------------------------
# Flow operations
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("norm,condon_shortley", [("orthonormal", True), ("full", False),
                                                  ("schmidt", True)])
@pytest.mark.reference
def test_absolute_vorticity_adds_the_coriolis_parameter(rng, norm, condon_shortley):
    # planetary vorticity f = 2 Omega sin(lat) (common practice), Earth's rotation rate
    omega = 7.292115e-5
    base = random_flow(8, rng, radius=EARTH_RADIUS)
    flow = Flow(base.psi.to(norm, condon_shortley), base.chi.to(norm, condon_shortley))
    grid = Grid.gauss(8)
    lat, _ = lat_lon(grid)
    extra = synthesize(flow.vorticity(planetary_rotation=omega), grid) - synthesize(flow.vorticity(), grid)
    err = np.max(np.abs(extra - 2 * omega * np.sin(lat))) / (2 * omega)
    print(f"{norm}: {err:.1e}")
    assert err < 1e-13
    with pytest.raises(ValueError, match="planetary_rotation must be a finite rotation rate"):
        flow.vorticity(planetary_rotation=float("nan"))


def test_from_vorticity_divergence(rng):
    # internal consistency: psi and chi back from their Laplacians; degree 0 set to zero
    flow = random_flow(20, rng, radius=EARTH_RADIUS)
    zeta, delta = flow.vorticity(), flow.divergence()
    back = Flow.from_vorticity_divergence(zeta, delta)
    assert back.radius == EARTH_RADIUS and flow_error(back, flow) < 1e-14
    shifted = zeta.coef.copy()
    shifted[0, 0] = 5.0  # a mean vorticity has no flow on a closed sphere: ignored
    back = Flow.from_vorticity_divergence(zeta.replace(coef=shifted), delta)
    assert back.psi[0, 0] == 0 and back.chi[0, 0] == 0 and flow_error(back, flow) < 1e-14
    bare = Flow.from_vorticity_divergence(zeta.replace(radius=None), delta.replace(radius=None),
                                          radius=EARTH_RADIUS)
    assert bare.radius == EARTH_RADIUS and flow_error(bare, flow) < 1e-14
    unit = Flow.from_vorticity_divergence(zeta.replace(radius=None), delta.replace(radius=None))
    assert unit.radius is None
    assert np.allclose(unit.psi.coef, flow.psi.coef / EARTH_RADIUS**2, rtol=1e-14, atol=0)
    with pytest.raises(ValueError, match="zeta has radius .* but delta"):
        Flow.from_vorticity_divergence(zeta, delta.replace(radius=None))
    with pytest.raises(ValueError, match="radius=1.0 differs"):
        Flow.from_vorticity_divergence(zeta, delta, radius=1.0)


def test_parts_truncate_filter_and_conventions(rng):
    # internal consistency
    lmax = 16
    grid = Grid.gauss(lmax)
    flow = random_flow(lmax, rng)
    east, north = synthesize_flow(flow, grid)
    er, nr = synthesize_flow(flow.rotational(), grid)
    ed, nd = synthesize_flow(flow.divergent(), grid)
    assert rel_err(er + ed, east) < 1e-14 and rel_err(nr + nd, north) < 1e-14
    assert np.max(np.abs(flow.rotational().divergence().coef)) == 0
    assert np.max(np.abs(flow.divergent().vorticity().coef)) == 0
    assert flow.truncate(10).lmax == 10 and flow.truncate(20).lmax == 20
    assert flow_error(flow.truncate(20).truncate(lmax), flow) == 0
    w = np.linspace(1.0, 0.0, lmax + 1)
    filtered = flow.filter(w)
    assert rel_err(filtered.vorticity().coef, flow.vorticity().filter(w).coef) < 1e-15
    mixed = Flow(flow.psi.to("schmidt", False), flow.chi.to("unnormalized", True))
    assert mixed.chi.norm == "schmidt" and mixed.chi.condon_shortley is False
    em, nm = synthesize_flow(mixed, grid)
    assert rel_err(em, east) < 1e-13 and rel_err(nm, north) < 1e-13
    assert "Flow(lmax=16" in repr(flow)


def test_batches_match_one_by_one(rng):
    # internal consistency: leading axes are a batch done in one call
    lmax = 24
    grid = Grid.equiangular(50, 50, "poles")
    flow = random_flow(lmax, rng, batch=(2, 3))
    east, north = synthesize_flow(flow, grid)
    assert east.shape == north.shape == (2, 3) + grid.shape
    one = Flow(Harmonics(flow.psi.coef[1, 2]), Harmonics(flow.chi.coef[1, 2]))
    e1, n1 = synthesize_flow(one, grid)
    assert np.max(np.abs(east[1, 2] - e1)) <= 1e-13 * np.max(np.abs(e1))
    assert np.max(np.abs(north[1, 2] - n1)) <= 1e-13 * np.max(np.abs(n1))
    back = analyze_flow(east, north, grid)
    assert back.batch_shape == (2, 3) and flow_error(back, flow) < 1e-12
    single = analyze_flow(e1, n1, grid)
    assert np.max(np.abs(back.psi.coef[1, 2] - single.psi.coef)) <= 1e-13 * np.max(np.abs(single.psi.coef))


@pytest.mark.parametrize("grid", [Grid.gauss(255), Grid.equiangular(303, 304, "poles"),
                                  Grid.equiangular(304, 304, "north")],
                         ids=["gauss", "poles-odd", "north"])
def test_latitude_bands_give_the_same_flow(rng, monkeypatch, grid):
    # internal consistency: high degrees are transformed in latitude bands; bands of 64 pairs
    # (with an equator ring and an unpaired pole ring in them) must change nothing
    from sphex import rings

    lmax = min(grid.lmax_exact, 151)
    flow = random_flow(lmax, rng, batch=(2,))
    east, north = synthesize_flow(flow, grid)
    back = analyze_flow(east, north, grid, lmax=lmax)
    monkeypatch.setattr(rings, "BAND_BYTES", 1)
    assert len(rings.pair_bands(rings.latitude_pairs(grid).n, lmax + 1)) > 1
    be, bn = synthesize_flow(flow, grid)
    assert rel_err(be, east) < 1e-14 and rel_err(bn, north) < 1e-14
    assert flow_error(analyze_flow(east, north, grid, lmax=lmax), back) < 1e-14
    assert flow_error(back, flow) < 1e-12


# --------------------------------------------------------------------------------------
# Regridding and smoothing through psi and chi
# --------------------------------------------------------------------------------------
@pytest.mark.reference
def test_regrid_flow_is_exact_where_component_regridding_is_not(rng):
    # a band-limited flow moved from a Gauss grid to an equiangular one is the flow at the
    # new nodes; regridding u and v as scalars is not (they carry 1/cos(lat) and are not
    # band-limited as scalars; common practice)
    lmax = 20
    source = Grid.gauss(lmax)
    target = Grid.equiangular(46, 48, "poles")
    flow = random_flow(lmax, rng)
    east, north = synthesize_flow(flow, source)
    moved_e, moved_n = regrid_flow(east, north, source, target)
    want_e, want_n = synthesize_flow(flow, target)
    assert rel_err(moved_e, want_e) < 1e-12 and rel_err(moved_n, want_n) < 1e-12
    scalar_e = regrid(east, source, target, lmax=lmax)
    assert rel_err(scalar_e, want_e) > 1e-3
    with pytest.raises(ValueError, match="target must be a sphex.Grid"):
        regrid_flow(east, north, source, "0.25deg")


def test_smooth_flow_filters_vorticity_and_divergence_alike(rng):
    # internal consistency: smoothing acts on psi and chi with the same weights
    lmax = 31
    grid = Grid.gauss(lmax)
    flow = random_flow(lmax, rng, radius=EARTH_RADIUS)
    east, north = synthesize_flow(flow, grid)
    w = gaussian(1500.0, lmax, EARTH_RADIUS / 1000)
    se, sn = smooth_flow(east, north, grid, w)
    smoothed = analyze_flow(se, sn, grid, radius=EARTH_RADIUS)
    assert rel_err(smoothed.vorticity().coef, flow.vorticity().filter(w).coef) < 1e-12
    assert rel_err(smoothed.divergence().coef, flow.divergence().filter(w).coef) < 1e-12


# --------------------------------------------------------------------------------------
# Bad input
# --------------------------------------------------------------------------------------
def test_bad_input_is_refused_with_the_fix(rng):
    grid = Grid.gauss(8)
    east, north = synthesize_flow(random_flow(8, rng), grid)
    with pytest.raises(ValueError, match=r"east has shape \(9, 18\) but north has shape \(9, 17\).*same grid"):
        analyze_flow(east, north[:, :-1], grid)
    with pytest.raises(ValueError, match=r"east: values have shape \(9, 17\) but the grid is"):
        analyze_flow(east[:, :-1], north[:, :-1], grid)
    bad = north.copy()
    bad[3, 4] = np.nan
    with pytest.raises(ValueError, match="north: values contain 1 NaN or inf.*fill or mask"):
        analyze_flow(east, bad, grid)
    with pytest.raises(ValueError, match="lmax=9 is above this grid's exact degree limit 8"):
        analyze_flow(east, north, grid, lmax=9)
    with pytest.raises(ValueError, match="grid must be a sphex.Grid"):
        analyze_flow(east, north, (9, 18))
    for radius in (-1.0, 0.0, float("inf"), "6371 km"):
        with pytest.raises(ValueError, match="radius must be a"):
            analyze_flow(east, north, grid, radius=radius)
    a = potential(8, rng)
    with pytest.raises(ValueError, match="psi has lmax 8 but chi has lmax 6.*truncate"):
        Flow(a, a.truncate(6))
    with pytest.raises(ValueError, match="psi has radius None but chi 2.0.*same radius"):
        Flow(a, a.replace(radius=2.0))
    with pytest.raises(ValueError, match="psi has batch shape"):
        Flow(a, Harmonics(a.coef[None].repeat(2, axis=0)))
    with pytest.raises(ValueError, match="chi must be a sphex.Harmonics"):
        Flow(a, a.coef)
    with pytest.raises(ValueError, match="expected a sphex.flow.Flow.*analyze_flow"):
        synthesize_flow((a, a), grid)
