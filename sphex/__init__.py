"""sphex: spherical-harmonic expansion of global latitude-longitude fields.

The numeric core works on plain numpy arrays::

    >>> import numpy as np, sphex
    >>> grid = sphex.Grid.gauss(31)
    >>> h = sphex.analyze(np.ones((grid.nlat, grid.nlon)), grid)
    >>> round(float(h[0, 0].real), 12)   # sqrt(4 pi) for the "orthonormal" normalisation
    3.544907701811

Submodules: :mod:`sphex.grids`, :mod:`sphex.legendre`, :mod:`sphex.transform`,
:mod:`sphex.harmonics`, :mod:`sphex.spectra`, :mod:`sphex.filters`,
:mod:`sphex.flow` (wind and current fields), :mod:`sphex.models` and
:mod:`sphex.potential` (gravity and magnetic models), :mod:`sphex.points`
(scattered points, least squares), :mod:`sphex.rotation`,
:mod:`sphex.localize` (localised spectra), :mod:`sphex.xr` (xarray and netCDF),
:mod:`sphex.plot` (figures).  Names are imported on first use, so
``import sphex`` (and ``sphex --help``) stays quick.
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

_NAMES = {
    "Grid": "sphex.grids",
    "Harmonics": "sphex.harmonics",
    "analyze": "sphex.transform",
    "synthesize": "sphex.transform",
    "synthesize_gradient": "sphex.transform",
    "regrid": "sphex.transform",
}
_SUBMODULES = ("grids", "legendre", "transform", "harmonics", "spectra", "filters", "flow",
               "models", "potential", "points", "rotation", "localize", "xr", "plot", "bench")

__all__ = list(_NAMES) + list(_SUBMODULES)


def __getattr__(name: str):
    if name in _NAMES:
        value = getattr(importlib.import_module(_NAMES[name]), name)
    elif name in _SUBMODULES:
        value = importlib.import_module(f"sphex.{name}")
    else:
        raise AttributeError(f"module 'sphex' has no attribute {name!r}")
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
