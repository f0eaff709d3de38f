"""Checks of the field adapters (sphex.xr.fields, sphex.xr.missing, sphex.xr.accessors):
coordinates and attributes kept, spectra, smoothing, regridding, missing values, dask input."""
from __future__ import annotations

from _reference import complex_form_field
from _sample_fields import random_harmonics, band_limited_field
from _smoothing import gaussian_weights_by_quadrature

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import filters
from sphex.spectra import degree_power


def test_analyze_synthesize_keeps_coordinates_attributes_and_extra_dims(rng):
    lmax = 12
    grid = sphex.Grid.equiangular(26, 52, "cells")       # exact to degree 12
    h = random_harmonics(rng, lmax, batch=(3, 2))
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
    # a round trip on a grid exact to degree 12: measured 1.2e-15 of the largest value
    np.testing.assert_allclose(back.values, values, rtol=0, atol=5e-15 * np.abs(values).max())
    # the cos/sin variables are the Harmonics' real form (measured 1.2e-15 of the largest)
    c, s = h.cos_sin()
    np.testing.assert_allclose(ds[sxr.COS].values, c, rtol=0, atol=5e-15 * np.abs(c).max())
    np.testing.assert_allclose(ds[sxr.SIN].values, s, rtol=0, atol=5e-15 * np.abs(c).max())


@pytest.mark.reference
def test_degree_power_dataarray_sums_to_area_mean_square(rng):
    grid = sphex.Grid.equiangular(33, 64, "poles")      # exact to degree 16
    h = random_harmonics(rng, 16, batch=(2,))
    v = sphex.synthesize(h, grid)
    da = xr.DataArray(v, dims=("t", "lat", "lon"), coords={"lat": grid.lat, "lon": grid.lon},
                      attrs={"units": "K"}, name="T")
    p = sxr.degree_power(da)
    assert p.dims == ("t", "degree") and p.attrs["units"] == "K2"
    # area mean of f^2 by an independent quadrature: numpy Gauss-Legendre in
    # x = cos(colat) and equally spaced longitudes (numpy.polynomial.legendre.leggauss)
    xg, wg = np.polynomial.legendre.leggauss(40)
    fine = sphex.Grid.gauss(39)          # rows north to south: x = cos(colat) descending
    np.testing.assert_allclose(np.cos(np.asarray(fine.colat)), xg[::-1], atol=1e-14)
    vals = sphex.synthesize(h, fine)     # f at the leggauss nodes, 80 equally spaced longitudes
    mean_sq = (vals ** 2).mean(axis=-1) @ wg[::-1] / 2.0
    np.testing.assert_allclose(p.sum("degree").values, mean_sq, rtol=2e-14)   # measured 3.6e-15
    # the other kinds follow from the power by their definitions
    rms = sxr.degree_power(da, kind="rms")
    assert rms.attrs["units"] == "K"
    np.testing.assert_allclose(rms.values ** 2, p.values, rtol=2e-15)          # measured 2.2e-16
    per = sxr.degree_power(da, kind="per_coefficient")
    np.testing.assert_allclose(per.values * (2 * np.arange(17) + 1), p.values, rtol=2e-15)
    cum = sxr.degree_power(da, kind="cumulative")
    np.testing.assert_allclose(cum.values, np.cumsum(p.values, axis=-1), rtol=1e-12)


@pytest.mark.reference
def test_smooth_gaussian_against_kernel_weights_by_quadrature_and_keeps_the_grid(rng):
    # source: smoothing with an isotropic kernel multiplies degree l by the kernel's Legendre
    # coefficient (Funk-Hecke theorem; common practice). The weights come from quadrature of the
    # Gaussian kernel exp(-b (1 - cos psi)), half its peak at psi = r/R (Jekeli 1981, from memory),
    # with scipy.integrate.quad and scipy.special.eval_legendre (tests/_smoothing.py), not from
    # sphex.filters; the smoothed field is then summed directly with scipy.special
    # (tests/_reference.complex_form_field), not synthesised by sphex.
    grid = sphex.Grid.gauss(20)
    h = random_harmonics(rng, 20)
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="g", attrs={"units": "mGal"})
    out = sxr.smooth(da, gaussian_km=100.0, planet_radius_km=1350.0)     # a moon of 1350 km
    w = gaussian_weights_by_quadrature(100.0, 1350.0, 20)
    expect = complex_form_field(h.coef * w[:, None], np.asarray(grid.colat), np.radians(grid.lon),
                                "orthonormal", True)
    # measured 1.4e-14 to 1.9e-14 of the largest value (three seeds; the quadrature of the weights
    # is good to about 1e-14); bound 1e-13. A Gaussian of 10 % larger radius is off by 7e-2, the
    # same 100 km on Earth's 6371 km by 0.4, a cap of the same radius by 0.25
    assert np.abs(out.values - expect).max() < 1e-13 * np.abs(expect).max()
    assert out.dims == da.dims and out.attrs["units"] == "mGal" and "Gaussian" in out.attrs["history"]
    # a taper that starts above the field's top degree changes nothing: a round trip (analysis
    # and synthesis on the Gauss grid), measured 2.9e-15 of the largest value (8e-14 absolute)
    same = sxr.smooth(da, band=(20, 30))
    assert np.abs(same.values - da.values).max() < 2e-14 * np.abs(da.values).max()
    with pytest.raises(ValueError, match="exactly one"):
        sxr.smooth(da, gaussian_km=100.0, cap_deg=2.0, planet_radius_km=6371.0)


