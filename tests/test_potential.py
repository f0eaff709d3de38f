"""Checks of sphex.normal_field and sphex.potential: normal gravity, gravity and magnetic
quantities from coefficient models, degree variances."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special

from sphex import Grid, Harmonics
from sphex.legendre import for_order
from sphex.models import PotentialModel
from sphex.normal_field import GRS80, WGS84, NormalField
from sphex.potential import (
    degree_variances,
    error_degree_variances,
    gravity,
    kaula_rule,
    magnetic,
    magnetic_power,
    normal_gravity,
)

ARCSEC = 180.0 * 3600.0 / math.pi


# ----------------------------------------------------------------- normal fields
@pytest.mark.reference
def test_grs80_normal_gravity_at_equator_and_pole():
    # Moritz 1980, Geodetic Reference System 1980, derived constants (from memory)
    g = normal_gravity([0.0, 90.0, -90.0], "grs80")
    assert g[0] == pytest.approx(9.7803267715, abs=5e-11)
    assert g[1] == pytest.approx(9.8321863685, abs=5e-11)
    assert g[2] == g[1]
    assert GRS80.gravity_equator == pytest.approx(9.7803267715, abs=5e-11)
    assert GRS80.gravity_pole == pytest.approx(9.8321863685, abs=5e-11)


@pytest.mark.reference
def test_grs80_derived_constants():
    # Moritz 1980, derived constants (from memory), to the digits printed there
    J = GRS80.zonal_coefficients()
    assert J[0] == 108263e-8  # the defining J2 itself
    assert J[1] == pytest.approx(-0.00000237091222, rel=5e-9)
    assert J[2] == pytest.approx(0.00000000608347, rel=1e-6)
    assert J[3] == pytest.approx(-0.00000000001427, rel=5e-4)
    assert GRS80.eccentricity_squared == pytest.approx(0.00669438002290, rel=2e-13)
    assert 1.0 / GRS80.flattening == pytest.approx(298.257222101, abs=5e-10)
    assert GRS80.semi_minor_axis == pytest.approx(6356752.3141, abs=5e-5)
    assert GRS80.centrifugal_ratio == pytest.approx(0.00344978600308, rel=2e-12)
    assert GRS80.potential_on_ellipsoid == pytest.approx(62636860.850, abs=5e-4)


@pytest.mark.reference
def test_wgs84_derived_constants():
    # NIMA TR8350.2 (2000), tables 3.3 and 3.4 (from memory)
    assert WGS84.gravity_equator == pytest.approx(9.7803253359, abs=5e-11)
    # printed 9.8321849378; computed 9.83218493786: the table drops rather than rounds the last
    # digit (or the value is misremembered by one unit), hence 1e-10
    assert WGS84.gravity_pole == pytest.approx(9.8321849378, abs=1e-10)
    assert -WGS84.j2 / math.sqrt(5.0) == pytest.approx(-0.484166774985e-3, rel=1e-11)  # C20
    assert WGS84.semi_minor_axis == pytest.approx(6356752.3142, abs=5e-5)
    assert WGS84.potential_on_ellipsoid == pytest.approx(62636851.7146, abs=5e-4)
    g = normal_gravity([0.0, 90.0], "wgs84")
    assert g == pytest.approx([9.7803253359, 9.8321849378], abs=1e-10)


@pytest.mark.parametrize("field", [GRS80, WGS84], ids=["grs80", "wgs84"])
@pytest.mark.reference
def test_ellipsoid_is_a_level_surface(field):
    # the level ellipsoid's defining property (Heiskanen & Moritz 1967, section 2-7): U = U0 on
    # it, and |grad U| there is Somigliana's normal gravity (eq. 2-78)
    lat = np.linspace(-90.0, 90.0, 37)
    lat_c, r = field.geocentric(lat, 0.0)
    np.testing.assert_allclose(field.potential_at(r, lat_c), field.potential_on_ellipsoid, rtol=1e-14)
    np.testing.assert_allclose(field.gravity_at(r, lat_c), field.surface_gravity(lat), rtol=1e-13)


@pytest.mark.reference
def test_normal_gravity_above_the_ellipsoid():
    # Hofmann-Wellenhof & Moritz 2005, eq. 2-215 (from memory): the second-order series in the
    # height; it drops terms of order f^2 h / a, so agreement to 2e-8 at 1 km (measured 1.05e-8)
    lat = np.linspace(-90.0, 90.0, 19)
    h = 1000.0
    a, f, m = GRS80.semi_major_axis, GRS80.flattening, GRS80.centrifugal_ratio
    s2 = np.sin(np.radians(lat)) ** 2
    series = normal_gravity(lat) * (1 - 2 / a * (1 + f + m - 2 * f * s2) * h + 3 * h**2 / a**2)
    lat_c, r = GRS80.geocentric(lat, h)
    np.testing.assert_allclose(GRS80.gravity_at(r, lat_c), series, rtol=2e-8)


@pytest.mark.reference
def test_geocentric_coordinates():
    # common practice: a point at geodetic latitude phi and height h has
    # p = (N + h) cos phi, z = (N (1 - e^2) + h) sin phi with N = a / sqrt(1 - e^2 sin^2 phi);
    # on the ellipsoid tan(phi') = (1 - e^2) tan(phi) (common practice)
    lat = np.array([-60.0, -10.0, 25.0, 45.0, 80.0])
    lat_c, r = GRS80.geocentric(lat, 0.0)
    e2 = GRS80.eccentricity_squared
    np.testing.assert_allclose(np.tan(np.radians(lat_c)), (1 - e2) * np.tan(np.radians(lat)), rtol=1e-14)
    assert GRS80.geocentric(90.0, 0.0)[1] == pytest.approx(GRS80.semi_minor_axis, rel=1e-15)
    assert GRS80.geocentric(0.0, 100.0)[1] == pytest.approx(GRS80.semi_major_axis + 100.0, rel=1e-15)


def test_own_normal_fields():
    # a sphere: only GM/r (and GM/R^2 on it)
    moon = NormalField(gm=4.9028e12, semi_major_axis=1737.4e3, name="sphere")
    assert not moon.is_ellipsoid and moon.flattening is None and moon.j2 is None
    assert moon.surface_gravity(30.0) == pytest.approx(4.9028e12 / 1737.4e3**2, rel=1e-15)
    assert moon.gravity_at(1800e3, 10.0) == pytest.approx(4.9028e12 / 1800e3**2, rel=1e-15)
    assert np.all(moon.zonal_coefficients() == 0)
    # the same ellipsoid from its flattening or from the J2 derived from it
    a = NormalField(gm=3.986005e14, semi_major_axis=6378137.0, flattening=GRS80.flattening,
                    angular_velocity=7292115e-11)
    assert a.j2 == pytest.approx(108263e-8, rel=1e-12)
    with pytest.raises(ValueError, match="give only one"):
        NormalField(gm=3.986005e14, semi_major_axis=6378137.0, flattening=1 / 300.0, j2=108263e-8)
    with pytest.raises(ValueError, match="flattening"):
        NormalField(gm=1.0, semi_major_axis=1.0, flattening=1.5)
    with pytest.raises(ValueError, match="gm"):
        NormalField(gm=-1.0, semi_major_axis=1.0)
    with pytest.raises(ValueError, match="unknown normal field"):
        normal_gravity(0.0, "grs67")


# ----------------------------------------------------------------- point mass
GM = 3.986e14
R = 6371.0e3
LAT0, LON0 = 31.0, -47.0  # the point above the buried mass


def point_mass_harmonics(depth: float, lmax: int) -> Harmonics:
    """Dimensionless coefficients of V = GM / |x - s| for a point mass at radius R - depth.

    Common practice: 1/|x - s| = (1/r) sum_l (rho/r)^l P_l(cos psi), and the addition theorem
    P_l(cos psi) = 4 pi / (2l + 1) sum_m Y_lm(x) conj(Y_lm(s)); so with V = GM/r sum (R/r)^l V_l
    the coefficients are (1 - d/R)^l 4 pi / (2l + 1) conj(Y_lm(s))."""
    rho = R - depth
    coef = np.zeros((lmax + 1, lmax + 1), complex)
    theta = math.radians(90.0 - LAT0)
    for m in range(lmax + 1):
        lam = for_order(m, lmax, [theta], norm="orthonormal", condon_shortley=True)[:, 0]
        l = np.arange(m, lmax + 1)
        coef[m:, m] = (rho / R) ** l * 4 * np.pi / (2 * l + 1) * lam * np.exp(-1j * m * math.radians(LON0))
    return Harmonics(coef, norm="orthonormal", condon_shortley=True, radius=R)


def point_mass_field(depth: float, r, lat_deg, lon_deg) -> dict:
    """Closed forms (common practice) of the point mass's potential and its derivatives."""
    rho = R - depth
    phi, lam = np.radians(lat_deg), np.radians(lon_deg)
    p0, l0 = math.radians(LAT0), math.radians(LON0)
    cos_psi = np.sin(phi) * math.sin(p0) + np.cos(phi) * math.cos(p0) * np.cos(lam - l0)
    ell = np.sqrt(r * r + rho * rho - 2 * r * rho * cos_psi)
    radial = GM * (r - rho * cos_psi) / ell**3  # -dV/dr
    d_cos_dlat = np.cos(phi) * math.sin(p0) - np.sin(phi) * math.cos(p0) * np.cos(lam - l0)
    d_cos_dlon = -np.cos(phi) * math.cos(p0) * np.sin(lam - l0)
    return {
        "potential": GM / ell,
        "disturbance": radial,
        "anomaly": radial - 2 * GM / (r * ell),
        "radial_gradient": GM * (3 * (r - rho * cos_psi) ** 2 / ell**5 - 1 / ell**3),
        "dlat": GM * r * rho / ell**3 * d_cos_dlat,  # dV/dlat
        "dlon_over_cos": GM * r * rho / ell**3 * d_cos_dlon / np.cos(phi),
    }


