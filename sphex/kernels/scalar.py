"""Analysis and synthesis kernels of scalar fields.

Both work per order on latitude pairs (north/south symmetry), generate the
Legendre functions on the fly with the recursion pieces of
:mod:`sphex.kernels.recursion`, and read or write the arrays of the longitude
FFT and the square ``[l, m]`` coefficients directly.

The kernels are serial and release the GIL: each takes a chunk of the
orders (:func:`sphex.rings.order_chunks`) and the caller runs one chunk per
thread (:func:`sphex.rings.run_chunks`).  Serial kernels compile about three
times faster than numba's parallel loops (the first call of a new
installation) and keep both cores as busy.  The one exception is
:func:`analysis_batch`, a parallel loop because it runs faster so (see there).

Two ways through an order:

``*_single``  one field: the recursion and the sums of each degree are fused
              in one pass over the latitudes, several degrees per pass, so
              the values never leave registers.
``*_batch``   several fields sharing one recursion: the Legendre values of a
              block of degrees are written once (even and odd degrees
              apart, in plain double range; lanes still in scaled range are
              written as 0, exactly what the single path leaves out of its
              sums) and contracted with every field at once by a matrix
              product (BLAS through ``np.dot``; the caller runs BLAS
              single-threaded inside each chunk).

Arguments shared by the kernels
-------------------------------
orders: the orders of this chunk; mlo: the first order of the whole call
(``live``, ``scale`` are indexed ``m - mlo``).  x, s: (J,) cos and sin of the
northern colatitude of each latitude pair, equator first.  cm: sectoral
start constants.  live[m - mlo]: how many pairs (a prefix) carry values of
order m that are not negligible.  rn[j], rs[j]: rows of pair j's northern and
southern rings in the FFT arrays (-1 for a missing ring).  fl, fm, full,
use_full: the convention factor (see
:func:`sphex.kernels.recursion.convention_factor`).  shift = 1 evaluates
Lambda / sin(theta).
"""
from __future__ import annotations

import numba as nb
import numpy as np

from sphex.kernels.recursion import (  # noqa: I001
    CHECK_EVERY, INNER, FASTMATH, JIT, SERIAL, advance1, advance4_store, convention_factor, order_start,
    pair_sums, recursion_coeffs, rescale_lane,
)


# ---------------------------------------------------------------------------
# shared pieces
# ---------------------------------------------------------------------------
RUN = 8  # consecutive orders whose columns of the FFT and coefficient arrays are read or written together


@nb.njit(inline="always", **JIT)
def _run_length(orders, i):
    """Length of the run of consecutive orders starting at orders[i], at most RUN."""
    r = 1
    while i + r < orders.size and r < RUN and orders[i + r] == orders[i] + r:
        r += 1
    return r


