"""Planted bugs, one at a time: do the tests notice?

Each entry of ``MUTATIONS`` is a plausible mistake in the numeric core: a
snippet of a source file (it must occur there exactly once) and what a careless
edit would turn it into, with the few tests that should notice.  The run
applies one mutation, checks that the file still compiles, runs those tests
with pytest in a subprocess, restores the file byte for byte (also on Ctrl-C
or a timeout) and prints a table: caught (by which test), missed, or
equivalent.  A mutation marked ``equivalent="..."`` changes no result the
tests can see; the text says what was measured.  A missed mutation means a
missing test: add one that fails on the planted bug, or, when the change
really is harmless, mark it equivalent with the measured reason.

The list below covers the first modules; each later area keeps its own list in
``tests/mutations_<area>.py`` (a ``MUTATIONS`` list built with ``_mutation._m``),
which this script picks up by name.

Run it from the repository root (it takes tens of minutes; not part of CI)::

    python tests/mutations.py              # every mutation, then the table
    python tests/mutations.py --list       # the mutations and their tests
    python tests/mutations.py --only gauss # those whose name contains "gauss"

numba's on-disk cache keys each compiled kernel on its own module's source
file, so an edit to ``sphex/kernels/recursion.py`` would not reach the cached
kernels of ``sphex/kernels/scalar.py`` that inlined it.  A mutation of a file
under ``sphex/kernels/`` therefore runs with ``NUMBA_CACHE_DIR`` set to a new
empty directory (removed afterwards), so every kernel is compiled from the
mutated source and the cache of the unmutated code in ``__pycache__`` is not
touched; the run checks both (file restored byte for byte, cache files
unchanged).  Python's own bytecode cache is switched off in the test runs
(PYTHONDONTWRITEBYTECODE) for the same reason.
"""
from __future__ import annotations

import argparse
import hashlib
import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import importlib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
KERNELS = "sphex/kernels/"


from _mutation import Mutation, _m  # noqa: E402  (tests/ is on sys.path when run)


GRIDS = "sphex/grids.py"
LEG = "sphex/legendre.py"
HARM = "sphex/harmonics.py"
TRANS = "sphex/transform.py"
RINGS = "sphex/rings.py"
SPEC = "sphex/spectra.py"
FILT = "sphex/filters.py"
REC = "sphex/kernels/recursion.py"
GAUSS = "sphex/kernels/gauss.py"
SCAL = "sphex/kernels/scalar.py"
XR_FIELDS = "sphex/xr/fields.py"

T_GRIDS = "tests/test_grids.py"
T_LEG = "tests/test_legendre.py"
T_HARM = "tests/test_harmonics.py"
T_TRANS = "tests/test_transform.py"
T_SPEC = "tests/test_spectra.py"
T_FILT = "tests/test_filters.py"
T_CLOSED = "tests/test_weights_closed_forms.py"
T_XR_FIELDS = "tests/test_xr_fields.py"

