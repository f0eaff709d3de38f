"""numba kernels: the only place with hot loops.

Kernels trust their inputs: the public modules validate shapes, dtypes and
ranges before calling them.  Everything here is fully normalised ("ortho",
no Condon-Shortley phase); other conventions are per-(l, m) factors applied by
the callers.

Extended range
--------------
The sectoral start value ``P_mm = c_m sin^m(theta)`` underflows double
precision for large ``m`` away from the equator (``sin^m`` with m = 10800 and
sin = 0.5 is 2^-10800).  It is carried as ``mantissa * 2^(600 k)`` with an
integer ``k <= 0`` while the recursion in degree grows it; each time the
mantissa exceeds ``2^300`` it is rescaled by ``2^-600`` and ``k`` increases.
Once ``k`` reaches 0 the values are ordinary doubles (at least ``2^-330``) and
the recursion continues in plain arithmetic.  While ``k < 0`` the true values
are below ``2^-300`` (about 5e-91) relative to the O(1) values of the same
order, far under double-precision resolution, so they contribute nothing to a
transform; :func:`legendre_order` still returns them scaled back (which
underflows to zero or to a subnormal, as the exact value would).

Latitudes are processed from the equator toward the poles.  For a fixed order
the functions are monotonically smaller toward the pole in the range where
they are negligible, so once one latitude stays below the range for every
degree up to ``lmax`` all more polar latitudes are skipped.
"""
from __future__ import annotations

import math
import os
import sys


def _prefer_wide_vectors() -> None:
    """Let LLVM use 512-bit vectors on CPUs that have them.

    LLVM's tuning for recent x86 server cores prefers 256-bit vectors even
    where AVX-512 exists; for these kernels the full width is about 1.3-1.5x
    faster.  This has to be decided before numba is first imported, so it is
    skipped when numba is already loaded, when NUMBA_CPU_FEATURES is set by the
    user, or when SPHEX_WIDE_VECTORS=0.
    """
    if (os.environ.get("SPHEX_WIDE_VECTORS", "1") == "0" or "numba" in sys.modules
            or "NUMBA_CPU_FEATURES" in os.environ or "NUMBA_CPU_NAME" in os.environ):
        return
    try:
        import llvmlite.binding as llvm

        features = llvm.get_host_cpu_features()
        if not features.get("avx512f", False):
            return
        os.environ["NUMBA_CPU_NAME"] = llvm.get_host_cpu_name()
        os.environ["NUMBA_CPU_FEATURES"] = features.flatten() + ",-prefer-256-bit"
    except Exception:  # pragma: no cover - any failure keeps numba's defaults
        return


_prefer_wide_vectors()

import numba as nb  # noqa: E402
import numpy as np  # noqa: E402

_JIT = dict(nogil=True, cache=True)
_FM = {"contract", "reassoc", "nsz", "arcp"}

SCALE_EXP = 600
BIG = 2.0 ** 300
INV_SCALE = 2.0 ** -SCALE_EXP
PLAIN_MIN_EXP = -330
TINY_EXP = 500
TINY = 2.0 ** -TINY_EXP
UNTINY = 2.0 ** TINY_EXP
CHECK_EVERY = 16  # degrees between range checks of scaled latitudes
DD_NODES = 128  # Gauss nodes nearest each pole polished in double-double


# ---------------------------------------------------------------------------
# Gauss-Legendre nodes
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **_JIT)
def _legendre_pair(n, t):
    """(P_n, P_{n-1}) at cos(t), by the recursion written in u = 1 - cos t =
    2 sin^2(t/2), which keeps full relative precision in t near the poles."""
    h = math.sin(0.5 * t)
    u = 2.0 * h * h
    p0 = 1.0
    p1 = 1.0 - u
    for j in range(2, n + 1):
        p2 = ((2.0 * j - 1.0) * (p1 - u * p1) - (j - 1.0) * p0) / j
        p0 = p1
        p1 = p2
    return p1, p0, u


# double-double helpers (error-free transformations; never under fastmath)
@nb.njit(inline="always", **_JIT)
def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


@nb.njit(inline="always", **_JIT)
def _fast_two_sum(a, b):
    s = a + b
    return s, b - (s - a)


