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

import functools

import numpy as np
import scipy.fft

from sphex.kernels import numba
from sphex.kernels.recursion import live_counts
from sphex.kernels.scalar import analysis_kernel, synthesis_kernel
from sphex.grids import Grid
from sphex.harmonics import Harmonics, convert_factor
from sphex.legendre import check_norm, norm_column, sectoral_table

__all__ = ["analyze", "synthesize", "synthesize_gradient", "regrid"]


def _workers() -> int:
    """FFT threads: numba's thread count for the calling thread (all cores in the
    main thread, fewer inside dask tasks under the rule of :mod:`sphex.xr.scaleout`)."""
    return numba.get_num_threads()


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def _check_grid(grid) -> Grid:
    if not isinstance(grid, Grid):
        raise ValueError(f"grid must be a sphex.Grid (Grid.gauss, Grid.equiangular or Grid.from_coords), "
                         f"got {type(grid).__name__}")
    return grid


def _check_values(values, grid: Grid) -> np.ndarray:
    arr = np.asarray(values)
    if arr.dtype.kind not in "fiu":
        raise ValueError(f"values must be real numbers (float or integer), got dtype {arr.dtype}; "
                         "for complex data analyse the real and imaginary parts separately")
    if arr.ndim < 2 or arr.shape[-2:] != grid.shape:
        raise ValueError(f"values have shape {arr.shape} but the grid is (nlat, nlon) = {grid.shape}: "
                         "the last two axes must be latitude then longitude "
                         "(transpose with np.moveaxis if they are swapped)")
    if arr.dtype.kind == "f" and not np.all(np.isfinite(arr)):
        bad = int(np.size(arr) - np.count_nonzero(np.isfinite(arr)))
        raise ValueError(f"values contain {bad} NaN or inf entries: fill or mask them first "
                         "(a spherical-harmonic analysis needs every grid point)")
    return arr


def _check_lmax(lmax, grid: Grid, allow_aliasing: bool) -> int:
    if lmax is None:
        return grid.lmax_exact
    if isinstance(lmax, bool) or int(lmax) != lmax or lmax < 0:
        raise ValueError(f"lmax must be a non-negative integer, got {lmax!r}")
    lmax = int(lmax)
    if lmax > grid.lmax_exact and not allow_aliasing:
        raise ValueError(f"lmax={lmax} is above this grid's exact degree limit {grid.lmax_exact} "
                         f"({grid!r}): use lmax <= {grid.lmax_exact}, a finer grid, or "
                         "allow_aliasing=True to accept an aliased result")
    return lmax


# ---------------------------------------------------------------------------
# latitude pairs
# ---------------------------------------------------------------------------
class _Pairs:
    """Latitude rings grouped in mirrored pairs, ordered from the equator to the poles."""

    def __init__(self, grid: Grid):
        colat = grid.colat
        order = np.argsort(colat, kind="stable")
        n = colat.size
        used = np.zeros(n, dtype=bool)
        north, south = [], []
        # match each northern ring with its mirror
        sorted_c = colat[order]
        for idx in order:
            if used[idx] or colat[idx] > np.pi / 2 + 1e-14:
                continue
            used[idx] = True
            target = np.pi - colat[idx]
            if abs(colat[idx] - np.pi / 2) <= 1e-14:
                north.append(idx)
                south.append(idx)
                continue
            k = int(np.searchsorted(sorted_c, target - 1e-12))
            mate = -1
            if k < n and abs(sorted_c[k] - target) <= 1e-12 and not used[order[k]]:
                mate = int(order[k])
                used[mate] = True
            north.append(idx)
            south.append(mate)
        for idx in order:  # southern rings without a northern mirror
            if not used[idx]:
                used[idx] = True
                north.append(-1)
                south.append(int(idx))
        self.north = np.array(north, dtype=np.int64)
        self.south = np.array(south, dtype=np.int64)
        ref = np.where(self.north >= 0, self.north, self.south)
        theta = colat[ref]
        theta = np.where(self.north >= 0, theta, np.pi - theta)  # northern colatitude of the pair
        x = np.cos(theta)
        s = np.sin(theta)
        x[np.abs(theta - np.pi / 2) <= 1e-14] = 0.0
        s[theta == 0] = 0.0
        # equator first, poles last
        perm = np.argsort(-theta, kind="stable")
        self.north, self.south = self.north[perm], self.south[perm]
        self.x, self.s = x[perm], s[perm]
        w = grid.weights
        same = self.north == self.south
        self.wn = np.where(self.north >= 0, w[np.maximum(self.north, 0)], 0.0)
        self.ws = np.where(self.south >= 0, w[np.maximum(self.south, 0)], 0.0)
        self.wn = np.where(same, self.wn / 2, self.wn)
        self.ws = np.where(same, self.ws / 2, self.ws)
        self.n = self.x.size


