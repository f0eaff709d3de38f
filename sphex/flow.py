"""Tangent vector fields on the sphere: streamfunction, velocity potential, vorticity, divergence.

A tangent field (a wind or a current) with eastward component ``u`` and
northward component ``v`` is, on a sphere of radius ``R`` (Helmholtz),

    u = -(1/R) dpsi/dlat + (1/(R cos lat)) dchi/dlon,
    v =  (1/(R cos lat)) dpsi/dlon + (1/R) dchi/dlat,

with the streamfunction ``psi`` and the velocity potential ``chi``; the
relative vorticity is ``zeta = lap(psi)`` and the divergence
``delta = lap(chi)``, so degree by degree ``zeta_lm = -l(l+1)/R^2 psi_lm``
and ``delta_lm = -l(l+1)/R^2 chi_lm``.  The degree-0 terms of ``psi`` and
``chi`` do not change the flow; sphex sets them to zero.

A :class:`Flow` holds ``psi`` and ``chi`` as two
:class:`~sphex.harmonics.Harmonics`.  The radius is the ``radius`` of those
Harmonics (metres); when it is not set, everything is on the unit sphere
(``R = 1``: ``psi`` and ``chi`` then carry the units of the components, per
radian).  sphex does not assume a planet here: Earth's radius or any other is
given by the caller (``radius=``).

Exact degree limit
------------------
:func:`analyze_flow` integrates products of the functions ``dLambda_lm/dtheta``
and ``m Lambda_lm / sin(theta)`` of two degrees ``l, l' <= L``.  Each is
``(1 - x^2)^((m-1)/2)`` times a polynomial in ``x = cos(theta)`` (of degree
``l - m + 1`` and ``l - m``), so every product is a polynomial of degree at
most ``l + l' <= 2L`` in ``x`` (for ``m = 0`` the factor is ``(1 - x^2)``
times polynomials of degree ``l - 1`` and ``l' - 1``).  That is the scalar
case again, although ``u`` and ``v`` themselves are not band-limited as
scalars (they carry ``1/cos(lat)``): the vector limit of every grid is its
``lmax_exact`` (Gauss ``nlat - 1``, the three equiangular layouts
``floor((nlat - 1) / 2)``, and ``(nlon - 1) // 2`` in longitude).  One degree
more is not exact on any grid kind (the tests show both).

References
----------
Swarztrauber, P. N. (1993). The vector harmonic transform method for solving
partial differential equations in spherical geometry. Monthly Weather Review
121, 3415-3437.
"""
from __future__ import annotations

import numbers

import numpy as np

from sphex.grids import Grid
from sphex.harmonics import Harmonics, convert_factor
from sphex.vector_transform import analyze_vector, synthesize_vector

__all__ = ["Flow", "analyze_flow", "synthesize_flow", "regrid_flow", "smooth_flow"]


def _check_harmonics(h, name: str) -> Harmonics:
    if not isinstance(h, Harmonics):
        raise ValueError(f"{name} must be a sphex.Harmonics, got {type(h).__name__}")
    return h


def _check_radius(radius) -> float | None:
    if radius is None:
        return None
    if isinstance(radius, bool) or not isinstance(radius, numbers.Real):
        raise ValueError(f"radius must be a number of metres (or None for the unit sphere), "
                         f"got {radius!r}")
    r = float(radius)
    if not (np.isfinite(r) and r > 0):
        raise ValueError(f"radius must be a positive finite number of metres (or None for the unit "
                         f"sphere), got {radius!r}")
    return r


def _degree_factor(lmax: int, radius: float | None) -> np.ndarray:
    """-l(l+1)/R^2 for l = 0..lmax (R = 1 when radius is None)."""
    l = np.arange(lmax + 1, dtype=np.float64)
    r = 1.0 if radius is None else radius
    return -l * (l + 1.0) / (r * r)