@nb.njit(inline="always", **_JIT)
def _two_prod(a, b):
    p = a * b
    c = 134217729.0 * a
    ah = c - (c - a)
    al = a - ah
    c = 134217729.0 * b
    bh = c - (c - b)
    bl = b - bh
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


@nb.njit(inline="always", **_JIT)
def _dd_mul_d(ah, al, b):
    p, e = _two_prod(ah, b)
    return _fast_two_sum(p, e + al * b)


@nb.njit(inline="always", **_JIT)
def _dd_sub(ah, al, bh, bl):
    s, e = _two_sum(ah, -bh)
    return _fast_two_sum(s, e + (al - bl))


@nb.njit(inline="always", **_JIT)
def _dd_div_d(ah, al, b):
    q = ah / b
    p, e = _two_prod(q, b)
    return _fast_two_sum(q, ((ah - p) - e + al) / b)


@nb.njit(**_JIT)
def _legendre_pair_dd(n, t):
    """(P_n, P_{n-1}, u) at cos(t) in double-double arithmetic, rounded."""
    h = math.sin(0.5 * t)
    u = 2.0 * h * h
    p0h, p0l = 1.0, 0.0
    p1h, p1l = _dd_sub(1.0, 0.0, u, 0.0)
    for j in range(2, n + 1):
        th, tl = _dd_mul_d(p1h, p1l, u)
        th, tl = _dd_sub(p1h, p1l, th, tl)
        th, tl = _dd_mul_d(th, tl, 2.0 * j - 1.0)
        qh, ql = _dd_mul_d(p0h, p0l, j - 1.0)
        th, tl = _dd_sub(th, tl, qh, ql)
        th, tl = _dd_div_d(th, tl, float(j))
        p0h, p0l = p1h, p1l
        p1h, p1l = th, tl
    return p1h + p1l, p0h + p0l, u


@nb.njit(parallel=True, **_JIT)
def _gauss_half(n, theta, weights):
    half = (n + 1) // 2
    for i in nb.prange(half):
        k = i + 1
        t = math.pi * (4.0 * k - 1.0) / (4.0 * n + 2.0)
        # Tricomi's estimate, refined by Newton's method in theta:
        # dP_n/dtheta = n (x P_n - P_{n-1}) / sin(theta)
        t = math.acos((1.0 - (n - 1.0) / (8.0 * n * n * n)) * math.cos(t))
        for _ in range(30):
            pn, pn1, u = _legendre_pair(n, t)
            dt = pn / (n * ((pn - u * pn) - pn1) / math.sin(t))
            t = t - dt
            if abs(dt) <= 1e-13 * t:
                break
        if k <= DD_NODES:
            # polish in double-double: near the poles plain doubles leave ~n ulp
            # of noise in P_n, i.e. relative errors up to 1e-12 in the node
            for _ in range(2):
                pn, pn1, u = _legendre_pair_dd(n, t)
                t = t - pn / (n * ((pn - u * pn) - pn1) / math.sin(t))
            pn, pn1, u = _legendre_pair_dd(n, t)
        else:
            pn, pn1, u = _legendre_pair(n, t)
        theta[i] = t
        s = math.sin(t)
        weights[i] = 2.0 * s * s / (n * n * pn1 * pn1)


def gauss_legendre(n: int):
    """Colatitudes (ascending, radians) and weights in x of the n-point Gauss rule."""
    half = (n + 1) // 2
    theta = np.empty(half)
    w = np.empty(half)
    _gauss_half(n, theta, w)
    colat = np.empty(n)
    weights = np.empty(n)
    colat[:half] = theta
    weights[:half] = w
    colat[n - half:] = (np.pi - theta)[::-1]
    weights[n - half:] = w[::-1]
    if n % 2 == 1:
        colat[half - 1] = np.pi / 2
    return colat, weights


