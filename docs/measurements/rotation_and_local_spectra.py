"""Time and peak memory of a rotation (L = 1023, 2047) and of a localised spectrum (L = 1023, 20 windows).

Each case runs in a fresh process so that its peak resident memory is its own:

    python docs/measurements/rotation_and_local_spectra.py

Prints one line per case: wall time (best of --repeat calls), CPU time of that
call (all threads), the largest amount of memory allocated by the call beyond
its input (tracemalloc: numpy arrays; the kernels' own per-degree buffers,
O(lmax) per thread, are not traced), the process's peak resident memory, and
the machine's load average (the machine is shared: wall times stretch with
the load, CPU times much less).
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time
import tracemalloc


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _random_field(lmax: int, seed: int = 1):
    import numpy as np
    from sphex import Harmonics

    rng = np.random.default_rng(seed)
    shape = (lmax + 1, lmax + 1)
    c = (rng.standard_normal(shape) + 1j * rng.standard_normal(shape)) / (np.arange(lmax + 1)[:, None] + 1.0)
    c = np.where(np.tril(np.ones(shape, dtype=bool)), c, 0)
    c[:, 0] = c[:, 0].real
    return Harmonics(c)


def run_case(case: str, lmax: int, repeat: int) -> dict:
    from sphex.localize import local_power
    from sphex.rotation import rotate

    small = _random_field(31)
    rotate(small, 10.0, 20.0, 30.0)                       # compile before measuring
    local_power(small, 10.0, 20.0, 20.0, 6, n_windows=2)
    h = _random_field(lmax)
    tracemalloc.start()
    best = None
    allocated = 0
    for _ in range(repeat):
        tracemalloc.reset_peak()
        before = tracemalloc.get_traced_memory()[0]
        t0, c0 = time.perf_counter(), time.process_time()
        if case == "rotate":
            rotate(h, 37.0, 71.3, -123.4)
        else:
            local_power(h, -20.0, 140.0, 20.0, 30, n_windows=20)
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
        allocated = max(allocated, tracemalloc.get_traced_memory()[1] - before)
        if best is None or wall < best[0]:
            best = (wall, cpu)
    return dict(case=case, lmax=lmax, wall_s=best[0], cpu_s=best[1], peak_mb=_peak_mb(),
                allocated_mb=allocated / 2**20, input_mb=h.coef.nbytes / 2**20,
                load=os.getloadavg()[0])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--case", choices=("rotate", "local"))
    parser.add_argument("--lmax", type=int)
    args = parser.parse_args()
    if args.case:
        print(json.dumps(run_case(args.case, args.lmax, args.repeat)))
        return
    for case, lmax in (("rotate", 1023), ("rotate", 2047), ("local", 1023)):
        out = subprocess.run([sys.executable, __file__, "--case", case, "--lmax", str(lmax),
                              "--repeat", str(args.repeat)], check=True, capture_output=True, text=True)
        r = json.loads(out.stdout)
        label = "rotate" if case == "rotate" else "local_power, 20 windows, lwin 30"
        print(f"{label:34s} L={r['lmax']:5d}  wall {r['wall_s']:7.3f} s  cpu {r['cpu_s']:7.3f} s  "
              f"input {r['input_mb']:4.0f} MB  allocated {r['allocated_mb']:5.0f} MB  "
              f"peak RSS {r['peak_mb']:5.0f} MB  load {r['load']:.1f}")


if __name__ == "__main__":
    main()
