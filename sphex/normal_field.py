"""Normal gravity fields: level ellipsoids (GRS80, WGS84, your own) and spheres.

A normal field is the gravity field of a rotating body whose surface, an
ellipsoid of revolution, is an equipotential surface of its gravity potential
(gravitation plus centrifugal potential): the *level ellipsoid*.  Four
defining constants fix it completely (Heiskanen & Moritz 1967, sections 2-7
to 2-10; Moritz 1980):

* ``gm``: the gravitational constant times the mass (m^3 s^-2),
* ``semi_major_axis`` a (m),
* the shape: either the ``flattening`` f or the dynamic form factor ``j2``,
* ``angular_velocity`` omega (rad s^-1).

Everything else (eccentricity, normal gravity at the equator and the pole,
the even zonal coefficients J2..J20 of the gravitational potential, the
potential on the ellipsoid) is derived here with the closed formulas of the
level ellipsoid.  A body given without a shape (neither ``flattening`` nor
``j2``) is a sphere whose normal potential is ``GM / r`` only.

All quantities are SI.  Latitudes are in degrees; *geodetic* latitude is the
angle between the ellipsoid normal and the equator, *geocentric* latitude the
angle between the radius vector and the equator.

References
----------
Heiskanen, W. A., Moritz, H. (1967), Physical Geodesy, Freeman, San Francisco.
Moritz, H. (1980), Geodetic Reference System 1980, Bulletin Geodesique 54(3),
395-405 (reprinted in J. Geodesy 74 (2000), 128-133).
National Imagery and Mapping Agency (2000), Department of Defense World
Geodetic System 1984, Technical Report TR8350.2, third edition.
"""
from __future__ import annotations

import dataclasses
import functools
import math

import numpy as np

__all__ = ["NormalField", "GRS80", "WGS84", "normal_field", "ZONAL_COUNT"]

ZONAL_COUNT = 10  # J2 .. J20: J22 of the Earth's ellipsoid is below 1e-22
_SERIES_LIMIT = 0.5  # second eccentricity below which q0, q0' come from their series


def _q0(e2nd: float) -> float:
    """q0 = ((1 + 3/e'^2) arctan e' - 3/e') / 2 (Heiskanen & Moritz 1967, eq. 2-58).

    For small e' the closed form cancels in its leading digits, so the series
    q0 = sum_{n>=1} (-1)^(n+1) 2n e'^(2n+1) / ((2n+1)(2n+3)) is used there."""
    x = e2nd
    if x >= _SERIES_LIMIT:
        return 0.5 * ((1.0 + 3.0 / x**2) * math.atan(x) - 3.0 / x)
    total = 0.0
    for n in range(1, 60):
        term = (-1) ** (n + 1) * 2.0 * n * x ** (2 * n + 1) / ((2 * n + 1) * (2 * n + 3))
        total += term
        if abs(term) < 1e-20 * abs(total):
            break
    return total


def _q0_prime(e2nd: float) -> float:
    """q0' = 3 (1 + 1/e'^2)(1 - arctan(e')/e') - 1 (Heiskanen & Moritz 1967, eq. 2-67).

    Series for small e': q0' = sum_{n>=1} (-1)^(n+1) 6 e'^(2n) / ((2n+1)(2n+3))."""
    x = e2nd
    if x >= _SERIES_LIMIT:
        return 3.0 * (1.0 + 1.0 / x**2) * (1.0 - math.atan(x) / x) - 1.0
    total = 0.0
    for n in range(1, 60):
        term = (-1) ** (n + 1) * 6.0 * x ** (2 * n) / ((2 * n + 1) * (2 * n + 3))
        total += term
        if abs(term) < 1e-20 * abs(total):
            break
    return total


