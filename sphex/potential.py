"""Gravity and magnetic quantities from potential coefficient models.

Gravity (spherical approximation).  A model's gravitational potential is

    V(r, lat, lon) = GM/r sum_l (R/r)^l V_l(lat, lon),

with ``V_l`` the degree-l part of the dimensionless coefficients (any
normalisation; the exchange files use the fully normalised ``C_lm, S_lm``).
The disturbing potential ``T = V - U`` removes the gravitational part of a
normal field (:mod:`sphex.normal_field`): its degree 0 ``GM_normal / r`` and
its even zonal terms ``J2..J20``, both rescaled to the model's GM and
reference radius (Heiskanen & Moritz 1967, section 2-13).  Then, for
``T = GM/r sum_l (R/r)^l T_l``:

* ``height_anomaly`` (m): ``T / gamma``, Bruns' formula (H&M eq. 2-144);
* ``geoid`` (m): the same on the reference surface (height 0);
* ``disturbance`` (m s^-2): ``-dT/dr = GM/r^2 sum (l+1) (R/r)^l T_l``;
* ``anomaly`` (m s^-2): ``-dT/dr - 2T/r = GM/r^2 sum (l-1) (R/r)^l T_l``, the
  fundamental equation of physical geodesy in spherical approximation
  (H&M eqs. 2-148, 2-151);
* ``radial_gradient`` (s^-2): ``d2T/dr2 = GM/r^3 sum (l+1)(l+2) (R/r)^l T_l``;
* ``deflection_north`` (arcsec): ``xi = -(1/(r gamma)) dT/dlat``;
* ``deflection_east`` (arcsec): ``eta = -(1/(r gamma cos lat)) dT/dlon``
  (H&M section 2-22).

``gamma`` is the magnitude of normal gravity at the computation point
(:meth:`~sphex.normal_field.NormalField.gravity_at`), ``GM/r^2`` without a
normal field.  Hofmann-Wellenhof & Moritz (2005), sections 2.12-2.15, give
the same formulas.

Magnetism.  ``V = R sum_l (R/r)^(l+1) sum_m (g cos m lon + h sin m lon) P_l^m``
(Schmidt semi-normalised, the trade's convention; any other convention of the
coefficients is converted by the transforms) and ``B = -grad V``: north
``X = -(1/r) dV/dlat``, east ``Y = -(1/(r cos lat)) dV/dlon``, down
``Z = dV/dr``, ``H = sqrt(X^2 + Y^2)``, ``F = sqrt(H^2 + Z^2)``,
declination ``D = atan2(Y, X)``, inclination ``I = atan2(Z, H)`` (degrees).

Where the values are computed.  ``surface="sphere"`` (the default): the
grid's latitudes are geocentric and the points lie on the sphere of radius
``R + height`` (R the model's reference radius).  ``surface="ellipsoid"``:
the grid's latitudes are geodetic and ``height`` is above the ellipsoid of the
normal field (gravity) or of ``ellipsoid`` (magnetism); each ring is moved to
its geocentric latitude and radius, and magnetic X and Z are rotated into the
local geodetic frame.  Gravity quantities stay the spherical-approximation
ones at the geocentric point (radial derivative, not the derivative along the
ellipsoid normal; the two directions differ by up to 0.19 degrees on the
Earth).

Evaluation is by the fast transforms on a :class:`~sphex.grids.Grid`
(:func:`~sphex.transform.synthesize_rings`: the radial factors are per-degree
weights applied inside the Legendre stage, one set per ring radius, so the
coefficients are not copied per quantity), or, for a pair ``(lat, lon)`` of
arrays, by the exact point sums of :func:`sphex.points.evaluate` (about
``(lmax+1)^2 / 2`` recursion steps per point, each point at its own radius).
Gradients come from :func:`sphex.points.evaluate_gradient` once per distinct
radius when there are few radii; with many (points on the ellipsoid), from
three value sums at the points' own radii (``df/dlon`` and ``cos(lat)
df/dlat`` as expansions of degree lmax + 1), except within 0.57 degrees of a
pole, where the per-radius path keeps full precision.  The one place that evaluates is :func:`_evaluate`.

Units are SI throughout, except declination and inclination (degrees) and
deflections of the vertical (arcseconds).  Magnetic fields are in tesla.

References
----------
Heiskanen, W. A., Moritz, H. (1967), Physical Geodesy, Freeman, San Francisco.
Hofmann-Wellenhof, B., Moritz, H. (2005), Physical Geodesy, Springer, Vienna.
Kaula, W. M. (1966), Theory of Satellite Geodesy, Blaisdell, Waltham.
Lowes, F. J. (1966), Mean-square values on sphere of spherical harmonic vector
fields, J. Geophys. Res. 71(8), 2179.
"""
from __future__ import annotations

