"""Checks of the xarray/netCDF layer (sphex.xr): grid detection, round trips, files."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import filters
from sphex.spectra import degree_power


def _random_harmonics(rng, lmax, batch=(), norm="orthonormal", cs=True, radius=None, units=None):
    coef = np.zeros(batch + (lmax + 1, lmax + 1), dtype=complex)
    for l in range(lmax + 1):
        coef[..., l, : l + 1] = rng.normal(size=batch + (l + 1,)) + 1j * rng.normal(size=batch + (l + 1,))
    coef[..., 0] = coef[..., 0].real
    return sphex.Harmonics(coef, norm=norm, condon_shortley=cs, radius=radius, units=units)


def _field(lat, lon, lat0=0.0):
    """A band-limited test field (degree <= 3) written in latitude/longitude.

    Products of sin(lat), cos(lat)^k cos(k lon) of total degree <= 3 lie in the span
    of the harmonics of degree <= 3 (common practice)."""
    la, lo = np.deg2rad(lat)[:, None], np.deg2rad(lon)[None, :]
    return (1.5 + np.sin(la) + np.cos(la) ** 2 * np.cos(2 * lo - 0.3)
            + np.sin(la) * np.cos(la) ** 2 * np.sin(2 * lo) + np.cos(la) ** 3 * np.cos(3 * lo))


def _da(lat, lon, dims=("lat", "lon"), name="f", **attrs):
    return xr.DataArray(_field(lat, lon), dims=dims, coords={dims[0]: lat, dims[1]: lon},
                        name=name, attrs=attrs)


# ---------------------------------------------------------------------------- detection
def test_find_grid_by_name_units_and_standard_name():
    lat = 90 - 180 * (np.arange(18) + 0.5) / 18
    lon = np.arange(36) * 10.0
    by_name = _da(lat, lon, dims=("latitude", "x"))
    info = sxr.find_grid(by_name)
    assert (info.lat_dim, info.lon_dim) == ("latitude", "x")
    assert info.grid.kind == "equiangular-cells" and info.grid.lmax_exact == 8
    # names that mean nothing, recognised through CF units
    by_units = xr.DataArray(_field(lat, lon), dims=("rows", "cols"),
                            coords={"rows": ("rows", lat, {"units": "degrees_north"}),
                                    "cols": ("cols", lon, {"units": "degree_east"})})
    assert sxr.find_grid(by_units).lat_dim == "rows"
    # a non-dimension coordinate carrying a CF standard_name
    by_std = xr.DataArray(_field(lat, lon), dims=("j", "i"),
                          coords={"phi": ("j", lat, {"standard_name": "latitude"}),
                                  "lam": ("i", lon, {"standard_name": "longitude"})})
    info = sxr.find_grid(by_std)
    assert (info.lat_name, info.lon_name, info.lat_dim) == ("phi", "lam", "j")


def test_missing_coordinate_and_regional_grid_are_explained():
    da = xr.DataArray(np.zeros((4, 8)), dims=("a", "b"), name="v")
    with pytest.raises(ValueError, match="no latitude and longitude coordinate"):
        sxr.find_grid(da)
    lat = np.linspace(20, 60, 21)        # a regional box
    lon = np.arange(36) * 10.0
    with pytest.raises(ValueError, match="not global"):
        sxr.find_grid(_da(lat, lon))
    with pytest.raises(ValueError, match="swapped"):
        sxr.find_grid(_da(np.linspace(-90, 180, 10), lon))


def test_seam_column_descending_and_shifted_longitudes_give_one_answer():
    lat = sphex.Grid.gauss(7).lat
    lon = np.arange(16) * 22.5
    ref = sxr.analyze(_da(lat, lon))
    # (a) 0..360 with the seam column repeated
    lon_seam = np.append(lon, 360.0)
    seam = sxr.analyze(_da(lat, lon_seam))
    # (b) origin at -180 (same field, longitudes written -180..157.5)
    shifted = sxr.analyze(_da(lat, lon - 180.0))
    # (c) longitudes decreasing
    desc = sxr.analyze(_da(lat, lon[::-1]))
    for other in (seam, shifted, desc):
        np.testing.assert_allclose(other[sxr.COS], ref[sxr.COS], atol=1e-13)
        np.testing.assert_allclose(other[sxr.SIN], ref[sxr.SIN], atol=1e-13)
    # synthesis onto the seam grid restores the repeated column
    back = sxr.synthesize(seam, like=_da(lat, lon_seam))
    assert back.sizes["lon"] == 17
    np.testing.assert_array_equal(back.values[:, -1], back.values[:, 0])
    np.testing.assert_allclose(back.values, _field(lat, lon_seam), atol=1e-12)


def test_coefficients_refer_to_the_zero_meridian():
    # f = cos(lat) cos(lon - 30 deg) = cos30 cos(lat)cos(lon) + sin30 cos(lat)sin(lon)
    # (angle-difference identity; common practice), so S11 / C11 = tan(30 deg)
    # whatever longitude the grid starts at.
    lat = sphex.Grid.gauss(5).lat
    for lon0 in (0.0, -180.0, 7.5):
        lon = lon0 + np.arange(12) * 30.0
        f = np.cos(np.deg2rad(lat))[:, None] * np.cos(np.deg2rad(lon - 30.0))[None, :]
        ds = sxr.analyze(xr.DataArray(f, dims=("lat", "lon"), coords={"lat": lat, "lon": lon}))
        c11, s11 = float(ds[sxr.COS][1, 1]), float(ds[sxr.SIN][1, 1])
        assert s11 / c11 == pytest.approx(np.tan(np.deg2rad(30.0)), rel=1e-12)


# ---------------------------------------------------------------------------- round trips
def test_analyze_synthesize_keeps_coordinates_attributes_and_extra_dims(rng):
    lmax = 12
    grid = sphex.Grid.equiangular(26, 52, "cells")       # exact to degree 12
    h = _random_harmonics(rng, lmax, batch=(3, 2))
    values = sphex.synthesize(h, grid)
    lat = np.asarray(grid.lat)[::-1]                       # store south to north
    values = values[..., ::-1, :]
    time = np.array(["2001-01-01", "2001-02-01", "2001-03-01"], dtype="datetime64[ns]")
    da = xr.DataArray(values, dims=("time", "member", "lat", "lon"),
                      coords={"time": time, "member": ["a", "b"], "lat": lat, "lon": grid.lon,
                              "season": ("time", ["w", "w", "s"]), "height": 2.0},
                      name="tas", attrs={"units": "K", "long_name": "air temperature"})
    ds = sxr.analyze(da)
    assert ds[sxr.COS].dims == ("time", "member", "degree", "order")
    assert ds.attrs["lmax"] == lmax and ds.attrs["units"] == "K"
    assert ds.attrs["field_long_name"] == "air temperature"
    np.testing.assert_array_equal(ds["season"].values, ["w", "w", "s"])
    assert float(ds["height"]) == 2.0
    back = sxr.synthesize(ds, like=da)
    assert back.dims == da.dims and back.name == "tas" and back.attrs["units"] == "K"
    np.testing.assert_array_equal(back["lat"].values, lat)
    np.testing.assert_array_equal(back["time"].values, time)
    np.testing.assert_allclose(back.values, values, atol=1e-12)
    # the cos/sin variables are the Harmonics' real form
    c, s = h.cos_sin()
    np.testing.assert_allclose(ds[sxr.COS].values, c, atol=1e-12)
    np.testing.assert_allclose(ds[sxr.SIN].values, s, atol=1e-12)


@pytest.mark.parametrize("norm,cs", [("orthonormal", True), ("full", False), ("schmidt", True), ("unnormalized", True)])
def test_netcdf_round_trip_is_bit_exact(tmp_path, rng, norm, cs):
    h = _random_harmonics(rng, 9, batch=(2,), norm=norm, cs=cs, radius=6.3781e6, units="m")
    path = tmp_path / "h.nc"
    h.to_netcdf(path)
    g = sxr.open_harmonics(path)
    assert np.array_equal(g.coef, h.coef)
    assert (g.norm, g.condon_shortley, g.radius, g.units) == (norm, cs, 6.3781e6, "m")
    # the file itself is in the documented layout
    with xr.open_dataset(path) as f:
        assert f[sxr.COS].dims == ("sample_0", "degree", "order")
        assert f.attrs["normalization"] == norm and f.attrs["lmax"] == 9
        assert f.attrs["phase_convention"] == ("condon-shortley" if cs else "none")
        assert f.attrs["reference_radius"] == 6.3781e6


def test_coefficient_dataset_round_trip_and_no_silent_overwrite(tmp_path, rng):
    grid = sphex.Grid.gauss(10)
    da = xr.DataArray(sphex.synthesize(_random_harmonics(rng, 10), grid), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="z", attrs={"units": "m"})
    ds = sxr.analyze(da, radius=1.0e6)
    path = tmp_path / "c.nc"
    sxr.write_harmonics(ds, path)
    xr.testing.assert_identical(sxr.open_coefficients(path), ds)
    before = path.read_bytes()
    with pytest.raises(FileExistsError, match="overwrite"):
        sxr.write_harmonics(ds, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.nc"]


def test_text_table_round_trip_with_uncertainties(tmp_path, rng):
    h = _random_harmonics(rng, 6, norm="full", radius=1.35e6, units="m")
    sig = (np.abs(rng.normal(size=(7, 7))), np.abs(rng.normal(size=(7, 7))))
    sig = tuple(np.tril(s) for s in sig)
    path = tmp_path / "h.txt"
    sxr.write_table(h, path, sigma=sig, name="topography")
    g, sig2 = sxr.read_table(path)
    c, s = h.cos_sin()
    c2, s2 = g.cos_sin()
    np.testing.assert_array_equal(c2, c)          # 17 significant digits: exact
    np.testing.assert_array_equal(s2, s)
    np.testing.assert_array_equal(sig2[0], sig[0])
    np.testing.assert_array_equal(sig2[1], sig[1])
    assert (g.norm, g.condon_shortley, g.radius, g.units) == ("full", True, 1.35e6, "m")
    text = path.read_text().splitlines()
    assert text[0].startswith("# sphex coefficient table")
    assert sum(1 for t in text if not t.startswith("#")) == 28    # (6+1)(6+2)/2 rows


def test_hand_written_table_any_order_and_errors(tmp_path):
    p = tmp_path / "t.txt"
    p.write_text("# normalization: orthonormal\n2 1 0.5 -0.25\n0 0 3.0 0.0\n")
    h, sigma = sxr.read_table(p)
    assert h.lmax == 2 and sigma is None
    c, s = h.cos_sin()
    assert (c[0, 0], c[2, 1], s[2, 1], c[1, 0]) == (3.0, 0.5, -0.25, 0.0)
    p.write_text("1 2 0.5 0.0\n")
    with pytest.raises(ValueError, match="order above its degree"):
        sxr.read_table(p)
    p.write_text("1 0 0.5 0.0\n1 0 0.4 0.0\n")
    with pytest.raises(ValueError, match="twice"):
        sxr.read_table(p)
    p.write_text("# normalization: geodetic\n0 0 1 0\n")
    with pytest.raises(ValueError, match="unknown normalisation"):
        sxr.read_table(p)


# ---------------------------------------------------------------------------- spectra, filters, regrid
def test_degree_power_dataarray_sums_to_area_mean_square(rng):
    grid = sphex.Grid.equiangular(33, 64, "poles")      # exact to degree 16
    h = _random_harmonics(rng, 16, batch=(2,))
    v = sphex.synthesize(h, grid)
    da = xr.DataArray(v, dims=("t", "lat", "lon"), coords={"lat": grid.lat, "lon": grid.lon},
                      attrs={"units": "K"}, name="T")
    p = sxr.degree_power(da)
    assert p.dims == ("t", "degree") and p.attrs["units"] == "K^2"
    # area mean of f^2 by an independent quadrature: numpy Gauss-Legendre in
    # x = cos(colat) and equally spaced longitudes (numpy.polynomial.legendre.leggauss)
    xg, wg = np.polynomial.legendre.leggauss(40)
    fine = sphex.Grid.gauss(39)          # rows north to south: x = cos(colat) descending
    np.testing.assert_allclose(np.cos(np.asarray(fine.colat)), xg[::-1], atol=1e-14)
    vals = sphex.synthesize(h, fine)     # f at the leggauss nodes, 80 equally spaced longitudes
    mean_sq = (vals ** 2).mean(axis=-1) @ wg[::-1] / 2.0
    np.testing.assert_allclose(p.sum("degree").values, mean_sq, rtol=1e-12)
    # the other kinds follow from the power by their definitions
    rms = sxr.degree_power(da, kind="rms")
    assert rms.attrs["units"] == "K"
    np.testing.assert_allclose(rms.values ** 2, p.values, rtol=1e-12)
    per = sxr.degree_power(da, kind="per_coefficient")
    np.testing.assert_allclose(per.values * (2 * np.arange(17) + 1), p.values, rtol=1e-12)
    cum = sxr.degree_power(da, kind="cumulative")
    np.testing.assert_allclose(cum.values, np.cumsum(p.values, axis=-1), rtol=1e-12)


def test_smooth_matches_filtering_by_hand_and_keeps_the_grid(rng):
    grid = sphex.Grid.gauss(20)
    h = _random_harmonics(rng, 20)
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="g", attrs={"units": "mGal"})
    out = sxr.smooth(da, gaussian_km=500.0, planet_radius_km=6371.0)
    w = filters.gaussian(500.0, 20, 6371.0)
    expect = sphex.synthesize(h.filter(w), grid)
    np.testing.assert_allclose(out.values, expect, atol=1e-12)
    assert out.dims == da.dims and out.attrs["units"] == "mGal" and "Gaussian" in out.attrs["history"]
    # a taper that starts above the field's top degree changes nothing
    same = sxr.smooth(da, band=(20, 30))
    np.testing.assert_allclose(same.values, da.values, atol=1e-12)
    with pytest.raises(ValueError, match="exactly one"):
        sxr.smooth(da, gaussian_km=100.0, cap_deg=2.0, planet_radius_km=6371.0)


def test_regrid_between_grid_kinds_reproduces_a_band_limited_field():
    src = sphex.Grid.gauss(12)
    da = xr.DataArray(_field(src.lat, src.lon), dims=("lat", "lon"),
                      coords={"lat": src.lat, "lon": src.lon}, name="f")
    out = sxr.regrid(da, "equiangular:19x40:poles")
    tgt = sphex.Grid.equiangular(19, 40, "poles")
    np.testing.assert_allclose(out.values, _field(tgt.lat, tgt.lon), atol=1e-12)
    np.testing.assert_array_equal(out["lat"].values, tgt.lat)
    assert out["lon"].attrs["units"] == "degrees_east"


def test_parse_grid_and_lmax_errors():
    assert sxr.parse_grid("gauss:31").shape == (32, 64)
    assert sxr.parse_grid("equiangular:91x180:poles").lmax_exact == 45
    for bad in ("gauss", "gauss:-1", "equiangular:10:poles", "equiangular:10x20:rings", "hexagons:4"):
        with pytest.raises(ValueError, match="gauss:LMAX|layout"):
            sxr.parse_grid(bad)
    g = sphex.Grid.gauss(5)
    da = xr.DataArray(_field(g.lat, g.lon), dims=("lat", "lon"), coords={"lat": g.lat, "lon": g.lon})
    with pytest.raises(ValueError, match="exact limit 5"):
        sxr.analyze(da, lmax=6)
    with pytest.raises(ValueError, match="unknown normalisation"):
        sxr.analyze(da, norm="fully")
    with pytest.raises(ValueError, match="'ortho' is no longer accepted: use 'orthonormal'"):
        sxr.analyze(da, norm='ortho')
    bad = da.copy()
    bad[0, 0] = np.nan
    with pytest.raises(ValueError, match="1 missing"):
        sxr.analyze(bad)


def _holey(rng):
    """(member, time, lat, lon) fields with NaN or inf in member 1 at times 2 and 5..10."""
    grid = sphex.Grid.gauss(6)
    v = sphex.synthesize(_random_harmonics(rng, 6, batch=(2, 12)), grid)
    v[1, 2, 0, 0] = np.nan
    v[1, 5:11, 3, 3] = np.inf
    time = np.arange("2040-01-01", "2040-01-13", dtype="datetime64[D]")
    return xr.DataArray(v, dims=("member", "time", "lat", "lon"), name="ssh",
                        coords={"time": time, "lat": grid.lat, "lon": grid.lon})


def test_missing_values_name_the_fields_in_memory(rng):
    da = _holey(rng)
    msg = r"'ssh' has 7 missing values \(NaN or inf\), in member index 1, time=2040-01-03 " \
          r"\(index 2\); member index 1, time=2040-01-06 \(index 5\);.* and 2 more fields"
    for call in (sxr.analyze, lambda d: sxr.smooth(d, band=(2, 4)),
                 lambda d: sxr.regrid(d, sphex.Grid.gauss(4))):
        with pytest.raises(ValueError, match=msg):
            call(da)


def test_missing_values_name_the_fields_from_dask_tasks(rng):
    # each task sees only its own chunk; the positions it is given name the global step
    pytest.importorskip("dask")
    lazy = _holey(rng).chunk({"time": 4, "member": 1})
    first = lazy.isel(time=slice(0, 5))  # one bad field, in the task of times 0..3 of member 1
    with pytest.raises(ValueError, match=r"'ssh' has 1 missing value \(NaN or inf\), in "
                                         r"member index 1, time=2040-01-03 \(index 2\);"):
        sxr.analyze(first).compute()
    later = lazy.isel(time=slice(4, 8), member=1)  # one task, bad at its times 1..3
    with pytest.raises(ValueError, match=r"in time=2040-01-06 \(index 1\); time=2040-01-07 "
                                         r"\(index 2\); time=2040-01-08 \(index 3\);"):
        sxr.smooth(later, band=(2, 4)).compute()
    ok = lazy.isel(member=0)
    np.testing.assert_allclose(sxr.analyze(ok)[sxr.COS].values,
                               sxr.analyze(ok.load())[sxr.COS].values, atol=1e-14)


def test_dask_backed_input_stays_lazy_and_agrees(rng):
    pytest.importorskip("dask")
    grid = sphex.Grid.gauss(8)
    v = sphex.synthesize(_random_harmonics(rng, 8, batch=(4,)), grid)
    da = xr.DataArray(v, dims=("time", "lat", "lon"), coords={"lat": grid.lat, "lon": grid.lon})
    lazy = sxr.analyze(da.chunk({"time": 2}))
    assert lazy[sxr.COS].chunks is not None
    eager = sxr.analyze(da)
    np.testing.assert_allclose(lazy[sxr.COS].values, eager[sxr.COS].values, atol=1e-14)
    back = sxr.synthesize(lazy, like=da)
    assert back.chunks is not None
    np.testing.assert_allclose(back.values, v, atol=1e-12)


def test_accessors_call_the_functions(rng):
    grid = sphex.Grid.gauss(6)
    da = xr.DataArray(_field(grid.lat, grid.lon), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="f")
    ds = da.sphex.analyze()
    assert da.sphex.grid == grid
    xr.testing.assert_identical(ds, sxr.analyze(da))
    np.testing.assert_allclose(ds.sphex.synthesize(da).values, da.values, atol=1e-12)
    h = ds.sphex.to_harmonics()
    np.testing.assert_allclose(degree_power(h), ds.sphex.degree_power().values, rtol=1e-14)


def test_dataset_with_two_grids_takes_the_global_one():
    ds = xr.Dataset(
        {"box": (("y", "x"), np.zeros((5, 72))), "t": (("lat", "lon"), np.zeros((90, 360)))},
        coords={"y": ("y", np.linspace(30, 50, 5), {"units": "degrees_north"}),
                "x": ("x", np.arange(72) * 5.0, {"units": "degrees_east"}),
                "lat": ("lat", 89 - 2.0 * np.arange(90), {"units": "degrees_north"}),
                "lon": ("lon", np.arange(360.0), {"units": "degrees_east"})})
    info = sxr.find_grid(ds)
    assert (info.lat_dim, info.lon_dim, info.grid.shape) == ("lat", "lon", (90, 360))
