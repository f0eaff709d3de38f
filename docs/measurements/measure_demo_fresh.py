"""The demo on an empty numba cache, stage by stage (run by hand; not part of the tests).

    PYTHONPATH=. python docs/measurements/measure_demo_fresh.py [--out DIR] [--keep-cache]

Runs ``sphex demo`` in this process with ``NUMBA_CACHE_DIR`` set to a new
empty directory (unless ``--keep-cache``, which uses the one in the
environment), times each stage of the demo (imports, topography,
temperature, winds, report) and lists every numba compilation of the run:
the kernel, its type signature, its own time and the stage it fell in.
Compilations nested in another one (a kernel calling another dispatcher)
are listed indented; only the outermost count towards a stage's total.
Each time is given as wall time and as CPU time (the process's for a stage, the
compiling thread's for a kernel): on a shared machine the CPU time is what the
work costs, the wall time what the other programs made of it.  The wind kernels
compile in a helper process beside the run (``sphex.compiling.compile_beside``):
their compilations are not listed here, and the stage "waiting for the helper"
is the time the run waited for them.
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from collections import defaultdict


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", default=None, help="demo output folder (default: a temporary one)")
    p.add_argument("--keep-cache", action="store_true",
                   help="use NUMBA_CACHE_DIR from the environment instead of a fresh one")
    a = p.parse_args()
    if not a.keep_cache:
        os.environ["NUMBA_CACHE_DIR"] = tempfile.mkdtemp(prefix="sphex-fresh-numba-")
    out = a.out or tempfile.mkdtemp(prefix="sphex-demo-")
    t_start = time.perf_counter()

    import sphex.kernels  # noqa: F401  (the vector-width decision before numba loads)
    from numba.core import event

    stage = ["imports"]
    records: list[tuple[str, str, int, float, float, str]] = []
    depth = [0]
    starts: list[float] = []

    class Compiles(event.Listener):
        def on_start(self, ev):  # noqa: D401
            depth[0] += 1
            starts.append((time.perf_counter(), time.thread_time()))

        def on_end(self, ev):
            t0, c0 = starts.pop()
            t, c = time.perf_counter() - t0, time.thread_time() - c0
            depth[0] -= 1
            disp = ev.data["dispatcher"]
            name = f"{disp.py_func.__module__}.{disp.py_func.__qualname__}"
            sig = ", ".join(str(x) for x in ev.data["args"])
            records.append((name, sig, depth[0], t, c, stage[0]))

    event.register("numba:compile", Compiles())

    import sphex.demo as demo
    from sphex.cli.progress import Progress

    stage_time: dict[str, float] = defaultdict(float)
    stage_cpu: dict[str, float] = defaultdict(float)
    stage_time["imports"] = time.perf_counter() - t_start
    stage_cpu["imports"] = time.process_time()

    def timed(label, fn):
        def wrapper(*args, **kwargs):
            stage[0] = label
            t0, c0 = time.perf_counter(), time.process_time()
            try:
                return fn(*args, **kwargs)
            finally:
                stage_time[label] += time.perf_counter() - t0
                stage_cpu[label] += time.process_time() - c0
                stage[0] = "between stages"
        return wrapper

    demo._topography_products = timed("topography", demo._topography_products)
    demo._temperature_products = timed("temperature", demo._temperature_products)
    demo._wind_products = timed("winds", demo._wind_products)
    demo._report_product = timed("report", demo._report_product)
    import sphex.compiling as compiling

    compiling.BesideCompilation.close = timed("waiting for the helper",
                                              compiling.BesideCompilation.close)
    t0 = time.perf_counter()
    demo.run(out, overwrite=True, progress=Progress)
    total = time.perf_counter() - t_start
    print(f"\nwhole run {total:.1f} s wall, {time.process_time():.1f} s CPU (demo.run "
          f"{time.perf_counter() - t0:.1f} s), load average {os.getloadavg()[0]:.1f}, cache "
          f"{os.environ.get('NUMBA_CACHE_DIR')}", file=sys.stderr)
    outer, outer_cpu = defaultdict(float), defaultdict(float)
    for name, sig, d, t, c, st in records:
        if d == 0:
            outer[st] += t
            outer_cpu[st] += c
    print("\n| stage | wall s | CPU s | numba compiling, wall s | compiling, CPU s |",
          file=sys.stderr)
    print("| --- | --- | --- | --- | --- |", file=sys.stderr)
    for st in ("imports", "topography", "temperature", "report", "waiting for the helper",
               "winds"):
        print(f"| {st} | {stage_time[st]:.1f} | {stage_cpu[st]:.1f} | {outer[st]:.1f} | "
              f"{outer_cpu[st]:.1f} |", file=sys.stderr)
    print("\ncompilations (stage, wall s, CPU s, kernel, signature):", file=sys.stderr)
    for name, sig, d, t, c, st in records:
        print(f"  {st:12s} {t:6.2f} {c:6.2f}  {'  ' * d}{name}({sig})", file=sys.stderr)


if __name__ == "__main__":
    main()
