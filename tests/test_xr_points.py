"""Checks of the adapters of points and least squares (sphex.xr.points, sphex.xr.least_squares):
fields at station tables and tracks with their dimensions and coordinates, and
``analyze(..., missing="fit")`` on grids with missing cells."""
from __future__ import annotations

import warnings

from _sample_fields import random_harmonics

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex.least_squares import IllPosedWarning
from sphex.models import PotentialModel
from sphex.points import evaluate as evaluate_points


def _stations(rng, n=7):
    return xr.Dataset({"lat": ("station", rng.uniform(-90, 90, n)),
                       "lon": ("station", rng.uniform(-180, 540, n)),
                       "elevation": ("station", rng.uniform(0, 3000, n))},
                      coords={"station": [f"S{k}" for k in range(n)]})


def test_evaluate_station_table_keeps_dims_and_coords_and_matches_the_core(rng):
    h = random_harmonics(rng, 9, batch=(3,), units="K")
    time = np.array(["2030-01-01", "2030-02-01", "2030-03-01"], dtype="datetime64[ns]")
    ds = sxr.from_harmonics(h, dims=("time",), coords={"time": time}, name="tas",
                            attrs={"long_name": "air temperature"})
    st = _stations(rng)
    out = sxr.evaluate(ds, lat=st["lat"], lon=st["lon"])
    assert out.dims == ("time", "station") and out.name == "tas"
    assert out.attrs["units"] == "K" and out.attrs["long_name"] == "air temperature"
    np.testing.assert_array_equal(out["time"].values, time)
    np.testing.assert_array_equal(out["station"].values, st["station"].values)
    np.testing.assert_array_equal(out["lat"].values, st["lat"].values)
    np.testing.assert_array_equal(out["lon"].values, st["lon"].values)
    core = evaluate_points(sxr.to_harmonics(ds), st["lat"].values, st["lon"].values)
    np.testing.assert_allclose(out.values, core, rtol=0, atol=1e-13)
    np.testing.assert_allclose(out.values, evaluate_points(h, st["lat"].values, st["lon"].values),
                               rtol=0, atol=1e-12)


@pytest.mark.reference
def test_evaluate_track_lazily_with_dask_and_closed_form(rng):
    # f = sin(lat) analysed from a grid; at any point its value is sin(lat) (closed form,
    # common practice: sin(lat) is the degree-1 zonal harmonic times a constant)
    pytest.importorskip("dask")
    g = sphex.Grid.gauss(8)
    field = xr.DataArray(np.sin(np.deg2rad(g.lat))[:, None] + 0 * g.lon, dims=("lat", "lon"),
                         coords={"lat": g.lat, "lon": g.lon}, name="s")
    n = 500
    track = xr.Dataset(coords={"time": np.arange(n), "lat": ("time", rng.uniform(-90, 90, n)),
                               "lon": ("time", rng.uniform(0, 360, n))})
    lazy = track.chunk({"time": 128})
    out = sxr.evaluate(sxr.analyze(field), lat=lazy["lat"], lon=lazy["lon"])
    assert out.chunks == ((128, 128, 128, 116),)
    out = out.compute()
    assert out.dims == ("time",)
    np.testing.assert_array_equal(out["time"].values, track["time"].values)
    np.testing.assert_allclose(out.values, np.sin(np.deg2rad(track["lat"].values)), atol=1e-13)


@pytest.mark.reference
def test_evaluate_model_potential_of_a_point_mass_at_radius():
    # a model with only C00 = 1 is a point mass: V = GM / r (closed form, common practice)
    coef = np.zeros((3, 3), complex)
    coef[0, 0] = 1.0
    gm, r0 = 3.986004415e14, 6378136.3
    model = PotentialModel(harmonics=sphex.Harmonics(coef, norm="full", condon_shortley=False,
                                                     radius=r0), gm=gm, name="mass")
    lat = xr.DataArray([0.0, 45.0, -90.0], dims="site")
    lon = xr.DataArray([0.0, 100.0, 0.0], dims="site")
    radius = xr.DataArray([r0, r0 + 1.0e5, 2 * r0], dims="site")
    out = sxr.evaluate(model, lat=lat, lon=lon, radius=radius)
    assert out.name == "potential" and out.attrs["units"] == "m2 s-2"
    np.testing.assert_allclose(out.values, gm / radius.values, rtol=1e-14)


