"""Degree power spectra, cross spectra, correlation, power-law slopes and isotropy.

All spectra here are physical quantities: they are computed from the
coefficients converted to the ``"orthonormal"`` normalisation with the
Condon-Shortley phase, so the same field gives the same spectrum whatever
convention its :class:`~sphex.harmonics.Harmonics` carries.

Units: a spectrum of a field in units ``u`` (``h.units``) is in ``u**2``
(for example ``m**2`` for topography in metres); correlations are
dimensionless; degree RMS amplitudes are in ``u``.

The functions take a :class:`~sphex.harmonics.Harmonics` (or, for
:func:`spectral_slope`, a spectrum array, and for :func:`kinetic_energy` a
:class:`sphex.flow.Flow`) and return plain numpy arrays whose last axis is the
degree ``l = 0..lmax``; leading batch axes are kept.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sphex.harmonics import Harmonics
from sphex.limits import peak_magnitude, refuse_overflow

__all__ = [
    "degree_power",
    "power_per_coefficient",
    "degree_rms",
    "coefficient_rms",
    "cumulative_power",
    "cross_power",
    "correlation",
    "correlation_significance",
    "spectral_slope",
    "kinetic_energy",
    "IsotropyTable",
    "isotropy_table",
]

_FOUR_PI = 4.0 * np.pi


def _check_harmonics(h: object, name: str = "h") -> Harmonics:
    if not isinstance(h, Harmonics):
        raise ValueError(
            f"{name} must be a sphex.Harmonics (got {type(h).__name__}); "
            "make one with sphex.analyze(values, grid)"
        )
    return h


def _ortho_coef(h: Harmonics) -> np.ndarray:
    """Coefficients of the same field in the 'orthonormal', Condon-Shortley convention."""
    if h.norm == "orthonormal" and h.condon_shortley:
        return h.coef
    return h.to(norm="orthonormal", condon_shortley=True).coef


#: Coefficients beyond 2**+-SQUARE_SAFE_EXPONENT are scaled by a power of two before
#: they are squared, so that a power within the double range never overflows.
SQUARE_SAFE_EXPONENT = 400
_OVERFLOW_FIX = "divide the coefficients by a power of ten (larger units) first"


def _binary_scale(a: np.ndarray) -> tuple[np.ndarray, int]:
    """``(a * 2**-e, e)`` with ``e`` bringing the largest magnitude of ``a`` near 1 when it
    lies beyond 2**+-SQUARE_SAFE_EXPONENT; ``(a, 0)`` otherwise."""
    peak = peak_magnitude(a)
    if not math.isfinite(peak) or peak == 0.0 or \
            2.0 ** -SQUARE_SAFE_EXPONENT <= peak <= 2.0 ** SQUARE_SAFE_EXPONENT:
        return a, 0
    e = math.frexp(peak)[1]
    return np.ldexp(a.real, -e) + 1j * np.ldexp(a.imag, -e), e


def _pair_power(a1: np.ndarray, a2: np.ndarray | None, what: str) -> np.ndarray:
    """``_degree_sum(Re(a1 conj(a2)))`` (``a2`` None: ``|a1|^2``) computed on scaled copies
    of extreme coefficients, scaled back, and refused if it leaves the double range."""
    b1, e1 = _binary_scale(a1)
    b2, e2 = (b1, e1) if a2 is None else _binary_scale(a2)
    x = _degree_sum((b1 * np.conj(b2)).real)
    with np.errstate(over="ignore"):
        x = np.ldexp(x, e1 + e2)
    finite_in = math.isfinite(peak_magnitude(a1)) and (a2 is None or
                                                       math.isfinite(peak_magnitude(a2)))
    if finite_in:
        peak = max(peak_magnitude(a1), 0.0 if a2 is None else peak_magnitude(a2))
        refuse_overflow(x, f"the {what} of coefficients up to {peak:.3g}", _OVERFLOW_FIX)
    return x


def _degree_sum(prod: np.ndarray) -> np.ndarray:
    """Per-degree sum over orders of a [l, m] product: m = 0 once, m > 0 twice."""
    return (prod[..., :, 0] + 2.0 * prod[..., :, 1:].sum(axis=-1)) / _FOUR_PI


def degree_power(h: Harmonics) -> np.ndarray:
    r"""Contribution of each degree to the mean square of the field over the sphere.

    Parameters
    ----------
    h : Harmonics
        Coefficients of a real field, any normalisation and phase convention,
        optionally with leading batch axes.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., lmax+1)``, in units squared of ``h.units``.

    Notes
    -----
    With the coefficients :math:`a_{lm}` of the "orthonormal" normalisation,

    .. math:: P_l = \frac{1}{4\pi}\Big(a_{l0}^2 + 2\sum_{m=1}^{l} |a_{lm}|^2\Big),

    so that :math:`\sum_l P_l = \frac{1}{4\pi}\int f^2\,d\Omega`, the area
    mean of :math:`f^2` (Parseval). In the real "full" form this is
    :math:`\sum_m (C_{lm}^2 + S_{lm}^2)`, the geodesists' degree variance.

    Examples
    --------
    >>> import numpy as np, sphex
    >>> from sphex.spectra import degree_power
    >>> grid = sphex.Grid.gauss(8)
    >>> lat = np.radians(grid.lat)[:, None] + 0 * grid.lon
    >>> p2 = 1.5 * np.sin(lat) ** 2 - 0.5          # Legendre P_2(sin lat)
    >>> np.round(degree_power(sphex.analyze(p2, grid))[:4], 12)
    array([0. , 0. , 0.2, 0. ])
    """
    _check_harmonics(h)
    return _pair_power(_ortho_coef(h), None, "degree power")


def power_per_coefficient(h: Harmonics) -> np.ndarray:
    r"""Degree power divided by the number of coefficients of the degree.

    :math:`P_l / (2l+1)`: the mean square of one "full"-normalised
    coefficient of degree l (the power spectral density per degree and
    order). Units squared of ``h.units``; shape ``(..., lmax+1)``.
    """
    p = degree_power(h)
    return p / (2.0 * np.arange(p.shape[-1]) + 1.0)


def degree_rms(h: Harmonics) -> np.ndarray:
    r"""RMS over the sphere of the degree-l part of the field, :math:`\sqrt{P_l}`.

    Units of ``h.units``; shape ``(..., lmax+1)``. The RMS of the whole field
    is ``sqrt(degree_power(h).sum(-1))``.
    """
    return np.sqrt(degree_power(h))


def coefficient_rms(h: Harmonics) -> np.ndarray:
    r"""RMS of a "full"-normalised coefficient at each degree, :math:`\sqrt{P_l/(2l+1)}`.

    This is the per-degree amplitude geodesists compare with a power rule
    (for example :math:`10^{-5}/l^2` for planetary gravity). Units of
    ``h.units``; shape ``(..., lmax+1)``.
    """
    return np.sqrt(power_per_coefficient(h))


def cumulative_power(h: Harmonics) -> np.ndarray:
    r"""Mean square of the field up to and including each degree.

    :math:`\sum_{k \le l} P_k`; the last entry is the area mean of
    :math:`f^2`. Units squared of ``h.units``; shape ``(..., lmax+1)``.
    """
    return np.cumsum(degree_power(h), axis=-1)


def _common_pair(h1: Harmonics, h2: Harmonics) -> tuple[np.ndarray, np.ndarray]:
    _check_harmonics(h1, "h1")
    _check_harmonics(h2, "h2")
    lmax = min(h1.lmax, h2.lmax)
    a1 = _ortho_coef(h1)[..., : lmax + 1, : lmax + 1]
    a2 = _ortho_coef(h2)[..., : lmax + 1, : lmax + 1]
    try:
        np.broadcast_shapes(a1.shape, a2.shape)
    except ValueError:
        raise ValueError(
            f"batch shapes {h1.batch_shape} and {h2.batch_shape} do not broadcast; "
            "give both fields the same leading axes"
        ) from None
    return a1, a2


def cross_power(h1: Harmonics, h2: Harmonics) -> np.ndarray:
    r"""Contribution of each degree to the area mean of the product of two fields.

    Parameters
    ----------
    h1, h2 : Harmonics
        Coefficients of two real fields, in any conventions (each is
        converted); batch shapes must broadcast. Degrees above the smaller
        ``lmax`` are ignored.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., min(lmax1, lmax2)+1)``, in units of ``h1.units`` times
        ``h2.units``.

    Notes
    -----
    .. math:: X_l = \frac{1}{4\pi}\,\mathrm{Re}\Big(a_{l0} b_{l0} +
              2\sum_{m=1}^{l} a_{lm}\,\overline{b_{lm}}\Big),

    with "orthonormal" coefficients, so :math:`\sum_l X_l` is the area mean of
    :math:`f_1 f_2`, and ``cross_power(h, h) == degree_power(h)``.
    """
    a1, a2 = _common_pair(h1, h2)
    return _pair_power(a1, a2, "cross power")


def correlation(h1: Harmonics, h2: Harmonics) -> np.ndarray:
    r"""Per-degree correlation coefficient of two fields.

    :math:`X_l / \sqrt{P^{(1)}_l P^{(2)}_l}`, between -1 and 1: 1 for a
    field with itself (or any positive multiple), -1 with its negative. It is
    NaN at degrees where either field has no power. Dimensionless; shape
    ``(..., min(lmax1, lmax2)+1)``.
    """
    a1, a2 = _common_pair(h1, h2)
    a1, a2 = _binary_scale(a1)[0], _binary_scale(a2)[0]  # the ratio does not depend on scale
    x = _degree_sum((a1 * np.conj(a2)).real)
    p1 = _degree_sum(np.abs(a1) ** 2)
    p2 = _degree_sum(np.abs(a2) ** 2)
    den = np.sqrt(p1 * p2)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(den > 0, x / np.where(den > 0, den, 1.0), np.nan)
    return np.clip(r, -1.0, 1.0)


def correlation_significance(lmax: int, level: float = 0.95) -> np.ndarray:
    r"""Per-degree correlation that two uncorrelated isotropic fields exceed with chance ``1 - level``.

    Parameters
    ----------
    lmax : int
        Highest degree (>= 0).
    level : float
        Confidence level in (0, 1), two-sided: ``|r_l|`` of two independent
        fields exceeds the returned value with probability ``1 - level``.

    Returns
    -------
    numpy.ndarray
        Shape ``(lmax+1,)``; NaN at degree 0 (one coefficient: ``|r_0| = 1``
        always).

    Notes
    -----
    The degree-l correlation of :func:`correlation` is the cosine of the
    angle between the two vectors of the ``n = 2l+1`` real coefficients of
    degree l.  When one field's coefficients are independent and identically
    distributed normal numbers (an isotropic Gaussian field), that vector
    points in a uniformly random direction, so :math:`r_l^2 \sim
    \mathrm{Beta}(1/2, (n-1)/2)` whatever the other field is, and

    .. math:: r_c = \sqrt{I^{-1}_{\mathrm{level}}(1/2, (n-1)/2)},

    the inverse regularised incomplete beta function.  For large l this tends
    to :math:`z/\sqrt{2l+1}` with :math:`z = 1.96` at 95 %, the common rule
    of thumb :math:`2/\sqrt{2l+1}`.

    Examples
    --------
    >>> from sphex.spectra import correlation_significance
    >>> r = correlation_significance(400)
    >>> round(float(r[400] * (2 * 400 + 1) ** 0.5), 2)
    1.96
    """
    from scipy.special import betaincinv

    if int(lmax) != lmax or lmax < 0:
        raise ValueError(f"lmax must be a whole number >= 0 (got {lmax!r})")
    if not 0.0 < float(level) < 1.0:
        raise ValueError(f"level must lie between 0 and 1, such as 0.95 (got {level!r})")
    n = 2.0 * np.arange(int(lmax) + 1) + 1.0
    out = np.full(n.size, np.nan)
    out[1:] = np.sqrt(betaincinv(0.5, (n[1:] - 1.0) / 2.0, float(level)))
    return out


def spectral_slope(power: np.ndarray, lmin: int, lmax: int) -> tuple:
    r"""Fit a power law :math:`P_l \approx 10^{c}\, l^{s}` over ``lmin <= l <= lmax``.

    Parameters
    ----------
    power : array_like
        A spectrum indexed by degree along the last axis (``power[..., l]``),
        for example from :func:`degree_power`; leading axes are a batch.
    lmin, lmax : int
        Degree range of the fit, ``1 <= lmin < lmax <= power.shape[-1] - 1``.
        Every value in the range must be positive.

    Returns
    -------
    slope, intercept : float or numpy.ndarray
        Least-squares line through :math:`(\log_{10} l, \log_{10} P_l)`:
        ``log10(P) = slope * log10(l) + intercept``. Floats for a single
        spectrum, arrays of the batch shape otherwise.

    Raises
    ------
    ValueError
        If the range is empty or outside the spectrum, or a power in it is
        not positive and finite.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex.spectra import spectral_slope
    >>> l = np.arange(101)
    >>> p = np.zeros(101); p[1:] = 3.0 * l[1:] ** -2.5
    >>> s, c = spectral_slope(p, 2, 100)
    >>> round(s, 12), round(10 ** c, 12)
    (-2.5, 3.0)
    """
    p = np.asarray(power, dtype=float)
    if p.ndim == 0:
        raise ValueError("power must be an array indexed by degree along its last axis")
    nl = p.shape[-1]
    if int(lmin) != lmin or int(lmax) != lmax:
        raise ValueError(f"lmin and lmax must be integers (got {lmin!r}, {lmax!r})")
    lmin, lmax = int(lmin), int(lmax)
    if not (1 <= lmin < lmax <= nl - 1):
        raise ValueError(
            f"need 1 <= lmin < lmax <= {nl - 1} for a spectrum of {nl} degrees "
            f"(got lmin={lmin}, lmax={lmax}); degree 0 cannot enter a log-log fit"
        )
    seg = p[..., lmin : lmax + 1]
    if not np.all(np.isfinite(seg)) or np.any(seg <= 0):
        raise ValueError(
            f"power must be positive and finite for degrees {lmin}..{lmax}; "
            "narrow the range to where the spectrum is positive"
        )
    x = np.log10(np.arange(lmin, lmax + 1, dtype=float))
    y = np.log10(seg)
    xm = x.mean()
    dx = x - xm
    slope = (y * dx).sum(axis=-1) / (dx * dx).sum()
    intercept = y.mean(axis=-1) - slope * xm
    if np.ndim(slope) == 0:
        return float(slope), float(intercept)
    return slope, intercept


def kinetic_energy(flow) -> tuple[np.ndarray, np.ndarray]:
    r"""Kinetic energy per unit mass of a flow, per degree, split into its rotational and divergent parts.

    Parameters
    ----------
    flow : sphex.flow.Flow
        Streamfunction and velocity potential (any convention, optional batch
        axes), on a sphere of radius ``flow.radius`` metres (unit sphere when
        None).

    Returns
    -------
    rotational, divergent : numpy.ndarray
        Each ``(..., lmax+1)``: m2 s-2 for a flow in m s-1 with the radius in
        metres.  Degree 0 is zero.

    Notes
    -----
    .. math:: E^{rot}_l = \frac{l(l+1)}{2R^2} P_l(\psi), \qquad
              E^{div}_l = \frac{l(l+1)}{2R^2} P_l(\chi),

    with :math:`P_l` the :func:`degree_power`. Because
    :math:`\int \nabla Y_{lm} \cdot \overline{\nabla Y_{l'm'}}\,d\Omega
    = l(l+1)\,\delta_{ll'}\delta_{mm'}` and the rotational and divergent
    parts are orthogonal (Helmholtz),
    :math:`\sum_l (E^{rot}_l + E^{div}_l)` is the area mean of
    :math:`(u^2 + v^2)/2` (Parseval for vector fields).
    """
    psi = getattr(flow, "psi", None)
    chi = getattr(flow, "chi", None)
    if not (isinstance(psi, Harmonics) and isinstance(chi, Harmonics)):
        raise ValueError(f"flow must be a sphex.flow.Flow (got {type(flow).__name__}); make one with "
                         "sphex.flow.analyze_flow(east, north, grid)")
    radius = 1.0 if psi.radius is None else psi.radius
    l = np.arange(psi.lmax + 1, dtype=float)
    weight = l * (l + 1.0) / (2.0 * radius * radius)
    with np.errstate(over="ignore"):
        parts = weight * degree_power(psi), weight * degree_power(chi)
    for part in parts:
        refuse_overflow(part, "the kinetic energy per degree", _OVERFLOW_FIX)
    return parts


@dataclass(frozen=True)
class IsotropyTable:
    """Binned shares of each degree's power by order, relative to an isotropic field.

    One entry per cell; a cell covers the degrees ``degree_first..degree_last``
    and the orders whose ratio m/l lies in ``[fraction_low, fraction_high)``
    (the last cell of a row includes m/l = 1).  All arrays have one entry per
    cell, rows of increasing degree, cells of increasing m/l within a row.

    Attributes
    ----------
    degree_first, degree_last : numpy.ndarray of int
        First and last degree of the cell.
    fraction_low, fraction_high : numpy.ndarray of float
        Range of m/l of the cell, from 0 (zonal) to 1 (sectoral).
    ratio : numpy.ndarray of float
        Share of the power the cell's orders carry, divided by the share an
        isotropic field gives them (1 for an isotropic field; NaN where the
        degrees have no power).
    coefficients : numpy.ndarray of int
        Real coefficients (cosine and sine counted apart, times the number of
        fields) the cell averages.
    """

    degree_first: np.ndarray
    degree_last: np.ndarray
    fraction_low: np.ndarray
    fraction_high: np.ndarray
    ratio: np.ndarray
    coefficients: np.ndarray

    @property
    def log2_ratio(self) -> np.ndarray:
        """``log2(ratio)``: 0 for an isotropic share, +1 twice it, -1 half of it."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log2(self.ratio)

    def find(self, degree: int, order: int) -> int:
        """Index of the cell holding ``(degree, order)``.

        Raises
        ------
        ValueError
            If no cell holds it (degree 0, or outside the table).
        """
        f = order / degree if degree > 0 else -1.0
        hit = ((self.degree_first <= degree) & (degree <= self.degree_last)
               & (self.fraction_low <= f)
               & ((f < self.fraction_high) | ((self.fraction_high >= 1.0) & (f <= 1.0))))
        where = np.flatnonzero(hit)
        if where.size != 1 or not 0 <= order <= degree:
            raise ValueError(f"no cell holds degree {degree}, order {order}; the table covers "
                             f"degrees {int(self.degree_first.min())}..{int(self.degree_last.max())}"
                             " and orders 0..l")
        return int(where[0])


