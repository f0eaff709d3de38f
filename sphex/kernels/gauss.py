"""Gauss-Legendre nodes and weights: Newton in colatitude, the nodes nearest
the poles polished in double-double arithmetic."""
from __future__ import annotations

import math

import numba as nb
import numpy as np

from sphex.kernels.recursion import JIT

DD_NODES = 128  # Gauss nodes nearest each pole polished in double-double

# ---------------------------------------------------------------------------
# Gauss-Legendre nodes
# ---------------------------------------------------------------------------
@nb.njit(inline="always", **JIT)
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
@nb.njit(inline="always", **JIT)
def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


@nb.njit(inline="always", **JIT)
def _fast_two_sum(a, b):
    s = a + b
    return s, b - (s - a)


@nb.njit(inline="always", **JIT)
def _two_prod(a, b):
    p = a * b
    c = 134217729.0 * a
    ah = c - (c - a)
    al = a - ah
    c = 134217729.0 * b
    bh = c - (c - b)
    bl = b - bh
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


@nb.njit(inline="always", **JIT)
def _dd_times_double(ah, al, b):
    p, e = _two_prod(ah, b)
    return _fast_two_sum(p, e + al * b)


@nb.njit(inline="always", **JIT)
def _dd_sub(ah, al, bh, bl):
    s, e = _two_sum(ah, -bh)
    return _fast_two_sum(s, e + (al - bl))


@nb.njit(inline="always", **JIT)
def _dd_over_double(ah, al, b):
    q = ah / b
    p, e = _two_prod(q, b)
    return _fast_two_sum(q, ((ah - p) - e + al) / b)


@nb.njit(**JIT)
def _legendre_pair_double_double(n, t):
    """(P_n, P_{n-1}, u) at cos(t) in double-double arithmetic, rounded."""
    h = math.sin(0.5 * t)
    u = 2.0 * h * h
    p0h, p0l = 1.0, 0.0
    p1h, p1l = _dd_sub(1.0, 0.0, u, 0.0)
    for j in range(2, n + 1):
        th, tl = _dd_times_double(p1h, p1l, u)
        th, tl = _dd_sub(p1h, p1l, th, tl)
        th, tl = _dd_times_double(th, tl, 2.0 * j - 1.0)
        qh, ql = _dd_times_double(p0h, p0l, j - 1.0)
        th, tl = _dd_sub(th, tl, qh, ql)
        th, tl = _dd_over_double(th, tl, float(j))
        p0h, p0l = p1h, p1l
        p1h, p1l = th, tl
    return p1h + p1l, p0h + p0l, u


@nb.njit(parallel=True, **JIT)
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
                pn, pn1, u = _legendre_pair_double_double(n, t)
                t = t - pn / (n * ((pn - u * pn) - pn1) / math.sin(t))
        # Weight w = 2 / (dP_n/dtheta)^2 with dP_n/dtheta = n (x P_n - P_{n-1}) / sin.
        # This form moves only O(1) relative per unit error of the node, where
        # 2 sin^2 / (n P_{n-1})^2 moves O(n); and P_{n-1} in double-double, because
        # the plain recursion leaves several n ulp (5e-12 relative at n = 5401).
        pn, pn1, u = _legendre_pair_double_double(n, t)
        theta[i] = t
        s = math.sin(t)
        d = (pn - u * pn) - pn1
        weights[i] = 2.0 * s * s / (n * n * d * d)


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


