"""Analysis and synthesis kernels of tangent vector fields (eastward, northward pairs).

A tangent field of streamfunction ``psi = sum a_lm Y_lm`` and velocity
potential ``chi = sum b_lm Y_lm`` on the unit sphere has, per Fourier order
``m``, the components

    u_m = sum_l a_lm W_lm + i b_lm Z_lm,      v_m = sum_l i a_lm Z_lm - b_lm W_lm,

with ``W_lm = dLambda_lm/dtheta`` and ``Z_lm = m Lambda_lm / sin(theta)``.
Both come from the regular functions ``R_k = Lambda_km / sin(theta)`` (the
recursion started from ``c_m sin^(m-1) theta``, ``m >= 1``) without any
division by ``sin(theta)``:

    Z_lm = m R_l,    W_lm = l d_(l+1) R_(l+1) - (l+1) d_l R_(l-1),
    d_l = sqrt((l^2 - m^2) / (4 l^2 - 1)).

So ``u_m = sum_k cu_k R_k`` and ``v_m = sum_k cv_k R_k`` over ``k = m..L+1``
with coefficient sequences formed from ``a`` and ``b`` (:func:`flow_to_sequences`),
and the analysis is the adjoint: the projections ``G_k = integral u_m R_k dx``
(the same for ``v``) combine into ``a`` and ``b`` (:func:`sequences_to_flow`).
Order ``m = 0`` has no ``Z`` and ``W_l0 = -sqrt(l (l+1)) Lambda_l1``: Fourier
column 0 is served by the order-1 functions without the ``1/sin`` (shift 0).

The Legendre-stage kernels therefore run one recursion per order and contract
it with both components at once (four sums per degree and latitude pair where
two scalar transforms would run two recursions).  Arrays of sequences and
projections are complex ``(K, L+2, L+2)`` indexed ``[k, m]`` by degree and
Fourier column; column 0 holds the order-1, shift-0 sequences.
"""
from __future__ import annotations

import math

import numba as nb
import numpy as np

from sphex.kernels.recursion import (
    CHECK_EVERY, FASTMATH, JIT, SERIAL, advance1, advance4_store, convention_factor, order_start,
    pair_sums, recursion_coeffs, rescale_lane,
)


@nb.njit(inline="always", **JIT)
def column_plan(col, lmax):
    """(function order, shift, top degree) of the recursion serving Fourier column col.

    lmax is the top degree of the sequences (L + 1 for flows of degree L)."""
    if col == 0:
        return 1, 0, lmax - 1
    return col, 1, lmax


@nb.njit(inline="always", **JIT)
def _load_pair(Fu, Fv, fe, kk, rn, rs, wn, ws, sc, j, col, on):
    """Pair sums of both components into fe[kk, 0:8, j] (u even, u odd, v even, v odd; re, im)."""
    e, o = pair_sums(Fu, kk, rn, rs, wn, ws, sc, j, col)
    fe[kk, 0, j] = e.real * on
    fe[kk, 1, j] = e.imag * on
    fe[kk, 2, j] = o.real * on
    fe[kk, 3, j] = o.imag * on
    e, o = pair_sums(Fv, kk, rn, rs, wn, ws, sc, j, col)
    fe[kk, 4, j] = e.real * on
    fe[kk, 5, j] = e.imag * on
    fe[kk, 6, j] = o.real * on
    fe[kk, 7, j] = o.imag * on