def _degree_rows(lmax: int, step: float) -> list[tuple[int, int]]:
    """Rows of degrees ``(first, last)`` from degree 1, each about ``step`` times wider
    than the degree it starts at; a short last row joins the one before it."""
    rows = []
    l = 1
    while l <= lmax:
        nxt = max(l + 1, int(round(l * step)))
        rows.append((l, min(nxt, lmax + 1) - 1))
        l = nxt
    if len(rows) > 1:
        first, last = rows[-1]
        nominal = max(1, int(round(first * step)) - first)
        if last - first + 1 < nominal / 2:
            rows[-2:] = [(rows[-2][0], last)]
    return rows


def _row_of_cells(squares: np.ndarray, power: np.ndarray, first: int, last: int,
                  nbins: int) -> tuple[np.ndarray, np.ndarray]:
    """Ratios and coefficient counts of the ``nbins`` cells of degrees ``first..last``.

    ``squares[f, l, m]`` are the squared orthonormal coefficients of field f and
    ``power[f, l]`` its degree power; order m of degree l falls in cell
    ``floor(m nbins / l)`` (m = l in the last one).
    """
    share = np.zeros(nbins)
    expect = np.zeros(nbins)
    count = np.zeros(nbins, dtype=np.int64)
    for l in range(first, last + 1):
        live = power[:, l] > 0
        if not live.any():
            continue
        m = np.arange(l + 1)
        weight = np.where(m == 0, 1.0, 2.0)                  # cosine and sine for m > 0
        cell = np.minimum((m * nbins) // l, nbins - 1)
        s_lm = (weight * squares[live, l, : l + 1] / (4 * np.pi * power[live, l, None])).sum(0)
        np.add.at(share, cell, s_lm)
        np.add.at(expect, cell, live.sum() * weight / (2 * l + 1))
        np.add.at(count, cell, (live.sum() * weight).astype(np.int64))
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(expect > 0, share / np.where(expect > 0, expect, 1.0), np.nan)
    return ratio, count


def isotropy_table(h: Harmonics, *, degree_step: float = 1.25,
                   fraction_bins: int = 8) -> IsotropyTable:
    r"""How each degree's power is shared among its orders, against an isotropic field.

    For each degree l the share of its power carried by order m (cosine and
    sine together) is divided by the share an isotropic field gives that
    order on average, 1/(2l+1) for m = 0 and 2/(2l+1) for m > 0, and the
    ratios are averaged in cells of neighbouring degrees and of m/l.  A
    random isotropic field gives ratios near 1 everywhere; zonal banding
    shows as ratios above 1 near m/l = 0, sectoral structure near m/l = 1.

    Parameters
    ----------
    h : Harmonics
        Coefficients, any normalisation and phase; a batch of fields is
        pooled (each field's shares are added, so cells average more
        coefficients).
    degree_step : float
        Rows of degrees grow geometrically: a row starting at degree l ends
        near ``degree_step * l`` (rows are at least one degree).  Degree 0,
        which has a single order, is left out.
    fraction_bins : int
        Cells per row along m/l, at most; a row whose first degree l has
        fewer than ``fraction_bins`` orders gets l+1 cells, one per order of
        that degree.

    Returns
    -------
    IsotropyTable

    Notes
    -----
    With orthonormal coefficients :math:`a_{lm}`, degree power :math:`P_l`
    (:func:`degree_power`) and :math:`w_0 = 1`, :math:`w_m = 2` for m > 0,
    the share of order m is :math:`s_{lm} = w_m |a_{lm}|^2 / (4\pi P_l)`
    (so :math:`\sum_m s_{lm} = 1`) and its isotropic expectation is
    :math:`e_{lm} = w_m/(2l+1)`.  A cell C gets

    .. math:: r_C = \sum_{(l,m) \in C} s_{lm} \Big/ \sum_{(l,m) \in C} e_{lm}.

    For a Gaussian isotropic field each real coefficient is an independent
    :math:`\chi^2_1` draw scaled by the degree's power, so a cell averaging n
    real coefficients has a ratio with mean about 1 and standard deviation
    about :math:`\sqrt{2/n}`: a cell of one coefficient is a single draw,
    not a share, and cells of 100 or more read to about 15 %.

    Examples
    --------
    >>> import numpy as np, sphex
    >>> from sphex.spectra import isotropy_table
    >>> c = np.zeros((4, 4)); s = np.zeros((4, 4)); c[2, 0] = 1.0   # a zonal degree-2 field
    >>> t = isotropy_table(sphex.Harmonics.from_cos_sin(c, s))
    >>> float(t.ratio[t.find(2, 0)])                     # all of degree 2's power, 5 x 1/5
    5.0
    """
    _check_harmonics(h)
    if not degree_step > 1.0:
        raise ValueError(f"degree_step must be above 1, not {degree_step}")
    if int(fraction_bins) != fraction_bins or fraction_bins < 1:
        raise ValueError(f"fraction_bins must be a whole number >= 1, not {fraction_bins}")
    if h.lmax < 1:
        raise ValueError("the isotropy table needs degrees above 0; these coefficients stop at 0")
    a = _ortho_coef(h)
    squares = np.abs(a.reshape((-1,) + a.shape[-2:])) ** 2          # (fields, l, m)
    power = _degree_sum(squares)                                        # (fields, l)
    cells: dict[str, list] = {k: [] for k in ("first", "last", "low", "high", "ratio", "count")}
    for first, last in _degree_rows(h.lmax, degree_step):
        nbins = min(int(fraction_bins), first + 1)
        ratio, count = _row_of_cells(squares, power, first, last, nbins)
        edges = np.arange(nbins + 1) / nbins
        cells["first"] += [first] * nbins
        cells["last"] += [last] * nbins
        cells["low"] += list(edges[:-1])
        cells["high"] += list(edges[1:])
        cells["ratio"] += list(ratio)
        cells["count"] += list(count)
    return IsotropyTable(np.asarray(cells["first"], dtype=np.int64),
                         np.asarray(cells["last"], dtype=np.int64),
                         np.asarray(cells["low"]), np.asarray(cells["high"]),
                         np.asarray(cells["ratio"], dtype=float),
                         np.asarray(cells["count"], dtype=np.int64))