def test_evaluate_plain_arrays_and_bad_input(rng):
    h = random_harmonics(rng, 4)
    out = sxr.evaluate(h, lat=[10.0, 20.0], lon=[0.0, 5.0])
    assert out.dims == ("point",)
    np.testing.assert_allclose(out.values, evaluate_points(h, [10.0, 20.0], [0.0, 5.0]), atol=1e-14)
    with pytest.raises(ValueError, match=r"latitudes must lie in \[-90, 90\]"):
        sxr.evaluate(h, lat=[95.0], lon=[0.0])
    with pytest.raises(ValueError, match="lat contains 1 NaN"):
        sxr.evaluate(h, lat=[np.nan], lon=[0.0])
    with pytest.raises(ValueError, match="not a Dataset: pass its variable"):
        sxr.evaluate(h, lat=_stations(rng), lon=[0.0])
    with pytest.raises(ValueError, match="needs the reference radius"):
        sxr.evaluate(h, lat=[0.0], lon=[0.0], radius=7e6)
    with pytest.raises(ValueError, match="both have dimension"):
        sxr.evaluate(random_harmonics(rng, 4, batch=(2,)), lat=xr.DataArray([0.0], dims="sample_0"),
                     lon=0.0)
    with pytest.raises(ValueError, match="expected a coefficient Dataset"):
        sxr.evaluate(np.zeros((5, 5)), lat=0.0, lon=0.0)


def _capped(rng, lmax, batch=(), cap_fraction=0.3):
    """Band-limited fields on a Gauss grid with a polar cap of NaN covering ~cap_fraction."""
    h = random_harmonics(rng, lmax, batch=batch, units="m")
    g = sphex.Grid.gauss(24)
    v = sphex.synthesize(h, g)
    # a cap of angular radius a covers (1 - cos a) / 2 of the sphere
    edge = 90.0 - np.degrees(np.arccos(1 - 2 * cap_fraction))
    v[..., g.lat > edge, :] = np.nan
    dims = tuple(f"member{i}" for i in range(len(batch))) + ("lat", "lon")
    da = xr.DataArray(v, dims=dims, coords={"lat": g.lat, "lon": g.lon}, name="ssh",
                      attrs={"units": "m"})
    return h, da


@pytest.mark.reference
def test_analyze_missing_fit_recovers_band_limited_fields_with_a_masked_cap(rng, tmp_path):
    lmax = 5
    h, da = _capped(rng, lmax, batch=(2,))
    missing_share = float(np.isnan(da.values[0]).mean())
    assert 0.3 < missing_share < 0.4      # of the cells (the cap's cells are small near the pole)
    with warnings.catch_warnings():
        warnings.simplefilter("error", IllPosedWarning)       # well posed: no warning
        ds = sxr.analyze(da, lmax=lmax, missing="fit")
    back = sxr.to_harmonics(ds)
    # conjugate gradients stop at a relative residual of 1e-10 of the normal equations: measured
    # 3.3e-12 here (up to 9.6e-11 with other seeds), so the bound is 1e-9, not a rounding bound
    assert np.max(np.abs(back.coef - h.coef)) < 1e-9 * np.max(np.abs(h.coef))
    assert ds[sxr.COS].dims == ("member0", "degree", "order")
    assert ds.attrs["fit_fields"] == "member0" and ds.attrs["fit_damping"] == 0.0
    assert "not filled" in ds.attrs["fit_method"]
    # residual RMS measured 5.5e-12 and 1.4e-12 (up to 1.4e-10 with other seeds)
    assert np.all(ds.attrs["fit_residual_rms"] < 1e-9) and np.all(ds.attrs["fit_converged"] == 1)
    np.testing.assert_allclose(ds.attrs["fit_observed_fraction"], 0.7, atol=0.02)
    assert np.all(ds.attrs["fit_iterations"] > 1)
    # the attributes survive a netCDF file
    sxr.write_harmonics(ds, tmp_path / "fit.nc")
    with xr.open_dataset(tmp_path / "fit.nc") as f:
        np.testing.assert_array_equal(f.attrs["fit_iterations"], ds.attrs["fit_iterations"])