@nb.njit(fastmath=FASTMATH, **SERIAL)
def vector_analysis_kernel(lmax, cols, x, s, cm, live, Fu, Fv, rn, rs, wn, ws, scale, Gu, Gv):
    """Add the projections G_k = 2 pi sum_j w_j u_m(theta_j) R_k(theta_j) (and of v) to Gu, Gv.

    lmax: top degree of the sequences (L + 1).  cols: this chunk's Fourier
    columns (:func:`sphex.rings.order_chunks`; the chunks of one call run at
    once, one per thread, and write disjoint columns).  x, s, rn, rs, wn, ws: latitude
    pairs as in :func:`sphex.kernels.scalar.analysis_kernel`; Fu, Fv: complex
    (K, rows, nfreq) forward FFTs of the two components; column col of them
    times scale[col] is order col.  live[col]: latitudes (a prefix) on which
    the functions serving column col are not negligible.  Gu, Gv: complex
    (K, L+2, L+2) indexed [k, col], added to; column 0 gets real parts only.

    One recursion per column (see :func:`column_plan`); each pass over the
    latitudes advances it by four degrees and forms the sums of both
    components, even degrees (k - order even) from north + south, odd ones
    from north - south.
    """
    K = Fu.shape[0]
    for i in range(cols.size):
        col = cols[i]
        mu, shift, top = column_plan(col, lmax)
        n = live[col]
        if n == 0 or top < mu:
            continue
        a = np.empty(top + 1)
        c = np.empty(top + 1)
        recursion_coeffs(mu, top, a, c)
        sc = scale[col]
        acc = np.zeros((K, 4, top + 1))  # u re, u im, v re, v im
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = order_start(mu, n, x, s, cm[mu], shift, P, Q, k)
        fe = np.empty((K, 8, n))
        for kk in range(K):
            for j in range(n):
                _load_pair(Fu, Fv, fe, kk, rn, rs, wn, ws, sc, j, col, 1.0 if k[j] == 0 else 0.0)
        T = np.empty((4, n if K > 1 else 1))
        xl = x[:n]
        for kk in range(K):  # degree mu (even)
            for t in range(4):
                f = fe[kk, 2 * t - (t % 2)]  # 0, 1, 4, 5: the even sums
                sm = 0.0
                for j in range(n):
                    sm += P[j] * f[j]
                acc[kk, t, mu] += sm
        l = mu
        while l < top:
            if nscaled > 0 and (l - mu) % CHECK_EVERY == 0:
                for j in range(n):
                    if rescale_lane(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            _load_pair(Fu, Fv, fe, kk, rn, rs, wn, ws, sc, j, col, 1.0)
            if l + 4 <= top:
                if K == 1:
                    _analysis_pass4_fused(l, n, xl, P, Q, a, c, fe[0], acc[0])
                else:
                    advance4_store(l, n, xl, P, Q, a, c, T)
                    for kk in range(K):
                        _analysis_contract4(l, n, T, fe[kk], acc[kk])
                l += 4
            else:
                l += 1
                advance1(l, n, xl, P, Q, a, c)
                par = 2 * ((l - mu) & 1)
                for kk in range(K):
                    for t in range(4):
                        f = fe[kk, par + 2 * t - (t % 2)]
                        sm = 0.0
                        for j in range(n):
                            sm += P[j] * f[j]
                        acc[kk, t, l] += sm
        for kk in range(K):
            for l in range(mu, top + 1):
                iu = acc[kk, 1, l] if col > 0 else 0.0
                iv = acc[kk, 3, l] if col > 0 else 0.0
                Gu[kk, l, col] += complex(acc[kk, 0, l], iu)
                Gv[kk, l, col] += complex(acc[kk, 2, l], iv)


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _analysis_pass4_fused(l, n, xl, P, Q, a, c, fe, acc):
    """Four recursion steps l+1..l+4 with the sums of both components in the same pass.

    l - order is even on entry: degrees l+1, l+3 take the odd sums, l+2, l+4 the even ones."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    uer = fe[0]
    uei = fe[1]
    uor = fe[2]
    uoi = fe[3]
    ver = fe[4]
    vei = fe[5]
    vor = fe[6]
    voi = fe[7]
    u1r = u1i = u2r = u2i = u3r = u3i = u4r = u4i = 0.0
    v1r = v1i = v2r = v2i = v3r = v3i = v4r = v4i = 0.0
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        o = uor[j]
        u1r += t1 * o
        u3r += t3 * o
        o = uoi[j]
        u1i += t1 * o
        u3i += t3 * o
        e = uer[j]
        u2r += t2 * e
        u4r += t4 * e
        e = uei[j]
        u2i += t2 * e
        u4i += t4 * e
        o = vor[j]
        v1r += t1 * o
        v3r += t3 * o
        o = voi[j]
        v1i += t1 * o
        v3i += t3 * o
        e = ver[j]
        v2r += t2 * e
        v4r += t4 * e
        e = vei[j]
        v2i += t2 * e
        v4i += t4 * e
        P[j] = t4
        Q[j] = t3
    acc[0, l + 1] += u1r
    acc[1, l + 1] += u1i
    acc[2, l + 1] += v1r
    acc[3, l + 1] += v1i
    acc[0, l + 2] += u2r
    acc[1, l + 2] += u2i
    acc[2, l + 2] += v2r
    acc[3, l + 2] += v2i
    acc[0, l + 3] += u3r
    acc[1, l + 3] += u3i
    acc[2, l + 3] += v3r
    acc[3, l + 3] += v3i
    acc[0, l + 4] += u4r
    acc[1, l + 4] += u4i
    acc[2, l + 4] += v4r
    acc[3, l + 4] += v4i


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _analysis_contract4(l, n, T, fe, acc):
    """Sums of both components of one batch member against the stored degrees l+1..l+4."""
    T1 = T[0]
    T2 = T[1]
    T3 = T[2]
    T4 = T[3]
    for t in range(4):
        fo = fe[2 * t - (t % 2) + 2]  # odd sums: 2, 3, 6, 7
        fv = fe[2 * t - (t % 2)]      # even sums: 0, 1, 4, 5
        s1 = 0.0
        s2 = 0.0
        s3 = 0.0
        s4 = 0.0
        for j in range(n):
            o = fo[j]
            e = fv[j]
            s1 += T1[j] * o
            s2 += T2[j] * e
            s3 += T3[j] * o
            s4 += T4[j] * e
        acc[t, l + 1] += s1
        acc[t, l + 2] += s2
        acc[t, l + 3] += s3
        acc[t, l + 4] += s4


@nb.njit(fastmath=FASTMATH, **SERIAL)
def vector_synthesis_kernel(lmax, cols, x, s, cm, live, CU, CV, Xu, Xv, rn, rs, scale):
    """Fourier coefficients of both components on the grid rows from the sequences CU, CV.

    lmax: top degree of the sequences (L + 1).  CU, CV: complex (K, L+2, L+2)
    indexed [k, col] (see :func:`flow_to_sequences`).  Xu, Xv: complex
    (K, rows, nfreq) buffers of the inverse real FFT; column col of row rn[j]
    (northern ring of pair j) and rs[j] (southern ring; -1 for none) is
    assigned scale[col] * sum_k C_k R_k (zero where the functions are
    negligible), real part only in column 0.  cols: this chunk's columns, as
    in :func:`vector_analysis_kernel`.  Same loop structure as
    :func:`vector_analysis_kernel`.
    """
    K = CU.shape[0]
    J = x.size
    for i in range(cols.size):
        col = cols[i]
        mu, shift, top = column_plan(col, lmax)
        n = live[col] if top >= mu else 0
        for j in range(n, J):  # rows where the functions are negligible
            for X in (Xu, Xv):
                for kk in range(K):
                    if rn[j] >= 0:
                        X[kk, rn[j], col] = 0.0
                    if rs[j] >= 0:
                        X[kk, rs[j], col] = 0.0
        if n == 0:
            continue
        a = np.empty(top + 1)
        c = np.empty(top + 1)
        recursion_coeffs(mu, top, a, c)
        A = np.empty((K, 4, top + 1))  # cu re, cu im, cv re, cv im
        for kk in range(K):
            for l in range(mu, top + 1):
                A[kk, 0, l] = CU[kk, l, col].real
                A[kk, 1, l] = CU[kk, l, col].imag
                A[kk, 2, l] = CV[kk, l, col].real
                A[kk, 3, l] = CV[kk, l, col].imag
        g = np.zeros((K, 8, n))  # u even re, u even im, u odd re, u odd im, then v
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = order_start(mu, n, x, s, cm[mu], shift, P, Q, k)
        T = np.empty((4, n if K > 1 else 1))
        xl = x[:n]
        for kk in range(K):  # degree mu (even)
            for t in range(4):
                coef = A[kk, t, mu]
                gt = g[kk, 2 * t - (t % 2)]
                for j in range(n):
                    gt[j] += coef * P[j]
        l = mu
        while l < top:
            if nscaled > 0 and (l - mu) % CHECK_EVERY == 0:
                for j in range(n):
                    if rescale_lane(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            for t in range(8):
                                g[kk, t, j] = 0.0
            if K == 1 and l + 8 <= top:
                _synthesis_pass8_fused(l, n, xl, P, Q, a, c, A[0], g[0])
                l += 8
            elif l + 4 <= top:
                if K == 1:
                    _synthesis_pass4_fused(l, n, xl, P, Q, a, c, A[0], g[0])
                else:
                    advance4_store(l, n, xl, P, Q, a, c, T)
                    for kk in range(K):
                        _synthesis_spread4(l, n, T, A[kk], g[kk])
                l += 4
            else:
                l += 1
                advance1(l, n, xl, P, Q, a, c)
                par = 2 * ((l - mu) & 1)
                for kk in range(K):
                    for t in range(4):
                        coef = A[kk, t, l]
                        gt = g[kk, par + 2 * t - (t % 2)]
                        for j in range(n):
                            gt[j] += coef * P[j]
        for j in range(n):
            if k[j] < 0:  # never reached plain range: negligible
                for kk in range(K):
                    for t in range(8):
                        g[kk, t, j] = 0.0
        _store_rows(g, n, Xu, Xv, rn, rs, col, scale[col])


@nb.njit(inline="always", **JIT)
def _store_rows(g, n, Xu, Xv, rn, rs, col, sc):
    """Northern (even + odd) and southern (even - odd) values of both components into
    column col of the FFT buffers, times sc; real part only in column 0."""
    K = g.shape[0]
    for kk in range(K):
        for j in range(n):
            for comp in range(2):
                b = 4 * comp
                vn = sc * complex(g[kk, b, j] + g[kk, b + 2, j], g[kk, b + 1, j] + g[kk, b + 3, j])
                vs = sc * complex(g[kk, b, j] - g[kk, b + 2, j], g[kk, b + 1, j] - g[kk, b + 3, j])
                if col == 0:
                    vn = complex(vn.real, 0.0)
                    vs = complex(vs.real, 0.0)
                X = Xu if comp == 0 else Xv
                if rn[j] >= 0:
                    X[kk, rn[j], col] = vn
                if rs[j] >= 0:
                    X[kk, rs[j], col] = vs


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _synthesis_pass4_fused(l, n, xl, P, Q, a, c, A, g):
    """Four recursion steps l+1..l+4 adding both components' terms in the same pass.

    l - order is even on entry, so odd offsets feed the odd sums."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    ur1 = A[0, l + 1]
    ur2 = A[0, l + 2]
    ur3 = A[0, l + 3]
    ur4 = A[0, l + 4]
    ui1 = A[1, l + 1]
    ui2 = A[1, l + 2]
    ui3 = A[1, l + 3]
    ui4 = A[1, l + 4]
    vr1 = A[2, l + 1]
    vr2 = A[2, l + 2]
    vr3 = A[2, l + 3]
    vr4 = A[2, l + 4]
    vi1 = A[3, l + 1]
    vi2 = A[3, l + 2]
    vi3 = A[3, l + 3]
    vi4 = A[3, l + 4]
    uer = g[0]
    uei = g[1]
    uor = g[2]
    uoi = g[3]
    ver = g[4]
    vei = g[5]
    vor = g[6]
    voi = g[7]
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        uor[j] += ur1 * t1 + ur3 * t3
        uoi[j] += ui1 * t1 + ui3 * t3
        uer[j] += ur2 * t2 + ur4 * t4
        uei[j] += ui2 * t2 + ui4 * t4
        vor[j] += vr1 * t1 + vr3 * t3
        voi[j] += vi1 * t1 + vi3 * t3
        ver[j] += vr2 * t2 + vr4 * t4
        vei[j] += vi2 * t2 + vi4 * t4
        P[j] = t4
        Q[j] = t3


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _synthesis_pass8_fused(l, n, xl, P, Q, a, c, A, g):
    """Eight recursion steps l+1..l+8 adding both components' terms in the same pass
    (half the loads and stores of the sums per degree of :func:`_synthesis_pass4_fused`)."""
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
    ur1 = A[0, l + 1]
    ur2 = A[0, l + 2]
    ur3 = A[0, l + 3]
    ur4 = A[0, l + 4]
    ur5 = A[0, l + 5]
    ur6 = A[0, l + 6]
    ur7 = A[0, l + 7]
    ur8 = A[0, l + 8]
    ui1 = A[1, l + 1]
    ui2 = A[1, l + 2]
    ui3 = A[1, l + 3]
    ui4 = A[1, l + 4]
    ui5 = A[1, l + 5]
    ui6 = A[1, l + 6]
    ui7 = A[1, l + 7]
    ui8 = A[1, l + 8]
    vr1 = A[2, l + 1]
    vr2 = A[2, l + 2]
    vr3 = A[2, l + 3]
    vr4 = A[2, l + 4]
    vr5 = A[2, l + 5]
    vr6 = A[2, l + 6]
    vr7 = A[2, l + 7]
    vr8 = A[2, l + 8]
    vi1 = A[3, l + 1]
    vi2 = A[3, l + 2]
    vi3 = A[3, l + 3]
    vi4 = A[3, l + 4]
    vi5 = A[3, l + 5]
    vi6 = A[3, l + 6]
    vi7 = A[3, l + 7]
    vi8 = A[3, l + 8]
    uer = g[0]
    uei = g[1]
    uor = g[2]
    uoi = g[3]
    ver = g[4]
    vei = g[5]
    vor = g[6]
    voi = g[7]
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
        uor[j] += ur1 * t1 + ur3 * t3 + ur5 * t5 + ur7 * t7
        uer[j] += ur2 * t2 + ur4 * t4 + ur6 * t6 + ur8 * t8
        uoi[j] += ui1 * t1 + ui3 * t3 + ui5 * t5 + ui7 * t7
        uei[j] += ui2 * t2 + ui4 * t4 + ui6 * t6 + ui8 * t8
        vor[j] += vr1 * t1 + vr3 * t3 + vr5 * t5 + vr7 * t7
        ver[j] += vr2 * t2 + vr4 * t4 + vr6 * t6 + vr8 * t8
        voi[j] += vi1 * t1 + vi3 * t3 + vi5 * t5 + vi7 * t7
        vei[j] += vi2 * t2 + vi4 * t4 + vi6 * t6 + vi8 * t8
        P[j] = t8
        Q[j] = t7


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _synthesis_spread4(l, n, T, A, g):
    """Terms of degrees l+1..l+4 (stored in T) of one batch member added to its sums."""
    T1 = T[0]
    T2 = T[1]
    T3 = T[2]
    T4 = T[3]
    for t in range(4):
        r1 = A[t, l + 1]
        r2 = A[t, l + 2]
        r3 = A[t, l + 3]
        r4 = A[t, l + 4]
        ge = g[2 * t - (t % 2)]
        go = g[2 * t - (t % 2) + 2]
        for j in range(n):
            go[j] += r1 * T1[j] + r3 * T3[j]
            ge[j] += r2 * T2[j] + r4 * T4[j]


# ---------------------------------------------------------------------------
# Between (psi, chi) coefficients and the sequences of the kernels
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **JIT)
def _ladder(l, m):
    """d_l = sqrt((l^2 - m^2) / (4 l^2 - 1)), zero for l <= m."""
    if l <= m:
        return 0.0
    lf = float(l)
    mf = float(m)
    return math.sqrt((lf * lf - mf * mf) / (4.0 * lf * lf - 1.0))