def _positive(value, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a positive number, got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    return v


@dataclasses.dataclass(frozen=True)
class NormalField:
    """The normal gravity field of a level ellipsoid, or of a sphere.

    Parameters
    ----------
    gm : float
        Gravitational constant times mass, m^3 s^-2.
    semi_major_axis : float
        Equatorial radius a in metres (the radius of a sphere).
    flattening, j2 : float, optional
        The shape: give one of them (the other is derived and filled in), or
        neither for a sphere.
    angular_velocity : float
        omega in rad s^-1 (default 0, no rotation).
    name : str
        A label.

    Notes
    -----
    With ``e'`` the second eccentricity, ``m = omega^2 a^2 b / GM`` and
    ``q0``, ``q0'`` as in Heiskanen & Moritz (1967, eqs. 2-58, 2-67):

    * ``J2 = (e^2 / 3) (1 - (2/15) m e' / q0)`` (H&M eq. 2-90); when ``j2`` is
      given, ``e^2`` is found from this relation by fixed-point iteration
      (as for GRS80, Moritz 1980);
    * ``J2n = (-1)^(n+1) 3 e^(2n) / ((2n+1)(2n+3)) (1 - n + 5 n J2 / e^2)``
      (H&M eq. 2-92);
    * normal gravity at the equator and the pole,
      ``gamma_a = GM/(ab) (1 - m - (m/6) e' q0'/q0)`` and
      ``gamma_b = GM/a^2 (1 + (m/3) e' q0'/q0)`` (H&M eq. 2-73);
    * the potential on the ellipsoid ``U0 = GM/E arctan e' + omega^2 a^2 / 3``,
      ``E = sqrt(a^2 - b^2)`` (H&M eq. 2-61).

    To change one constant, build a new object from the defining four (the
    derived shape constant is filled in, and a given pair must agree).

    Examples
    --------
    >>> from sphex.normal_field import GRS80
    >>> round(GRS80.gravity_equator, 10), round(1 / GRS80.flattening, 9)
    (9.7803267715, 298.257222101)
    """

    gm: float
    semi_major_axis: float
    flattening: float | None = None
    j2: float | None = None
    angular_velocity: float = 0.0
    name: str = "custom"

    def __post_init__(self):
        set_ = functools.partial(object.__setattr__, self)
        set_("gm", _positive(self.gm, "gm"))
        set_("semi_major_axis", _positive(self.semi_major_axis, "semi_major_axis"))
        omega = float(self.angular_velocity)
        if not (math.isfinite(omega) and omega >= 0):
            raise ValueError(f"angular_velocity must be a non-negative number of rad/s, got {omega!r}")
        set_("angular_velocity", omega)
        set_("name", str(self.name))
        f, j2 = self.flattening, self.j2
        if f is None and j2 is None:
            return  # a sphere
        if f is not None:
            f = float(f)
            if not (math.isfinite(f) and 0 < f < 1):
                raise ValueError(f"flattening must lie in (0, 1), got {self.flattening!r}; "
                                 "give neither flattening nor j2 for a sphere")
            derived = self._j2_from_e2(f * (2.0 - f))
            if j2 is not None and not math.isclose(float(j2), derived, rel_tol=1e-9):
                raise ValueError(f"flattening {f!r} gives J2 = {derived!r}, not the j2 = {j2!r} given: "
                                 "give only one of flattening and j2")
            set_("flattening", f)
            set_("j2", derived)
        else:
            j2 = float(j2)
            if not (math.isfinite(j2) and j2 > 0):
                raise ValueError(f"j2 must be a positive number (an oblate body), got {self.j2!r}; "
                                 "give neither flattening nor j2 for a sphere")
            e2 = self._e2_from_j2(j2)
            set_("j2", j2)
            set_("flattening", 1.0 - math.sqrt(1.0 - e2))

    # -- the shape ----------------------------------------------------------------------
    def _m(self, e2: float) -> float:
        a = self.semi_major_axis
        b = a * math.sqrt(1.0 - e2)
        return self.angular_velocity**2 * a**2 * b / self.gm

    def _j2_from_e2(self, e2: float) -> float:
        e2nd = math.sqrt(e2 / (1.0 - e2))
        return e2 / 3.0 * (1.0 - 2.0 / 15.0 * self._m(e2) * e2nd / _q0(e2nd))

    def _e2_from_j2(self, j2: float) -> float:
        """e^2 = 3 J2 + (4/15) (omega^2 a^3 / GM) e^3 / (2 q0), iterated (Moritz 1980)."""
        a = self.semi_major_axis
        spin = self.angular_velocity**2 * a**3 / self.gm
        e2 = 3.0 * j2
        for _ in range(200):
            e2nd = math.sqrt(e2 / (1.0 - e2))
            new = 3.0 * j2 + 4.0 / 15.0 * spin * e2**1.5 / (2.0 * _q0(e2nd))
            if not (0 < new < 1):
                raise ValueError(f"j2 = {j2!r} with GM, a and omega given has no level ellipsoid "
                                 "(the eccentricity leaves (0, 1)); check the constants")
            if abs(new - e2) <= 2e-16 * new:
                return new
            e2 = new
        raise ValueError(f"no level ellipsoid found for j2 = {j2!r} (the iteration for the "
                         "eccentricity did not converge); check the constants")

    @property
    def is_ellipsoid(self) -> bool:
        """True for a level ellipsoid, False for a sphere."""
        return self.flattening is not None

    @property
    def semi_minor_axis(self) -> float:
        """b = a (1 - f), metres (a for a sphere)."""
        return self.semi_major_axis * (1.0 - (self.flattening or 0.0))

    @property
    def eccentricity_squared(self) -> float:
        """First eccentricity squared, e^2 = f (2 - f) (0 for a sphere)."""
        f = self.flattening or 0.0
        return f * (2.0 - f)

    @property
    def second_eccentricity(self) -> float:
        """e' = sqrt(a^2 - b^2) / b."""
        e2 = self.eccentricity_squared
        return math.sqrt(e2 / (1.0 - e2))

    @property
    def centrifugal_ratio(self) -> float:
        """m = omega^2 a^2 b / GM, the ratio of centrifugal to gravitational force at the equator."""
        return self._m(self.eccentricity_squared)

    def _ratio_q(self) -> float:
        e2nd = self.second_eccentricity
        return e2nd * _q0_prime(e2nd) / _q0(e2nd)

    @property
    def gravity_equator(self) -> float:
        """Normal gravity at the equator, m s^-2 (GM/a^2 for a sphere)."""
        a, b, m = self.semi_major_axis, self.semi_minor_axis, self.centrifugal_ratio
        if not self.is_ellipsoid:
            return self.gm / a**2
        return self.gm / (a * b) * (1.0 - m - m / 6.0 * self._ratio_q())

    @property
    def gravity_pole(self) -> float:
        """Normal gravity at the poles, m s^-2 (GM/a^2 for a sphere)."""
        a, m = self.semi_major_axis, self.centrifugal_ratio
        if not self.is_ellipsoid:
            return self.gm / a**2
        return self.gm / a**2 * (1.0 + m / 3.0 * self._ratio_q())

    @property
    def potential_on_ellipsoid(self) -> float:
        """U0, the normal potential on the ellipsoid (m^2 s^-2); GM/a for a sphere."""
        a = self.semi_major_axis
        if not self.is_ellipsoid:
            return self.gm / a
        e2nd = self.second_eccentricity
        linear = a * math.sqrt(self.eccentricity_squared)
        return self.gm / linear * math.atan(e2nd) + self.angular_velocity**2 * a**2 / 3.0

    def zonal_coefficients(self, count: int = ZONAL_COUNT) -> np.ndarray:
        """The even zonal coefficients J2, J4, ..., J(2 count) of the normal gravitational potential.

        ``U_grav = GM/r (1 - sum_n J2n (a/r)^(2n) P2n(sin phi'))``, with phi' the geocentric
        latitude; the fully normalised coefficients are ``C_2n,0 = -J2n / sqrt(4n + 1)``.
        All zero for a sphere.  Formula: Heiskanen & Moritz (1967) eq. 2-92.
        """
        out = np.zeros(int(count))
        if not self.is_ellipsoid:
            return out
        e2, j2 = self.eccentricity_squared, self.j2
        for n in range(1, int(count) + 1):
            out[n - 1] = ((-1) ** (n + 1) * 3.0 * e2**n / ((2 * n + 1) * (2 * n + 3))
                          * (1.0 - n + 5.0 * n * j2 / e2))
        return out

    # -- gravity and coordinates ---------------------------------------------------------
    def surface_gravity(self, geodetic_lat_deg) -> np.ndarray:
        """Normal gravity on the ellipsoid by Somigliana's closed formula, m s^-2.

        ``gamma = (a gamma_a cos^2 phi + b gamma_b sin^2 phi) / sqrt(a^2 cos^2 phi + b^2 sin^2 phi)``
        (Heiskanen & Moritz 1967, eq. 2-78), evaluated in the equivalent form
        ``gamma_a (1 + k sin^2 phi) / sqrt(1 - e^2 sin^2 phi)``, ``k = b gamma_b / (a gamma_a) - 1``.
        """
        lat = _latitudes(geodetic_lat_deg, "geodetic_lat_deg")
        s2 = np.sin(np.radians(lat)) ** 2
        ga, gb = self.gravity_equator, self.gravity_pole
        k = self.semi_minor_axis * gb / (self.semi_major_axis * ga) - 1.0
        return ga * (1.0 + k * s2) / np.sqrt(1.0 - self.eccentricity_squared * s2)

    def geocentric(self, geodetic_lat_deg, height=0.0) -> tuple[np.ndarray, np.ndarray]:
        """Geocentric latitude (degrees) and radius (m) of points given by geodetic latitude
        and height above the ellipsoid.

        ``N = a / sqrt(1 - e^2 sin^2 phi)``, ``p = (N + h) cos phi``,
        ``z = (N (1 - e^2) + h) sin phi`` (common practice), then
        ``r = sqrt(p^2 + z^2)`` and ``phi' = atan2(z, p)``.  Exact.
        """
        lat = _latitudes(geodetic_lat_deg, "geodetic_lat_deg")
        h = np.asarray(height, dtype=np.float64)
        phi = np.radians(lat)
        e2 = self.eccentricity_squared
        sin, cos = np.sin(phi), np.cos(phi)
        cos = np.where(np.abs(lat) == 90.0, 0.0, cos)
        n = self.semi_major_axis / np.sqrt(1.0 - e2 * sin**2)
        p = (n + h) * cos
        z = (n * (1.0 - e2) + h) * sin
        radius = np.hypot(p, z)
        if np.any(radius <= 0):
            raise ValueError("height puts a point at or below the centre of the body; "
                             "give heights above -b")
        return np.degrees(np.arctan2(z, p)), radius

    def _zonal_terms(self, radius, geocentric_lat_deg):
        """(r, sin phi', cos phi', list of (J2n (a/r)^2n, P2n, dP2n/dt))."""
        r = np.asarray(radius, dtype=np.float64)
        phi = np.radians(_latitudes(geocentric_lat_deg, "geocentric_lat_deg"))
        t, c = np.sin(phi), np.cos(phi)
        terms = []
        if self.is_ellipsoid:
            jn = self.zonal_coefficients()
            p_prev, p = np.ones_like(t), t
            d_prev, d = np.zeros_like(t), np.ones_like(t)
            for k in range(1, 2 * ZONAL_COUNT):  # build P_(k+1) from P_k, P_(k-1)
                p_next = ((2 * k + 1) * t * p - k * p_prev) / (k + 1)
                d_next = d_prev + (2 * k + 1) * p  # P'_(k+1) = P'_(k-1) + (2k+1) P_k
                p_prev, p, d_prev, d = p, p_next, d, d_next
                degree = k + 1
                if degree % 2 == 0:
                    ratio = (self.semi_major_axis / r) ** degree
                    terms.append((degree, jn[degree // 2 - 1] * ratio, p, d))
        return r, t, c, terms

    def potential_at(self, radius, geocentric_lat_deg) -> np.ndarray:
        """Normal gravity potential (gravitational plus centrifugal), m^2 s^-2.

        ``U = GM/r (1 - sum_n J2n (a/r)^(2n) P2n(sin phi')) + omega^2 r^2 cos^2 phi' / 2``
        (Heiskanen & Moritz 1967, eqs. 2-88, 2-89), summed to J20.  Equal to
        :attr:`potential_on_ellipsoid` everywhere on the ellipsoid.
        """
        r, t, c, terms = self._zonal_terms(radius, geocentric_lat_deg)
        series = 1.0 - sum(j * p for _, j, p, _ in terms)
        return self.gm / r * series + 0.5 * (self.angular_velocity * r * c) ** 2

    def gravity_at(self, radius, geocentric_lat_deg) -> np.ndarray:
        """Magnitude of normal gravity, ``|grad U|``, at any point outside the body, m s^-2.

        From the gradient of :meth:`potential_at` (radial and latitude
        derivatives of the zonal series and of the centrifugal potential);
        on the ellipsoid it equals :meth:`surface_gravity`, above it it
        replaces the usual series in the height.  ``GM / r^2`` for a sphere.
        """
        r, t, c, terms = self._zonal_terms(radius, geocentric_lat_deg)
        if not self.is_ellipsoid:
            return self.gm / r**2 + 0.0 * t
        w2 = self.angular_velocity**2
        # U_grav = GM/r - sum GM J2n a^2n r^-(2n+1) P2n(t), t = sin phi'
        radial = -self.gm / r**2 + sum((n + 1) * self.gm / r**2 * j * p for n, j, p, _ in terms)
        radial = radial + w2 * r * c**2
        north = -sum(self.gm / r**2 * j * d for _, j, _, d in terms) * c  # (1/r) dU/dphi'
        north = north - w2 * r * c * t
        return np.hypot(radial, north)


def _latitudes(values, name: str) -> np.ndarray:
    lat = np.asarray(values, dtype=np.float64)
    if not np.all(np.isfinite(lat)) or np.any(np.abs(lat) > 90.0):
        raise ValueError(f"{name} must be latitudes in degrees within [-90, 90]")
    return lat


# Moritz (1980): the four defining constants of the Geodetic Reference System 1980.
GRS80 = NormalField(gm=3.986005e14, semi_major_axis=6378137.0, j2=108263e-8,
                    angular_velocity=7292115e-11, name="GRS80")
# NIMA TR8350.2 (2000), table 3.1: the defining constants of WGS 84.
WGS84 = NormalField(gm=3.986004418e14, semi_major_axis=6378137.0, flattening=1.0 / 298.257223563,
                    angular_velocity=7292115e-11, name="WGS84")

_NAMED = {"grs80": GRS80, "wgs84": WGS84}


def normal_field(spec) -> NormalField | None:
    """A :class:`NormalField` from a name (``"grs80"``, ``"wgs84"``), an instance, or None."""
    if spec is None or isinstance(spec, NormalField):
        return spec
    if isinstance(spec, str) and spec.lower() in _NAMED:
        return _NAMED[spec.lower()]
    raise ValueError(f"unknown normal field {spec!r}: use 'grs80', 'wgs84', a "
                     "sphex.normal_field.NormalField(gm=..., semi_major_axis=..., flattening=... or "
                     "j2=..., angular_velocity=...) of your own, or None to remove nothing")
