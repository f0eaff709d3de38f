"""Rotation kernels: the quarter-turn Wigner matrix, generated row by row and used at once.

For each degree ``l`` the rotation of a real field's coefficients is (see
:mod:`sphex.rotation` for the derivation)

    a' = P(alpha) Q(Delta) B(beta) Q(Delta) P(gamma) a,

with diagonal phase factors ``P``, ``B`` and the operator ``Q`` built from the
quarter-turn matrix ``Delta[n, m] = d^l_nm(pi/2)``.  ``Q`` acts on the
orders ``m >= 0`` of a vector ``y`` that has the symmetry of a real field
(``y_{-m} = (-1)^m conj(y_m)``):

    z_j = sum_{i=0..l} c_i Delta[i, j] T_{l+i+j}(y_i),
    c_0 = 1, c_i = 2 (i > 0),  T_even(y) = Re y,  T_odd(y) = i Im y.

Nothing of ``Delta`` is stored.  Its rows ``n = l, l-1, ..., 0`` come from the
three-term recursion in the first index (the commutation ``J_x Delta = Delta
J_z`` written out)

    Delta[n, m] = 2 m p_n Delta[n+1, m] - q_n Delta[n+2, m],
    p_n = 1 / sqrt((l - n)(l + n + 1)),
    q_n = sqrt((l - n - 1)(l + n + 2)) p_n,

started from the closed-form edge row ``Delta[l, m] = (-1)^(l-m) 2^-l
sqrt(binom(2l, l+m))`` (held as the running product of its ratios in m);
only the triangle ``m <= n`` is generated and every value is used twice at
once, for the entry ``(n, m)`` and, through ``Delta[m, n] = (-1)^(n-m)
Delta[n, m]``, for ``(m, n)``.  The recursion runs from the edge of the
matrix, where the values are exponentially small, toward its centre, where
they are O(l^-1/2): the direction in which the wanted solution grows, so it
is stable.  Edge values below ``2^-300`` (they reach ``2^-l``) are carried as
mantissa and power of ``2^600`` per column, as the Legendre recursion does,
and take no part in the sums until they enter plain range.

Vectors indexed by the order are kept in a split layout, even orders first
and odd orders after them, so that every loop over one parity class is
contiguous.  A single field has the making of each row fused with its use;
for a batch each row is made once and then used for every field.  Loops run
over array views from index 0, so that numba can drop its negative-index
checks and LLVM vectorises them.
"""
from __future__ import annotations

import math

import numba as nb
import numpy as np

from sphex.kernels.recursion import BIG, FASTMATH, INV_SCALE, JIT, SCALE_EXP

LIFT = 2.0 ** SCALE_EXP  # lifts a tiny edge value into the scaled range
SMALL = 1.0 / BIG        # edge values below this are carried scaled


@nb.njit(inline="always", **JIT)
def split_index(m, even_count):
    """Position of order m in the split layout (even orders, then odd ones)."""
    if m & 1:
        return even_count + (m >> 1)
    return m >> 1


@nb.njit(inline="always", **JIT)
def edge_row(l, edge0, row, exponent, even_count):
    """Delta[l, m] for m = 0..l into ``row``; returns the first scaled order (l + 1 if none).

    edge0 = Delta[l, 0]; Delta[l, m + 1] = -sqrt((l - m) / (l + m + 1)) Delta[l, m]."""
    v = edge0
    k = 0
    first = l + 1
    for m in range(l + 1):
        i = split_index(m, even_count)
        row[i] = v
        exponent[i] = k
        if k < 0 and first > l:
            first = m
        if m < l:
            v *= -math.sqrt((l - m) / (l + m + 1.0))
            if abs(v) < SMALL:
                v *= LIFT
                k -= 1
    return first


@nb.njit(inline="always", **JIT)
def rescale_row(n, row, upper, exponent, mask, first, even_count):
    """Bring scaled columns that grew past BIG one step toward plain range
    (rows n and n + 1 together).  Returns the new first scaled order among
    0..n (n + 1 if none is left)."""
    new_first = n + 1
    for m in range(first, n + 1):
        i = split_index(m, even_count)
        if exponent[i] < 0:
            if abs(row[i]) > BIG:
                row[i] *= INV_SCALE
                upper[i] *= INV_SCALE
                exponent[i] += 1
                if exponent[i] == 0:
                    mask[i] = 1.0
            if exponent[i] < 0 and new_first > n:
                new_first = m
    return new_first


@nb.njit(inline="always", **JIT)
def row_coefficients(l, n):
    """p_n and q_n of the recursion for row n < l."""
    p = 1.0 / math.sqrt((l - n) * (l + n + 1.0))
    q = math.sqrt((l - n - 1.0) * (l + n + 2.0)) * p
    return p, q


