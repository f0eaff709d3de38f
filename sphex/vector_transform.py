"""Analysis and synthesis of tangent vector fields on the unit sphere.

The engine of :mod:`sphex.flow` (which adds the radius and the
:class:`~sphex.flow.Flow` container): the same latitude pairs, bands and
chunks of orders as the scalar transforms (:mod:`sphex.rings`), with the
kernels of :mod:`sphex.kernels.vector`.
"""
from __future__ import annotations

import numpy as np
import scipy.fft

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.kernels.vector import (
    flow_to_sequences, sequences_to_flow, vector_analysis_kernel, vector_synthesis_kernel,
)
from sphex.legendre import check_norm, sectoral_table
from sphex.limits import binary_exponent, peak_magnitude
from sphex.rings import (
    ConventionFactor, PairBand, batched_coefficients, check_grid, check_lmax, check_values,
    convention_factor, fft_workers, fourier_synthesis, latitude_pairs, live_pairs,
    longitude_phase, order_chunks, pair_bands, rescaled_result, run_chunks, ANALYSIS_OVERFLOW_FIX,
    SYNTHESIS_OVERFLOW_FIX, check_analysis_memory, check_synthesis_memory,
)

__all__ = ["analyze_vector", "synthesize_vector"]


# ---------------------------------------------------------------------------
# tangent vector fields (eastward, northward components)
# ---------------------------------------------------------------------------
def _check_components(east, north, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    east = np.asanyarray(east)  # keeps a numpy.ma mask for check_values
    north = np.asanyarray(north)
    if east.shape != north.shape:
        raise ValueError(f"east has shape {east.shape} but north has shape {north.shape}: give both "
                         "components on the same grid with the same leading axes")
    checked = []
    for name, arr in (("east", east), ("north", north)):
        try:
            checked.append(check_values(arr, grid))
        except ValueError as err:
            raise ValueError(f"{name}: {err}") from None
    return checked[0], checked[1]


def _common_scale(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, int, float]:
    """Both arrays scaled by one power of two when their largest magnitude is extreme
    (see :func:`sphex.rings.scaled_input`), the exponent and that magnitude."""
    peak = max(peak_magnitude(a), peak_magnitude(b))
    e = binary_exponent(peak)
    if e == 0:
        return a, b, 0, peak
    def scale(x: np.ndarray) -> np.ndarray:
        if np.iscomplexobj(x):
            return np.ldexp(x.real, -e) + 1j * np.ldexp(x.imag, -e)
        return np.ldexp(np.asarray(x, dtype=np.float64), -e)

    return scale(a), scale(b), e, peak


def _vector_live(grid: Grid, lmax: int) -> np.ndarray:
    """Per Fourier column 0..lmax, the latitude pairs on which the functions serving it
    (see :func:`sphex.kernels.vector.column_plan`) are not negligible."""
    live = np.zeros(lmax + 1, dtype=np.int64)
    if lmax >= 1:
        live[0] = live_pairs(grid, lmax, 1, 1, 0)[0]
        live[1:] = live_pairs(grid, lmax + 1, 1, lmax, 1)
    return live


def _vector_analysis(east: np.ndarray, north: np.ndarray, grid: Grid, lmax: int,
                     fac: "ConventionFactor") -> tuple[np.ndarray, np.ndarray]:
    """(K, nlat, nlon) components -> (K, lmax+1, lmax+1) psi and chi coefficients on the
    unit sphere in fac's convention; latitude bands as in :func:`_analysis`."""
    pairs = latitude_pairs(grid)
    K = east.shape[0]
    M = min(lmax, grid.nlon // 2) + 1
    live = _vector_live(grid, lmax)[:M]
    scale = (2 * np.pi / grid.nlon) * np.conj(longitude_phase(M, grid))
    cm = sectoral_table(lmax + 1)
    Gu = np.zeros((K, lmax + 2, lmax + 2), dtype=np.complex128)
    Gv = np.zeros_like(Gu)
    bands = pair_bands(pairs.n, M)
    chunks = order_chunks(0, M - 1, fft_workers())
    for b0, b1 in bands:
        band = PairBand(pairs, b0, b1)
        whole = len(bands) == 1 and band.rows.size == grid.nlat
        Fu, Fv = (scipy.fft.rfft(np.asarray(v if whole else v[:, band.rows, :], dtype=np.float64),
                                 axis=-1, workers=fft_workers()) for v in (east, north))
        nlive = np.clip(live - b0, 0, band.n)
        run_chunks(lambda cols: vector_analysis_kernel(lmax + 1, cols, band.x, band.s, cm, nlive,
                                                       Fu, Fv, band.north, band.south, band.wn,
                                                       band.ws, scale, Gu, Gv), chunks)
        del Fu, Fv
    psi = np.empty((K, lmax + 1, lmax + 1), dtype=np.complex128)
    chi = np.empty_like(psi)
    sequences_to_flow(Gu, Gv, *fac.args(), 1.0, psi, chi)
    return psi, chi


def _vector_synthesis(psi: np.ndarray, chi: np.ndarray, fac: "ConventionFactor",
                      grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """(K, L+1, L+1) psi, chi coefficients (times fac: orthonormal, phase-free) -> east and
    north components (K, nlat, nlon) on the unit sphere; bands as in :func:`_synthesis_passes`."""
    K, L1, _ = psi.shape
    lmax = L1 - 1
    seqs = [np.empty((K, lmax + 2, lmax + 2), dtype=np.complex128) for _ in range(2)]
    flow_to_sequences(psi, chi, *fac.args(), 1.0, seqs[0], seqs[1])
    pairs = latitude_pairs(grid)
    N = grid.nlon
    direct = lmax < (N + 1) // 2
    W = N // 2 + 1 if direct else L1
    phase = longitude_phase(max(W, L1), grid)[:L1] * N
    live = _vector_live(grid, lmax)
    cm = sectoral_table(lmax + 1)
    chunks = order_chunks(0, lmax, fft_workers())
    bands = pair_bands(pairs.n, L1)
    out = [np.empty((K,) + grid.shape) for _ in range(2)]
    for b0, b1 in bands:
        band = PairBand(pairs, b0, b1)
        rs = np.where(band.south == band.north, -1, band.south)  # an equator ring once
        X = [np.empty((K, band.rows.size, W), dtype=np.complex128) for _ in range(2)]
        for buffer in X:
            buffer[..., L1:] = 0.0
        nlive = np.clip(live - b0, 0, band.n)
        run_chunks(lambda cols: vector_synthesis_kernel(lmax + 1, cols, band.x, band.s, cm, nlive,
                                                        seqs[0], seqs[1], X[0], X[1], band.north,
                                                        rs, phase), chunks)
        for t in range(2):
            values = fourier_synthesis(X[t], N, direct)
            X[t] = None
            if len(bands) == 1 and band.rows.size == grid.nlat:
                out[t] = values
            else:
                out[t][:, band.rows, :] = values
    return out[0], out[1]


def analyze_vector(east, north, grid: Grid, lmax: int | None = None, norm: str = "orthonormal",
                   condon_shortley: bool = True, *,
                   allow_aliasing: bool = False) -> tuple[Harmonics, Harmonics]:
    """Streamfunction and velocity potential of a tangent vector field on the unit sphere.

    The engine of :func:`sphex.flow.analyze_flow`, which adds the radius and
    the :class:`~sphex.flow.Flow` container; most callers want that one.

    Parameters
    ----------
    east, north : array_like, shape ``(..., nlat, nlon)``
        Eastward and northward components on ``grid`` (same shape; leading
        axes are a batch).
    grid : Grid
    lmax : int, optional
        Highest degree; default ``grid.lmax_exact``, which is also the exact
        limit for vector fields (see Notes).  More raises unless
        ``allow_aliasing=True``.
    norm, condon_shortley
        Convention of the returned coefficients.
    allow_aliasing : bool
        Accept ``lmax > grid.lmax_exact`` (an aliased, not exact, result).

    Returns
    -------
    psi, chi : Harmonics
        With ``east = -dpsi/dlat + (1/cos lat) dchi/dlon`` and
        ``north = (1/cos lat) dpsi/dlon + dchi/dlat``; degree 0 is zero.

    Raises
    ------
    ValueError
        Shapes that differ or do not match the grid, NaN or inf, ``lmax``
        above the exact limit, an unknown normalisation.

    Notes
    -----
    ``psi_lm = (1/(l(l+1))) integral (east conj(dY_lm/dtheta) + north conj(dY_lm/dphi / sin theta)) dOmega``
    (the projection on ``k x grad Y_lm``) and ``chi_lm`` alike on ``grad Y_lm``,
    ``(dY_lm/dphi / sin theta, -dY_lm/dtheta)``; the quadrature integrates products
    ``(1 - x^2)^(m-1) q(x)`` with ``q`` of degree ``l + l' - 2m + 2``, i.e.
    polynomials of degree ``l + l' <= 2 lmax`` in ``x = cos theta``: the
    same as the scalar case, so ``grid.lmax_exact`` is the vector limit too.
    The functions ``dLambda/dtheta`` and ``m Lambda / sin theta`` come from
    one recursion of ``Lambda / sin theta`` (see :mod:`sphex.kernels.vector`).
    """
    grid = check_grid(grid)
    check_norm(norm)
    east, north = _check_components(east, north, grid)
    lmax = check_lmax(lmax, grid, allow_aliasing)
    batch = east.shape[:-2]
    check_analysis_memory(2 * int(np.prod(batch)), grid, lmax)
    fac = convention_factor(lmax, "orthonormal", False, norm, condon_shortley)
    east, north, e, peak = _common_scale(east, north)
    psi, chi = _vector_analysis(east.reshape((-1,) + grid.shape), north.reshape((-1,) + grid.shape),
                                grid, lmax, fac)
    psi, chi = (rescaled_result(c, e, f"the {norm} coefficients of a vector field reaching "
                                f"{peak:.3g}", ANALYSIS_OVERFLOW_FIX) for c in (psi, chi))
    shape = batch + (lmax + 1, lmax + 1)
    return tuple(Harmonics(c.reshape(shape), norm=norm, condon_shortley=condon_shortley)
                 for c in (psi, chi))


def synthesize_vector(psi: Harmonics, chi: Harmonics, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Eastward and northward components on the unit sphere of streamfunction ``psi``
    and velocity potential ``chi`` at the nodes of ``grid``.

    The engine of :func:`sphex.flow.synthesize_flow` (which divides by the
    radius).  ``psi`` and ``chi`` may carry different conventions but need the
    same ``lmax`` and batch shape.

    Returns
    -------
    east, north : ndarray, each ``batch_shape + grid.shape``
        ``east = -dpsi/dlat + (1/cos lat) dchi/dlon``,
        ``north = (1/cos lat) dpsi/dlon + dchi/dlat``, exact point values
        (the pole rows hold the limits along each meridian).
    """
    grid = check_grid(grid)
    if not isinstance(chi, Harmonics):
        raise ValueError(f"chi must be a sphex.Harmonics, got {type(chi).__name__}")
    a, fac = batched_coefficients(psi)
    if psi.lmax != chi.lmax or psi.batch_shape != chi.batch_shape:
        raise ValueError(f"psi (lmax {psi.lmax}, batch {psi.batch_shape}) and chi (lmax {chi.lmax}, "
                         f"batch {chi.batch_shape}) differ: truncate to a common lmax and give both "
                         "the same leading axes")
    if (chi.norm, chi.condon_shortley) != (psi.norm, psi.condon_shortley):
        chi = chi.to(psi.norm, psi.condon_shortley)  # one convention, so fac serves both
    b, _ = batched_coefficients(chi)
    shape = psi.batch_shape + grid.shape
    if psi.lmax == 0:
        return np.zeros(shape), np.zeros(shape)
    check_synthesis_memory(2 * a.shape[0], grid, psi.lmax)
    a, b, e, peak = _common_scale(a, b)
    east, north = (rescaled_result(v, e, f"the vector components synthesised from coefficients "
                                   f"up to {peak:.3g}", SYNTHESIS_OVERFLOW_FIX)
                   for v in _vector_synthesis(a, b, fac, grid))
    return east.reshape(shape), north.reshape(shape)
