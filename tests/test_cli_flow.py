"""``sphex flow`` end to end, as a subprocess on files laid out like a reanalysis download
(latitudes north to south, longitudes from 0, a time axis, float32, CF standard names),
and the figures it draws."""
from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

import sphex
from sphex import cli
from sphex.flow import Flow, synthesize_flow

LMAX = 18                      # the exact limit of the 37 x 72 grid with both poles
EARTH_KM = 6371.0088


def run(*args):
    env = dict(os.environ)
    env.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", "flow", *map(str, args)],
                          capture_output=True, text=True, env=env, timeout=300)


def _assert_user_error(r, *words):
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert lines[0].startswith("sphex flow: error:"), lines[0]
    for w in words:
        assert w in lines[0], lines[0]


def _flow(rng, steps, radius):
    parts = []
    for _ in range(2):
        coef = np.zeros((steps, LMAX + 1, LMAX + 1), dtype=complex)
        for l in range(1, LMAX + 1):
            coef[:, l, : l + 1] = (rng.normal(size=(steps, l + 1))
                                   + 1j * rng.normal(size=(steps, l + 1))) * radius * 5.0 / l ** 2
        coef[..., 0] = coef[..., 0].real
        parts.append(sphex.Harmonics(coef, radius=radius))
    return Flow(*parts)


def _dataset(u, v, lat, lon, time, standard=True):
    attrs = [{"units": "m s**-1", "long_name": f"{c} component of wind"} for c in "UV"]
    if standard:
        attrs[0]["standard_name"] = "eastward_wind"
        attrs[1]["standard_name"] = "northward_wind"
    dims = ("time", "latitude", "longitude")
    return xr.Dataset(
        {"u": (dims, u.astype(np.float32), attrs[0]), "v": (dims, v.astype(np.float32), attrs[1]),
         "t": (dims, np.full(u.shape, 250.0, np.float32), {"units": "K"})},
        coords={"time": time,
                "latitude": ("latitude", lat, {"units": "degrees_north", "standard_name": "latitude"}),
                "longitude": ("longitude", lon, {"units": "degrees_east",
                                                 "standard_name": "longitude"})},
        attrs={"Conventions": "CF-1.6", "title": "winds for the checks (invented)"})


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("flow")
    rng = np.random.default_rng(11)
    lat = 90.0 - 5.0 * np.arange(37)
    lon = 5.0 * np.arange(72)
    time = np.array(["2024-01-01T00", "2024-01-01T06", "2024-01-01T12"], dtype="datetime64[ns]")
    flow = _flow(rng, 3, EARTH_KM * 1e3)
    grid = sphex.Grid.from_coords(lat, lon)
    u, v = synthesize_flow(flow, grid)
    ds = _dataset(u, v, lat, lon, time)
    paths = {"dir": d, "flow": flow, "grid": grid, "winds": d / "winds.nc"}
    ds.to_netcdf(paths["winds"])
    _dataset(u, v, lat, lon, time, standard=False).to_netcdf(d / "plain.nc")
    holes = ds.copy(deep=True)
    holes["v"][1, 5, 7] = np.nan
    holes.to_netcdf(d / "holes.nc")
    # a C-grid: v on the 36 cell centres between u's 37 rows
    stag = ds.drop_vars("v").assign(v=(("time", "lat_v", "longitude"),
                                       np.zeros((3, 36, 72), np.float32), ds["v"].attrs))
    stag = stag.assign_coords(lat_v=("lat_v", 87.5 - 5.0 * np.arange(36), {"units": "degrees_north"}))
    stag.to_netcdf(d / "staggered.nc")
    # v with two steps of its own
    short = ds.drop_vars("v").assign(v=(("time_v", "latitude", "longitude"),
                                        ds["v"].values[:2], ds["v"].attrs))
    short.assign_coords(time_v=time[:2]).to_netcdf(d / "shapes.nc")
    return paths


def _no_leftovers(d):
    assert not [p for p in d.iterdir() if "sphex-partial" in p.name]