def truncation_degree(ratio: float, power: int) -> int:
    """Smallest L with ratio^L (L + 2)^power below 1e-16 (the series' tail negligible)."""
    L = 1
    while ratio**L * (L + 2) ** power > 1e-16:
        L += 1
    return L


@pytest.mark.parametrize("norm, cs", [("orthonormal", True), ("full", False), ("schmidt", False)])
@pytest.mark.reference
def test_point_mass_quantities_at_height(norm, cs):
    depth, height = 0.2 * R, 0.05 * R
    r = R + height
    lmax = truncation_degree((R - depth) / r, 2)
    h = point_mass_harmonics(depth, lmax).to(norm, cs)
    grid = Grid.gauss(90)
    quantities = ["anomaly", "disturbance", "radial_gradient", "height_anomaly",
                  "deflection_north", "deflection_east"]
    got = gravity(h, grid, quantities, height=height, normal=None, gm=GM)
    ref = point_mass_field(depth, r, grid.lat[:, None], grid.lon[None, :])
    gamma = GM / r**2  # without a normal field gamma is GM / r^2
    expected = {
        "anomaly": ref["anomaly"],
        "disturbance": ref["disturbance"],
        "radial_gradient": ref["radial_gradient"],
        "height_anomaly": ref["potential"] / gamma,
        "deflection_north": -ref["dlat"] / (r * gamma) * ARCSEC,
        "deflection_east": -ref["dlon_over_cos"] / (r * gamma) * ARCSEC,
    }
    for name in quantities:
        err = np.max(np.abs(got[name] - expected[name])) / np.max(np.abs(expected[name]))
        assert err < 1e-10, (name, err)  # measured 2.3e-15 to 9.9e-15
    # one quantity alone gives the same array
    np.testing.assert_array_equal(gravity(h, grid, "anomaly", height=height, normal=None, gm=GM),
                                  got["anomaly"])


