"""Benchmarks: transform speed against the machine's own matrix-product rate.

Speed goals are ratios measured in one run, never absolute times: the
benchmark times a 2048 x 2048 float64 matrix product (numpy / BLAS) beside
the transforms, and reports each transform against the *roofline* time,
8 flops per (degree, order, latitude pair) element at that DGEMM rate.

Run ``sphex bench`` (or ``python -m sphex.bench``); ``--json`` prints one JSON
document for machines.  Peak memory is measured per size in a fresh
subprocess (``ru_maxrss``), so it includes the interpreter and compiled
kernels; the baseline of an idle process is reported beside it.
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time

import numpy as np

DEFAULT_SIZES = (255, 511, 1023, 2047)


def dgemm_rate(n: int = 2048, repeat: int = 3) -> float:
    """Best of ``repeat`` n x n float64 matrix products, in flop/s."""
    rng = np.random.default_rng(0)
    a = rng.standard_normal((n, n))
    b = rng.standard_normal((n, n))
    a @ b
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        a @ b
        best = min(best, time.perf_counter() - t)
    return 2.0 * n ** 3 / best


def elements(lmax: int, nlat: int) -> int:
    """(degree, order, latitude pair) elements of one Legendre stage."""
    pairs = (nlat + 1) // 2
    return (lmax + 1) * (lmax + 2) // 2 * pairs


def _best_time(fn, repeat):
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def time_transforms(lmax: int, nfields: int = 1, repeat: int = 3) -> dict:
    """Time analysis and synthesis of random band-limited fields on a Gauss grid."""
    from sphex import Grid, Harmonics, analyze, synthesize

    grid = Grid.gauss(lmax)
    rng = np.random.default_rng(lmax)
    shape = (nfields,) if nfields > 1 else ()
    coef = rng.standard_normal(shape + (lmax + 1, lmax + 1)) \
        + 1j * rng.standard_normal(shape + (lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[..., :, 0] = coef[..., :, 0].real
    h = Harmonics(coef)
    values = synthesize(h, grid)  # also compiles on a cold start
    back = analyze(values, grid)
    err = float(np.abs(back.coef - h.coef).max() / np.abs(h.coef).max())
    t_syn = _best_time(lambda: synthesize(h, grid), repeat)
    t_ana = _best_time(lambda: analyze(values, grid), repeat)
    return {"lmax": lmax, "nfields": nfields, "nlat": grid.nlat, "nlon": grid.nlon,
            "analysis_s": t_ana, "synthesis_s": t_syn, "roundtrip_error": err,
            "elements": elements(lmax, grid.nlat) * nfields}


def _peak_memory(lmax: int) -> dict:
    """Peak RSS (bytes) of a fresh process doing one analysis and one synthesis."""
    code = ("import resource, sys, numpy as np\n"
            "from sphex import Grid, Harmonics, analyze, synthesize\n"
            "base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
            f"L = {lmax}\n"
            "g = Grid.gauss(L)\n"
            "c = np.zeros((L + 1, L + 1), complex); c[:, 0] = 1.0\n"
            "v = synthesize(Harmonics(c), g)\n"
            "h = analyze(v, g)\n"
            "print(base, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    base, peak = (int(v) * 1024 for v in out.stdout.split()[-2:])
    return {"baseline_rss_bytes": base, "peak_rss_bytes": peak}


def run(sizes=DEFAULT_SIZES, batch: tuple[int, int] | None = (511, 32), memory: bool = True,
        repeat: int = 3) -> dict:
    import numba

    rate = dgemm_rate()
    rows = []
    cases = [(L, 1) for L in sizes]
    if batch:
        cases.append(batch)
    for L, k in cases:
        r = time_transforms(L, k, repeat)
        roof = 8.0 * r["elements"] / rate
        r["roofline_s"] = roof
        r["analysis_ratio"] = r["analysis_s"] / roof
        r["synthesis_ratio"] = r["synthesis_s"] / roof
        r["analysis_ns_per_element"] = r["analysis_s"] / r["elements"] * 1e9
        r["synthesis_ns_per_element"] = r["synthesis_s"] / r["elements"] * 1e9
        if memory and k == 1:
            r.update(_peak_memory(L))
        rows.append(r)
    return {"dgemm_gflops": rate / 1e9, "threads": numba.get_num_threads(),
            "cpu_count": os.cpu_count(), "rows": rows}


def format_table(result: dict) -> str:
    lines = [f"DGEMM (2048^2 float64, same run): {result['dgemm_gflops']:.1f} GFLOP/s; "
             f"numba threads: {result['threads']}",
             "roofline = 8 flops per (degree, order, latitude pair) element at that rate",
             "",
             f"{'lmax':>6} {'fields':>6} {'analysis s':>11} {'x roof':>7} {'ns/elem':>8} "
             f"{'synthesis s':>12} {'x roof':>7} {'ns/elem':>8} {'peak MB':>8} {'error':>9}"]
    for r in result["rows"]:
        mem = f"{r['peak_rss_bytes'] / 2**20:8.0f}" if "peak_rss_bytes" in r else f"{'-':>8}"
        lines.append(f"{r['lmax']:>6} {r['nfields']:>6} {r['analysis_s']:>11.4f} {r['analysis_ratio']:>7.2f} "
                     f"{r['analysis_ns_per_element']:>8.3f} {r['synthesis_s']:>12.4f} "
                     f"{r['synthesis_ratio']:>7.2f} {r['synthesis_ns_per_element']:>8.3f} {mem} "
                     f"{r['roundtrip_error']:>9.1e}")
    base = [r["baseline_rss_bytes"] for r in result["rows"] if "baseline_rss_bytes" in r]
    if base:
        lines.append(f"(peak MB is the whole process; an idle process with sphex imported: "
                     f"{base[0] / 2**20:.0f} MB)")
    return "\n".join(lines)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(
        prog="sphex bench",
        description="Time analysis and synthesis on Gauss grids against the DGEMM rate measured "
                    "in the same run.",
        epilog="example: sphex bench --sizes 255 511 --no-memory")
    parser.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_SIZES),
                        help="degrees to time (default: 255 511 1023 2047)")
    parser.add_argument("--batch", default="511x32",
                        help="LMAXxFIELDS batch case, or 'none' (default: 511x32)")
    parser.add_argument("--repeat", type=int, default=3, help="best of this many calls (default 3)")
    parser.add_argument("--no-memory", action="store_true", help="skip the peak-memory subprocesses")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    args = parser.parse_args(argv)
    batch = None
    if args.batch.lower() != "none":
        try:
            lb, kb = (int(v) for v in args.batch.lower().split("x"))
        except ValueError:
            parser.error(f"--batch must look like 511x32 or 'none', got {args.batch!r}")
        batch = (lb, kb)
    if any(L < 1 for L in args.sizes) or args.repeat < 1:
        parser.error("sizes and --repeat must be positive integers")
    result = run(args.sizes, batch, not args.no_memory, args.repeat)
    print(json.dumps(result, indent=2) if args.json else format_table(result))
    return 0


if __name__ == "__main__":
    sys.exit(main())