# ---------------------------------------------------------------------------
# Recursion pieces
# ---------------------------------------------------------------------------
@nb.njit(inline="always", fastmath=_FM, **_JIT)
def _recursion_coeffs(m, lmax, a, c):
    """P_l = a_l x P_{l-1} - c_l P_{l-2} for l >= m + 1 (fully normalised).

    a_l = sqrt((4 l^2 - 1) / ((l - m)(l + m))), and c_l = a_l / a_{l-1}, which
    equals a_l sqrt(((l-1)^2 - m^2) / (4 (l-1)^2 - 1)) with one division
    instead of a second square root; c_{m+1} = 0 (no P_{m-1})."""
    a[m] = 0.0
    c[m] = 0.0
    mf = float(m)
    for l in range(m + 1, lmax + 1):
        lf = float(l)
        a[l] = math.sqrt((4.0 * lf * lf - 1.0) / ((lf - mf) * (lf + mf)))
    if m + 1 <= lmax:
        c[m + 1] = 0.0
    for l in range(m + 2, lmax + 1):
        c[l] = a[l] / a[l - 1]


@nb.njit(inline="always", **_JIT)
def _sin_power(s, m):
    """s**m for 0 < s <= 1 as (r, e) with s**m = r * 2**e, r in [2^-1000, 1]."""
    r = 1.0
    er = 0
    b = s
    eb = 0
    k = m
    while k > 0:
        if k & 1:
            r = r * b
            er += eb
            if r < TINY:
                r *= UNTINY
                er -= TINY_EXP
        k >>= 1
        if k > 0:
            b = b * b
            eb = 2 * eb
            if b < TINY:
                b *= UNTINY
                eb -= TINY_EXP
    return r, er


@nb.njit(inline="always", **_JIT)
def _start(cm, m, s, shift):
    """c_m sin^(m - shift) as (mantissa, k): value = mantissa * 2^(600 k)."""
    if m - shift == 0:
        return cm, 0
    if s == 0.0:
        return 0.0, 0
    r, e = _sin_power(s, m - shift)
    mv, ev = math.frexp(cm * r)
    e += ev
    k = 0
    while e < PLAIN_MIN_EXP:
        e += SCALE_EXP
        k -= 1
    return math.ldexp(mv, e), k


# ---------------------------------------------------------------------------
# Legendre functions of one order at arbitrary points (public legendre module)
# ---------------------------------------------------------------------------
@nb.njit(parallel=True, **_JIT)
def legendre_order(m, lmax, x, s, cm, out, dout, want_deriv):
    """Fully normalised Lambda_lm (no phase) for l = m..lmax at points (x, s).

    out[l - m, j]; with want_deriv also d/dtheta into dout (coupled recursion
    obtained by differentiating the three-term recursion).
    """
    n = x.size
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    _recursion_coeffs(m, lmax, a, c)
    for j in nb.prange(n):
        xj = x[j]
        sj = s[j]
        # base q = c_m sin^(m-1): P_mm = s q, dP_mm = m x q
        if m == 0:
            p1 = cm
            d1 = 0.0
            k = 0
        else:
            q, k = _start(cm, m, sj, 1)
            p1 = sj * q
            d1 = m * xj * q
        p0 = 0.0
        d0 = 0.0
        for l in range(m, lmax + 1):
            if l > m:
                if l == m + 1:
                    p2 = a[l] * xj * p1
                    d2 = a[l] * (xj * d1 - sj * p1)
                else:
                    p2 = a[l] * xj * p1 - c[l] * p0
                    d2 = a[l] * (xj * d1 - sj * p1) - c[l] * d0
                p0 = p1
                p1 = p2
                d0 = d1
                d1 = d2
                if k < 0 and (abs(p1) > BIG or abs(d1) > BIG * (l + 1.0)):
                    p0 *= INV_SCALE
                    p1 *= INV_SCALE
                    d0 *= INV_SCALE
                    d1 *= INV_SCALE
                    k += 1
            if k == 0:
                out[l - m, j] = p1
                if want_deriv:
                    dout[l - m, j] = d1
            else:
                out[l - m, j] = math.ldexp(p1, SCALE_EXP * k)
                if want_deriv:
                    dout[l - m, j] = math.ldexp(d1, SCALE_EXP * k)


# ---------------------------------------------------------------------------
# Transform kernels
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **_JIT)
def _fac(fl, fm, full, use_full, l, m):
    """Convention factor f(l, m): full[l, m] when use_full, else fl[l] * fm[m]."""
    if use_full:
        return full[l, m]
    return fl[l] * fm[m]


@nb.njit(inline="always", **_JIT)
def _order_of(i, nm, lo):
    """Order sequence lo, top, lo+1, top-1, ... (costly and cheap in pairs)."""
    h = i // 2
    if i % 2 == 0:
        return lo + h
    return lo + nm - 1 - h


