"""Latitude-longitude grids: nodes, quadrature weights and exact degree limits.

A :class:`Grid` is a global grid of ``nlat`` latitude rings by ``nlon`` equally
spaced longitudes.  Four kinds are supported:

``gauss``
    Gauss-Legendre latitudes (``nlat = lmax + 1``); exact to degree ``nlat - 1``.
``equiangular-poles``
    ``lat_j = 90 - 180 j / (nlat - 1)``: both poles sampled, Clenshaw-Curtis weights.
``equiangular-cells``
    ``lat_j = 90 - 180 (j + 1/2) / nlat``: cell centres, no pole, Fejer's first rule.
``equiangular-north``
    ``lat_j = 90 - 180 j / nlat``: north pole sampled, south pole not,
    Driscoll-Healy weights.

The latitude weights ``w_j`` integrate in ``x = cos(colatitude)`` (they sum to
2), so the area integral of a field sampled on the grid is
``(2 pi / nlon) * sum_j w_j * sum_k f[j, k]``.

Exact degree limit
------------------
Analysis needs the product of two functions of degree <= L, a polynomial of
degree 2L in ``x`` (for equal orders the ``(1 - x^2)^(m/2)`` factors combine
into a polynomial), to be integrated exactly, and the longitude sum to separate
orders ``|m| <= L`` (``nlon >= 2L + 1``).  An n-point Gauss rule is exact to
degree ``2n - 1``, hence ``L = nlat - 1``.  The three equiangular rules are
interpolatory on ``nlat`` nodes and exact to degree ``nlat - 1`` in ``x``,
hence ``L = floor((nlat - 1) / 2)``.  In every case also ``L <= (nlon - 1) // 2``.
"""
from __future__ import annotations

import numpy as np

from sphex.limits import check_memory, whole_number

__all__ = ["Grid", "LAYOUTS"]

LAYOUTS = ("poles", "cells", "north")
_KINDS = ("gauss",) + tuple("equiangular-" + name for name in LAYOUTS)


