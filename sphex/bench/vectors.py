"""Benchmark of the vector transforms: a (u, v) pair against two scalar transforms of its size.

A wind field's analysis (:func:`sphex.flow.analyze_flow`) and synthesis
(:func:`sphex.flow.synthesize_flow`) on a Gauss grid are timed beside the
scalar analysis and synthesis of one field on the same grid, in the same run.
The goal is stated against the roofline of *two* scalar transforms (the pair
has two components; the recursion is shared between them): 2 x 8 flops per
(degree, order, latitude pair) element at the DGEMM rate that
:func:`sphex.bench.transforms.run` measures.  The ratio to the two measured
scalar transforms is reported beside it.
"""
from __future__ import annotations

from collections.abc import Callable

import numpy as np

__all__ = ["DEFAULT_VECTOR_SIZE", "time_vector_pair", "add_ratios", "format_rows"]

#: Degree of the vector case of ``sphex bench``.
DEFAULT_VECTOR_SIZE = 1023


def _random(rng: np.random.Generator, lmax: int) -> np.ndarray:
    coef = rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[:, 0] = coef[:, 0].real
    return coef


def time_vector_pair(lmax: int, repeat: int, best_time: Callable[..., float]) -> dict:
    """Best times of the vector analysis and synthesis of one (u, v) pair and of one scalar
    field, on the Gauss grid of ``lmax``, with the pair's round-trip error.

    Parameters
    ----------
    lmax : int
    repeat : int
        Calls per timing (at least).
    best_time : callable
        ``best_time(fn, repeat)``, the benchmark's timer (the best of several calls).

    Returns
    -------
    dict
        ``analysis_s``, ``synthesis_s`` (the pair), ``scalar_analysis_s``,
        ``scalar_synthesis_s`` (one field), ``roundtrip_error`` (winds after synthesis, analysis and
        synthesis again, relative to their maximum), grid sizes.
    """
    from sphex import Grid, Harmonics, analyze, synthesize
    from sphex.flow import Flow, analyze_flow, synthesize_flow

    grid = Grid.gauss(lmax)
    rng = np.random.default_rng(lmax + 1)
    l = np.arange(lmax + 1.0)
    scale = np.zeros(lmax + 1)
    scale[1:] = 1.0 / np.sqrt(l[1:] * (l[1:] + 1))   # the same wind energy in every degree
    flow = Flow(Harmonics(_random(rng, lmax) * scale[:, None]),
                Harmonics(_random(rng, lmax) * scale[:, None]))
    east, north = synthesize_flow(flow, grid)       # also compiles on a cold start
    again = synthesize_flow(analyze_flow(east, north, grid), grid)
    err = max(float(np.abs(a - b).max()) for a, b in zip(again, (east, north))) \
        / max(float(np.abs(east).max()), float(np.abs(north).max()))
    scalar = Harmonics(_random(rng, lmax))
    values = synthesize(scalar, grid)
    analyze(values, grid)
    return {
        "lmax": lmax, "nlat": grid.nlat, "nlon": grid.nlon,
        "synthesis_s": best_time(lambda: synthesize_flow(flow, grid), repeat),
        "analysis_s": best_time(lambda: analyze_flow(east, north, grid), repeat),
        "scalar_synthesis_s": best_time(lambda: synthesize(scalar, grid), repeat),
        "scalar_analysis_s": best_time(lambda: analyze(values, grid), repeat),
        "roundtrip_error": err,
    }


def add_ratios(row: dict, rate: float) -> dict:
    """Add the ratios to the roofline of two scalar transforms (at ``rate`` flop/s, with
    ``row["elements"]`` the (degree, order, latitude pair) elements of one Legendre stage) and
    to two measured scalar transforms."""
    roof = 2 * 8.0 * row["elements"] / rate
    row["two_scalar_roofline_s"] = roof
    for kind in ("analysis", "synthesis"):
        row[f"{kind}_ratio"] = row[f"{kind}_s"] / roof
        row[f"{kind}_vs_two_scalar"] = row[f"{kind}_s"] / (2 * row[f"scalar_{kind}_s"])
    return row


def format_rows(rows: list[dict]) -> list[str]:
    """Table lines of the vector case."""
    lines = ["", "vector pair (u, v) on the Gauss grid; roofline of two scalar transforms",
             f"{'lmax':>6} {'analysis s':>11} {'x roof':>7} {'x 2 scalar':>10} "
             f"{'synthesis s':>12} {'x roof':>7} {'x 2 scalar':>10} {'error':>9}"]
    for r in rows:
        lines.append(f"{r['lmax']:>6} {r['analysis_s']:>11.4f} {r['analysis_ratio']:>7.2f} "
                     f"{r['analysis_vs_two_scalar']:>10.2f} {r['synthesis_s']:>12.4f} "
                     f"{r['synthesis_ratio']:>7.2f} {r['synthesis_vs_two_scalar']:>10.2f} "
                     f"{r['roundtrip_error']:>9.1e}")
    lines.append("(x 2 scalar: against two scalar transforms of one field each, timed in this run)")
    return lines
