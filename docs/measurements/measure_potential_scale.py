"""Measure a degree-2190 gravity-anomaly synthesis on a 5-arc-minute grid (2161 x 4320).

Run from the repository root::

    python docs/measurements/measure_potential_scale.py

Each measurement runs in a fresh process: ``anomaly`` times
``sphex.potential.gravity(model, grid, "anomaly")`` (GRS80 removed, on the
sphere), ``synthesis`` times ``sphex.synthesize(h, grid)`` of the same
coefficients on the same grid (the roofline: the scalar synthesis that the
anomaly synthesis is built on).  The coefficients are seeded random numbers
with Kaula-like size (1e-5 / l^2 per coefficient), fully normalised; a small
call compiles the kernels first.  Reported: wall time of the one call, peak
resident memory of the process (ru_maxrss) and its increase over the memory
held before the call (the coefficients, the grid and the warm-up).
"""
from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time

LMAX = 2190
NLAT, NLON = 2161, 4320


def _rss_mib() -> float:
    with open("/proc/self/statm") as f:
        pages = int(f.read().split()[1])
    return pages * os.sysconf("SC_PAGE_SIZE") / 2**20


def measure(kind: str) -> dict:
    import numpy as np

    import sphex
    from sphex import Grid, Harmonics
    from sphex.potential import gravity

    rng = np.random.default_rng(2190)
    l = np.arange(LMAX + 1, dtype=float)[:, None]
    size = 1e-5 / np.maximum(l, 2.0) ** 2
    C = rng.standard_normal((LMAX + 1, LMAX + 1)) * size
    S = rng.standard_normal((LMAX + 1, LMAX + 1)) * size
    C, S = np.tril(C), np.tril(S)
    S[:, 0] = 0.0
    C[0, 0] = 1.0
    h = Harmonics.from_cos_sin(C, S, norm="full", condon_shortley=False, radius=6378136.3)
    del C, S
    grid = Grid.equiangular(NLAT, NLON, "poles")
    small = Grid.equiangular(37, 72, "poles")
    gravity(h.truncate(30), small, "anomaly", gm=3.986004415e14)   # compile the kernels
    sphex.synthesize(h.truncate(30), small)
    before = _rss_mib()
    t0 = time.perf_counter()
    if kind == "anomaly":
        out = gravity(h, grid, "anomaly", gm=3.986004415e14)
    else:
        out = sphex.synthesize(h, grid)
    seconds = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux
    return {"kind": kind, "seconds": seconds, "peak_rss_mib": peak, "before_mib": before,
            "output_mib": out.nbytes / 2**20, "threads": sphex.kernels.numba.get_num_threads()}


def main() -> None:
    if len(sys.argv) > 1:
        print(json.dumps(measure(sys.argv[1])))
        return
    results = {}
    for kind in ("synthesis", "anomaly"):
        run = subprocess.run([sys.executable, __file__, kind], capture_output=True, text=True,
                             check=True)
        results[kind] = json.loads(run.stdout.strip().splitlines()[-1])
        print(results[kind])
    ratio = results["anomaly"]["seconds"] / results["synthesis"]["seconds"]
    print(f"anomaly / synthesis time: {ratio:.2f}")


if __name__ == "__main__":
    main()
