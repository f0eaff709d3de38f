"""End-to-end checks of ``sphex sample`` and ``sphex analyze --missing fit``, run as a
subprocess on files written here (few runs: each pays Python's start-up)."""
from __future__ import annotations

import os
import subprocess
import sys

from _sample_fields import random_harmonics

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex.points import evaluate

REFERENCE_RADIUS = 1.35e6


def run(*args, cwd=None):
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    env.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=300)


def _one_line_error(r, *words):
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    for w in words:
        assert w in r.stderr, r.stderr


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("points")
    rng = np.random.default_rng(11)
    h = random_harmonics(rng, 12, radius=REFERENCE_RADIUS, units="m")
    sxr.write_harmonics(h, d / "coef.nc", name="relief")
    n = 40
    lat = rng.uniform(-90, 90, n)
    lat[:2] = [90.0, -90.0]
    lon = rng.uniform(-180, 360, n)
    height = rng.uniform(0, 2e4, n)
    rows = [f'"site {k}, north",{a!r},{o!r},{z!r}' for k, (a, o, z) in enumerate(zip(lat.tolist(), lon.tolist(), height.tolist()))]
    (d / "sites.csv").write_text("# survey 2031\nName,Latitude (deg),LONG,alt [m]\n" + "\n".join(rows) + "\n")
    return {"dir": d, "h": h, "lat": lat, "lon": lon, "height": height}


def _read_csv(path):
    import csv

    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    return rows[0], rows[1:]


def test_sample_writes_values_at_the_points_and_says_which_columns_it_used(files):
    d = files["dir"]
    r = run("sample", "coef.nc", "sites.csv", "-o", "out.csv", cwd=d)
    assert r.returncode == 0, r.stderr
    assert "latitude from 'Latitude (deg)', longitude from 'LONG'" in r.stdout
    assert "height column 'alt [m]' not used" in r.stdout
    header, rows = _read_csv(d / "out.csv")
    assert header == ["Name", "Latitude (deg)", "LONG", "alt [m]", "relief"]   # first line: header
    assert rows[0][0] == "site 0, north" and len(rows) == 40
    got = np.array([float(row[-1]) for row in rows])
    np.testing.assert_allclose(got, evaluate(files["h"], files["lat"], files["lon"]), rtol=0, atol=1e-12)
    # a potential field continued to the heights: degree l times (R/r)^(l+1)
    r = run("sample", "coef.nc", "sites.csv", "-o", "up.csv", "--continue", "--name", "v", cwd=d)
    assert r.returncode == 0, r.stderr
    assert "height (m above the reference sphere) from 'alt [m]'" in r.stdout
    header, rows = _read_csv(d / "up.csv")
    want = evaluate(files["h"], files["lat"], files["lon"], REFERENCE_RADIUS + files["height"])
    assert header[-1] == "v"
    np.testing.assert_allclose([float(row[-1]) for row in rows], want, rtol=0, atol=1e-12)


@pytest.mark.reference
def test_sample_a_gravity_model_gives_its_potential(files):
    # a model with C00 = 1 and nothing else is a point mass: V = GM / r (closed form, common practice)
    d = files["dir"]
    gm, r0 = 3.986004415e14, 6378136.3
    (d / "mass.gfc").write_text(
        "product_type gravity_field\nmodelname mass\nearth_gravity_constant 3.986004415e14\n"
        "radius 6378136.3\nmax_degree 2\nerrors no\nend_of_head\ngfc 0 0 1.0 0.0\n"
        "gfc 2 0 0.0 0.0\ngfc 2 1 0.0 0.0\ngfc 2 2 0.0 0.0\n")
    (d / "orbit.csv").write_text("lat;lon;height\n10;20;0\n-30;200;400000\n89.5;0;35786000\n")
    r = run("sample", "mass.gfc", "orbit.csv", "-o", "orbit_v.csv", cwd=d)
    assert r.returncode == 0, r.stderr
    assert "in m2 s-2" in r.stdout
    text = (d / "orbit_v.csv").read_text().splitlines()
    assert text[0] == "lat;lon;height;potential"
    v = np.array([float(line.split(";")[-1]) for line in text[1:]])
    np.testing.assert_allclose(v, gm / (r0 + np.array([0.0, 4e5, 35786000.0])), rtol=1e-14)


