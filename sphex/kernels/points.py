"""Kernels of the evaluation at scattered points, its adjoint, the surface
gradient and rows of the design matrix.

Points arrive sorted from the equator toward the poles (``s = sin(colat)``
descending) and are cut into blocks of ``BLOCK`` consecutive points.  Each
kernel runs the orders one after the other; for one order the blocks are
dealt round robin to ``nchunks`` chunks, and the chunks run in parallel.
Within a block the fully normalised three-term recursion of
:mod:`sphex.kernels.recursion` advances all points together (a short,
contiguous, vectorised loop), started in extended range; the most polar
points of a block on which the order is negligible are skipped
(:func:`~sphex.kernels.recursion.live_count`), and sums of points still in
scaled range are discarded, as in the transforms.

``cos(m phi)`` and ``sin(m phi)`` of every point are carried from order to
order by a rotation, recomputed exactly every ``PHASE_RESEED`` orders so
that rounding cannot build up.

Radial continuation folds ``(R/r)^l`` into the recursion: with ``q = R/r``
the functions ``q^l Lambda_lm`` obey the same recursion with ``x`` replaced
by ``q x`` and the second coefficient multiplied by ``q^2``, started from
``c_m (q s)^m``; the remaining factor ``q`` is applied at the end.  The
radius arrays are ``None`` when there is no continuation, and numba then
compiles the plain version.

Everything is orthonormal without the Condon-Shortley phase; coefficients
are passed as real and imaginary parts indexed ``[field, m, l]``.
"""
from __future__ import annotations

import math

import numba as nb
import numpy as np

from sphex.kernels.recursion import (
    BIG, CHECK_EVERY, FASTMATH, INV_SCALE, JIT, live_count, order_start, recursion_coeffs,
    rescale_lane, start_value,
)

BLOCK = 64          # points advanced together by the recursion
PHASE_RESEED = 16   # orders between exact evaluations of cos(m phi), sin(m phi)


# ---------------------------------------------------------------------------
# shared pieces
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **JIT)
def _advance_phase(m, j0, j1, phi, c1, s1, cph, sph):
    """cph[j], sph[j] = cos(m phi_j), sin(m phi_j) for j in j0..j1-1, from order m - 1."""
    if m % PHASE_RESEED == 0:
        for j in range(j0, j1):
            cph[j] = math.cos(m * phi[j])
            sph[j] = math.sin(m * phi[j])
    else:
        for j in range(j0, j1):
            c = cph[j] * c1[j] - sph[j] * s1[j]
            sph[j] = sph[j] * c1[j] + cph[j] * s1[j]
            cph[j] = c


@nb.njit(fastmath=FASTMATH, **JIT)
def _step(l, n, xl, P, Q, a, c, q2, j0):
    """One recursion step to degree l on lanes 0..n-1 (q2[j0 + j]: (R/r)^2 of lane j, or None)."""
    al = a[l]
    cl = c[l]
    if q2 is None:
        for j in range(n):
            t = al * xl[j] * P[j] - cl * Q[j]
            Q[j] = P[j]
            P[j] = t
    else:
        for j in range(n):
            t = al * xl[j] * P[j] - cl * q2[j0 + j] * Q[j]
            Q[j] = P[j]
            P[j] = t


