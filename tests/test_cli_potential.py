"""End-to-end checks of ``sphex gravity``, ``sphex geomagnetic`` and ``sphex spectrum MODEL``,
run as subprocesses on model files written by the tests (invented numbers)."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from sphex import Grid, potential
from sphex import cli
from sphex.models import open_model
from test_cli import run
from test_models import SHC, gravity_text


@pytest.fixture(scope="module")
def model_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("models")
    (d / "m.gfc").write_text(gravity_text())
    (d / "f.shc").write_text(SHC)
    (d / "moon.gfc").write_text(gravity_text().replace("3.986004415E+14", "4.9E+12"))
    text = gravity_text()
    (d / "truncated.gfc").write_text(text[: text.rindex("gfc")])  # the last row cut off
    return d


def test_gravity_writes_the_quantities_of_the_core(model_files, tmp_path):
    out = tmp_path / "g.nc"
    r = run("gravity", model_files / "m.gfc", "--grid", "gauss:12", "--height", "0",
            "--quantity", "geoid", "anomaly", "--normal", "none", "-o", out)
    assert r.returncode == 0, r.stderr
    assert "not certified for surveying" in r.stdout
    model = open_model(model_files / "m.gfc")
    expected = potential.gravity(model, Grid.gauss(12), ["geoid", "anomaly"], normal=None)
    with xr.open_dataset(out) as ds:
        for name in expected:
            np.testing.assert_allclose(ds[name].values, expected[name], rtol=1e-13,
                                       atol=1e-13 * np.abs(expected[name]).max())
        assert ds["anomaly"].attrs["units"] == "m s-2"
        assert "not certified" in ds.attrs["comment"]
        assert "sphex gravity" in ds.attrs["history"]
    # a grid file as the target, an ellipsoid, a truncated model
    out2 = tmp_path / "g2.nc"
    r = run("gravity", model_files / "m.gfc", "--grid", out, "--surface", "ellipsoid",
            "--height", "250", "--quantity", "height_anomaly", "--lmax", "2", "-o", out2)
    assert r.returncode == 0, r.stderr
    with xr.open_dataset(out2) as ds:
        assert ds["height_anomaly"].shape == (13, 26)
        assert ds.attrs["latitude_kind"] == "geodetic"


def test_geomagnetic_at_an_epoch(model_files, tmp_path):
    out = tmp_path / "f.nc"
    r = run("geomagnetic", model_files / "f.shc", "--epoch", "2022.5", "--grid", "gauss:8",
            "--height", "450000", "--component", "total", "declination", "-o", out)
    assert r.returncode == 0, r.stderr
    model = open_model(model_files / "f.shc", epoch=2022.5)
    expected = potential.magnetic(model, Grid.gauss(8), "total", 450000.0)
    with xr.open_dataset(out) as ds:
        np.testing.assert_allclose(ds["total"].values, expected, rtol=1e-13)
        assert ds["declination"].attrs["units"] == "degree"


def test_spectrum_of_a_model_file(model_files, tmp_path):
    csv = tmp_path / "s.csv"
    r = run("spectrum", model_files / "m.gfc", "--csv", csv)
    assert r.returncode == 0, r.stderr
    rows = [line.split(",") for line in csv.read_text().splitlines() if not line.startswith("#")]
    assert rows[0] == ["degree", "degree_variances", "error_degree_variances"]   # plain names
    model = open_model(model_files / "m.gfc")
    dv = potential.degree_variances(model)
    ev = potential.error_degree_variances(model)
    got = np.array([[float(x) for x in row[1:]] for row in rows[1:]])
    np.testing.assert_allclose(got[:, 0], dv, rtol=1e-15)
    np.testing.assert_allclose(got[:, 1], ev, rtol=1e-15)
    png = tmp_path / "s.png"
    r = run("spectrum", model_files / "m.gfc", "--plot", png)
    assert r.returncode == 0, r.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize("args, words", [
    (["gravity", "m.gfc", "--grid", "gauss:8", "--quantity", "bouguer"], "invalid choice: 'bouguer'"),
    (["gravity", "absent.gfc", "--grid", "gauss:8"], "absent.gfc: no such file"),
    (["gravity", "truncated.gfc", "--grid", "gauss:8"], "truncated.gfc"),
    (["gravity", "f.shc", "--grid", "gauss:8"], "use 'sphex geomagnetic'"),
    (["gravity", "m.gfc", "--grid", "gauss:8", "--lmax", "9"], "above the model's degree 3"),
    (["geomagnetic", "f.shc", "--grid", "gauss:8", "--epoch", "1900"], "outside the file's epochs"),
    (["spectrum", "truncated.gfc"], "truncated.gfc"),
    (["gravity", "moon.gfc", "--grid", "gauss:8"], "belongs to another body"),
])
def test_model_errors_exit_2_with_one_line(model_files, tmp_path, args, words):
    out = tmp_path / "out.nc"
    r = run(*args, *(["-o", out] if args[0] != "spectrum" else []), cwd=model_files)
    assert r.returncode == 2, (r.stdout, r.stderr)
    assert len(r.stderr.strip().splitlines()) == 1, r.stderr
    assert words in r.stderr and "Traceback" not in r.stderr
    assert not out.exists()


def test_help_repeats_the_caution(capsys):
    with pytest.raises(SystemExit) as e:
        cli.main(["gravity", "--help"])
    assert e.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "not certified for surveying, engineering or navigation" in text
    assert "licensed practice come first" in text and "example:" in text
