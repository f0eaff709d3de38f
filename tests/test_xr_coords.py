"""Checks of grid detection from coordinates (sphex.xr.coords): names, CF attributes,
longitude origin and order, seam columns, grid texts and degree limits."""
from __future__ import annotations

from _sample_fields import band_limited_field, field_dataarray

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr


def test_find_grid_by_name_units_and_standard_name():
    lat = 90 - 180 * (np.arange(18) + 0.5) / 18
    lon = np.arange(36) * 10.0
    by_name = field_dataarray(lat, lon, dims=("latitude", "x"))
    info = sxr.find_grid(by_name)
    assert (info.lat_dim, info.lon_dim) == ("latitude", "x")
    assert info.grid.kind == "equiangular-cells" and info.grid.lmax_exact == 8
    # names that mean nothing, recognised through CF units
    by_units = xr.DataArray(band_limited_field(lat, lon), dims=("rows", "cols"),
                            coords={"rows": ("rows", lat, {"units": "degrees_north"}),
                                    "cols": ("cols", lon, {"units": "degree_east"})})
    assert sxr.find_grid(by_units).lat_dim == "rows"
    # a non-dimension coordinate carrying a CF standard_name
    by_std = xr.DataArray(band_limited_field(lat, lon), dims=("j", "i"),
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
        sxr.find_grid(field_dataarray(lat, lon))
    with pytest.raises(ValueError, match="swapped"):
        sxr.find_grid(field_dataarray(np.linspace(-90, 180, 10), lon))


def test_seam_column_descending_and_shifted_longitudes_give_one_answer():
    lat = sphex.Grid.gauss(7).lat
    lon = np.arange(16) * 22.5
    ref = sxr.analyze(field_dataarray(lat, lon))
    # (a) 0..360 with the seam column repeated
    lon_seam = np.append(lon, 360.0)
    seam = sxr.analyze(field_dataarray(lat, lon_seam))
    # (b) origin at -180 (same field, longitudes written -180..157.5)
    shifted = sxr.analyze(field_dataarray(lat, lon - 180.0))
    # (c) longitudes decreasing
    desc = sxr.analyze(field_dataarray(lat, lon[::-1]))
    # (d) longitudes that wrap inside the array: 112.5..337.5 then 0..90 (a rolled file)
    lon_rolled = np.roll(lon, -5)
    rolled = sxr.analyze(field_dataarray(lat, lon_rolled))
    for other in (seam, shifted, desc, rolled):
        # the same sums in another column order: measured 1.1e-15 (coefficients up to 5)
        np.testing.assert_allclose(other[sxr.COS], ref[sxr.COS], rtol=0, atol=1e-14)
        np.testing.assert_allclose(other[sxr.SIN], ref[sxr.SIN], rtol=0, atol=1e-14)
    # synthesis onto the seam grid restores the repeated column
    back = sxr.synthesize(seam, like=field_dataarray(lat, lon_seam))
    assert back.sizes["lon"] == 17
    np.testing.assert_array_equal(back.values[:, -1], back.values[:, 0])
    # measured 3.6e-15 against the closed form (values up to 3.6)
    np.testing.assert_allclose(back.values, band_limited_field(lat, lon_seam), rtol=0, atol=2e-14)
    # and onto the rolled grid, each column at its own longitude
    back = sxr.synthesize(rolled, like=field_dataarray(lat, lon_rolled))
    np.testing.assert_allclose(back.values, band_limited_field(lat, lon_rolled), rtol=0, atol=2e-14)


@pytest.mark.reference
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


def test_parse_grid_and_lmax_errors():
    assert sxr.parse_grid("gauss:31").shape == (32, 64)
    assert sxr.parse_grid("equiangular:91x180:poles").lmax_exact == 45
    for bad in ("gauss", "gauss:-1", "equiangular:10:poles", "equiangular:10x20:rings", "hexagons:4"):
        with pytest.raises(ValueError, match="gauss:LMAX|layout"):
            sxr.parse_grid(bad)
    g = sphex.Grid.gauss(5)
    da = xr.DataArray(band_limited_field(g.lat, g.lon), dims=("lat", "lon"), coords={"lat": g.lat, "lon": g.lon})
    with pytest.raises(ValueError, match="exact limit 5"):
        sxr.analyze(da, lmax=6)
    with pytest.raises(ValueError, match="unknown normalisation"):
        sxr.analyze(da, norm="fully")
    clipped = "orthonormal"[:5]
    with pytest.raises(ValueError, match=f"'{clipped}' is no longer accepted: use 'orthonormal'"):
        sxr.analyze(da, norm=clipped)
    bad = da.copy()
    bad[0, 0] = np.nan
    with pytest.raises(ValueError, match="1 missing"):
        sxr.analyze(bad)


def test_dataset_with_two_grids_takes_the_global_one():
    ds = xr.Dataset(
        {"box": (("y", "x"), np.zeros((5, 72))), "t": (("lat", "lon"), np.zeros((90, 360)))},
        coords={"y": ("y", np.linspace(30, 50, 5), {"units": "degrees_north"}),
                "x": ("x", np.arange(72) * 5.0, {"units": "degrees_east"}),
                "lat": ("lat", 89 - 2.0 * np.arange(90), {"units": "degrees_north"}),
                "lon": ("lon", np.arange(360.0), {"units": "degrees_east"})})
    info = sxr.find_grid(ds)
    assert (info.lat_dim, info.lon_dim, info.grid.shape) == ("lat", "lon", (90, 360))


def test_grid_texts_users_type():
    # gaussian:LMAX is the Gauss-Legendre grid too
    assert sxr.parse_grid("gaussian:63") == sxr.parse_grid("gauss:63")
    # a spacing that divides 180 degrees; both poles sampled unless a layout is named
    # (2.5 degrees: 180/2.5 + 1 = 73 latitudes, 360/2.5 = 144 longitudes)
    g = sxr.parse_grid("equiangular:2.5deg")
    assert g.shape == (73, 144) and g.kind == "equiangular-poles"
    assert sxr.parse_grid("equiangular:2.5deg:cells").shape == (72, 144)
    assert sxr.parse_grid("equiangular:1deg:north").shape == (180, 360)
    with pytest.raises(ValueError, match="does not divide 180"):
        sxr.parse_grid("equiangular:7deg")
    # the lon x lat habit: fewer longitudes than latitudes is refused with the fix
    with pytest.raises(ValueError, match=r"NLATxNLON, latitudes first: did you mean "
                                         r"equiangular:73x144:poles\?"):
        sxr.parse_grid("equiangular:144x73:poles")


def test_the_only_unusable_variable_gives_its_own_reason():
    from sphex.xr.coords import choose_variable

    lat = np.linspace(20.0, 60.0, 9)                    # regional: not global
    lon = np.arange(0.0, 360.0, 10.0)
    ds = xr.Dataset({"z": (("lat", "lon"), np.zeros((9, 36))),
                     "lat_bnds": (("lat", "nv"), np.zeros((9, 2))),
                     "step": ((), 3.0)},
                    coords={"lat": ("lat", lat, {"units": "degrees_north", "bounds": "lat_bnds"}),
                            "lon": ("lon", lon, {"units": "degrees_east"})})
    with pytest.raises(ValueError, match=r"^f.nc: variable 'z': latitudes .*not global"):
        choose_variable(ds, None, "f.nc")
    # two unusable fields: each reason is given
    ds["w"] = ds["z"] + 1
    with pytest.raises(ValueError, match=r"no variable is on a usable global grid: variable 'z'.*"
                                         r"variable 'w'"):
        choose_variable(ds, None, "f.nc")
    with pytest.raises(ValueError, match=r"f.nc has no variable 'q' \(variables: z, lat_bnds, step, w\)"):
        choose_variable(ds, "q", "f.nc")


@pytest.mark.parametrize("kind", ["gauss", "cells"])
def test_description_states_the_files_latitude_order(kind):
    # the one-line description (sphex inspect, the logs) reads the order from the grid as
    # recognised, without computing a Gauss grid's nodes
    g = sphex.Grid.gauss(15) if kind == "gauss" else sphex.Grid.equiangular(16, 32, "cells")
    for lat, order in ((g.lat, "north to south"), (g.lat[::-1], "south to north")):
        da = xr.DataArray(np.zeros(g.shape), dims=("lat", "lon"), coords={"lat": lat, "lon": g.lon})
        text = sxr.find_grid(da).describe()
        assert text.startswith(f"16 x 32 {g.kind} grid ({order}, longitudes from 0 deg)")
        assert text.endswith(f"exact to degree {g.lmax_exact}")
