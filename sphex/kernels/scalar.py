"""Analysis and synthesis kernels of scalar fields.

Both work per order on latitude pairs (north/south symmetry), generate the
Legendre functions on the fly with the recursion pieces of
:mod:`sphex.kernels.recursion`, and read or write the arrays of the longitude
FFT and the square ``[l, m]`` coefficients directly.
"""
from __future__ import annotations

import numba as nb
import numpy as np

from sphex.kernels.recursion import (
    CHECK_EVERY, FASTMATH, JIT, advance1, advance4_store, convention_factor, order_start,
    recursion_coeffs, rescale_lane,
)

@nb.njit(inline="always", **JIT)
def _pair_sums(F, kk, rn, rs, wn, ws, sc, j, col):
    """sc (wn F[north] + ws F[south]) and sc (wn F[north] - ws F[south]) of pair j."""
    vn = 0j
    vs = 0j
    if rn[j] >= 0:
        vn = wn[j] * F[kk, rn[j], col]
    if rs[j] >= 0:
        vs = ws[j] * F[kk, rs[j], col]
    return sc * (vn + vs), sc * (vn - vs)


@nb.njit(parallel=True, fastmath=FASTMATH, **JIT)
def analysis_kernel(lmax, mlo, seq, x, s, cm, live, F, rn, rs, wn, ws, scale,
                    fl, fm, full, use_full, coef, shift):
    """Add f(l, m) a_lm (see :func:`convention_factor`) of the rows' Fourier coefficients to coef.

    x, s: (J,) cos and sin of the northern colatitude of each latitude pair,
    ordered from the equator toward the pole.  F: complex (K, rows, nfreq),
    the forward real FFT of the rows; pair j has its northern ring in row
    rn[j] and its southern one in row rs[j] (-1 for a missing ring) with
    quadrature weights wn[j], ws[j].  seq: the orders, mlo and up, in the
    sequence the threads take them (see sphex.rings.order_sequence).  Column m
    of F times scale[m - mlo] gives order m.  live: number of latitudes (a prefix) on which order m is
    not negligible.  coef: complex (K, L+1, L+1) indexed [l, m], added to;
    order 0 gets real parts only.
    shift = 1 evaluates Lambda / sin(theta).

    Per order, the pair sums north + south (even degrees) and north - south
    (odd degrees) are formed once; each pass over the latitudes then
    advances the recursion by four degrees in registers (loads and stores
    once per four degrees), and the latitude loop is long, contiguous and
    vectorised.  Latitudes still in scaled range take part in the recursion
    but are masked out of the sums until their values become plain doubles
    (checked every CHECK_EVERY degrees).
    """
    K = F.shape[0]
    for i in nb.prange(seq.size):
        m = seq[i]
        mi = m - mlo
        a = np.empty(lmax + 1)
        c = np.empty(lmax + 1)
        recursion_coeffs(m, lmax, a, c)
        n = live[mi]
        if n == 0:
            continue
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
                e, o = _pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
                on = 1.0 if k[j] == 0 else 0.0
                fe[kk, 0, j] = e.real * on
                fe[kk, 1, j] = e.imag * on
                fe[kk, 2, j] = o.real * on
                fe[kk, 3, j] = o.imag * on
        T = np.empty((4, n if K > 1 else 1))
        xl = x[:n]
        # degree m (even)
        for kk in range(K):
            fr = fe[kk, 0]
            fi = fe[kk, 1]
            sr = 0.0
            si = 0.0
            for j in range(n):
                sr += P[j] * fr[j]
                si += P[j] * fi[j]
            outr[kk, m] += sr
            outi[kk, m] += si
        l = m
        while l < lmax:
            if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
                for j in range(n):
                    if rescale_lane(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            e, o = _pair_sums(F, kk, rn, rs, wn, ws, sc, j, m)
                            fe[kk, 0, j] = e.real
                            fe[kk, 1, j] = e.imag
                            fe[kk, 2, j] = o.real
                            fe[kk, 3, j] = o.imag
            if l + 4 <= lmax:
                a1 = a[l + 1]
                a2 = a[l + 2]
                a3 = a[l + 3]
                a4 = a[l + 4]
                c1 = c[l + 1]
                c2 = c[l + 2]
                c3 = c[l + 3]
                c4 = c[l + 4]
                if K == 1:
                    er = fe[0, 0]
                    ei = fe[0, 1]
                    orr = fe[0, 2]
                    oi = fe[0, 3]
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
                    outr[0, l + 1] += s1r
                    outi[0, l + 1] += s1i
                    outr[0, l + 2] += s2r
                    outi[0, l + 2] += s2i
                    outr[0, l + 3] += s3r
                    outi[0, l + 3] += s3i
                    outr[0, l + 4] += s4r
                    outi[0, l + 4] += s4i
                else:
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
                    fr = fe[kk, par]
                    fi = fe[kk, par + 1]
                    sr = 0.0
                    si = 0.0
                    for j in range(n):
                        sr += P[j] * fr[j]
                        si += P[j] * fi[j]
                    outr[kk, l] += sr
                    outi[kk, l] += si
        for kk in range(K):
            for l in range(m, lmax + 1):
                im = outi[kk, l] if m > 0 else 0.0
                coef[kk, l, m] += convention_factor(fl, fm, full, use_full, l, m) * complex(outr[kk, l], im)


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


@nb.njit(parallel=True, fastmath=FASTMATH, **JIT)
def synthesis_kernel(lmax, mlo, seq, x, s, cm, live, coef, fl, fm, full, use_full,
                     X, rn, rs, dm, scale, shift, accumulate):
    """Fourier coefficients of grid rows from a_lm, order by order.

    coef: complex (K, L+1, L+1) indexed [l, m]; times f(l, m) (see
    :func:`convention_factor`) it is orthonormal and phase-free.  seq: the orders, mlo and up,
    in the sequence the threads take them (see sphex.rings.order_sequence).
    X: complex (K, rows, nfreq),
    ready for an inverse real FFT along its last axis: column m + dm of row
    rn[j] (northern ring of pair j) and rs[j] (southern ring; -1 for none)
    gets scale[m - mlo] * sum_l a_lm Lambda_lm, added when ``accumulate``
    else assigned (zero on latitudes where order m is negligible).  Column 0
    keeps only the real part.
    Same loop structure as :func:`analysis_kernel`; sums of latitudes still in
    scaled range are discarded when they become plain (their true values were
    below 2^-268, negligible).
    """
    K = coef.shape[0]
    J = x.size
    for i in nb.prange(seq.size):
        m = seq[i]
        mi = m - mlo
        mo = m + dm
        n = live[mi]
        if not accumulate:
            for kk in range(K):
                for j in range(n, J):
                    if rn[j] >= 0:
                        X[kk, rn[j], mo] = 0.0
                    if rs[j] >= 0:
                        X[kk, rs[j], mo] = 0.0
        if n == 0:
            continue
        a = np.empty(lmax + 1)
        c = np.empty(lmax + 1)
        recursion_coeffs(m, lmax, a, c)
        Ar = np.empty((K, lmax + 1))
        Ai = np.empty((K, lmax + 1))
        for kk in range(K):
            for l in range(m, lmax + 1):
                v = convention_factor(fl, fm, full, use_full, l, m) * coef[kk, l, m]
                Ar[kk, l] = v.real
                Ai[kk, l] = v.imag
        g = np.zeros((K, 4, n))  # even re, even im, odd re, odd im
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = order_start(m, n, x, s, cm[m], shift, P, Q, k)
        T = np.empty((4, n if K > 1 else 1))
        xl = x[:n]
        for kk in range(K):
            ar = Ar[kk, m]
            ai = Ai[kk, m]
            gr = g[kk, 0]
            gi = g[kk, 1]
            for j in range(n):
                gr[j] += ar * P[j]
                gi[j] += ai * P[j]
        l = m
        while l < lmax:
            if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
                for j in range(n):
                    if rescale_lane(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            for t in range(4):
                                g[kk, t, j] = 0.0
            if K == 1 and l + 8 <= lmax:
                _synthesis_pass8(l, n, xl, P, Q, a, c, Ar[0], Ai[0], g[0])
                l += 8
            elif l + 4 <= lmax:
                a1 = a[l + 1]
                a2 = a[l + 2]
                a3 = a[l + 3]
                a4 = a[l + 4]
                c1 = c[l + 1]
                c2 = c[l + 2]
                c3 = c[l + 3]
                c4 = c[l + 4]
                if K == 1:
                    r1 = Ar[0, l + 1]
                    r2 = Ar[0, l + 2]
                    r3 = Ar[0, l + 3]
                    r4 = Ar[0, l + 4]
                    i1 = Ai[0, l + 1]
                    i2 = Ai[0, l + 2]
                    i3 = Ai[0, l + 3]
                    i4 = Ai[0, l + 4]
                    ger = g[0, 0]
                    gei = g[0, 1]
                    gor = g[0, 2]
                    goi = g[0, 3]
                    for j in range(n):
                        xj = xl[j]
                        p = P[j]
                        t1 = a1 * xj * p - c1 * Q[j]
                        t2 = a2 * xj * t1 - c2 * p
                        t3 = a3 * xj * t2 - c3 * t1
                        t4 = a4 * xj * t3 - c4 * t2
                        gor[j] += r1 * t1 + r3 * t3
                        goi[j] += i1 * t1 + i3 * t3
                        ger[j] += r2 * t2 + r4 * t4
                        gei[j] += i2 * t2 + i4 * t4
                        P[j] = t4
                        Q[j] = t3
                else:
                    advance4_store(l, n, xl, P, Q, a, c, T)
                    T1 = T[0]
                    T2 = T[1]
                    T3 = T[2]
                    T4 = T[3]
                    for kk in range(K):
                        r1 = Ar[kk, l + 1]
                        r2 = Ar[kk, l + 2]
                        r3 = Ar[kk, l + 3]
                        r4 = Ar[kk, l + 4]
                        i1 = Ai[kk, l + 1]
                        i2 = Ai[kk, l + 2]
                        i3 = Ai[kk, l + 3]
                        i4 = Ai[kk, l + 4]
                        ger = g[kk, 0]
                        gei = g[kk, 1]
                        gor = g[kk, 2]
                        goi = g[kk, 3]
                        for j in range(n):
                            gor[j] += r1 * T1[j] + r3 * T3[j]
                            goi[j] += i1 * T1[j] + i3 * T3[j]
                            ger[j] += r2 * T2[j] + r4 * T4[j]
                            gei[j] += i2 * T2[j] + i4 * T4[j]
                l += 4
            else:
                l += 1
                advance1(l, n, xl, P, Q, a, c)
                par = 2 * ((l - m) & 1)
                for kk in range(K):
                    ar = Ar[kk, l]
                    ai = Ai[kk, l]
                    gr = g[kk, par]
                    gi = g[kk, par + 1]
                    for j in range(n):
                        gr[j] += ar * P[j]
                        gi[j] += ai * P[j]
        for j in range(n):
            if k[j] < 0:
                for kk in range(K):
                    for t in range(4):
                        g[kk, t, j] = 0.0
        sc = scale[mi]
        for kk in range(K):
            for j in range(n):
                vn = sc * complex(g[kk, 0, j] + g[kk, 2, j], g[kk, 1, j] + g[kk, 3, j])
                vs = sc * complex(g[kk, 0, j] - g[kk, 2, j], g[kk, 1, j] - g[kk, 3, j])
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


