"""The report: one self-contained HTML page about a field, a coefficient file or a model.

:func:`build_report` reads the input (a gridded netCDF variable, a
coefficient file or a potential-model file), computes its spectra and key
numbers with the public functions of sphex, draws the figures with
:mod:`sphex.plot` and returns the page as text; :func:`write_report` writes
it atomically.  The page holds everything it shows: images are PNG data
URIs, the style sheet is inline, there are no scripts and no links to the
network, so it opens offline, on a phone and on paper.

Sections (their ``id`` on the page): ``provenance``, ``numbers``, ``maps``,
``spectrum``, ``cumulative``, ``degree-order``, ``smoothed``, and when they
apply ``series`` (inputs with a time or other extra axis), ``comparison``
(``compare=OTHER``), ``local`` (the localised spectrum of a cap, when asked
for with ``region=Region(...)``), ``winds`` and ``wind-maps`` (grid files
holding the eastward and northward components of a wind or current; without
``variable`` the page is about the wind alone) and ``model`` (model files).

Examples
--------
>>> from sphex.report import build_report, write_report   # doctest: +SKIP
>>> page = build_report("topo.nc", variable="topography", command="sphex report ...")
>>> write_report(page, "topo_report.html")
"""
from __future__ import annotations

from sphex.report.build import build_report, write_report
from sphex.report.inputs import Subject, read_subject
from sphex.report.local_section import Region
from sphex.report.key_numbers import (
    SHARES, default_slope_range, degree_bands, smoothing_radii, variance_degrees,
)
from sphex.report.page import SECTIONS, degree_order_picture, png_size

__all__ = ["build_report", "write_report", "Region", "read_subject", "Subject", "variance_degrees",
           "default_slope_range", "smoothing_radii", "degree_bands", "png_size",
           "degree_order_picture", "SHARES", "SECTIONS"]
