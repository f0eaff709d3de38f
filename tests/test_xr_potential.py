"""Checks of sphex.xr.potential: gravity and magnetic quantities as Datasets."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from sphex import Grid, Harmonics
from sphex import potential
from sphex.models import PotentialModel
from sphex.xr import (degree_variances, error_degree_variances, gravity_fields, magnetic_fields,
                      write_model)


def small_gravity_model(rng) -> PotentialModel:
    lmax = 12
    l = np.arange(lmax + 1)[:, None]
    C = rng.standard_normal((lmax + 1, lmax + 1)) * 1e-5 / np.maximum(l, 1) ** 2
    S = rng.standard_normal((lmax + 1, lmax + 1)) * 1e-5 / np.maximum(l, 1) ** 2
    C[0, 0], C[1], S[1] = 1.0, 0.0, 0.0
    S[:, 0] = 0.0
    mask = np.tri(lmax + 1, dtype=bool)
    C, S = C * mask, S * mask
    h = Harmonics.from_cos_sin(C, S, norm="full", condon_shortley=False, radius=1.7e6)
    sig = Harmonics.from_cos_sin(np.abs(C) * 0.1 * mask, np.abs(S) * 0.1 * mask, norm="full",
                                 condon_shortley=False, radius=1.7e6)
    return PotentialModel(harmonics=h, gm=4.9e12, sigmas=sig, name="test-moon")


def test_gravity_fields_match_the_core_with_units_and_attributes(rng, tmp_path):
    model = small_gravity_model(rng)
    grid = Grid.equiangular(19, 36, "cells")
    ds = gravity_fields(model, grid, quantities=["geoid", "anomaly", "deflection_east"],
                        normal=None)
    core = potential.gravity(model, grid, ["geoid", "anomaly", "deflection_east"], normal=None)
    for name in core:
        np.testing.assert_array_equal(ds[name].values, core[name])
    assert ds["geoid"].attrs["units"] == "m" and ds["anomaly"].attrs["units"] == "m s-2"
    assert ds["deflection_east"].attrs["units"] == "arcsecond"
    assert "standard_name" not in ds["geoid"].attrs  # on the sphere, no reference ellipsoid
    assert ds.attrs["Conventions"] == "CF-1.8"
    assert "not certified for surveying" in ds.attrs["comment"]
    assert ds.attrs["model_name"] == "test-moon" and ds.attrs["normal_field"] == "none"
    assert ds["lat"].attrs["units"] == "degrees_north"
    # a target DataArray running north to south with a seam column, and a model file path
    lat = grid.lat[::-1]
    lon = np.append(grid.lon, grid.lon[0] + 360.0)
    like = xr.DataArray(np.zeros((lat.size, lon.size)), coords={"lat": lat, "lon": lon},
                        dims=("lat", "lon"))
    path = write_model(model, tmp_path / "m.nc")
    ds2 = gravity_fields(path, like, quantities="anomaly", normal=None)
    np.testing.assert_array_equal(ds2["lon"].values, lon)
    np.testing.assert_allclose(ds2["anomaly"].values[:, :-1], core["anomaly"][::-1], rtol=0,
                               atol=1e-15 * np.abs(core["anomaly"]).max())
    np.testing.assert_array_equal(ds2["anomaly"].values[:, -1], ds2["anomaly"].values[:, 0])


@pytest.mark.reference
def test_geoid_on_the_ellipsoid_has_the_cf_standard_name(rng):
    model = small_gravity_model(rng)
    model = PotentialModel(harmonics=model.harmonics.replace(radius=6378136.3), gm=3.986004415e14)
    ds = gravity_fields(model, "gauss:15", quantities=["geoid"], surface="ellipsoid")
    # CF standard name table (common practice): geoid height above the reference ellipsoid
    assert ds["geoid"].attrs["standard_name"] == "geoid_height_above_reference_ellipsoid"
    assert ds.attrs["latitude_kind"] == "geodetic" and ds.attrs["normal_field"] == "grs80"


@pytest.mark.reference
def test_magnetic_fields_and_epochs():
    C = np.zeros((2, 2, 2))
    S = np.zeros((2, 2, 2))
    C[:, 1, 0] = [-29400.0, -29300.0]
    C[:, 1, 1] = [-1450.0, -1400.0]
    S[:, 1, 1] = [4650.0, 4600.0]
    h = Harmonics.from_cos_sin(C, S, norm="schmidt", condon_shortley=False, radius=6371200.0,
                               units="nT")
    model = PotentialModel(harmonics=h, kind="magnetic", epoch=np.array([2020.0, 2025.0]))
    ds = magnetic_fields(model, "gauss:6", height=1000.0, components=["down", "declination"])
    assert ds["down"].dims == ("epoch", "lat", "lon")
    np.testing.assert_array_equal(ds["epoch"].values, [2020.0, 2025.0])
    core = potential.magnetic(model, Grid.gauss(6), "down", 1000.0)
    np.testing.assert_array_equal(ds["down"].values, core)
    assert ds["down"].attrs["units"] == "T" and ds["declination"].attrs["units"] == "degree"
    power = degree_variances(model)
    assert power.dims == ("epoch", "degree") and power.attrs["units"] == "nT2"
    # by hand: degree 1 of the first epoch, g10^2 + g11^2 + h11^2 (the degree variance of Schmidt
    # coefficients, sum over m of g^2 + h^2; common practice)
    assert power.values[0, 1] == pytest.approx(29400.0**2 + 1450.0**2 + 4650.0**2, rel=1e-14)


def test_degree_variances_as_dataarrays(rng):
    model = small_gravity_model(rng)
    dv = degree_variances(model)
    ev = error_degree_variances(model)
    C, S = model.harmonics.cos_sin()
    sC, sS = model.sigmas.cos_sin()
    np.testing.assert_allclose(dv.values, np.sum(C**2 + S**2, axis=1), rtol=1e-14)
    np.testing.assert_allclose(ev.values, np.sum(sC**2 + sS**2, axis=1), rtol=1e-14)
    assert dv.attrs["units"] == "1" and ev.attrs["normalization"] == "full"
    np.testing.assert_array_equal(dv["degree"].values, np.arange(13))
    with pytest.raises(ValueError, match="no standard deviations"):
        error_degree_variances(PotentialModel(harmonics=model.harmonics, gm=4.9e12))
    with pytest.raises(ValueError, match="model must be a PotentialModel"):
        gravity_fields(42, "gauss:4")
    with pytest.raises(ValueError, match="unknown quantity 'bouguer'"):
        gravity_fields(model, "gauss:4", quantities=["bouguer"])