@nb.njit(**SERIAL)
def flow_to_sequences(A, B, fl, fm, full, use_full, factor, CU, CV):
    """Sequences of the synthesis kernel from streamfunction and potential coefficients.

    A, B: complex (K, L+1, L+1) indexed [l, m], times f(l, m) (see
    :func:`convention_factor`) orthonormal and phase-free; ``factor`` scales
    both (1/R).  CU, CV: complex (K, L+2, L+2) indexed [k, col], assigned:

        col >= 1:  cu_k = (k-1) d_k a_(k-1) - (k+2) d_(k+1) a_(k+1) + i m b_k,
                   cv_k = i m a_k - (k-1) d_k b_(k-1) + (k+2) d_(k+1) b_(k+1),
        col = 0:   cu_k = -sqrt(k (k+1)) a_k0,  cv_k = sqrt(k (k+1)) b_k0,

    for k = col..L+1 (k = 1..L in column 0), zero elsewhere.  Coefficients
    with m > l are ignored.
    """
    K = A.shape[0]
    L = A.shape[1] - 1
    for m in range(L + 2):
        for kk in range(K):
            for k in range(L + 2):
                CU[kk, k, m] = 0.0
                CV[kk, k, m] = 0.0
        if m > L:
            continue
        if m == 0:
            for kk in range(K):
                for k in range(1, L + 1):
                    w = factor * math.sqrt(k * (k + 1.0)) * convention_factor(fl, fm, full, use_full, k, 0)
                    CU[kk, k, 0] = -w * A[kk, k, 0].real
                    CV[kk, k, 0] = w * B[kk, k, 0].real
            continue
        im = 1j * m
        for kk in range(K):
            for k in range(m, L + 2):
                down = 0.0  # weight of degree k - 1
                up = 0.0    # weight of degree k + 1
                a_dn = 0j
                b_dn = 0j
                a_up = 0j
                b_up = 0j
                a_k = 0j
                b_k = 0j
                if k - 1 >= m:
                    down = factor * (k - 1.0) * _ladder(k, m) * convention_factor(fl, fm, full, use_full, k - 1, m)
                    a_dn = A[kk, k - 1, m]
                    b_dn = B[kk, k - 1, m]
                if k + 1 <= L:
                    up = factor * (k + 2.0) * _ladder(k + 1, m) * convention_factor(fl, fm, full, use_full, k + 1, m)
                    a_up = A[kk, k + 1, m]
                    b_up = B[kk, k + 1, m]
                if k <= L:
                    f = factor * convention_factor(fl, fm, full, use_full, k, m)
                    a_k = f * A[kk, k, m]
                    b_k = f * B[kk, k, m]
                CU[kk, k, m] = down * a_dn - up * a_up + im * b_k
                CV[kk, k, m] = im * a_k - down * b_dn + up * b_up


