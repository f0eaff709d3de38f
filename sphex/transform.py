"""Analysis and synthesis of real scalar fields on latitude-longitude grids.

The transform is a real FFT in longitude (``scipy.fft`` with workers) followed
by a Legendre stage per order ``m`` (:mod:`sphex.kernels.scalar`) that uses the
north/south symmetry ``Lambda_lm(pi - theta) = (-1)^(l-m) Lambda_lm(theta)``:
each pair of mirrored latitudes is handled in one pass, with the even and odd
degrees taking the sum and the difference of the two rings.  The Legendre
functions are generated on the fly by the three-term recursion, so memory is
O(lmax^2) whatever the degree; orders whose functions are negligible near the
poles skip that range.

Analysis computes ``a_lm = integral f conj(Y_lm) dOmega`` with the grid's
quadrature, exact for fields band-limited to ``grid.lmax_exact``:

    a_lm = 2 pi sum_j w_j Lambda_lm(theta_j) G_m(theta_j),
    G_m(theta_j) = (1/nlon) sum_k f_jk exp(-i m phi_k).

Synthesis evaluates ``f = sum_{l,m} a_lm Y_lm`` exactly at the grid's nodes
(any grid, any degree).  Longitude is measured from 0 whatever the grid's
first longitude.
"""
from __future__ import annotations

import numpy as np
import scipy.fft

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.kernels.scalar import analysis_batch, analysis_single, synthesis_batch, synthesis_single
from sphex.legendre import check_norm, sectoral_table
from sphex.limits import check_memory, whole_number
from sphex.rings import (
    ANALYSIS_OVERFLOW_FIX, SYNTHESIS_OVERFLOW_FIX, ConventionFactor, PairBand,
    batched_coefficients, check_analysis_memory, check_grid, check_lmax, check_synthesis_memory,
    checked_values, convention_factor, fft_workers, fourier_synthesis, latitude_pairs, live_pairs,
    longitude_phase, order_chunks, order_sequence, pair_bands, rescaled_result, run_chunks,
    scaled_input, serial_blas,
)

__all__ = ["analyze", "synthesize", "synthesize_gradient", "synthesize_rings", "regrid"]

#: Fields per call from which the Legendre stage shares one recursion across the
#: batch (sphex.kernels.scalar, ``*_batch``; the synthesis contracts blocks of
#: Legendre values with matrix products); fewer go field by field through the
#: fused single-field kernels.  Two fields already gain (L=511: synthesis
#: 0.17 s against 0.25 s, analysis even).
BATCH_FIELDS = 2


