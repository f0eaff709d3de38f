"""Latitude rings of a grid in mirrored pairs: the bookkeeping that the scalar
and vector transforms share.

A grid's rings are grouped in pairs mirrored about the equator (an equator
ring or a pole without its mirror stands alone), ordered from the equator to
the poles; per order only a prefix of the pairs carries values that are not
negligible (:func:`live_pairs`).  Pairs are cut into bands that bound the
memory of the longitude FFT (:func:`pair_bands`), and orders are dealt to the
threads in a balanced sequence (:func:`order_sequence`).  Also here: the
validation shared by every transform, the per-(l, m) convention factors the
kernels apply, and the inverse longitude FFT with folding for coarse targets.
"""
from __future__ import annotations

import ctypes
import functools
import os
import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import scipy.fft

from sphex.grids import Grid
from sphex.harmonics import Harmonics, convert_factor
from sphex.kernels import numba
from sphex.kernels.recursion import live_counts
from sphex.legendre import norm_column, sectoral_table
from sphex.limits import (
    binary_exponent, check_memory, peak_magnitude, refuse_overflow, whole_number,
)

__all__ = ["fft_workers", "check_grid", "check_values", "checked_values", "check_lmax", "LatitudePairs",
           "latitude_pairs", "longitude_phase", "live_pairs", "order_sequence", "order_chunks",
           "run_chunks", "serial_blas", "BAND_BYTES",
           "pair_bands", "PairBand", "ConventionFactor", "convention_factor",
           "batched_coefficients", "fourier_synthesis", "MASKED_ROUTE", "masked_positions",
           "scaled_input", "rescaled_result", "check_analysis_memory", "check_synthesis_memory",
           "ANALYSIS_OVERFLOW_FIX", "SYNTHESIS_OVERFLOW_FIX"]

#: Where masked (missing) values can go instead of a transform.
MASKED_ROUTE = ("for a least-squares fit over the observed cells only, use "
                "sphex.points.fit_masked(values, grid, lmax, mask=...)")


def fft_workers() -> int:
    """FFT threads: numba's thread count for the calling thread (all cores in the
    main thread, fewer inside dask tasks under the rule of :mod:`sphex.xr.scaleout`)."""
    return numba.get_num_threads()


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
def check_grid(grid) -> Grid:
    if not isinstance(grid, Grid):
        raise ValueError(f"grid must be a sphex.Grid (Grid.gauss, Grid.equiangular or Grid.from_coords), "
                         f"got {type(grid).__name__}")
    return grid


def masked_positions(mask: np.ndarray, grid: Grid, listed: int = 3) -> str:
    """Where the first ``listed`` True entries of a ``(..., nlat, nlon)`` mask are, as text:
    ``"latitude 45 deg, longitude 120 deg (row 3, column 5 of field 0)"``."""
    flat = np.flatnonzero(mask)
    out = []
    for k in flat[:listed]:
        at = np.unravel_index(int(k), mask.shape)
        j, i = int(at[-2]), int(at[-1])
        field = f" of field {int(np.ravel_multi_index(at[:-2], mask.shape[:-2]))}" \
            if mask.ndim > 2 else ""
        out.append(f"latitude {float(grid.lat[j]):.6g} deg, longitude {float(grid.lon[i]):.6g} "
                   f"deg (row {j}, column {i}{field})")
    more = f" and {flat.size - listed} more" if flat.size > listed else ""
    return "; ".join(out) + more


def check_values(values, grid: Grid) -> np.ndarray:
    """The values of a transform as a plain real array on ``grid``, after the checks.

    Raises
    ------
    ValueError
        As :func:`checked_values`.
    """
    return checked_values(values, grid)[0]