@pytest.mark.reference
def test_smooth_band_removes_every_degree_from_l2_on(rng):
    # the taper keeps degrees <= L1 whole and removes degrees >= L2 (its definition, written out
    # degree by degree with math.cos in test_filters); on a degree-20 field, band=(2, 4) must
    # leave nothing from degree 4 on. Measured: 1e-31 of the field's power there; a taper padded
    # with ones above its last degree would leave 95 % of it.
    grid = sphex.Grid.gauss(20)
    h = random_harmonics(rng, 20)
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="g")
    out = sxr.smooth(da, band=(2, 4))
    back = sphex.analyze(out.values, grid)
    p_in, p_out = degree_power(h), degree_power(back)
    assert p_out[4:].sum() < 1e-24 * p_in[4:].sum()
    np.testing.assert_allclose(p_out[:3], p_in[:3], rtol=2e-14)        # measured 3.6e-15
    # degree 3 sits halfway down the raised cosine: weight 1/2, power 1/4 (common practice)
    np.testing.assert_allclose(p_out[3], 0.25 * p_in[3], rtol=1e-12)


@pytest.mark.reference
def test_smooth_cap_averages_over_a_cap_of_the_given_radius(rng):
    # source: the mean over a spherical cap of angular radius r multiplies degree l by
    # w_l = integral_{cos r}^{1} P_l(x) dx / (1 - cos r) (Funk-Hecke theorem; common practice),
    # integrated here with scipy.integrate.quad and scipy.special.eval_legendre; a cap of half
    # the radius gives other weights (0.03 relative at degree 10 for r = 12 degrees).
    from scipy.integrate import quad
    from scipy.special import eval_legendre

    grid = sphex.Grid.gauss(24)
    h = random_harmonics(rng, 24)
    da = xr.DataArray(sphex.synthesize(h, grid), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="g")
    r = np.radians(12.0)
    w = np.array([quad(lambda x, l=l: eval_legendre(l, x), np.cos(r), 1.0, epsabs=1e-15,
                       epsrel=1e-13)[0] for l in range(25)]) / (1.0 - np.cos(r))
    out = sxr.smooth(da, cap_deg=12.0)
    back = sphex.analyze(out.values, grid)
    np.testing.assert_allclose(back.coef, h.coef * w[:, None], rtol=0,
                               atol=1e-12 * np.abs(h.coef).max())


@pytest.mark.reference
def test_regrid_between_grid_kinds_reproduces_a_band_limited_field():
    # source: band_limited_field is a trigonometric polynomial of degree <= 3 (common practice, in
    # its docstring), so regridding must give its closed form at the new nodes
    src = sphex.Grid.gauss(12)
    da = xr.DataArray(band_limited_field(src.lat, src.lon), dims=("lat", "lon"),
                      coords={"lat": src.lat, "lon": src.lon}, name="f")
    out = sxr.regrid(da, "equiangular:19x40:poles")
    tgt = sphex.Grid.equiangular(19, 40, "poles")
    np.testing.assert_allclose(out.values, band_limited_field(tgt.lat, tgt.lon), atol=1e-12)
    np.testing.assert_array_equal(out["lat"].values, tgt.lat)
    assert out["lon"].attrs["units"] == "degrees_east"


def _holey(rng):
    """(member, time, lat, lon) fields with NaN or inf in member 1 at times 2 and 5..10."""
    grid = sphex.Grid.gauss(6)
    v = sphex.synthesize(random_harmonics(rng, 6, batch=(2, 12)), grid)
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
    v = sphex.synthesize(random_harmonics(rng, 8, batch=(4,)), grid)
    da = xr.DataArray(v, dims=("time", "lat", "lon"), coords={"lat": grid.lat, "lon": grid.lon})
    lazy = sxr.analyze(da.chunk({"time": 2}))
    assert lazy[sxr.COS].chunks is not None
    eager = sxr.analyze(da)
    np.testing.assert_allclose(lazy[sxr.COS].values, eager[sxr.COS].values, atol=1e-14)
    back = sxr.synthesize(lazy, like=da)
    assert back.chunks is not None
    # a round trip: measured 6.6e-16 of the largest value
    np.testing.assert_allclose(back.values, v, rtol=0, atol=5e-15 * np.abs(v).max())