MUTATIONS: list[Mutation] = [
    # ---------------------------------------------------------------- grids
    _m("grids-gauss-limit-off-by-one", GRIDS,
       "lat_limit = nlat - 1", "lat_limit = nlat", T_GRIDS),
    _m("grids-equiangular-limit-off-by-one", GRIDS,
       "lat_limit = (nlat - 1) // 2", "lat_limit = nlat // 2", T_GRIDS),
    _m("grids-longitude-limit", GRIDS,
       "(int(nlon) - 1) // 2)", "int(nlon) // 2)", T_GRIDS),
    _m("grids-rows-stored-south-first", GRIDS,
       "fields.update(colat=colat, lat=90.0 - np.degrees(colat))",
       "fields.update(colat=colat, lat=np.degrees(colat) - 90.0)", T_GRIDS),
    _m("grids-weights-not-flipped-with-rows", GRIDS,
       "            if not self.north_first:\n                weights = weights[::-1].copy()\n            weights.setflags",
       "            weights.setflags",
       T_GRIDS),
    _m("grids-longitudes-spaced-as-with-endpoint", GRIDS,
       "360.0 * np.arange(int(nlon)) / int(nlon)", "360.0 * np.arange(int(nlon)) / (int(nlon) - 1)",
       T_GRIDS),
    _m("grids-fejer-moment-sign", GRIDS,
       "x[2 * k] = -1.0 / (4.0 * k * k - 1.0)\n        weights = (2.0 / n)",
       "x[2 * k] = 1.0 / (4.0 * k * k - 1.0)\n        weights = (2.0 / n)", T_GRIDS),
    _m("grids-clenshaw-curtis-end-weights", GRIDS,
       "c[0] = c[N] = 1.0", "c[0] = 1.0", T_GRIDS),
    _m("grids-north-layout-parity", GRIDS,
       "(-1.0) ** (n + j)", "(-1.0) ** j", T_GRIDS),
    _m("grids-north-layout-first-node", GRIDS,
       "c[0] = 0.5", "c[0] = 1.0", T_GRIDS),
    # ------------------------------------------------------------- legendre
    _m("legendre-phase-on-even-orders", LEG,
       "m % 2 == 1) else 1.0", "m % 2 == 0) else 1.0", T_LEG),
    _m("legendre-full-norm-without-sqrt", LEG,
       "np.full(l.size, np.sqrt(4 * np.pi))", "np.full(l.size, 4 * np.pi)", T_LEG),
    _m("legendre-schmidt-parenthesis", LEG,
       "return np.sqrt(4 * np.pi / (2 * l + 1))", "return np.sqrt(4 * np.pi) / (2 * l + 1)", T_LEG),
    _m("legendre-unnormalized-factorials-swapped", LEG,
       "gammaln(l - m + 1) - gammaln(l + m + 1)", "gammaln(l + m + 1) - gammaln(l - m + 1)", T_LEG),
    _m("legendre-sectoral-start-ratio", LEG,
       "ratio = (2 * k + 1) / (2 * k)", "ratio = (2 * k - 1) / (2 * k)", T_LEG),
    _m("legendre-all-orders-drops-phase-choice", LEG,
       "out[m:, m, :] = for_order(m, lmax, colat, norm, condon_shortley)",
       "out[m:, m, :] = for_order(m, lmax, colat, norm)", T_LEG),
    _m("legendre-retired-norm-not-refused", LEG,
       "_RETIRED_NORMS = {'4pi': 'full'}", "_RETIRED_NORMS = {}", T_LEG),
    _m("legendre-unnormalized-overflow-unchecked", LEG,
       'if norm == "unnormalized" and not np.all(np.isfinite(scale)):',
       "if False:", T_LEG),
    # ------------------------------------------------------------ harmonics
    _m("harmonics-real-form-factor-2", HARM,
       'else np.sqrt(2.0))', 'else 2.0)', T_HARM),
    _m("harmonics-real-form-sqrt2-also-unnormalized", HARM,
       '1.0 if norm == "unnormalized" else np.sqrt(2.0)', "np.sqrt(2.0)", T_HARM),
    _m("harmonics-sine-coefficient-sign", HARM,
       "S = np.negative(self.coef.imag, out=S)", "S = np.positive(self.coef.imag, out=S)",
       T_HARM),
    _m("harmonics-from-cos-sin-sign", HARM,
       "coef = (C - 1j * S) * scale", "coef = (C + 1j * S) * scale", T_HARM),
    _m("harmonics-phase-change-on-even-orders", HARM,
       "g[:, 1::2] *= -1.0", "g[:, ::2] *= -1.0", T_HARM),
    _m("harmonics-conversion-inverted", HARM,
       "g = norm_scale(lmax, norm_from) / norm_scale(lmax, norm_to)",
       "g = norm_scale(lmax, norm_to) / norm_scale(lmax, norm_from)", T_HARM),
    _m("harmonics-negative-order-ignores-phase", HARM,
       "sign = -1.0 if (self.condon_shortley and m % 2) else 1.0",
       "sign = -1.0 if m % 2 else 1.0", T_HARM),
    _m("harmonics-filter-weights-by-order", HARM,
       "self.coef * w[..., :, None]", "self.coef * w[..., None, :]", T_HARM),
    _m("harmonics-truncate-off-by-one", HARM,
       "n = min(lmax, self.lmax) + 1", "n = min(lmax, self.lmax)", T_HARM),
    _m("harmonics-negative-order-not-conjugated", HARM,
       "value = sign * np.conj(value)", "value = sign * value", T_HARM),
    _m("harmonics-order-zero-check-reads-degree-zero", HARM,
       "im = np.abs(coef[..., :, 0].imag)", "im = np.abs(coef[..., 0, :].imag)", T_HARM),
    _m("harmonics-unnormalized-overflow-unchecked", HARM,
       "if not np.all(np.isfinite(g[tri])) or np.any(g[tri] == 0):\n            raise ValueError(f\"converting",
       "if False:\n            raise ValueError(f\"converting", T_HARM),
    # ------------------------------------------------------------ transform
    _m("transform-nyquist-order-taken-directly", TRANS,
       "direct = M_out - 1 < (N + 1) // 2", "direct = M_out - 1 <= N // 2", T_TRANS),
    _m("transform-analysis-phase-not-conjugated", TRANS,
       "np.conj(longitude_phase(M, grid))", "longitude_phase(M, grid)", T_TRANS),
    _m("transform-analysis-pi-for-2pi", TRANS,
       "scale = (2 * np.pi / grid.nlon)", "scale = (np.pi / grid.nlon)", T_TRANS),
    _m("transform-longitude-origin-sign", RINGS,
       "np.exp(1j * np.arange(m_count)", "np.exp(-1j * np.arange(m_count)", T_TRANS),
    _m("transform-equator-ring-counted-twice", RINGS,
       "self.wn = np.where(same, self.wn / 2, self.wn)", "self.wn = np.where(same, self.wn, self.wn)",
       T_TRANS),
    _m("transform-folded-orders-not-conjugated", RINGS,
       "np.conj(X[..., 1:])", "X[..., 1:]", T_TRANS),
    _m("transform-convention-factor-inverted", RINGS,
       "self.fl = norm_column(lmax, 0, norm_from) / norm_column(lmax, 0, norm_to)",
       "self.fl = norm_column(lmax, 0, norm_to) / norm_column(lmax, 0, norm_from)", T_TRANS),
    _m("transform-phase-sign-on-even-orders", RINGS,
       "self.fm[1::2] = -1.0", "self.fm[::2] = -1.0", T_TRANS),
    _m("transform-gradient-order-zero-halved", TRANS,
       "dn[:, 0] = np.sqrt(l[:, 0] * (l[:, 0] + 1))", "dn[:, 0] = 0.5 * np.sqrt(l[:, 0] * (l[:, 0] + 1))",
       T_TRANS),
    _m("transform-gradient-north-sign", TRANS,
       "north = np.negative(out[0], out=out[0])\n    east = out[1]", "north = out[0]\n    east = out[1]",
       T_TRANS),
    _m("transform-gradient-raising-weight", TRANS,
       "(l + m) * (l - m + 1), 0.0)", "(l + m) * (l - m), 0.0)", T_TRANS),
    _m("transform-gradient-east-without-i", TRANS,
       "1j * np.arange(1, L1), 1)", "np.arange(1, L1), 1)", T_TRANS),
    _m("transform-exact-limit-off-by-one", RINGS,
       "if lmax > grid.lmax_exact and not allow_aliasing:", "if lmax > grid.lmax_exact + 1 and not allow_aliasing:",
       T_TRANS),
    # ------------------------------------------------------------- spectra
    _m("spectra-orders-counted-once", SPEC,
       "prod[..., :, 0] + 2.0 * prod[..., :, 1:].sum(axis=-1)) / _FOUR_PI",
       "prod[..., :, 0] + prod[..., :, 1:].sum(axis=-1)) / _FOUR_PI", T_SPEC),
    _m("spectra-no-four-pi", SPEC,
       "prod[..., :, 1:].sum(axis=-1)) / _FOUR_PI", "prod[..., :, 1:].sum(axis=-1))", T_SPEC),
    _m("spectra-shortcut-ignores-phase", SPEC,
       'if h.norm == "orthonormal" and h.condon_shortley:', 'if h.norm == "orthonormal":', T_SPEC),
    _m("spectra-cross-power-without-conjugate", SPEC,
       "x = _degree_sum((b1 * np.conj(b2)).real)", "x = _degree_sum((b1 * b2).real)", T_SPEC),
    _m("spectra-per-coefficient-count", SPEC,
       "p / (2.0 * np.arange(p.shape[-1]) + 1.0)", "p / (np.arange(p.shape[-1]) + 1.0)", T_SPEC),
    _m("spectra-cumulative-over-batch-axis", SPEC,
       "np.cumsum(degree_power(h), axis=-1)", "np.cumsum(degree_power(h), axis=0)", T_SPEC),
    _m("spectra-correlation-without-sqrt", SPEC,
       "den = np.sqrt(p1 * p2)", "den = p1 * p2", T_SPEC),
    _m("spectra-common-degrees-use-the-larger", SPEC,
       "lmax = min(h1.lmax, h2.lmax)", "lmax = max(h1.lmax, h2.lmax)", T_SPEC),
    _m("spectra-slope-intercept-sign", SPEC,
       "intercept = y.mean(axis=-1) - slope * xm", "intercept = y.mean(axis=-1) + slope * xm", T_SPEC),
    # ------------------------------------------------------------- filters
    _m("filters-gaussian-half-angle-factor", FILT,
       "one_minus_cos = 2.0 * math.sin(0.5 * angle) ** 2", "one_minus_cos = math.sin(0.5 * angle) ** 2",
       T_FILT),
    _m("filters-gaussian-bessel-order", FILT,
       "special.ive(l + 0.5, b) / special.ive(0.5, b)", "special.ive(l + 0.5, b) / special.ive(1.5, b)",
       T_FILT),
    _m("filters-gaussian-forward-start", FILT,
       "w[1] = 1.0 / math.tanh(b) - 1.0 / b", "w[1] = 1.0 / math.tanh(b) + 1.0 / b", T_FILT),
    _m("filters-cap-diameter-for-radius", FILT,
       "psi0 = math.radians(rd)", "psi0 = math.radians(rd / 2)", T_FILT),
    _m("filters-cap-recursion", FILT,
       "g_next = (l * g - (2 * l + 1) * u * p) / (l + 1)", "g_next = (l * g - (2 * l - 1) * u * p) / (l + 1)",
       T_FILT),
    _m("filters-taper-width", FILT,
       "t = np.clip((l - l1) / (l2 - l1), 0.0, 1.0)", "t = np.clip((l - l1) / (l2 - l1 + 1), 0.0, 1.0)",
       T_FILT),
    _m("filters-band-pass-flank", FILT,
       "(1.0 - taper(l1, l2, lmax)) * taper(l3, l4, lmax)", "(1.0 - taper(l1, l2, lmax)) * taper(l2, l4, lmax)",
       T_FILT),
    _m("filters-laplacian-eigenvalue", FILT,
       "factor = -l * (l + 1.0)", "factor = -l * l", T_FILT),
    _m("filters-laplacian-radius-power", FILT,
       "factor / h.radius**2, units=", "factor / h.radius, units=", T_FILT),
    _m("filters-inverse-laplacian-radius", FILT,
       "factor * h.radius**2, units=", "factor / h.radius**2, units=", T_FILT),
    _m("filters-continuation-exponent", FILT,
       "np.exp((l + 1.0) * math.log(ratio))", "np.exp(l * math.log(ratio))", T_FILT),
    _m("filters-continuation-ratio-inverted", FILT,
       "ratio = (h.radius / r) if", "ratio = (r / h.radius) if", T_FILT),
    _m("filters-gradient-east-not-scaled", FILT,
       "        east = east / h.radius\n", "", T_FILT),
    _m("filters-per-degree-not-cut", FILT,
       "        w = w[: lmax + 1]\n", "", T_FILT),
    _m("filters-zonal-weights-not-normalised", FILT,
       "        lam /= lam[0]\n", "", T_FILT),
    _m("filters-continuation-overflow-unchecked", FILT,
       "    if not np.all(np.isfinite(factor)):\n        raise ValueError(\n            f\"downward",
       "    if False:\n        raise ValueError(\n            f\"downward", T_FILT),
    _m("filters-zonal-weights-pi-for-2pi", FILT,
       "lam *= 2.0 * np.pi", "lam *= np.pi", T_FILT),
    _m("filters-zonal-legendre-recursion", FILT,
       "((2 * l + 1) * x * p - l * p_prev) / (l + 1)", "((2 * l - 1) * x * p - l * p_prev) / (l + 1)",
       T_FILT),
    # ---------------------------------------------------- kernels: recursion
    _m("recursion-a-coefficient", REC,
       "(4.0 * lf * lf - 1.0)", "(4.0 * lf * lf + 1.0)", T_LEG),
    _m("recursion-c-coefficient-inverted", REC,
       "c[l] = a[l] / a[l - 1]", "c[l] = a[l - 1] / a[l]", T_LEG),
    _m("recursion-start-ignores-shift", REC,
       "if m - shift == 0:\n        return cm, 0", "if m == 0:\n        return cm, 0", T_FILT),
    _m("recursion-start-scaled-once", REC,
       "while e < PLAIN_MIN_EXP:", "if e < PLAIN_MIN_EXP:", T_LEG),
    _m("recursion-sin-power-renormalisation-sign", REC,
       "                r *= UNTINY\n                er -= TINY_EXP",
       "                r *= UNTINY\n                er += TINY_EXP", T_LEG),
    _m("recursion-rescale-forgets-previous-degree", REC,
       "                    p0 *= INV_SCALE\n", "", T_LEG),
    _m("recursion-derivative-sign", REC,
       "d2 = a[l] * (xj * d1 - sj * p1) - c[l] * d0", "d2 = a[l] * (xj * d1 + sj * p1) - c[l] * d0", T_LEG),
    _m("recursion-derivative-start", REC,
       "d1 = m * xj * q", "d1 = xj * q", T_LEG),
    _m("recursion-lane-rescale-forgets-previous-degree", REC,
       "        Q[j] *= INV_SCALE\n", "", T_TRANS),
    _m("recursion-convention-factor-drops-phase", REC,
       "return fl[l] * fm[m]", "return fl[l]", T_TRANS),
    _m("recursion-batch-step-keeps-wrong-degree", REC,
       "        P[j] = t4\n        Q[j] = t3\n", "        P[j] = t4\n        Q[j] = t2\n", T_TRANS),
    _m("recursion-live-bisection-inverted", REC,
       "        if l <= lmax:\n            lo = mid + 1", "        if l > lmax:\n            lo = mid + 1", T_TRANS),
    _m("recursion-live-test-at-equator", REC,
       "scaled_phase(m, lmax, x[J - 1], s[J - 1],", "scaled_phase(m, lmax, x[0], s[0],", T_TRANS,
       equivalent="only speed: every latitude is taken as live and the kernels mask lanes still in "
                  "scaled range out of the sums; measured: syntheses identical, analyses within 1.7e-16 "
                  "relative (summation order) at lmax 1023, 511 (batch of 3) and 255 (north layout)"),
    _m("recursion-range-check-every-64-degrees", REC,
       "CHECK_EVERY = 16", "CHECK_EVERY = 64", T_TRANS,
       equivalent="a lane that turns plain joins the sums up to 48 degrees later, while its values are "
                  "still below 2^-300 x 2^48 of the order's; measured: fields, coefficients and gradients "
                  "identical at lmax 1023, 511 (batch of 3), 255 (north layout) and 100 (gradient)"),
    # -------------------------------------------------------- kernels: gauss
    _m("gauss-weight-without-sin-squared", GAUSS,
       "weights[i] = 2.0 * s * s / (n * n * d * d)", "weights[i] = 2.0 / (n * n * d * d)", T_GRIDS),
    _m("gauss-weight-from-plain-doubles", GAUSS,
       "        pn, pn1, u = _legendre_pair_double_double(n, t)\n        theta[i] = t",
       "        pn, pn1, u = _legendre_pair(n, t)\n        theta[i] = t", T_GRIDS),
    _m("gauss-polar-nodes-not-polished", GAUSS,
       "DD_NODES = 128", "DD_NODES = 0", T_GRIDS),
    _m("gauss-newton-tolerance-loose", GAUSS,
       "if abs(dt) <= 1e-13 * t:", "if abs(dt) <= 1e-6 * t:", T_GRIDS,
       equivalent="Newton converges quadratically from Tricomi's estimate: the step that passes the "
                  "loose test already lands on the double nearest the root, and the steps the tight "
                  "test adds change nothing; measured: nodes and weights identical for n = 2 to 10801"),
    _m("gauss-southern-weights-not-mirrored", GAUSS,
       "weights[n - half:] = w[::-1]", "weights[n - half:] = w", T_GRIDS),
    # ------------------------------------------------------- kernels: scalar
    _m("scalar-scaled-lanes-not-masked", SCAL,
       "on = 1.0 if k[j] == 0 else 0.0", "on = 1.0", T_TRANS),
    _m("recursion-pair-sums-swapped", REC,
       "return sc * (vn + vs), sc * (vn - vs)", "return sc * (vn - vs), sc * (vn + vs)", T_TRANS),
    _m("scalar-analysis-step-parity-typo", SCAL,
       "s4r += t4 * e_r", "s4r += t4 * o_r", T_TRANS),
    _m("scalar-batch-analysis-parity-typo", SCAL,
       "s1r += T1[j] * o_r", "s1r += T1[j] * e_r", T_TRANS),
    _m("scalar-analysis-convention-factor-dropped", SCAL,
       "coef[k0 + f, l, m] += convention_factor(fl, fm, full, use_full, l, m) * complex(out[t, l, 2 * f], im)",
       "coef[k0 + f, l, m] += complex(out[t, l, 2 * f], im)", T_TRANS),
    _m("scalar-analysis-order-zero-imaginary-kept", SCAL,
       "im = out[t, l, 2 * f + 1] if m > 0 else 0.0", "im = out[t, l, 2 * f + 1]", T_TRANS,
       equivalent="the zero-frequency term of a real FFT has an imaginary part of exactly 0 and its "
                  "scale is real, so the kept part is 0; measured: coefficients identical at lmax 1023, "
                  "511 (batch of 3) and 255"),
    _m("scalar-synthesis-keeps-scaled-sums", SCAL,
       "nscaled -= 1\n                    for t in range(4):\n                        g[t, j] = 0.0",
       "nscaled -= 1", T_TRANS),
    _m("scalar-batch-synthesis-parity-swapped", SCAL,
       "_add_to(go, np.dot(Po[:no * n].reshape((no, n)).T, Ao[i0:i0 + no]))",
       "_add_to(go, np.dot(Po[:no * n].reshape((no, n)).T, Ae[i0:i0 + no]))", T_TRANS),
    _m("scalar-batch-rows-not-masked", SCAL,
       "row[j] = t1 * on[j]", "row[j] = t1", T_TRANS),
    _m("scalar-run-writes-one-order-late", SCAL,
       "                mo = m0 + t + dm\n", "                mo = m0 + t + dm + 1\n", T_TRANS),
    _m("scalar-synthesis-eight-step-typo", SCAL,
       "ger[j] += r2 * t2 + r4 * t4 + r6 * t6 + r8 * t8", "ger[j] += r2 * t2 + r4 * t4 + r6 * t6 + r8 * t7",
       T_TRANS),
    _m("scalar-synthesis-overwrites-accumulated-pass", SCAL,
       "X[kk, rn[j], mo] += vn", "X[kk, rn[j], mo] = vn", T_TRANS),
    _m("scalar-synthesis-order-zero-imaginary-kept", SCAL,
       "                if mo == 0:\n                    vn = complex(vn.real, 0.0)\n"
       "                    vs = complex(vs.real, 0.0)\n", "", T_TRANS,
       equivalent="the inverse real FFT ignores the imaginary part of the zero frequency and the folded "
                  "path keeps the real part only; measured: fields and gradients identical with and "
                  "without imaginary a_l0 of 1e-11; the kernel compiled without the guard rounds one "
                  "gradient differently by 4e-16 relative"),
    # ---------------------------------------------------------------- xarray smoothing
    _m("xr-band-taper-padded-with-ones", XR_FIELDS,
       "w = np.concatenate([w, np.zeros(lmax + 1 - w.size)])",
       "w = np.concatenate([w, np.ones(lmax + 1 - w.size)])", T_XR_FIELDS),
    _m("xr-cap-radius-halved", XR_FIELDS,
       "w = filters.cap(float(cap_deg), lmax)", "w = filters.cap(float(cap_deg) / 2, lmax)",
       T_XR_FIELDS),
]


