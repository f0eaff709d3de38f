"""Missing values in gridded fields: found before any work, and named by their coordinates.

A spherical-harmonic analysis needs complete global fields.  For numpy-backed
input :func:`refuse_missing_in_memory` checks the whole array at once; dask
tasks see only their own block of fields, so each is given the flat positions
of its fields (:func:`field_positions`) and a small picklable
:class:`FieldNames` to name the bad ones with (:func:`refuse_missing_in_block`).
Either way the error says which fields (``time=2001-03-04 (index 2)``) hold
NaN or inf.
"""
from __future__ import annotations

import math
from collections.abc import Hashable

import numpy as np
import xarray as xr

__all__ = ["FieldNames", "field_positions", "refuse_missing_in_memory", "refuse_missing_in_block"]


class FieldNames:
    """Turns flat field indices of a batch into names like ``time=2001-03-04``.

    Small and picklable: it travels with dask tasks, which see only their own
    block of fields (their flat positions come in as an extra input)."""

    MAX_LISTED = 5

    def __init__(self, da: xr.DataArray, core: tuple[Hashable, Hashable]):
        self.name = repr(da.name) if da.name is not None else "the field"
        self.dims = [d for d in da.dims if d not in core]
        self.shape = tuple(int(da.sizes[d]) for d in self.dims)
        self.coords = {d: (np.asarray(da[d].values) if d in da.coords else None)
                       for d in self.dims}

    def _label(self, flat: int) -> str:
        if not self.dims:
            return "the only field"
        at = np.unravel_index(int(flat), self.shape)
        parts = []
        for d, k in zip(self.dims, at):
            c = self.coords[d]
            if c is None:
                parts.append(f"{d} index {int(k)}")
                continue
            v = c[k]
            if np.issubdtype(c.dtype, np.datetime64):
                v = np.datetime_as_string(v, unit="s").replace("T00:00:00", "")
            parts.append(f"{d}={v} (index {int(k)})")
        return ", ".join(parts)

    def message(self, flat_positions: np.ndarray, nbad: int | None = None) -> str:
        flat_positions = np.asarray(flat_positions).reshape(-1)
        listed = "; ".join(self._label(p) for p in flat_positions[: self.MAX_LISTED])
        more = len(flat_positions) - self.MAX_LISTED
        tail = f" and {more} more fields" if more > 0 else ""
        count = "missing values (NaN or inf)" if nbad is None else \
            f"{nbad} missing value{'s' if nbad != 1 else ''} (NaN or inf)"
        return (f"{self.name} has {count}, in {listed}{tail}; spherical-harmonic analysis "
                "needs complete global fields: estimate the coefficients from the observed "
                "cells by least squares with analyze(..., missing='fit') (command line: sphex "
                "analyze --missing fit, with --damping for large gaps), or select the "
                "complete steps with .sel / .isel")


def field_positions(da: xr.DataArray, core: tuple[Hashable, Hashable]
                    ) -> tuple[xr.DataArray, FieldNames | None]:
    """Flat field positions over the non-core dimensions (chunked like ``da``),
    and the namer the tasks use with them; for numpy input, which is checked
    whole before any task runs, a 0-d position and no namer."""
    if isinstance(da.data, np.ndarray):
        return xr.DataArray(0), None
    names = FieldNames(da, core)
    pos = xr.DataArray(np.arange(math.prod(names.shape), dtype=np.int64).reshape(names.shape),
                       dims=names.dims)
    chunks = {d: da.chunksizes[d] for d in names.dims}
    return (pos.chunk(chunks) if chunks else pos), names


def refuse_missing_in_memory(da: xr.DataArray, core: tuple[Hashable, Hashable]) -> None:
    """Raise a ValueError naming the fields of a numpy-backed ``da`` that hold NaN or inf."""
    if isinstance(da.data, np.ndarray) and da.dtype.kind in "fc":
        finite = np.isfinite(da.values)
        bad = int(finite.size - np.count_nonzero(finite))
        if bad:
            axes = tuple(da.get_axis_num(d) for d in core)
            per_field = ~finite.all(axis=axes)
            # flat positions in the order of the non-core dimensions
            raise ValueError(FieldNames(da, core).message(np.flatnonzero(per_field), bad))


def refuse_missing_in_block(block: np.ndarray, start: int, pos: np.ndarray | None,
                            batch: tuple[int, ...], where: FieldNames | None) -> None:
    """In a dask task: name the fields of ``block`` (fields start.. of the
    task's batch) that hold NaN or inf.  ``pos`` holds the flat positions of
    the task's fields in the whole batch."""
    if where is None:
        return
    with np.errstate(over="ignore", invalid="ignore"):  # huge finite values may sum to inf
        if np.isfinite(block.sum()):  # the sum: one cheap pass when all is well
            return
    finite = np.isfinite(block)
    bad = ~finite.reshape(block.shape[0], -1).all(axis=1)
    if bad.any():
        idx = np.arange(start, start + block.shape[0])[bad]
        if pos is not None:
            idx = np.broadcast_to(pos, batch).reshape(-1)[idx]
        raise ValueError(where.message(idx, int(finite.size - np.count_nonzero(finite))))
