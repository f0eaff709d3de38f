"""Long-series throughput of a streamed analysis, and the share of it in the transforms
(run by hand; not part of the tests).

    PYTHONPATH=. python docs/measurements/measure_long_series.py [--gb 2] [--file F] [--chunks N]

Generates (or reuses, ``--file``) a series of float64 random fields at L=255
(256 x 512 Gauss grid, 1 MiB per field; ``--gb 2`` makes 1908 of them) in a
temporary folder, then:

1. runs ``python -m sphex analyze SERIES -o COEF`` as a fresh process (dask's
   local threaded scheduler, default chunks unless ``--chunks``) and reports
   its wall time and fields per second;
2. runs :func:`sphex.xr.streaming.stream_analyze` in this process with
   :func:`sphex.transform.analyze` wrapped in a timer, and reports the time
   the dask threads spent inside the transforms as a share of the wall time
   times the number of dask threads (1.0: the threads did nothing else), and
   the time in the whole task function (reading excluded; conversion to the
   cosine/sine form included); the same as CPU time (the threads' own, against
   the process's), which other programs on a shared machine disturb less, with
   the CPU time of the netCDF reads and writes (xarray's netCDF4 array
   wrapper) beside it;
3. times the same transforms in memory (blocks of the chunk size from the
   main thread, all cores) on a few chunks and scales them to the series: the
   time the work would take with no reading, writing or scheduling.
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--gb", type=float, default=2.0, help="size of the generated series")
    ap.add_argument("--file", help="use this series (variable 'field') instead")
    ap.add_argument("--chunks", type=int, default=None, help="fields per chunk (default: sphex's)")
    ap.add_argument("--keep", action="store_true", help="keep the generated series")
    a = ap.parse_args()
    import numpy as np
    import xarray as xr

    from sphex.bench.scaleout import make_series

    folder = Path(tempfile.mkdtemp(prefix="sphex-long-series-"))
    if a.file:
        src = Path(a.file)
    else:
        src = folder / "series.nc"
        t0 = time.perf_counter()
        made = make_series(src, a.gb * 1e9)
        print(f"generated {made['fields']} fields, {made['file_bytes'] / 1e9:.2f} GB in "
              f"{time.perf_counter() - t0:.0f} s")
    n = xr.open_dataset(src).sizes["time"]
    out = folder / "coef.nc"
    chunk_args = ["--chunks", f"time={a.chunks}"] if a.chunks else []
    print(f"load average {os.getloadavg()[0]:.2f}")

    # 1. the command line, end to end
    env = dict(os.environ)
    env["PYTHONPATH"] = str(Path(__file__).resolve().parents[2]) + os.pathsep + \
        env.get("PYTHONPATH", "")
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "sphex", "analyze", str(src), "-v", "field", "-o",
                    str(out), "--overwrite", *chunk_args], check=True, env=env,
                   stdout=subprocess.DEVNULL)
    wall_cli = time.perf_counter() - t0
    print(f"sphex analyze: {n} fields in {wall_cli:.1f} s, {n / wall_cli:.0f} fields/s "
          f"(load average {os.getloadavg()[0]:.2f})")

    # 2. the same run in this process, the transforms timed inside the dask tasks
    import dask

    import sphex.transform as transform
    import sphex.xr.fields as fields
    from sphex.xr.streaming import stream_analyze

    lock = threading.Lock()
    from xarray.backends.netCDF4_ import NetCDF4ArrayWrapper as wrapper

    spent = {"transform": 0.0, "task": 0.0, "calls": 0, "transform_cpu": 0.0, "task_cpu": 0.0,
             "read_cpu": 0.0, "write_cpu": 0.0}
    plain, block = transform.analyze, fields._analyze_block
    get, put = wrapper.__getitem__, wrapper.__setitem__

    def timed_io(fn, label):
        def run(*args, **kwargs):
            c = time.thread_time()
            try:
                return fn(*args, **kwargs)
            finally:
                with lock:
                    spent[label] += time.thread_time() - c
        return run

    def timed_analyze(*args, **kwargs):
        t, c = time.perf_counter(), time.thread_time()
        try:
            return plain(*args, **kwargs)
        finally:
            with lock:
                spent["transform"] += time.perf_counter() - t
                spent["transform_cpu"] += time.thread_time() - c
                spent["calls"] += 1

    def timed_block(*args, **kwargs):
        t, c = time.perf_counter(), time.thread_time()
        try:
            return block(*args, **kwargs)
        finally:
            with lock:
                spent["task"] += time.perf_counter() - t
                spent["task_cpu"] += time.thread_time() - c

    transform.analyze, fields._analyze_block = timed_analyze, timed_block
    wrapper.__getitem__ = timed_io(get, "read_cpu")
    wrapper.__setitem__ = timed_io(put, "write_cpu")
    threads = dask.config.get("num_workers", None) or os.cpu_count()
    try:
        t0, c0 = time.perf_counter(), time.process_time()
        r = stream_analyze(src, "field", out, overwrite=True, progress=False,
                           chunks={"time": a.chunks} if a.chunks else None)
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    finally:
        transform.analyze, fields._analyze_block = plain, block
        wrapper.__getitem__, wrapper.__setitem__ = get, put
    print(f"in process: {r.fields} fields in {r.chunks} chunks of {r.block}, {wall:.1f} s, "
          f"{r.fields / wall:.0f} fields/s, {threads} dask threads")
    print(f"  transforms {spent['transform']:.1f} thread-s = "
          f"{spent['transform'] / (wall * threads):.0%} of wall x threads; task functions "
          f"{spent['task']:.1f} thread-s = {spent['task'] / (wall * threads):.0%}")
    print(f"  CPU: process {cpu:.1f} s, in the transforms {spent['transform_cpu']:.1f} s "
          f"({spent['transform_cpu'] / cpu:.0%}), in the task functions {spent['task_cpu']:.1f} s "
          f"({spent['task_cpu'] / cpu:.0%}); reading {spent['read_cpu']:.1f} s "
          f"({spent['read_cpu'] / cpu:.0%}), writing {spent['write_cpu']:.1f} s "
          f"({spent['write_cpu'] / cpu:.0%}); load average {os.getloadavg()[0]:.2f}")

    # 3. the transforms alone, in memory
    from sphex.grids import Grid

    grid = Grid.gauss(255)
    rng = np.random.default_rng(5)
    values = rng.standard_normal((r.block, grid.nlat, grid.nlon))
    plain(values, grid)
    best = min(_timed(lambda: plain(values, grid)) for _ in range(5))
    alone = best * r.fields / r.block
    print(f"in memory: {r.block} fields in {best * 1e3:.0f} ms (all cores), so {alone:.1f} s "
          f"for the series = {alone / wall_cli:.0%} of the command's wall time, "
          f"{alone / wall:.0%} of the in-process run's")
    out.unlink(missing_ok=True)
    if not a.file and not a.keep:
        src.unlink()
    if not any(folder.iterdir()):
        folder.rmdir()


def _timed(fn) -> float:
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


if __name__ == "__main__":
    main()