def _more_lists() -> list[Mutation]:
    """The mutations of the other lists, ``tests/mutations_*.py`` (one per area), in name order."""
    found = []
    for path in sorted(Path(__file__).resolve().parent.glob("mutations_*.py")):
        found += importlib.import_module(path.stem).MUTATIONS
    return found


MUTATIONS += _more_lists()


# ---------------------------------------------------------------------------
# running
# ---------------------------------------------------------------------------
FAILED_LINE = re.compile(r"^(?:FAILED|ERROR) (\S+)", re.MULTILINE)


class Interrupted(Exception):
    """SIGTERM during a run (Ctrl-C arrives as KeyboardInterrupt)."""


def check(mutation: Mutation) -> str | None:
    """Why the mutation cannot be applied to the current sources, or None."""
    path = ROOT / mutation.path
    if not path.is_file():
        return f"no file {mutation.path}"
    text = path.read_text()
    count = text.count(mutation.original)
    if count != 1:
        return f"the original snippet occurs {count} times in {mutation.path} (must be once)"
    try:
        compile(text.replace(mutation.original, mutation.mutated), str(path), "exec")
    except SyntaxError as exc:
        return f"the mutated file does not compile: {exc}"
    for test in mutation.tests:
        if not (ROOT / test.split("::")[0]).is_file():
            return f"no test file {test}"
    return None