class Grid:
    """A global latitude-longitude grid with its quadrature.

    Build one with :meth:`Grid.gauss`, :meth:`Grid.equiangular` or
    :meth:`Grid.from_coords`; do not call the constructor directly.

    Attributes
    ----------
    lat, lon : ndarray
        Latitudes and longitudes in degrees, in the order the rows and columns
        of a field are stored.
    colat : ndarray
        Colatitudes in radians (``pi/2 - lat``), computed directly for accuracy.
    weights : ndarray
        Latitude quadrature weights in ``x = cos(colat)``; they sum to 2.  An
        equiangular grid computes them when first asked (with scipy's FFT), so
        that recognising a grid from its coordinates needs no FFT.
    lmax_exact : int
        Highest degree that analysis on this grid recovers exactly.
    kind : str
        ``"gauss"``, ``"equiangular-poles"``, ``"equiangular-cells"`` or
        ``"equiangular-north"``.
    """

    __slots__ = ("kind", "nlat", "nlon", "lon0", "north_first", "colat", "weights",
                 "lat", "lon", "lmax_exact")

    def __init__(self, kind: str, colat: np.ndarray | None, weights: np.ndarray | None,
                 nlon: int, lon0: float = 0.0, north_first: bool = True, *,
                 nlat: int | None = None):
        # weights=None (equiangular kinds only): the layout's rule, computed on first use
        # (scipy's FFT), so that recognising a grid, as ``sphex inspect`` does, needs no FFT;
        # colat=None with nlat (Gauss only, from Grid.from_coords): the nodes and weights
        # are computed on first use (the numba kernel), for the same reason
        if kind not in _KINDS:
            raise ValueError(f"unknown grid kind {kind!r}; valid kinds: {', '.join(_KINDS)}")
        if colat is None:
            if kind != "gauss" or nlat is None or weights is not None:
                raise ValueError("only a Gauss grid may leave its nodes for later: give "
                                 "colat, or kind='gauss' with nlat and no weights")
            self._set_fields(kind, None, None, int(nlat), nlon, lon0, north_first)
            return
        if weights is None and kind == "gauss":
            raise ValueError("a Gauss grid needs its weights: build it with Grid.gauss")
        colat = np.asarray(colat, dtype=np.float64)
        if weights is not None:
            weights = np.asarray(weights, dtype=np.float64)
        if not north_first:
            colat = colat[::-1].copy()
            if weights is not None:
                weights = weights[::-1].copy()
        self._set_fields(kind, colat, weights, int(colat.size), nlon, lon0, north_first)

    def _set_fields(self, kind, colat, weights, nlat, nlon, lon0, north_first) -> None:
        lon = float(lon0) + 360.0 * np.arange(int(nlon)) / int(nlon)
        if kind == "gauss":
            lat_limit = nlat - 1
        else:
            lat_limit = (nlat - 1) // 2
        fields = dict(kind=kind, nlat=nlat, nlon=int(nlon), lon0=float(lon0),
                      north_first=bool(north_first), lon=lon,
                      lmax_exact=int(min(lat_limit, (int(nlon) - 1) // 2)))
        if colat is not None:
            fields.update(colat=colat, lat=90.0 - np.degrees(colat))
        if weights is not None:
            fields["weights"] = weights
        for name, value in fields.items():
            object.__setattr__(self, name, value)
        for arr in fields.values():
            if isinstance(arr, np.ndarray):
                arr.setflags(write=False)

    def __getattr__(self, name: str):
        # only reached for a slot not yet set: the weights of an equiangular layout, or the
        # nodes, latitudes and weights of a Gauss grid recognised from its coordinates
        if name == "weights" and self.kind.startswith("equiangular-"):
            _, weights = equiangular_nodes(self.nlat, self.layout)
            if not self.north_first:
                weights = weights[::-1].copy()
            weights.setflags(write=False)
            object.__setattr__(self, "weights", weights)
            return weights
        if name in ("colat", "lat", "weights") and self.kind == "gauss":
            colat, weights = gauss_nodes(self.nlat)
            if not self.north_first:
                colat = colat[::-1].copy()
                weights = weights[::-1].copy()
            values = dict(colat=colat, lat=90.0 - np.degrees(colat), weights=weights)
            for key, arr in values.items():
                arr.setflags(write=False)
                object.__setattr__(self, key, arr)
            return values[name]
        raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")

    # -- constructors -----------------------------------------------------
    @classmethod
    def gauss(cls, lmax: int, nlon: int | None = None) -> "Grid":
        """Gauss-Legendre grid exact to degree ``lmax``.

        Parameters
        ----------
        lmax : int
            Degree limit; the grid has ``lmax + 1`` latitudes.
        nlon : int, optional
            Number of longitudes, at least ``2 * lmax + 1``; default ``2 * lmax + 2``.

        Examples
        --------
        >>> g = Grid.gauss(15)
        >>> g.shape, g.lmax_exact
        ((16, 32), 15)
        """
        lmax = _check_int("lmax", lmax, minimum=0)
        nlon = 2 * lmax + 2 if nlon is None else _check_int("nlon", nlon, minimum=1)
        if nlon < 2 * lmax + 1:
            raise ValueError(f"nlon={nlon} is too few longitudes for lmax={lmax}: "
                             f"use nlon >= {2 * lmax + 1}")
        _check_grid_memory(lmax + 1, nlon, f"Grid.gauss({lmax})", "use a lower lmax")
        colat, weights = gauss_nodes(lmax + 1)
        return cls("gauss", colat, weights, nlon)

    @classmethod
    def equiangular(cls, nlat: int, nlon: int, layout: str = "north") -> "Grid":
        """Equally spaced latitudes in one of three layouts.

        Parameters
        ----------
        nlat, nlon : int
            Numbers of latitudes and longitudes.
        layout : {"poles", "cells", "north"}
            ``"poles"``: both poles sampled (Clenshaw-Curtis weights);
            ``"cells"``: cell centres (Fejer's first rule);
            ``"north"``: north pole sampled, south not (Driscoll-Healy weights).

        Examples
        --------
        >>> Grid.equiangular(64, 128, "north").lmax_exact
        31
        """
        nlat = _check_int("nlat", nlat, minimum=2)
        nlon = _check_int("nlon", nlon, minimum=1)
        if layout not in LAYOUTS:
            raise ValueError(f"unknown layout {layout!r}; valid layouts: {', '.join(LAYOUTS)}")
        _check_grid_memory(nlat, nlon, f"Grid.equiangular({nlat}, {nlon}, {layout!r})",
                           "use fewer latitudes or longitudes")
        return cls("equiangular-" + layout, equiangular_colatitudes(nlat, layout), None, nlon)

    @classmethod
    def from_coords(cls, lat, lon, *, tol: float = 2e-5) -> "Grid":
        """Recognise the grid that a pair of coordinate vectors describes.

        Parameters
        ----------
        lat, lon : array_like
            1-D latitudes and longitudes in degrees.  Latitudes may run north to
            south or south to north; longitudes may start anywhere (0..360,
            -180..180, shifted by half a cell, ...) but must be equally spaced
            and cover the circle once.
        tol : float
            Tolerance in degrees (the default accepts float32 coordinates).

        Raises
        ------
        ValueError
            When the coordinates are not a global grid of a supported kind; the
            message says what does not fit and what would.
        """
        lat = np.asarray(lat, dtype=np.float64).ravel()
        lon = np.asarray(lon, dtype=np.float64).ravel()
        nlon, lon0 = _detect_lon(lon, tol)
        tol = tol + 2.5e-7 * 90.0
        nlat = lat.size
        if nlat < 2:
            raise ValueError(f"{nlat} latitude(s) cannot form a global grid: need at least 2")
        if not np.all(np.isfinite(lat)):
            raise ValueError("latitude coordinates contain NaN or inf")
        if np.any(np.abs(lat) > 90 + tol):
            raise ValueError(f"latitudes must lie in [-90, 90] degrees, found {lat.min():g}..{lat.max():g}"
                             " (are latitude and longitude swapped?)")
        d = np.diff(lat)
        if np.all(d < 0):
            north_first = True
        elif np.all(d > 0):
            north_first = False
        else:
            raise ValueError("latitudes are not monotonic: sort them north to south or south to north")
        lat_ns = lat if north_first else lat[::-1]
        for layout in LAYOUTS:
            colat = equiangular_colatitudes(nlat, layout)
            if np.max(np.abs(lat_ns - (90.0 - np.degrees(colat)))) <= tol:
                return cls("equiangular-" + layout, colat, None, nlon, lon0, north_first)
        if nlat <= GAUSS_ESTIMATE_MAX:  # close enough to tell, without the numba kernel
            colat = gauss_colatitudes_estimate(nlat)
            if np.max(np.abs(lat_ns - (90.0 - np.degrees(colat)))) <= tol:
                return cls("gauss", None, None, nlon, lon0, north_first, nlat=nlat)
        else:
            colat, weights = gauss_nodes(nlat)
            if np.max(np.abs(lat_ns - (90.0 - np.degrees(colat)))) <= tol:
                return cls("gauss", colat, weights, nlon, lon0, north_first)
        # Explain what does not fit.
        spacing = np.abs(d)
        if lat_ns[0] < 90 - 180.0 / nlat - tol or lat_ns[-1] > -90 + 180.0 / nlat + tol:
            raise ValueError(
                f"latitudes span {lat_ns[-1]:g}..{lat_ns[0]:g} degrees, which is not global: a supported "
                "grid reaches the poles (equiangular 'poles' or 'north' layouts) or lies within half a "
                "cell of them ('cells', Gauss-Legendre)")
        if np.ptp(spacing) > tol:
            raise ValueError(
                f"latitude spacing varies from {spacing.min():g} to {spacing.max():g} degrees and does not "
                f"match Gauss-Legendre latitudes for nlat={nlat}: use an equally spaced grid "
                "(layouts 'poles', 'cells', 'north') or Gauss-Legendre latitudes")
        if abs(lat_ns[-1] + 90) <= tol and abs(lat_ns[0] - 90) > tol:
            raise ValueError("the south pole is sampled but not the north pole: this layout is not "
                             "supported; flip the latitude axis and negate the field's latitude "
                             "dependence, or resample to the 'north', 'poles' or 'cells' layout")
        raise ValueError(
            f"{nlat} equally spaced latitudes from {lat_ns[0]:g} to {lat_ns[-1]:g} degrees match no "
            "supported layout: 'poles' needs both poles, 'north' the north pole and a spacing of "
            f"{180.0 / nlat:g} degrees, 'cells' cell centres {180.0 / nlat:g} degrees apart")

    # -- conveniences -----------------------------------------------------
    @property
    def shape(self) -> tuple[int, int]:
        return (self.nlat, self.nlon)

    @property
    def layout(self) -> str | None:
        """The equiangular layout name, or None for a Gauss grid."""
        return self.kind.split("-", 1)[1] if self.kind.startswith("equiangular") else None

    def _key(self):
        # the nodes and weights themselves belong to the identity: a Grid built
        # directly from its constructor may carry any colatitudes, and the
        # transforms cache their latitude tables by grid
        return (self.kind, self.nlat, self.nlon, self.lon0, self.north_first,
                self.colat.tobytes(), self.weights.tobytes())

    def __eq__(self, other):
        return isinstance(other, Grid) and self._key() == other._key()

    def __hash__(self):
        return hash(self._key())

    def __setattr__(self, name, value):
        raise AttributeError(f"Grid is immutable: build a new one instead of setting {name!r}")

    def __getstate__(self):
        return {s: getattr(self, s) for s in self.__slots__}

    def __setstate__(self, state):
        for k, v in state.items():
            object.__setattr__(self, k, v)

    def __repr__(self):
        extra = f", lon0={self.lon0:g}" if self.lon0 else ""
        order = "" if self.north_first else ", south-to-north"
        return (f"Grid(kind={self.kind!r}, nlat={self.nlat}, nlon={self.nlon}, "
                f"lmax_exact={self.lmax_exact}{extra}{order})")

    def integrate(self, values) -> np.ndarray:
        """Area integral over the unit sphere of ``values`` shaped ``(..., nlat, nlon)``."""
        values = np.asanyarray(values)
        if isinstance(values, np.ma.MaskedArray):
            if np.ma.is_masked(values):
                raise ValueError(f"values are a masked array with {np.ma.count_masked(values)} "
                                 "masked elements: the data under a mask are fill values, not "
                                 "the field; fill the gaps first")
            values = np.ma.getdata(values)
        values = np.asarray(values, dtype=np.float64)
        return (2 * np.pi / self.nlon) * np.einsum("...jk,j->...", values, self.weights)


def _check_int(name, value, minimum):
    return whole_number(value, name, minimum)


def _check_grid_memory(nlat: int, nlon: int, what: str, fix: str) -> None:
    """Refuse, before its nodes are computed, a grid that cannot hold one float64 field
    in the memory available (the nodes, the weights and one field)."""
    check_memory(8.0 * (nlat * nlon + 6 * nlat + 2 * nlon),
                 f"{what}: a {nlat} x {nlon} grid with one float64 field on it", fix)


def _detect_lon(lon, tol):
    n = lon.size
    if n < 1 or not np.all(np.isfinite(lon)):
        raise ValueError("longitude coordinates are empty or contain NaN/inf")
    if n < 3:
        raise ValueError(f"only {n} longitude(s): a global grid needs at least 3 equally spaced longitudes "
                         "(and 2*lmax+1 for degree lmax)")
    # float32 coordinates carry absolute rounding errors up to ~1.2e-7 of their magnitude
    tol = tol + 2.5e-7 * float(np.max(np.abs(lon)))
    d = np.diff(lon)
    step = 360.0 / n
    if np.all(np.abs(d - d[0]) <= tol) and abs(lon[-1] - lon[0] - 360.0) <= tol:
        raise ValueError("the last longitude repeats the first one (0 and 360 both present): drop the "
                         "repeated seam column, e.g. lon[:-1]")
    if np.any(np.abs(d - step) > tol) and np.any(np.abs(d + step) > tol):
        if np.all(np.abs(d - d[0]) <= tol):
            raise ValueError(f"{n} longitudes spaced {d[0]:g} degrees cover {abs(d[0]) * n:g} degrees, "
                             "not the full circle: a global grid needs nlon * spacing = 360")
        raise ValueError(f"longitude spacing is irregular ({d.min():g}..{d.max():g} degrees): "
                         "use equally spaced longitudes covering 360 degrees")
    if np.all(d < 0):
        raise ValueError("longitudes decrease: store them in increasing (eastward) order")
    lon0 = float(lon[0])
    half = step / 2
    if abs(lon0 / half - round(lon0 / half)) * half <= tol:
        lon0 = round(lon0 / half) * half
    return n, lon0


# -- quadrature rules ----------------------------------------------------------

def gauss_nodes(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre colatitudes (ascending, radians) and weights in x, n nodes.

    Newton's method in colatitude on P_n, started from Tricomi's asymptotic
    estimate; weights ``2 sin^2(theta) / (n P_{n-1})^2``.
    """
    from sphex.kernels.gauss import gauss_legendre

    return gauss_legendre(int(n))


#: Up to this many latitudes :meth:`Grid.from_coords` tells a Gauss grid by
#: :func:`gauss_colatitudes_estimate` (numpy, O(n^2)) and leaves the exact nodes for
#: their first use; above, the numba kernel's nodes are quicker.
GAUSS_ESTIMATE_MAX = 600


def gauss_colatitudes_estimate(n: int) -> np.ndarray:
    """Gauss-Legendre colatitudes (ascending, radians) to about 1e-13, with numpy only.

    Tricomi's estimate of the zeros of P_n, then three Newton steps in x on P_n
    from the three-term recurrence (common practice).  Good enough to recognise
    a grid's latitudes (tolerances of 1e-5 degrees); the nodes of a grid come
    from :func:`gauss_nodes`.
    """
    k = np.arange(1, n + 1, dtype=np.float64)
    x = (1.0 - 1.0 / (8.0 * n * n) + 1.0 / (8.0 * n ** 3)) * np.cos(np.pi * (4.0 * k - 1.0)
                                                                     / (4.0 * n + 2.0))
    for _ in range(3):
        p_prev = np.ones_like(x)
        p = x.copy()
        for j in range(2, n + 1):
            p_prev, p = p, ((2.0 * j - 1.0) * x * p - (j - 1.0) * p_prev) / j
        dp = n * (x * p - p_prev) / (x * x - 1.0)
        x = x - p / dp
    return np.arccos(np.clip(x, -1.0, 1.0))


def equiangular_colatitudes(nlat: int, layout: str) -> np.ndarray:
    """Colatitudes (ascending, radians) of an equiangular layout: those of
    :func:`equiangular_nodes` without the weights (no FFT)."""
    if layout == "cells":
        return (np.arange(nlat) + 0.5) * (np.pi / nlat)
    if layout in ("poles", "north"):
        nint = nlat - 1 if layout == "poles" else nlat
        return (np.arange(nint + 1) * (np.pi / nint))[:nlat]
    raise ValueError(f"unknown layout {layout!r}; valid layouts: {', '.join(LAYOUTS)}")


def equiangular_nodes(nlat: int, layout: str) -> tuple[np.ndarray, np.ndarray]:
    """Colatitudes (ascending, radians) and weights in x for an equiangular layout."""
    import scipy.fft  # imported where used: Gauss grids and importing this module need no FFT

    if layout == "cells":
        n = nlat
        colat = (np.arange(n) + 0.5) * (np.pi / n)
        # Fejer's first rule: w_j = (2/n) [1 - 2 sum_{k=1}^{n/2} cos(2k t_j) / (4k^2 - 1)]
        x = np.zeros(n)
        x[0] = 1.0
        k = np.arange(1, (n - 1) // 2 + 1)
        x[2 * k] = -1.0 / (4.0 * k * k - 1.0)
        weights = (2.0 / n) * scipy.fft.dct(x, type=3)
        return colat, weights
    if layout in ("poles", "north"):
        nint = nlat - 1 if layout == "poles" else nlat
        colat_all, w_cc = _clenshaw_curtis(nint)
        if layout == "poles":
            return colat_all, w_cc
        # Drop the south pole: the unique rule on the remaining n nodes that is
        # exact for cos(k t), k < n.  On the full rule's nodes every such
        # function is discretely orthogonal to cos(n t), which expresses its
        # south-pole value through the others:
        #   g(pi) = -2 (-1)^n sum_{j<n} c_j (-1)^j g(t_j),  c_0 = 1/2, c_j = 1.
        n = nint
        j = np.arange(n)
        c = np.ones(n)
        c[0] = 0.5
        weights = w_cc[:n] - 2.0 * w_cc[n] * c * (-1.0) ** (n + j)
        return colat_all[:n], weights
    raise ValueError(f"unknown layout {layout!r}; valid layouts: {', '.join(LAYOUTS)}")


def _clenshaw_curtis(nint: int) -> tuple[np.ndarray, np.ndarray]:
    """Clenshaw-Curtis nodes t_j = j pi / N (j = 0..N) and weights in x."""
    N = nint
    colat = np.arange(N + 1) * (np.pi / N)
    if N == 1:
        return colat, np.array([1.0, 1.0])
    # w_j = (c_j / N) [1 - sum_{k=1}^{N/2} b_k cos(2k t_j) / (4k^2 - 1)], b_k = 2 (1 for 2k = N).
    # DCT-I, y_j = x_0 + (-1)^j x_N + 2 sum_{k=1}^{N-1} x_k cos(pi k j / N), with
    # x_{2k} = -1/(4k^2 - 1) gives the bracket, the end term N counted once.
    x = np.zeros(N + 1)
    x[0] = 1.0
    k = np.arange(1, N // 2 + 1)
    x[2 * k] = -1.0 / (4.0 * k * k - 1.0)
    import scipy.fft

    y = scipy.fft.dct(x, type=1)
    c = np.full(N + 1, 2.0)
    c[0] = c[N] = 1.0
    return colat, c * y / N