import math
import numbers

import numpy as np

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.legendre import norm_column
from sphex.limits import check_memory, whole_number
from sphex.models import PotentialModel
from sphex.normal_field import GRS80, WGS84, ZONAL_COUNT, NormalField, normal_field
from sphex.points import check_points, evaluate, evaluate_gradient
from sphex.transform import synthesize_rings

__all__ = ["gravity", "magnetic", "normal_gravity", "degree_variances",
           "error_degree_variances", "crossing_degree", "kaula_rule", "magnetic_power",
           "GRAVITY_QUANTITIES", "MAGNETIC_COMPONENTS", "NormalField", "GRS80", "WGS84"]

GRAVITY_QUANTITIES = ("geoid", "height_anomaly", "anomaly", "disturbance", "radial_gradient",
                      "deflection_north", "deflection_east")
MAGNETIC_COMPONENTS = ("north", "east", "down", "horizontal", "total", "declination",
                       "inclination")
SURFACES = ("sphere", "ellipsoid")
ARCSECONDS_PER_RADIAN = 180.0 * 3600.0 / math.pi
_TESLA_PER_UNIT = {"nT": 1e-9, "T": 1.0}


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def _names(requested, valid: tuple, what: str) -> tuple[list[str], bool]:
    single = isinstance(requested, str)
    try:
        names = [requested] if single else list(requested)
    except TypeError:
        raise ValueError(f"{what} must be a name or a list of names from {', '.join(valid)}, "
                         f"got {requested!r}") from None
    if not names:
        raise ValueError(f"no {what} asked for; choose from {', '.join(valid)}")
    for name in names:
        if name not in valid:
            raise ValueError(f"unknown {what} {name!r}; choose from {', '.join(valid)}")
    return list(dict.fromkeys(names)), single


def _height(height) -> float:
    if isinstance(height, bool) or not isinstance(height, numbers.Real):
        raise ValueError(f"height must be one number of metres, got {height!r}")
    value = float(height)
    if not math.isfinite(value):
        raise ValueError(f"height must be finite, got {height!r}")
    return value


def _check_surface(surface) -> str:
    if surface not in SURFACES:
        raise ValueError(f"surface must be 'sphere' (geocentric latitudes, height above the "
                         f"reference sphere) or 'ellipsoid' (geodetic latitudes, ellipsoidal "
                         f"height), got {surface!r}")
    return surface


def _check_where(grid) -> Grid | tuple[np.ndarray, np.ndarray]:
    if isinstance(grid, Grid):
        return grid
    if isinstance(grid, tuple) and len(grid) == 2:
        return check_points(*grid)
    raise ValueError(f"grid must be a sphex.Grid (Grid.gauss, Grid.equiangular, Grid.from_coords) "
                     f"or a pair (lat, lon) of arrays in degrees for scattered points, got "
                     f"{type(grid).__name__}")


def _gravity_source(model, gm) -> tuple[Harmonics, float]:
    if isinstance(model, PotentialModel):
        if model.kind != "gravity":
            raise ValueError(f"{model.name or 'the model'} is a {model.kind} model; use "
                             "sphex.potential.magnetic for it")
        if gm is not None and model.gm is not None:
            raise ValueError(f"the model states GM = {model.gm!r}; drop gm={gm!r}")
        h, gm = model.harmonics, model.gm if model.gm is not None else gm
    elif isinstance(model, Harmonics):
        h = model
    else:
        raise ValueError(f"model must be a PotentialModel (sphex.models.open_model) or Harmonics "
                         f"with radius set, got {type(model).__name__}")
    if h.radius is None:
        raise ValueError("the coefficients have no reference radius: set it with "
                         "h.replace(radius=metres)")
    if gm is None:
        raise ValueError("GM of the model is unknown: pass gm= (m^3 s^-2), for example "
                         "gm=3.986004415e14 for the Earth")
    gm = float(gm)
    if not (math.isfinite(gm) and gm > 0):
        raise ValueError(f"gm must be a positive number of m^3 s^-2, got {gm!r}")
    return h, gm


def _magnetic_source(model) -> tuple[Harmonics, float]:
    if isinstance(model, PotentialModel):
        if model.kind != "magnetic":
            raise ValueError(f"{model.name or 'the model'} is a {model.kind} model; use "
                             "sphex.potential.gravity for it")
        h = model.harmonics
    elif isinstance(model, Harmonics):
        h = model
    else:
        raise ValueError(f"model must be a PotentialModel (sphex.models.open_model) or Harmonics "
                         f"with radius and units set, got {type(model).__name__}")
    if h.radius is None:
        raise ValueError("the coefficients have no reference radius: set it with "
                         "h.replace(radius=metres)")
    if h.units not in _TESLA_PER_UNIT:
        raise ValueError(f"magnetic coefficients need units 'nT' or 'T' (got {h.units!r}): set "
                         "them with h.replace(units='nT')")
    return h, _TESLA_PER_UNIT[h.units]


