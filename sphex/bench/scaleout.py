"""Benchmark for scale-out: dask thread scaling and the memory of a streamed run.

Two measurements, both ratios taken in one run on this machine:

1. **Throughput** of analysing 64 fields at L=255 (Gauss grid 256 x 512) held
   in a dask array of 8 chunks of 8 fields, on dask's threaded scheduler with
   1 and 2 threads, in a fresh process whose BLAS runs one thread (see
   :func:`throughput_child`).  Each dask thread's numba thread count is stated per row:
   with one numba thread per task the ratio 2 threads / 1 thread shows whether
   the kernels really run in parallel outside the GIL (target >= 1.8 on 2
   cores); the other rows show the thread rule of :mod:`sphex.xr.scaleout` against
   oversubscription and against one plain call from the main thread.
2. **Peak memory** (``ru_maxrss`` of the child, from ``os.wait4``) of the
   command line analysing a generated netCDF file of about 1.3 GB (float64
   fields on the same grid) chunk by chunk, against the file size (target
   <= 0.6).  The file is made in a temporary directory and deleted at the
   end (``--series-gb`` sets its size).  For comparison it measures an idle
   interpreter with the same imports and, with ``--compare``, loading the
   whole variable instead; and it times the transforms of one chunk in memory
   and scales them to the file: their share of the streamed run's wall time
   (target >= 0.7; the rest is reading, writing, dask and the process start).

Run ``sphex bench --scale`` or ``python -m sphex.bench.scaleout`` (``--json`` for machines, ``--quick`` for
a small file).  Timings on a shared machine vary; each throughput figure is
the best of ``--repeat`` runs.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from collections.abc import Callable
from typing import Any

import numpy as np

LMAX = 255
FIELDS = 64
BLOCK = 8
FILE_BYTES = 1.3e9


# ----------------------------------------------------------------------------
# throughput
# ----------------------------------------------------------------------------
def _analyze_block(values: np.ndarray, grid: Any) -> np.ndarray:
    from sphex.transform import analyze

    return analyze(values, grid).coef


def _load_average() -> float | None:
    try:
        return float(os.getloadavg()[0])
    except OSError:
        return None


def throughput(lmax: int = LMAX, fields: int = FIELDS, block: int = BLOCK,
               repeat: int = 5) -> dict:
    """Fields per second for several (dask threads, numba threads) settings."""
    import dask.array as dsa

    from sphex import Grid, Harmonics, synthesize
    from sphex.kernels import numba  # sphex sets the vector width before numba loads
    from sphex.xr.scaleout import cpu_count, in_tasks

    load0 = _load_average()
    grid = Grid.gauss(lmax)
    rng = np.random.default_rng(255)
    coef = rng.standard_normal((fields, lmax + 1, lmax + 1)) \
        + 1j * rng.standard_normal((fields, lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[..., 0] = coef[..., 0].real
    values = synthesize(Harmonics(coef), grid)
    x = dsa.from_array(values, chunks=(block,) + grid.shape)
    out_chunks = ((block,) * (fields // block) + ((fields % block,) if fields % block else ()),
                  (lmax + 1,), (lmax + 1,))

    def lazy(func):
        return dsa.map_blocks(func, x, grid, dtype=np.complex128, chunks=out_chunks)

    plain = lazy(_analyze_block)
    ruled = lazy(in_tasks(_analyze_block))
    check = plain.compute(scheduler="sync")  # also compiles the kernels
    err = float(np.abs(check - coef).max() / np.abs(coef).max())
    cores = cpu_count()
    top = numba.config.NUMBA_NUM_THREADS
    pools: list[Any] = []
    try:
        settings = _thread_settings(plain, ruled, values, grid, cores, top, pools)
        best = _best_interleaved([fn for _, _, _, fn in settings], repeat)
    finally:
        for pool in pools:
            pool.shutdown(wait=True)
    rows = [{"setting": label, "dask_threads": nd, "numba_threads": nn, "seconds": w,
             "fields_per_s": fields / w, "cpu_over_wall": c / w}
            for (label, nd, nn, _), (w, c) in zip(settings, best)]
    one, two = rows[0]["fields_per_s"], rows[1]["fields_per_s"]
    return {"lmax": lmax, "fields": fields, "block": block, "cores": cores,
            "load_before": load0, "load_after": _load_average(),
            "numba_max_threads": top, "roundtrip_error": err, "rows": rows,
            "scaling_2_over_1": two / one, "scaling_target": 1.8}


def _thread_settings(plain: Any, ruled: Any, values: np.ndarray, grid: Any, cores: int,
                     top: int, pools: list[Any]
                     ) -> list[tuple[str, int | None, int, Callable[[], None]]]:
    """(label, dask threads, numba threads, run) of each setting compared; the thread pools
    made for them are added to ``pools`` (the caller shuts them down)."""
    from concurrent.futures import ThreadPoolExecutor

    import dask

    from sphex.kernels import numba  # sphex sets the vector width before numba loads
    from sphex.xr.scaleout import initialize_pool_thread

    def on_pool(n: int, k: int | None, arr) -> Any:
        # one long-lived pool per setting, as in a long run: thread start-up is not timed
        inner = max(1, min(cores // n, top)) if k is None else k
        pool = ThreadPoolExecutor(n, initializer=initialize_pool_thread, initargs=(inner,))
        pools.append(pool)
        conf = {"scheduler": "threads", "pool": pool, "num_workers": n,
                "sphex.task-threads": inner}

        def go() -> None:
            with dask.config.set(conf):
                arr.compute()
        return go

    def main_thread() -> None:
        numba.set_num_threads(top)
        _analyze_block(values, grid)

    rule1 = max(1, min(cores // 1, top))
    rule2 = max(1, min(cores // 2, top))
    return [
        ("dask 1 thread, numba 1 per task", 1, 1, on_pool(1, 1, plain)),
        ("dask 2 threads, numba 1 per task", 2, 1, on_pool(2, 1, plain)),
        (f"dask 1 thread, sphex rule ({rule1} numba)", 1, rule1, on_pool(1, None, ruled)),
        (f"dask 2 threads, sphex rule ({rule2} numba)", 2, rule2, on_pool(2, None, ruled)),
        (f"dask 2 threads, numba {top} per task (no rule)", 2, top, on_pool(2, top, plain)),
        (f"one call, main thread, numba {top}", None, top, main_thread),
    ]


def _best_interleaved(runs: list[Callable[[], None]], repeat: int) -> list[tuple[float, float]]:
    """Best (wall, CPU) seconds of each run over ``repeat`` rounds, after one warm-up round."""
    for fn in runs:  # warm-up: every pool thread has run the kernels once
        fn()
    best = [(math.inf, 0.0)] * len(runs)
    # interleaved repeats: a change in the machine's load hits every setting alike
    for _ in range(repeat):
        for i, fn in enumerate(runs):
            w0, c0 = time.perf_counter(), time.process_time()
            fn()
            w, c = time.perf_counter() - w0, time.process_time() - c0
            if w < best[i][0]:
                best[i] = (w, c)
    return best


def throughput_child(lmax: int = LMAX, repeat: int = 5) -> dict:
    """:func:`throughput` in a fresh process whose BLAS runs one thread.

    BLAS (OpenBLAS here) has one thread count for the whole process, set when
    it loads; a dask task cannot limit it for itself.  With its default (one
    thread per core) a single dask task already keeps every core busy in the
    transform's matrix products, and adding dask threads only oversubscribes.
    The measurement therefore runs with ``OPENBLAS_NUM_THREADS=1`` (and the
    same for MKL), the setting dask.distributed gives its workers; inside
    :func:`sphex.xr.scaleout.thread_pool` the same limit is applied by
    ``threadpoolctl`` when that package is installed.
    """
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    code = ("import json, sys\n"
            "from sphex.bench.scaleout import throughput\n"
            f"print(json.dumps(throughput(lmax={int(lmax)}, repeat={int(repeat)})))\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env)
    if r.returncode != 0:
        raise RuntimeError(f"throughput run failed: {r.stderr[-400:]}")
    res = json.loads(r.stdout.strip().splitlines()[-1])
    res["blas_threads"] = 1
    return res


# ----------------------------------------------------------------------------
# memory of a streamed command-line run
# ----------------------------------------------------------------------------
def make_series(path: Path, nbytes: float = FILE_BYTES, lmax: int = LMAX,
                block: int = 40) -> dict:
    """Write float64 random fields on a Gauss grid until the data reach ``nbytes``."""
    import netCDF4

    from sphex import Grid

    grid = Grid.gauss(lmax)
    field = grid.nlat * grid.nlon * 8
    n = max(1, int(math.ceil(nbytes / field)))
    rng = np.random.default_rng(1300)
    with netCDF4.Dataset(path, "w", format="NETCDF4") as d:
        d.title = "synthetic benchmark series (random numbers, not data)"
        d.createDimension("time", n)
        d.createDimension("lat", grid.nlat)
        d.createDimension("lon", grid.nlon)
        t = d.createVariable("time", "f8", ("time",))
        t.units = "hours since 2040-01-01 00:00:00"
        t.calendar = "standard"
        t[:] = np.arange(n, dtype=np.float64)
        la = d.createVariable("lat", "f8", ("lat",))
        la.units, la.standard_name = "degrees_north", "latitude"
        la[:] = grid.lat
        lo = d.createVariable("lon", "f8", ("lon",))
        lo.units, lo.standard_name = "degrees_east", "longitude"
        lo[:] = grid.lon
        v = d.createVariable("field", "f8", ("time", "lat", "lon"))
        v.units = "1"
        v.long_name = "synthetic random field"
        for i in range(0, n, block):
            k = min(block, n - i)
            v[i:i + k] = rng.standard_normal((k, grid.nlat, grid.nlon))
    return {"fields": n, "data_bytes": n * field, "file_bytes": path.stat().st_size}


# The measured command is started by a small launcher process: a child forked
# straight from this (large) process would count this process's pages in its
# ru_maxrss until it execs, which inflates small readings.
_LAUNCHER = """\
import os, sys, time
t = time.perf_counter()
pid = os.fork()
if pid == 0:
    os.execv(sys.argv[1], sys.argv[1:])