@nb.njit(**INNER)
def _add_coefficients(coef, k0, m0, r, lmax, out, fl, fm, full, use_full):
    """coef[k0 + f, l, m0 + t] += f(l, m) (out[t, l, 2f] + i out[t, l, 2f + 1]) for the
    fields f of out: (r, lmax + 1, 2 nf), the r orders of a row together."""
    for f in range(out.shape[2] // 2):
        for l in range(m0, lmax + 1):
            for t in range(min(r, l - m0 + 1)):
                m = m0 + t
                im = out[t, l, 2 * f + 1] if m > 0 else 0.0
                coef[k0 + f, l, m] += convention_factor(fl, fm, full, use_full, l, m) * complex(out[t, l, 2 * f], im)


@nb.njit(**INNER)
def _scaled_coefficients(coef, k0, nf, m0, r, lmax, fl, fm, full, use_full):
    """(r, lmax + 1, 2 nf): real and imaginary parts of f(l, m) coef[k0 + f, l, m] for
    the orders m = m0 .. m0 + r - 1, field by field (0 for l < m)."""
    A = np.zeros((r, lmax + 1, 2 * nf))
    for f in range(nf):
        for l in range(m0, lmax + 1):
            for t in range(min(r, l - m0 + 1)):
                v = convention_factor(fl, fm, full, use_full, l, m0 + t) * coef[k0 + f, l, m0 + t]
                A[t, l, 2 * f] = v.real
                A[t, l, 2 * f + 1] = v.imag
    return A


@nb.njit(**INNER)
def _write_run(X, k0, Ge, Go, live, mlo, m0, r, rn, rs, dm, scale, accumulate):
    """Columns m0 + dm .. m0 + r - 1 + dm of the FFT input rows of fields k0.. from
    the even and odd sums Ge, Go: (r, J, 2 nf) of a run of orders, a row's r
    columns together.

    North gets scale (even + odd), south scale (even - odd), added when
    ``accumulate``, else assigned (0 on pairs where the order is negligible).
    Column 0 keeps only the real part."""
    for f in range(Ge.shape[2] // 2):
        kk = k0 + f
        for j in range(rn.size):
            for t in range(r):
                mo = m0 + t + dm
                if j >= live[m0 + t - mlo]:
                    if not accumulate:
                        if rn[j] >= 0:
                            X[kk, rn[j], mo] = 0.0
                        if rs[j] >= 0:
                            X[kk, rs[j], mo] = 0.0
                    continue
                sc = scale[m0 + t - mlo]
                er = Ge[t, j, 2 * f]
                ei = Ge[t, j, 2 * f + 1]
                o_r = Go[t, j, 2 * f]
                o_i = Go[t, j, 2 * f + 1]
                vn = sc * complex(er + o_r, ei + o_i)
                vs = sc * complex(er - o_r, ei - o_i)
                if mo == 0:
                    vn = complex(vn.real, 0.0)
                    vs = complex(vs.real, 0.0)
                if accumulate:
                    if rn[j] >= 0:
                        X[kk, rn[j], mo] += vn
                    if rs[j] >= 0:
                        X[kk, rs[j], mo] += vs
                else:
                    if rn[j] >= 0:
                        X[kk, rn[j], mo] = vn
                    if rs[j] >= 0:
                        X[kk, rs[j], mo] = vs


# ---------------------------------------------------------------------------
# one field: recursion and sums fused
# ---------------------------------------------------------------------------
@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _analysis_pass4(l, n, xl, P, Q, a, c, fe, outr, outi):
    """Analysis pass over the latitudes advancing four degrees l+1..l+4.

    l - m is a multiple of four on entry, so odd offsets take the odd sums
    fe[2], fe[3] and even offsets the even sums fe[0], fe[1]."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    er = fe[0]
    ei = fe[1]
    orr = fe[2]
    oi = fe[3]
    s1r = 0.0
    s1i = 0.0
    s2r = 0.0
    s2i = 0.0
    s3r = 0.0
    s3i = 0.0
    s4r = 0.0
    s4i = 0.0
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        o_r = orr[j]
        o_i = oi[j]
        e_r = er[j]
        e_i = ei[j]
        s1r += t1 * o_r
        s1i += t1 * o_i
        s2r += t2 * e_r
        s2i += t2 * e_i
        s3r += t3 * o_r
        s3i += t3 * o_i
        s4r += t4 * e_r
        s4i += t4 * e_i
        P[j] = t4
        Q[j] = t3
    outr[l + 1] += s1r
    outi[l + 1] += s1i
    outr[l + 2] += s2r
    outi[l + 2] += s2i
    outr[l + 3] += s3r
    outi[l + 3] += s3i
    outr[l + 4] += s4r
    outi[l + 4] += s4i


@nb.njit(fastmath=FASTMATH, **INNER)
def _analysis_order_single(m, lmax, n, x, s, cmm, shift, a, c, F, kk, rn, rs, wn, ws, sc, out):
    """Order m of field kk: real and imaginary sums per degree into out: (lmax + 1, 2).

    The pair sums north + south (even degrees) and north - south (odd
    degrees) are formed once; each pass over the latitudes then advances the
    recursion four degrees in registers.  Latitudes still in scaled range take
    part in the recursion but are masked out of the sums until their values
    become plain doubles (checked every CHECK_EVERY degrees)."""
    outr = np.zeros(lmax + 1)
    outi = np.zeros(lmax + 1)
    P = np.empty(n)
    Q = np.empty(n)
    k = np.empty(n, dtype=np.int64)
    nscaled = order_start(m, n, x, s, cmm, shift, P, Q, k)
    fe = np.empty((4, n))
    for j in range(n):
        e, o = pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
        on = 1.0 if k[j] == 0 else 0.0
        fe[0, j] = e.real * on
        fe[1, j] = e.imag * on
        fe[2, j] = o.real * on
        fe[3, j] = o.imag * on
    xl = x[:n]
    for j in range(n):  # degree m (even)
        outr[m] += P[j] * fe[0, j]
        outi[m] += P[j] * fe[1, j]
    l = m
    while l < lmax:
        if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
            for j in range(n):
                if rescale_lane(P, Q, k, j):
                    nscaled -= 1
                    e, o = pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
                    fe[0, j] = e.real
                    fe[1, j] = e.imag
                    fe[2, j] = o.real
                    fe[3, j] = o.imag
        if l + 4 <= lmax:
            _analysis_pass4(l, n, xl, P, Q, a, c, fe, outr, outi)
            l += 4
        else:
            l += 1
            advance1(l, n, xl, P, Q, a, c)
            par = 2 * ((l - m) & 1)
            sr = 0.0
            si = 0.0
            for j in range(n):
                sr += P[j] * fe[par, j]
                si += P[j] * fe[par + 1, j]
            outr[l] += sr
            outi[l] += si
    for l in range(m, lmax + 1):
        out[l, 0] = outr[l]
        out[l, 1] = outi[l]


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _synthesis_pass8(l, n, xl, P, Q, a, c, ar, ai, g):
    """Synthesis pass over the latitudes advancing eight degrees l+1..l+8.

    l - m is even on entry, so odd offsets feed the odd sums g[2], g[3]."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    a5 = a[l + 5]
    a6 = a[l + 6]
    a7 = a[l + 7]
    a8 = a[l + 8]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    c5 = c[l + 5]
    c6 = c[l + 6]
    c7 = c[l + 7]
    c8 = c[l + 8]
    r1 = ar[l + 1]
    r2 = ar[l + 2]
    r3 = ar[l + 3]
    r4 = ar[l + 4]
    r5 = ar[l + 5]
    r6 = ar[l + 6]
    r7 = ar[l + 7]
    r8 = ar[l + 8]
    i1 = ai[l + 1]
    i2 = ai[l + 2]
    i3 = ai[l + 3]
    i4 = ai[l + 4]
    i5 = ai[l + 5]
    i6 = ai[l + 6]
    i7 = ai[l + 7]
    i8 = ai[l + 8]
    ger = g[0]
    gei = g[1]
    gor = g[2]
    goi = g[3]
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        t5 = a5 * xj * t4 - c5 * t3
        t6 = a6 * xj * t5 - c6 * t4
        t7 = a7 * xj * t6 - c7 * t5
        t8 = a8 * xj * t7 - c8 * t6
        gor[j] += r1 * t1 + r3 * t3 + r5 * t5 + r7 * t7
        goi[j] += i1 * t1 + i3 * t3 + i5 * t5 + i7 * t7
        ger[j] += r2 * t2 + r4 * t4 + r6 * t6 + r8 * t8
        gei[j] += i2 * t2 + i4 * t4 + i6 * t6 + i8 * t8
        P[j] = t8
        Q[j] = t7


@nb.njit(fastmath=FASTMATH, **INNER)
def _synthesis_order_single(m, lmax, n, x, s, cmm, shift, a, c, ar, ai, ge, go):
    """Order m of one field with scaled coefficients ar, ai (by degree):
    the even and odd sums per latitude pair into ge, go: (J, 2) real and
    imaginary (pairs from n on are left alone).

    Eight degrees per pass over the latitudes, one at a time at the end.  Sums
    of latitudes still in scaled range are discarded when they become plain
    (their true values were below 2^-268, negligible)."""
    g = np.zeros((4, n))  # even re, even im, odd re, odd im
    P = np.empty(n)
    Q = np.empty(n)
    k = np.empty(n, dtype=np.int64)
    nscaled = order_start(m, n, x, s, cmm, shift, P, Q, k)
    xl = x[:n]
    for j in range(n):
        g[0, j] += ar[m] * P[j]
        g[1, j] += ai[m] * P[j]
    l = m
    while l < lmax:
        if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
            for j in range(n):
                if rescale_lane(P, Q, k, j):
                    nscaled -= 1
                    for t in range(4):
                        g[t, j] = 0.0
        if l + 8 <= lmax:
            _synthesis_pass8(l, n, xl, P, Q, a, c, ar, ai, g)
            l += 8
        else:
            l += 1
            advance1(l, n, xl, P, Q, a, c)
            par = 2 * ((l - m) & 1)
            for j in range(n):
                g[par, j] += ar[l] * P[j]
                g[par + 1, j] += ai[l] * P[j]
    for j in range(n):
        if k[j] < 0:
            for t in range(4):
                g[t, j] = 0.0
    for j in range(n):
        ge[j, 0] = g[0, j]
        ge[j, 1] = g[1, j]
        go[j, 0] = g[2, j]
        go[j, 1] = g[3, j]
    return ge, go


@nb.njit(**SERIAL)
def analysis_single(lmax, orders, mlo, x, s, cm, live, F, rn, rs, wn, ws, scale,
                    fl, fm, full, use_full, coef, shift):
    """Add f(l, m) a_lm of the orders of this chunk to coef, field by field.

    F: complex (K, rows, nfreq), the forward real FFT of the rows; pair j's
    rings have quadrature weights wn[j], ws[j]; column m of F times
    scale[m - mlo] gives order m.  coef: complex (K, L+1, L+1) indexed [l, m],
    added to; order 0 gets real parts only."""
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    i = 0
    while i < orders.size:
        r = _run_length(orders, i)
        m0 = orders[i]
        for kk in range(F.shape[0]):
            out = np.zeros((r, lmax + 1, 2))
            for t in range(r):
                m = m0 + t
                n = live[m - mlo]
                if n == 0:
                    continue
                recursion_coeffs(m, lmax, a, c)
                _analysis_order_single(m, lmax, n, x, s, cm[m], shift, a, c, F, kk, rn, rs,
                                       wn, ws, scale[m - mlo], out[t])
            _add_coefficients(coef, kk, m0, r, lmax, out, fl, fm, full, use_full)
        i += r


@nb.njit(**SERIAL)
def synthesis_single(lmax, orders, mlo, x, s, cm, live, coef, fl, fm, full, use_full,
                     X, rn, rs, dm, scale, shift, accumulate):
    """Fourier coefficients of grid rows from a_lm for the orders of this chunk, field by field.

    coef: complex (K, L+1, L+1) indexed [l, m]; times f(l, m) it is
    orthonormal and phase-free.  X: complex (K, rows, nfreq), ready for an
    inverse real FFT along its last axis: column m + dm of the rows of pair j
    gets scale[m - mlo] sum_l a_lm Lambda_lm, added when ``accumulate`` else
    assigned (zero on latitudes where order m is negligible)."""
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    ar = np.empty(lmax + 1)
    ai = np.empty(lmax + 1)
    i = 0
    while i < orders.size:
        r = _run_length(orders, i)
        m0 = orders[i]
        for kk in range(coef.shape[0]):
            A = _scaled_coefficients(coef, kk, 1, m0, r, lmax, fl, fm, full, use_full)
            ge = np.zeros((r, rn.size, 2))
            go = np.zeros((r, rn.size, 2))
            for t in range(r):
                m = m0 + t
                n = live[m - mlo]
                if n == 0:
                    continue
                recursion_coeffs(m, lmax, a, c)
                for l in range(lmax + 1):
                    ar[l] = A[t, l, 0]
                    ai[l] = A[t, l, 1]
                _synthesis_order_single(m, lmax, n, x, s, cm[m], shift, a, c, ar, ai, ge[t], go[t])
            _write_run(X, kk, ge, go, live, mlo, m0, r, rn, rs, dm, scale, accumulate)
        i += r


# ---------------------------------------------------------------------------
# a batch of fields: Legendre blocks written once, contracted by matrix products
# ---------------------------------------------------------------------------
@nb.njit(fastmath=FASTMATH, **INNER)
def _legendre_rows(m, lmax, l, rows, n, xl, P, Q, k, on, nscaled, a, c, Pe, Po):
    """Write the values of degrees l, l+1, ... (l - m even) as rows of Pe (even
    offsets from m) and Po (odd offsets), at most ``rows`` each, row j-major
    blocks of n lanes; lanes still in scaled range (on[j] = 0) are written as 0.

    On entry P = P_l and Q = P_{l-1}; returns (next degree, even rows, odd
    rows, lanes still scaled), with P, Q advanced to the next degree.  A lane
    that becomes plain at a range check (every CHECK_EVERY degrees) counts
    from the next degree on, as in the single-field kernels."""
    ne = 0
    no = 0
    while ne < rows and l <= lmax:
        row = Pe[ne * n:(ne + 1) * n]
        for j in range(n):
            row[j] = P[j] * on[j]
        ne += 1
        if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
            for j in range(n):
                if rescale_lane(P, Q, k, j):
                    nscaled -= 1
                    on[j] = 1.0
        row = Po[no * n:(no + 1) * n]
        if l + 2 <= lmax:
            a1 = a[l + 1]
            c1 = c[l + 1]
            a2 = a[l + 2]
            c2 = c[l + 2]
            for j in range(n):
                xj = xl[j]
                p = P[j]
                t1 = a1 * xj * p - c1 * Q[j]
                t2 = a2 * xj * t1 - c2 * p
                row[j] = t1 * on[j]
                P[j] = t2
                Q[j] = t1
            no += 1
            l += 2
        else:
            if l + 1 <= lmax:
                advance1(l + 1, n, xl, P, Q, a, c)
                for j in range(n):
                    row[j] = P[j] * on[j]
                no += 1
            l = lmax + 1
    return l, ne, no, nscaled


@nb.njit(inline="always", **JIT)
def _add_to(g, r):
    """g += r (same shape), written out so that no shape check is compiled."""
    for j in range(r.shape[0]):
        for f in range(r.shape[1]):
            g[j, f] += r[j, f]


@nb.njit(**INNER)
def _order_start_batch(m, n, x, s, cmm, shift):
    """Start of order m for the batch kernels: P, Q, k, the lane mask and the count of scaled lanes."""
    P = np.empty(n)
    Q = np.empty(n)
    k = np.empty(n, dtype=np.int64)
    nscaled = order_start(m, n, x, s, cmm, shift, P, Q, k)
    on = np.empty(n)
    for j in range(n):
        on[j] = 1.0 if k[j] == 0 else 0.0
    return P, Q, k, on, nscaled


@nb.njit(inline="always", **JIT)
def _block_rows(n):
    """Degrees of each parity per Legendre block: about 256 KB of values, at least 16."""
    return max(16, 16384 // max(n, 1))


@nb.njit(fastmath=FASTMATH, parallel=True, **JIT)
def analysis_batch(lmax, orders, mlo, x, s, cm, live, F, rn, rs, wn, ws, scale,
                   fl, fm, full, use_full, coef, shift):
    """As :func:`analysis_single`, all fields of F sharing one recursion per order.

    The one numba parallel loop left among the scalar kernels: it takes every
    order of the call (in the thread sequence of
    :func:`sphex.rings.order_sequence`) on numba's threads.  Compiled as a
    serial kernel the same loops ran 25-30 % slower (0.31 s against 0.24 s of
    CPU time at 32 fields, L=511, one thread): the parallel loop's body is
    compiled with its arrays marked as not aliasing each other, which the
    serial compilation cannot be told.  Only a batch compiles it.

    Per order, the pair sums of every field are formed once; each pass over
    the latitudes advances the shared recursion four degrees and keeps the
    four degrees' values in a small buffer, then each field's sums of those
    degrees are one long, contiguous, vectorised pass over the buffer and its
    pair sums.  Latitudes still in scaled range are masked out of the sums
    until their values become plain doubles.  (Blocks of Legendre values
    contracted by BLAS matrix products, as in :func:`synthesis_batch`, were
    measured slower here: at 32 fields and L=511 the products per order are
    (64 x 256) by (256 x 64), where single-threaded BLAS ran no faster than
    this loop, and the blocks are written and read once more.)"""
    K = F.shape[0]
    for i in nb.prange(orders.size):
        m = orders[i]
        mi = m - mlo
        n = live[mi]
        if n == 0:
            continue
        a = np.empty(lmax + 1)
        c = np.empty(lmax + 1)
        recursion_coeffs(m, lmax, a, c)
        sc = scale[mi]
        outr = np.zeros((K, lmax + 1))
        outi = np.zeros((K, lmax + 1))
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = order_start(m, n, x, s, cm[m], shift, P, Q, k)
        fe = np.empty((K, 4, n))
        for kk in range(K):
            for j in range(n):
                e, o = pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
                w = 1.0 if k[j] == 0 else 0.0
                fe[kk, 0, j] = e.real * w
                fe[kk, 1, j] = e.imag * w
                fe[kk, 2, j] = o.real * w
                fe[kk, 3, j] = o.imag * w
        T = np.empty((4, n))
        xl = x[:n]
        for kk in range(K):  # degree m (even)
            sr = 0.0
            si = 0.0
            for j in range(n):
                sr += P[j] * fe[kk, 0, j]
                si += P[j] * fe[kk, 1, j]
            outr[kk, m] += sr
            outi[kk, m] += si
        l = m
        while l < lmax:
            if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
                for j in range(n):
                    if rescale_lane(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            e, o = pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
                            fe[kk, 0, j] = e.real
                            fe[kk, 1, j] = e.imag
                            fe[kk, 2, j] = o.real
                            fe[kk, 3, j] = o.imag
            if l + 4 <= lmax:
                advance4_store(l, n, xl, P, Q, a, c, T)
                T1 = T[0]
                T2 = T[1]
                T3 = T[2]
                T4 = T[3]
                for kk in range(K):
                    er = fe[kk, 0]
                    ei = fe[kk, 1]
                    orr = fe[kk, 2]
                    oi = fe[kk, 3]
                    s1r = 0.0
                    s1i = 0.0
                    s2r = 0.0
                    s2i = 0.0
                    s3r = 0.0
                    s3i = 0.0
                    s4r = 0.0
                    s4i = 0.0
                    for j in range(n):
                        o_r = orr[j]
                        o_i = oi[j]
                        e_r = er[j]
                        e_i = ei[j]
                        s1r += T1[j] * o_r
                        s1i += T1[j] * o_i
                        s2r += T2[j] * e_r
                        s2i += T2[j] * e_i
                        s3r += T3[j] * o_r
                        s3i += T3[j] * o_i
                        s4r += T4[j] * e_r
                        s4i += T4[j] * e_i
                    outr[kk, l + 1] += s1r
                    outi[kk, l + 1] += s1i
                    outr[kk, l + 2] += s2r
                    outi[kk, l + 2] += s2i
                    outr[kk, l + 3] += s3r
                    outi[kk, l + 3] += s3i
                    outr[kk, l + 4] += s4r
                    outi[kk, l + 4] += s4i
                l += 4
            else:
                l += 1
                advance1(l, n, xl, P, Q, a, c)
                par = 2 * ((l - m) & 1)
                for kk in range(K):
                    sr = 0.0
                    si = 0.0
                    for j in range(n):
                        sr += P[j] * fe[kk, par, j]
                        si += P[j] * fe[kk, par + 1, j]
                    outr[kk, l] += sr
                    outi[kk, l] += si
        out = np.empty((1, lmax + 1, 2 * K))
        for kk in range(K):
            for l in range(m, lmax + 1):
                out[0, l, 2 * kk] = outr[kk, l]
                out[0, l, 2 * kk + 1] = outi[kk, l]
        _add_coefficients(coef, 0, m, 1, lmax, out, fl, fm, full, use_full)


@nb.njit(**INNER)
def _synthesis_order_batch(m, lmax, n, x, s, cmm, shift, a, c, A, ge, go):
    """Order m of every field: even and odd sums ge, go (n, 2K) from the scaled
    coefficients A: (lmax + 1, 2K)."""
    nl = lmax + 1 - m
    Ae = np.empty(((nl + 1) // 2, A.shape[1]))
    Ao = np.empty((nl // 2, A.shape[1]))
    for i in range(Ae.shape[0]):
        for f in range(A.shape[1]):
            Ae[i, f] = A[m + 2 * i, f]
    for i in range(Ao.shape[0]):
        for f in range(A.shape[1]):
            Ao[i, f] = A[m + 1 + 2 * i, f]
    P, Q, k, on, nscaled = _order_start_batch(m, n, x, s, cmm, shift)
    rows = _block_rows(n)
    Pe = np.empty(rows * n)
    Po = np.empty(rows * n)
    xl = x[:n]
    l = m
    while l <= lmax:
        i0 = (l - m) // 2
        l, ne, no, nscaled = _legendre_rows(m, lmax, l, rows, n, xl, P, Q, k, on, nscaled,
                                            a, c, Pe, Po)
        _add_to(ge, np.dot(Pe[:ne * n].reshape((ne, n)).T, Ae[i0:i0 + ne]))
        if no > 0:
            _add_to(go, np.dot(Po[:no * n].reshape((no, n)).T, Ao[i0:i0 + no]))


@nb.njit(**SERIAL)
def synthesis_batch(lmax, orders, mlo, x, s, cm, live, coef, fl, fm, full, use_full,
                    X, rn, rs, dm, scale, shift, accumulate):
    """As :func:`synthesis_single`, all fields of coef sharing one recursion per order.

    The scaled coefficients of every field form (even, odd) matrices of
    degrees x 2K; each block of degrees' values, transposed, times its rows
    adds to the (n, 2K) even and odd sums of every field.  The sums of a run
    of consecutive orders are written to the FFT input together."""
    K = coef.shape[0]
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    i = 0
    while i < orders.size:
        r = _run_length(orders, i)
        m0 = orders[i]
        A = _scaled_coefficients(coef, 0, K, m0, r, lmax, fl, fm, full, use_full)
        Ge = np.zeros((r, rn.size, 2 * K))
        Go = np.zeros((r, rn.size, 2 * K))
        for t in range(r):
            m = m0 + t
            n = live[m - mlo]
            if n == 0:
                continue
            recursion_coeffs(m, lmax, a, c)
            _synthesis_order_batch(m, lmax, n, x, s, cm[m], shift, a, c, A[t], Ge[t, :n], Go[t, :n])
        _write_run(X, 0, Ge, Go, live, mlo, m0, r, rn, rs, dm, scale, accumulate)
        i += r
