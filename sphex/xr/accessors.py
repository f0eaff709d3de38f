"""The ``.sphex`` accessors of xarray objects: thin bindings of the adapter functions.

``da.sphex`` on a gridded DataArray and ``ds.sphex`` on a coefficient Dataset;
registered with xarray when :mod:`sphex.xr` is imported.  The adapter
functions are imported when a method is first called, so that registering the
accessors (on every import of :mod:`sphex.xr`) loads neither numba nor scipy.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from typing import TYPE_CHECKING

import xarray as xr

if TYPE_CHECKING:
    from sphex.grids import Grid
    from sphex.harmonics import Harmonics

__all__: list[str] = []


@xr.register_dataarray_accessor("sphex")
class _FieldAccessor:
    """``da.sphex``: spherical-harmonic tools on a gridded DataArray."""

    def __init__(self, da: xr.DataArray) -> None:
        self._da = da

    @property
    def grid(self) -> "Grid":
        """The detected :class:`Grid`."""
        from sphex.xr.coords import find_grid

        return find_grid(self._da).grid

    def analyze(self, lmax: int | None = None, **kwargs: Any) -> xr.Dataset:
        """Coefficients; see :func:`sphex.xr.analyze`."""
        from sphex.xr.fields import analyze

        return analyze(self._da, lmax, **kwargs)

    def smooth(self, **kwargs: Any) -> xr.DataArray:
        """Isotropic smoothing; see :func:`sphex.xr.smooth`."""
        from sphex.xr.fields import smooth

        return smooth(self._da, **kwargs)

    def regrid(self, like: Any, **kwargs: Any) -> xr.DataArray:
        """Spectral regridding; see :func:`sphex.xr.regrid`."""
        from sphex.xr.fields import regrid

        return regrid(self._da, like, **kwargs)

    def degree_power(self, lmax: int | None = None) -> xr.DataArray:
        """Degree power spectrum; see :func:`sphex.xr.degree_power`."""
        from sphex.xr.fields import degree_power

        return degree_power(self._da, lmax)


@xr.register_dataset_accessor("sphex")
class _CoefficientAccessor:
    """``ds.sphex``: tools on a coefficient Dataset."""

    def __init__(self, ds: xr.Dataset) -> None:
        self._ds = ds

    def synthesize(self, like: Any, **kwargs: Any) -> xr.DataArray:
        """Gridded field(s); see :func:`sphex.xr.synthesize`."""
        from sphex.xr.fields import synthesize

        return synthesize(self._ds, like, **kwargs)

    def to_harmonics(self) -> "Harmonics":
        """A :class:`Harmonics`; see :func:`sphex.xr.to_harmonics`."""
        from sphex.xr.coefficients import to_harmonics

        return to_harmonics(self._ds)

    def degree_power(self) -> xr.DataArray:
        """Degree power spectrum; see :func:`sphex.xr.degree_power`."""
        from sphex.xr.fields import degree_power

        return degree_power(self._ds)

    def to_netcdf(self, path: str | os.PathLike, overwrite: bool = False) -> Path:
        """Write atomically in sphex's layout; see :func:`sphex.xr.write_harmonics`."""
        from sphex.xr.files import write_harmonics

        return write_harmonics(self._ds, path, overwrite)
