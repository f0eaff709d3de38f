"""Checks of the xarray adapters of winds and currents (sphex.xr.flow, sphex.xr.flow_components):
coordinates, attributes and extra dimensions kept, dask laziness, units and CF names, the radius,
regridding and smoothing through psi and chi, and the refusals."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex.flow import Flow, analyze_flow as core_analyze, synthesize_flow
from sphex.xr.flow_components import RadiusAssumedWarning, find_components

R = 6.371e6
LMAX = 12


def _random_flow(rng, lmax=LMAX, batch=(), radius=R):
    """Random band-limited psi and chi with the same wind energy in every degree."""
    parts = []
    for _ in range(2):
        coef = np.zeros(batch + (lmax + 1, lmax + 1), dtype=complex)
        for l in range(1, lmax + 1):
            coef[..., l, : l + 1] = (rng.normal(size=batch + (l + 1,))
                                     + 1j * rng.normal(size=batch + (l + 1,))) * radius / l
        coef[..., 0] = coef[..., 0].real
        parts.append(sphex.Harmonics(coef, radius=radius))
    return Flow(*parts)


def _pair(flow, lat, lon, batch_dims=(), batch_coords=None, names=("u", "v"), units="m s-1",
          standard=("eastward_wind", "northward_wind"), lat_name="lat", lon_name="lon"):
    """The flow's components on the grid of (lat, lon) as two CF-style DataArrays."""
    grid = sphex.Grid.from_coords(lat, lon)
    east, north = synthesize_flow(flow, grid)
    dims = tuple(batch_dims) + (lat_name, lon_name)
    coords = {lat_name: (lat_name, lat, {"units": "degrees_north"}),
              lon_name: (lon_name, lon, {"units": "degrees_east"}), **(batch_coords or {})}
    out = []
    for name, values, std in zip(names, (east, north), standard or (None, None)):
        attrs = {"units": units} if units else {}
        if std:
            attrs["standard_name"] = std
        attrs["long_name"] = f"{name} component"
        out.append(xr.DataArray(values, dims=dims, coords=coords, name=name, attrs=attrs))
    return grid, out[0], out[1]


@pytest.fixture
def series(rng):
    """A (level, time) batch of flows on north-to-south 5-degree cells, longitudes -180..175."""
    lat = 87.5 - 5.0 * np.arange(36)
    lon = -180.0 + 5.0 * np.arange(72)
    flow = _random_flow(rng, batch=(2, 3))
    time = np.array(["2030-01-01T00", "2030-01-01T06", "2030-01-01T12"], dtype="datetime64[ns]")
    grid, u, v = _pair(flow, lat, lon, ("level", "time"),
                       {"level": ("level", [850.0, 500.0], {"units": "hPa"}), "time": time})
    return flow.truncate(grid.lmax_exact), grid, u, v     # zero above degree 12


def _rel(a, b):
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(np.asarray(b))))


# ----------------------------------------------------------------------------
# what comes out, with its coordinates and attributes
# ----------------------------------------------------------------------------
def test_flow_fields_keep_coordinates_dimensions_and_match_the_core(series):
    flow, grid, u, v = series
    out = sxr.flow_fields(u, v, radius=R, spectrum=True)
    for name in ("vorticity", "divergence", "streamfunction", "velocity_potential",
                 "eastward_rotational", "northward_rotational", "eastward_divergent",
                 "northward_divergent"):
        assert out[name].dims == ("level", "time", "lat", "lon"), name
    np.testing.assert_array_equal(out["lat"].values, u["lat"].values)      # north to south kept
    np.testing.assert_array_equal(out["lon"].values, u["lon"].values)      # -180.. kept
    np.testing.assert_array_equal(out["time"].values, u["time"].values)
    assert out["level"].attrs["units"] == "hPa" and out["lat"].attrs["units"] == "degrees_north"
    # internal consistency with the numpy core (itself checked against the outside in test_flow)
    back = core_analyze(u.values, v.values, grid, radius=R)
    assert _rel(back.psi.coef, flow.psi.coef) < 1e-12
    expected = {"vorticity": sphex.synthesize(flow.vorticity(), grid),
                "divergence": sphex.synthesize(flow.divergence(), grid),
                "streamfunction": sphex.synthesize(flow.psi, grid),
                "velocity_potential": sphex.synthesize(flow.chi, grid)}
    for name, values in expected.items():
        assert _rel(out[name], values) < 1e-12, name
    # the two parts add up to the flow; each is what the core synthesises
    rot_e, rot_n = synthesize_flow(flow.rotational(), grid)
    assert _rel(out["eastward_rotational"], rot_e) < 1e-12
    assert _rel(out["eastward_rotational"] + out["eastward_divergent"], u) < 1e-12
    assert _rel(out["northward_rotational"] + out["northward_divergent"], v) < 1e-12
    # the energy spectrum per field is the core's
    rot, div = sphex.spectra.kinetic_energy(flow)
    assert out["kinetic_energy_rotational"].dims == ("level", "time", "degree")
    assert _rel(out["kinetic_energy_rotational"], rot) < 1e-12
    assert _rel(out["kinetic_energy_divergent"], div) < 1e-12