@nb.njit(**JIT)
def _radius_factor(qf, jj):
    """q of point jj, or 1 without radial continuation."""
    if qf is None:
        return 1.0
    return qf[jj]


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _synthesis_step4(l, n, xl, P, Q, a, c, cr, ci, Fr, Fi):
    """Four recursion steps l+1..l+4 of one field, adding sum_l a_l P_l to (Fr, Fi)."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    r1 = cr[l + 1]
    r2 = cr[l + 2]
    r3 = cr[l + 3]
    r4 = cr[l + 4]
    i1 = ci[l + 1]
    i2 = ci[l + 2]
    i3 = ci[l + 3]
    i4 = ci[l + 4]
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        Fr[j] += r1 * t1 + r2 * t2 + r3 * t3 + r4 * t4
        Fi[j] += i1 * t1 + i2 * t2 + i3 * t3 + i4 * t4
        P[j] = t4
        Q[j] = t3


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def _analysis_step4(l, n, xl, P, Q, a, c, gr, gi, accr, acci):
    """Four recursion steps l+1..l+4 of one field, adding sum_j P_l g_j to acc[l]."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
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
        g_r = gr[j]
        g_i = gi[j]
        s1r += t1 * g_r
        s1i += t1 * g_i
        s2r += t2 * g_r
        s2i += t2 * g_i
        s3r += t3 * g_r
        s3i += t3 * g_i
        s4r += t4 * g_r
        s4i += t4 * g_i
        P[j] = t4
        Q[j] = t3
    accr[l + 1] += s1r
    acci[l + 1] += s1i
    accr[l + 2] += s2r
    acci[l + 2] += s2i
    accr[l + 3] += s3r
    acci[l + 3] += s3i
    accr[l + 4] += s4r
    acci[l + 4] += s4i


# ---------------------------------------------------------------------------
# evaluation
# ---------------------------------------------------------------------------
@nb.njit(parallel=True, fastmath=FASTMATH, **JIT)
def evaluate_kernel(lmax, x, s, xq, sq, q2, qf, phi, c1, s1, cm, cr, ci, nchunks, out):
    """out[k, j] += sum_{l, m} w_m Re(a_lm q^(l+1) Lambda_lm(theta_j) e^{i m phi_j}).

    x, s: cos and sin of the colatitude (sorted equator first); xq, sq: the
    same times q = R/r (or x, s themselves); q2: q^2 or None; qf: q or None.
    phi, c1, s1: longitude (radians) and its cosine and sine.  cm: start
    values c_m.  cr, ci: (K, L+1, L+1) real and imaginary parts indexed
    [k, m, l], orthonormal without phase, already multiplied by w_m (1 for
    m = 0, 2 otherwise).  out: (K, N), added to.
    """
    K = cr.shape[0]
    N = x.size
    nblocks = (N + BLOCK - 1) // BLOCK
    cph = np.empty(N)
    sph = np.empty(N)
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    for m in range(lmax + 1):
        recursion_coeffs(m, lmax, a, c)
        for t in nb.prange(nchunks):
            P = np.empty(BLOCK)
            Q = np.empty(BLOCK)
            k = np.empty(BLOCK, dtype=np.int64)
            Fr = np.empty((K, BLOCK))
            Fi = np.empty((K, BLOCK))
            for b in range(t, nblocks, nchunks):
                j0 = b * BLOCK
                j1 = min(j0 + BLOCK, N)
                _advance_phase(m, j0, j1, phi, c1, s1, cph, sph)
                n = live_count(m, lmax, x[j0:j1], s[j0:j1], cm[m], 0, a, c)
                if n == 0:
                    continue
                xl = xq[j0:j0 + n]
                nscaled = order_start(m, n, xl, sq[j0:j0 + n], cm[m], 0, P, Q, k)
                for kk in range(K):
                    for j in range(n):
                        Fr[kk, j] = cr[kk, m, m] * P[j]
                        Fi[kk, j] = ci[kk, m, m] * P[j]
                l = m
                while l < lmax:
                    if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
                        for j in range(n):
                            if rescale_lane(P, Q, k, j):
                                nscaled -= 1
                                for kk in range(K):
                                    Fr[kk, j] = 0.0
                                    Fi[kk, j] = 0.0
                    if K == 1 and q2 is None and l + 4 <= lmax:
                        _synthesis_step4(l, n, xl, P, Q, a, c, cr[0, m], ci[0, m], Fr[0], Fi[0])
                        l += 4
                    else:
                        l += 1
                        _step(l, n, xl, P, Q, a, c, q2, j0)
                        for kk in range(K):
                            ar = cr[kk, m, l]
                            ai = ci[kk, m, l]
                            for j in range(n):
                                Fr[kk, j] += ar * P[j]
                                Fi[kk, j] += ai * P[j]
                for j in range(n):
                    if k[j] < 0:
                        continue
                    jj = j0 + j
                    f = _radius_factor(qf, jj)
                    for kk in range(K):
                        out[kk, jj] += f * (Fr[kk, j] * cph[jj] - Fi[kk, j] * sph[jj])


