"""Benchmarks: speed goals as ratios measured in one run, never as tests.

Modules
-------
``command``     the ``sphex bench`` command line (:func:`main`)
``transforms``  analysis and synthesis against the machine's own matrix-product rate,
                peak memory, cold start
``vectors``     a (u, v) pair of vector components against two scalar transforms

``localize``    rotation (L=1023, 2047) and a localised spectrum (L=1023, 20 windows):
                time and peak memory in fresh processes

``points``      evaluation at scattered points against the transform, an iterative fit
                (``--points``, ``--fit``)
``scaleout``    dask thread scaling and the memory of a streamed long series
                (``sphex bench --scale``)
"""
from __future__ import annotations

from sphex.bench.command import main

__all__ = ["main"]