@pytest.mark.reference
def test_point_mass_on_the_ellipsoid_with_the_normal_field_removed():
    # geodetic latitude and ellipsoidal height -> geocentric position (common practice), then the
    # closed-form point mass minus the GRS80 normal potential's zonal series
    # (Heiskanen & Moritz 1967, eq. 2-88, with scipy.special.eval_legendre)
    depth, height = 0.2 * R, 1500.0
    lmax = truncation_degree((R - depth) / GRS80.semi_minor_axis, 2)
    h = point_mass_harmonics(depth, lmax)
    grid = Grid.equiangular(37, 72, "poles")
    got = gravity(h, grid, ["height_anomaly", "disturbance"], height=height, gm=GM,
                  normal="grs80", surface="ellipsoid")
    a, e2 = GRS80.semi_major_axis, GRS80.eccentricity_squared
    phi = np.radians(grid.lat)
    n = a / np.sqrt(1 - e2 * np.sin(phi) ** 2)
    p, z = (n + height) * np.cos(phi), (n * (1 - e2) + height) * np.sin(phi)
    r = np.hypot(p, z)[:, None]
    lat_c = np.degrees(np.arctan2(z, p))[:, None]
    ref = point_mass_field(depth, r, lat_c, grid.lon[None, :])
    t = np.sin(np.radians(lat_c))
    J = GRS80.zonal_coefficients()
    U = GRS80.gm / r * (1 - sum(J[k - 1] * (a / r) ** (2 * k) * special.eval_legendre(2 * k, t)
                                for k in range(1, 11)))
    dU_dr = -GRS80.gm / r**2 * (1 - sum((2 * k + 1) * J[k - 1] * (a / r) ** (2 * k)
                                        * special.eval_legendre(2 * k, t) for k in range(1, 11)))
    gamma = GRS80.gravity_at(r[:, 0], lat_c[:, 0])[:, None]
    zeta = (ref["potential"] - U) / gamma
    disturbance = ref["disturbance"] + dU_dr
    for name, expected in (("height_anomaly", zeta), ("disturbance", disturbance)):
        err = np.max(np.abs(got[name] - expected)) / np.max(np.abs(expected))
        assert err < 1e-10, (name, err)  # measured 4.5e-15, 9.5e-15


