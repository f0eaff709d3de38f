"""numba kernels: the only place in sphex with hot loops.

Modules
-------
``recursion``  constants of the extended-range arithmetic and the pieces of the
               fully normalised three-term recursion shared by every kernel
               (start values, scaled phase, live-latitude counts, the
               multi-degree advance), and Legendre functions at arbitrary points
``gauss``      Gauss-Legendre nodes and weights (Newton, double-double near the poles)
``scalar``     the analysis and synthesis kernels of scalar fields
``vector``     the analysis and synthesis kernels of tangent vector fields (east,
               north pairs from one recursion of Lambda / sin(theta) per order)
``points``     values, adjoint sums and surface gradient at scattered points, and
               rows of the least-squares design matrix

Each module imports only numpy, numba and its siblings.  Kernels trust their
inputs: the public modules validate shapes, dtypes and ranges before calling
them.  Everything here is fully normalised (orthonormal, no Condon-Shortley
phase); other conventions are per-(l, m) factors applied by the callers.

Importing this package decides numba's vector width once, before numba is
first imported (see :func:`_prefer_wide_vectors`); ``numba`` is re-exported so
that callers outside the package get numba through that decision.
"""
from __future__ import annotations

import os
import sys


def _prefer_wide_vectors() -> None:
    """Let LLVM use 512-bit vectors on CPUs that have them.

    LLVM's tuning for recent x86 server cores prefers 256-bit vectors even
    where AVX-512 exists; for these kernels the full width is about 1.3-1.5x
    faster.  This has to be decided before numba is first imported, so it is
    skipped when numba is already loaded, when NUMBA_CPU_FEATURES is set by the
    user, or when SPHEX_WIDE_VECTORS=0.
    """
    if (os.environ.get("SPHEX_WIDE_VECTORS", "1") == "0" or "numba" in sys.modules
            or "NUMBA_CPU_FEATURES" in os.environ or "NUMBA_CPU_NAME" in os.environ):
        return
    try:
        import llvmlite.binding as llvm

        features = llvm.get_host_cpu_features()
        if not features.get("avx512f", False):
            return
        os.environ["NUMBA_CPU_NAME"] = llvm.get_host_cpu_name()
        os.environ["NUMBA_CPU_FEATURES"] = features.flatten() + ",-prefer-256-bit"
    except Exception:  # pragma: no cover - any failure keeps numba's defaults
        return


_prefer_wide_vectors()


import numba  # noqa: E402  (after the vector-width decision)

__all__ = ["numba"]
