"""sphex: spherical-harmonic expansion of global latitude-longitude fields.

The numeric core works on plain numpy arrays::

    >>> import numpy as np, sphex
    >>> grid = sphex.Grid.gauss(31)
    >>> h = sphex.analyze(np.ones((grid.nlat, grid.nlon)), grid)
    >>> round(float(h[0, 0].real), 12)   # sqrt(4 pi) for the "ortho" normalisation
    3.544907701811

xarray adapters live in :mod:`sphex.xr`, figures in :mod:`sphex.plot`.
"""
from sphex.grids import Grid
from sphex.harmonics import Harmonics
from sphex.transform import analyze, synthesize, regrid

__all__ = ["Grid", "Harmonics", "analyze", "synthesize", "regrid"]
__version__ = "0.1.0"