def test_accessors_call_the_functions(rng):
    grid = sphex.Grid.gauss(6)
    da = xr.DataArray(band_limited_field(grid.lat, grid.lon), dims=("lat", "lon"),
                      coords={"lat": grid.lat, "lon": grid.lon}, name="f")
    ds = da.sphex.analyze()
    assert da.sphex.grid == grid
    xr.testing.assert_identical(ds, sxr.analyze(da))
    np.testing.assert_allclose(ds.sphex.synthesize(da).values, da.values, atol=1e-12)
    h = ds.sphex.to_harmonics()
    np.testing.assert_allclose(degree_power(h), ds.sphex.degree_power().values, rtol=1e-14)


def test_regrid_keeps_the_source_coordinate_names_and_reports_progress():
    src = sphex.Grid.equiangular(36, 72, "cells")
    values = np.stack([band_limited_field(src.lat, src.lon) * k for k in range(1, 6)])
    da = xr.DataArray(values, dims=("time", "latitude", "longitude"),
                      coords={"latitude": ("latitude", src.lat, {"units": "degrees_north",
                                                                 "long_name": "latitude",
                                                                 "bounds": "latitude_bnds"}),
                              "longitude": ("longitude", src.lon, {"units": "degrees_east"})},
                      name="f")
    calls = []
    out = sxr.regrid(da, "gaussian:10", progress=lambda done, total: calls.append((done, total)))
    assert out.dims == ("time", "latitude", "longitude")
    assert out["latitude"].attrs["long_name"] == "latitude" and "bounds" not in out["latitude"].attrs
    tgt = sphex.Grid.gauss(10)
    np.testing.assert_allclose(out.values[2], 3 * band_limited_field(tgt.lat, tgt.lon), atol=1e-12)
    # the callback hears about fields as they finish, up to all five
    assert calls[-1] == (5, 5) and len(calls) == 5 and [c[0] for c in calls] == sorted(c[0] for c in calls)
    # a target given by coordinates brings its own names
    like = xr.DataArray(np.zeros((11, 22)), dims=("lat", "lon"),
                        coords={"lat": tgt.lat, "lon": tgt.lon})
    assert sxr.regrid(da, like).dims == ("time", "lat", "lon")


def test_smooth_reads_the_radius_attribute_and_otherwise_assumes_earth_and_says_so(rng):
    grid = sphex.Grid.gauss(20)
    h = random_harmonics(rng, 20)
    base = xr.DataArray(sphex.synthesize(h, grid), dims=("lat", "lon"),
                        coords={"lat": grid.lat, "lon": grid.lon}, name="g")
    moon = base.assign_attrs(planet_radius_km=1350.0)
    np.testing.assert_allclose(sxr.smooth(moon, gaussian_km=200.0).values,
                               sxr.smooth(base, gaussian_km=200.0, planet_radius_km=1350.0).values,
                               atol=1e-13)
    # a Dataset's own attribute counts for its variable
    ds = base.to_dataset().assign_attrs(planet_radius_km=1350.0)
    np.testing.assert_allclose(sxr.smooth(ds, gaussian_km=200.0).values,
                               sxr.smooth(moon, gaussian_km=200.0).values, atol=1e-13)
    with pytest.warns(UserWarning, match="assumed Earth's mean radius 6371 km"):
        earth = sxr.smooth(base, gaussian_km=200.0)
    np.testing.assert_allclose(earth.values,
                               sxr.smooth(base, gaussian_km=200.0, planet_radius_km=6371.0).values,
                               atol=1e-13)


def _series_of_24(rng) -> xr.DataArray:
    """24 random band-limited fields of degree 12 on their Gauss grid."""
    grid = sphex.Grid.gauss(12)
    h = random_harmonics(rng, 12, batch=(24,))
    return xr.DataArray(sphex.synthesize(h, grid), dims=("time", "lat", "lon"),
                        coords={"lat": grid.lat, "lon": grid.lon}, name="g")


def test_analysis_reported_in_steps_fills_every_step_of_its_output(rng):
    # with progress, a block is analysed a few fields at a time, each step written into
    # its own rows of the output: the same numbers, to the bit, as in one step
    da = _series_of_24(rng)
    calls = []
    stepped = sxr.analyze(da, progress=lambda d, t: calls.append((d, t)))
    assert [d for d, _ in calls] == list(range(2, 25, 2))
    whole = sxr.analyze(da)
    for v in (sxr.COS, sxr.SIN):
        assert stepped[v].values.tobytes() == whole[v].values.tobytes()


def test_smooth_and_synthesize_report_progress_field_by_field(rng):
    da = _series_of_24(rng)
    calls = []
    out = sxr.smooth(da, band=(6, 10), progress=lambda d, t: calls.append((d, t)))
    assert [d for d, _ in calls] == list(range(2, 25, 2)) and {t for _, t in calls} == {24}
    np.testing.assert_allclose(out.values, sxr.smooth(da, band=(6, 10)).values, atol=1e-13)
    calls.clear()
    back = sxr.synthesize(sxr.analyze(da), da, progress=lambda d, t: calls.append((d, t)))
    assert calls[-1] == (24, 24) and len(calls) == 12
    # a round trip: measured 1.3e-15 of the largest value
    np.testing.assert_allclose(back.values, da.values, rtol=0, atol=5e-15 * np.abs(da.values).max())
