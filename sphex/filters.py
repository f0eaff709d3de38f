"""Isotropic filters (per-degree weights) and spectral operators.

A filter is a vector of per-degree weights ``w[l]``, ``l = 0..lmax``; applied
with ``h.filter(w)`` it multiplies every coefficient of degree ``l`` by
``w[l]``. Because the weights depend on the degree only, the filter acts the
same way everywhere on the sphere (no pole artefacts): it is a convolution
with a zonal kernel (Funk-Hecke theorem). The smoothing filters here are
normalised so that ``w[0] = 1`` (the global mean is kept).

Filters combine by multiplication (``taper(...) * gaussian(...)``); a
high-pass is ``1 - taper(...)``.

Operators (:func:`laplacian`, :func:`inverse_laplacian`, :func:`gradient`,
:func:`continue_radially`) take and return :class:`~sphex.harmonics.Harmonics`
(or grid values for the gradient); they act on the unit sphere unless
``h.radius`` (metres) is set.
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np
from scipy import special

from sphex.grids import Grid, gauss_nodes
from sphex.harmonics import Harmonics
from sphex.limits import check_memory, peak_magnitude, refuse_overflow, whole_number

__all__ = [
    "gaussian",
    "cap",
    "taper",
    "band_pass",
    "per_degree",
    "zonal_weights",
    "convolve",
    "laplacian",
    "inverse_laplacian",
    "gradient",
    "continue_radially",
]

# Above this concentration the scaled Bessel routine gives NaN; there the
# forward recursion is accurate instead (see _gaussian_weights).
_BESSEL_B_LIMIT = 1.0e9
# Forward recursion error grows like exp(l(l+1)/b); keep it below e**7 (~1e3).
_FORWARD_GROWTH_LIMIT = 7.0


# ---------------------------------------------------------------- validation
def _check_lmax(lmax: object, name: str = "lmax") -> int:
    """A degree: a whole number >= 0 whose per-degree arrays fit in memory."""
    if not isinstance(lmax, (int, np.integer)) or isinstance(lmax, (bool, np.bool_)):
        raise ValueError(f"{name} must be a non-negative integer (got {lmax!r})")
    lmax = whole_number(lmax, name)
    check_memory(32.0 * (lmax + 1), f"per-degree weights to degree {lmax}", "use a lower lmax")
    return lmax


def _check_positive(value: object, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a positive number (got {value!r})") from None
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"{name} must be a positive finite number (got {value!r})")
    return v


def _check_harmonics(h: object) -> Harmonics:
    if not isinstance(h, Harmonics):
        raise ValueError(
            f"h must be a sphex.Harmonics (got {type(h).__name__}); "
            "make one with sphex.analyze(values, grid)"
        )
    return h


def _scale_degrees(h: Harmonics, factor: np.ndarray, **changes) -> Harmonics:
    """New Harmonics with every degree-l coefficient multiplied by factor[l]; refused
    when the product leaves the double range."""
    with np.errstate(over="ignore", invalid="ignore"):
        coef = h.coef * factor[: h.lmax + 1, None]
    if np.isfinite(peak_magnitude(h.coef)):
        refuse_overflow(coef, f"the scaled coefficients (from coefficients up to "
                        f"{peak_magnitude(h.coef):.3g}, degree factors up to "
                        f"{peak_magnitude(factor):.3g})",
                        "divide the coefficients by a power of ten (larger units) or truncate "
                        "to a lower degree first")
    return h.replace(coef=coef, **changes)


def _units_times_metres(units: str | None, power: int) -> str | None:
    if units is None:
        return None
    return f"{units} m{power}"


# -------------------------------------------------------------------- filters
def gaussian(radius_km: float, lmax: int, planet_radius_km: float) -> np.ndarray:
    r"""Weights of the isotropic Gaussian smoothing kernel, half weight at ``radius_km``.

    Parameters
    ----------
    radius_km : float
        Distance along the surface at which the kernel falls to half its
        central value (km), at most half the circumference.
    lmax : int
        Highest degree; the result has ``lmax + 1`` entries.
    planet_radius_km : float
        Radius of the sphere the distance is measured on (km).

    Returns
    -------
    numpy.ndarray
        ``w[l]`` for ``l = 0..lmax``, ``w[0] = 1``, decreasing towards 0.

    Notes
    -----
    The kernel (Jekeli 1981; Wahr et al. 1998) is
    :math:`K(\psi) \propto e^{-b(1-\cos\psi)}` with
    :math:`b = \ln 2 / (1 - \cos(r/R))`, and its normalised Legendre
    coefficients are ratios of modified Bessel functions of half-integer
    order,

    .. math:: w_l = \frac{\int_{-1}^{1} e^{-b(1-x)} P_l(x)\,dx}
                         {\int_{-1}^{1} e^{-b(1-x)}\,dx}
                  = \frac{I_{l+1/2}(b)}{I_{1/2}(b)} .

    The classic forward recursion
    :math:`w_{l+1} = w_{l-1} - \frac{2l+1}{b} w_l` runs against the
    dominant solution (the :math:`K_{l+1/2}` functions): in double precision
    its relative error passes :math:`10^{-3}` once :math:`w_l` has fallen to
    about :math:`10^{-7}` (then it diverges). Here the ratio is
    evaluated with exponentially scaled Bessel functions
    (``scipy.special.ive``, uniform asymptotic expansions), which stays
    accurate to a few parts in :math:`10^{12}` (relative) wherever
    :math:`w_l > 10^{-290}`, tested for :math:`0.35 \le b \le 10^9` up to
    degree 10800 against a 700-digit evaluation of the recursion; smaller
    weights underflow cleanly to 0. For :math:`b > 10^9` (a radius below
    about :math:`3.7\times 10^{-5} R`) the forward recursion is used, whose
    error growth :math:`e^{l(l+1)/b}` is then negligible; degrees with
    :math:`l(l+1) > 7b` there are refused.

    References
    ----------
    Jekeli, C. (1981), Alternative methods to smooth the Earth's gravity
    field, Rep. 327, Dept. of Geodetic Science, Ohio State University.
    Wahr, J., Molenaar, M., Bryan, F. (1998), J. Geophys. Res. 103(B12),
    30205-30229.

    Examples
    --------
    >>> from sphex.filters import gaussian
    >>> w = gaussian(500.0, 60, 6371.0)
    >>> float(w[0]), bool(0 < w[60] < w[10] < 1)
    (1.0, True)
    """
    r = _check_positive(radius_km, "radius_km")
    big_r = _check_positive(planet_radius_km, "planet_radius_km")
    lmax = _check_lmax(lmax)
    angle = r / big_r
    if angle > math.pi:
        raise ValueError(
            f"radius_km={r} is more than half the circumference of a sphere of radius "
            f"{big_r} km; give a radius of at most {math.pi * big_r:.6g} km"
        )
    one_minus_cos = 2.0 * math.sin(0.5 * angle) ** 2
    b = math.log(2.0) / one_minus_cos
    return _gaussian_weights(b, lmax)


def _gaussian_weights(b: float, lmax: int) -> np.ndarray:
    """I_{l+1/2}(b) / I_{1/2}(b) for l = 0..lmax (see gaussian)."""
    l = np.arange(lmax + 1, dtype=float)
    if b <= _BESSEL_B_LIMIT:
        with np.errstate(under="ignore"):
            w = special.ive(l + 0.5, b) / special.ive(0.5, b)
        if np.all(np.isfinite(w)):
            w[0] = 1.0
            return w
    if lmax * (lmax + 1.0) > _FORWARD_GROWTH_LIMIT * b:
        raise ValueError(
            f"Gaussian weights for concentration b={b:.3g} are not available to degree "
            f"{lmax}; use lmax <= {int(math.sqrt(_FORWARD_GROWTH_LIMIT * b)) - 1} "
            "or a larger radius"
        )
    w = np.empty(lmax + 1)
    w[0] = 1.0
    if lmax >= 1:
        w[1] = 1.0 / math.tanh(b) - 1.0 / b
    for k in range(1, lmax):
        w[k + 1] = w[k - 1] - (2 * k + 1) / b * w[k]
    return w


def cap(radius_deg: float, lmax: int) -> np.ndarray:
    r"""Weights of the average over a spherical cap of angular radius ``radius_deg``.

    Parameters
    ----------
    radius_deg : float
        Angular radius of the cap, ``0 < radius_deg <= 180`` (degrees).
    lmax : int
        Highest degree; the result has ``lmax + 1`` entries.

    Returns
    -------
    numpy.ndarray
        ``w[l]``, ``w[0] = 1``; the filtered field at a point is the mean of
        the field over the cap centred there.

    Notes
    -----
    With :math:`x_0 = \cos\psi_0`,

    .. math:: w_l = \frac{1}{1-x_0}\int_{x_0}^{1} P_l(x)\,dx
                  = \frac{P_{l-1}(x_0) - P_{l+1}(x_0)}{(2l+1)(1-x_0)} .

    The difference in the numerator cancels badly for small caps, so the
    recursion is carried for the increments :math:`g_l = P_l - P_{l-1}`
    with :math:`u = 1 - x_0 = 2\sin^2(\psi_0/2)`:
    :math:`(l+1)\,g_{l+1} = l\,g_l - (2l+1)\,u\,P_l`,
    :math:`w_l = -(g_l + g_{l+1}) / ((2l+1)u)`. It is the ordinary
    (stable) Legendre recursion rewritten, so it holds to any degree.

    Examples
    --------
    >>> from sphex.filters import cap
    >>> w = cap(10.0, 3)
    >>> round(float(w[1]), 12)    # (1 + cos 10 deg) / 2
    0.992403876506
    """
    rd = _check_positive(radius_deg, "radius_deg")
    if rd > 180.0:
        raise ValueError(f"radius_deg must be at most 180 (got {radius_deg!r})")
    lmax = _check_lmax(lmax)
    psi0 = math.radians(rd)
    u = 2.0 * math.sin(0.5 * psi0) ** 2
    w = np.empty(lmax + 1)
    w[0] = 1.0
    p = 1.0 - u  # P_1(x0)
    g = -u  # g_1 = P_1 - P_0
    for l in range(1, lmax + 1):
        g_next = (l * g - (2 * l + 1) * u * p) / (l + 1)
        w[l] = -(g + g_next) / ((2 * l + 1) * u)
        p += g_next
        g = g_next
    return w


def taper(l1: int, l2: int, lmax: int | None = None) -> np.ndarray:
    r"""Low-pass weights: 1 up to degree ``l1``, a cosine roll-off, 0 from ``l2`` on.

    Parameters
    ----------
    l1, l2 : int
        ``0 <= l1 < l2``.
    lmax : int, optional
        Highest degree of the result (``lmax + 1`` entries). Defaults to
        ``l2``; pass ``lmax=h.lmax`` to filter a field of higher degree
        (``h.filter`` needs at least ``h.lmax + 1`` weights).

    Returns
    -------
    numpy.ndarray

    Notes
    -----
    .. math:: w_l = \tfrac12\Big(1 + \cos\frac{\pi (l - l_1)}{l_2 - l_1}\Big),
              \quad l_1 < l < l_2 .

    Examples
    --------
    >>> from sphex.filters import taper
    >>> taper(2, 4, lmax=5)
    array([1. , 1. , 1. , 0.5, 0. , 0. ])
    """
    l1, l2 = _check_lmax(l1), _check_lmax(l2)
    if not l1 < l2:
        raise ValueError(f"taper needs l1 < l2 (got l1={l1}, l2={l2})")
    lmax = l2 if lmax is None else _check_lmax(lmax)
    l = np.arange(lmax + 1, dtype=float)
    t = np.clip((l - l1) / (l2 - l1), 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * t))


def band_pass(l1: int, l2: int, l3: int, l4: int, lmax: int | None = None) -> np.ndarray:
    """Band-pass weights: 0 up to ``l1``, rising to 1 at ``l2``, 1 to ``l3``, 0 from ``l4``.

    Both flanks are the cosine roll-off of :func:`taper`; the result is
    ``(1 - taper(l1, l2)) * taper(l3, l4)``. Needs ``l1 < l2 <= l3 < l4``;
    ``lmax`` defaults to ``l4``.

    Examples
    --------
    >>> from sphex.filters import band_pass
    >>> band_pass(1, 3, 4, 6)
    array([0. , 0. , 0.5, 1. , 1. , 0.5, 0. ])
    """
    l1, l2, l3, l4 = (_check_lmax(v) for v in (l1, l2, l3, l4))
    if not (l1 < l2 <= l3 < l4):
        raise ValueError(
            f"band_pass needs l1 < l2 <= l3 < l4 (got {l1}, {l2}, {l3}, {l4})"
        )
    lmax = l4 if lmax is None else _check_lmax(lmax)
    return (1.0 - taper(l1, l2, lmax)) * taper(l3, l4, lmax)


def per_degree(weights: "np.ndarray | Callable[[np.ndarray], np.ndarray]", lmax: int) -> np.ndarray:
    """User weights checked and cut to ``lmax + 1`` entries.

    Parameters
    ----------
    weights : array_like or callable
        One real weight per degree (at least ``lmax + 1`` of them), or a
        function of the degree array ``l = 0..lmax`` returning them.
    lmax : int

    Returns
    -------
    numpy.ndarray
        Float weights, shape ``(lmax + 1,)``.

    Examples
    --------
    >>> from sphex.filters import per_degree
    >>> per_degree(lambda l: 1.0 / (1.0 + l), 3)
    array([1.        , 0.5       , 0.33333333, 0.25      ])
    """
    lmax = _check_lmax(lmax)
    if callable(weights):
        w = np.asarray(weights(np.arange(lmax + 1)), dtype=float)
        if w.shape != (lmax + 1,):
            raise ValueError(
                f"the weight function returned shape {w.shape}; it must return one "
                f"value per degree, shape ({lmax + 1},)"
            )
    else:
        w = np.asarray(weights)
        if np.iscomplexobj(w) or w.ndim != 1:
            raise ValueError("weights must be a 1-D array of real numbers, one per degree")
        w = w.astype(float)
        if w.size < lmax + 1:
            raise ValueError(
                f"{w.size} weights given, {lmax + 1} needed for lmax={lmax}; "
                "pad with the value you want for the higher degrees"
            )
        w = w[: lmax + 1]
    if not np.all(np.isfinite(w)):
        raise ValueError("weights contain NaN or inf; give finite numbers")
    return w


def zonal_weights(
    kernel: Callable[[np.ndarray], np.ndarray],
    lmax: int,
    *,
    normalize: bool = True,
    nodes: int | None = None,
) -> np.ndarray:
    r"""Per-degree weights of the convolution with a zonal kernel (Funk-Hecke).

    Parameters
    ----------
    kernel : callable
        ``kernel(psi)``: the kernel as a function of angular distance
        ``psi`` (radians, array in ``[0, pi]``), returning real values of
        the same shape.
    lmax : int
    normalize : bool, default True
        Divide by the degree-0 value, so ``w[0] = 1`` (a weighted mean that
        keeps the global mean). With False the weights are those of the
        convolution integral over the unit sphere,
        :math:`\int k(\psi(p,q)) f(q)\,d\Omega_q`.
    nodes : int, optional
        Number of Gauss-Legendre nodes in :math:`x = \cos\psi`; default
        ``2 * lmax + 66``, exact for a kernel that is a polynomial in
        :math:`x` of degree up to ``lmax + 131``, and enough for smooth
        kernels. Raise it for kernels with a kink or jump (a cap has an
        exact form in :func:`cap`).

    Returns
    -------
    numpy.ndarray
        ``w[l]`` for ``l = 0..lmax``.

    Notes
    -----
    By the Funk-Hecke theorem each :math:`Y_{lm}` is an eigenfunction of the
    convolution, with eigenvalue

    .. math:: \lambda_l = 2\pi\int_{-1}^{1} k(\arccos x)\,P_l(x)\,dx ,

    evaluated by Gauss-Legendre quadrature with :math:`P_l` from the
    three-term recursion.

    Examples
    --------
    >>> import numpy as np
    >>> from sphex.filters import zonal_weights
    >>> w = zonal_weights(lambda psi: np.cos(psi), 3, normalize=False)
    >>> np.round(w / np.pi, 12)     # k = P_1(cos psi): 4 pi / 3 at l = 1 only
    array([0.        , 1.33333333, 0.        , 0.        ])
    """
    if not callable(kernel):
        raise ValueError("kernel must be a function of angular distance psi (radians)")
    lmax = _check_lmax(lmax)
    n = 2 * lmax + 66 if nodes is None else _check_lmax(nodes)
    if n < 1:
        raise ValueError("nodes must be at least 1")
    psi, qw = gauss_nodes(n)
    psi = np.asarray(psi, dtype=float)
    x = np.cos(psi)
    k = np.asarray(kernel(psi), dtype=float)
    if k.shape != psi.shape:
        raise ValueError(
            f"kernel(psi) returned shape {k.shape} for psi of shape {psi.shape}; "
            "it must work elementwise on an array"
        )
    if not np.all(np.isfinite(k)):
        raise ValueError("kernel(psi) returned NaN or inf on [0, pi]; give a finite kernel")
    kw = np.asarray(qw, dtype=float) * k
    lam = np.empty(lmax + 1)
    p_prev = np.ones_like(x)
    lam[0] = kw.sum()
    if lmax >= 1:
        p = x.copy()
        lam[1] = kw @ p
        for l in range(1, lmax):
            p_prev, p = p, ((2 * l + 1) * x * p - l * p_prev) / (l + 1)
            lam[l + 1] = kw @ p
    lam *= 2.0 * np.pi
    if normalize:
        if not abs(lam[0]) > 1e-12 * 2.0 * np.pi * np.abs(kw).sum():
            raise ValueError(
                "the kernel integrates to zero over the sphere, so it cannot be "
                "normalised; use normalize=False"
            )
        lam /= lam[0]
    return lam


def convolve(
    h: Harmonics,
    kernel: Callable[[np.ndarray], np.ndarray],
    *,
    normalize: bool = True,
    nodes: int | None = None,
) -> Harmonics:
    """Convolve a field with a zonal kernel: ``h.filter(zonal_weights(kernel, h.lmax, ...))``.

    See :func:`zonal_weights` for the arguments. With ``normalize=False``
    the result is the convolution integral over the unit sphere (scale by
    ``R**2`` for the integral over a sphere of radius R).
    """
    _check_harmonics(h)
    return h.filter(zonal_weights(kernel, h.lmax, normalize=normalize, nodes=nodes))


# ------------------------------------------------------------------ operators
def laplacian(h: Harmonics) -> Harmonics:
    r"""Surface Laplacian of a field.

    Every degree-l coefficient is multiplied by :math:`-l(l+1)`, and divided
    by ``h.radius**2`` when the radius is set (then ``units`` gains
    ``m-2``); otherwise it is the Laplace-Beltrami operator of the unit
    sphere.

    Examples
    --------
    >>> import numpy as np, sphex
    >>> from sphex.filters import laplacian
    >>> c = np.zeros((4, 4), complex); c[3, 2] = 1.0
    >>> complex(laplacian(sphex.Harmonics(c))[3, 2])
    (-12+0j)
    """
    _check_harmonics(h)
    l = np.arange(h.lmax + 1, dtype=float)
    factor = -l * (l + 1.0)
    if h.radius is None:
        return _scale_degrees(h, factor)
    return _scale_degrees(
        h, factor / h.radius**2, units=_units_times_metres(h.units, -2)
    )


def inverse_laplacian(h: Harmonics) -> Harmonics:
    r"""Solve Poisson's equation :math:`\nabla^2 u = f` on the sphere.

    Degree-l coefficients are divided by :math:`-l(l+1)` (times
    ``h.radius**2`` when set; ``units`` gains ``m2``). The Laplacian
    annihilates constants, so the degree-0 coefficient of the result is
    **set to zero** (the solution with zero global mean); and a solution
    exists only when f has zero mean, so the degree-0 part of ``h`` is
    ignored. ``laplacian(inverse_laplacian(h))`` is ``h`` minus its mean.
    """
    _check_harmonics(h)
    l = np.arange(h.lmax + 1, dtype=float)
    factor = np.zeros(h.lmax + 1)
    factor[1:] = -1.0 / (l[1:] * (l[1:] + 1.0))
    if h.radius is None:
        return _scale_degrees(h, factor)
    return _scale_degrees(
        h, factor * h.radius**2, units=_units_times_metres(h.units, 2)
    )


def gradient(h: Harmonics, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    r"""Surface gradient of a field on a grid, exactly from its coefficients.

    Parameters
    ----------
    h : Harmonics
    grid : Grid

    Returns
    -------
    east, north : numpy.ndarray
        Each ``(..., nlat, nlon)``:
        :math:`\frac{1}{R\cos\varphi}\frac{\partial f}{\partial\lambda}` and
        :math:`\frac{1}{R}\frac{\partial f}{\partial\varphi}`
        (latitude :math:`\varphi`, longitude :math:`\lambda`), with
        ``R = h.radius`` in metres when set (units of ``h.units`` per metre)
        and ``R = 1`` otherwise (per radian).

    Notes
    -----
    Computed by :func:`sphex.transform.synthesize_gradient` from the
    colatitude derivatives of the Legendre functions and the factor
    :math:`i m` in longitude, not by finite differences.
    """
    from sphex.transform import synthesize_gradient

    _check_harmonics(h)
    if not isinstance(grid, Grid):
        raise ValueError(
            f"grid must be a sphex.Grid (got {type(grid).__name__}); "
            "for example sphex.Grid.gauss(h.lmax)"
        )
    east, north = synthesize_gradient(h, grid)
    if h.radius is not None:
        with np.errstate(over="ignore"):
            east = east / h.radius
            north = north / h.radius
        for part in (east, north):
            refuse_overflow(part, f"the gradient on a sphere of radius {h.radius:g} m",
                            "give the radius in metres, or larger units for the field")
    return east, north


def continue_radially(h: Harmonics, r: float) -> Harmonics:
    r"""Continue an exterior potential field from its reference sphere to radius ``r``.

    Parameters
    ----------
    h : Harmonics
        Coefficients of a field harmonic outside its reference sphere
        (gravitational or magnetic potential, or a quantity derived
        degree by degree from one).
    r : float
        Target radius in metres when ``h.radius`` is set; otherwise the
        ratio of the target radius to the reference radius.

    Returns
    -------
    Harmonics
        Degree l scaled by :math:`(R/r)^{l+1}`. When ``h.radius`` is set the
        result carries ``radius=r`` (it describes the field on the sphere of
        radius r).

    Raises
    ------
    ValueError
        If ``r`` is not positive, or a downward continuation (``r < R``)
        overflows; truncate to a lower lmax first.

    Notes
    -----
    Upward continuation (:math:`r > R`) is a smoothing filter and always
    safe. Downward continuation amplifies degree l by
    :math:`(R/r)^{l+1}` and with it any noise in the coefficients; the
    result is only as good as the high-degree coefficients.
    """
    _check_harmonics(h)
    r = _check_positive(r, "r")
    ratio = (h.radius / r) if h.radius is not None else (1.0 / r)
    l = np.arange(h.lmax + 1, dtype=float)
    with np.errstate(over="ignore", under="ignore"):
        factor = np.exp((l + 1.0) * math.log(ratio))
    if not np.all(np.isfinite(factor)):
        raise ValueError(
            f"downward continuation by a radius ratio {1 / ratio:.6g} overflows at degree "
            f"{int(np.argmin(np.isfinite(factor)))}; truncate h to a lower lmax first"
        )
    if h.radius is None:
        return _scale_degrees(h, factor)
    return _scale_degrees(h, factor, radius=r)
