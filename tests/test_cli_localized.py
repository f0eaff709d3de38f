"""End-to-end checks of ``sphex local-spectrum``, run as a subprocess on temporary files."""
from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex.localize import expected_local_power, local_power
from sphex.spectra import degree_power

LMAX = 30
CENTRE = (-28.0, 128.0)


def run(*args, cwd=None):
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    env.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", "local-spectrum", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=300)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A gridded series (time, lat, lon) in one file and one field's coefficients in another."""
    d = tmp_path_factory.mktemp("local")
    rng = np.random.default_rng(14)
    coef = np.tril(rng.standard_normal((2, LMAX + 1, LMAX + 1))
                   + 1j * rng.standard_normal((2, LMAX + 1, LMAX + 1)))
    coef[..., 0] = coef[..., 0].real
    h = sphex.Harmonics(coef / (1.0 + np.arange(LMAX + 1))[:, None], units="m")
    grid = sphex.Grid.gauss(LMAX)
    time = np.array(["2030-01-01", "2030-01-02"], dtype="datetime64[ns]")
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("time", "lat", "lon"),
                      coords={"time": time, "lat": grid.lat, "lon": grid.lon}, name="topo",
                      attrs={"units": "m"})
    series = d / "series.nc"
    da.to_dataset().to_netcdf(series)
    coefficients = d / "coef.nc"
    sxr.write_harmonics(sphex.Harmonics(h.coef[1], units="m"), coefficients,
                        name="topo")
    return {"dir": d, "series": series, "coef": coefficients, "h": h}


def read_csv(path):
    with open(path, encoding="utf-8") as f:
        header = f.readline().strip().split(",")
    return header, np.loadtxt(path, delimiter=",", skiprows=1)


def test_coefficient_file_gives_the_core_result_in_csv_and_plot(files):
    d = files["dir"]
    csv, png = d / "c.csv", d / "c.png"
    r = run(files["coef"], "--at", "28S,128E", "--cap", "40", "--window-degree", "8",
            "--csv", csv, "--plot", png)
    assert r.returncode == 0, r.stderr
    assert "reliable degrees 8..22" in r.stdout and f"wrote {csv}" in r.stdout
    header, table = read_csv(csv)
    assert header == ["degree", "global_power", "blurred_global_power", "local_power",
                      "local_power_error", "valid"]
    h1 = sphex.Harmonics(files["h"].coef[1])
    core = local_power(h1, *CENTRE, 40.0, 8)
    np.testing.assert_array_equal(table[:, 0], np.arange(LMAX + 1))
    np.testing.assert_allclose(table[:, 1], degree_power(h1), rtol=1e-12)
    np.testing.assert_allclose(table[:, 2], expected_local_power(degree_power(h1), 40.0, 8,
                                                                 n_windows=core.n_windows),
                               rtol=1e-12)
    np.testing.assert_allclose(table[:, 3], core.power, rtol=1e-12)
    np.testing.assert_allclose(table[:, 4], core.error, rtol=1e-12)
    np.testing.assert_array_equal(table[:, 5], core.valid.astype(float))
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_grid_file_with_pick_and_negative_latitude(files):
    d = files["dir"]
    csv = d / "g.csv"
    r = run(files["series"], "--at", "-28,128", "--cap", "40", "--window-degree", "8",
            "--windows", "3", "--pick", "time=1", "--csv", csv)
    assert r.returncode == 0, r.stderr
    assert "3 windows" in r.stdout
    _, table = read_csv(csv)
    core = local_power(sphex.Harmonics(files["h"].coef[1]), *CENTRE, 40.0, 8, n_windows=3)
    # the grid analysed then the core, printed with 17 digits: measured 2.1e-15; bound 1e-14
    np.testing.assert_allclose(table[:, 3], core.power, rtol=1e-14)
    # printed table without --csv/--plot
    r = run(files["series"], "--at", "-28,128", "--cap", "40", "--window-degree", "8",
            "--pick", "time=0")
    assert r.returncode == 0 and r.stdout.count("\n") > LMAX + 1


@pytest.mark.parametrize("args,message", [
    (("--at", "95,10", "--cap", "40", "--window-degree", "8"), "outside -90..90"),
    (("--at", "10,20,30", "--cap", "40", "--window-degree", "8"), "is not LAT,LON"),
    (("--at", "10,20", "--cap", "0", "--window-degree", "8"), "must be a positive number"),
    (("--at", "10,20", "--cap", "181", "--window-degree", "8"), "at most 180 degrees"),
    (("--at", "10,20", "--cap", "40", "--window-degree", "31"), "above the field's highest degree 30"),
    (("--at", "10,20", "--cap", "10", "--window-degree", "3"), "raise --window-degree or --cap"),
    (("--at", "10,20", "--cap", "40", "--window-degree", "8", "--windows", "100"), "choose 1..81"),
])
def test_bad_input_exits_2_with_one_line(files, args, message):
    r = run(files["coef"], *args)
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert message in r.stderr and r.stdout == ""


def test_several_fields_need_a_pick_and_existing_output_needs_overwrite(files):
    d = files["dir"]
    r = run(files["series"], "--at", "10,20", "--cap", "40", "--window-degree", "8")
    assert r.returncode == 2 and "--pick time=0" in r.stderr and r.stderr.count("\n") == 1
    r = run(files["series"], "--at", "10,20", "--cap", "40", "--window-degree", "8",
            "--pick", "level=0")
    assert r.returncode == 2 and "no dimension 'level'" in r.stderr
    out = d / "exists.csv"
    out.write_text("keep me\n")
    r = run(files["coef"], "--at", "10,20", "--cap", "40", "--window-degree", "8", "--csv", out)
    assert r.returncode == 2 and "--overwrite" in r.stderr and r.stderr.count("\n") == 1
    assert out.read_text() == "keep me\n"
    r = run(files["coef"], "--at", "10,20", "--cap", "40", "--window-degree", "8", "--csv", out,
            "--overwrite")
    assert r.returncode == 0 and out.read_text().startswith("degree,global_power,")