# ---------------------------------------------------------------------------
# where the values are computed
# ---------------------------------------------------------------------------
class _Rings:
    """The grid's rings where they really are: geocentric colatitude and radius per row.

    ``radius`` is one number on the sphere, one per row on the ellipsoid;
    ``geocentric``: geocentric latitude (degrees) per row; ``tilt``: geodetic
    minus geocentric latitude (radians) per row (0 on the sphere)."""

    def __init__(self, grid: Grid, reference_radius: float, height: float, surface: str,
                 ellipsoid: NormalField | None):
        self.nlon, self.lon0 = grid.nlon, grid.lon0
        if surface == "sphere":
            r = reference_radius + height
            if not r > 0:
                raise ValueError(f"height {height!r} puts the sphere at or below the centre")
            self.radius = r
            self.colat = grid.colat
            self.geocentric = np.asarray(grid.lat, dtype=np.float64)
            self.tilt = np.zeros(grid.nlat)
            return
        if ellipsoid is None:
            raise ValueError("surface='ellipsoid' needs a reference ellipsoid: give a normal "
                             "field with one (normal='grs80', 'wgs84' or a NormalField)")
        lat_c, r = ellipsoid.geocentric(grid.lat, height)
        self.radius = r
        self.colat = np.clip(np.radians(90.0 - lat_c), 0.0, np.pi)
        self.geocentric = lat_c
        self.tilt = np.radians(grid.lat - lat_c)

    def per_row(self, values) -> np.ndarray:
        """A per-row quantity as a column (nlat, 1) for broadcasting over longitudes."""
        return np.broadcast_to(np.asarray(values, dtype=np.float64), self.colat.shape)[:, None]

    def radial_factor(self, lmax: int, reference_radius: float, shift: int) -> np.ndarray:
        """(R/r)^(l + shift): (lmax+1,) on the sphere, (nlat, lmax+1) on the ellipsoid."""
        l = np.arange(lmax + 1, dtype=np.float64)
        log_ratio = np.log(reference_radius / np.asarray(self.radius, dtype=np.float64))
        with np.errstate(over="ignore", under="ignore"):
            factor = np.exp(np.multiply.outer(log_ratio, l + shift))
        if not np.all(np.isfinite(factor)):
            bad = int(np.argmin(np.all(np.isfinite(factor.reshape(-1, lmax + 1)), axis=0)))
            raise ValueError(f"continuing the field down below its reference radius overflows "
                             f"at degree {bad}: use a height closer to the reference sphere "
                             "or truncate the model")
        return factor

    def over_radius(self, weights: np.ndarray, power: int) -> np.ndarray:
        """weights / r^power, per row when the radius is."""
        r = np.asarray(self.radius, dtype=np.float64)
        return weights / (r[..., None] ** power if r.ndim else r**power)


    def evaluate(self, h: Harmonics, degree_part: np.ndarray, shift: int, power: int,
                 gradient: bool):
        """``sum_l g_l (R/r)^(l+shift) / r^power h_l`` on the rings (or its gradient on the
        unit sphere), ``g`` = ``degree_part``."""
        weights = self.over_radius(degree_part * self.radial_factor(h.lmax, h.radius, shift), power)
        return synthesize_rings(h, self.colat, self.nlon, self.lon0, degree_weights=weights,
                                gradient=gradient)

    def shaped(self, values: np.ndarray) -> np.ndarray:
        return values