class Flow:
    """Streamfunction and velocity potential of a tangent vector field.

    Parameters
    ----------
    psi, chi : Harmonics
        Streamfunction and velocity potential, same ``lmax``, batch shape and
        ``radius`` (``chi`` is converted to the normalisation and phase of
        ``psi``).

    Attributes
    ----------
    psi, chi : Harmonics
    radius : float or None
        The sphere's radius in metres (``psi.radius``); None is the unit sphere.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex import Grid
    >>> from sphex.flow import analyze_flow, synthesize_flow
    >>> grid = Grid.gauss(15)
    >>> lat = np.radians(grid.lat)[:, None] + 0 * grid.lon
    >>> flow = analyze_flow(10.0 * np.cos(lat), 0 * lat, grid, radius=6.371e6)
    >>> east, north = synthesize_flow(flow, grid)
    >>> float(abs(east - 10.0 * np.cos(lat)).max()) < 1e-12
    True
    >>> float(abs(flow.chi.coef).max()) < 1e-6 * float(abs(flow.psi.coef).max())
    True
    """

    __slots__ = ("psi", "chi")

    def __init__(self, psi: Harmonics, chi: Harmonics):
        _check_harmonics(psi, "psi")
        _check_harmonics(chi, "chi")
        if psi.lmax != chi.lmax:
            raise ValueError(f"psi has lmax {psi.lmax} but chi has lmax {chi.lmax}: truncate both to "
                             "one degree first (h.truncate(lmax))")
        if psi.batch_shape != chi.batch_shape:
            raise ValueError(f"psi has batch shape {psi.batch_shape} but chi {chi.batch_shape}: give "
                             "both the same leading axes")
        if psi.radius != chi.radius:
            raise ValueError(f"psi has radius {psi.radius} but chi {chi.radius}: set the same radius "
                             "on both (h.replace(radius=...); None is the unit sphere)")
        if (chi.norm, chi.condon_shortley) != (psi.norm, psi.condon_shortley):
            chi = chi.to(psi.norm, psi.condon_shortley)
        self.psi = psi
        self.chi = chi

    # -- basic properties ---------------------------------------------------
    @property
    def radius(self) -> float | None:
        return self.psi.radius

    @property
    def lmax(self) -> int:
        return self.psi.lmax

    @property
    def batch_shape(self) -> tuple[int, ...]:
        return self.psi.batch_shape

    def __repr__(self):
        batch = f", batch_shape={self.batch_shape}" if self.batch_shape else ""
        return (f"Flow(lmax={self.lmax}, norm={self.psi.norm!r}, "
                f"condon_shortley={self.psi.condon_shortley}, radius={self.radius!r}{batch})")

    # -- derived fields ---------------------------------------------------------
    def vorticity(self, planetary_rotation: float | None = None) -> Harmonics:
        """Relative vorticity ``-l(l+1)/R^2 psi_lm``, or absolute vorticity with a rotation rate.

        Parameters
        ----------
        planetary_rotation : float, optional
            The planet's rotation rate Omega in rad s-1 (Earth: 7.292115e-5).
            When given, the planetary vorticity ``f = 2 Omega sin(lat)`` is
            added: ``2 Omega sqrt(4 pi / 3)`` on the orthonormal coefficient of
            degree 1, order 0 (converted to the flow's normalisation).  It is in
            s-1, so it belongs with a flow in m s-1 on a sphere of radius R
            metres.

        Returns
        -------
        Harmonics
            In s-1 for a flow in m s-1 with the radius in metres (per radian
            squared on the unit sphere); degree 0 is zero.
        """
        zeta = self.psi.replace(coef=self.psi.coef * _degree_factor(self.lmax, self.radius)[:, None],
                                units=None)
        if planetary_rotation is None:
            return zeta
        if (isinstance(planetary_rotation, bool) or not isinstance(planetary_rotation, numbers.Real)
                or not np.isfinite(planetary_rotation)):
            raise ValueError(f"planetary_rotation must be a finite rotation rate in rad s-1 (Earth: "
                             f"7.292115e-5), got {planetary_rotation!r}")
        if self.lmax < 1:
            raise ValueError("absolute vorticity needs degree 1: truncate the flow up to lmax >= 1 "
                             "first (flow.truncate(1))")
        to_norm = convert_factor(1, "orthonormal", self.psi.condon_shortley, self.psi.norm,
                                 self.psi.condon_shortley)[1, 0]
        coef = zeta.coef.copy()
        coef[..., 1, 0] += 2.0 * float(planetary_rotation) * np.sqrt(4 * np.pi / 3) * to_norm
        return zeta.replace(coef=coef)

    def divergence(self) -> Harmonics:
        """Divergence ``-l(l+1)/R^2 chi_lm`` (s-1 for a flow in m s-1); degree 0 is zero."""
        return self.chi.replace(coef=self.chi.coef * _degree_factor(self.lmax, self.radius)[:, None],
                                units=None)

    def rotational(self) -> "Flow":
        """The non-divergent part: the same ``psi``, ``chi = 0``."""
        return Flow(self.psi, self.chi.replace(coef=np.zeros_like(self.chi.coef)))

    def divergent(self) -> "Flow":
        """The irrotational part: ``psi = 0``, the same ``chi``."""
        return Flow(self.psi.replace(coef=np.zeros_like(self.psi.coef)), self.chi)

    def truncate(self, lmax: int) -> "Flow":
        """Both potentials to degree ``lmax`` (zero-padded when larger)."""
        return Flow(self.psi.truncate(lmax), self.chi.truncate(lmax))

    def filter(self, weights) -> "Flow":
        """Both potentials multiplied by ``weights[l]`` per degree (an isotropic filter,
        e.g. :func:`sphex.filters.gaussian`); vorticity and divergence are filtered alike."""
        return Flow(self.psi.filter(weights), self.chi.filter(weights))

    @classmethod
    def from_vorticity_divergence(cls, zeta: Harmonics, delta: Harmonics,
                                  radius: float | None = None) -> "Flow":
        """The flow of a relative vorticity and a divergence.

        Parameters
        ----------
        zeta, delta : Harmonics
            Relative vorticity and divergence (same lmax and batch shape).
        radius : float, optional
            The sphere's radius in metres; default the radius set on ``zeta``
            and ``delta`` (which must agree), else the unit sphere.

        Returns
        -------
        Flow
            ``psi_lm = -R^2 zeta_lm / (l(l+1))`` and ``chi_lm = -R^2 delta_lm /
            (l(l+1))`` for ``l >= 1``.  The degree-0 terms of ``psi`` and
            ``chi`` are zero, and the degree-0 terms of ``zeta`` and ``delta``
            are ignored: on a closed sphere the area means of vorticity and
            divergence vanish, so a nonzero mean has no flow.
        """
        _check_harmonics(zeta, "zeta")
        _check_harmonics(delta, "delta")
        radius = _check_radius(radius)
        if zeta.radius != delta.radius:
            raise ValueError(f"zeta has radius {zeta.radius} but delta {delta.radius}: set the same "
                             "radius on both (h.replace(radius=...)) or pass radius=")
        if radius is None:
            radius = zeta.radius
        elif zeta.radius is not None and zeta.radius != radius:
            raise ValueError(f"radius={radius} differs from the radius {zeta.radius} set on zeta and "
                             "delta: pass radius=None to use theirs, or replace it on the fields")
        if delta.lmax != zeta.lmax:
            raise ValueError(f"zeta has lmax {zeta.lmax} but delta {delta.lmax}: truncate both to one "
                             "degree first (h.truncate(lmax))")
        factor = _degree_factor(zeta.lmax, radius)
        inverse = np.zeros_like(factor)
        inverse[1:] = 1.0 / factor[1:]
        psi = zeta.replace(coef=zeta.coef * inverse[:, None], radius=radius, units=None)
        chi = delta.replace(coef=delta.coef * inverse[:, None], radius=radius, units=None)
        return cls(psi, chi)


