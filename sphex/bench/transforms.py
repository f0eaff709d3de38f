"""Benchmarks: transform speed against the machine's own matrix-product rate.

Speed goals are ratios measured in one run, never absolute times: the
benchmark times a 2048 x 2048 float64 matrix product (numpy / BLAS) beside
the transforms, and reports each transform against the *roofline* time,
8 flops per (degree, order, latitude pair) element at that DGEMM rate.

Run ``sphex bench`` (or ``python -m sphex.bench``, see :mod:`sphex.bench.command`);
``--json`` prints one JSON document for machines.  Peak memory is measured per size in a fresh
subprocess (``ru_maxrss``), so it includes the interpreter and compiled
kernels; the baseline of an idle process is reported beside it.
"""
from __future__ import annotations

import os
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
    return 2.0 * n ** 3 / _best_time(lambda: a @ b, repeat)


def elements(lmax: int, nlat: int) -> int:
    """(degree, order, latitude pair) elements of one Legendre stage."""
    pairs = (nlat + 1) // 2
    return (lmax + 1) * (lmax + 2) // 2 * pairs


BUDGET_S = 1.0  # keep calling while the calls so far took less than this
MAX_CALLS = 30


def _best_time(fn, repeat, budget=BUDGET_S):
    """Best of at least ``repeat`` calls, and of as many more as fit in
    ``budget`` seconds (at most MAX_CALLS): on a shared machine the minimum
    over more calls is the steadier estimate of the undisturbed time."""
    best = np.inf
    spent = 0.0
    calls = 0
    while calls < repeat or (spent < budget and calls < MAX_CALLS):
        t = time.perf_counter()
        fn()
        dt = time.perf_counter() - t
        best = min(best, dt)
        spent += dt
        calls += 1
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
    """Peak RSS of a fresh process doing one synthesis, then one analysis.

    The process synthesises random coefficients, drops them, and analyses the
    values it made, so its peak is what a user's analysis or synthesis of a
    field of that size costs (input, output and working memory), plus the
    interpreter.  Linux's per-process high-water mark is reset before each
    transform, so setting up the random input does not count."""
    code = ("import sys, time, numpy as np\n"
            "from sphex import Grid, Harmonics, analyze, synthesize\n"
            "def hwm():\n"
            "    for line in open('/proc/self/status'):\n"
            "        if line.startswith('VmHWM'): return int(line.split()[1]) * 1024\n"
            "def reset(): open('/proc/self/clear_refs', 'w').write('5')\n"
            f"L = {lmax}\n"
            "g = Grid.gauss(L)\n"
            "def rows(l0, l1, rng):\n"
            "    b = rng.standard_normal((l1 - l0, L + 1)) + 1j * rng.standard_normal((l1 - l0, L + 1))\n"
            "    b[np.arange(l0, l1)[:, None] < np.arange(L + 1)[None, :]] = 0\n"
            "    b[:, 0] = b[:, 0].real\n"
            "    return b\n"
            "rng = np.random.default_rng(1)\n"
            "c = np.zeros((L + 1, L + 1), complex)\n"
            "for l0 in range(0, L + 1, 256):\n"
            "    c[l0:l0 + 256] = rows(l0, min(L + 1, l0 + 256), rng)\n"
            "base = hwm()\n"
            "h = Harmonics(c); del c\n"
            "reset(); t = time.perf_counter(); v = synthesize(h, g); ts = time.perf_counter() - t\n"
            "peak_s = hwm()\n"
            "del h\n"
            "reset(); t = time.perf_counter(); h2 = analyze(v, g); ta = time.perf_counter() - t\n"
            "peak_a = hwm()\n"
            "del v\n"
            "# round trip: the same random rows again, compared block by block\n"
            "rng = np.random.default_rng(1); err = 0.0; amax = 0.0\n"
            "for l0 in range(0, L + 1, 256):\n"
            "    b = rows(l0, min(L + 1, l0 + 256), rng)\n"
            "    err = max(err, float(np.abs(h2.coef[l0:l0 + 256] - b).max()))\n"
            "    amax = max(amax, float(np.abs(b).max()))\n"
            "print(base, peak_s, peak_a, ts, ta, err / amax)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    base, peak_s, peak_a, ts, ta, err = out.stdout.split()[-6:]
    return {"baseline_rss_bytes": int(base), "peak_rss_synthesis_bytes": int(peak_s),
            "peak_rss_analysis_bytes": int(peak_a), "peak_rss_bytes": max(int(peak_s), int(peak_a)),
            "subprocess_synthesis_s": float(ts), "subprocess_analysis_s": float(ta),
            "subprocess_roundtrip_error": float(err)}


def cold_start(tmpdir: str | None = None, repeat: int = 5) -> dict:
    """First calls with an empty numba cache, and warm command-line calls.

    - ``analyze`` + ``synthesize`` at L=255 in a fresh process with an empty
      numba cache (imports included), and the same in a second process;
    - ``sphex demo`` end to end with another empty cache (its wind kernels
      compile in a helper process beside it, see :mod:`sphex.compiling`);
    - ``sphex analyze`` and ``sphex inspect`` of a 64 x 128 file with the cache
      warm: best and median wall time of ``repeat`` fresh processes each.
    """
    import statistics
    import tempfile

    with tempfile.TemporaryDirectory(dir=tmpdir) as tmp:
        env = dict(os.environ, NUMBA_CACHE_DIR=os.path.join(tmp, "numba-cache"))
        for name in ("NUMBA_CPU_NAME", "NUMBA_CPU_FEATURES"):  # let each process decide, as a
            env.pop(name, None)                                  # fresh command line does
        code = ("import time; t = time.perf_counter()\n"
                "import numpy as np\n"
                "from sphex import Grid, analyze, synthesize\n"
                "g = Grid.gauss(255); h = analyze(np.ones(g.shape), g); synthesize(h, g)\n"
                "print(time.perf_counter() - t)\n")
        cold = float(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                                    text=True, check=True).stdout.split()[-1])
        warm = float(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                                    text=True, check=True).stdout.split()[-1])
        demo_env = dict(env, NUMBA_CACHE_DIR=os.path.join(tmp, "numba-cache-demo"))
        t = time.perf_counter()
        subprocess.run([sys.executable, "-m", "sphex", "demo", "--out", os.path.join(tmp, "demo")],
                       env=demo_env, capture_output=True, check=True)
        demo = time.perf_counter() - t
        import xarray as xr  # only here: the benchmark writes a small netCDF file

        from sphex import Grid as _Grid
        g = _Grid.gauss(63)
        path = os.path.join(tmp, "field.nc")
        xr.DataArray(np.cos(np.radians(g.lat))[:, None] * np.ones(g.nlon), dims=("lat", "lon"),
                     coords={"lat": g.lat, "lon": g.lon}, name="f").to_netcdf(path)
        calls = {"analyze": [sys.executable, "-m", "sphex", "analyze", path, "-v", "f", "-o",
                             os.path.join(tmp, "coef.nc"), "--overwrite"],
                 "inspect": [sys.executable, "-m", "sphex", "inspect", path]}
        subprocess.run(calls["analyze"], env=env, capture_output=True, check=True)
        warm_cli = {}
        for name, cli in calls.items():
            times = []
            for _ in range(max(repeat, 1)):
                t = time.perf_counter()
                subprocess.run(cli, env=env, capture_output=True, check=True, cwd=tmp)
                times.append(time.perf_counter() - t)
            warm_cli[name] = (min(times), statistics.median(times))
    return {"first_call_empty_cache_s": cold, "first_call_warm_cache_s": warm,
            "demo_empty_cache_s": demo,
            "cli_analyze_warm_s": warm_cli["analyze"][0],
            "cli_analyze_warm_median_s": warm_cli["analyze"][1],
            "cli_inspect_warm_s": warm_cli["inspect"][0],
            "cli_inspect_warm_median_s": warm_cli["inspect"][1]}