@nb.njit(inline="always", **JIT)
def segment_roles(l, n, yre, yim, zre, zim):
    """Which arrays each parity segment of row n works on.

    Orders m of parity (l + n) mod 2 take the real parts, the others the
    imaginary parts; returns (y, z) of the even segment, then of the odd one,
    and the signs (-1)^(n + parity) of the (m, n) entries of each."""
    sign_even = 1.0 - 2.0 * (n & 1)
    if (l + n) & 1 == 0:
        return yre, zre, yim, zim, sign_even, -sign_even
    return yim, zim, yre, zre, sign_even, -sign_even


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def fused_step(p, q, factor, upper, upper2, new, y, z, yn):
    """new = p factor upper - q upper2 on equal-length views; adds new * yn to z
    and returns the sum of new * y.  Loops start at 0 so that numba can drop
    its negative-index checks and the loop vectorises."""
    s = 0.0
    for k in range(new.size):
        v = p * factor[k] * upper[k] - q * upper2[k]
        new[k] = v
        s += v * y[k]
        z[k] += v * yn
    return s


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def fused_step_masked(p, q, factor, upper, upper2, new, mask, y, z, yn):
    """As :func:`fused_step`, with the values used times ``mask`` (0 for orders
    still in scaled range)."""
    s = 0.0
    for k in range(new.size):
        v = p * factor[k] * upper[k] - q * upper2[k]
        new[k] = v
        w = v * mask[k]
        s += w * y[k]
        z[k] += w * yn
    return s


@nb.njit(inline="always", **JIT)
def segment_one(lo, split, end, has_last, p, q, factor, upper, upper2, new, mask, y, z, yn):
    """One parity segment of row n for a single field, generation and use fused.

    Makes the row's values on indices lo..end (end itself when has_last: the
    order n) from rows n + 1 and n + 2, adds v_m y_n to z_m for every order
    but n and returns the sum of v_m y_m over the segment (order n included:
    its term is the diagonal entry).  Indices from ``split`` on belong to
    orders that may still be in scaled range and are masked."""
    stop = min(split, end)
    s = fused_step(p, q, factor[lo:stop], upper[lo:stop], upper2[lo:stop], new[lo:stop],
                   y[lo:stop], z[lo:stop], yn)
    begin = max(lo, split)
    if begin < end:
        s += fused_step_masked(p, q, factor[begin:end], upper[begin:end], upper2[begin:end],
                               new[begin:end], mask[begin:end], y[begin:end], z[begin:end], yn)
    if has_last:
        v = p * factor[end] * upper[end] - q * upper2[end]
        new[end] = v
        s += v * mask[end] * y[end]
    return s


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def make_values(p, q, factor, upper, upper2, new):
    """new = p factor upper - q upper2 on equal-length views."""
    for k in range(new.size):
        new[k] = p * factor[k] * upper[k] - q * upper2[k]


@nb.njit(inline="always", fastmath=FASTMATH, **JIT)
def use_values(v, y, z, yn):
    """Adds v * yn to z and returns the sum of v * y (equal-length views)."""
    s = 0.0
    for k in range(v.size):
        s += v[k] * y[k]
        z[k] += v[k] * yn
    return s


@nb.njit(inline="always", **JIT)
def make_segment(lo, split, end, has_last, p, q, factor, upper, upper2, new, mask, used):
    """Row n's values on indices lo..end (end itself when has_last) into ``new``;
    from ``split`` on also the values times the mask into ``used``."""
    last = end + 1 if has_last else end
    make_values(p, q, factor[lo:last], upper[lo:last], upper2[lo:last], new[lo:last])
    for k in range(max(lo, split), last):
        used[k] = new[k] * mask[k]


@nb.njit(inline="always", **JIT)
def use_segment(lo, split, end, has_last, new, used, y, z, yn):
    """As :func:`segment_one` for a row already made (one field's contiguous y, z)."""
    stop = min(split, end)
    s = use_values(new[lo:stop], y[lo:stop], z[lo:stop], yn)
    begin = max(lo, split)
    if begin < end:
        s += use_values(used[begin:end], y[begin:end], z[begin:end], yn)
    if has_last:
        s += (new[end] if end < split else used[end]) * y[end]
    return s