def _check_flow(flow) -> Flow:
    if not isinstance(flow, Flow):
        raise ValueError(f"expected a sphex.flow.Flow, got {type(flow).__name__}; make one with "
                         "analyze_flow(east, north, grid) or Flow(psi, chi)")
    return flow


def analyze_flow(east, north, grid: Grid, lmax: int | None = None, radius: float | None = None, *,
                 allow_aliasing: bool = False) -> Flow:
    """Streamfunction and velocity potential of a tangent field from its components on a grid.

    Parameters
    ----------
    east, north : array_like, shape ``(..., nlat, nlon)``
        Eastward and northward components (winds, currents) on ``grid``,
        rows in ``grid.lat`` order; leading axes are a batch done in one call.
        Pole rows (equiangular "poles" and "north" layouts) must hold the
        components' limits along each meridian, as a smooth field has them.
    grid : Grid
    lmax : int, optional
        Highest degree; default the exact vector limit, ``grid.lmax_exact``
        (see the module notes).  More raises unless ``allow_aliasing=True``.
    radius : float, optional
        The sphere's radius in metres, stored on the result; default None, the
        unit sphere (``psi`` and ``chi`` then carry the units of the
        components).
    allow_aliasing : bool
        Accept ``lmax`` above the exact limit (the result is aliased).

    Returns
    -------
    Flow
        ``psi`` and ``chi`` in the "orthonormal" normalisation with the
        Condon-Shortley phase; their degree-0 terms are zero.

    Raises
    ------
    ValueError
        ``east`` and ``north`` of different shapes or not on the grid, NaN or
        inf, ``lmax`` above the exact limit, a radius that is not positive.

    Notes
    -----
    With ``Y_lm`` the orthonormal harmonics and ``V = (u, v)``,

        psi_lm = R / (l(l+1)) integral V . conj(k x grad Y_lm) dOmega,
        chi_lm = R / (l(l+1)) integral V . conj(grad Y_lm) dOmega,

    evaluated with the grid's quadrature, the functions ``dLambda/dtheta``
    and ``m Lambda / sin(theta)`` coming from one recursion (Swarztrauber
    1993); no finite differences and no division by ``cos(lat)``.
    """
    radius = _check_radius(radius)
    psi, chi = analyze_vector(east, north, grid, lmax, allow_aliasing=allow_aliasing)
    r = 1.0 if radius is None else radius
    return Flow(psi.replace(coef=psi.coef * r, radius=radius),
                chi.replace(coef=chi.coef * r, radius=radius))