def test_a_new_user_run_writes_the_diagnostics_the_spectrum_and_the_plot(files):
    d, flow, grid = files["dir"], files["flow"], files["grid"]
    out, csv, png = d / "winds_flow.nc", d / "energy.csv", d / "energy.png"
    r = run(files["winds"], "-o", out, "--spectrum", csv, "--plot", png)
    assert r.returncode == 0, r.stderr
    # no warning text on stderr: only the plain progress lines of a run longer than 2 s
    assert all(line.startswith("sphex flow: ") and "fields" in line
               for line in r.stderr.splitlines()), r.stderr
    assert "'u' and 'v' (winds) on a 37 x 72 equiangular-poles grid (north to south" in r.stdout
    assert f"radius {EARTH_KM} km (Earth's mean radius, assumed" in r.stdout
    assert f"degrees 0..{LMAX}" in r.stdout
    with xr.open_dataset(out) as ds:
        assert ds["vorticity"].dims == ("time", "latitude", "longitude")
        assert ds["vorticity"].dtype == np.float32                 # as the input
        np.testing.assert_array_equal(ds["latitude"].values, 90.0 - 5.0 * np.arange(37))  # as read
        assert ds["time"].values[2] == np.datetime64("2024-01-01T12", "ns")
        assert ds.attrs["title"] == "winds for the checks (invented)"
        assert "sphex flow" in ds.attrs["history"] and ds.attrs["planet_radius_km"] == EARTH_KM
        assert (ds["vorticity"].attrs["units"], ds["streamfunction"].attrs["units"]) == \
            ("s-1", "m2 s-1")
        assert ds["divergence"].attrs["standard_name"] == "divergence_of_wind"
        assert "t" not in ds
        # the values: the flow the file was made from (float32 input: relative 1e-6)
        zeta = sphex.synthesize(flow.vorticity(), grid)
        delta = sphex.synthesize(flow.divergence(), grid)
        chi = sphex.synthesize(flow.chi, grid)
        for name, expected in (("vorticity", zeta), ("divergence", delta),
                               ("velocity_potential", chi)):
            err = np.abs(ds[name].values - expected).max() / np.abs(expected).max()
            assert err < 2e-6, (name, err)
        rot, div = sphex.spectra.kinetic_energy(flow)
        np.testing.assert_allclose(ds["kinetic_energy_rotational"].values, rot, rtol=1e-5,
                                   atol=1e-6 * rot.max())
    lines = csv.read_text().splitlines()
    assert lines[0] == "time,degree,rotational,divergent,total"
    assert len(lines) == 1 + 3 * (LMAX + 1)
    first = [row.split(",") for row in lines[1:LMAX + 2]]
    assert first[5][0] == "2024-01-01T00:00:00" and first[5][1] == "5"
    total = sum(float(row[4]) for row in first)
    assert total == pytest.approx(rot[0].sum() + div[0].sum(), rel=1e-5)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    _no_leftovers(d)


@pytest.mark.reference
def test_radius_rotation_and_streaming_by_single_steps(files):
    d = files["dir"]
    base, out = d / "base.nc", d / "moon.nc"
    assert run(files["winds"], "-o", base).returncode == 0
    r = run(files["winds"], "-o", out, "--radius", "1350km", "--rotation-rate", "2.5e-6",
            "--chunks", "time=1")
    assert r.returncode == 0, r.stderr
    assert "radius 1350 km (--radius)" in r.stdout and "absolute_vorticity" in r.stdout
    with xr.open_dataset(base) as a, xr.open_dataset(out) as b:
        # the same winds on a smaller sphere: vorticity grows as 1/R (zeta = lap psi, psi ~ R u;
        # common practice), and the absolute vorticity adds the Coriolis parameter
        # f = 2 Omega sin(lat) (common practice)
        np.testing.assert_allclose(b["vorticity"].values * 1350.0 / EARTH_KM, a["vorticity"].values,
                                   rtol=2e-6, atol=1e-6 * float(np.abs(a["vorticity"]).max()))
        f = 2 * 2.5e-6 * np.sin(np.radians(b["latitude"].values))[:, None]
        np.testing.assert_allclose(b["absolute_vorticity"].values - b["vorticity"].values,
                                   np.broadcast_to(f, b["vorticity"].shape[1:])[None].repeat(3, 0),
                                   atol=1e-6 * float(np.abs(b["vorticity"]).max()))
        assert b.attrs["planet_radius_km"] == 1350.0


BAD = [
    (("{dir}/staggered.nc",), ("not on the same grid", "interpolate")),
    (("{dir}/shapes.nc",), ("dimensions", "select the same")),
    (("{dir}/holes.nc",), ("'v' has 1 missing value", "time=2024-01-01T06")),
    (("{winds}", "--lmax", "19"), ("exact limit 18", "use lmax <= 18")),
    (("{dir}/plain.nc",), ("no variables with the CF standard_name", "--east VAR --north VAR")),
    (("{dir}/plain.nc", "--east", "u"), ("give both --east and --north",)),
    (("{winds}", "--east", "u", "--north", "w"), ("no variable 'w'", "u, v, t")),
    (("{winds}", "--radius", "6371008.8"), ("larger than the Sun", "6371008.8m")),
    (("{winds}", "--plot", "{out}"), ("two outputs are the same file", "different names")),
    (("{winds}", "-o", "{winds}"), ("is the input file",)),
    (("{dir}/missing.nc",), ("no such file",)),
]


