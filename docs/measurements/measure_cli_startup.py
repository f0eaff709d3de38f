"""Warm command-line calls, end to end (run by hand; not part of the tests).

    PYTHONPATH=. python docs/measurements/measure_cli_startup.py [--repeat 5] [--nlat 64]
        [--before OTHER_CHECKOUT]

Writes a 64 x 128 (``--nlat`` x 2 ``--nlat``) field on the equiangular cell-centre
grid to a temporary folder, runs ``python -m sphex --help``, ``inspect``,
``analyze`` (netCDF output) and ``python -c pass`` each ``--repeat`` times as
fresh processes (after one untimed call that fills numba's cache), and prints
the best and the median wall time and the best CPU time (user + system) of
each.  On a shared machine the CPU time is the steadier figure.  It also lists
which heavy packages each command imported.  With ``--before`` the same
commands of another checkout of sphex (an older commit unpacked beside this
one) run too, alternating with this one's call by call, so that both see the
same load.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HEAVY = ("numba", "scipy.fft", "scipy.special", "scipy.linalg", "xarray", "netCDF4", "dask",
         "dask.array", "distributed", "matplotlib", "pandas")


def run_once(cmd: list[str], env: dict, folder: str) -> tuple[float, float]:
    # run in the temporary folder: python -m puts the working directory first on the path
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, env=env, cwd=folder, stdout=subprocess.DEVNULL,
                         stderr=subprocess.PIPE)
    _, status, usage = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t0
    p.returncode = os.waitstatus_to_exitcode(status)
    err = p.stderr.read().decode()
    p.stderr.close()
    if p.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed ({p.returncode}):\n{err}")
    return wall, usage.ru_utime + usage.ru_stime


def imported(args: list[str], env: dict, folder: str) -> list[str]:
    code = ("import runpy, sys\nsys.argv = ['sphex'] + %r\ntry:\n"
            "    runpy.run_module('sphex', run_name='__main__')\nexcept SystemExit:\n    pass\n"
            "print(' '.join(m for m in %r if m in sys.modules), file=sys.stderr)\n"
            % (args, HEAVY))
    p = subprocess.run([sys.executable, "-c", code], env=env, cwd=folder,
                       capture_output=True, text=True)
    return p.stderr.strip().splitlines()[-1].split() if p.stderr.strip() else []


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--nlat", type=int, default=64)
    ap.add_argument("--before", metavar="DIR",
                    help="another checkout of sphex to time alternately with this one")
    a = ap.parse_args()
    import numpy as np
    import xarray as xr

    from sphex.grids import Grid

    folder = tempfile.mkdtemp(prefix="sphex-cli-startup-")
    g = Grid.equiangular(a.nlat, 2 * a.nlat, "cells")
    rng = np.random.default_rng(1)
    da = xr.DataArray(rng.standard_normal(g.shape), dims=("lat", "lon"),
                      coords={"lat": g.lat, "lon": g.lon}, name="t", attrs={"units": "K"})
    da.lat.attrs.update(units="degrees_north")
    da.lon.attrs.update(units="degrees_east")
    small = str(Path(folder) / "small.nc")
    da.to_dataset().to_netcdf(small)
    trees = {"this": str(Path(__file__).resolve().parents[2])}
    if a.before:
        trees = {"before": str(Path(a.before).resolve()), "after": trees["this"]}
    envs = {}
    for label, root in trees.items():
        envs[label] = dict(os.environ)
        envs[label]["PYTHONPATH"] = root + os.pathsep + os.environ.get("PYTHONPATH", "")
    out = str(Path(folder) / "coef.nc")
    cases = {
        "python -c pass": [sys.executable, "-c", "pass"],
        "sphex --help": [sys.executable, "-m", "sphex", "--help"],
        "sphex inspect": [sys.executable, "-m", "sphex", "inspect", small],
        "sphex analyze": [sys.executable, "-m", "sphex", "analyze", small, "-o", out,
                          "--overwrite"],
    }
    for env in envs.values():
        run_once(cases["sphex analyze"], env, folder)  # fills numba's cache if it is empty
    print(f"load average before: {os.getloadavg()[0]:.2f}")
    print("| command | code | best wall s | median wall s | best CPU s | median CPU s "
          "| heavy packages imported |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for label, cmd in cases.items():
        times: dict[str, list] = {t: [] for t in envs}
        for _ in range(a.repeat):
            for t, env in envs.items():
                times[t].append(run_once(cmd, env, folder))
        for t, env in envs.items():
            walls, cpus = zip(*times[t])
            mods = imported(cmd[3:], env, folder) if cmd[1:3] == ["-m", "sphex"] else []
            print(f"| {label} | {t} | {min(walls):.2f} | {statistics.median(walls):.2f} | "
                  f"{min(cpus):.2f} | {statistics.median(cpus):.2f} | "
                  f"{', '.join(mods) or '-'} |")
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