def synthesize_flow(flow: Flow, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Eastward and northward components of a flow at the nodes of ``grid``.

    Parameters
    ----------
    flow : Flow
    grid : Grid
        Any grid, any degree (exact point values; the pole rows hold the
        limits along each meridian).

    Returns
    -------
    east, north : ndarray, each ``flow.batch_shape + grid.shape``
        ``u = -(1/R) dpsi/dlat + (1/(R cos lat)) dchi/dlon`` and
        ``v = (1/(R cos lat)) dpsi/dlon + (1/R) dchi/dlat``.
    """
    _check_flow(flow)
    east, north = synthesize_vector(flow.psi, flow.chi, grid)
    if flow.radius is not None:
        east /= flow.radius
        north /= flow.radius
    return east, north


def regrid_flow(east, north, source: Grid, target: Grid,
                lmax: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """A tangent field moved to another grid through its streamfunction and velocity potential.

    The components are never regridded one by one (near the poles that
    mixes directions); the flow is analysed on ``source`` to degree ``lmax``
    (default the smaller of the two grids' exact limits) and synthesised on
    ``target``, so a flow band-limited to that degree is reproduced exactly.

    Returns
    -------
    east, north : ndarray, each ``batch + target.shape``
    """
    if not isinstance(target, Grid):
        raise ValueError(f"target must be a sphex.Grid (Grid.gauss, Grid.equiangular or "
                         f"Grid.from_coords), got {type(target).__name__}")
    if lmax is None and isinstance(source, Grid):
        lmax = min(source.lmax_exact, target.lmax_exact)
    return synthesize_flow(analyze_flow(east, north, source, lmax), target)


def smooth_flow(east, north, grid: Grid, weights,
                lmax: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """A tangent field smoothed isotropically through its streamfunction and velocity potential.

    ``weights[l]`` (e.g. :func:`sphex.filters.gaussian`) multiplies degree l
    of ``psi`` and ``chi``, so vorticity and divergence are smoothed by the
    same weights and the rotational and divergent parts stay separate.

    Returns
    -------
    east, north : ndarray, each shaped like ``east``
    """
    flow = analyze_flow(east, north, grid, lmax)
    return synthesize_flow(flow.filter(weights), grid)