@pytest.mark.parametrize("args,words", BAD, ids=[b[1][0][:24] for b in BAD])
def test_bad_input_exits_2_with_the_problem_and_the_fix(files, args, words):
    d = files["dir"]
    out = d / "never.nc"
    fmt = {"dir": d, "winds": files["winds"], "out": out}
    argv = [a.format(**fmt) for a in args]
    if "-o" not in argv:
        argv += ["-o", str(out)]
    before = files["winds"].read_bytes()
    r = run(*argv)
    _assert_user_error(r, *words)
    assert not out.exists()
    assert files["winds"].read_bytes() == before
    _no_leftovers(d)


def test_existing_outputs_are_left_alone_without_the_flag(files):
    d = files["dir"]
    keep, csv = d / "keep.nc", d / "keep.csv"
    keep.write_bytes(b"precious")
    r = run(files["winds"], "-o", keep)
    _assert_user_error(r, "exists", "--overwrite")
    assert keep.read_bytes() == b"precious"
    csv.write_text("mine\n")
    r = run(files["winds"], "-o", d / "fresh.nc", "--spectrum", csv)
    _assert_user_error(r, "exists")
    assert csv.read_text() == "mine\n" and not (d / "fresh.nc").exists()
    r = run(files["winds"], "-o", keep, "--overwrite")
    assert r.returncode == 0, r.stderr
    with xr.open_dataset(keep) as ds:
        assert "vorticity" in ds.data_vars


def test_help_has_an_example_and_the_command_is_listed(capsys):
    with pytest.raises(SystemExit) as e:
        cli.main(["flow", "--help"])
    assert e.value.code == 0
    text = capsys.readouterr().out
    assert "example:" in text and "--east" in text and "eastward_wind" in text
    cli.main([])
    assert "  flow " in capsys.readouterr().out


# ----------------------------------------------------------------------------
# the figures
# ----------------------------------------------------------------------------
@pytest.mark.reference
def test_energy_figure_draws_both_parts_and_the_reference_slopes_as_such():
    from sphex import plot

    l = np.arange(48.0)
    rot = np.r_[0.0, 50.0 * l[1:] ** -3.0]
    div = np.r_[0.0, 0.5 * l[1:] ** (-5.0 / 3.0)]
    fig = plot.energy_figure(rot, div, units="m2 s-2", planet_radius_km=6371.0, note="mean of 4")
    ax = fig.axes[0]
    assert (ax.get_xscale(), ax.get_yscale()) == ("log", "log")
    lines = {line.get_label(): line for line in ax.get_lines()}
    # the l^-3 and l^-5/3 ranges of atmospheric kinetic-energy spectra (common practice)
    for label, slope in (("reference slope -3", -3.0), ("reference slope -5/3", -5.0 / 3.0)):
        x, y = (np.asarray(a, dtype=float) for a in lines[label].get_data())
        fitted = np.polyfit(np.log(x), np.log(y), 1)[0]
        assert fitted == pytest.approx(slope, abs=1e-12)
    x, y = lines["rotational (from psi)"].get_data()
    np.testing.assert_array_equal(y, rot[1:])
    x, y = lines["total"].get_data()
    np.testing.assert_allclose(y, rot[1:] + div[1:], rtol=1e-15)
    assert "m² s⁻²" in ax.get_ylabel()  # typeset as the other figures do
    assert ax.get_legend().get_title().get_text() == "mean of 4"
    assert {t.get_text() for t in ax.texts} >= {"-3", "-5/3"}
    with pytest.raises(ValueError, match="two spectra of one length"):
        plot.energy_figure(rot, div[:10])


def test_wind_map_figure_draws_the_components_as_arrows():
    from sphex import plot

    grid = sphex.Grid.equiangular(37, 72, "poles")
    lat = np.radians(grid.lat)[:, None] + 0 * grid.lon
    dims, coords = ("lat", "lon"), {"lat": grid.lat, "lon": grid.lon}
    u = xr.DataArray(20 * np.cos(lat), dims=dims, coords=coords, name="u", attrs={"units": "m s-1"})
    v = xr.DataArray(0 * lat + 3.0, dims=dims, coords=coords, name="v")
    fig = plot.wind_map_figure(u * 1e-6, u, v, arrows=24)
    quiver = [c for c in fig.axes[0].collections if hasattr(c, "U")][0]
    step = 3                                             # 72 columns / 24 arrows
    np.testing.assert_allclose(np.asarray(quiver.U).reshape(-1),
                               np.asarray(u.values[step // 2::step, ::step]).reshape(-1))
    np.testing.assert_allclose(np.asarray(quiver.V), 3.0)