@pytest.mark.reference
def test_solid_body_rotation_on_a_north_to_south_grid_with_a_seam_column():
    # u = u0 cos(lat), v = 0: psi = -R u0 sin(lat), vorticity 2 u0 sin(lat) / R, divergence 0
    # (Williamson et al. 1992, J. Comput. Phys. 102, flow of test cases 1 and 2; from memory)
    lat = 90.0 - 2.5 * np.arange(73)
    lon = 2.5 * np.arange(145)                      # 0..360: the first column repeated
    u0, radius = 38.6, 6.37122e6
    phi = np.deg2rad(lat)[:, None] + 0 * lon
    dims, coords = ("lat", "lon"), {"lat": lat, "lon": lon}
    u = xr.DataArray(u0 * np.cos(phi), dims=dims, coords=coords, name="ua",
                     attrs={"units": "m/s", "standard_name": "eastward_wind"})
    v = xr.DataArray(0 * phi, dims=dims, coords=coords, name="va",
                     attrs={"units": "m/s", "standard_name": "northward_wind"})
    out = sxr.flow_fields(u, v, radius=radius, planetary_rotation=7.292115e-5)
    assert out.sizes["lon"] == 145
    assert np.max(np.abs(out["vorticity"] - 2 * u0 * np.sin(phi) / radius)) < 1e-13 * 2 * u0 / radius
    assert np.max(np.abs(out["streamfunction"] + radius * u0 * np.sin(phi))) < 1e-12 * radius * u0
    assert np.max(np.abs(out["divergence"])) < 1e-13 * 2 * u0 / radius
    assert np.max(np.abs(out["velocity_potential"])) < 1e-12 * radius * u0
    # absolute vorticity: f = 2 Omega sin(lat) added (common practice: the Coriolis parameter)
    f = 2 * 7.292115e-5 * np.sin(phi)
    assert np.max(np.abs(out["absolute_vorticity"] - out["vorticity"] - f)) < 1e-18
    assert out["absolute_vorticity"].attrs["standard_name"] == "atmosphere_absolute_vorticity"
    np.testing.assert_array_equal(out["vorticity"][:, 0], out["vorticity"][:, -1])   # the seam


