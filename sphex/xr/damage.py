"""Damaged netCDF files found before they are read: a file shorter than its header promises.

The netCDF library reads a classic-format (netCDF-3) file cut short without
complaint and hands back zeros (or fill values) where the data are missing.
:func:`check_complete` reads the classic header (the open format
specification: magic ``CDF`` and a version byte, the record count, then the
dimension, global attribute and variable lists, big-endian), computes where
the last byte of every variable's data lies, and refuses a file that ends
before it.  For netCDF-4 (HDF5) files it reads the end-of-file address that
the HDF5 superblock records (superblock versions 0 to 3) and refuses a file
shorter than that; damage the superblock does not show is left to the HDF5
library, whose errors the readers turn into messages about a damaged file.

Standard library only.
"""
from __future__ import annotations

import os
import struct
from pathlib import Path

__all__ = ["DamagedFileError", "check_complete", "expected_classic_size", "expected_hdf5_size"]

_CLASSIC_MAGIC = b"CDF"
_HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"
_TYPE_SIZES = {1: 1, 2: 1, 3: 2, 4: 4, 5: 4, 6: 8, 7: 1, 8: 2, 9: 4, 10: 8, 11: 8}
_ZERO, _DIMENSION, _VARIABLE, _ATTRIBUTE = 0, 10, 11, 12
_STREAMING = {0xFFFFFFFF, 0xFFFFFFFFFFFFFFFF}
_HEADER_READ = 1 << 20  # bytes read at a time while parsing a classic header


class DamagedFileError(ValueError):
    """A file is shorter than its header promises (cut short, or not fully copied)."""


class _Cut(Exception):
    """The header itself ends early."""


class _Header:
    """Big-endian reader over a classic netCDF header, reading the file as needed."""

    def __init__(self, f, version: int) -> None:
        self.f = f
        self.buf = b""
        self.pos = 0
        self.big = version == 5  # CDF-5: 8-byte counts and sizes
        self.offset_size = 4 if version == 1 else 8

    def take(self, n: int) -> bytes:
        while len(self.buf) - self.pos < n:
            more = self.f.read(max(_HEADER_READ, n))
            if not more:
                raise _Cut
            self.buf = self.buf[self.pos:] + more
            self.pos = 0
        out = self.buf[self.pos:self.pos + n]
        self.pos += n
        return out

    def int32(self) -> int:
        return struct.unpack(">I", self.take(4))[0]

    def count(self) -> int:
        return struct.unpack(">Q", self.take(8))[0] if self.big else self.int32()

    def offset(self) -> int:
        return struct.unpack(">Q" if self.offset_size == 8 else ">I", self.take(self.offset_size))[0]

    def name(self) -> str:
        n = self.count()
        raw = self.take(n)
        self.take(-n % 4)
        return raw.decode("utf-8", "replace")

    def skip_attributes(self) -> None:
        tag, n = self.int32(), self.count()
        if tag == _ZERO and n == 0:
            return
        if tag != _ATTRIBUTE:
            raise ValueError("attribute list expected")
        for _ in range(n):
            self.name()
            size = _TYPE_SIZES.get(self.int32())
            if size is None:
                raise ValueError("unknown attribute type")
            nbytes = self.count() * size
            self.take(nbytes + (-nbytes % 4))


def expected_classic_size(path: str | os.PathLike) -> int:
    """Bytes a classic-format (netCDF-3, 64-bit offset or CDF-5) file must have, from its
    header: the end of the last variable's data.

    Raises
    ------
    DamagedFileError
        When the header itself is cut short or unreadable.
    """
    with open(path, "rb") as f:
        head = f.read(4)
        if len(head) < 4 or head[:3] != _CLASSIC_MAGIC or head[3] not in (1, 2, 5):
            raise ValueError(f"{str(path)!r} is not a classic-format netCDF file")
        h = _Header(f, head[3])
        try:
            return _data_end(h)
        except _Cut:
            raise DamagedFileError(f"{str(path)!r} is damaged: it ends inside its own header "
                                   "(cut short); copy or download it again") from None
        except (ValueError, struct.error) as exc:
            raise DamagedFileError(f"{str(path)!r} is damaged: its netCDF header cannot be read "
                                   f"({exc}); copy or download it again") from None