class _Points:
    """Scattered points where they really are: geocentric latitude and radius per point.

    Held flattened, ``(n,)``; :meth:`shaped` gives the caller's shape back.  Same
    attributes as :class:`_Rings`, per point instead of per row."""

    def __init__(self, lat: np.ndarray, lon: np.ndarray, reference_radius: float, height: float,
                 surface: str, ellipsoid: NormalField | None):
        self.shape = lat.shape
        self.lon = lon.ravel()
        geodetic = lat.ravel()
        if surface == "sphere":
            r = reference_radius + height
            if not r > 0:
                raise ValueError(f"height {height!r} puts the sphere at or below the centre")
            self.radius = np.full(geodetic.size, r)
            self.geocentric = geodetic
            self.tilt = np.zeros(geodetic.size)
            return
        if ellipsoid is None:
            raise ValueError("surface='ellipsoid' needs a reference ellipsoid: give a normal "
                             "field with one (normal='grs80', 'wgs84' or a NormalField)")
        self.geocentric, self.radius = ellipsoid.geocentric(geodetic, height)
        self.tilt = np.radians(geodetic - self.geocentric)

    def per_row(self, values) -> np.ndarray:
        """A per-point quantity, (n,), broadcasting against ``batch + (n,)``."""
        return np.broadcast_to(np.asarray(values, dtype=np.float64), self.lon.shape)

    def evaluate(self, h: Harmonics, degree_part: np.ndarray, shift: int, power: int,
                 gradient: bool):
        """As :meth:`_Rings.evaluate`, by :func:`sphex.points.evaluate` (values: the points'
        radii passed on, the rest of the radial factor per point); gradients by
        :func:`sphex.points.evaluate_gradient` once per distinct radius, or, with many
        radii, by :meth:`_gradient_by_values` away from the poles."""
        R = h.radius
        if not gradient:
            weighted = h.filter(degree_part).replace(radius=R)
            with np.errstate(over="ignore"):
                rest = (R / self.radius) ** (shift - 1) / self.radius**power
            return evaluate(weighted, self.geocentric, self.lon, radius=self.radius) * rest
        east = np.empty(h.batch_shape + self.lon.shape)
        north = np.empty_like(east)
        radii, group = np.unique(self.radius, return_inverse=True)
        polar = _cos_lat(self.geocentric) < 1e-2  # within 0.57 degrees of a pole
        if radii.size > 8 and not polar.all():  # many radii: the gradient from value sums
            away = ~polar
            east[..., away], north[..., away] = self._gradient_by_values(
                h.filter(degree_part), away, shift, power)
            group = np.where(polar, group, -1)
        l = np.arange(h.lmax + 1, dtype=np.float64)
        for k in np.unique(group[group >= 0]):
            r = radii[k]
            with np.errstate(over="ignore", under="ignore"):
                factor = degree_part * np.exp((l + shift) * math.log(R / r)) / r**power
            if not np.all(np.isfinite(factor)):
                raise ValueError("continuing the field down below its reference radius "
                                 "overflows: use a height closer to the reference sphere or "
                                 "truncate the model")
            at = group == k
            e, n = evaluate_gradient(h.filter(factor).replace(radius=None),
                                     self.geocentric[at], self.lon[at])
            east[..., at], north[..., at] = e, n
        return east, north

    def _gradient_by_values(self, h: Harmonics, at: np.ndarray, shift: int, power: int):
        """(east, north) per radian of ``sum_l (R/r)^(l+shift) / r^power h_l`` at points with
        their own radii, away from the poles, from three value sums.

        ``df/dlon`` has the coefficients ``i m a_lm``; ``cos(lat) df/dlat`` is the sum
        over degree l of ``-a_lm (l eps_(l+1,m) Lambda_(l+1,m) - (l+1) eps_lm
        Lambda_(l-1,m))`` with ``eps_lm = sqrt((l^2 - m^2) / (4 l^2 - 1))`` for
        orthonormal functions (common practice: the derivative recursion of the
        Legendre functions); the radial factor of degree l moves with its term, hence
        the factors ``r/R`` and ``R/r`` of the raised and lowered parts."""
        R, L = h.radius, h.lmax
        a = h.to("orthonormal", True).coef
        l = np.arange(L + 2, dtype=np.float64)[:, None]
        m = np.arange(L + 2, dtype=np.float64)[None, :]
        with np.errstate(invalid="ignore"):
            eps = np.where(l > m, np.sqrt((l * l - m * m) / (4 * l * l - 1)), 0.0)
        raised = np.zeros(a.shape[:-2] + (L + 2, L + 2), complex)
        lowered = np.zeros_like(raised)
        raised[..., 1:, :-1] = -l[:-1] * eps[1:, :-1] * a
        lowered[..., :L, :L + 1] = (l[1:L + 1] + 1) * eps[1:L + 1, :L + 1] * a[..., 1:, :]
        along = a * 1j * m[:, :L + 1]
        lat, lon, r = self.geocentric[at], self.lon[at], self.radius[at]

        def values(coef):
            return evaluate(Harmonics(coef, radius=R), lat, lon, radius=r)

        with np.errstate(over="ignore"):
            rest = (R / r) ** (shift - 1) / r**power
        cos_lat = _cos_lat(lat)
        north = (values(raised) * (r / R) + values(lowered[..., :L + 1, :L + 1]) * (R / r))
        return values(along) * (rest / cos_lat), north * (rest / cos_lat)

    def shaped(self, values: np.ndarray) -> np.ndarray:
        return values.reshape(values.shape[:-1] + self.shape)


def _cos_lat(lat_deg: np.ndarray) -> np.ndarray:
    """cos(lat) to full relative precision next to the poles (90 - |lat| is exact there)."""
    return np.sin(np.radians(90.0 - np.abs(lat_deg)))


