"""A practitioner's job on the command line, run as subprocesses on real files: one radius
convention, progress a user can trust, messages naming the real cause, spectra compared from
the shell, maps, and the smaller things users meet.
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import cli

DEMO = Path(__file__).resolve().parent.parent / "data_demo"
TOPO = DEMO / "velanthe_topography.nc"


def run(*args, cwd=None, env=None):
    full = dict(os.environ, PYTHONWARNINGS="ignore", **(env or {}))
    full.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=full, timeout=300)


def ok(r):
    assert r.returncode == 0, (r.stdout, r.stderr)
    return r


def one_line_error(r, *words):
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    for w in words:
        assert w in lines[0], lines[0]
    return lines[0]


def random_field_file(path, lmax, grid, rng, steps=None, name="z", attrs=None, **extra):
    """Band-limited random fields on ``grid`` written to ``path``."""
    batch = () if steps is None else (steps,)
    coef = rng.standard_normal(batch + (lmax + 1, lmax + 1)) \
        + 1j * rng.standard_normal(batch + (lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[..., 0] = coef[..., 0].real
    values = sphex.synthesize(sphex.Harmonics(coef), grid)
    dims = ("lat", "lon") if steps is None else ("time", "lat", "lon")
    coords = {"lat": ("lat", np.asarray(grid.lat), {"units": "degrees_north"}),
              "lon": ("lon", np.asarray(grid.lon), {"units": "degrees_east"})}
    if steps is not None:
        coords["time"] = np.arange(steps)
    ds = xr.Dataset({name: (dims, values, {"units": "m"})}, coords=coords, attrs=attrs or {})
    for k, v in extra.items():
        ds[k] = v
    ds.to_netcdf(path)
    return values


# --------------------------------------------------------------------------------------------
# names of our own
# --------------------------------------------------------------------------------------------
def test_clipped_normalisation_names_are_refused_with_the_full_word(tmp_path):
    clipped = "orthonormal"[:5]
    line = one_line_error(run("analyze", TOPO, "--norm", clipped, "-o", tmp_path / "c.nc"),
                          f"'{clipped}' is no longer accepted", "use 'orthonormal'")
    assert "--norm" in line
    ok(run("analyze", TOPO, "--lmax", 8, "--norm", "schmidt", "-o", tmp_path / "s.nc"))
    assert sxr.open_coefficients(tmp_path / "s.nc").attrs["normalization"] == "schmidt"


def test_isotropy_picture_from_the_shell(tmp_path):
    rng = np.random.default_rng(11)
    lmax = 255
    coef = (rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1)))
    coef = np.tril(coef) / np.sqrt(2)
    coef[:, 0] = rng.standard_normal(lmax + 1)          # isotropic: equal variance per real coefficient
    sxr.write_harmonics(sphex.Harmonics(coef), tmp_path / "iso.nc")
    r = ok(run("spectrum", tmp_path / "iso.nc", "--isotropy", tmp_path / "iso.png"))
    assert (tmp_path / "iso.png").read_bytes()[:4] == b"\x89PNG"
    low, high = (float(x) for x in re.search(r"from ([-+][\d.]+) to ([-+][\d.]+)", r.stdout).groups())
    assert -1.0 < low < 0 < high < 1.0            # cells of 100+ coefficients all within a factor 2
    # the demo topography's degree-2 tidal figure: zonal and sectoral above their share
    ok(run("analyze", TOPO, "-o", tmp_path / "topo.nc"))
    r = ok(run("spectrum", tmp_path / "topo.nc", "--isotropy", tmp_path / "topo_iso.png"))
    assert "farthest from isotropy" in r.stdout


# --------------------------------------------------------------------------------------------
# one radius convention
# --------------------------------------------------------------------------------------------
def test_radius_in_km_with_units_read_from_the_file_and_said(tmp_path):
    # no option: the file's planet_radius_km attribute, recorded in metres in the coefficients
    r = ok(run("analyze", TOPO, "--lmax", 10, "-o", tmp_path / "a.nc"))
    assert "radius 1350 km (from the file's planet_radius_km attribute)" in r.stdout
    assert sxr.open_coefficients(tmp_path / "a.nc").attrs["reference_radius"] == 1.35e6
    # km by default, km and m suffixes
    for k, text in enumerate(("1350", "1350km", "1350 km", "1350000m")):
        r = ok(run("analyze", TOPO, "--lmax", 4, "--radius", text, "-o", tmp_path / f"r{k}.nc"))
        assert "radius 1350 km (from --radius)" in r.stdout and "warning" not in r.stderr
        assert sxr.open_coefficients(tmp_path / f"r{k}.nc").attrs["reference_radius"] == 1.35e6
    # a planet of 1350 m: taken as written, with a warning naming both units
    r = ok(run("analyze", TOPO, "--lmax", 4, "--radius", "1350m", "-o", tmp_path / "small.nc"))
    assert "warning" in r.stderr and "1350 m, small for a planet" in r.stderr and "1350km" in r.stderr
    r = ok(run("analyze", TOPO, "--lmax", 4, "--radius", "1350000", "-o", tmp_path / "big.nc"))
    assert "larger than any planet" in r.stderr and "1350000m" in r.stderr
    one_line_error(run("analyze", TOPO, "--radius", "1350mi", "-o", tmp_path / "x.nc"),
                   "give the radius in km")
    # synthesis hands the radius on to the grid file, where analysis finds it again
    ok(run("synthesize", tmp_path / "a.nc", "--grid", "gauss:12", "-o", tmp_path / "g.nc"))
    with xr.open_dataset(tmp_path / "g.nc") as g:
        assert g.attrs["planet_radius_km"] == 1350.0
    # the spectrum plot takes its half-wavelength axis from the coefficient file's radius
    r = ok(run("spectrum", tmp_path / "a.nc", "--plot", tmp_path / "a.png"))
    assert "half-wavelength axis for radius 1350 km (from the coefficient file's reference_radius" \
        in r.stdout


def test_smooth_radius_default_agrees_with_python(tmp_path):
    # a consistency check: the command line and the Python function choose the same radius (the
    # smoothing itself is checked against the kernels' own weights in
    # test_cli.py::test_smooth_regrid_and_text_table and test_xr_fields.py)
    rng = np.random.default_rng(4)
    grid = sphex.Grid.gauss(30)
    random_field_file(tmp_path / "earthish.nc", 20, grid, rng)
    r = ok(run("smooth", tmp_path / "earthish.nc", "--gaussian", 500, "-o", tmp_path / "s.nc"))
    assert "assumed Earth's mean radius" in r.stdout and "6371 km" in r.stdout
    with xr.open_dataset(tmp_path / "earthish.nc") as f:
        da = f["z"].load()
    with pytest.warns(UserWarning, match="assumed Earth's mean radius 6371 km"):
        expect = sxr.smooth(da, gaussian_km=500.0)
    with xr.open_dataset(tmp_path / "s.nc") as out:
        # the same computation: measured identical; 1e-14 of the largest value (18)
        np.testing.assert_allclose(out["z"].values, expect.values, rtol=0,
                                   atol=1e-14 * np.abs(expect.values).max())
    # the demo file's own radius, from its attribute, in both
    r = ok(run("smooth", TOPO, "--gaussian", 200, "-o", tmp_path / "t.nc"))
    assert "radius 1350 km (from the file's planet_radius_km attribute)" in r.stdout
    with xr.open_dataset(TOPO) as f:
        expect = sxr.smooth(f, gaussian_km=200.0)       # the Dataset carries the attribute
    with xr.open_dataset(tmp_path / "t.nc") as out:
        # the file keeps float32: measured 1.22e-4 m, half a float32 step at 3650 m; bound one step
        np.testing.assert_allclose(out["topography"].values, expect.values, rtol=0, atol=2.5e-4)


# --------------------------------------------------------------------------------------------
# progress and start-up
# --------------------------------------------------------------------------------------------
def _through_a_terminal(args):
    """Run the command line with stdout and stderr on a pseudo-terminal; all it wrote."""
    import pty

    master, slave = pty.openpty()
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    proc = subprocess.Popen([sys.executable, "-m", "sphex.cli", *map(str, args)],
                            stdout=slave, stderr=slave, env=env)
    os.close(slave)
    out = b""
    while True:
        try:
            chunk = os.read(master, 4096)
        except OSError:          # the child closed the terminal
            break
        if not chunk:
            break
        out += chunk
    os.close(master)
    assert proc.wait(timeout=300) == 0, out.decode(errors="replace")
    return out.decode(errors="replace")


def test_smooth_progress_advances_on_a_terminal_and_stays_quiet_in_a_pipe(tmp_path):
    grid = sphex.Grid.equiangular(513, 1024, "poles")    # about a second of work: frames to see
    random_field_file(tmp_path / "s24.nc", 40, grid, np.random.default_rng(8), steps=24)
    text = _through_a_terminal(["smooth", tmp_path / "s24.nc", "--band", "30:50", "-o",
                                tmp_path / "out.nc"])
    draws = [(m.start(), int(m.group(1)), float(m.group(2))) for m in
             re.finditer(r"sphex smooth \|[=> ]{28}\| (\d+)/24 fields +([\d.]+) s", text)]
    counts = [c for _, c, _ in draws]
    times = [t for _, _, t in draws]
    assert counts == sorted(counts) and times == sorted(times)
    assert counts[0] == 0 and counts[-1] == 24
    assert len({c for c in counts if 0 < c < 24}) >= 3, counts      # it moves as fields finish
    assert text.index("read  ") < draws[0][0] < draws[-1][0] < text.index("wrote ")
    # without a terminal: a few plain lines at most (a short run: none)
    r = ok(run("smooth", tmp_path / "s24.nc", "--band", "30:50", "-o", tmp_path / "out2.nc"))
    lines = [ln for ln in r.stderr.splitlines() if "fields" in ln]
    assert len(lines) <= 4 and "\r" not in r.stderr


def test_first_run_says_it_compiles_the_kernels(tmp_path):
    # a numba cache directory without the kernels: the run says so once, before the work,
    # on a terminal (forced here with SPHEX_COMPILE_NOTICE=1) and never in a pipe
    # (this field holds a missing value, so the run stops before compiling anything)
    grid = sphex.Grid.gauss(10)
    values = random_field_file(tmp_path / "f.nc", 5, grid, np.random.default_rng(2))
    values[3, 4] = np.nan
    xr.Dataset({"z": (("lat", "lon"), values)},
               coords={"lat": grid.lat, "lon": grid.lon}).to_netcdf(tmp_path / "holes.nc")
    empty = tmp_path / "numba-cache"
    empty.mkdir()
    args = ("analyze", tmp_path / "holes.nc", "-o", tmp_path / "c.txt")
    r = run(*args, env={"NUMBA_CACHE_DIR": str(empty), "SPHEX_COMPILE_NOTICE": "1"})
    assert r.returncode == 2
    notice = [ln for ln in r.stderr.splitlines() if "compiling the numeric kernels" in ln]
    assert len(notice) == 1 and "later runs load them" in notice[0]
    assert "scalar transforms, about " in notice[0]
    r = run(*args, env={"NUMBA_CACHE_DIR": str(empty)})           # stderr is a pipe: silent
    assert r.returncode == 2 and "compiling" not in r.stderr
    # with the kernels in the cache (this process compiled them), nothing is said
    sphex.analyze(np.ones(grid.shape), grid)
    r = ok(run("analyze", tmp_path / "f.nc", "-o", tmp_path / "c.txt",
               env={"SPHEX_COMPILE_NOTICE": "1"}))
    assert "compiling" not in r.stderr


# --------------------------------------------------------------------------------------------
# messages naming the real cause
# --------------------------------------------------------------------------------------------
def test_messages_name_the_real_cause(tmp_path):
    lat = np.linspace(-60.0, 60.0, 25)               # not global
    lon = np.arange(0.0, 360.0, 5.0)
    xr.Dataset({"z": (("lat", "lon"), np.zeros((25, 72)))},
               coords={"lat": ("lat", lat, {"units": "degrees_north"}),
                       "lon": ("lon", lon, {"units": "degrees_east"})}).to_netcdf(tmp_path / "r.nc")
    one_line_error(run("analyze", tmp_path / "r.nc", "-o", tmp_path / "x.nc"),
                   "variable 'z'", "not global")
    one_line_error(run("smooth", tmp_path / "r.nc", "--cap", 5, "-o", tmp_path / "x.nc"),
                   "variable 'z'", "not global")
    src = DEMO / "velanthe_surface_temperature.nc"
    one_line_error(run("regrid", src, "--grid", "equiangular:144x73:poles", "-o", tmp_path / "x.nc"),
                   "did you mean equiangular:73x144:poles")
    r = ok(run("regrid", src, "--grid", "gaussian:20", "-o", tmp_path / "g.nc"))
    assert "21 x 42 gauss grid" in r.stdout
    r = ok(run("regrid", src, "--grid", "equiangular:2.5deg", "-o", tmp_path / "e.nc"))
    assert "73 x 144 equiangular-poles grid" in r.stdout    # the layout a spacing means, stated
    with xr.open_dataset(tmp_path / "e.nc") as out:
        assert out["surface_temperature"].shape == (12, 73, 144)
    # lmax above the target's exact limit: what was done, and the aliasing note
    r = ok(run("regrid", TOPO, "--grid", "gauss:40", "--lmax", 60, "-o", tmp_path / "a.nc"))
    assert "degrees 0..60" in r.stdout and "exact to degree 40" in r.stdout
    assert "alias on re-analysis" in r.stdout
    assert not list(tmp_path.glob("x.nc"))


def test_shell_messages_never_name_python_keywords_and_help_lists_each_command_once(tmp_path):
    keep = tmp_path / "keep.nc"
    keep.write_text("mine")
    line = one_line_error(run("analyze", TOPO, "-o", keep), "pass --overwrite to replace it")
    assert "overwrite=True" not in line and "=True" not in line
    r = ok(run("--help"))
    for name in ("analyze", "synthesize", "spectrum", "smooth", "regrid", "map", "inspect", "demo",
                 "bench"):
        assert len(re.findall(rf"^ +{name} +\S", r.stdout, flags=re.M)) == 1, name


# --------------------------------------------------------------------------------------------
# spectra for comparison
# --------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def pair(tmp_path_factory):
    """Two coefficient files of related fields, a = f and b = -2 f + g, and a grid file."""
    d = tmp_path_factory.mktemp("pair")
    rng = np.random.default_rng(21)
    grid = sphex.Grid.gauss(24)
    f = random_field_file(d / "f.nc", 12, grid, rng, name="alpha")
    g = random_field_file(d / "g.nc", 12, grid, rng, name="gamma")
    ds = xr.Dataset({"beta": (("lat", "lon"), -2 * f + g, {"units": "m"})},
                    coords={"lat": grid.lat, "lon": grid.lon})
    ds.to_netcdf(d / "b.nc")
    ok(run("analyze", d / "f.nc", "-o", d / "a_coef.nc"))
    ok(run("analyze", d / "b.nc", "-o", d / "b_coef.nc"))
    return d, grid, f, g


def test_several_inputs_cross_power_and_correlation(pair):
    d, grid, f, g = pair
    csv = d / "ab.csv"
    r = ok(run("spectrum", d / "a_coef.nc", d / "b_coef.nc", "--cross", "--csv", csv))
    rows = [ln.split(",") for ln in csv.read_text().splitlines()]
    # plain column names from the variables, and no comment line before the header
    assert rows[0] == ["degree", "alpha", "beta", "cross_power", "correlation"]
    table = np.array([[float(x) for x in row] for row in rows[1:]])
    ha, hb = sxr.open_harmonics(d / "a_coef.nc"), sxr.open_harmonics(d / "b_coef.nc")
    np.testing.assert_allclose(table[:, 3], sphex.spectra.cross_power(ha, hb), rtol=1e-12, atol=1e-14)
    # correlation from its definition X / sqrt(P1 P2)
    np.testing.assert_allclose(table[1:13, 4], table[1:13, 3] / np.sqrt(table[1:13, 1] * table[1:13, 2]),
                               rtol=1e-12)
    assert np.all(table[1:13, 4] < 0)                   # b holds -2 a
    assert "units m2" in (d / "ab.notes.txt").read_text() or "in m2" in (d / "ab.notes.txt").read_text()
    assert "correlation of 'alpha' and 'beta'" in r.stdout


def test_per_coefficient_kind_variance_and_fits_of_the_drawn_series(pair, monkeypatch):
    d, grid, f, g = pair
    csv = d / "per.csv"
    ok(run("spectrum", d / "a_coef.nc", "--kind", "per-coefficient", "--csv", csv))
    per = np.array([[float(x) for x in ln.split(",")] for ln in csv.read_text().splitlines()[1:]])
    power = sphex.spectra.degree_power(sxr.open_harmonics(d / "a_coef.nc"))
    np.testing.assert_allclose(per[:, 1], power / (2 * np.arange(power.size) + 1), rtol=1e-12)
    # the mean square includes the mean; the variance leaves degree 0 out
    xr.Dataset({"offset": (("lat", "lon"), 5.0 + f, {"units": "m"})},
               coords={"lat": grid.lat, "lon": grid.lon}).to_netcdf(d / "offset.nc")
    r = ok(run("spectrum", d / "offset.nc", "--slope", "2:12", "--plot", d / "o.png"))
    ms = grid.integrate((5.0 + f) ** 2) / (4 * np.pi)
    var = grid.integrate(f ** 2) / (4 * np.pi) - (grid.integrate(f) / (4 * np.pi)) ** 2
    got = re.search(r"mean square ([\d.e+]+) m2, rms [\d.]+ m; variance without degree 0 ([\d.e+]+) m2",
                    r.stdout)
    assert float(got.group(1)) == pytest.approx(ms, rel=1e-5)
    assert float(got.group(2)) == pytest.approx(var, rel=1e-5)
    # the slope printed is the slope of the series drawn, and the plot says the same
    figures = []
    from sphex import plot
    monkeypatch.setattr(plot, "save", lambda fig, path, **kw: figures.append(fig))
    assert cli.main(["spectrum", str(d / "a_coef.nc"), str(d / "b_coef.nc"), "--slope", "2:12",
                     "--plot", str(d / "never.png")]) == 0
    legend = [t.get_text() for t in figures[0].axes[0].get_legend().get_texts()]
    assert legend[:2] == ["alpha", "beta"]                      # the variables' names
    hb = sxr.open_harmonics(d / "b_coef.nc")
    slope_b = sphex.spectra.spectral_slope(sphex.spectra.degree_power(hb), 2, 12)[0]
    assert any(f"to beta, slope {slope_b:.2f}" in t for t in legend)


@pytest.mark.reference
def test_share_of_the_grid_variance_above_the_analysed_degree(tmp_path):
    # f = P2 + P10 (zonal Legendre polynomials of sin(lat)): degree powers 1/5 and 1/21
    # (common practice: the mean of P_l^2 over the sphere is 1/(2l+1))
    grid = sphex.Grid.gauss(20)
    x = np.sin(np.deg2rad(grid.lat))[:, None] * np.ones(grid.nlon)
    from numpy.polynomial import legendre as npl
    f = npl.legval(x, [0, 0, 1]) + npl.legval(x, [0] * 10 + [1])
    xr.Dataset({"h": (("lat", "lon"), f)}, coords={"lat": grid.lat, "lon": grid.lon}
               ).to_netcdf(tmp_path / "p.nc")
    r = ok(run("spectrum", tmp_path / "p.nc", "--lmax", 5, "--csv", tmp_path / "p.csv"))
    share = float(re.search(r"share of the grid's variance above degree 5: ([\d.]+) %", r.stdout).group(1))
    assert share == pytest.approx(100 * (1 / 21) / (1 / 5 + 1 / 21), abs=0.01)


def test_map_draws_grids_and_coefficients_north_up(tmp_path, monkeypatch):
    r = ok(run("map", DEMO / "velanthe_surface_temperature.nc", "--field", "time=3",
               "-o", tmp_path / "t.png"))
    assert "time 2101-01-05T12:00" in r.stdout and (tmp_path / "t.png").stat().st_size > 10000
    ok(run("analyze", TOPO, "--lmax", 30, "-o", tmp_path / "c.nc"))
    r = ok(run("map", tmp_path / "c.nc", "-o", tmp_path / "c.png"))
    assert "north up, east to the right, colours centred on 0" in r.stdout
    one_line_error(run("map", TOPO, "--field", "time=2", "-o", tmp_path / "x.png"), "one field")
    # the picture: latitudes drawn increasing upward, longitudes increasing to the right
    figures = []
    from sphex import plot
    monkeypatch.setattr(plot, "save", lambda fig, path, **kw: figures.append(fig))
    assert cli.main(["map", str(TOPO), "-o", str(tmp_path / "never.png")]) == 0
    ax = figures[0].axes[0]
    assert ax.get_ylim() == (-90.0, 90.0) and ax.get_xlim()[0] < ax.get_xlim()[1]
    assert "different scales below and above 0" in figures[0].axes[1].get_xlabel()


# --------------------------------------------------------------------------------------------
# smaller things
# --------------------------------------------------------------------------------------------
def test_regrid_keeps_other_variables_and_coordinate_names(tmp_path):
    grid = sphex.Grid.equiangular(36, 72, "cells")
    rng = np.random.default_rng(9)
    values = random_field_file(tmp_path / "tmp.nc", 10, grid, rng, steps=2)
    ds = xr.Dataset(
        {"t2m": (("time", "latitude", "longitude"), values, {"units": "K"}),
         "sp": (("time", "latitude", "longitude"), 2 * values, {"units": "Pa"}),
         "time_bnds": (("time", "nv"), np.array([[0, 1], [1, 2]])),
         "lat_bnds": (("latitude", "nv"), np.zeros((36, 2)))},
        coords={"time": [0, 1],
                "latitude": ("latitude", grid.lat, {"units": "degrees_north", "bounds": "lat_bnds"}),
                "longitude": ("longitude", grid.lon, {"units": "degrees_east"})},
        attrs={"title": "two fields"})
    ds.to_netcdf(tmp_path / "era.nc")
    r = ok(run("regrid", tmp_path / "era.nc", "--grid", "gauss:15", "-o", tmp_path / "out.nc"))
    with xr.open_dataset(tmp_path / "out.nc") as out:
        assert set(out.data_vars) == {"t2m", "sp", "time_bnds"}
        assert out["t2m"].dims == ("time", "latitude", "longitude")
        assert out["latitude"].attrs["units"] == "degrees_north" and out.attrs["title"] == "two fields"
        np.testing.assert_array_equal(out["time_bnds"].values, [[0, 1], [1, 2]])
        np.testing.assert_allclose(out["sp"].values, 2 * out["t2m"].values, rtol=1e-12, atol=1e-12)
    assert "copied unchanged: time_bnds" in r.stdout and "lat_bnds" in r.stdout


def test_units_as_users_write_them(pair):
    d, *_ = pair
    r = ok(run("spectrum", d / "a_coef.nc", "--csv", d / "u.csv"))
    assert "m2, rms" in r.stdout and "^2" not in r.stdout and "**" not in r.stdout