def _data_end(h: _Header) -> int:
    numrecs = h.count()
    tag, n = h.int32(), h.count()
    dims = []
    if not (tag == _ZERO and n == 0):
        if tag != _DIMENSION:
            raise ValueError("dimension list expected")
        for _ in range(n):
            h.name()
            dims.append(h.count())
    h.skip_attributes()
    tag, n = h.int32(), h.count()
    if tag == _ZERO and n == 0:
        return h.pos
    if tag != _VARIABLE:
        raise ValueError("variable list expected")
    fixed_end = 0
    records = []  # (begin, bytes per record) of record variables
    for _ in range(n):
        h.name()
        ids = [h.count() for _ in range(h.count())]
        h.skip_attributes()
        size = _TYPE_SIZES.get(h.int32())
        if size is None or any(i >= len(dims) for i in ids):
            raise ValueError("variable of unknown type or dimension")
        vsize, begin = h.count(), h.offset()
        shape = [dims[i] for i in ids]
        if shape and shape[0] == 0:  # the record dimension leads
            nbytes = size
            for d in shape[1:]:
                nbytes *= d
            records.append((begin, nbytes, vsize))
        else:
            nbytes = size
            for d in shape:
                nbytes *= d
            fixed_end = max(fixed_end, begin + nbytes)
    end = fixed_end
    if records and numrecs not in _STREAMING and numrecs > 0:
        # one record holds every record variable, each padded to 4 bytes, except that
        # a lone record variable is not padded
        recsize = records[0][1] if len(records) == 1 else sum(v for _, _, v in records)
        for begin, nbytes, _ in records:
            end = max(end, begin + (numrecs - 1) * recsize + nbytes)
    return end


def expected_hdf5_size(path: str | os.PathLike) -> int | None:
    """The end-of-file address an HDF5 superblock at the start of the file records
    (versions 0 to 3), or None when there is none to read."""
    with open(path, "rb") as f:
        head = f.read(128)
    if not head.startswith(_HDF5_MAGIC) or len(head) < 12:
        return None
    version = head[8]
    try:
        # the addresses start with: base address, (free space | extension), end of file
        if version in (0, 1):
            size_offsets = head[13]
            at = 24 + (4 if version == 1 else 0)
        elif version in (2, 3):
            size_offsets = head[9]
            at = 12
        else:
            return None
        if size_offsets not in (2, 4, 8):
            return None
        fmt = {2: "<H", 4: "<I", 8: "<Q"}[size_offsets]
        base = struct.unpack_from(fmt, head, at)[0]
        eof = struct.unpack_from(fmt, head, at + 2 * size_offsets)[0]
    except struct.error:
        return None
    return base + eof


def check_complete(path: str | os.PathLike) -> None:
    """Refuse a netCDF file shorter than its header promises.

    Parameters
    ----------
    path : path-like

    Raises
    ------
    DamagedFileError
        (a ValueError) with the file's size and the size its header promises.
    """
    p = Path(path)
    with open(p, "rb") as f:
        magic = f.read(8)
    if magic[:3] == _CLASSIC_MAGIC:
        expected = expected_classic_size(p)
        kind = "netCDF-3 header"
    elif magic == _HDF5_MAGIC:
        expected = expected_hdf5_size(p)
        kind = "HDF5 superblock"
    else:
        return
    actual = p.stat().st_size
    if expected is not None and actual < expected:
        raise DamagedFileError(f"{str(p)!r} is damaged: it has {actual} bytes but its {kind} "
                               f"promises {expected} (the file was cut short or not fully "
                               "copied); copy or download it again")