# ---------------------------------------------------------------------------
# adjoint of the evaluation
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **JIT)
def _set_data_weight(gr, gi, y, kk, j, jj, cph, sph, qf):
    """gr[kk, j] + i gi[kk, j] = y_jj q_jj e^{-i m phi_jj}."""
    f = y[kk, jj] * _radius_factor(qf, jj)
    gr[kk, j] = f * cph[jj]
    gi[kk, j] = -f * sph[jj]


@nb.njit(inline="always", **JIT)
def _adjoint_order_start(m, n, j0, P, k, y, cph, sph, qf, gr, gi, accr, acci):
    """Data weights of lanes 0..n-1 (zero while in scaled range) and their degree-m sums."""
    for kk in range(y.shape[0]):
        for j in range(n):
            if k[j] == 0:
                _set_data_weight(gr, gi, y, kk, j, j0 + j, cph, sph, qf)
            else:  # scaled range: negligible until it becomes plain
                gr[kk, j] = 0.0
                gi[kk, j] = 0.0
        sr = 0.0
        si = 0.0
        for j in range(n):
            sr += P[j] * gr[kk, j]
            si += P[j] * gi[kk, j]
        accr[kk, m] += sr
        acci[kk, m] += si


@nb.njit(parallel=True, fastmath=FASTMATH, **JIT)
def adjoint_kernel(lmax, x, s, xq, sq, q2, qf, phi, c1, s1, cm, y, nchunks, outr, outi):
    """outr + i outi [k, m, l] = sum_j y[k, j] q_j^(l+1) Lambda_lm(theta_j) e^{-i m phi_j}.

    Arguments as for :func:`evaluate_kernel`; y: (K, N) real point values
    (sorted like the points).  outr, outi: (K, L+1, L+1) indexed [k, m, l],
    assigned for l >= m (the factor w_m is left to the caller).
    """
    K = y.shape[0]
    N = x.size
    nblocks = (N + BLOCK - 1) // BLOCK
    cph = np.empty(N)
    sph = np.empty(N)
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    accr = np.zeros((nchunks, K, lmax + 1))
    acci = np.zeros((nchunks, K, lmax + 1))
    for m in range(lmax + 1):
        recursion_coeffs(m, lmax, a, c)
        for t in nb.prange(nchunks):
            P = np.empty(BLOCK)
            Q = np.empty(BLOCK)
            k = np.empty(BLOCK, dtype=np.int64)
            gr = np.empty((K, BLOCK))
            gi = np.empty((K, BLOCK))
            for kk in range(K):
                for l in range(m, lmax + 1):
                    accr[t, kk, l] = 0.0
                    acci[t, kk, l] = 0.0
            for b in range(t, nblocks, nchunks):
                j0 = b * BLOCK
                j1 = min(j0 + BLOCK, N)
                _advance_phase(m, j0, j1, phi, c1, s1, cph, sph)
                n = live_count(m, lmax, x[j0:j1], s[j0:j1], cm[m], 0, a, c)
                if n == 0:
                    continue
                xl = xq[j0:j0 + n]
                nscaled = order_start(m, n, xl, sq[j0:j0 + n], cm[m], 0, P, Q, k)
                _adjoint_order_start(m, n, j0, P, k, y, cph, sph, qf, gr, gi, accr[t], acci[t])
                l = m
                while l < lmax:
                    if nscaled > 0 and (l - m) % CHECK_EVERY == 0:
                        for j in range(n):
                            if rescale_lane(P, Q, k, j):
                                nscaled -= 1
                                for kk in range(K):
                                    _set_data_weight(gr, gi, y, kk, j, j0 + j, cph, sph, qf)
                    if K == 1 and q2 is None and l + 4 <= lmax:
                        _analysis_step4(l, n, xl, P, Q, a, c, gr[0], gi[0], accr[t, 0], acci[t, 0])
                        l += 4
                    else:
                        l += 1
                        _step(l, n, xl, P, Q, a, c, q2, j0)
                        for kk in range(K):
                            sr = 0.0
                            si = 0.0
                            for j in range(n):
                                sr += P[j] * gr[kk, j]
                                si += P[j] * gi[kk, j]
                            accr[t, kk, l] += sr
                            acci[t, kk, l] += si
        for kk in range(K):
            for l in range(m, lmax + 1):
                sr = 0.0
                si = 0.0
                for t in range(nchunks):
                    sr += accr[t, kk, l]
                    si += acci[t, kk, l]
                outr[kk, m, l] = sr
                outi[kk, m, l] = si