def _phase(m_count: int, grid: Grid) -> np.ndarray:
    """exp(i m lon0) for m = 0..m_count-1."""
    return np.exp(1j * np.arange(m_count) * np.radians(grid.lon0))


@functools.lru_cache(maxsize=32)
def _pairs(grid: Grid) -> _Pairs:
    return _Pairs(grid)


@functools.lru_cache(maxsize=64)
def _live(grid: Grid, lmax: int, mlo: int, mhi: int, shift: int) -> np.ndarray:
    """Per order, how many latitude pairs (equator first) carry non-negligible values."""
    pairs = _pairs(grid)
    out = np.empty(mhi - mlo + 1, dtype=np.int64)
    live_counts(lmax, mlo, mhi, pairs.x, pairs.s, sectoral_table(lmax), shift, out)
    out.setflags(write=False)
    return out


@functools.lru_cache(maxsize=256)
def _order_sequence(mlo: int, mhi: int, nthreads: int) -> np.ndarray:
    """Orders mlo..mhi in the sequence the transform kernels take them.

    numba splits a parallel loop into equal contiguous chunks, one per thread.
    Orders are paired cheap with costly (mlo with mhi, mlo+1 with mhi-1, ...)
    and the pairs are dealt to the chunks in turn, so every thread gets nearly
    the same work (0.02 % apart at L=1023 on two threads; handing out the
    pairs in sequence left 5 %)."""
    lo, hi = mlo, mhi
    pairs = []
    while lo <= hi:
        pairs.append((lo, hi) if lo < hi else (lo,))
        lo += 1
        hi -= 1
    t = max(int(nthreads), 1)
    g = 4  # pairs dealt four at a time: neighbouring orders share cache lines of the outputs
    groups = [pairs[i:i + g] for i in range(0, len(pairs), g)]
    seq = [m for k in range(t) for grp in groups[k::t] for p in grp for m in p]
    out = np.array(seq, dtype=np.int64)
    out.setflags(write=False)
    return out


BAND_BYTES = 1 << 25  # pairs per band: BAND_BYTES / (8 M); see _bands