def _locate(where, reference_radius: float, height: float, surface: str,
            ellipsoid: NormalField | None):
    """The computation points of a grid (rings) or of a (lat, lon) pair (points)."""
    if isinstance(where, Grid):
        return _Rings(where, reference_radius, height, surface, ellipsoid)
    return _Points(*where, reference_radius, height, surface, ellipsoid)


def _evaluate(h: Harmonics, where, degree_part: np.ndarray, shift: int, power: int,
              gradient: bool):
    """Values (or the (east, north) gradient on the unit sphere) of
    ``sum_l g_l (R/r)^(l+shift) / r^power h_l`` where asked: the single place that
    evaluates, by the fast transforms on a grid or by the point sums at points."""
    return where.evaluate(h, np.asarray(degree_part, dtype=np.float64), shift, power, gradient)


# ---------------------------------------------------------------------------
# gravity
# ---------------------------------------------------------------------------
def _normal_zonal(h: Harmonics, gm: float, normal: NormalField) -> np.ndarray:
    """The normal field's gravitational coefficients, in h's convention and scaled to the
    model's GM and radius: column m = 0 for l = 0..h.lmax."""
    L = h.lmax
    full = np.zeros(L + 1)
    full[0] = normal.gm / gm
    jn = normal.zonal_coefficients()
    for n in range(1, ZONAL_COUNT + 1):
        if 2 * n <= L:
            full[2 * n] = (-jn[n - 1] / math.sqrt(4 * n + 1) * normal.gm / gm
                           * (normal.semi_major_axis / h.radius) ** (2 * n))
    # a_l0 in another normalisation: a^to = (F_from / F_to) a^from (m = 0 has no phase sign)
    return full * norm_column(L, 0, "full") / norm_column(L, 0, h.norm)


def _disturbing(h: Harmonics, gm: float, normal: NormalField | None) -> Harmonics:
    """Coefficients of T = V - U_gravitational (h itself without a normal field)."""
    if normal is None:
        return h
    if not 0.9 < normal.gm / gm < 1.1:
        raise ValueError(f"the normal field's GM ({normal.gm:.6g} m^3 s^-2) is not the model's "
                         f"({gm:.6g}): it belongs to another body; use normal='sphere' (the "
                         "model's own GM/r) for a body without an ellipsoid, or a NormalField "
                         "of this body")
    if h.lmax < 2 * ZONAL_COUNT:
        h = h.truncate(2 * ZONAL_COUNT)  # room for the normal field's zonal terms
    coef = h.coef.copy()
    coef[..., :, 0] -= _normal_zonal(h, gm, normal)
    return h.replace(coef=coef)


