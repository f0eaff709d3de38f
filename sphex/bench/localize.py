"""Benchmarks of rotation and localised spectra: time and peak memory, each case in a fresh process.

Cases (the sizes the documentation quotes):

- rotation of one field by general Euler angles at L = 1023 and L = 2047
  (``sphex.rotation.rotate``; O(L^3) work, O(L) working memory per degree in
  flight);
- the multitaper localised spectrum of one L = 1023 field with 20 windows
  (``sphex.localize.local_power``, 20-degree cap, window degree 30: one
  rotation, one synthesis and 20 analyses on the Gauss grid of degree
  L + 30).

Each case runs in a fresh subprocess: the kernels are compiled on a small
case first, the input is made, Linux's high-water mark of resident memory is
reset, and the call is timed (best of ``repeat``).  Peak memory is the
process's high-water mark during the calls (interpreter, kernels and input
included); ``baseline`` is its resident memory just before them, so the
difference is what the call itself needed.  CPU time (all threads) is given
beside wall time: on a shared machine wall time stretches with the load,
CPU time much less.
"""
from __future__ import annotations

import json
import subprocess
import sys

__all__ = ["CASES", "run", "format_table"]

#: (case, lmax) measured by default.
CASES = (("rotate", 1023), ("rotate", 2047), ("local_power", 1023))
LOCAL_CAP_DEG, LOCAL_WINDOW_DEGREE, LOCAL_WINDOWS = 20.0, 30, 20

_CHILD = """\
import json, os, sys, time
import numpy as np
from sphex import Harmonics
from sphex.localize import local_power
from sphex.rotation import rotate

case, L, repeat = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
cap, lwin, count = float(sys.argv[4]), int(sys.argv[5]), int(sys.argv[6])

def rss(key):
    for line in open('/proc/self/status'):
        if line.startswith(key):
            return int(line.split()[1]) * 1024

def field(lmax, seed=1):
    rng = np.random.default_rng(seed)
    c = np.zeros((lmax + 1, lmax + 1), complex)
    for l0 in range(0, lmax + 1, 256):
        l1 = min(lmax + 1, l0 + 256)
        b = rng.standard_normal((l1 - l0, lmax + 1)) + 1j * rng.standard_normal((l1 - l0, lmax + 1))
        b[np.arange(l0, l1)[:, None] < np.arange(lmax + 1)[None, :]] = 0
        c[l0:l1] = b / (np.arange(l0, l1)[:, None] + 1.0)
    c[:, 0] = c[:, 0].real
    return Harmonics(c)

small = field(31)
rotate(small, 10.0, 20.0, 30.0)                          # compile before measuring
local_power(small, 10.0, 20.0, 20.0, 6, n_windows=2)
h = field(L)
if case == "rotate":
    call = lambda: rotate(h, 37.0, 71.3, -123.4)
    check = lambda out: float(np.abs(rotate(out, 123.4, -71.3, -37.0).coef - h.coef).max()
                              / np.abs(h.coef).max())
else:
    call = lambda: local_power(h, -20.0, 140.0, cap, lwin, n_windows=count)
    check = lambda out: float(np.isfinite(out.power).all())
open('/proc/self/clear_refs', 'w').write('5')
base = rss('VmRSS')
best = None
for _ in range(repeat):
    t0, c0 = time.perf_counter(), time.process_time()
    out = call()
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    if best is None or wall < best[0]:
        best = (wall, cpu)
peak = rss('VmHWM')
print(json.dumps(dict(case=case, lmax=L, wall_s=best[0], cpu_s=best[1], baseline_rss_bytes=base,
                      peak_rss_bytes=peak, input_bytes=h.coef.nbytes, check=check(out),
                      load=os.getloadavg()[0])))
"""


def run_case(case: str, lmax: int, repeat: int = 3) -> dict:
    """Time and peak memory of one case in a fresh process (see the module docstring).

    Returns
    -------
    dict
        ``wall_s`` and ``cpu_s`` (best call), ``baseline_rss_bytes`` and
        ``peak_rss_bytes``, ``input_bytes`` (the coefficients), ``check``
        (rotation: relative error of the rotation followed by its inverse;
        local spectrum: 1.0 when every value is finite) and ``load`` (the
        1-minute load average at the end).
    """
    if case not in ("rotate", "local_power"):
        raise ValueError(f"unknown case {case!r}; choose rotate or local_power")
    args = [sys.executable, "-c", _CHILD, case, str(int(lmax)), str(int(repeat)),
            str(LOCAL_CAP_DEG), str(LOCAL_WINDOW_DEGREE), str(LOCAL_WINDOWS)]
    out = subprocess.run(args, capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def run(cases=CASES, repeat: int = 3) -> list[dict]:
    """:func:`run_case` for every ``(case, lmax)`` of ``cases``."""
    return [run_case(case, lmax, repeat) for case, lmax in cases]


def format_table(rows: list[dict]) -> str:
    """The rows of :func:`run` as a small table."""
    lines = ["rotation and localised spectra (each case in a fresh process; local_power: "
             f"{LOCAL_WINDOWS} windows, {LOCAL_CAP_DEG:g}-degree cap, window degree "
             f"{LOCAL_WINDOW_DEGREE})",
             f"{'case':>12} {'lmax':>6} {'wall s':>8} {'cpu s':>8} {'input MB':>9} "
             f"{'baseline MB':>12} {'peak MB':>8} {'check':>9} {'load':>5}"]
    for r in rows:
        lines.append(f"{r['case']:>12} {r['lmax']:>6} {r['wall_s']:>8.3f} {r['cpu_s']:>8.3f} "
                     f"{r['input_bytes'] / 2**20:>9.0f} {r['baseline_rss_bytes'] / 2**20:>12.0f} "
                     f"{r['peak_rss_bytes'] / 2**20:>8.0f} {r['check']:>9.1e} {r['load']:>5.1f}")
    lines.append("(check: rotation, relative error of the rotation and its inverse; "
                 "local_power, 1 when all values are finite)")
    return "\n".join(lines)