@nb.njit(inline="always", **_JIT)
def _scaled_phase(m, lmax, xj, sj, cmm, shift, a, c):
    """Run one latitude through the scaled range.

    Returns (l, v0, v1): the first degree l at which the value is in plain
    range, with v1 = P_l and v0 = P_{l-1}; l = lmax + 1 when it never gets
    there (the latitude is negligible for this order)."""
    q, k = _start(cmm, m, sj, shift)
    v0 = 0.0
    v1 = q
    l = m
    while k < 0:
        if l == lmax:
            return lmax + 1, 0.0, 0.0
        l += 1
        v2 = a[l] * xj * v1 - c[l] * v0
        v0 = v1
        v1 = v2
        if abs(v1) > BIG:
            v0 *= INV_SCALE
            v1 *= INV_SCALE
            k += 1
    return l, v0, v1


@nb.njit(**_JIT)
def _live_count(m, lmax, x, s, cmm, shift, a, c):
    """Number of latitudes (equator first) on which order m is not negligible.

    Latitude j is live when its values enter plain double range by lmax; the
    live ones form a prefix (the functions shrink monotonically toward the pole
    where they are negligible), found by bisection."""
    J = x.size
    if J == 0:
        return 0
    l, _, _ = _scaled_phase(m, lmax, x[J - 1], s[J - 1], cmm, shift, a, c)
    if l <= lmax:
        return J
    lo = 0  # invariant: lanes < lo live, lane hi dead
    hi = J - 1
    while lo < hi:
        mid = (lo + hi) // 2
        l, _, _ = _scaled_phase(m, lmax, x[mid], s[mid], cmm, shift, a, c)
        if l <= lmax:
            lo = mid + 1
        else:
            hi = mid
    return lo


@nb.njit(inline="always", **_JIT)
def _order_start(m, n, x, s, cmm, shift, P, Q, k):
    """Start values P = P_mm (scaled), Q = 0; returns how many lanes are scaled."""
    nscaled = 0
    for j in range(n):
        q, kk = _start(cmm, m, s[j], shift)
        P[j] = q
        Q[j] = 0.0
        k[j] = kk
        if kk < 0:
            nscaled += 1
    return nscaled


@nb.njit(inline="always", **_JIT)
def _rescale(P, Q, k, j):
    """Rescale lane j if it grew past BIG; True when it just became plain."""
    if k[j] < 0 and abs(P[j]) > BIG:
        P[j] *= INV_SCALE
        Q[j] *= INV_SCALE
        k[j] += 1
        return k[j] == 0
    return False


@nb.njit(inline="always", fastmath=_FM, **_JIT)
def _advance1(l, n, xl, P, Q, a, c):
    """One recursion step to degree l on the first n latitudes (P = P_l, Q = P_{l-1})."""
    al = a[l]
    cl = c[l]
    for j in range(n):
        t = al * xl[j] * P[j] - cl * Q[j]
        Q[j] = P[j]
        P[j] = t


@nb.njit(inline="always", fastmath=_FM, **_JIT)
def _advance4_store(l, n, xl, P, Q, a, c, T):
    """Four recursion steps l+1..l+4, keeping each degree's values in T[0..3]
    for the per-field contractions of a batch."""
    a1 = a[l + 1]
    a2 = a[l + 2]
    a3 = a[l + 3]
    a4 = a[l + 4]
    c1 = c[l + 1]
    c2 = c[l + 2]
    c3 = c[l + 3]
    c4 = c[l + 4]
    T1 = T[0]
    T2 = T[1]
    T3 = T[2]
    T4 = T[3]
    for j in range(n):
        xj = xl[j]
        p = P[j]
        t1 = a1 * xj * p - c1 * Q[j]
        t2 = a2 * xj * t1 - c2 * p
        t3 = a3 * xj * t2 - c3 * t1
        t4 = a4 * xj * t3 - c4 * t2
        T1[j] = t1
        T2[j] = t2
        T3[j] = t3
        T4[j] = t4
        P[j] = t4
        Q[j] = t3


