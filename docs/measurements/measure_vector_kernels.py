"""First call and warm speed of the vector transforms (run by hand; not part of the tests).

    NUMBA_CACHE_DIR=$(mktemp -d) PYTHONPATH=. python docs/measurements/measure_vector_kernels.py

With an empty numba cache the first line is the compile time of every vector
kernel (a single pair and a batch of 3 pairs at L=63); the others are the best
of 3 calls at L=511 (one pair) and L=255 (a batch of 8 pairs), with sums of the
absolute values of the outputs, which must agree to the last digit between two
versions of the code that claim the same results.
"""
import time

t0 = time.perf_counter()
import numpy as np  # noqa: E402

import sphex  # noqa: E402
from sphex.vector_transform import analyze_vector, synthesize_vector  # noqa: E402

t1 = time.perf_counter()
g = sphex.Grid.gauss(63)
rng = np.random.default_rng(1)
u = rng.standard_normal((1,) + g.shape)
v = rng.standard_normal((1,) + g.shape)
p, c = analyze_vector(u[0], v[0], g)
synthesize_vector(p, c, g)
ub = rng.standard_normal((3,) + g.shape)
pb, cb = analyze_vector(ub, ub[::-1], g)
synthesize_vector(pb, cb, g)
t2 = time.perf_counter()
print(f"imports {t1 - t0:.2f} s, first calls (single pair and batch) {t2 - t1:.2f} s")


def best(f, n=3):
    times = []
    for _ in range(n):
        a = time.perf_counter()
        r = f()
        times.append(time.perf_counter() - a)
    return min(times), r


for L, K in ((511, 1), (255, 8)):
    g = sphex.Grid.gauss(L)
    u = rng.standard_normal((K,) + g.shape)
    v = rng.standard_normal((K,) + g.shape)
    ta, (p, c) = best(lambda: analyze_vector(u, v, g))
    ts, (uu, vv) = best(lambda: synthesize_vector(p, c, g))
    print(f"L={L} K={K}: analysis {ta * 1e3:.1f} ms, synthesis {ts * 1e3:.1f} ms, "
          f"sum|psi| {np.abs(p.coef).sum():.15e}, sum|u| {np.abs(uu).sum():.15e}")