@pytest.mark.reference
def test_units_and_cf_names_follow_the_input(series, rng):
    _, _, u, v = series
    out = sxr.flow_fields(u, v, radius=R)
    assert (out["vorticity"].attrs["units"], out["streamfunction"].attrs["units"],
            out["eastward_divergent"].attrs["units"]) == ("s-1", "m2 s-1", "m s-1")
    # CF standard names (from memory of the CF standard name table)
    assert out["vorticity"].attrs["standard_name"] == "atmosphere_relative_vorticity"
    assert out["divergence"].attrs["standard_name"] == "divergence_of_wind"
    assert out["streamfunction"].attrs["standard_name"] == "atmosphere_horizontal_streamfunction"
    assert out["velocity_potential"].attrs["standard_name"] == \
        "atmosphere_horizontal_velocity_potential"
    assert "standard_name" not in out["eastward_rotational"].attrs
    lat, lon = 87.5 - 5.0 * np.arange(36), 5.0 * np.arange(72)
    flow = _random_flow(rng)
    _, uo, vo = _pair(flow, lat, lon, names=("uo", "vo"), units="m s**-1",
                      standard=("eastward_sea_water_velocity", "northward_sea_water_velocity"))
    sea = sxr.flow_fields(uo, vo, radius=R)
    assert sea["divergence"].attrs["standard_name"] == "divergence_of_sea_water_velocity"
    assert "standard_name" not in sea["vorticity"].attrs and sea["vorticity"].attrs["units"] == "s-1"
    _, uc, vc = _pair(flow, lat, lon, units="cm s-1", standard=None)
    other = sxr.flow_fields(uc, vc, radius=R)
    assert other["vorticity"].attrs["units"] == "cm s-1 m-1"
    assert other["streamfunction"].attrs["units"] == "m cm s-1"
    assert all("standard_name" not in other[k].attrs for k in other.data_vars)
    _, un, vn = _pair(flow, lat, lon, units=None, standard=None)
    bare = sxr.flow_fields(un, vn, radius=R)
    assert all("units" not in bare[k].attrs for k in bare.data_vars)