def _bands(npairs: int, M: int) -> list[tuple[int, int]]:
    """Latitude-pair bands (start, stop) small enough to bound memory.

    A band of BAND_BYTES / (8 M) pairs holds 4 BAND_BYTES (128 MB) of complex
    FFT data per field (two rings per pair, about M frequencies each); every
    grid with M * npairs up to about 4 million (lmax near 2900 on a Gauss
    grid) is one band."""
    size = int(np.clip(BAND_BYTES // (8 * max(M, 1)), 64, max(npairs, 1)))
    if size < npairs:
        size -= size % 8
    return [(b, min(b + size, npairs)) for b in range(0, npairs, size)]


class _Band:
    """Rows of one band of latitude pairs, with pair indices local to the band."""

    def __init__(self, pairs: _Pairs, b0: int, b1: int):
        north = pairs.north[b0:b1]
        south = pairs.south[b0:b1]
        rows = np.unique(np.concatenate([north[north >= 0], south[south >= 0]]))
        local = np.full(int(rows.max(initial=0)) + 1, -1, dtype=np.int64)
        local[rows] = np.arange(rows.size)
        self.rows = rows
        self.north = np.where(north >= 0, local[np.maximum(north, 0)], -1)
        self.south = np.where(south >= 0, local[np.maximum(south, 0)], -1)
        self.x = pairs.x[b0:b1]
        self.s = pairs.s[b0:b1]
        self.wn = pairs.wn[b0:b1]
        self.ws = pairs.ws[b0:b1]
        self.n = b1 - b0


def _analysis(values: np.ndarray, grid: Grid, lmax: int, fac: "_Factor") -> np.ndarray:
    """values: (K, nlat, nlon) of any real dtype -> (K, lmax+1, lmax+1) in fac's convention.

    Latitude bands are transformed one at a time (FFT, then the Legendre
    stage reading the FFT's rows), so memory beyond input and output stays
    small at any degree; a single band (every grid up to a few thousand
    degrees) hands the FFT the input itself."""
    pairs = _pairs(grid)
    K = values.shape[0]
    M = min(lmax, grid.nlon // 2) + 1
    live = _live(grid, lmax, 0, M - 1, 0)
    scale = (2 * np.pi / grid.nlon) * np.conj(_phase(M, grid))
    cm = sectoral_table(lmax)
    coef = np.zeros((K, lmax + 1, lmax + 1), dtype=np.complex128)
    bands = _bands(pairs.n, M)
    seq = _order_sequence(0, M - 1, _workers())
    for b0, b1 in bands:
        band = _Band(pairs, b0, b1)
        if len(bands) == 1 and band.rows.size == grid.nlat:
            block = values  # every row, in grid order
        else:
            block = values[:, band.rows, :]
        F = scipy.fft.rfft(np.asarray(block, dtype=np.float64), axis=-1, workers=_workers())
        del block
        nlive = np.clip(live - b0, 0, band.n)
        analysis_kernel(lmax, 0, seq, band.x, band.s, cm, nlive, F, band.north,
                                 band.south, band.wn, band.ws, scale, *fac.args(), coef, 0)
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
    pairs = _pairs(grid)
    lmax = passes[0][1].shape[-1] - 1
    cm = sectoral_table(lmax)
    N = grid.nlon
    direct = M_out - 1 < (N + 1) // 2  # no folding beyond the Nyquist frequency needed
    W = N // 2 + 1 if direct else M_out
    phase = _phase(max(W, M_out), grid) * N
    bands = _bands(pairs.n, M_out)
    out: list = [None] * ntarget
    if len(bands) > 1:
        out = [np.empty((K,) + grid.shape) for _ in range(ntarget)]
    for b0, b1 in bands:
        band = _Band(pairs, b0, b1)
        rn = band.north
        rs = np.where(band.south == band.north, -1, band.south)  # an equator ring once
        X = [None] * ntarget
        for target, coef, fac, mlo, mhi, dm, scale, shift in passes:
            first = X[target] is None
            if first:  # the kernel assigns the pass's columns; the others are zero
                X[target] = np.empty((K, band.rows.size, W), dtype=np.complex128)
                X[target][..., :mlo + dm] = 0.0
                X[target][..., mhi + dm + 1:] = 0.0
            nlive = np.clip(_live(grid, lmax, mlo, mhi, shift) - b0, 0, band.n)
            sc = np.asarray(scale, dtype=np.complex128)[:mhi - mlo + 1] * phase[mlo + dm:mhi + dm + 1]
            seq = _order_sequence(mlo, mhi, _workers())
            synthesis_kernel(lmax, mlo, seq, band.x, band.s, cm, nlive, coef,
                                      *fac.args(), X[target], rn, rs, dm, sc, shift,
                                      not first)
        for t in range(ntarget):
            v = _fourier_synthesis(X[t], N, direct)
            X[t] = None
            if len(bands) == 1 and band.rows.size == grid.nlat:
                out[t] = v  # rows of a single band are all rows, in grid order
            else:
                out[t][:, band.rows, :] = v
    return out


def _fourier_synthesis(X: np.ndarray, N: int, direct: bool) -> np.ndarray:
    """X: (K, rows, W) scaled Fourier coefficients -> real values (K, rows, N).

    ``direct``: X holds orders 0..N//2 and goes to the inverse real FFT as it
    is (overwritten).  Otherwise X holds orders 0..W-1 beyond the Nyquist
    frequency of a coarse target, folded onto the N frequencies first (an
    exact evaluation of the series at the grid's longitudes)."""
    if direct:
        return scipy.fft.irfft(X, n=N, axis=-1, workers=_workers(), overwrite_x=True)
    K, rows, W = X.shape
    Y = np.zeros((K, rows, N), dtype=np.complex128)
    m = np.arange(W)
    np.add.at(Y, (slice(None), slice(None), m % N), X)
    np.add.at(Y, (slice(None), slice(None), (-m[1:]) % N), np.conj(X[..., 1:]))
    return scipy.fft.ifft(Y, axis=-1, workers=_workers()).real


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
        NaN or inf in ``values``, a shape that does not match the grid, ``lmax``
        above the grid's exact limit, an unknown normalisation.

    Notes
    -----
    ``a_lm = 2 pi sum_j w_j Lambda_lm(theta_j) (1/nlon) sum_k f_jk exp(-i m phi_k)``,
    exact for fields band-limited to ``grid.lmax_exact``.

    Examples
    --------
    >>> import numpy as np
    >>> g = Grid.gauss(7)
    >>> x = np.cos(g.colat)[:, None] * np.ones(g.nlon)       # f = cos(theta)
    >>> h = analyze(x, g)
    >>> round(float(h[1, 0].real), 12) == round(float(np.sqrt(4 * np.pi / 3)), 12)
    True
    """
    grid = _check_grid(grid)
    check_norm(norm)
    arr = _check_values(values, grid)
    lmax = _check_lmax(lmax, grid, allow_aliasing)
    batch = arr.shape[:-2]
    fac = _factor(lmax, "orthonormal", False, norm, condon_shortley)
    coef = _analysis(arr.reshape((-1,) + grid.shape), grid, lmax, fac)
    coef = coef.reshape(batch + (lmax + 1, lmax + 1))
    return Harmonics(coef, norm=norm, condon_shortley=condon_shortley, radius=radius, units=units)


class _Factor:
    """Per-(l, m) factors from one convention to another, kept small.

    For the normalised conventions the factor separates, ``fl[l] * fm[m]``
    (a per-degree scale and the phase sign); only conversions involving
    ``"unnormalized"`` (which is limited to low degree) hold a full table."""

    def __init__(self, lmax: int, norm_from: str, cs_from: bool, norm_to: str, cs_to: bool):
        self.lmax = lmax
        self.fm = np.ones(lmax + 1)
        if bool(cs_from) != bool(cs_to):
            self.fm[1::2] = -1.0
        if "unnormalized" in (norm_from, norm_to):
            g = convert_factor(lmax, norm_from, cs_from, norm_to, cs_to)
            tri = np.tril(np.ones((lmax + 1, lmax + 1), dtype=bool))
            if not np.all(np.isfinite(g[tri])) or np.any(g[tri] == 0):
                raise ValueError(f"unnormalised coefficients to lmax={lmax} leave double range: use "
                                 "norm='orthonormal', 'full' or 'schmidt' (or a lower lmax)")
            self.full, self.use_full = g, True
            self.fl = np.ones(lmax + 1)
        else:
            self.full, self.use_full = np.ones((1, 1)), False
            # normalised conventions differ by a function of the degree only
            self.fl = norm_column(lmax, 0, norm_from) / norm_column(lmax, 0, norm_to)

    def args(self):
        return self.fl, self.fm, self.full, self.use_full

    def col(self, l: np.ndarray, m: int) -> np.ndarray:
        return self.full[l, m] if self.use_full else self.fl[l] * self.fm[m]

    def array(self) -> np.ndarray:
        return self.full.copy() if self.use_full else np.outer(self.fl, self.fm)


@functools.lru_cache(maxsize=16)
def _factor(lmax: int, norm_from: str, cs_from: bool, norm_to: str, cs_to: bool) -> _Factor:
    return _Factor(lmax, norm_from, cs_from, norm_to, cs_to)


def _batched(h: Harmonics) -> tuple[np.ndarray, np.ndarray]:
    """(coef as (K, L+1, L+1), factor to orthonormal without phase) after checks."""
    if not isinstance(h, Harmonics):
        raise ValueError(f"expected a sphex.Harmonics, got {type(h).__name__}")
    c = h.coef.reshape((-1, h.lmax + 1, h.lmax + 1))
    if not np.all(np.isfinite(c)):
        raise ValueError("coefficients contain NaN or inf: check the input")
    return c, _factor(h.lmax, h.norm, h.condon_shortley, "orthonormal", False)


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
    grid = _check_grid(grid)
    c, fac = _batched(h)
    K, L1, _ = c.shape
    out = _synthesis_passes(grid, K, L1, [(0, c, fac, 0, L1 - 1, 0, np.ones(L1), 0)], 1)
    return out[0].reshape(h.batch_shape + grid.shape)


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
    grid = _check_grid(grid)
    c, fac = _batched(h)
    K, L1, _ = c.shape
    lmax = L1 - 1
    shape = h.batch_shape + grid.shape
    if lmax == 0:
        return np.zeros(shape), np.zeros(shape)
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
    one = _factor(lmax, "orthonormal", False, "orthonormal", False)
    ones = np.ones(L1)
    passes = [(0, c1, one, 0, lmax - 1, +1, ones, 0),                 # d/dtheta from order m - 1
              (0, c2, one, 1, lmax, -1, ones, 0),                     # d/dtheta from order m + 1
              (1, c, fac, 1, lmax, 0, 1j * np.arange(1, L1), 1)]      # (1/sin theta) d/dphi
    out = _synthesis_passes(grid, K, L1, passes, 2)
    north = np.negative(out[0], out=out[0])
    east = out[1]
    return east.reshape(shape), north.reshape(shape)


def regrid(values, source: Grid, target: Grid, lmax: int | None = None) -> np.ndarray:
    """Spectral regridding: analysis on ``source``, synthesis on ``target``.

    The field is band-limited to ``lmax`` (default: the smaller of the two
    grids' exact limits), so a field band-limited to that degree is reproduced
    exactly on the target grid.
    """
    source = _check_grid(source)
    target = _check_grid(target)
    if lmax is None:
        lmax = min(source.lmax_exact, target.lmax_exact)
    h = analyze(values, source, lmax=lmax)
    return synthesize(h, target)