def scattered_points(n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Seeded random points, the poles and the point above the mass among them, as a 2-D array."""
    rng = np.random.default_rng(seed)
    lat = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    lon = rng.uniform(-180, 540, n)
    lat[:3], lon[:3] = [90.0, -90.0, LAT0], [12.0, 0.0, LON0]
    return lat.reshape(2, -1), lon.reshape(2, -1)


@pytest.mark.reference
def test_point_mass_quantities_at_scattered_points():
    depth, height = 0.2 * R, 0.05 * R
    r = R + height
    lmax = truncation_degree((R - depth) / r, 2)
    h = point_mass_harmonics(depth, lmax).to("full", False)
    lat, lon = scattered_points(40, seed=12)
    quantities = ["anomaly", "disturbance", "radial_gradient", "height_anomaly",
                  "deflection_north", "deflection_east"]
    got = gravity(h, (lat, lon), quantities, height=height, normal=None, gm=GM)
    ref = point_mass_field(depth, r, lat, lon)
    gamma = GM / r**2
    north = -ref["dlat"] / (r * gamma) * ARCSEC
    east = -ref["dlon_over_cos"] / (r * gamma) * ARCSEC
    expected = {"anomaly": ref["anomaly"], "disturbance": ref["disturbance"],
                "radial_gradient": ref["radial_gradient"], "height_anomaly": ref["potential"] / gamma,
                "deflection_north": north, "deflection_east": east}
    for name in quantities:
        assert got[name].shape == lat.shape
        # at the poles east and north refer to the meridian lon, as the closed form's do
        err = np.max(np.abs(got[name] - expected[name])) / np.max(np.abs(expected[name]))
        assert err < 1e-10, (name, err)
    # at points on the ellipsoid: the same as the grid computation at the grid's nodes (19
    # latitudes: 19 radii, so the gradient comes from value sums, except next to the poles)
    grid = Grid.equiangular(19, 12, "poles")
    mesh_lat, mesh_lon = np.meshgrid(grid.lat, grid.lon, indexing="ij")
    on_grid = gravity(h, grid, ["anomaly", "deflection_north"], height=900.0, gm=GM,
                      surface="ellipsoid")
    at_points = gravity(h, (mesh_lat, mesh_lon), ["anomaly", "deflection_north"], height=900.0,
                        gm=GM, surface="ellipsoid")
    for name in on_grid:
        np.testing.assert_allclose(at_points[name], on_grid[name], rtol=0,
                                   atol=1e-12 * np.max(np.abs(on_grid[name])))


def normal_field_model(field: NormalField, gm: float, radius: float, lmax: int = 24) -> Harmonics:
    """The normal field's gravitational potential written as a model with another GM and radius:
    C_00 = GM_n / GM, C_2n,0 = -J2n / sqrt(4n + 1) (GM_n / GM) (a / R)^2n (fully normalised)."""
    C = np.zeros((lmax + 1, lmax + 1))
    C[0, 0] = field.gm / gm
    for k, j in enumerate(field.zonal_coefficients(), start=1):
        C[2 * k, 0] = -j / math.sqrt(4 * k + 1) * field.gm / gm * (field.semi_major_axis / radius) ** (2 * k)
    return Harmonics.from_cos_sin(C, 0 * C, norm="full", condon_shortley=False, radius=radius)


@pytest.mark.parametrize("surface", ["sphere", "ellipsoid"])
def test_normal_field_as_model_leaves_nothing(surface):
    # the disturbing potential of the normal field itself is zero whatever GM and radius the
    # coefficients are scaled to (internal consistency of the rescaling)
    h = normal_field_model(GRS80, 3.9860044e14, 6378136.3).to("orthonormal", True)
    grid = Grid.gauss(30)
    got = gravity(h, grid, ["geoid", "anomaly", "deflection_north"], gm=3.9860044e14,
                  surface=surface)
    assert np.max(np.abs(got["geoid"])) < 1e-8          # metres; the geoid is ~1e2
    assert np.max(np.abs(got["anomaly"])) < 1e-12       # m s^-2; anomalies are ~1e-3
    assert np.max(np.abs(got["deflection_north"])) < 1e-9  # arcseconds


def test_gravity_with_a_model_and_a_batch():
    h = normal_field_model(GRS80, 3.986004415e14, 6378136.3)
    model = PotentialModel(harmonics=h, gm=3.986004415e14, name="normal")
    grid = Grid.gauss(20)
    # the zonal degree-2 term of WGS84 differs from GRS80's: the difference is what remains
    got = gravity(model, grid, "geoid", normal="wgs84")
    expected = gravity(h, grid, "geoid", normal="wgs84", gm=3.986004415e14)
    np.testing.assert_array_equal(got, expected)
    assert 0.0 < np.max(np.abs(got)) < 2.0  # metres: GRS80 and WGS84 differ by millimetres in shape
    batch = h.replace(coef=np.stack([h.coef, h.coef]))
    two = gravity(batch, grid, "anomaly", gm=3.986004415e14)
    assert two.shape == (2,) + grid.shape
    np.testing.assert_allclose(two[1], gravity(h, grid, "anomaly", gm=3.986004415e14), rtol=0, atol=1e-18)


def test_gravity_errors():
    h = point_mass_harmonics(0.2 * R, 10)
    grid = Grid.gauss(10)
    with pytest.raises(ValueError, match="pass gm="):
        gravity(h, grid, "anomaly")
    with pytest.raises(ValueError, match="reference radius"):
        gravity(h.replace(radius=None), grid, "anomaly", gm=GM)
    with pytest.raises(ValueError, match="unknown quantity 'bouguer'"):
        gravity(h, grid, "bouguer", gm=GM)
    with pytest.raises(ValueError, match="a name or a list of names"):
        gravity(h, grid, None, gm=GM)
    with pytest.raises(ValueError, match="geoid lies on the reference surface"):
        gravity(h, grid, "geoid", height=100.0, gm=GM)
    with pytest.raises(ValueError, match="needs a reference ellipsoid"):
        gravity(h, grid, "anomaly", gm=GM, normal=None, surface="ellipsoid")
    with pytest.raises(ValueError, match="surface must be"):
        gravity(h, grid, "anomaly", gm=GM, surface="geoid")
    with pytest.raises(ValueError, match="overflows"):
        gravity(point_mass_harmonics(0.2 * R, 400), grid, "anomaly", gm=GM, height=-0.9 * R)
    with pytest.raises(ValueError, match="pair \\(lat, lon\\)"):
        gravity(h, "everywhere", "anomaly", gm=GM)
    with pytest.raises(ValueError, match="latitudes must lie in"):
        gravity(h, (np.array([95.0]), np.array([0.0])), "anomaly", gm=GM)
    magnetic_model = PotentialModel(harmonics=h.replace(units="nT"), kind="magnetic")
    with pytest.raises(ValueError, match="use sphex.potential.magnetic"):
        gravity(magnetic_model, grid, "anomaly", gm=GM)
    with pytest.raises(ValueError, match="belongs to another body; use normal='sphere'"):
        gravity(h, grid, "anomaly", gm=4.9e12)  # a moon's GM against the Earth's normal field
    with pytest.raises(ValueError, match="drop gm"):
        gravity(PotentialModel(harmonics=h, gm=GM), grid, "anomaly", gm=GM)


# ----------------------------------------------------------------- magnetism
A = 6371200.0


def dipole(g10: float, g11: float, h11: float) -> Harmonics:
    C = np.zeros((2, 2))
    S = np.zeros((2, 2))
    C[1, 0], C[1, 1], S[1, 1] = g10, g11, h11
    return Harmonics.from_cos_sin(C, S, norm="schmidt", condon_shortley=False, radius=A, units="nT")


def dipole_field(g10, g11, h11, position, north, east, up):
    """Closed-form dipole field (common practice): V = a^3 (m . x) / |x|^3 with
    m = (g11, h11, g10) in Schmidt form, so B = -grad V = a^3 (3 (m . x^) x^ - m) / |x|^3;
    returned as (X, Y, Z) in tesla along the given unit vectors (Z = down)."""
    m = np.array([g11, h11, g10])[:, None, None]
    r = np.sqrt(np.sum(position**2, axis=0))
    unit = position / r
    B = A**3 * (3 * np.sum(m * unit, axis=0) * unit - m) / r**3 * 1e-9
    return np.sum(B * north, axis=0), np.sum(B * east, axis=0), -np.sum(B * up, axis=0)


def local_frame(lat_deg, lon_deg):
    phi, lam = np.radians(lat_deg), np.radians(lon_deg)
    phi, lam = np.broadcast_arrays(phi, lam)
    north = np.stack([-np.sin(phi) * np.cos(lam), -np.sin(phi) * np.sin(lam), np.cos(phi)])
    east = np.stack([-np.sin(lam), np.cos(lam), 0 * lam])
    up = np.stack([np.cos(phi) * np.cos(lam), np.cos(phi) * np.sin(lam), np.sin(phi)])
    return north, east, up


@pytest.mark.parametrize("g", [(-29400.0, 0.0, 0.0), (-29400.0, -1450.0, 4650.0)], ids=["axial", "tilted"])
@pytest.mark.reference
def test_dipole_components_on_the_sphere(g):
    height = 350e3
    grid = Grid.gauss(12)
    north, east, up = local_frame(grid.lat[:, None], grid.lon[None, :])
    X, Y, Z = dipole_field(*g, (A + height) * up, north, east, up)
    got = magnetic(dipole(*g), grid, list(("north", "east", "down", "horizontal", "total")), height=height)
    F = np.sqrt(X**2 + Y**2 + Z**2)
    for name, expected in (("north", X), ("east", Y), ("down", Z), ("horizontal", np.hypot(X, Y)),
                           ("total", F)):
        assert np.max(np.abs(got[name] - expected)) < 1e-13 * np.max(F), name  # measured 1e-15


@pytest.mark.reference
def test_dipole_declination_and_inclination_at_chosen_points():
    # axial dipole: D = 0 and tan I = 2 tan(latitude) (common practice)
    grid = Grid.equiangular(19, 36, "cells")
    got = magnetic(dipole(-30000.0, 0.0, 0.0), grid, ["declination", "inclination"])
    rows = [2, 6, 9, 13, 17]  # chosen latitudes, both hemispheres
    np.testing.assert_allclose(got["declination"][rows], 0.0, atol=1e-9)
    expected = np.degrees(np.arctan(2 * np.tan(np.radians(grid.lat[rows]))))
    np.testing.assert_allclose(got["inclination"][rows], expected[:, None] + 0 * grid.lon, atol=1e-10)
    # tilted dipole at chosen grid points against the closed-form field
    g = (-29400.0, -1450.0, 4650.0)
    got = magnetic(dipole(*g), grid, ["declination", "inclination"], height=100e3)
    for i, k in [(1, 0), (4, 7), (9, 20), (12, 33), (18, 11)]:
        north, east, up = local_frame(grid.lat[i], grid.lon[k])
        X, Y, Z = dipole_field(*g, (A + 100e3) * up[:, None, None], north[:, None, None],
                               east[:, None, None], up[:, None, None])
        assert got["declination"][i, k] == pytest.approx(math.degrees(math.atan2(Y[0, 0], X[0, 0])), abs=1e-10)
        assert got["inclination"][i, k] == pytest.approx(
            math.degrees(math.atan2(Z[0, 0], math.hypot(X[0, 0], Y[0, 0]))), abs=1e-10)


@pytest.mark.reference
def test_dipole_in_the_geodetic_frame():
    # geodetic position and the geodetic frame's unit vectors built directly (common practice),
    # independent of the rotation formula used by sphex
    g = (-29400.0, -1450.0, 4650.0)
    height = 2000.0
    grid = Grid.gauss(10)
    a, e2 = WGS84.semi_major_axis, WGS84.eccentricity_squared
    phi = np.radians(grid.lat)[:, None]
    lam = np.radians(grid.lon)[None, :]
    n = a / np.sqrt(1 - e2 * np.sin(phi) ** 2)
    position = np.stack(np.broadcast_arrays((n + height) * np.cos(phi) * np.cos(lam),
                                            (n + height) * np.cos(phi) * np.sin(lam),
                                            (n * (1 - e2) + height) * np.sin(phi)))
    north, east, up = local_frame(grid.lat[:, None], grid.lon[None, :])
    X, Y, Z = dipole_field(*g, position, north, east, up)
    got = magnetic(dipole(*g), grid, ["north", "east", "down"], height=height, surface="ellipsoid")
    scale = np.max(np.sqrt(X**2 + Y**2 + Z**2))
    for name, expected in (("north", X), ("east", Y), ("down", Z)):
        assert np.max(np.abs(got[name] - expected)) < 1e-13 * scale, name


def test_magnetic_conventions_batch_and_errors():
    h = dipole(-29400.0, -1450.0, 4650.0)
    grid = Grid.gauss(8)
    ref = magnetic(h, grid, "down")
    other = h.to("orthonormal", True)
    np.testing.assert_allclose(magnetic(other, grid, "down"), ref, rtol=0, atol=1e-13 * np.abs(ref).max())
    tesla = h.replace(coef=h.coef * 1e-9, units="T")
    np.testing.assert_allclose(magnetic(tesla, grid, "down"), ref, rtol=1e-14)
    model = PotentialModel(harmonics=h.replace(coef=np.stack([h.coef, 2 * h.coef])), kind="magnetic")
    two = magnetic(model, grid, "total")
    assert two.shape == (2,) + grid.shape
    np.testing.assert_allclose(two[1], 2 * two[0], rtol=1e-14)
    with pytest.raises(ValueError, match="units 'nT' or 'T'"):
        magnetic(h.replace(units=None), grid, "down")
    with pytest.raises(ValueError, match="unknown component 'up'"):
        magnetic(h, grid, "up")
    with pytest.raises(ValueError, match="use sphex.potential.gravity"):
        magnetic(PotentialModel(harmonics=h, gm=1.0), grid, "down")


@pytest.mark.reference
def test_magnetic_power_is_the_mean_square_field():
    # Lowes 1966: sum_l (l+1) (a/r)^(2l+4) sum_m (g^2 + h^2) is the mean of |B|^2 over the sphere
    rng = np.random.default_rng(7)
    L = 6
    C = np.tril(rng.standard_normal((L + 1, L + 1))) * 1000.0
    S = np.tril(rng.standard_normal((L + 1, L + 1))) * 1000.0
    C[0, 0] = 0.0
    S[:, 0] = 0.0
    h = Harmonics.from_cos_sin(C, S, norm="schmidt", condon_shortley=False, radius=A, units="nT")
    grid = Grid.gauss(2 * L + 4)  # |B|^2 has degree 2 L + ...: this grid integrates it exactly
    height = 400e3
    F = magnetic(h, grid, "total", height=height)
    mean_square = grid.integrate(F**2) / (4 * np.pi)
    power = magnetic_power(h, height=height)
    assert power.sum() == pytest.approx(mean_square, rel=1e-13)
    l = np.arange(L + 1)
    by_hand = (l + 1) * (A / (A + height)) ** (2 * l + 4) * np.sum(C**2 + S**2, axis=1) * 1e-18
    np.testing.assert_allclose(power, by_hand, rtol=1e-14)


# ----------------------------------------------------------------- degree variances
def test_degree_variances_and_errors_by_hand():
    C = np.array([[1.0, 0, 0], [0, 0, 0], [-4.8e-4, 2e-10, 2.4e-6]])
    S = np.array([[0.0, 0, 0], [0, 0, 0], [0, 1.4e-9, -1.4e-6]])
    sC = np.array([[0.0, 0, 0], [0, 0, 0], [1e-11, 2e-11, 3e-11]])
    sS = np.array([[0.0, 0, 0], [0, 0, 0], [0, 4e-11, 5e-11]])
    h = Harmonics.from_cos_sin(C, S, norm="full", condon_shortley=False, radius=6378136.3)
    sig = Harmonics.from_cos_sin(sC, sS, norm="full", condon_shortley=False, radius=6378136.3)
    model = PotentialModel(harmonics=h, gm=3.986004415e14, sigmas=sig, errors="formal")
    dv = degree_variances(model)
    expected = [1.0, 0.0, (-4.8e-4) ** 2 + 2e-10**2 + 1.4e-9**2 + 2.4e-6**2 + 1.4e-6**2]
    np.testing.assert_allclose(dv, expected, rtol=1e-14)
    ev = error_degree_variances(model)
    np.testing.assert_allclose(ev, [0.0, 0.0, 1e-22 + 4e-22 + 9e-22 + 16e-22 + 25e-22], rtol=1e-14)
    # in another normalisation: Schmidt coefficients are the full ones times sqrt(2l+1)
    np.testing.assert_allclose(degree_variances(model, norm="schmidt"), np.array(expected) * [1, 3, 5],
                               rtol=1e-14)
    np.testing.assert_allclose(degree_variances(h.to("orthonormal", True), norm="full"), expected,
                               rtol=1e-14)
    with pytest.raises(ValueError, match="no standard deviations"):
        error_degree_variances(PotentialModel(harmonics=h, gm=1.0))


@pytest.mark.reference
def test_kaula_rule():
    # Kaula 1966: RMS of a fully normalised coefficient about 1e-5 / l^2, so the degree
    # variance is (2l + 1) 1e-10 / l^4
    k = kaula_rule(50)
    assert np.all(np.isnan(k[:2]))
    l = np.arange(2, 51)
    np.testing.assert_allclose(k[2:], (2 * l + 1) * 1e-10 / l**4, rtol=1e-15)
    np.testing.assert_allclose(kaula_rule(10, constant=2e-5)[2:], 4 * kaula_rule(10)[2:], rtol=1e-15)


@pytest.mark.reference
def test_dipole_at_scattered_points_on_the_sphere_and_ellipsoid():
    g = (-29400.0, -1450.0, 4650.0)
    lat, lon = scattered_points(30, seed=7)
    height = 420e3
    north, east, up = local_frame(lat, lon)
    X, Y, Z = dipole_field(*g, (A + height) * up, north, east, up)
    got = magnetic(dipole(*g), (lat, lon), ["north", "east", "down", "declination", "inclination"],
                   height=height)
    F = np.sqrt(X**2 + Y**2 + Z**2)
    for name, expected in (("north", X), ("east", Y), ("down", Z)):
        assert got[name].shape == lat.shape
        assert np.max(np.abs(got[name] - expected)) < 1e-13 * np.max(F), name
    away = np.abs(lat) < 90.0  # D is the angle of the meridian's frame, defined off the poles
    np.testing.assert_allclose(got["declination"][away], np.degrees(np.arctan2(Y, X))[away], atol=1e-9)
    np.testing.assert_allclose(got["inclination"], np.degrees(np.arctan2(Z, np.hypot(X, Y))), atol=1e-9)
    # geodetic points: position and frame built directly (common practice)
    a, e2 = WGS84.semi_major_axis, WGS84.eccentricity_squared
    phi, lam = np.radians(lat), np.radians(lon)
    n = a / np.sqrt(1 - e2 * np.sin(phi) ** 2)
    position = np.stack([(n + 2000.0) * np.cos(phi) * np.cos(lam),
                         (n + 2000.0) * np.cos(phi) * np.sin(lam),
                         (n * (1 - e2) + 2000.0) * np.sin(phi)])
    X, Y, Z = dipole_field(*g, position, north, east, up)
    got = magnetic(dipole(*g), (lat, lon), ["north", "east", "down"], height=2000.0,
                   surface="ellipsoid")
    scale = np.max(np.sqrt(X**2 + Y**2 + Z**2))
    for name, expected in (("north", X), ("east", Y), ("down", Z)):
        assert np.max(np.abs(got[name] - expected)) < 1e-13 * scale, name


def test_gradients_at_many_radii_equal_those_point_by_point():
    # on the ellipsoid every latitude has its own radius: the gradient then comes from value
    # sums (away from the poles); one point at a time it comes from the gradient kernel
    rng = np.random.default_rng(13)
    L = 13
    C = np.tril(rng.standard_normal((L + 1, L + 1))) * 100
    S = np.tril(rng.standard_normal((L + 1, L + 1))) * 100
    S[:, 0] = 0
    h = Harmonics.from_cos_sin(C, S, norm="schmidt", condon_shortley=False, radius=A, units="nT")
    lat = np.concatenate([rng.uniform(-90, 90, 30), [89.0, 89.4, 89.5, 89.99, -89.3, 90.0]])
    lon = rng.uniform(0, 360, lat.size)
    got = magnetic(h, (lat, lon), ["north", "east"], height=2000.0, surface="ellipsoid")
    scale = max(np.abs(got["north"]).max(), np.abs(got["east"]).max())
    for i in range(lat.size):
        one = magnetic(h, (lat[i:i + 1], lon[i:i + 1]), ["north", "east"], height=2000.0,
                       surface="ellipsoid")
        for name in ("north", "east"):
            assert abs(got[name][i] - one[name][0]) < 1e-13 * scale, (name, lat[i])