@nb.njit(**SERIAL)
def sequences_to_flow(Gu, Gv, fl, fm, full, use_full, factor, A, B):
    """Streamfunction and potential coefficients from the analysis projections.

    Gu, Gv: complex (K, L+2, L+2) indexed [k, col] from
    :func:`vector_analysis_kernel`.  A, B: complex (K, L+1, L+1) indexed
    [l, m], assigned in the convention of f(l, m) (orthonormal phase-free
    values times f) and scaled by ``factor`` (R):

        m >= 1:  a_lm = (l d_(l+1) Gu_(l+1) - (l+1) d_l Gu_(l-1) - i m Gv_l) / (l (l+1)),
                 b_lm = (-i m Gu_l - l d_(l+1) Gv_(l+1) + (l+1) d_l Gv_(l-1)) / (l (l+1)),
        m = 0:   a_l0 = -Gu_l / sqrt(l (l+1)),  b_l0 = Gv_l / sqrt(l (l+1)),  a_00 = b_00 = 0.
    """
    K = A.shape[0]
    L = A.shape[1] - 1
    for m in range(L + 1):
        for kk in range(K):
            for l in range(m):
                A[kk, l, m] = 0.0
                B[kk, l, m] = 0.0
            if m == 0:
                A[kk, 0, 0] = 0.0
                B[kk, 0, 0] = 0.0
                for l in range(1, L + 1):
                    w = factor * convention_factor(fl, fm, full, use_full, l, 0) / math.sqrt(l * (l + 1.0))
                    A[kk, l, 0] = -w * Gu[kk, l, 0].real
                    B[kk, l, 0] = w * Gv[kk, l, 0].real
                continue
            im = 1j * m
            for l in range(m, L + 1):
                lf = float(l)
                up = lf * _ladder(l + 1, m)
                down = (lf + 1.0) * _ladder(l, m)
                gu_dn = Gu[kk, l - 1, m] if l > m else 0j
                gv_dn = Gv[kk, l - 1, m] if l > m else 0j
                w = factor * convention_factor(fl, fm, full, use_full, l, m) / (lf * (lf + 1.0))
                A[kk, l, m] = w * (up * Gu[kk, l + 1, m] - down * gu_dn - im * Gv[kk, l, m])
                B[kk, l, m] = w * (-im * Gu[kk, l, m] - up * Gv[kk, l + 1, m] + down * gv_dn)