@nb.njit(inline="always", **_JIT)
def _pair_sums(F, kk, rn, rs, wn, ws, sc, j, col):
    """sc (wn F[north] + ws F[south]) and sc (wn F[north] - ws F[south]) of pair j."""
    vn = 0j
    vs = 0j
    if rn[j] >= 0:
        vn = wn[j] * F[kk, rn[j], col]
    if rs[j] >= 0:
        vs = ws[j] * F[kk, rs[j], col]
    return sc * (vn + vs), sc * (vn - vs)


@nb.njit(parallel=True, fastmath=_FM, **_JIT)
def analysis_kernel(lmax, mlo, seq, x, s, cm, live, F, rn, rs, wn, ws, scale,
                    fl, fm, full, use_full, coef, shift):
    """Add f(l, m) a_lm (see :func:`_fac`) of the rows' Fourier coefficients to coef.

    x, s: (J,) cos and sin of the northern colatitude of each latitude pair,
    ordered from the equator toward the pole.  F: complex (K, rows, nfreq),
    the forward real FFT of the rows; pair j has its northern ring in row
    rn[j] and its southern one in row rs[j] (-1 for a missing ring) with
    quadrature weights wn[j], ws[j].  seq: the orders, mlo and up, in the
    sequence the threads take them (see transform._order_sequence).  Column m
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
        _recursion_coeffs(m, lmax, a, c)
        n = live[mi]
        if n == 0:
            continue
        sc = scale[mi]
        outr = np.zeros((K, lmax + 1))
        outi = np.zeros((K, lmax + 1))
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = _order_start(m, n, x, s, cm[m], shift, P, Q, k)
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
                    if _rescale(P, Q, k, j):
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
                    _advance4_store(l, n, xl, P, Q, a, c, T)
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
                _advance1(l, n, xl, P, Q, a, c)
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
                coef[kk, l, m] += _fac(fl, fm, full, use_full, l, m) * complex(outr[kk, l], im)


@nb.njit(inline="always", fastmath=_FM, **_JIT)
def _syn8(l, n, xl, P, Q, a, c, ar, ai, g):
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


@nb.njit(parallel=True, fastmath=_FM, **_JIT)
def synthesis_kernel(lmax, mlo, seq, x, s, cm, live, coef, fl, fm, full, use_full,
                     X, rn, rs, dm, scale, shift, accumulate):
    """Fourier coefficients of grid rows from a_lm, order by order.

    coef: complex (K, L+1, L+1) indexed [l, m]; times f(l, m) (see
    :func:`_fac`) it is ortho and phase-free.  seq: the orders, mlo and up,
    in the sequence the threads take them (see transform._order_sequence).
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
        _recursion_coeffs(m, lmax, a, c)
        Ar = np.empty((K, lmax + 1))
        Ai = np.empty((K, lmax + 1))
        for kk in range(K):
            for l in range(m, lmax + 1):
                v = _fac(fl, fm, full, use_full, l, m) * coef[kk, l, m]
                Ar[kk, l] = v.real
                Ai[kk, l] = v.imag
        g = np.zeros((K, 4, n))  # even re, even im, odd re, odd im
        P = np.empty(n)
        Q = np.empty(n)
        k = np.empty(n, dtype=np.int64)
        nscaled = _order_start(m, n, x, s, cm[m], shift, P, Q, k)
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
                    if _rescale(P, Q, k, j):
                        nscaled -= 1
                        for kk in range(K):
                            for t in range(4):
                                g[kk, t, j] = 0.0
            if K == 1 and l + 8 <= lmax:
                _syn8(l, n, xl, P, Q, a, c, Ar[0], Ai[0], g[0])
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
                    _advance4_store(l, n, xl, P, Q, a, c, T)
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
                _advance1(l, n, xl, P, Q, a, c)
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


# ---------------------------------------------------------------------------
# Helpers of the drivers
# ---------------------------------------------------------------------------
@nb.njit(parallel=True, **_JIT)
def live_counts(lmax, mlo, mhi, x, s, cm, shift, out):
    """out[m - mlo] = number of latitudes (a prefix, equator first) on which
    order m is not negligible."""
    nm = mhi - mlo + 1
    for i in nb.prange(nm):
        m = _order_of(i, nm, mlo)
        a = np.empty(lmax + 1)
        c = np.empty(lmax + 1)
        _recursion_coeffs(m, lmax, a, c)
        out[m - mlo] = _live_count(m, lmax, x, s, cm[m], shift, a, c)