def test_analyze_missing_default_raises_pointing_at_the_fit_and_checks_options(rng):
    _, da = _capped(rng, 4)
    with pytest.raises(ValueError, match=r"missing values .*missing='fit'.*--missing fit"):
        sxr.analyze(da)
    with pytest.raises(ValueError, match="missing='fill' is not one of 'raise', 'fit'"):
        sxr.analyze(da, missing="fill")
    with pytest.raises(ValueError, match="only apply to missing='fit'"):
        sxr.analyze(da, damping=1e-3)


def test_analyze_missing_fit_warns_when_ill_posed_and_damping_tames_it(rng):
    # degree 20 resolves functions that live inside a 30% cap: the fit warns (the
    # warning of the core passes through); damping gives a stable answer instead
    _, da = _capped(rng, 4)
    with pytest.warns(IllPosedWarning, match="add damping"):
        sxr.analyze(da, lmax=20, missing="fit")
    with warnings.catch_warnings():
        warnings.simplefilter("error", IllPosedWarning)
        ds = sxr.analyze(da, lmax=20, missing="fit", damping=1e-6)
    assert ds.attrs["fit_damping"] == 1e-6 and ds.attrs["fit_converged"] == 1
    assert ds.attrs["fit_residual_rms"] < 1e-2


def test_analyze_missing_fit_reports_progress_in_hundredths_of_a_field(rng):
    _, da = _capped(rng, 4, batch=(2,))
    calls = []
    sxr.analyze(da, lmax=4, missing="fit", progress=lambda done, total: calls.append((done, total)))
    done = [c[0] for c in calls]
    assert all(c[1] == 200 for c in calls) and done[-1] == 200 and (100, 200) in calls
    assert done == sorted(done) and len(set(done)) == len(done) and len(calls) > 4   # never backwards


@pytest.mark.reference
def test_analyze_missing_fit_damps_towards_the_observed_mean_in_any_normalisation(rng):
    # a field of 280 K plus small band-limited anomalies, a 30% cap missing; damping pulls
    # the undetermined combinations to the observed mean, so under the gap the fit stays
    # within the anomalies' size of 280 (damping towards zero would put it near 0 K)
    h, da = _capped(rng, 4)
    da = 280.0 + 0.01 * da
    gap = np.isnan(da.values)
    for norm in ("orthonormal", "full"):
        with warnings.catch_warnings():
            warnings.simplefilter("error", IllPosedWarning)
            ds = sxr.analyze(da, lmax=20, missing="fit", damping=1e-2, norm=norm)
        assert abs(ds.attrs["fit_reference_mean"] - np.nanmean(da.values)) < 0.2
        back = sxr.synthesize(ds, like=da).values
        assert np.max(np.abs(back[gap] - 280.0)) < 0.5
        # without damping the mean is handed back exactly: the band-limited truth again; C00 of a
        # constant c is c sqrt(4 pi) orthonormal and c fully normalised (common practice)
        exact = sxr.to_harmonics(sxr.analyze(da, lmax=4, missing="fit", norm=norm))
        truth = (0.01 * h).to(norm)
        assert abs(exact[0, 0] - truth[0, 0] - 280.0 * (np.sqrt(4 * np.pi) if norm == "orthonormal"
                                                        else 1.0)) < 1e-12   # 1 ulp of 993 measured