def _analysis(values: np.ndarray, grid: Grid, lmax: int, fac: "ConventionFactor") -> np.ndarray:
    """values: (K, nlat, nlon) of any real dtype -> (K, lmax+1, lmax+1) in fac's convention.

    Latitude bands are transformed one at a time (FFT, then the Legendre
    stage reading the FFT's rows), so memory beyond input and output stays
    small at any degree; a single band (every grid up to a few thousand
    degrees) hands the FFT the input itself."""
    pairs = latitude_pairs(grid)
    K = values.shape[0]
    M = min(lmax, grid.nlon // 2) + 1
    live = live_pairs(grid, lmax, 0, M - 1, 0)
    scale = (2 * np.pi / grid.nlon) * np.conj(longitude_phase(M, grid))
    cm = sectoral_table(lmax)
    coef = np.zeros((K, lmax + 1, lmax + 1), dtype=np.complex128)
    bands = pair_bands(pairs.n, M)
    chunks = order_chunks(0, M - 1, fft_workers())
    for b0, b1 in bands:
        band = PairBand(pairs, b0, b1)
        if len(bands) == 1 and band.rows.size == grid.nlat:
            block = values  # every row, in grid order
        else:
            block = values[:, band.rows, :]
        F = scipy.fft.rfft(np.asarray(block, dtype=np.float64), axis=-1, workers=fft_workers())
        del block
        nlive = np.clip(live - b0, 0, band.n)
        if K >= BATCH_FIELDS:  # numba's parallel loop over every order (see analysis_batch)
            analysis_batch(lmax, order_sequence(0, M - 1, fft_workers()), 0, band.x, band.s, cm,
                           nlive, F, band.north, band.south, band.wn, band.ws, scale,
                           *fac.args(), coef, 0)
        else:
            run_chunks(lambda orders: analysis_single(lmax, orders, 0, band.x, band.s, cm, nlive,
                                                      F, band.north, band.south, band.wn,
                                                      band.ws, scale, *fac.args(), coef, 0),
                       chunks)
    return coef


def _synthesis_passes(grid: Grid, K: int, M_out: int, passes, ntarget: int) -> list[np.ndarray]:
    """Legendre synthesis passes band by band, each band followed by its Fourier synthesis.

    ``passes``: (target, coef, fac, mlo, mhi, dm, scale, shift) tuples; the
    pass adds ``scale[m - mlo] sum_l fac coef Lambda_lm`` (``/ sin theta``
    when shift=1) to Fourier order ``m + dm`` of target ``target``.  Every
    target has at least one pass, and every pass at least one order
    (mlo <= mhi).  Returns one (K, nlat, nlon) array per target.

    The kernel writes each band's Fourier coefficients straight into the
    buffer of the inverse FFT, rows in grid order, already multiplied by
    ``nlon`` and the phase of the first longitude; a single band (every grid
    up to a few thousand degrees) makes the FFT's result the output itself."""
    pairs = latitude_pairs(grid)
    lmax = passes[0][1].shape[-1] - 1
    cm = sectoral_table(lmax)
    N = grid.nlon
    direct = M_out - 1 < (N + 1) // 2  # no folding beyond the Nyquist frequency needed
    W = N // 2 + 1 if direct else M_out
    phase = longitude_phase(max(W, M_out), grid) * N
    bands = pair_bands(pairs.n, M_out)
    kernel = synthesis_batch if K >= BATCH_FIELDS else synthesis_single
    out: list = [None] * ntarget
    if len(bands) > 1:
        out = [np.empty((K,) + grid.shape) for _ in range(ntarget)]
    for b0, b1 in bands:
        band = PairBand(pairs, b0, b1)
        rn = band.north
        rs = np.where(band.south == band.north, -1, band.south)  # an equator ring once
        X = [None] * ntarget
        for target, coef, fac, mlo, mhi, dm, scale, shift in passes:
            first = X[target] is None
            if first:  # the kernel assigns the pass's columns; the others are zero
                X[target] = np.empty((K, band.rows.size, W), dtype=np.complex128)
                X[target][..., :mlo + dm] = 0.0
                X[target][..., mhi + dm + 1:] = 0.0
            nlive = np.clip(live_pairs(grid, lmax, mlo, mhi, shift) - b0, 0, band.n)
            sc = np.asarray(scale, dtype=np.complex128)[:mhi - mlo + 1] * phase[mlo + dm:mhi + dm + 1]
            with serial_blas(K >= BATCH_FIELDS):
                run_chunks(lambda orders: kernel(lmax, orders, mlo, band.x, band.s, cm, nlive,
                                                 coef, *fac.args(), X[target], rn, rs, dm, sc,
                                                 shift, not first),
                           order_chunks(mlo, mhi, fft_workers()))
        for t in range(ntarget):
            v = fourier_synthesis(X[t], N, direct)
            X[t] = None
            if len(bands) == 1 and band.rows.size == grid.nlat:
                out[t] = v  # rows of a single band are all rows, in grid order
            else:
                out[t][:, band.rows, :] = v
    return out


# ---------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------
def analyze(values, grid: Grid, lmax: int | None = None, norm: str = "orthonormal",
            condon_shortley: bool = True, *, radius: float | None = None,
            units: str | None = None, allow_aliasing: bool = False) -> Harmonics:
    """Spherical-harmonic coefficients of real fields sampled on a grid.

    Parameters
    ----------
    values : array_like, shape ``(..., nlat, nlon)``
        Real field(s); leading axes are a batch (time, level, member) done in
        one call.  Integer and float32 input is computed in float64; any memory
        layout is accepted.
    grid : Grid
        The grid the values are sampled on (rows in ``grid.lat`` order).
    lmax : int, optional
        Highest degree; default ``grid.lmax_exact``.  Larger values raise
        unless ``allow_aliasing=True``.
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
    condon_shortley : bool
        Whether the functions carry the phase ``(-1)^m``.
    radius, units : optional
        Stored on the result (reference radius in metres, units of the field).
    allow_aliasing : bool
        Accept ``lmax > grid.lmax_exact`` (the result is then aliased, not exact).

    Returns
    -------
    Harmonics
        Coefficients with ``coef.shape == values.shape[:-2] + (lmax+1, lmax+1)``.

    Raises
    ------
    ValueError
        NaN or inf in ``values``, masked elements (a ``numpy.ma`` array, as a
        netCDF4 variable with fill values gives), complex values, a shape that
        does not match the grid, ``lmax`` above the grid's exact limit or not
        a whole number, an unknown normalisation, coefficients beyond the
        double range.
    RequestTooLarge
        (a ValueError) when the coefficients cannot fit in the memory available.

    Notes
    -----
    ``a_lm = 2 pi sum_j w_j Lambda_lm(theta_j) (1/nlon) sum_k f_jk exp(-i m phi_k)``,
    exact for fields band-limited to ``grid.lmax_exact``.  Input whose
    largest magnitude lies beyond ``2**+-600`` is scaled by a power of two
    before the transform and the coefficients scaled back (exact), so any
    finite input works; coefficients that themselves exceed the double range
    are refused.

    Examples
    --------
    >>> import numpy as np
    >>> g = Grid.gauss(7)
    >>> x = np.cos(g.colat)[:, None] * np.ones(g.nlon)       # f = cos(theta)
    >>> h = analyze(x, g)
    >>> round(float(h[1, 0].real), 12) == round(float(np.sqrt(4 * np.pi / 3)), 12)
    True
    """
    grid = check_grid(grid)
    check_norm(norm)
    arr, peak = checked_values(values, grid)
    lmax = check_lmax(lmax, grid, allow_aliasing)
    batch = arr.shape[:-2]
    check_analysis_memory(int(np.prod(batch)), grid, lmax)
    fac = convention_factor(lmax, "orthonormal", False, norm, condon_shortley)
    arr, e, peak = scaled_input(arr, peak)
    coef = _analysis(arr.reshape((-1,) + grid.shape), grid, lmax, fac)
    coef = rescaled_result(coef, e, f"the {norm} coefficients of a field reaching {peak:.3g}",
                           ANALYSIS_OVERFLOW_FIX)
    coef = coef.reshape(batch + (lmax + 1, lmax + 1))
    return Harmonics(coef, norm=norm, condon_shortley=condon_shortley, radius=radius, units=units)


def synthesize(h: Harmonics, grid: Grid) -> np.ndarray:
    """Values of the field(s) ``h`` at the nodes of ``grid``.

    Parameters
    ----------
    h : Harmonics
        Any degree, normalisation and phase convention; a batch is kept.
    grid : Grid
        Target grid (any kind; coarser than the degree is fine: the values
        are exact point evaluations).

    Returns
    -------
    ndarray, shape ``h.batch_shape + grid.shape``, float64

    Examples
    --------
    >>> import numpy as np
    >>> g = Grid.gauss(7)
    >>> c = np.zeros((8, 8), complex); c[0, 0] = np.sqrt(4 * np.pi)
    >>> float(np.ptp(synthesize(Harmonics(c), g) - 1.0)) < 1e-14
    True
    """
    grid = check_grid(grid)
    c, fac = batched_coefficients(h)
    K, L1, _ = c.shape
    check_synthesis_memory(K, grid, L1 - 1)
    c, e, peak = scaled_input(c)
    out = _synthesis_passes(grid, K, L1, [(0, c, fac, 0, L1 - 1, 0, np.ones(L1), 0)], 1)
    out = rescaled_result(out[0], e, f"the values synthesised from coefficients up to {peak:.3g}",
                          SYNTHESIS_OVERFLOW_FIX)
    return out.reshape(h.batch_shape + grid.shape)


def synthesize_gradient(h: Harmonics, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Horizontal gradient of ``h`` on the unit sphere at the nodes of ``grid``.

    Returns
    -------
    east, north : ndarray, each ``h.batch_shape + grid.shape``
        ``east = (1 / sin theta) df/dphi`` and ``north = df/dlat = -df/dtheta``.

    Notes
    -----
    Exact: the colatitude derivative uses, for the fully normalised functions,

        dLambda_lm/dtheta = (sqrt((l+m)(l-m+1)) Lambda_l,m-1
                             - sqrt((l-m)(l+m+1)) Lambda_l,m+1) / 2   (m >= 1),
        dLambda_l0/dtheta = -sqrt(l(l+1)) Lambda_l1,

    and the longitude term ``i m Lambda_lm / sin theta`` is evaluated with the
    recursion started from ``c_m sin^(m-1) theta``, so nothing is divided by
    ``sin theta`` near the poles.
    """
    grid = check_grid(grid)
    c, fac = batched_coefficients(h)
    K, L1, _ = c.shape
    shape = h.batch_shape + grid.shape
    if L1 == 1:
        return np.zeros(shape), np.zeros(shape)
    check_synthesis_memory(2 * K, grid, L1 - 1)
    c, e, peak = scaled_input(c)
    out = _synthesis_passes(grid, K, L1, _gradient_passes(c, fac), 2)
    out = [rescaled_result(v, e, f"the gradient of coefficients up to {peak:.3g}",
                           SYNTHESIS_OVERFLOW_FIX) for v in out]
    north = np.negative(out[0], out=out[0])
    east = out[1]
    return east.reshape(shape), north.reshape(shape)


def _gradient_passes(c: np.ndarray, fac: "ConventionFactor") -> list:
    """Synthesis passes of (d/dtheta, (1/sin theta) d/dphi) for (K, L+1, L+1) coefficients
    (see :func:`synthesize_gradient`; lmax >= 1)."""
    L1 = c.shape[-1]
    lmax = L1 - 1
    l = np.arange(L1, dtype=np.float64)[:, None]
    m = np.arange(L1, dtype=np.float64)[None, :]
    up = 0.5 * np.sqrt(np.maximum((l + m) * (l - m + 1), 0.0))     # weight of Lambda_l,m-1
    dn = 0.5 * np.sqrt(np.maximum((l - m) * (l + m + 1), 0.0))     # weight of Lambda_l,m+1
    dn[:, 0] = np.sqrt(l[:, 0] * (l[:, 0] + 1))
    # Fourier order m of df/dtheta collects function order m-1 (pass 1) and m+1 (pass 2);
    # each pass re-indexes the coefficients so that the kernel's order is the function's.
    c1 = np.zeros_like(c)
    full = fac.array()
    c1[:, :, :-1] = c[:, :, 1:] * (full * up)[None, :, 1:]       # function order mu = m - 1
    c2 = np.zeros_like(c)
    c2[:, :, 1:] = -c[:, :, :-1] * (full * dn)[None, :, :-1]     # function order mu = m + 1
    one = convention_factor(lmax, "orthonormal", False, "orthonormal", False)
    ones = np.ones(L1)
    return [(0, c1, one, 0, lmax - 1, +1, ones, 0),                 # d/dtheta from order m - 1
            (0, c2, one, 1, lmax, -1, ones, 0),                     # d/dtheta from order m + 1
            (1, c, fac, 1, lmax, 0, 1j * np.arange(1, L1), 1)]      # (1/sin theta) d/dphi


# ---------------------------------------------------------------------------
# rings at any colatitudes, each with its own per-degree weights
# ---------------------------------------------------------------------------
class _RingSet:
    """Latitude rings at arbitrary colatitudes: the part of a grid the synthesis uses.

    Equal and hashed by the nodes themselves, so the caches keyed by grids
    (:func:`latitude_pairs`, :func:`live_pairs`) never take one ring set for another."""

    def __init__(self, colat: np.ndarray, nlon: int, lon0: float):
        self.colat = np.array(colat, dtype=np.float64)
        self.colat.setflags(write=False)
        self.weights = np.ones(self.colat.size)
        self.nlat = self.colat.size
        self.nlon = int(nlon)
        self.lon0 = float(lon0)
        self._key = (self.colat.tobytes(), self.nlon, self.lon0)

    @property
    def shape(self) -> tuple[int, int]:
        return (self.nlat, self.nlon)

    def __eq__(self, other):
        return isinstance(other, _RingSet) and self._key == other._key

    def __hash__(self):
        return hash(self._key)


class _Weighted:
    """A :class:`ConventionFactor` with per-degree weights folded into its degree part."""

    def __init__(self, fac, weights: np.ndarray):
        fl, fm, full, use_full = fac.args()
        if use_full:
            self._args = (fl, fm, full * weights[:, None], True)
        else:
            self._args = (fl * weights, fm, full, False)

    def args(self):
        return self._args


def synthesize_rings(h: Harmonics, colat, nlon: int, lon0: float = 0.0, *,
                     degree_weights=None, gradient: bool = False):
    """Values of ``h`` on latitude rings at any colatitudes, each ring with its own
    per-degree weights.

    Parameters
    ----------
    h : Harmonics
    colat : array_like
        Colatitudes of the rings in radians, 1-D, within [0, pi], any order.
    nlon : int
        Longitudes per ring, ``lon0 + 360 k / nlon`` degrees.
    lon0 : float
        First longitude in degrees.
    degree_weights : array_like, optional
        ``(lmax + 1,)`` weights for every ring, or ``(nrings, lmax + 1)``, one
        row per ring: ring i gets ``sum_l w[i, l] sum_m a_lm Y_lm``.  Default 1.
    gradient : bool
        Return the horizontal gradient ``(east, north)`` on the unit sphere
        (as :func:`synthesize_gradient`) instead of the values.

    Returns
    -------
    ndarray or (ndarray, ndarray)
        ``h.batch_shape + (nrings, nlon)`` each.

    Notes
    -----
    A radial continuation to points at different radii is the typical use:
    ``w[i, l] = (R / r_i)^(l+1)`` for the rings of a grid on an ellipsoid.
    Rings with equal weight rows share one pass of the transform (mirrored
    rings with the north/south symmetry); the weights are applied inside the
    Legendre stage, so no weighted copy of the coefficients is made.
    """
    c, fac = batched_coefficients(h)
    K, L1, _ = c.shape
    colat = np.asarray(colat, dtype=np.float64)
    if colat.ndim != 1 or colat.size == 0:
        raise ValueError(f"colat must be a non-empty 1-D array of colatitudes, got shape {colat.shape}")
    if not np.all(np.isfinite(colat)) or np.any(colat < 0) or np.any(colat > np.pi):
        raise ValueError("colatitudes must lie in [0, pi] radians "
                         "(convert latitudes with colat = pi/2 - radians(lat))")
    nlon = whole_number(nlon, "nlon", 1)
    w = np.ones(L1) if degree_weights is None else np.asarray(degree_weights, dtype=np.float64)
    if w.shape not in ((L1,), (colat.size, L1)):
        raise ValueError(f"degree_weights must have shape ({L1},) or ({colat.size}, {L1}) for "
                         f"lmax={L1 - 1} and {colat.size} rings, got {w.shape}")
    if not np.all(np.isfinite(w)):
        raise ValueError("degree_weights contain NaN or inf")
    if w.ndim == 1:
        groups, rows_of = w[None], [np.arange(colat.size)]
    else:
        groups, inverse = np.unique(w, axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        rows_of = [np.flatnonzero(inverse == g) for g in range(groups.shape[0])]
    ntarget = 2 if gradient else 1
    shape = h.batch_shape + (colat.size, int(nlon))
    if gradient and L1 == 1:
        return np.zeros(shape), np.zeros(shape)
    check_memory(8.0 * ntarget * K * colat.size * nlon * 3,
                 f"the synthesis of {K} field(s) on {colat.size} rings of {nlon} longitudes",
                 "use fewer rings or longitudes, or fewer fields at a time")
    c, e, peak = scaled_input(c)
    if gradient:
        base = _gradient_passes(c, fac)
    else:
        base = [(0, c, fac, 0, L1 - 1, 0, np.ones(L1), 0)]
    out = [None] * ntarget if len(rows_of) == 1 else [np.empty((K,) + shape[-2:])
                                                       for _ in range(ntarget)]
    for weights, rows in zip(groups, rows_of):
        rings = _RingSet(colat[rows], nlon, lon0)
        passes = [p[:2] + (_Weighted(p[2], weights),) + p[3:] for p in base]
        parts = _synthesis_passes(rings, K, L1, passes, ntarget)
        for t in range(ntarget):
            if len(rows_of) == 1:
                out[t] = parts[t]
            else:
                out[t][:, rows, :] = parts[t]
    out = [rescaled_result(v, e, f"the values synthesised from coefficients up to {peak:.3g}",
                           SYNTHESIS_OVERFLOW_FIX).reshape(shape) for v in out]
    if not gradient:
        return out[0]
    north = np.negative(out[0], out=out[0])
    return out[1], north


def regrid(values, source: Grid, target: Grid, lmax: int | None = None) -> np.ndarray:
    """Spectral regridding: analysis on ``source``, synthesis on ``target``.

    The field is band-limited to ``lmax`` (default: the smaller of the two
    grids' exact limits), so a field band-limited to that degree is reproduced
    exactly on the target grid.
    """
    source = check_grid(source)
    target = check_grid(target)
    if lmax is None:
        lmax = min(source.lmax_exact, target.lmax_exact)
    h = analyze(values, source, lmax=lmax)
    return synthesize(h, target)