@pytest.mark.parametrize("content, words", [
    ("lat,lon\n10,20\n95,0\n", ["line 3", "latitude 95 is outside [-90, 90]", "swapped"]),
    ("lat,lon\n10,20\nnan,0\n", ["line 3", "the latitude ('lat') is 'nan'", "fix or drop"]),
    ("lat,lon\n10,\n", ["line 2", "the longitude ('lon') is empty"]),
    ("x,y\n10,20\n", ["has no latitude column (columns: 'x', 'y')", "name one lat or latitude"]),
    ("lat,lon\n10,20,30\n", ["line 2: 3 fields but the header has 2"]),
])
def test_sample_refuses_bad_points_in_one_line_without_output(files, content, words):
    d = files["dir"]
    (d / "bad.csv").write_text(content)
    r = run("sample", "coef.nc", "bad.csv", "-o", "bad_out.csv", cwd=d)
    _one_line_error(r, "sphex sample: error:", *words)
    assert not (d / "bad_out.csv").exists()


def test_sample_existing_output_needs_overwrite(files):
    d = files["dir"]
    (d / "taken.csv").write_text("keep me\n")
    r = run("sample", "coef.nc", "sites.csv", "-o", "taken.csv", cwd=d)
    _one_line_error(r, "exists", "--overwrite")
    assert (d / "taken.csv").read_text() == "keep me\n"


def test_analyze_missing_fit_on_a_file_with_nan(files):
    d = files["dir"]
    rng = np.random.default_rng(5)
    h = random_harmonics(rng, 5)
    g = sphex.Grid.gauss(24)
    v = sphex.synthesize(h, g)
    v[g.lat > 90.0 - np.degrees(np.arccos(0.4)), :] = np.nan      # a polar cap of 30% of the sphere
    xr.Dataset({"ssh": (("lat", "lon"), v, {"units": "m"})},
               coords={"lat": g.lat, "lon": g.lon}).to_netcdf(d / "ocean.nc")
    r = run("analyze", "ocean.nc", "--lmax", 5, "-o", "refused.nc", cwd=d)
    _one_line_error(r, "missing values", "--missing fit")
    r = run("analyze", "ocean.nc", "--lmax", 5, "--damping", "1e-3", "-o", "refused.nc", cwd=d)
    _one_line_error(r, "--damping only applies to --missing fit")
    assert not (d / "refused.nc").exists()
    r = run("analyze", "ocean.nc", "--lmax", 5, "--missing", "fit", "-o", "fit.nc", cwd=d)
    assert r.returncode == 0, r.stderr
    assert "observed 70." in r.stdout and "iterations" in r.stdout and "warning" not in r.stderr
    back = sxr.open_harmonics(d / "fit.nc")
    # conjugate gradients stop at a relative residual of 1e-10: measured 5.4e-12 (coefficients) and
    # 4.1e-12 (residual RMS); bound 1e-9 (other seeds reach 1e-10)
    assert np.max(np.abs(back.coef - h.coef)) < 1e-9 * np.max(np.abs(h.coef))
    with xr.open_dataset(d / "fit.nc") as ds:
        assert ds.attrs["fit_residual_rms"] < 1e-9 and "not filled" in ds.attrs["fit_method"]
    # too high a degree for the gap: the warning reaches the user as one line, and a file is written
    r = run("analyze", "ocean.nc", "--lmax", 20, "--missing", "fit", "-o", "fit20.nc", cwd=d)
    assert r.returncode == 0 and "sphex analyze: warning: ill-posed fit" in r.stderr


def test_sample_is_listed_and_its_help_has_an_example(capsys):
    from sphex import cli
    from sphex.cli.parser import build_parser

    assert "\n    sample " in build_parser().format_help()    # the command list, once
    with pytest.raises(SystemExit) as e:        # in-process: argparse help exits 0
        cli.main(["sample", "--help"])
    assert e.value.code == 0
    out = capsys.readouterr().out
    assert "example:" in out and "--continue" in out


def test_sample_a_series_gives_one_column_per_time_step(files):
    d = files["dir"]
    rng = np.random.default_rng(12)
    h = random_harmonics(rng, 6, batch=(2,), units="K")
    time = np.array(["2101-01-01", "2101-01-02T12:00"], dtype="datetime64[ns]")
    sxr.from_harmonics(h, dims=("time",), coords={"time": time}, name="t").to_netcdf(d / "series.nc")
    (d / "two.csv").write_text("lat,lon\n10,20\n-30,100\n")
    r = run("sample", "series.nc", "two.csv", "-o", "two_out.csv", cwd=d)
    assert r.returncode == 0, r.stderr
    header, rows = _read_csv(d / "two_out.csv")
    assert header == ["lat", "lon", "t_2101-01-01", "t_2101-01-02T12:00"]
    want = evaluate(h, [10.0, -30.0], [20.0, 100.0])          # (time, point)
    np.testing.assert_allclose([[float(v) for v in row[2:]] for row in rows], want.T, atol=1e-12)