def _cache_state() -> dict[str, tuple[int, int]]:
    cache = ROOT / KERNELS / "__pycache__"
    if not cache.is_dir():
        return {}
    return {p.name: (p.stat().st_mtime_ns, p.stat().st_size) for p in cache.glob("*.nb*")}


PYTEST_OPTIONS: list[str] = []  # extra options for every pytest run (see --without-slow)


def _pytest(tests, env: dict, timeout: float) -> tuple[int | None, str]:
    """Run pytest on ``tests``; (return code or None on timeout, combined output)."""
    cmd = [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", *PYTEST_OPTIONS, *tests]
    proc = subprocess.Popen(cmd, cwd=ROOT, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True, start_new_session=True)
    try:
        out, _ = proc.communicate(timeout=timeout)
        return proc.returncode, out
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        out, _ = proc.communicate()
        return None, out
    except BaseException:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        raise


def _env(numba_cache: str | None) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT)] + [p for p in [env.get("PYTHONPATH")] if p])
    env["PYTHONDONTWRITEBYTECODE"] = "1"
    if numba_cache is not None:
        env["NUMBA_CACHE_DIR"] = numba_cache
    return env


def run_one(mutation: Mutation, timeout: float) -> tuple[str, str, float]:
    """Apply, test, restore. Returns (result, by, seconds)."""
    path = ROOT / mutation.path
    data = path.read_bytes()
    digest = hashlib.sha256(data).hexdigest()
    stat = path.stat()
    kernels = mutation.path.startswith(KERNELS)
    cache_before = _cache_state()
    numba_cache = tempfile.mkdtemp(prefix="sphex-mutation-numba-") if kernels else None
    start = time.monotonic()
    try:
        path.write_text(data.decode().replace(mutation.original, mutation.mutated))
        code, out = _pytest(mutation.tests, _env(numba_cache), timeout)
    finally:
        path.write_bytes(data)
        os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns))
        if numba_cache is not None:
            shutil.rmtree(numba_cache, ignore_errors=True)
    seconds = time.monotonic() - start
    if hashlib.sha256(path.read_bytes()).hexdigest() != digest:
        raise RuntimeError(f"{mutation.path} was not restored: check it with git diff")
    if kernels and _cache_state() != cache_before:  # other runs may add entries for unmutated kernels
        raise RuntimeError(f"the numba cache in {KERNELS}__pycache__ changed during {mutation.name}: "
                           "delete that directory before running tests")
    if code is None:
        return "caught", f"timeout after {timeout:.0f} s", seconds
    if code == 0:
        return ("equivalent" if mutation.equivalent else "MISSED"), "", seconds
    if code in (1, 2):
        found = FAILED_LINE.search(out)
        by = found.group(1) if found else f"pytest exit {code} (import or collection error)"
        return "caught", by, seconds
    tail = out.strip().splitlines()[-1:] or [""]
    return "ERROR", f"pytest exit {code}: {tail[0]}", seconds


