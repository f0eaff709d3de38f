"""Benchmarks of scattered points: evaluation against the transform, and an iterative fit.

Evaluation of degree-L coefficients at N scattered points (uniform in area)
is reported in ns per point per coefficient pair (l, m), next to the scalar
synthesis of the same coefficients on a Gauss grid timed in the same run, in
ns per (degree, order, latitude pair) element (:func:`sphex.bench.transforms.elements`):
both count one step of the same recursion, so their ratio says how much the
scattered points cost over the grid's mirrored latitude pairs.  The
iterative fit (conjugate gradients with evaluation and its adjoint as the
operators) of degree 180 from 10^6 points takes minutes; it runs only when
asked for (``sphex bench --fit``).
"""
from __future__ import annotations

import time

import numpy as np

from sphex.bench.transforms import _best_time, elements

__all__ = ["time_point_evaluation", "time_iterative_fit", "format_points"]


def _random_harmonics(lmax: int, rng: np.random.Generator):
    from sphex.harmonics import Harmonics

    coef = np.tril(rng.standard_normal((lmax + 1, lmax + 1))
                   + 1j * rng.standard_normal((lmax + 1, lmax + 1)))
    coef[:, 0] = coef[:, 0].real
    return Harmonics(coef)


def _random_points(n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """n points uniform in area: sin(lat) uniform in [-1, 1], longitude uniform."""
    return np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n))), rng.uniform(0.0, 360.0, n)


def time_point_evaluation(lmax: int = 360, points: int = 1_000_000, repeat: int = 2) -> dict:
    """Evaluation at ``points`` scattered points beside a synthesis on a Gauss grid.

    Returns
    -------
    dict
        ``evaluate_s`` (best of ``repeat`` calls after a small warm-up call),
        ``ns_per_point_coefficient`` = time / (points * (L+1)(L+2)/2),
        ``synthesis_s`` and ``synthesis_ns_per_element`` of the same
        coefficients on ``Grid.gauss(lmax)``, their ratio, and
        ``max_difference``: evaluation at the nodes of every tenth ring of
        the grid against the synthesis there (both sum the same series).
    """
    from sphex.grids import Grid
    from sphex.points import evaluate
    from sphex.transform import synthesize

    rng = np.random.default_rng(lmax)
    h = _random_harmonics(lmax, rng)
    lat, lon = _random_points(points, rng)
    grid = Grid.gauss(lmax)
    on_grid = synthesize(h, grid)
    rows = slice(None, None, 10)           # every tenth ring keeps the check short
    glat, glon = np.meshgrid(grid.lat[rows], grid.lon, indexing="ij")
    difference = float(np.max(np.abs(evaluate(h, glat, glon) - on_grid[rows])))
    t_eval = _best_time(lambda: evaluate(h, lat, lon), repeat, budget=0.0)
    t_syn = _best_time(lambda: synthesize(h, grid), 3)
    pairs = (lmax + 1) * (lmax + 2) // 2
    per_point = t_eval / (points * pairs) * 1e9
    per_element = t_syn / elements(lmax, grid.nlat) * 1e9
    return {"lmax": lmax, "points": points, "evaluate_s": t_eval,
            "ns_per_point_coefficient": per_point, "synthesis_s": t_syn,
            "synthesis_ns_per_element": per_element, "ratio": per_point / per_element,
            "max_difference": difference, "max_value": float(np.max(np.abs(on_grid)))}


def time_iterative_fit(lmax: int = 180, points: int = 1_000_000,
                       progress=None) -> dict:
    """An iterative fit of degree ``lmax`` from ``points`` samples of a band-limited field.

    Returns
    -------
    dict
        ``fit_s`` (one call, wall time), ``iterations``, ``relative_residual``
        of the normal equations, ``coefficient_error`` (relative, 2-norm
        against the coefficients sampled), ``condition_estimate``.
    """
    from sphex.points import evaluate, fit

    rng = np.random.default_rng(lmax + 1)
    truth = _random_harmonics(lmax, rng)
    lat, lon = _random_points(points, rng)
    data = evaluate(truth, lat, lon)
    start = time.perf_counter()
    result = fit(data, lat, lon, lmax, method="iterative", callback=progress)
    elapsed = time.perf_counter() - start
    error = float(np.linalg.norm(result.harmonics.coef - truth.coef) / np.linalg.norm(truth.coef))
    return {"lmax": lmax, "points": points, "unknowns": (lmax + 1) ** 2, "fit_s": elapsed,
            "iterations": int(result.info["iterations"]),
            "relative_residual": float(result.info["relative_residual"]),
            "coefficient_error": error, "condition_estimate": result.info["condition_estimate"]}


def format_points(result: dict) -> list[str]:
    """Lines of the benchmark table for the point measurements in ``result``."""
    lines = []
    e = result.get("points_evaluation")
    if e:
        lines += ["",
                  f"scattered points: evaluation of L={e['lmax']} at {e['points']:,} points "
                  f"{e['evaluate_s']:.2f} s = {e['ns_per_point_coefficient']:.3f} ns per point per "
                  f"(l, m); synthesis on the Gauss grid {e['synthesis_s'] * 1e3:.1f} ms = "
                  f"{e['synthesis_ns_per_element']:.3f} ns per element; ratio {e['ratio']:.2f} "
                  f"(target 2); grid nodes agree to {e['max_difference']:.1e} "
                  f"(values up to {e['max_value']:.0f})"]
    f = result.get("points_fit")
    if f:
        cond = f["condition_estimate"]
        lines.append(f"iterative fit: L={f['lmax']} ({f['unknowns']:,} unknowns) from "
                     f"{f['points']:,} points {f['fit_s']:.1f} s, {f['iterations']} iterations, "
                     f"relative residual {f['relative_residual']:.1e}, coefficient error "
                     f"{f['coefficient_error']:.1e}"
                     + (f", condition estimate {cond:.3g}" if cond is not None else ""))
    return lines
