"""Checks of the localised-spectrum and rotation adapters (sphex.xr.localize) against the core."""
from __future__ import annotations

from _sample_fields import random_harmonics

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import localize, rotation

LMAX = 24
CENTRE = (35.0, -120.0)
CAP, LWIN = 40.0, 8


@pytest.fixture
def batch_coefficients(rng) -> xr.Dataset:
    h = random_harmonics(rng, LMAX, batch=(2,), norm="full", units="m")
    return sxr.from_harmonics(h, dims=("member",), coords={"member": ["a", "b"]}, name="topo")


def test_local_power_of_coefficients_matches_the_core_and_keeps_the_batch(batch_coefficients):
    ds = batch_coefficients
    out = sxr.local_power(ds, *CENTRE, CAP, LWIN)
    core = localize.local_power(sxr.to_harmonics(ds), *CENTRE, CAP, LWIN)
    assert out.power.dims == ("member", "degree")
    assert list(out["member"].values) == ["a", "b"]
    np.testing.assert_allclose(out.power.values, core.power, rtol=1e-13)
    np.testing.assert_allclose(out.power_error.values, core.error, rtol=1e-13)
    assert out.power.attrs["units"] == "m^2" and out.power_error.attrs["units"] == "m^2"
    assert out.attrs["centre_lat"] == 35.0 and out.attrs["centre_lon"] == -120.0
    assert out.attrs["cap_radius_deg"] == CAP and int(out.attrs["window_degree"]) == LWIN
    assert int(out.attrs["n_windows"]) == core.n_windows == out.attrs["window_concentration"].size
    np.testing.assert_array_equal(out.attrs["window_concentration"], core.concentration)
    assert (int(out.attrs["valid_degree_min"]), int(out.attrs["valid_degree_max"])) == (LWIN, LMAX - LWIN)
    np.testing.assert_array_equal(out["valid"].values == 1, core.valid)


def test_local_power_of_a_gridded_field_analyses_it_first(rng):
    grid = sphex.Grid.gauss(LMAX)
    h = random_harmonics(rng, LMAX, batch=(3,))
    time = np.array(["2001-01-01", "2001-02-01", "2001-03-01"], dtype="datetime64[ns]")
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("time", "lat", "lon"),
                      coords={"time": time, "lat": grid.lat, "lon": grid.lon}, name="t",
                      attrs={"units": "K"})
    out = sxr.local_power(da, -60.0, 10.0, CAP, LWIN, n_windows=3)
    core = localize.local_power(h, -60.0, 10.0, CAP, LWIN, n_windows=3)
    assert out.power.dims == ("time", "degree")
    np.testing.assert_array_equal(out["time"].values, time)
    # analysis then the core on the coefficients: measured 3.2e-15 relative; bound 2e-14
    np.testing.assert_allclose(out.power.values, core.power, rtol=2e-14)
    assert int(out.attrs["n_windows"]) == 3 and out.power.attrs["units"] == "K^2"
    # lmax truncates the analysis
    low = sxr.local_power(da, -60.0, 10.0, CAP, LWIN, n_windows=3, lmax=16)
    assert low.sizes["degree"] == 17 and int(low.attrs["valid_degree_max"]) == 16 - LWIN