@pytest.mark.reference
def test_the_radius_comes_from_the_argument_the_attribute_or_earth(series):
    flow, grid, u, v = series
    explicit = sxr.flow_fields(u, v, radius=1.35e6)
    tagged = u.assign_attrs(planet_radius_km=1350.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")          # no warning when the attribute gives it
        from_attribute = sxr.flow_fields(tagged, v)
    np.testing.assert_array_equal(from_attribute["vorticity"].values, explicit["vorticity"].values)
    assert from_attribute.attrs["planet_radius_km"] == 1350.0
    # Earth's mean radius R1 = 6371.0088 km of GRS80 (IUGG; common practice)
    with pytest.warns(RadiusAssumedWarning, match="6371.0088 km"):
        earth = sxr.flow_fields(u, v)
    assert earth.attrs["planet_radius_km"] == pytest.approx(6371.0088, rel=1e-15)
    # vorticity scales as 1/R for the same winds (zeta = lap psi with psi ~ R u; common practice)
    assert _rel(earth["vorticity"] * 6371008.8 / 1.35e6, explicit["vorticity"]) < 1e-12
    with pytest.raises(ValueError, match="disagree about the radius"):
        sxr.flow_fields(tagged, v.assign_attrs(planet_radius_km=1000.0))
    with pytest.warns(UserWarning, match="in metres"):
        sxr.flow_fields(u, v, radius=6371.0)
    with pytest.raises(ValueError, match="positive number of metres"):
        sxr.flow_fields(u, v, radius=-1.0)


def test_dask_backed_components_stay_lazy_and_agree(series):
    dask = pytest.importorskip("dask")
    _, _, u, v = series
    eager = sxr.flow_fields(u, v, radius=R, spectrum=True)
    lazy = sxr.flow_fields(u.chunk({"time": 1}), v.chunk({"time": 2}), radius=R, spectrum=True)
    for name in eager.data_vars:
        assert dask.is_dask_collection(lazy[name]), name
    computed = lazy.compute()
    for name in eager.data_vars:
        np.testing.assert_allclose(computed[name].values, eager[name].values, rtol=0,
                                   atol=1e-14 * float(np.abs(eager[name]).max()), err_msg=name)
    coefs = sxr.analyze_flow(u.chunk({"level": 1}), v, radius=R)
    assert dask.is_dask_collection(coefs[sxr.COS])
    eager_cos = sxr.analyze_flow(u, v, radius=R)[sxr.COS].values
    # measured identical (the same kernels on the same fields); 1e-14 of the largest coefficient
    # (2.5e7) leaves room for another summation order
    np.testing.assert_allclose(coefs[sxr.COS].values, eager_cos, rtol=0,
                               atol=1e-14 * np.abs(eager_cos).max())


def test_coefficients_are_two_fields_of_the_scalar_layout(series, tmp_path):
    flow, grid, u, v = series
    ds = sxr.analyze_flow(u, v, radius=R)
    assert ds[sxr.COS].dims == ("potential", "level", "time", "degree", "order")
    assert list(ds["potential"].values) == ["psi", "chi"]
    assert ds.attrs["units"] == "m2 s-1" and ds.attrs["reference_radius"] == R
    assert (ds.attrs["east_variable"], ds.attrs["north_variable"]) == ("u", "v")
    back = sxr.to_flow(ds)
    assert back.radius == R and back.batch_shape == (2, 3)
    assert _rel(back.psi.coef, flow.psi.coef) < 1e-12 and _rel(back.chi.coef, flow.chi.coef) < 1e-12
    # a scalar tool reads one potential: the streamfunction synthesised on the components' grid
    psi_grid = sxr.synthesize(ds.sel(potential="psi"), like=u)
    assert _rel(psi_grid, sphex.synthesize(flow.psi, grid)) < 1e-12
    # through a file and back, and from a Flow
    sxr.write_dataset(ds, tmp_path / "flow_coef.nc")
    again = sxr.to_flow(sxr.open_coefficients(tmp_path / "flow_coef.nc"))
    assert _rel(again.chi.coef, flow.chi.coef) < 1e-12
    made = sxr.from_flow(flow, dims=("level", "time"), component_units="m s-1")
    assert made.attrs["units"] == "m2 s-1" and made[sxr.COS].dims[0] == "potential"
    assert _rel(sxr.to_flow(made).psi.coef, flow.psi.coef) < 1e-15
    with pytest.raises(ValueError, match="potential"):
        sxr.to_flow(sxr.analyze(u.isel(level=0, time=0)))


@pytest.mark.reference
def test_kinetic_energy_sums_to_the_mean_of_half_the_squared_speed(rng):
    # Parseval for vector fields: against the area mean of (u^2 + v^2)/2 by Gauss-Legendre
    # quadrature from numpy.polynomial.legendre.leggauss, exact for |V|^2 of degree 2 LMAX + 2
    flow = _random_flow(rng, batch=(2,))
    n = LMAX + 3
    x, w = np.polynomial.legendre.leggauss(n)
    lat = np.rad2deg(np.arcsin(x))
    lon = 360.0 * np.arange(2 * n) / (2 * n)
    _, u, v = _pair(flow, lat, lon, ("member",))
    energy = sxr.kinetic_energy(sxr.analyze_flow(u, v, lmax=LMAX, radius=R))
    assert energy["rotational"].attrs["units"] == "m2 s-2"
    speed2 = (u ** 2 + v ** 2).values / 2
    mean = np.einsum("klm,l->k", speed2, w) / w.sum() / (2 * n)
    np.testing.assert_allclose(energy["total"].sum("degree").values, mean, rtol=1e-12)
    rot, div = sphex.spectra.kinetic_energy(flow)
    assert _rel(energy["rotational"], rot) < 1e-12 and _rel(energy["divergent"], div) < 1e-12


def test_regrid_and_smooth_go_through_psi_and_chi(rng, series):
    flow, grid, u, v = series
    target = sphex.Grid.equiangular(37, 72, "poles")
    moved = sxr.regrid_flow(u, v, target)
    east, north = synthesize_flow(flow, target)
    assert moved["u"].dims == ("level", "time", "lat", "lon")
    assert _rel(moved["u"], east) < 1e-12 and _rel(moved["v"], north) < 1e-12
    assert moved["u"].attrs["long_name"] == "u component"
    assert "regrid_flow" in moved["u"].attrs["history"]
    # the diagnostics on another grid: the flow truncated to the smaller exact limit
    coarse = sxr.flow_fields(u, v, like="gauss:11", radius=R)
    small = flow.truncate(11)
    assert coarse["vorticity"].dims == ("level", "time", "lat", "lon") and coarse.sizes["lat"] == 12
    assert _rel(coarse["vorticity"], sphex.synthesize(small.vorticity(), sphex.Grid.gauss(11))) < 1e-12
    assert _rel(coarse["northward_divergent"],
                synthesize_flow(small.divergent(), sphex.Grid.gauss(11))[1]) < 1e-12
    # smoothing: vorticity and divergence multiplied by the same weights per degree
    weights = np.exp(-0.02 * np.arange(grid.lmax_exact + 1) ** 2)
    smooth = sxr.smooth_flow(u, v, weights=weights)
    again = core_analyze(smooth["u"].values, smooth["v"].values, grid, radius=R)
    filtered = flow.filter(weights)
    assert _rel(again.vorticity().coef, filtered.vorticity().coef) < 1e-11
    assert _rel(again.divergence().coef, filtered.divergence().coef) < 1e-11
    np.testing.assert_array_equal(smooth["lat"].values, u["lat"].values)
    with pytest.warns(RadiusAssumedWarning):
        sxr.smooth_flow(u, v, gaussian_km=500.0)


# ----------------------------------------------------------------------------
# refusals
# ----------------------------------------------------------------------------
def test_components_on_different_grids_or_shapes_are_refused(series):
    _, _, u, v = series
    # a C-grid's v on the 37 cell edges (both poles) instead of u's 36 cell centres
    edges = xr.DataArray(np.zeros((2, 3, 37, 72)), dims=v.dims,
                         coords={**{k: v[k] for k in ("level", "time", "lon")},
                                 "lat": 90.0 - 5.0 * np.arange(37)}, name="v", attrs=v.attrs)
    with pytest.raises(ValueError, match="not on the same grid.*interpolate"):
        sxr.flow_fields(u, edges, radius=R)
    with pytest.raises(ValueError, match="differ in size along 'time'.*select the same steps"):
        sxr.flow_fields(u, v.isel(time=slice(0, 2)), radius=R)
    shifted = v.assign_coords(time=v["time"].values + np.timedelta64(1, "h"))
    with pytest.raises(ValueError, match="different 'time' coordinates"):
        sxr.flow_fields(u, shifted, radius=R)
    with pytest.raises(ValueError, match="dimensions"):
        sxr.flow_fields(u, v.isel(level=0), radius=R)
    with pytest.raises(ValueError, match="convert one"):
        sxr.flow_fields(u, v.assign_attrs(units="km h-1"), radius=R)
    with pytest.raises(ValueError, match="swapped"):
        sxr.flow_fields(v, u, radius=R)
    with pytest.raises(TypeError, match="DataArray"):
        sxr.flow_fields(u.values, v, radius=R)


def test_missing_values_and_degree_limits_are_refused(series):
    _, grid, u, v = series
    holey = v.copy()
    holey[1, 2, 3, 4] = np.nan
    with pytest.raises(ValueError, match=r"'v' has 1 missing value.*level=500.0.*time=2030-01-01T12"):
        sxr.flow_fields(u, holey, radius=R)
    with pytest.raises(ValueError, match=r"'v' has .*time=2030-01-01T12"):
        sxr.flow_fields(u.chunk({"time": 1}), holey.chunk({"time": 1}), radius=R).compute()
    limit = grid.lmax_exact
    with pytest.raises(ValueError, match=f"exact limit {limit}.*use lmax <= {limit}"):
        sxr.analyze_flow(u, v, lmax=limit + 1, radius=R)
    with pytest.raises(ValueError, match=f"use lmax <= {limit}"):
        sxr.flow_fields(u, v, lmax=limit + 1, radius=R)


def test_components_found_by_standard_name(series):
    _, _, u, v = series
    air = u.rename("t").assign_attrs(standard_name="air_temperature")
    ds = xr.Dataset({"ua": u, "va": v, "t": air})
    assert find_components(ds) == ("ua", "va")
    assert find_components(ds, "va", "ua") == ("va", "ua")
    with pytest.raises(ValueError, match="ambiguous.*ua, u10"):
        find_components(ds.assign(u10=u), options=("--east", "--north"))
    with pytest.raises(ValueError, match="no variables with the CF standard_name.*--east VAR"):
        find_components(ds[["t"]], options=("--east", "--north"))
    with pytest.raises(ValueError, match="give both"):
        find_components(ds, "ua", None)
    with pytest.raises(ValueError, match="no variable 'wind'"):
        find_components(ds, "wind", "va")