def gravity(model, grid: Grid, quantity, height: float = 0.0, normal="grs80", *,
            gm: float | None = None, surface: str = "sphere"):
    """Gravity field quantities of a potential model on a grid.

    Parameters
    ----------
    model : PotentialModel or Harmonics
        A gravity model (:func:`sphex.models.open_model`), or dimensionless
        coefficients of ``V = GM/r sum (R/r)^l V_l`` with ``radius`` set
        (then ``gm`` is needed).
    grid : Grid or (lat, lon)
        Where to compute: any sphex grid (any degree on any grid), or a pair
        of arrays of one shape, latitudes and longitudes in degrees, for
        scattered points.
    quantity : str or sequence of str
        One or several of ``"geoid"``, ``"height_anomaly"``, ``"anomaly"``,
        ``"disturbance"``, ``"radial_gradient"``, ``"deflection_north"``,
        ``"deflection_east"``.  Several are computed together (one pass of
        the recursion for the scalar ones).
    height : float
        Metres above the reference sphere (``surface="sphere"``) or the
        ellipsoid (``surface="ellipsoid"``).  ``"geoid"`` needs 0.
    normal : {"grs80", "wgs84", "sphere"}, NormalField or None
        The normal field removed (rescaled to the model's GM and radius); it
        also gives normal gravity ``gamma``.  "sphere" removes the model's own
        ``GM/r`` (a body without an ellipsoid: quantities relative to the
        sphere of radius R).  None removes nothing and takes
        ``gamma = GM/r^2``.  A normal field whose GM differs from the
        model's by more than 10 % is refused (it belongs to another body).
    gm : float, optional
        GM (m^3 s^-2) of Harmonics input, or of a model file without it.
    surface : {"sphere", "ellipsoid"}
        "sphere": grid latitudes geocentric, points at radius ``R + height``.
        "ellipsoid": grid latitudes geodetic, ``height`` ellipsoidal, on the
        normal field's ellipsoid (each pair of mirrored rings synthesised at
        its own radius: about 20 times the cost of "sphere").

    Returns
    -------
    ndarray or dict of ndarray
        ``batch_shape + grid.shape`` (or ``+ lat.shape`` at points) per
        quantity (a dict keyed by quantity when a sequence was asked for).  m, m s^-2, s^-2, arcseconds.

    Raises
    ------
    ValueError
        Unknown quantity or surface, a model without GM or radius, a magnetic
        model, a geoid asked for at a height, a downward continuation that
        overflows, ``surface="ellipsoid"`` without an ellipsoid.

    Notes
    -----
    Formulas in the module docstring (spherical approximation).  The
    disturbing potential includes the degree-0 term ``(GM - GM_normal)/r``;
    the offset ``W0 - U0`` of the geoid's potential from the normal
    potential is not included, nor any topographic reduction: ``"geoid"``
    is the height anomaly on the reference surface.  On the default sphere
    the reference surface is the sphere of radius R, up to 21 km above the
    Earth's ellipsoid near the poles: for geoid heights of the Earth use
    ``surface="ellipsoid"``.  ``gamma`` is taken at the computation point
    (Bruns' formula takes it on the telluroid: relative difference about
    3e-5 of the height anomaly).

    References
    ----------
    Heiskanen & Moritz (1967), sections 2-13 to 2-19; Hofmann-Wellenhof &
    Moritz (2005), sections 2.12-2.15.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex import Grid, Harmonics
    >>> from sphex.potential import gravity
    >>> c = np.zeros((3, 3)); c[0, 0] = 1.0; c[2, 0] = -4.84e-4          # C00, C20
    >>> h = Harmonics.from_cos_sin(c, 0 * c, norm="full", condon_shortley=False,
    ...                            radius=6378137.0)
    >>> dg = gravity(h, Grid.gauss(8), "anomaly", gm=3.986004418e14, normal=None)
    >>> dg.shape
    (9, 18)
    """
    h, gm = _gravity_source(model, gm)
    names, single = _names(quantity, GRAVITY_QUANTITIES, "quantity")
    height = _height(height)
    if "geoid" in names and height != 0.0:
        raise ValueError("the geoid lies on the reference surface: use height=0, or "
                         "quantity='height_anomaly' for values at a height")
    grid = _check_where(grid)
    surface = _check_surface(surface)
    if isinstance(normal, str) and normal.lower() == "sphere":
        normal = NormalField(gm=gm, semi_major_axis=h.radius)  # GM/r of the model itself
    normal = normal_field(normal)
    rings = _locate(grid, h.radius, height, surface, normal)
    t = _disturbing(h, gm, normal)
    if normal is None:
        gamma = gm / rings.per_row(rings.radius) ** 2
    else:
        gamma = rings.per_row(normal.gravity_at(rings.radius, rings.geocentric))
    r = rings.per_row(rings.radius)
    l = np.arange(t.lmax + 1, dtype=np.float64)
    factors = {"anomaly": (l - 1.0, 2), "disturbance": (l + 1.0, 2),
               "radial_gradient": ((l + 1.0) * (l + 2.0), 3)}
    out: dict[str, np.ndarray] = {}
    for name in names:
        if name in factors:
            degree_part, power = factors[name]
            out[name] = _evaluate(t, rings, gm * degree_part, 0, power, gradient=False)
    if "geoid" in names or "height_anomaly" in names:
        potential = _evaluate(t, rings, gm * np.ones_like(l), 0, 1, gradient=False)
        zeta = np.divide(potential, gamma, out=potential)
        for name in ("geoid", "height_anomaly"):
            if name in names:
                out[name] = zeta
    if "deflection_north" in names or "deflection_east" in names:
        east, north = _evaluate(t, rings, gm * np.ones_like(l), 0, 1, gradient=True)
        scale = -ARCSECONDS_PER_RADIAN / (r * gamma)
        out["deflection_north"] = np.multiply(north, scale, out=north)
        out["deflection_east"] = np.multiply(east, scale, out=east)
    if single:
        return rings.shaped(out[names[0]])
    return {name: rings.shaped(out[name]) for name in names}


def normal_gravity(geodetic_lat_deg, normal="grs80") -> np.ndarray:
    """Normal gravity on the ellipsoid (Somigliana's formula), m s^-2.

    Parameters
    ----------
    geodetic_lat_deg : array_like
        Geodetic latitudes in degrees.
    normal : {"grs80", "wgs84"} or NormalField

    Notes
    -----
    ``gamma = (a gamma_a cos^2 phi + b gamma_b sin^2 phi) / sqrt(a^2 cos^2 phi + b^2 sin^2 phi)``
    (Heiskanen & Moritz 1967, eq. 2-78; Moritz 1980).

    Examples
    --------
    >>> from sphex.potential import normal_gravity
    >>> [round(float(g), 10) for g in normal_gravity([0.0, 90.0])]
    [9.7803267715, 9.8321863685]
    """
    field = normal_field(normal)
    if field is None:
        raise ValueError("normal_gravity needs a normal field: 'grs80', 'wgs84' or a NormalField")
    return field.surface_gravity(geodetic_lat_deg)


