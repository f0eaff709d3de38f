"""Smoothing weights of the Gaussian and cap kernels computed from the kernels themselves.

Independent of ``sphex.filters``: each weight is the kernel's Legendre coefficient,
``w_l = int_{-1}^{1} K(x) P_l(x) dx / int_{-1}^{1} K(x) dx`` (Funk-Hecke theorem: smoothing
with an isotropic kernel multiplies degree l by this number; common practice), integrated
with ``scipy.integrate.quad`` and ``scipy.special.eval_legendre``.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.integrate import quad
from scipy.special import eval_legendre


def gaussian_weights_by_quadrature(radius_km: float, planet_radius_km: float, lmax: int) -> np.ndarray:
    """Weights of the Gaussian kernel ``K(psi) = exp(-b (1 - cos psi))`` whose value at the
    angle ``psi = radius / planet radius`` is half its central value, so
    ``b = ln 2 / (1 - cos(radius / planet radius))`` (Jekeli 1981, from memory).
    The normalisation ``int K dx = (1 - exp(-2b)) / b`` is elementary."""
    b = math.log(2.0) / (1.0 - math.cos(radius_km / planet_radius_km))
    norm = -math.expm1(-2.0 * b) / b
    x_edge = 1.0 - 40.0 / b if b > 20.0 else -1.0    # exp(-40): below 5e-18 of the peak beyond
    out = np.empty(lmax + 1)
    for l in range(lmax + 1):
        def f(x, l=l):
            return math.exp(-b * (1.0 - x)) * eval_legendre(l, x)
        value = quad(f, x_edge, 1.0, epsabs=1e-16, epsrel=1e-12, limit=200)[0]
        out[l] = value / norm
    return out


def cap_weights_by_quadrature(radius_deg: float, lmax: int) -> np.ndarray:
    """Weights of the mean over a cap of angular radius ``radius_deg``:
    ``w_l = int_{cos r}^{1} P_l(x) dx / (1 - cos r)``."""
    x0 = math.cos(math.radians(radius_deg))
    return np.array([quad(lambda x, l=l: eval_legendre(l, x), x0, 1.0, epsabs=1e-15,
                          epsrel=1e-13, limit=200)[0] for l in range(lmax + 1)]) / (1.0 - x0)
