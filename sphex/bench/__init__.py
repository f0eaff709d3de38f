"""Benchmarks: speed goals as ratios measured in one run, never as tests.

Modules
-------
``command``     the ``sphex bench`` command line (:func:`main`)
``transforms``  analysis and synthesis against the machine's own matrix-product rate,
                peak memory, cold start
``points``      evaluation at scattered points against the transform, an iterative fit
                (``--points``, ``--fit``)
``scaleout``    dask thread scaling and the memory of a streamed long series
                (``sphex bench --scale``)
"""
from __future__ import annotations

from sphex.bench.command import main

__all__ = ["main"]
