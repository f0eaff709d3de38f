"""Checks of sphex.xr.models: potential models written to netCDF and read back."""
from __future__ import annotations

import numpy as np
import pytest

import sphex.xr
from sphex import Harmonics
from sphex import models as core_models
from sphex.models import PotentialModel
from sphex.xr.models import open_model, read_model, write_model
from test_models import SHC, gravity_text, write


def assert_same_model(back: PotentialModel, model: PotentialModel):
    for name in ("gm", "name", "tide_system", "kind", "errors", "header"):
        assert getattr(back, name) == getattr(model, name), name
    np.testing.assert_array_equal(np.asarray(back.epoch, dtype=float) if back.epoch is not None else 0,
                                  np.asarray(model.epoch, dtype=float) if model.epoch is not None else 0)
    for a, b in ((back.harmonics, model.harmonics), (back.sigmas, model.sigmas)):
        if b is None:
            assert a is None
            continue
        assert (a.norm, a.condon_shortley, a.radius, a.units) == (b.norm, b.condon_shortley,
                                                                  b.radius, b.units)
        assert a.coef.shape == b.coef.shape
        assert np.array_equal(a.coef, b.coef)  # bit for bit


def test_gravity_model_round_trip_is_identical(tmp_path):
    model = core_models.open_model(write(tmp_path, "m.gfc", gravity_text()))
    assert model.sigmas is not None and model.gm is not None
    path = write_model(model, tmp_path / "m.nc")
    back = read_model(path)
    assert_same_model(back, model)
    assert back.source == str(path)
    # through the registry of the core once sphex.xr is imported, and through sphex.xr.open_model
    assert_same_model(core_models.open_model(path), model)
    assert_same_model(sphex.xr.open_model(path), model)


def test_random_model_in_other_conventions_round_trip(tmp_path, rng):
    lmax = 40
    coef = rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1))
    coef[:, 0] = coef[:, 0].real
    coef[np.triu_indices(lmax + 1, 1)] = 0
    h = Harmonics(coef, norm="orthonormal", condon_shortley=True, radius=3.39e6)
    sig = Harmonics(np.abs(coef) * 1e-3, norm="schmidt", condon_shortley=False, radius=3.39e6)
    model = PotentialModel(harmonics=h, gm=4.2828e13, sigmas=sig, name="random",
                           tide_system="tide_free", errors="calibrated", header={"a": "1", "b": [1, 2]})
    path = write_model(model, tmp_path / "r.nc")
    assert_same_model(read_model(path), model)
    with pytest.raises(FileExistsError):
        write_model(model, path)
    write_model(model, path, overwrite=True)


def test_magnetic_model_with_epochs(tmp_path):
    model = core_models.open_model(write(tmp_path, "f.shc", SHC))
    assert np.ndim(model.epoch) == 1
    path = write_model(model, tmp_path / "f.nc")
    back = read_model(path)
    assert_same_model(back, model)
    # an epoch of the file and an interpolated one, as the .shc reader gives them
    t0 = float(model.epoch[0])
    mid = 0.5 * (model.epoch[0] + model.epoch[1])
    for t in (t0, mid):
        expected = core_models.open_model(tmp_path / "f.shc", epoch=t)
        got = read_model(path, epoch=t)
        np.testing.assert_allclose(got.harmonics.coef, expected.harmonics.coef, rtol=1e-15, atol=1e-12)
        assert got.epoch == pytest.approx(t)
    with pytest.raises(ValueError, match="outside the file's epochs"):
        read_model(path, epoch=1000.0)


def test_netcdf_model_errors(tmp_path, rng):
    h = Harmonics(np.zeros((3, 3), complex))
    sphex.xr.write_harmonics(h, tmp_path / "noradius.nc")
    with pytest.raises(ValueError, match="no reference_radius attribute: pass radius="):
        open_model(tmp_path / "noradius.nc")
    model = open_model(tmp_path / "noradius.nc", radius=1.0e6)
    assert model.radius == 1.0e6 and model.gm is None and model.kind == "gravity"
    write_model(model, tmp_path / "withradius.nc")
    with pytest.raises(ValueError, match="states its reference radius"):
        open_model(tmp_path / "withradius.nc", radius=2.0e6)
    with pytest.raises(ValueError, match="no epochs to choose from"):
        open_model(tmp_path / "withradius.nc", epoch=2020.0)
    field = tmp_path / "field.nc"
    import xarray as xr
    xr.Dataset({"t": ("x", np.zeros(3))}).to_netcdf(field)
    with pytest.raises(ValueError, match="not a model file"):
        open_model(field)
    with pytest.raises(ValueError, match="expected a sphex.models.PotentialModel"):
        write_model(h, tmp_path / "x.nc")
