"""End-to-end checks of the ``sphex`` command line, run as a subprocess on temporary files.

Each subprocess pays Python's and numba's start-up (the kernels are cached on
disk after the first run), so the grids are small and the runs few.
"""
from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import cli
from sphex.cli import shared

from _reference import complex_form_field
from _smoothing import cap_weights_by_quadrature, gaussian_weights_by_quadrature

LMAX = 14


def run(*args, cwd=None):
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    env.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=300)


def _band_limited(rng, batch):
    coef = np.zeros(batch + (LMAX + 1, LMAX + 1), dtype=complex)
    for l in range(LMAX + 1):
        coef[..., l, : l + 1] = (rng.normal(size=batch + (l + 1,))
                                 + 1j * rng.normal(size=batch + (l + 1,))) / (1 + l)
    coef[..., 0] = coef[..., 0].real
    return sphex.Harmonics(coef)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A north-to-south file with longitudes 0..359 and a time axis, plus odd files."""
    d = tmp_path_factory.mktemp("cli")
    rng = np.random.default_rng(7)
    # 2-degree cells north to south, 1-degree longitudes 0..359: exact to degree 44
    lat = 89.0 - 2.0 * np.arange(90)
    lon = np.arange(360.0)
    grid = sphex.Grid.from_coords(lat, lon)
    h = _band_limited(rng, (3,))
    values = sphex.synthesize(h, grid)
    time = np.array(["2030-01-01", "2030-01-02", "2030-01-03"], dtype="datetime64[ns]")
    ds = xr.Dataset(
        {"tsurf": (("time", "lat", "lon"), values, {"units": "K", "long_name": "surface temperature"}),
         "region": (("y", "x"), np.zeros((5, 72)))},
        coords={"time": time, "lat": ("lat", lat, {"units": "degrees_north"}),
                "lon": ("lon", lon, {"units": "degrees_east"}),
                "y": ("y", np.linspace(30, 50, 5), {"units": "degrees_north"}),
                "x": ("x", np.arange(72) * 5.0, {"units": "degrees_east"})},
    )
    series = d / "series.nc"
    ds.to_netcdf(series)
    single = d / "single.nc"
    ds[["tsurf"]].isel(time=0).to_netcdf(single)
    (d / "notes.nc").write_text("this is not netCDF\n")
    return {"dir": d, "series": series, "single": single, "values": values, "lat": lat,
            "lon": lon, "time": time, "h": h}


def test_help_lists_every_command_and_subcommand_help_has_an_example(capsys):
    r = run("--help")
    assert r.returncode == 0
    for name in ("analyze", "synthesize", "spectrum", "smooth", "regrid", "inspect", "report", "demo",
                 "bench"):
        assert name in r.stdout
    for name in ("analyze", "synthesize", "spectrum", "smooth", "regrid", "inspect", "report", "demo"):
        with pytest.raises(SystemExit) as e:        # in-process: argparse help exits 0
            cli.main([name, "--help"])
        assert e.value.code == 0
        assert "example:" in capsys.readouterr().out


def test_analyze_then_synthesize_onto_the_input_grid(files):
    d = files["dir"]
    coef = d / "coef.nc"
    r = run("analyze", files["series"], "-v", "tsurf", "-o", coef)
    assert r.returncode == 0, r.stderr
    assert "degrees 0..44" in r.stdout and "3 fields" in r.stdout
    back = d / "back.nc"
    r = run("synthesize", coef, "--grid", files["series"], "-o", back)
    assert r.returncode == 0, r.stderr
    with xr.open_dataset(back) as out, xr.open_dataset(files["series"]) as src:
        np.testing.assert_array_equal(out["lat"].values, src["lat"].values)     # north to south kept
        np.testing.assert_array_equal(out["lon"].values, src["lon"].values)
        np.testing.assert_array_equal(out["time"].values, src["time"].values)
        assert out["tsurf"].dims == ("time", "lat", "lon")
        assert out["tsurf"].attrs["units"] == "K"
        # a round trip through a file (analysis then synthesis on a grid exact to degree 44 for a
        # degree-14 field): measured 6.4e-15 of the largest value; 3e-14 is five times that
        err = float(abs(out["tsurf"] - src["tsurf"]).max())
        assert err < 3e-14 * float(abs(src["tsurf"]).max()), err
    # the coefficient file is in the documented layout and reproduces the generating coefficients
    ds = sxr.open_coefficients(coef)
    assert ds.attrs["normalization"] == "orthonormal" and ds.attrs["field_name"] == "tsurf"
    # measured 5.8e-16 (largest coefficient 1.2) and 1.7e-15 above degree 14: bounds of 5x that
    c, s = files["h"].cos_sin()
    np.testing.assert_allclose(ds[sxr.COS].values[:, : LMAX + 1, : LMAX + 1], c, rtol=0, atol=3e-15)
    np.testing.assert_allclose(ds[sxr.SIN].values[:, : LMAX + 1, : LMAX + 1], s, rtol=0, atol=3e-15)
    assert float(abs(ds[sxr.COS][:, LMAX + 1:]).max()) < 1e-14
    assert float(abs(ds[sxr.SIN][:, LMAX + 1:]).max()) < 1e-14


def test_spectrum_csv_and_plot(files):
    d = files["dir"]
    csv, png = d / "p.csv", d / "p.png"
    r = run("spectrum", files["series"], "-v", "tsurf", "--lmax", LMAX, "--csv", csv, "--plot", png,
            "--slope", "2:14")
    assert r.returncode == 0, r.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rows = [ln.split(",") for ln in csv.read_text().splitlines() if not ln.startswith("#")]
    assert rows[0][0] == "degree" and len(rows[0]) == 4 and len(rows) == LMAX + 2
    power = np.array([[float(x) for x in row[1:]] for row in rows[1:]])
    # Parseval: the spectrum sums to the area mean of f^2 (quadrature on the input grid, exact for
    # f^2 of degree 28; the CSV holds 17 digits): measured 4.4e-16 relative, bound 4e-15
    grid = sphex.Grid.from_coords(files["lat"], files["lon"])
    mean_sq = grid.integrate(files["values"] ** 2) / (4 * np.pi)
    np.testing.assert_allclose(power.sum(axis=0), mean_sq, rtol=4e-15)
    assert "slope" in r.stdout


@pytest.mark.parametrize("text,value", [("300", 300.0), ("300km", 300.0), ("300 km", 300.0),
                                        ("2.5KM", 2.5)])
def test_distances_in_km_may_carry_the_unit(text, value):
    assert shared.distance_km(text) == value


@pytest.mark.parametrize("text,value", [("1350", 1350.0), ("1350km", 1350.0), ("1350 km", 1350.0),
                                        ("1350000m", 1350.0), ("1350000 m", 1350.0), ("0.5KM", 0.5)])
def test_radius_may_carry_km_or_m(text, value):
    from sphex.cli.radius import radius_km

    assert radius_km(text) == pytest.approx(value, rel=1e-15)   # 1350000 * 1e-3 rounds


@pytest.mark.parametrize("text", ["10", "10deg", "10 degrees", "10\u00b0"])
def test_cap_radius_may_carry_the_unit(text):
    assert shared.cap_radius(text) == 10.0


@pytest.mark.reference
def test_smooth_regrid_and_text_table(files):
    # source: smoothing multiplies degree l by the kernel's Legendre coefficient (Funk-Hecke
    # theorem; common practice); the weights are integrated from the Gaussian kernel (half its
    # peak at r/R, Jekeli 1981, from memory) and from the cap's indicator with scipy.integrate.quad
    # and scipy.special.eval_legendre (tests/_smoothing.py), and the expected fields are summed
    # directly with scipy.special (tests/_reference.complex_form_field): nothing of sphex's
    # filters or transforms is in the reference.
    d = files["dir"]
    h0 = files["h"].replace(coef=files["h"].coef[0])
    colat, lon = np.radians(90.0 - files["lat"]), np.radians(files["lon"])
    sm = d / "smooth.nc"
    r = run("smooth", files["single"], "--gaussian", 800, "--radius", 6371, "-o", sm)
    assert r.returncode == 0, r.stderr
    w = gaussian_weights_by_quadrature(800.0, 6371.0, LMAX)
    expect = complex_form_field(h0.coef * w[:, None], colat, lon, "orthonormal", True)
    with xr.open_dataset(sm) as out:
        # measured 5.1e-15 of the largest value; bound 3e-14 (a cap of the same 800 km is off
        # by 0.2, a Gaussian of 880 km by 5e-2)
        err = np.abs(out["tsurf"].values - expect).max() / np.abs(expect).max()
        assert err < 3e-14, err
    cap = d / "cap.nc"
    r = run("smooth", files["single"], "--cap", "10deg", "-o", cap)
    assert r.returncode == 0, r.stderr
    w = cap_weights_by_quadrature(10.0, LMAX)
    expect = complex_form_field(h0.coef * w[:, None], colat, lon, "orthonormal", True)
    with xr.open_dataset(cap) as out:
        err = np.abs(out["tsurf"].values - expect).max() / np.abs(expect).max()
        assert err < 2e-14, err                  # measured 2.4e-15
    rg = d / "regrid.nc"
    r = run("regrid", files["single"], "--grid", "gauss:20", "-o", rg)
    assert r.returncode == 0, r.stderr
    g = sphex.Grid.gauss(20)
    expect = complex_form_field(h0.coef, np.asarray(g.colat), np.radians(g.lon), "orthonormal", True)
    with xr.open_dataset(rg) as out:
        err = np.abs(out["tsurf"].values - expect).max() / np.abs(expect).max()
        assert err < 1e-14, err                  # measured 2.1e-15
    txt = d / "c.txt"
    r = run("analyze", files["single"], "--lmax", LMAX, "-o", txt)
    assert r.returncode == 0, r.stderr
    h, _ = sxr.read_table(txt)
    # the table keeps 17 digits: measured 5.8e-16 against coefficients up to 0.82
    np.testing.assert_allclose(h.coef, h0.coef, rtol=0, atol=3e-15)


def test_inspect_explains_each_variable(files):
    r = run("inspect", files["series"])
    assert r.returncode == 0, r.stderr
    assert "equiangular-cells" in r.stdout and "exact to degree 44" in r.stdout
    assert "north to south" in r.stdout
    region = r.stdout.split("region")[1]
    assert "not usable" in region and "not global" in region


def _assert_user_error(r, *words):
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1, r.stderr
    assert "Traceback" not in r.stderr
    for w in words:
        assert w in lines[0], lines[0]


ERRORS = [
    (("analyze", "{dir}/missing.nc", "-o", "{out}"), ("no such file",)),
    (("analyze", "{dir}/notes.nc", "-o", "{out}"), ("not a readable netCDF",)),
    (("analyze", "{series}", "-v", "pressure", "-o", "{out}"), ("no variable 'pressure'", "tsurf")),
    (("analyze", "{series}", "-v", "region", "-o", "{out}"), ("not global",)),
    (("analyze", "{series}", "-v", "tsurf", "--lmax", "45", "-o", "{out}"), ("exact limit 44",)),
    (("analyze", "{series}", "-v", "tsurf", "--norm", "geodesy", "-o", "{out}"),
     ("unknown normalisation 'geodesy'", "orthonormal")),
    (("regrid", "{series}", "-v", "tsurf", "--grid", "gauss", "-o", "{out}"), ("gauss:LMAX",)),
    (("smooth", "{series}", "-v", "tsurf", "--gaussian", "300m", "-o", "{out}"), ("in km",)),
    (("smooth", "{series}", "-v", "tsurf", "--cap", "200deg", "-o", "{out}"), ("at most 180",)),
]


@pytest.mark.parametrize("args,words", ERRORS, ids=[e[1][0] for e in ERRORS])
def test_user_errors_exit_2_with_one_line_and_no_output(files, args, words):
    out = files["dir"] / "never.nc"
    fmt = {"dir": files["dir"], "series": files["series"], "out": out}
    r = run(*(a.format(**fmt) for a in args))
    _assert_user_error(r, *words)
    assert not out.exists()
    assert not [p for p in files["dir"].iterdir() if "sphex-partial" in p.name]


def test_existing_output_is_left_byte_identical(files):
    d = files["dir"]
    keep = d / "keep.nc"
    keep.write_bytes(b"precious bytes")
    r = run("analyze", files["single"], "-o", keep)
    _assert_user_error(r, "exists", "--overwrite")
    assert keep.read_bytes() == b"precious bytes"
    r = run("analyze", files["single"], "--lmax", 4, "-o", keep, "--overwrite")
    assert r.returncode == 0, r.stderr
    assert sxr.open_coefficients(keep).sizes["degree"] == 5


def test_demo_writes_its_products(tmp_path):
    out = tmp_path / "demo"
    r = run("demo", "--out", out)
    assert r.returncode == 0, r.stderr
    names = sorted(p.name for p in out.iterdir())
    for n in ("velanthe_topography_coef.nc", "topography_spectrum.png", "topography_smoothed_200km.png",
              "topography_smoothed_200km.nc", "topography_isotropy.png", "velanthe_wind_flow.nc",
              "winds_vorticity.png", "winds_velocity_potential.png", "winds_energy_spectrum.png",
              "velanthe_topography_report.html", "velanthe_winds_report.html"):
        assert n in names
        assert str(out / n) in r.stdout
    report = (out / "velanthe_topography_report.html").read_text(encoding="utf-8")
    assert '<section id="maps">' in report and "sphex report " in report and "-v topography" in report
    winds = (out / "velanthe_winds_report.html").read_text(encoding="utf-8")
    assert '<section id="winds">' in winds and '<section id="wind-maps">' in winds
    assert '<section id="maps">' not in winds and "velanthe_winds.nc -o " in winds
    ds = sxr.open_coefficients(out / "velanthe_topography_coef.nc")
    assert ds.attrs["lmax"] == 89 and ds.attrs["reference_radius"] == 1.35e6
    with xr.open_dataset(out / "velanthe_wind_flow.nc") as flow:
        assert flow.attrs["planet_radius_km"] == 1350.0 and flow.sizes["time"] == 4
        assert flow["vorticity"].attrs["units"] == "s-1"
    r = run("demo", "--out", out)
    _assert_user_error(r, "already holds demo results", "--overwrite")


def test_interrupted_write_leaves_nothing(tmp_path):
    from sphex.xr.output import atomic_output

    target = tmp_path / "x.nc"
    with pytest.raises(KeyboardInterrupt):
        with atomic_output(target) as tmp:
            tmp.write_bytes(b"half a file")
            raise KeyboardInterrupt
    assert list(tmp_path.iterdir()) == []


def test_progress_bar_on_a_terminal_and_a_few_plain_lines_elsewhere():
    import io

    from sphex.cli.progress import Progress

    class Tty(io.StringIO):
        def isatty(self):
            return True

    tty, pipe, log = Tty(), io.StringIO(), io.StringIO()
    for stream, after in ((tty, 2.0), (pipe, 2.0), (log, 0.0)):
        with Progress(12, "sphex analyze", stream=stream, log_after=after, tick=0) as bar:
            for done in range(1, 13):
                bar(done, 12)
    assert "| 12/12 fields" in tty.getvalue() and tty.getvalue().endswith("\n")
    assert pipe.getvalue() == ""                 # a short run in a pipe: nothing
    lines = log.getvalue().splitlines()          # a long one: the quarters, no more
    assert [ln.split(" (")[-1] for ln in lines] == ["25 %)", "50 %)", "75 %)", "100 %)"]
    assert lines[0].startswith("sphex analyze: 3/12 fields")


def test_progress_time_ticks_while_a_field_is_being_worked_on():
    import io
    import time

    from sphex.cli.progress import Progress

    class Tty(io.StringIO):
        def isatty(self):
            return True

    tty = Tty()
    with Progress(1, "sphex smooth", stream=tty, tick=0.05):
        time.sleep(0.5)                          # one long field, nothing finishes
    draws = tty.getvalue().split("\r")[1:]
    assert len(draws) >= 5 and all("| 0/1 field " in d for d in draws)
    seconds = [float(d.split("field")[1].split("s")[0]) for d in draws]
    assert seconds == sorted(seconds) and seconds[-1] >= 0.4 and len(set(seconds)) >= 4


def test_bundled_demo_data_are_what_the_script_makes_and_say_they_are_synthetic():
    from pathlib import Path

    from sphex import demo

    here = Path(__file__).resolve().parent.parent / "data_demo"
    for name, make in ((demo.TOPO_FILE, demo.make_topography), (demo.TEMP_FILE, demo.make_temperature),
                       (demo.WIND_FILE, demo.make_winds)):
        fresh = make()
        assert fresh.attrs["synthetic"] == "yes" and "fictional" in fresh.attrs["planet_name"]
        with xr.open_dataset(here / name) as shipped:
            assert "synthetic" in shipped.attrs["source"]
            for var in fresh.data_vars:
                # float32 files: allow a last-bit flip if the kernels' rounding changes
                np.testing.assert_allclose(shipped[var].values, fresh[var].values, rtol=0, atol=1e-3)
    topo = sxr.find_grid(demo.make_topography()["topography"])
    assert topo.grid.kind == "equiangular-cells" and topo.grid.lat[0] < 0     # south to north
    temp = sxr.find_grid(demo.make_temperature()["surface_temperature"])
    assert temp.grid.kind == "gauss" and temp.grid.lat[0] > 0                 # north to south
    winds = demo.make_winds()
    wind = sxr.find_grid(winds["u"])
    assert wind.grid.kind == "equiangular-poles" and wind.grid.lat[0] > 0     # north to south
    assert (winds["u"].attrs["standard_name"], winds["v"].attrs["standard_name"]) == \
        ("eastward_wind", "northward_wind")
    assert (here / demo.WIND_FILE).stat().st_size < 2**20


def test_demo_makes_its_data_when_the_repository_copy_is_missing(tmp_path, monkeypatch, capsys):
    from sphex import demo

    monkeypatch.setattr(demo, "_bundled_data", lambda: None)
    assert demo.run(tmp_path / "out") == 0
    assert (tmp_path / "out" / "data" / demo.TOPO_FILE).exists()
    assert "made now" in capsys.readouterr().out
    assert (tmp_path / "out" / "topography_spectrum.png").exists()


def test_a_failing_demo_takes_back_what_it_wrote(tmp_path, monkeypatch):
    from sphex import demo, plot

    calls = []
    real_save = plot.save

    def save_then_fail(fig, path, **kw):
        calls.append(path)
        if len(calls) == 2:
            raise KeyboardInterrupt          # as if the user pressed Ctrl-C here
        return real_save(fig, path, **kw)

    monkeypatch.setattr(plot, "save", save_then_fail)
    out = tmp_path / "new"
    with pytest.raises(KeyboardInterrupt):
        demo.run(out)
    assert len(calls) == 2
    assert not out.exists()                  # the coefficient file and first map are gone too