@nb.njit(inline="always", **JIT)
def segment_bounds(n, first, even_count):
    """Index bounds of the two parity segments of row n.

    Returns (end_even, split_even, end_odd, split_odd, n_even): each segment
    runs to its end (exclusive, the order n excluded), and orders from the
    split on may be scaled."""
    ne = n // 2 + 1
    no = (n + 1) // 2
    n_even = (n & 1) == 0
    end_e = ne - 1 if n_even else ne
    end_o = even_count + no if n_even else even_count + no - 1
    split_e = min(ne, (first + 1) // 2)
    split_o = even_count + min(no, first // 2)
    return end_e, split_e, end_o, split_o, n_even


@nb.njit(inline="always", **JIT)
def start_rows(l, edge0, upper, upper2, exponent, mask, even_count):
    """Set up the recursion so that its first step (p = 1, q = 0, the factor
    array all ones) reproduces the edge row: the edge row goes into
    ``upper``.  Returns the first scaled order."""
    first = edge_row(l, edge0, upper, exponent, even_count)
    for i in range(l + 1):
        mask[i] = 1.0 if exponent[i] == 0 else 0.0
        upper2[i] = 0.0
    return first


@nb.njit(inline="always", **JIT)
def step_coefficients(l, n, twice_m, ones):
    """p_n, q_n and the factor array of the step that makes row n (the edge
    row n = l is copied: p = 1, q = 0, factors one)."""
    if n == l:
        return 1.0, 0.0, ones
    p, q = row_coefficients(l, n)
    return p, q, twice_m


@nb.njit(fastmath=FASTMATH, **JIT)
def quarter_turn_one(l, edge0, twice_m, yre, yim, zre, zim):
    """z = Q(y) for one degree of a single field; y, z: (l + 1,) in the split layout.

    Rows n = l..0 of Delta are made by the recursion and used at once:
    entry (n, m) adds Delta[n, m] T(y_n) to z_m (m <= n), entry (m, n) adds
    (-1)^(n+m) Delta[n, m] T(y_m) to z_n (m < n)."""
    n1 = l + 1
    E = l // 2 + 1
    upper = np.empty(n1)
    upper2 = np.empty(n1)
    new = np.empty(n1)
    mask = np.empty(n1)
    ones = np.ones(n1)
    exponent = np.zeros(n1, dtype=np.int64)
    zre[:] = 0.0
    zim[:] = 0.0
    first = start_rows(l, edge0, upper, upper2, exponent, mask, E)
    for n in range(l, -1, -1):
        p, q, factor = step_coefficients(l, n, twice_m, ones)
        ye, ze, yo, zo, sign_e, sign_o = segment_roles(l, n, yre, yim, zre, zim)
        end_e, split_e, end_o, split_o, n_even = segment_bounds(n, first, E)
        ni = split_index(n, E)
        se = segment_one(0, split_e, end_e, n_even, p, q, factor, upper, upper2, new,
                         mask, ye, ze, ye[ni])
        so = segment_one(E, split_o, end_o, not n_even, p, q, factor, upper, upper2,
                         new, mask, yo, zo, yo[ni])
        ze[ni] += sign_e * se
        zo[ni] += sign_o * so
        upper2, upper, new = upper, new, upper2
        if first <= n and (n & 7 == 0 or n == l):
            first = rescale_row(n, upper, upper2, exponent, mask, first, E)


@nb.njit(fastmath=FASTMATH, **JIT)
def quarter_turn_many(l, edge0, twice_m, yre, yim, zre, zim):
    """As :func:`quarter_turn_one` for K fields; y, z: (K, l + 1).  Each row is
    made once and then used for every field."""
    n1 = l + 1
    K = yre.shape[0]
    E = l // 2 + 1
    upper = np.empty(n1)
    upper2 = np.empty(n1)
    new = np.empty(n1)
    used = np.empty(n1)
    mask = np.empty(n1)
    ones = np.ones(n1)
    exponent = np.zeros(n1, dtype=np.int64)
    zre[:, :] = 0.0
    zim[:, :] = 0.0
    first = start_rows(l, edge0, upper, upper2, exponent, mask, E)
    for n in range(l, -1, -1):
        p, q, factor = step_coefficients(l, n, twice_m, ones)
        ye, ze, yo, zo, sign_e, sign_o = segment_roles(l, n, yre, yim, zre, zim)
        end_e, split_e, end_o, split_o, n_even = segment_bounds(n, first, E)
        ni = split_index(n, E)
        make_segment(0, split_e, end_e, n_even, p, q, factor, upper, upper2, new, mask, used)
        make_segment(E, split_o, end_o, not n_even, p, q, factor, upper, upper2, new, mask, used)
        for f in range(K):
            se = use_segment(0, split_e, end_e, n_even, new, used, ye[f], ze[f], ye[f, ni])
            so = use_segment(E, split_o, end_o, not n_even, new, used, yo[f], zo[f], yo[f, ni])
            ze[f, ni] += sign_e * se
            zo[f, ni] += sign_o * so
        upper2, upper, new = upper, new, upper2
        if first <= n and (n & 7 == 0 or n == l):
            first = rescale_row(n, upper, upper2, exponent, mask, first, E)


@nb.njit(inline="always", **JIT)
def load_with_phase(src, l, phase, yre, yim, even_count):
    """y_m = c_m phase_m src_m into the split layout (src: complex (K, >= l + 1);
    yre, yim: (K, l + 1)); y_0 is real."""
    for f in range(src.shape[0]):
        for m in range(l + 1):
            v = src[f, m] * phase[m]
            i = split_index(m, even_count)
            if m == 0:
                yre[f, i] = v.real
                yim[f, i] = 0.0
            else:
                yre[f, i] = 2.0 * v.real
                yim[f, i] = 2.0 * v.imag


@nb.njit(inline="always", **JIT)
def gather(zre, zim, l, phase, dst, even_count):
    """dst_m = phase_m (zre_m + i zim_m) out of the split layout; order 0 kept real."""
    for f in range(dst.shape[0]):
        for m in range(l + 1):
            i = split_index(m, even_count)
            v = complex(zre[f, i], zim[f, i]) * phase[m]
            if m == 0:
                dst[f, m] = v.real
            else:
                dst[f, m] = v


@nb.njit(inline="always", **JIT)
def quarter_turn(l, edge0, twice_m, yre, yim, zre, zim):
    """z = Q(y) for y, z of shape (K, l + 1): the fused single-field kernel when K = 1."""
    if yre.shape[0] == 1:
        quarter_turn_one(l, edge0, twice_m, yre[0], yim[0], zre[0], zim[0])
    else:
        quarter_turn_many(l, edge0, twice_m, yre, yim, zre, zim)


@nb.njit(parallel=True, **JIT)
def rotate_degrees(coef, out, seq, edge0, first_phase, middle_phase, last_phase):
    """Rotate the degrees listed in ``seq`` of coef (K, L+1, L+1) into out.

    Per degree: y = c P(gamma) a, z = Q(y), w = B(beta) z, z = Q(c w),
    a' = P(alpha) z, with the phase arrays first_phase, middle_phase and
    last_phase indexed by the order (see :mod:`sphex.rotation`).  Degrees are
    independent; ``seq`` lists them in the order the threads take them."""
    K = coef.shape[0]
    for s in nb.prange(seq.size):
        l = seq[s]
        n1 = l + 1
        even_count = l // 2 + 1
        twice_m = np.empty(n1)
        for m in range(n1):
            twice_m[split_index(m, even_count)] = 2.0 * m
        yre = np.empty((K, n1))
        yim = np.empty((K, n1))
        zre = np.empty((K, n1))
        zim = np.empty((K, n1))
        middle = np.empty((K, n1), dtype=np.complex128)
        load_with_phase(coef[:, l, :], l, first_phase, yre, yim, even_count)
        quarter_turn(l, edge0[l], twice_m, yre, yim, zre, zim)
        gather(zre, zim, l, middle_phase, middle, even_count)
        load_with_phase(middle, l, np.ones(n1, dtype=np.complex128), yre, yim, even_count)
        quarter_turn(l, edge0[l], twice_m, yre, yim, zre, zim)
        gather(zre, zim, l, last_phase, out[:, l, :], even_count)


@nb.njit(**JIT)
def quarter_turn_triangle(l, edge0, out):
    """Delta[n, m] = d^l_nm(pi/2) for 0 <= m <= n <= l into out (l+1, l+1), by the
    same recursion as :func:`quarter_turn_one`; values still in scaled range
    (below 2^-300 of the largest) are written as zero."""
    n1 = l + 1
    E = l // 2 + 1
    upper = np.zeros(n1)
    upper2 = np.zeros(n1)
    new = np.empty(n1)
    mask = np.ones(n1)
    exponent = np.zeros(n1, dtype=np.int64)
    first = edge_row(l, edge0, new, exponent, E)
    for n in range(l, -1, -1):
        if n < l:
            p = 1.0 / math.sqrt((l - n) * (l + n + 1.0))
            q = math.sqrt((l - n - 1.0) * (l + n + 2.0)) * p
            for m in range(n + 1):
                i = split_index(m, E)
                new[i] = p * 2.0 * m * upper[i] - q * upper2[i]
        upper2, upper, new = upper, new, upper2
        if first <= n and (n & 7 == 0 or n == l):
            first = rescale_row(n, upper, upper2, exponent, mask, first, E)
        for m in range(n + 1):
            i = split_index(m, E)
            out[n, m] = upper[i] if exponent[i] == 0 else 0.0
