"""Timings of point evaluation and of an iterative fit (run by hand; not part of the tests).

    PYTHONPATH=. python docs/measurements/measure_points.py [--points N] [--fit-points N]

1. Evaluation of degree-360 coefficients at N scattered points (uniform in
   area), reported as ns per point per coefficient pair (l, m), next to the
   scalar synthesis at degree 360 on a Gauss grid timed in the same run, as
   ns per (l, m) per latitude pair (the transform's element: one step of its
   Legendre stage serves a northern and a southern ring), i.e.
   time / ((L+1)(L+2)/2 * ceil(nlat/2)).  Best of three calls each, after a
   warm-up call.
2. An iterative fit of degree 180 ((180+1)^2 = 32761 unknowns) from N points
   sampling a band-limited field: wall time, iterations, relative error.
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.kernels import numba
from sphex.points import evaluate, evaluate_adjoint, fit
from sphex.transform import synthesize


def random_harmonics(lmax: int, rng: np.random.Generator) -> Harmonics:
    coef = np.tril(rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1)))
    coef[:, 0] = coef[:, 0].real
    return Harmonics(coef)


def random_points(n: int, rng: np.random.Generator):
    return np.degrees(np.arcsin(rng.uniform(-1, 1, n))), rng.uniform(0, 360, n)


def best_of(call, repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--fit-points", type=int, default=1_000_000)
    parser.add_argument("--skip-fit", action="store_true")
    args = parser.parse_args()
    rng = np.random.default_rng(2026)
    print(f"threads: {numba.get_num_threads()}")

    lmax = 360
    h = random_harmonics(lmax, rng)
    lat, lon = random_points(args.points, rng)
    pairs = (lmax + 1) * (lmax + 2) / 2
    evaluate(h, lat[:1000], lon[:1000])
    evaluate_adjoint(lat[:1000], lat[:1000], lon[:1000], lmax)
    t_eval = best_of(lambda: evaluate(h, lat, lon), 2)
    t_adj = best_of(lambda: evaluate_adjoint(lat, lat, lon, lmax), 1)
    grid = Grid.gauss(lmax)
    synthesize(h, grid)
    t_syn = best_of(lambda: synthesize(h, grid), 10)
    lat_pairs = (grid.nlat + 1) // 2
    per_point = t_eval / (args.points * pairs) * 1e9
    per_element = t_syn / (pairs * lat_pairs) * 1e9
    print(f"evaluate L={lmax}, {args.points} points: {t_eval:.2f} s, {per_point:.3f} ns per point per (l, m)")
    print(f"adjoint  L={lmax}, {args.points} points: {t_adj:.2f} s, "
          f"{t_adj / (args.points * pairs) * 1e9:.3f} ns per point per (l, m)")
    print(f"synthesize L={lmax} on {grid.shape}: {t_syn * 1e3:.2f} ms, {per_element:.3f} ns per (l, m) "
          f"per latitude pair; evaluation / synthesis = {per_point / per_element:.2f}")

    if args.skip_fit:
        return
    lmax = 180
    truth = random_harmonics(lmax, rng)
    lat, lon = random_points(args.fit_points, rng)
    data = evaluate(truth, lat, lon)
    iterations = []
    start = time.perf_counter()
    result = fit(data, lat, lon, lmax, method="iterative",
                 callback=lambda k, r: iterations.append((k, r, time.perf_counter() - start)))
    elapsed = time.perf_counter() - start
    err = np.linalg.norm(result.harmonics.coef - truth.coef) / np.linalg.norm(truth.coef)
    print(f"iterative fit L={lmax} ({(lmax + 1) ** 2} unknowns) from {args.fit_points} points: "
          f"{elapsed:.1f} s, {result.info['iterations']} iterations, relative residual "
          f"{result.info['relative_residual']:.1e}, coefficient error {err:.1e}, condition "
          f"estimate {result.info['condition_estimate']:.3g}")


if __name__ == "__main__":
    main()
