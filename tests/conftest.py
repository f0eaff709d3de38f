"""Shared fixtures: the seeded generator of every check, and the daily series of the dask checks."""
from __future__ import annotations

import os
import sys

import numpy as np
import pytest

# the reference implementations sit beside the tests (tests/_reference.py)
sys.path.insert(0, os.path.dirname(__file__))


@pytest.fixture
def rng() -> np.random.Generator:
    """Seeded generator: every random check is reproducible."""
    return np.random.default_rng(20261201)


@pytest.fixture
def series(rng):
    """Twelve daily fields on a Gauss grid, as a CF-style DataArray."""
    import xarray as xr

    import sphex
    from _sample_fields import SERIES_LMAX, band_limited_series

    g = sphex.Grid.gauss(SERIES_LMAX)
    vals = band_limited_series(rng, 12, SERIES_LMAX, g)
    time = np.arange("2031-03-01", "2031-03-13", dtype="datetime64[D]").astype("datetime64[ns]")
    return xr.DataArray(vals, dims=("time", "lat", "lon"),
                        coords={"time": time, "lat": g.lat, "lon": g.lon},
                        name="surface_temp", attrs={"units": "K", "long_name": "synthetic field"})