def run(sizes=DEFAULT_SIZES, batch: tuple[int, int] | None = (511, 32), memory: bool = True,
        repeat: int = 3, huge: int | None = None, cold: bool = False,
        vector: int | None = 1023) -> dict:
    """Time the scalar transforms of ``sizes`` (and the ``batch`` case), a vector pair at degree
    ``vector`` (None: skip), then the DGEMM rate; ratios to the roofline (module docstring)."""
    from sphex.bench import vectors
    from sphex.kernels import numba  # sphex sets the vector width before numba loads

    # BLAS worker threads keep spinning for a moment after a product and would
    # compete with the transforms: time the transforms first, the matrix
    # product at the end (best of two measurements, so ratios err on the
    # strict side).
    rows = []
    cases = [(L, 1) for L in sizes]
    if batch:
        cases.append(batch)
    for L, k in cases:
        rows.append(time_transforms(L, k, repeat))
    vector_rows = [vectors.time_vector_pair(vector, repeat, _best_time)] if vector else []
    rate = max(dgemm_rate(), dgemm_rate())
    for r in vector_rows:
        r["elements"] = elements(r["lmax"], r["nlat"])
        vectors.add_ratios(r, rate)
    for r in rows:
        L, k = r["lmax"], r["nfields"]
        roof = 8.0 * r["elements"] / rate
        r["roofline_s"] = roof
        r["analysis_ratio"] = r["analysis_s"] / roof
        r["synthesis_ratio"] = r["synthesis_s"] / roof
        r["analysis_ns_per_element"] = r["analysis_s"] / r["elements"] * 1e9
        r["synthesis_ns_per_element"] = r["synthesis_s"] / r["elements"] * 1e9
        if memory and k == 1:
            r.update(_peak_memory(L))
    result = {"dgemm_gflops": rate / 1e9, "threads": numba.get_num_threads(),
              "cpu_count": os.cpu_count(), "rows": rows, "vector_rows": vector_rows}
    if huge:
        # one synthesis and one analysis in a fresh process: times, peak memory, round trip
        r = {"lmax": huge, "nfields": 1, "nlat": huge + 1, "nlon": 2 * huge + 2,
             "elements": elements(huge, huge + 1)}
        r.update(_peak_memory(huge))
        r["analysis_s"] = r["subprocess_analysis_s"]
        r["synthesis_s"] = r["subprocess_synthesis_s"]
        roof = 8.0 * r["elements"] / rate
        r.update(roofline_s=roof, analysis_ratio=r["analysis_s"] / roof,
                 synthesis_ratio=r["synthesis_s"] / roof,
                 analysis_ns_per_element=r["analysis_s"] / r["elements"] * 1e9,
                 synthesis_ns_per_element=r["synthesis_s"] / r["elements"] * 1e9,
                 roundtrip_error=r["subprocess_roundtrip_error"])
        rows.append(r)
    if cold:
        result["cold_start"] = cold_start()
    return result


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
    lines.append("(peak MB: whole process, high-water mark of one synthesis or analysis in a fresh "
                 "process, input and output included)")
    if result.get("vector_rows"):
        from sphex.bench.vectors import format_rows

        lines += format_rows(result["vector_rows"])
    if "cold_start" in result:
        c = result["cold_start"]
        lines.append(f"cold start: analyze + synthesize at L=255 with an empty numba cache "
                     f"{c['first_call_empty_cache_s']:.1f} s, with a warm cache "
                     f"{c['first_call_warm_cache_s']:.2f} s; 'sphex demo' with an empty cache "
                     f"{c['demo_empty_cache_s']:.1f} s")
        lines.append(f"warm command line, 64 x 128 file (best / median of fresh processes): "
                     f"'sphex analyze' {c['cli_analyze_warm_s']:.2f} / "
                     f"{c['cli_analyze_warm_median_s']:.2f} s, 'sphex inspect' "
                     f"{c['cli_inspect_warm_s']:.2f} / {c['cli_inspect_warm_median_s']:.2f} s")
    return "\n".join(lines)
