"""Checks of the benchmark's measuring tools (sphex.bench); no timing."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr


def test_benchmark_reads_the_child_peak_memory_not_the_parent(tmp_path):
    import sys

    from sphex.bench import scaleout

    ballast = np.ones(2**26)  # 512 MiB in this process: must not show in the child's figure
    small = scaleout._peak_rss([sys.executable, "-S", "-c", "pass"])
    big = scaleout._peak_rss([sys.executable, "-c",
                              "import numpy as np; x = np.ones(2**25); x += 1"])  # 256 MiB
    assert ballast[-1] == 1.0
    assert small["exit"] == 0 and small["peak_rss_bytes"] < 64 * 2**20
    assert 256 * 2**20 < big["peak_rss_bytes"] < 512 * 2**20
    info = scaleout.make_series(tmp_path / "s.nc", nbytes=3e6, lmax=31)
    assert info["fields"] == int(np.ceil(3e6 / (32 * 64 * 8)))
    assert info["file_bytes"] >= info["data_bytes"]
    with xr.open_dataset(tmp_path / "s.nc") as ds:
        assert sxr.find_grid(ds["field"]).grid == sphex.Grid.gauss(31)
        assert ds["field"].shape == (info["fields"], 32, 64)


def test_vector_case_reports_ratios_to_two_scalar_transforms():
    from sphex.bench import transforms, vectors

    row = vectors.time_vector_pair(31, 1, transforms._best_time)
    assert row["nlat"] == 32 and row["roundtrip_error"] < 1e-13
    row["elements"] = transforms.elements(31, row["nlat"])
    assert row["elements"] == 32 * 33 // 2 * 16               # (degree, order) pairs x latitude pairs
    vectors.add_ratios(row, 1e10)
    assert row["analysis_ratio"] == row["analysis_s"] / (2 * 8.0 * row["elements"] / 1e10)
    assert row["synthesis_vs_two_scalar"] == row["synthesis_s"] / (2 * row["scalar_synthesis_s"])
    text = "\n".join(vectors.format_rows([row]))
    assert "roofline of two scalar transforms" in text and "    31 " in text


def test_point_benchmark_measures_the_same_series_on_grid_and_points():
    from sphex.bench import points

    e = points.time_point_evaluation(lmax=20, points=500, repeat=1)
    assert e["max_difference"] < 1e-12 * max(1.0, e["max_value"])   # one series, two summations
    assert e["ns_per_point_coefficient"] > 0 and e["synthesis_ns_per_element"] > 0
    f = points.time_iterative_fit(lmax=6, points=400)
    assert f["unknowns"] == 49 and f["coefficient_error"] < 1e-8 and f["iterations"] > 1
    lines = points.format_points({"points_evaluation": e, "points_fit": f})
    assert "ns per point per (l, m)" in lines[1] and "49 unknowns" in lines[2]