_, status, usage = os.wait4(pid, 0)
sys.stderr.write("\\n@@rusage %d %d %.6f\\n" % (usage.ru_maxrss, os.waitstatus_to_exitcode(status),
                                            time.perf_counter() - t))
"""


def _peak_rss(cmd: list[str], env: dict | None = None) -> dict:
    """Run ``cmd``; its own peak RSS (bytes), exit status and wall time."""
    r = subprocess.run([sys.executable, "-S", "-c", _LAUNCHER, *cmd], capture_output=True,
                       env=env)
    err = r.stderr.decode(errors="replace")
    head, _, tail = err.rpartition("\n@@rusage ")
    maxrss, code, seconds = tail.split()
    return {"peak_rss_bytes": int(maxrss) * 1024, "exit": int(code), "seconds": float(seconds),
            "stdout": r.stdout.decode(errors="replace")[-400:], "stderr": head[-400:]}


def memory(nbytes: float = FILE_BYTES, chunk: int | None = None, compare: bool = False,
           workdir: str | None = None) -> dict:
    """Peak RSS of streamed analysis of a generated file, as a fraction of its size."""
    tmp = Path(tempfile.mkdtemp(prefix="sphex-bench-scale-", dir=workdir))
    try:
        src = tmp / "series.nc"
        made = make_series(src, nbytes)
        out = tmp / "coef.nc"
        chunks = f"time={chunk}" if chunk else None
        how = "sphex analyze --chunks (command line)"
        cmd = [sys.executable, "-m", "sphex.cli", "analyze", str(src), "-v", "field",
               "-o", str(out), "--overwrite"] + (["--chunks", chunks] if chunks else [])
        run = _peak_rss(cmd)
        if run["exit"] != 0:
            raise RuntimeError(f"streamed run failed: {run['stderr']}")
        out_size = out.stat().st_size
        out.unlink()
        res = {"file": made, "streamed": {"how": how, "chunks": chunks or "default", **run,
                                          "output_bytes": out_size}}
        res["transforms"] = _transform_share(made["fields"], run["seconds"], chunk)
        res["peak_over_file"] = run["peak_rss_bytes"] / made["file_bytes"]
        res["target"] = 0.6
        res["idle"] = _peak_rss([sys.executable, "-c",
                                 "import sphex.xr, dask.array, netCDF4, distributed"])
        if compare:
            code = ("import sys, xarray as xr, sphex.xr as sxr\n"
                    "da = xr.open_dataset(sys.argv[1])['field'].load()\n"
                    "ds = sxr.analyze(da)\n"
                    "sxr.write_dataset(ds, sys.argv[2], True)\n")
            mem = _peak_rss([sys.executable, "-c", code, str(src), str(out)])
            res["in_memory"] = mem
            res["in_memory_over_file"] = mem["peak_rss_bytes"] / made["file_bytes"]
        return res
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _transform_share(fields: int, seconds: float, chunk: int | None,
                     lmax: int = LMAX, repeat: int = 3) -> dict:
    """The transforms of a streamed run alone: one chunk analysed in memory (all cores,
    best of ``repeat``), scaled to the series, as a share of the run's wall time."""
    from sphex import Grid
    from sphex.transform import analyze
    from sphex.xr.scaleout import default_block

    grid = Grid.gauss(lmax)
    block = min(chunk or default_block(8 * grid.nlat * grid.nlon), fields)
    values = np.random.default_rng(7).standard_normal((block, grid.nlat, grid.nlon))
    analyze(values, grid)
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        analyze(values, grid)
        best = min(best, time.perf_counter() - t0)
    alone = best * fields / block
    return {"block": block, "block_seconds": best, "series_seconds": alone,
            "share_of_wall": alone / seconds, "target": 0.7}