def test_two_field_adapters_match_the_core_and_broadcast_batches(rng, batch_coefficients):
    topo = batch_coefficients
    grav = sxr.from_harmonics(random_harmonics(rng, LMAX + 4, norm="schmidt", units="mGal"),
                              name="gravity")
    h_topo = sxr.to_harmonics(topo)
    h_grav = sxr.to_harmonics(grav).truncate(LMAX)
    cross = sxr.local_cross_power(grav, topo, *CENTRE, CAP, LWIN)
    adm = sxr.local_admittance(grav, topo, *CENTRE, CAP, LWIN)
    cor = sxr.local_correlation(grav, topo, *CENTRE, CAP, LWIN)
    c_core = localize.local_cross_power(h_grav, h_topo, *CENTRE, CAP, LWIN)
    a_core = localize.local_admittance(h_grav, h_topo, *CENTRE, CAP, LWIN)
    r_core = localize.local_correlation(h_grav, h_topo, *CENTRE, CAP, LWIN)
    for ds, var in ((cross, "cross_power"), (adm, "admittance"), (cor, "correlation")):
        assert ds[var].dims == ("member", "degree") and ds.sizes["degree"] == LMAX + 1
    np.testing.assert_allclose(cross.cross_power.values, c_core.power, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(cross.cross_power_error.values, c_core.error, rtol=1e-12)
    np.testing.assert_allclose(adm.admittance.values, a_core.value, rtol=1e-12)
    np.testing.assert_allclose(adm.admittance_error.values, a_core.error, rtol=1e-12)
    np.testing.assert_allclose(cor.correlation.values, r_core.value, rtol=1e-12, atol=1e-15)
    assert cross.cross_power.attrs["units"] == "mGal m"
    assert adm.admittance.attrs["units"] == "mGal/m"
    assert cor.correlation.attrs["units"] == "1"


@pytest.mark.reference
def test_admittance_of_a_scaled_field_is_the_scale(batch_coefficients):
    # a field against itself times a constant gives that constant (common practice)
    topo = batch_coefficients
    grav = topo.copy()
    grav["cos_coef"] = topo.cos_coef * 2.5
    grav["sin_coef"] = topo.sin_coef * 2.5
    adm = sxr.local_admittance(grav, topo, *CENTRE, CAP, LWIN)
    np.testing.assert_allclose(adm.admittance.values[:, 1:], 2.5, rtol=1e-12)
    cor = sxr.local_correlation(grav, topo, *CENTRE, CAP, LWIN)
    np.testing.assert_allclose(cor.correlation.values[:, 1:], 1.0, rtol=1e-12)


@pytest.mark.parametrize("norm,cs", [("orthonormal", True), ("schmidt", False), ("full", True)])
def test_rotate_dataset_matches_the_core_and_keeps_layout(rng, norm, cs):
    h = random_harmonics(rng, 20, batch=(2, 3), norm=norm, cs=cs, radius=3.2e6, units="m")
    ds = sxr.from_harmonics(h, dims=("time", "level"), coords={"level": [850, 500, 200]},
                            name="z", attrs={"long_name": "height"})
    ds = ds.transpose("level", "degree", "time", "order")       # any dimension order
    out = sxr.rotate(ds, 40.0, -75.0, 10.0)
    ref = rotation.rotate(h, 40.0, -75.0, 10.0)
    assert out.cos_coef.dims == ds.cos_coef.dims
    back = sxr.to_harmonics(out.transpose("time", "level", "degree", "order"))
    np.testing.assert_allclose(back.coef, ref.coef, rtol=0, atol=1e-12 * np.abs(ref.coef).max())
    assert back.norm == norm and back.condon_shortley == cs and back.radius == 3.2e6
    assert out.attrs["field_long_name"] == "height" and "alpha=40" in out.attrs["history"]
    assert list(out["level"].values) == [850, 500, 200]
    # radians give the same rotation
    rad = sxr.rotate(ds, np.radians(40.0), np.radians(-75.0), np.radians(10.0), degrees=False)
    np.testing.assert_allclose(rad.cos_coef.values, out.cos_coef.values, atol=1e-12)


def test_bad_inputs_name_the_fix(batch_coefficients):
    with pytest.raises(ValueError, match="lat must lie in"):
        sxr.local_power(batch_coefficients, 95.0, 0.0, CAP, LWIN)
    with pytest.raises(ValueError, match="cap_radius_deg"):
        sxr.local_power(batch_coefficients, 0.0, 0.0, 0.0, LWIN)
    with pytest.raises(ValueError, match="lower lwin"):
        sxr.local_power(batch_coefficients, 0.0, 0.0, CAP, LMAX + 1)
    with pytest.raises(ValueError, match="gridded field must be passed as a DataArray"):
        sxr.local_power(xr.Dataset({"x": ("a", [1.0])}), 0.0, 0.0, CAP, LWIN)
    with pytest.raises(ValueError, match="outside the coefficients"):
        sxr.local_power(batch_coefficients, 0.0, 0.0, CAP, LWIN, lmax=LMAX + 1)
    other = batch_coefficients.assign_coords(member=["a", "c"])
    with pytest.raises(ValueError, match="coordinates differ"):
        sxr.local_cross_power(batch_coefficients, other, 0.0, 0.0, CAP, LWIN)


def test_dask_backed_field_gives_the_same_spectrum(rng):
    pytest.importorskip("dask")
    grid = sphex.Grid.gauss(LMAX)
    h = random_harmonics(rng, LMAX, batch=(4,))
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("time", "lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="t")
    eager = sxr.local_power(da, 5.0, 60.0, CAP, LWIN)
    lazy = sxr.local_power(da.chunk({"time": 2}), 5.0, 60.0, CAP, LWIN)
    np.testing.assert_allclose(lazy.power.values, eager.power.values, rtol=1e-13)
    assert lazy.power.dims == ("time", "degree")