# ---------------------------------------------------------------------------
# magnetism
# ---------------------------------------------------------------------------
def magnetic(model, grid: Grid, component, height: float = 0.0, *, surface: str = "sphere",
             ellipsoid="wgs84"):
    """Magnetic field components of a potential model on a grid.

    Parameters
    ----------
    model : PotentialModel or Harmonics
        A magnetic model (``.shc`` via :func:`sphex.models.open_model`), or
        coefficients of ``V = R sum (R/r)^(l+1) V_l`` with ``radius`` set and
        ``units`` "nT" or "T".  Any normalisation and phase convention.
    grid : Grid or (lat, lon)
        A sphex grid, or a pair of arrays of one shape (degrees) for
        scattered points.
    component : str or sequence of str
        One or several of ``"north"`` (X), ``"east"`` (Y), ``"down"`` (Z),
        ``"horizontal"`` (H), ``"total"`` (F), ``"declination"`` (D),
        ``"inclination"`` (I).
    height : float
        Metres above the reference sphere, or above the ellipsoid with
        ``surface="ellipsoid"``.
    surface : {"sphere", "ellipsoid"}
        "sphere": geocentric latitudes, geocentric components.
        "ellipsoid": geodetic latitudes and heights (on ``ellipsoid``), X and
        Z rotated into the local geodetic frame.
    ellipsoid : {"wgs84", "grs80"} or NormalField
        The ellipsoid of ``surface="ellipsoid"``.

    Returns
    -------
    ndarray or dict of ndarray
        ``batch_shape + grid.shape`` (``+ lat.shape`` at points); tesla for X, Y, Z,
        H, F; degrees for D (east of north) and I (positive down).

    Notes
    -----
    ``X = -(1/r) dV/dlat = -sum (R/r)^(l+2) dV_l/dlat``,
    ``Y = -(1/(r cos lat)) dV/dlon``, ``Z = dV/dr = -sum (l+1) (R/r)^(l+2) V_l``.
    In the geodetic frame, with ``psi`` = geodetic minus geocentric latitude,
    ``X' = X cos psi + Z sin psi`` and ``Z' = -X sin psi + Z cos psi``
    (common practice of the main-field models).
    """
    h, scale = _magnetic_source(model)
    names, single = _names(component, MAGNETIC_COMPONENTS, "component")
    height = _height(height)
    grid = _check_where(grid)
    surface = _check_surface(surface)
    field = normal_field(ellipsoid) if surface == "ellipsoid" else None
    rings = _locate(grid, h.radius, height, surface, field)
    rotate = surface == "ellipsoid"
    need_xy = set(names) != {"down"} or rotate
    need_z = bool(set(names) & {"down", "total", "inclination"}) or (rotate and names != ["east"])
    l = np.arange(h.lmax + 1, dtype=np.float64)
    X = Y = Z = None
    if need_xy:
        east, north = _evaluate(h, rings, np.full(l.size, scale), 2, 0, gradient=True)
        X, Y = np.negative(north, out=north), np.negative(east, out=east)
    if need_z:
        Z = _evaluate(h, rings, -(l + 1.0) * scale, 2, 0, gradient=False)
    if rotate and X is not None and Z is not None:
        c, s = rings.per_row(np.cos(rings.tilt)), rings.per_row(np.sin(rings.tilt))
        X, Z = X * c + Z * s, -X * s + Z * c
    out = {}
    for name in names:
        if name == "north":
            out[name] = X
        elif name == "east":
            out[name] = Y
        elif name == "down":
            out[name] = Z
        elif name == "horizontal":
            out[name] = np.hypot(X, Y)
        elif name == "total":
            out[name] = np.sqrt(X**2 + Y**2 + Z**2)
        elif name == "declination":
            out[name] = np.degrees(np.arctan2(Y, X))
        else:
            out[name] = np.degrees(np.arctan2(Z, np.hypot(X, Y)))
    if single:
        return rings.shaped(out[names[0]])
    return {name: rings.shaped(value) for name, value in out.items()}


# ---------------------------------------------------------------------------
# spectra of models
# ---------------------------------------------------------------------------
def _model_harmonics(model, sigmas: bool = False) -> Harmonics:
    if isinstance(model, PotentialModel):
        if sigmas:
            if model.sigmas is None:
                raise ValueError(f"{model.name or 'the model'} has no standard deviations "
                                 "(the file carries none)")
            return model.sigmas
        return model.harmonics
    if isinstance(model, Harmonics):
        return model
    raise ValueError(f"expected a PotentialModel or Harmonics, got {type(model).__name__}")


def _per_degree_sum(h: Harmonics, norm: str | None) -> np.ndarray:
    norm = h.norm if norm is None else norm
    C, S = h.to(norm=norm, condon_shortley=False).cos_sin()
    return np.sum(C**2 + S**2, axis=-1)


