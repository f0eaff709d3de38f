"""Checks of coefficient Datasets, their netCDF files and text tables
(sphex.xr.coefficients, sphex.xr.files, sphex.xr.tables): round trips and file layout."""
from __future__ import annotations

from _sample_fields import random_harmonics

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr


@pytest.mark.parametrize("norm,cs", [("orthonormal", True), ("full", False), ("schmidt", True), ("unnormalized", True)])
def test_netcdf_round_trip_is_bit_exact(tmp_path, rng, norm, cs):
    h = random_harmonics(rng, 9, batch=(2,), norm=norm, cs=cs, radius=6.3781e6, units="m")
    path = tmp_path / "h.nc"
    sxr.write_harmonics(h, path)
    g = sxr.open_harmonics(path)
    assert np.array_equal(g.coef, h.coef)
    assert (g.norm, g.condon_shortley, g.radius, g.units) == (norm, cs, 6.3781e6, "m")
    # the file itself is in the documented layout
    with xr.open_dataset(path) as f:
        assert f[sxr.COS].dims == ("sample_0", "degree", "order")
        assert f.attrs["normalization"] == norm and f.attrs["lmax"] == 9
        assert f.attrs["phase_convention"] == ("condon-shortley" if cs else "none")
        assert f.attrs["reference_radius"] == 6.3781e6


def test_coefficients_stored_in_shuffled_label_order_read_as_written(tmp_path, rng):
    # degrees and orders stored in a random order (not just reversed, whose sorting permutation
    # is its own inverse) are read by their labels: the cosine and sine parts come back bit for
    # bit, in degree and order 0, 1, ...
    h = random_harmonics(rng, 9, batch=(2,))
    ds = sxr.from_harmonics(h)
    perm_l, perm_m = rng.permutation(10), rng.permutation(10)
    assert not np.array_equal(np.argsort(perm_l), perm_l)      # not its own inverse
    assert not np.array_equal(np.argsort(perm_m), perm_m)
    path = tmp_path / "shuffled.nc"
    ds.isel(degree=perm_l, order=perm_m).to_netcdf(path)
    with xr.open_dataset(path) as f:
        np.testing.assert_array_equal(f.degree.values, perm_l)
    back = sxr.open_coefficients(path)
    np.testing.assert_array_equal(back.degree.values, np.arange(10))
    for name in (sxr.COS, sxr.SIN):
        np.testing.assert_array_equal(back[name].values, ds[name].values)


def test_coefficient_dataset_round_trip_and_no_silent_overwrite(tmp_path, rng):
    grid = sphex.Grid.gauss(10)
    da = xr.DataArray(sphex.synthesize(random_harmonics(rng, 10), grid), dims=("lat", "lon"),
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
    h = random_harmonics(rng, 6, norm="full", radius=1.35e6, units="m")
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