def checked_values(values, grid: Grid) -> tuple[np.ndarray, float | None]:
    """The values of a transform as a plain real array on ``grid``, after the checks,
    and their largest magnitude (None for integer values): :func:`check_values` and the
    peak that :func:`scaled_input` needs, from the same passes over the values.

    Raises
    ------
    ValueError
        Complex or non-numeric values, a shape that is not ``(..., nlat, nlon)``
        of the grid, masked elements of a ``numpy.ma`` array (such as a netCDF4
        variable with fill values), NaN or inf; each message says where and
        what to do.
    """
    arr = np.asanyarray(values)
    if arr.dtype.kind == "c":
        raise ValueError(f"values are complex (dtype {arr.dtype}); sphex analyses real fields: "
                         "analyse the real and imaginary parts as two fields "
                         "(values.real and values.imag)")
    if arr.dtype.kind not in "fiu":
        raise ValueError(f"values must be real numbers (float or integer), got dtype {arr.dtype}; "
                         "convert them with np.asarray(values, dtype=float) first")
    if arr.ndim < 2 or arr.shape[-2:] != grid.shape:
        raise ValueError(f"values have shape {arr.shape} but the grid is (nlat, nlon) = {grid.shape}: "
                         "the last two axes must be latitude then longitude "
                         "(transpose with np.moveaxis if they are swapped)")
    if isinstance(arr, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(arr)
        bad = int(np.count_nonzero(mask))
        if bad:
            raise ValueError(f"values are a masked array with {bad} masked element"
                             f"{'s' if bad != 1 else ''} (at {masked_positions(mask, grid)}); "
                             "the data under a mask are fill values, not the field, and a "
                             "spherical-harmonic analysis needs every grid point: fill the gaps "
                             f"first, or {MASKED_ROUTE}")
        arr = np.ma.getdata(arr)
    arr = np.asarray(arr)
    peak = peak_magnitude(arr) if arr.dtype.kind == "f" else None
    if peak is not None and not np.isfinite(peak):
        finite = np.isfinite(arr)
        bad = int(np.size(arr) - np.count_nonzero(finite))
        raise ValueError(f"values contain {bad} NaN or inf entries (at "
                         f"{masked_positions(~finite, grid)}): fill or mask them first (a "
                         "spherical-harmonic analysis needs every grid point), or "
                         f"{MASKED_ROUTE}")
    return arr, peak


def scaled_input(arr: np.ndarray, peak: float | None = None) -> tuple[np.ndarray, int, float]:
    """``(arr * 2**-e, e, peak)``: input whose largest magnitude ``peak`` is beyond
    2**+-600 brought near 1 by a power of two (exact), so that no intermediate sum of a
    transform overflows or loses bits to underflow; ``(arr, 0, peak)`` otherwise (no copy).
    ``peak``: the largest magnitude of ``arr`` when the caller has it already
    (:func:`checked_values`)."""
    if arr.dtype.kind not in "fc":
        return arr, 0, 0.0
    if peak is None:
        peak = peak_magnitude(arr)
    e = binary_exponent(peak)
    if e == 0:
        return arr, 0, peak
    if np.iscomplexobj(arr):
        return np.ldexp(arr.real, -e) + 1j * np.ldexp(arr.imag, -e), e, peak
    return np.ldexp(np.asarray(arr, dtype=np.float64), -e), e, peak


def rescaled_result(out: np.ndarray, e: int, what: str, fix: str) -> np.ndarray:
    """``out * 2**e`` (in place), refused with a ValueError naming ``what`` overflowed when
    the result holds inf or NaN (finite input only gets here)."""
    if e:
        with np.errstate(over="ignore"):
            if np.iscomplexobj(out):
                np.ldexp(out.real, e, out=out.real)
                np.ldexp(out.imag, e, out=out.imag)
            else:
                np.ldexp(out, e, out=out)
    refuse_overflow(out, what, fix)
    return out


def check_lmax(lmax, grid: Grid, allow_aliasing: bool) -> int:
    if lmax is None:
        return grid.lmax_exact
    lmax = whole_number(lmax, "lmax")
    if lmax > grid.lmax_exact and not allow_aliasing:
        raise ValueError(f"lmax={lmax} is above this grid's exact degree limit {grid.lmax_exact} "
                         f"({grid!r}): use lmax <= {grid.lmax_exact}, a finer grid, or "
                         "allow_aliasing=True to accept an aliased result")
    return lmax


# ---------------------------------------------------------------------------
# latitude pairs
# ---------------------------------------------------------------------------
class LatitudePairs:
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


def longitude_phase(m_count: int, grid: Grid) -> np.ndarray:
    """exp(i m lon0) for m = 0..m_count-1."""
    return np.exp(1j * np.arange(m_count) * np.radians(grid.lon0))


@functools.lru_cache(maxsize=32)
def latitude_pairs(grid: Grid) -> LatitudePairs:
    return LatitudePairs(grid)


@functools.lru_cache(maxsize=64)
def live_pairs(grid: Grid, lmax: int, mlo: int, mhi: int, shift: int) -> np.ndarray:
    """Per order, how many latitude pairs (equator first) carry non-negligible values."""
    pairs = latitude_pairs(grid)
    out = np.empty(mhi - mlo + 1, dtype=np.int64)
    cm = sectoral_table(lmax)
    run_chunks(lambda orders: live_counts(lmax, orders, mlo, pairs.x, pairs.s, cm, shift, out),
               order_chunks(mlo, mhi, fft_workers()))
    out.setflags(write=False)
    return out


RUN_PAIRS = 4  # pairs of orders per group of order_chunks: runs of four consecutive orders


def _thread_groups(mlo: int, mhi: int, nthreads: int, g: int) -> list[list[list[tuple]]]:
    """Orders mlo..mhi as pairs, cheap with costly (mlo with mhi, mlo+1 with
    mhi-1, ...), in groups of ``g`` pairs dealt to ``nthreads`` threads in
    turn: every thread gets nearly the same work (0.02 % apart at L=1023 on
    two threads; handing out the pairs in sequence left 5 %)."""
    lo, hi = mlo, mhi
    pairs = []
    while lo <= hi:
        pairs.append((lo, hi) if lo < hi else (lo,))
        lo += 1
        hi -= 1
    t = max(int(nthreads), 1)
    groups = [pairs[i:i + g] for i in range(0, len(pairs), g)]
    return [groups[k::t] for k in range(t)]


@functools.lru_cache(maxsize=256)
def order_sequence(mlo: int, mhi: int, nthreads: int) -> np.ndarray:
    """Orders mlo..mhi in the sequence the parallel kernels take them: the
    threads' shares (:func:`_thread_groups`, four pairs a group, neighbouring
    orders sharing cache lines of the outputs) one after the other (numba splits
    a parallel loop into equal contiguous chunks, one per thread)."""
    out = np.array([m for share in _thread_groups(mlo, mhi, nthreads, 4) for grp in share
                    for p in grp for m in p], dtype=np.int64)
    out.setflags(write=False)
    return out


RUN_PAIRS = 8  # pairs of orders per group in order_chunks


@functools.lru_cache(maxsize=256)
def order_chunks(mlo: int, mhi: int, nthreads: int) -> tuple[np.ndarray, ...]:
    """Orders mlo..mhi as one array per thread, for :func:`run_chunks`.

    Each thread's groups of RUN_PAIRS pairs (:func:`_thread_groups`) give
    their cheap orders, then their costly ones, both ascending: runs of
    consecutive orders, whose columns of the FFT arrays the kernels read and
    write together (one cache line serves several orders)."""
    out = []
    for share in _thread_groups(mlo, mhi, nthreads, RUN_PAIRS):
        seq = []
        for grp in share:
            seq += [p[0] for p in grp] + sorted(p[1] for p in grp if len(p) == 2)
        if seq:
            a = np.array(seq, dtype=np.int64)
            a.setflags(write=False)
            out.append(a)
    return tuple(out)


_POOL: ThreadPoolExecutor | None = None
_POOL_LOCK = threading.Lock()


def _pool() -> ThreadPoolExecutor:
    global _POOL
    with _POOL_LOCK:
        if _POOL is None:
            _POOL = ThreadPoolExecutor(max_workers=max(os.cpu_count() or 1, 1),
                                       thread_name_prefix="sphex-orders")
    return _POOL


def run_chunks(work, chunks) -> None:
    """``work(chunk)`` for every chunk of orders, one per thread, the first in the calling thread.

    The kernels are serial numba functions that release the GIL, so the
    chunks run at once on a small pool of threads (the pool's workers only
    run kernels, never a nested :func:`run_chunks`, so nothing waits on
    itself).  One chunk runs in the calling thread alone (inside dask tasks,
    where each task gets one numba thread)."""
    if len(chunks) <= 1:
        for c in chunks:
            work(c)
        return
    futures = [_pool().submit(work, c) for c in chunks[1:]]
    try:
        work(chunks[0])
    finally:
        for f in futures:
            f.result()


def _blas_thread_controls() -> list:
    """(set, get) of the number of threads of each OpenBLAS loaded in this
    process other than numpy's own: the library behind scipy's BLAS, which
    numba's ``np.dot`` calls.  Empty when there is none (another BLAS)."""
    import scipy.linalg.cython_blas  # noqa: F401  (loads the library numba's np.dot calls)

    try:
        with open("/proc/self/maps") as f:
            paths = sorted({line.split()[-1] for line in f
                            if "openblas" in line.lower() and line.split()[-1].startswith("/")})
    except OSError:
        return []
    controls = []
    for path in paths:
        if "numpy" in os.path.basename(os.path.dirname(path)):
            continue
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for stem, tail in (("scipy_openblas", ""), ("openblas", ""), ("scipy_openblas", "64_"),
                           ("openblas", "64_")):
            setter = getattr(lib, f"{stem}_set_num_threads{tail}", None)
            getter = getattr(lib, f"{stem}_get_num_threads{tail}", None)
            if setter is not None and getter is not None:
                setter.argtypes = [ctypes.c_int]
                setter.restype = None
                getter.argtypes = []
                getter.restype = ctypes.c_int
                controls.append((setter, getter))
                break
    return controls


_BLAS = {"controls": None, "users": 0, "saved": []}
_BLAS_LOCK = threading.Lock()


class serial_blas:
    """Context: BLAS runs on one thread while a batch kernel contracts orders
    on every core (a threaded BLAS inside each thread oversubscribes the cores
    and is several times slower on small products).  Nested and concurrent
    uses are counted; the last one out restores the previous thread count.
    ``serial_blas(False)`` does nothing."""

    def __init__(self, active: bool = True):
        self.active = bool(active)

    def __enter__(self):
        if not self.active:
            return self
        with _BLAS_LOCK:
            if _BLAS["controls"] is None:
                _BLAS["controls"] = _blas_thread_controls()
            if _BLAS["users"] == 0:
                _BLAS["saved"] = [get() for _, get in _BLAS["controls"]]
                for setter, _ in _BLAS["controls"]:
                    setter(1)
            _BLAS["users"] += 1
        return self

    def __exit__(self, *exc):
        if not self.active:
            return False
        with _BLAS_LOCK:
            _BLAS["users"] -= 1
            if _BLAS["users"] == 0:
                for (setter, _), n in zip(_BLAS["controls"], _BLAS["saved"]):
                    setter(n)
        return False


BAND_BYTES = 1 << 25  # pairs per band: BAND_BYTES / (8 M); see pair_bands


def pair_bands(npairs: int, M: int) -> list[tuple[int, int]]:
    """Latitude-pair bands (start, stop) small enough to bound memory.

    A band of BAND_BYTES / (8 M) pairs holds 4 BAND_BYTES (128 MB) of complex
    FFT data per field (two rings per pair, about M frequencies each); every
    grid with M * npairs up to about 4 million (lmax near 2900 on a Gauss
    grid) is one band."""
    size = int(np.clip(BAND_BYTES // (8 * max(M, 1)), 64, max(npairs, 1)))
    if size < npairs:
        size -= size % 8
    return [(b, min(b + size, npairs)) for b in range(0, npairs, size)]


class PairBand:
    """Rows of one band of latitude pairs, with pair indices local to the band."""

    def __init__(self, pairs: LatitudePairs, b0: int, b1: int):
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


def fourier_synthesis(X: np.ndarray, N: int, direct: bool) -> np.ndarray:
    """X: (K, rows, W) scaled Fourier coefficients -> real values (K, rows, N).

    ``direct``: X holds orders 0..N//2 and goes to the inverse real FFT as it
    is (overwritten).  Otherwise X holds orders 0..W-1 beyond the Nyquist
    frequency of a coarse target, folded onto the N frequencies first (an
    exact evaluation of the series at the grid's longitudes)."""
    if direct:
        return scipy.fft.irfft(X, n=N, axis=-1, workers=fft_workers(), overwrite_x=True)
    K, rows, W = X.shape
    Y = np.zeros((K, rows, N), dtype=np.complex128)
    m = np.arange(W)
    np.add.at(Y, (slice(None), slice(None), m % N), X)
    np.add.at(Y, (slice(None), slice(None), (-m[1:]) % N), np.conj(X[..., 1:]))
    return scipy.fft.ifft(Y, axis=-1, workers=fft_workers()).real


class ConventionFactor:
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
def convention_factor(lmax: int, norm_from: str, cs_from: bool, norm_to: str,
                      cs_to: bool) -> ConventionFactor:
    return ConventionFactor(lmax, norm_from, cs_from, norm_to, cs_to)


def batched_coefficients(h: Harmonics) -> tuple[np.ndarray, np.ndarray]:
    """(coef as (K, L+1, L+1), factor to orthonormal without phase) after checks."""
    if not isinstance(h, Harmonics):
        raise ValueError(f"expected a sphex.Harmonics, got {type(h).__name__}")
    c = h.coef.reshape((-1, h.lmax + 1, h.lmax + 1))
    if not np.all(np.isfinite(c)):
        raise ValueError("coefficients contain NaN or inf: check the input")
    return c, convention_factor(h.lmax, h.norm, h.condon_shortley, "orthonormal", False)


# ---------------------------------------------------------------------------
# memory of a transform
# ---------------------------------------------------------------------------
def _band_rows(grid: Grid, orders: int) -> int:
    """Latitude rows in the first band of a transform (the FFT buffers are this tall)."""
    npairs = (grid.nlat + 1) // 2
    b0, b1 = pair_bands(npairs, orders)[0]
    return min(grid.nlat, 2 * (b1 - b0))


def check_analysis_memory(fields: int, grid: Grid, lmax: int) -> None:
    """Refuse an analysis whose coefficients and FFT buffer cannot fit in memory."""
    orders = min(lmax, grid.nlon // 2) + 1
    need = 16.0 * fields * ((lmax + 1) ** 2 + _band_rows(grid, orders) * (grid.nlon // 2 + 1))
    check_memory(need, f"the analysis of {fields} field{'s' if fields != 1 else ''} to degree "
                 f"{lmax}", "use a lower lmax or fewer fields at a time")


def check_synthesis_memory(fields: int, grid: Grid, lmax: int) -> None:
    """Refuse a synthesis whose output and FFT buffer cannot fit in memory."""
    need = fields * (8.0 * grid.nlat * grid.nlon
                     + 16.0 * _band_rows(grid, lmax + 1) * (grid.nlon // 2 + 1))
    check_memory(need, f"the synthesis of {fields} field{'s' if fields != 1 else ''} on a "
                 f"{grid.nlat} x {grid.nlon} grid", "use a coarser grid or fewer fields at a time")


ANALYSIS_OVERFLOW_FIX = ("express the field in larger units (divide it by a power of ten), or use "
                         "norm='full', whose coefficients are sqrt(4 pi) times smaller")
SYNTHESIS_OVERFLOW_FIX = "divide the coefficients by a power of ten (larger units)"