def baseline(mutations: list[Mutation], timeout: float) -> None:
    """The selected tests must pass on the unmutated code, or a catch means nothing."""
    tests = sorted({t for m in mutations for t in m.tests})
    print(f"baseline: {' '.join(tests)}", flush=True)
    code, out = _pytest(tests, _env(None), timeout)
    if code != 0:
        print(out[-3000:])
        raise SystemExit("the tests fail on the unmutated code: fix that first")


def table(rows: list[tuple[Mutation, str, str, float]], markdown: bool) -> str:
    head = ("mutation", "module", "result", "caught by / why equivalent")
    body = [(m.name, m.path.removeprefix("sphex/"), result, by or (m.equivalent or ""))
            for m, result, by, _ in rows]
    if markdown:  # test ids as docs/validation.md writes them (file::test), so they are checked there
        lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
        lines += ["| " + " | ".join(f"`{c}`" if i in (0, 1) else f"`{c.removeprefix('tests/')}`"
                                    if i == 3 and "::" in c else c for i, c in enumerate(r)) + " |"
                  for r in body]
        return "\n".join(lines)
    widths = [max(len(r[i]) for r in body + [head]) for i in range(3)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths) + "  {}"
    return "\n".join(fmt.format(*r) for r in [head] + body)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--list", action="store_true", help="list the mutations and their tests, run nothing")
    parser.add_argument("--only", action="append", default=[], metavar="SUBSTRING",
                        help="run the mutations whose name contains SUBSTRING (repeatable)")
    parser.add_argument("--timeout", type=float, default=1200.0,
                        help="seconds per mutation before it counts as caught by a hang (default 1200)")
    parser.add_argument("--no-baseline", action="store_true",
                        help="skip the run of the selected tests on the unmutated code")
    parser.add_argument("--markdown", action="store_true", help="print the result table in Markdown")
    parser.add_argument("--without-slow", action="store_true",
                        help="deselect the tests marked slow (to see which bugs only they catch)")
    args = parser.parse_args(argv)
    if args.without_slow:
        PYTEST_OPTIONS[:] = ["-m", "not slow"]

    names = [m.name for m in MUTATIONS]
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise SystemExit(f"duplicate mutation names: {', '.join(duplicates)}")
    chosen = [m for m in MUTATIONS if not args.only or any(s in m.name for s in args.only)]
    if not chosen:
        raise SystemExit(f"no mutation name contains {' or '.join(args.only)}; see --list")
    problems = [(m.name, why) for m in chosen if (why := check(m))]
    if args.list:
        for m in chosen:
            mark = " (equivalent)" if m.equivalent else ""
            print(f"{m.name:48s} {m.path:28s} {' '.join(m.tests)}{mark}")
        print(f"{len(chosen)} mutations")
    for name, why in problems:
        print(f"cannot apply {name}: {why}", file=sys.stderr)
    if problems:
        return 2
    if args.list:
        return 0

    def stop(signum, frame):
        raise Interrupted(f"signal {signum}")

    signal.signal(signal.SIGTERM, stop)
    if not args.no_baseline:
        baseline(chosen, args.timeout)
    rows = []
    started = time.strftime("%Y-%m-%d %H:%M")
    try:
        for i, m in enumerate(chosen, 1):
            result, by, seconds = run_one(m, args.timeout)
            rows.append((m, result, by, seconds))
            print(f"[{i}/{len(chosen)}] {m.name}: {result} {by} ({seconds:.0f} s)", flush=True)
    except (KeyboardInterrupt, Interrupted):
        print("interrupted: every file restored; partial table below", file=sys.stderr)
    print()
    print(table(rows, args.markdown))
    counts = {k: sum(r[1] == k for r in rows) for k in ("caught", "equivalent", "MISSED", "ERROR")}
    print(f"\n{started}: {len(rows)} of {len(chosen)} mutations run: {counts['caught']} caught, "
          f"{counts['equivalent']} equivalent, {counts['MISSED']} missed, {counts['ERROR']} errors")
    return 0 if len(rows) == len(chosen) and not (counts["MISSED"] or counts["ERROR"]) else 1


if __name__ == "__main__":
    sys.exit(main())