def degree_variances(model, norm: str | None = None) -> np.ndarray:
    """Degree variances of a model: ``sum_m (C_lm^2 + S_lm^2)`` for each degree l.

    Parameters
    ----------
    model : PotentialModel or Harmonics
    norm : str, optional
        Normalisation of the coefficients summed; default the model's own
        (fully normalised for gravity files: the geodesists' degree variance,
        dimensionless; Schmidt for ``.shc``: nT^2).

    Returns
    -------
    ndarray, shape ``batch_shape + (lmax + 1,)``

    Notes
    -----
    For a fully normalised gravity model, ``R^2`` times it is the geoid's
    degree variance (m^2) and ``(GM/R^2)^2 (l-1)^2`` times it that of the
    gravity anomalies (Heiskanen & Moritz 1967, chapter 7).
    """
    return _per_degree_sum(_model_harmonics(model), norm)


def error_degree_variances(model, norm: str | None = None) -> np.ndarray:
    """Error degree variances: ``sum_m (sigma_C_lm^2 + sigma_S_lm^2)`` for each degree.

    Same normalisation rule as :func:`degree_variances`; where the two cross
    the model stops carrying information.  ``model`` is a PotentialModel
    with ``.sigmas``, or the sigmas as Harmonics.
    """
    h = _model_harmonics(model, sigmas=True)
    norm = h.norm if norm is None else norm
    C, S = h.to(norm=norm).cos_sin()  # the phase convention stays: signs of sigmas are kept
    return np.sum(C**2 + S**2, axis=-1)


def crossing_degree(signal, error) -> int | None:
    """The first degree (from 2) where the error degree variances reach the degree variances.

    Parameters
    ----------
    signal, error : array_like, shape (lmax + 1,)
        Degree variances and error degree variances of one model.

    Returns
    -------
    int or None
        The degree, or None when the errors stay below the signal up to lmax:
        from there on the model carries no information about the field.

    Examples
    --------
    >>> from sphex.potential import crossing_degree
    >>> crossing_degree([1.0, 0.0, 1e-6, 1e-8, 1e-10], [0.0, 0.0, 1e-12, 1e-9, 1e-9])
    4
    """
    s = np.asarray(signal, dtype=np.float64)
    e = np.asarray(error, dtype=np.float64)
    if s.ndim != 1 or s.shape != e.shape:
        raise ValueError(f"signal and error must be two 1-D arrays of one length, got shapes "
                         f"{s.shape} and {e.shape}")
    reached = np.flatnonzero(e[2:] >= s[2:])
    return int(reached[0]) + 2 if reached.size else None


def kaula_rule(lmax: int, constant: float = 1e-5) -> np.ndarray:
    """Kaula's rule of thumb for a terrestrial planet's gravity field, as degree variances.

    Each fully normalised coefficient of degree l has an RMS size of about
    ``constant / l^2`` (Kaula 1966: 1e-5 for the Earth), so the degree
    variance is ``(2l + 1) (constant / l^2)^2``.  NaN for l < 2, where the
    rule does not apply.

    Examples
    --------
    >>> from sphex.potential import kaula_rule
    >>> round(float(kaula_rule(2)[2]), 20)     # 5 (1e-5 / 4)^2
    3.125e-11
    """
    lmax = whole_number(lmax, "lmax")
    check_memory(16.0 * (lmax + 1), f"the Kaula rule to degree {lmax}", "use a lower lmax")
    l = np.arange(lmax + 1, dtype=np.float64)
    out = np.full(l.size, np.nan)
    out[2:] = (2 * l[2:] + 1) * (float(constant) / l[2:] ** 2) ** 2
    return out


def magnetic_power(model, height: float = 0.0) -> np.ndarray:
    """Mean square magnetic field per degree over the sphere of radius ``R + height``, T^2.

    ``R_l = (l+1) (R/r)^(2l+4) sum_m (g_lm^2 + h_lm^2)`` with Schmidt
    semi-normalised coefficients (Lowes 1966); the sum over l is the area
    mean of ``|B|^2``.
    """
    h, scale = _magnetic_source(model)
    r = h.radius + _height(height)
    if not r > 0:
        raise ValueError(f"height {height!r} puts the sphere at or below the centre")
    l = np.arange(h.lmax + 1, dtype=np.float64)
    with np.errstate(under="ignore"):
        factor = (l + 1) * np.exp((2 * l + 4) * math.log(h.radius / r)) * scale**2
    if not np.all(np.isfinite(factor)):
        raise ValueError(f"continuing the field down to radius {r!r} overflows: use a height "
                         "closer to the reference sphere or truncate the model")
    return _per_degree_sum(h, "schmidt") * factor
