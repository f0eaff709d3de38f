"""The fully normalised three-term recursion, shared by every kernel.

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

import numba as nb
import numpy as np

JIT = dict(nogil=True, cache=True)
#: helpers only called from other kernels: no wrappers for Python or C callers
INNER = dict(JIT, no_cpython_wrapper=True, no_cfunc_wrapper=True, error_model="numpy")
FASTMATH = {"contract", "reassoc", "nsz", "arcp"}
#: the kernels Python calls: serial, one chunk of orders per thread (:func:`sphex.rings.run_chunks`)
SERIAL = dict(JIT, error_model="numpy")

SCALE_EXP = 600
BIG = 2.0 ** 300
INV_SCALE = 2.0 ** -SCALE_EXP
PLAIN_MIN_EXP = -330
TINY_EXP = 500
TINY = 2.0 ** -TINY_EXP
UNTINY = 2.0 ** TINY_EXP
CHECK_EVERY = 16  # degrees between range checks of scaled latitudes


@nb.njit(inline="always", **JIT)
def pair_sums(F, kk, rn, rs, wn, ws, sc, j, col):
    """sc (wn F[north] + ws F[south]) and sc (wn F[north] - ws F[south]) of latitude pair j:
    the sums that meet the even and the odd degrees of column col of field kk."""
    vn = 0j
    vs = 0j
    if rn[j] >= 0:
        vn = wn[j] * F[kk, rn[j], col]
    if rs[j] >= 0:
        vs = ws[j] * F[kk, rs[j], col]
    return sc * (vn + vs), sc * (vn - vs)


# ---------------------------------------------------------------------------
# Recursion pieces
# ---------------------------------------------------------------------------
@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def recursion_coeffs(m, lmax, a, c):
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


@nb.njit(inline="always", **JIT)
def sin_power(s, m):
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


@nb.njit(inline="always", **JIT)
def start_value(cm, m, s, shift):
    """c_m sin^(m - shift) as (mantissa, k): value = mantissa * 2^(600 k)."""
    if m - shift == 0:
        return cm, 0
    if s == 0.0:
        return 0.0, 0
    r, e = sin_power(s, m - shift)
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
@nb.njit(parallel=True, **JIT)
def legendre_order(m, lmax, x, s, cm, out, dout, want_deriv):
    """Fully normalised Lambda_lm (no phase) for l = m..lmax at points (x, s).

    out[l - m, j]; with want_deriv also d/dtheta into dout (coupled recursion
    obtained by differentiating the three-term recursion).
    """
    n = x.size
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    recursion_coeffs(m, lmax, a, c)
    for j in nb.prange(n):
        xj = x[j]
        sj = s[j]
        # base q = c_m sin^(m-1): P_mm = s q, dP_mm = m x q
        if m == 0:
            p1 = cm
            d1 = 0.0
            k = 0
        else:
            q, k = start_value(cm, m, sj, 1)
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
@nb.njit(inline="always", **JIT)
def convention_factor(fl, fm, full, use_full, l, m):
    """Convention factor f(l, m): full[l, m] when use_full, else fl[l] * fm[m]."""
    if use_full:
        return full[l, m]
    return fl[l] * fm[m]


@nb.njit(inline="always", **JIT)
def scaled_phase(m, lmax, xj, sj, cmm, shift, a, c):
    """Run one latitude through the scaled range.

    Returns (l, v0, v1): the first degree l at which the value is in plain
    range, with v1 = P_l and v0 = P_{l-1}; l = lmax + 1 when it never gets
    there (the latitude is negligible for this order)."""
    q, k = start_value(cmm, m, sj, shift)
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


@nb.njit(**JIT)
def live_count(m, lmax, x, s, cmm, shift, a, c):
    """Number of latitudes (equator first) on which order m is not negligible.

    Latitude j is live when its values enter plain double range by lmax; the
    live ones form a prefix (the functions shrink monotonically toward the pole
    where they are negligible), found by bisection."""
    J = x.size
    if J == 0:
        return 0
    l, _, _ = scaled_phase(m, lmax, x[J - 1], s[J - 1], cmm, shift, a, c)
    if l <= lmax:
        return J
    lo = 0  # invariant: lanes < lo live, lane hi dead
    hi = J - 1
    while lo < hi:
        mid = (lo + hi) // 2
        l, _, _ = scaled_phase(m, lmax, x[mid], s[mid], cmm, shift, a, c)
        if l <= lmax:
            lo = mid + 1
        else:
            hi = mid
    return lo


@nb.njit(inline="always", **JIT)
def order_start(m, n, x, s, cmm, shift, P, Q, k):
    """Start values P = P_mm (scaled), Q = 0; returns how many lanes are scaled."""
    nscaled = 0
    for j in range(n):
        q, kk = start_value(cmm, m, s[j], shift)
        P[j] = q
        Q[j] = 0.0
        k[j] = kk
        if kk < 0:
            nscaled += 1
    return nscaled


@nb.njit(inline="always", **JIT)
def rescale_lane(P, Q, k, j):
    """Rescale lane j if it grew past BIG; True when it just became plain."""
    if k[j] < 0 and abs(P[j]) > BIG:
        P[j] *= INV_SCALE
        Q[j] *= INV_SCALE
        k[j] += 1
        return k[j] == 0
    return False


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def advance1(l, n, xl, P, Q, a, c):
    """One recursion step to degree l on the first n latitudes (P = P_l, Q = P_{l-1})."""
    al = a[l]
    cl = c[l]
    for j in range(n):
        t = al * xl[j] * P[j] - cl * Q[j]
        Q[j] = P[j]
        P[j] = t


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def advance4_store(l, n, xl, P, Q, a, c, T):
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


# ---------------------------------------------------------------------------
# Helpers of the drivers
# ---------------------------------------------------------------------------
@nb.njit(**JIT)
def live_counts(lmax, orders, mlo, x, s, cm, shift, out):
    """out[m - mlo] = number of latitudes (a prefix, equator first) on which
    order m is not negligible, for the orders given (serial; the caller runs
    chunks of orders on several threads)."""
    a = np.empty(lmax + 1)
    c = np.empty(lmax + 1)
    for m in orders:
        recursion_coeffs(m, lmax, a, c)
        out[m - mlo] = live_count(m, lmax, x, s, cm[m], shift, a, c)