# ----------------------------------------------------------------------------
def run(quick: bool = False, repeat: int = 5, memory_check: bool = True,
        compare: bool = False, chunk: int | None = None,
        series_bytes: float | None = None) -> dict:
    """Both measurements as one dict (what ``sphex bench --scale`` reports)."""
    res: dict[str, Any] = {"throughput": throughput_child(lmax=127 if quick else LMAX,
                                                          repeat=1 if quick else repeat)}
    if memory_check:
        nbytes = series_bytes or (1.3e8 if quick else FILE_BYTES)
        res["memory"] = memory(nbytes=nbytes, chunk=chunk, compare=compare)
    return res


def format_report(res: dict) -> str:
    t = res["throughput"]
    blas = f", BLAS {t['blas_threads']} thread" if "blas_threads" in t else ""
    lines = [f"dask throughput: {t['fields']} fields at L={t['lmax']} in chunks of {t['block']}, "
             f"{t['cores']} cores{blas} (round-trip error {t['roundtrip_error']:.1e})",
             f"  {'setting':<46} {'seconds':>8} {'fields/s':>9} {'cpu/wall':>9}"]
    for r in t["rows"]:
        lines.append(f"  {r['setting']:<46} {r['seconds']:>8.3f} {r['fields_per_s']:>9.1f} "
                     f"{r['cpu_over_wall']:>9.2f}")
    ok = "meets" if t["scaling_2_over_1"] >= t["scaling_target"] else "misses"
    lines.append(f"  2 dask threads / 1 (one numba thread each): {t['scaling_2_over_1']:.2f}x "
                 f"({ok} the {t['scaling_target']}x target)")
    lines.append("  (cpu/wall is process CPU time over wall time: above 1 means the threads ran "
                 "at once, which a held GIL would prevent)")
    if t.get("load_before") is not None:
        lines.append(f"  load average before/after: {t['load_before']:.2f} / {t['load_after']:.2f} "
                     f"on {t['cores']} cores (other programs running lower these figures)")
    if "memory" in res:
        m = res["memory"]
        s = m["streamed"]
        gb = m["file"]["file_bytes"] / 1e9
        lines.append("")
        lines.append(f"streamed analysis of a {gb:.2f} GB file ({m['file']['fields']} float64 "
                     f"fields, chunks {s['chunks']}) via {s['how']}:")
        ok = "meets" if m["peak_over_file"] <= m["target"] else "misses"
        lines.append(f"  peak RSS {s['peak_rss_bytes'] / 2**20:.0f} MiB = {m['peak_over_file']:.2f} "
                     f"of the file ({ok} the {m['target']} target), {s['seconds']:.1f} s, "
                     f"{m['file']['fields'] / s['seconds']:.0f} fields/s")
        if "transforms" in m:
            tr = m["transforms"]
            ok = "meets" if tr["share_of_wall"] >= tr["target"] else "misses"
            lines.append(f"  the transforms alone (chunks of {tr['block']} in memory, all cores): "
                         f"{tr['series_seconds']:.1f} s = {tr['share_of_wall']:.0%} of the wall "
                         f"time ({ok} the {tr['target']:.0%} target; the rest is reading, "
                         "writing, dask and the start of the process)")
        lines.append(f"  idle interpreter with the same imports: "
                     f"{m['idle']['peak_rss_bytes'] / 2**20:.0f} MiB")
        if "in_memory" in m:
            lines.append(f"  whole variable loaded instead: "
                         f"{m['in_memory']['peak_rss_bytes'] / 2**20:.0f} MiB = "
                         f"{m['in_memory_over_file']:.2f} of the file")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``python -m sphex.bench.scaleout [--quick] [--json]``."""
    p = argparse.ArgumentParser(prog="sphex bench --scale", description=__doc__.splitlines()[0],
                                epilog="example: python -m sphex.bench.scaleout --quick")
    p.add_argument("--quick", action="store_true", help="L=127 and a 0.13 GB file")
    p.add_argument("--repeat", type=int, default=5, help="best of this many runs (default 5)")
    p.add_argument("--no-memory", action="store_true", help="skip the 1.3 GB memory run")
    p.add_argument("--compare", action="store_true",
                   help="also measure loading the whole variable (needs about 6x the file in RAM)")
    p.add_argument("--chunk", type=int, default=None, metavar="N",
                   help="fields per chunk for the streamed run (default: sphex's)")
    p.add_argument("--series-gb", type=float, default=None, metavar="GB",
                   help="size of the generated series for the streamed run (default 1.3; "
                        "e.g. 2 for the long-series figure of docs/long-series.md)")
    p.add_argument("--json", action="store_true", help="print JSON")
    a = p.parse_args(argv)
    if a.repeat < 1 or (a.chunk is not None and a.chunk < 1):
        p.error("--repeat and --chunk must be 1 or more")
    if a.series_gb is not None and not 0 < a.series_gb <= 1000:
        p.error("--series-gb must be above 0 (and at most 1000)")
    res = run(a.quick, a.repeat, not a.no_memory, a.compare, a.chunk,
              None if a.series_gb is None else a.series_gb * 1e9)
    print(json.dumps(res, indent=2) if a.json else format_report(res))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