# ---------------------------------------------------------------------------
# surface gradient
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **JIT)
def _gradient_start(m, xj, sj, cmm):
    """(U_m, D_m, k): U = Lambda_mm (m = 0) or Lambda_mm / sin (m >= 1) in
    extended range, D = dLambda_mm/dtheta on the same scale."""
    if m == 0:
        return cmm, 0.0, 0
    u, kk = start_value(cmm, m, sj, 1)
    return u, m * xj * u, kk


@nb.njit(inline="always", **JIT)
def _gradient_lanes_start(m, n, j0, x, s, cmm, U0, U1, D0, D1, se, k):
    """Start values of lanes 0..n-1 (points j0..j0+n-1); returns how many are scaled."""
    nscaled = 0
    for j in range(n):
        jj = j0 + j
        u, d, kj = _gradient_start(m, x[jj], s[jj], cmm)
        U1[j] = u
        D1[j] = d
        k[j] = kj
        U0[j] = 0.0
        D0[j] = 0.0
        se[j] = s[jj] if m == 0 else s[jj] * s[jj]
        if kj < 0:
            nscaled += 1
    return nscaled


@nb.njit(inline="always", **JIT)
def _gradient_rescale(n, l, U0, U1, D0, D1, k, G):
    """Rescale scaled lanes that grew past BIG (degree l - 1); lanes that become plain
    drop their sums.  Returns how many became plain."""
    plain = 0
    for j in range(n):
        if k[j] < 0 and (abs(U1[j]) > BIG or abs(D1[j]) > BIG * l):
            U0[j] *= INV_SCALE
            U1[j] *= INV_SCALE
            D0[j] *= INV_SCALE
            D1[j] *= INV_SCALE
            k[j] += 1
            if k[j] == 0:
                plain += 1
                for kk in range(G.shape[0]):
                    for r in range(4):
                        G[kk, r, j] = 0.0
    return plain


