"""Equiangular weights against published closed forms."""
import numpy as np
import pytest

from sphex.grids import equiangular_nodes


@pytest.mark.reference
@pytest.mark.parametrize("nlat", [4, 8, 32, 128])
def test_north_layout_matches_driscoll_healy_closed_form(nlat):
    # Driscoll & Healy (1994), weights of their sampling theorem (from memory):
    # w_j = (2 sqrt(2) / B) sin(theta_j) sum_{k<B} sin((2k+1) theta_j) / (2k+1), nlat = 2B.
    # Their weights integrate with a different normalisation: ours (in x, summing
    # to 2) are theirs divided by sqrt(2).
    colat, w = equiangular_nodes(nlat, "north")
    B = nlat // 2
    k = np.arange(B)
    dh = (2 * np.sqrt(2) / B) * np.sin(colat) * (np.sin(np.outer(colat, 2 * k + 1)) / (2 * k + 1)).sum(1)
    np.testing.assert_allclose(w, dh / np.sqrt(2), rtol=0, atol=1e-15)


@pytest.mark.reference
@pytest.mark.parametrize("nlat", [5, 16, 33])
def test_cells_layout_matches_fejer_direct_sum(nlat):
    # Fejer's first rule (Waldvogel 2006, eq. 2.3, from memory), summed directly:
    # w_j = (2/n) [1 - 2 sum_{k=1}^{n//2} cos(2 k theta_j) / (4 k^2 - 1)]
    colat, w = equiangular_nodes(nlat, "cells")
    k = np.arange(1, nlat // 2 + 1)
    direct = (2 / nlat) * (1 - 2 * (np.cos(2 * np.outer(colat, k)) / (4 * k * k - 1)).sum(1))
    np.testing.assert_allclose(w, direct, rtol=0, atol=1e-15)


@pytest.mark.reference
@pytest.mark.parametrize("nlat", [5, 16, 33])
def test_poles_layout_matches_clenshaw_curtis_direct_sum(nlat):
    # Clenshaw-Curtis weights (Waldvogel 2006, eq. 2.2, from memory), summed directly
    colat, w = equiangular_nodes(nlat, "poles")
    N = nlat - 1
    k = np.arange(1, N // 2 + 1)
    b = np.where(2 * k == N, 1.0, 2.0)
    c = np.full(nlat, 2.0)
    c[0] = c[-1] = 1.0
    direct = (c / N) * (1 - (b * np.cos(2 * np.outer(colat, k)) / (4 * k * k - 1)).sum(1))
    np.testing.assert_allclose(w, direct, rtol=0, atol=1e-15)