@nb.njit(parallel=True, fastmath=FASTMATH, **JIT)
def gradient_kernel(lmax, x, s, phi, c1, s1, cm, cr, ci, nchunks, east, north):
    """east += (1/sin theta) df/dphi, north += -df/dtheta at the points (unit sphere).

    Coupled recursions: U_l = Lambda_l (m = 0) or Lambda_l / sin theta
    (m >= 1, started from c_m sin^(m-1)), which obeys the same three-term
    recursion, and D_l = dLambda_l/dtheta, obtained by differentiating it:
    D_l = a_l (x D_{l-1} - s^e U_{l-1}) - c_l D_{l-2} with e = 1 for m = 0
    and e = 2 otherwise.  Arguments as for :func:`evaluate_kernel` (no radius).
    """
    K = cr.shape[0]
    N = x.size
    nblocks = (N + BLOCK - 1) // BLOCK
    cph = np.empty(N)
    sph = np.empty(N)
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    for m in range(lmax + 1):
        recursion_coeffs(m, lmax, a, c)
        shift = 0 if m == 0 else 1
        for t in nb.prange(nchunks):
            U0 = np.empty(BLOCK)
            U1 = np.empty(BLOCK)
            D0 = np.empty(BLOCK)
            D1 = np.empty(BLOCK)
            se = np.empty(BLOCK)
            k = np.empty(BLOCK, dtype=np.int64)
            G = np.empty((K, 4, BLOCK))  # east re, east im, north re, north im
            for b in range(t, nblocks, nchunks):
                j0 = b * BLOCK
                j1 = min(j0 + BLOCK, N)
                _advance_phase(m, j0, j1, phi, c1, s1, cph, sph)
                n = live_count(m, lmax, x[j0:j1], s[j0:j1], cm[m], shift, a, c)
                if n == 0:
                    continue
                nscaled = _gradient_lanes_start(m, n, j0, x, s, cm[m], U0, U1, D0, D1, se, k)
                for kk in range(K):
                    for j in range(n):
                        G[kk, 0, j] = cr[kk, m, m] * U1[j]
                        G[kk, 1, j] = ci[kk, m, m] * U1[j]
                        G[kk, 2, j] = cr[kk, m, m] * D1[j]
                        G[kk, 3, j] = ci[kk, m, m] * D1[j]
                for l in range(m + 1, lmax + 1):
                    if nscaled > 0 and (l - 1 - m) % CHECK_EVERY == 0:
                        nscaled -= _gradient_rescale(n, l, U0, U1, D0, D1, k, G)
                    al = a[l]
                    cl = c[l]
                    for j in range(n):
                        xj = x[j0 + j]
                        u = al * xj * U1[j] - cl * U0[j]
                        d = al * (xj * D1[j] - se[j] * U1[j]) - cl * D0[j]
                        U0[j] = U1[j]
                        U1[j] = u
                        D0[j] = D1[j]
                        D1[j] = d
                    for kk in range(K):
                        ar = cr[kk, m, l]
                        ai = ci[kk, m, l]
                        for j in range(n):
                            G[kk, 0, j] += ar * U1[j]
                            G[kk, 1, j] += ai * U1[j]
                            G[kk, 2, j] += ar * D1[j]
                            G[kk, 3, j] += ai * D1[j]
                for j in range(n):
                    if k[j] < 0:
                        continue
                    jj = j0 + j
                    for kk in range(K):
                        east[kk, jj] -= m * (G[kk, 0, j] * sph[jj] + G[kk, 1, j] * cph[jj])
                        north[kk, jj] -= G[kk, 2, j] * cph[jj] - G[kk, 3, j] * sph[jj]


# ---------------------------------------------------------------------------
# design matrix (direct least squares)
# ---------------------------------------------------------------------------
@nb.njit(**JIT)
def recursion_tables(lmax, atab, ctab):
    """atab[m, l], ctab[m, l]: the recursion coefficients of every order."""
    for m in range(lmax + 1):
        recursion_coeffs(m, lmax, atab[m], ctab[m])


@nb.njit(parallel=True, **JIT)
def design_kernel(lmax, x, s, phi, cm, atab, ctab, col_cos, col_sin, scale, A):
    """Rows of the real design matrix: A[j, col_cos[l, m]] = scale[j] r_m Lambda_lm cos(m phi_j),
    A[j, col_sin[l, m]] = scale[j] r_m Lambda_lm sin(m phi_j) (m >= 1), with r_0 = 1 and
    r_m = sqrt(2): the real orthonormal basis.  Points in any order."""
    N = x.size
    root2 = math.sqrt(2.0)
    for j in nb.prange(N):
        xj = x[j]
        sj = s[j]
        for m in range(lmax + 1):
            if m == 0:
                fc = scale[j]
                fs = 0.0
            else:
                fc = root2 * scale[j] * math.cos(m * phi[j])
                fs = root2 * scale[j] * math.sin(m * phi[j])
            p1, kk = start_value(cm[m], m, sj, 0)
            p0 = 0.0
            for l in range(m, lmax + 1):
                if l > m:
                    p2 = atab[m, l] * xj * p1 - ctab[m, l] * p0
                    p0 = p1
                    p1 = p2
                    if kk < 0 and abs(p1) > BIG:
                        p0 *= INV_SCALE
                        p1 *= INV_SCALE
                        kk += 1
                v = p1 if kk == 0 else 0.0
                A[j, col_cos[l, m]] = fc * v
                if m > 0:
                    A[j, col_sin[l, m]] = fs * v
