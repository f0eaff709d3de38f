"""Hostile input: every class of input that once gave a wrong answer with no error is
refused (or computed right), through the Python API and through the command line.

Classes: masked arrays, overflow, coefficient files read by their labels, convention
attributes, complex data, damaged files, requests too large for memory, integer
arguments that are not whole numbers.  The command line runs as a subprocess for at
least one case of each class (``run``) and in-process (``cli.main``) for the rest.
"""
from __future__ import annotations

import math
import os
import resource
import subprocess
import sys
import time
import tracemalloc
import warnings

import netCDF4
import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import cli, filters
from sphex.flow import Flow, analyze_flow
from sphex.limits import RequestTooLarge
from sphex.spectra import degree_power
from sphex.xr import streaming
from sphex.xr.conventions import MissingConventionWarning
from sphex.xr.damage import expected_classic_size

LMAX = 15


def run(*args, env_extra=None):
    env = dict(os.environ)
    env.pop("SPHEX_DEBUG", None)
    env.update(env_extra or {})
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, env=env, timeout=600)


def cli_main(capsys, *args):
    """The command line in this process: (status, stdout, stderr)."""
    status = cli.main([str(a) for a in args])
    out = capsys.readouterr()
    return status, out.out, out.err


def assert_one_line_error(status, err, *words):
    assert status == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for w in words:
        assert w.lower() in lines[0].lower(), (w, lines[0])


@pytest.fixture(scope="module")
def grid():
    return sphex.Grid.gauss(LMAX)


@pytest.fixture(scope="module")
def field(grid):
    """A band-limited field (so analysis and synthesis are exact) around 1000."""
    rng = np.random.default_rng(19)
    c = np.tril(rng.standard_normal((LMAX + 1, LMAX + 1))
                + 1j * rng.standard_normal((LMAX + 1, LMAX + 1)))
    c[:, 0] = c[:, 0].real
    c[0, 0] = 1000.0 * math.sqrt(4 * math.pi)
    return sphex.synthesize(sphex.Harmonics(c), grid)


def dataarray(grid, values, name="f"):
    return xr.DataArray(values, dims=("lat", "lon"), name=name,
                        coords={"lat": ("lat", grid.lat, {"units": "degrees_north"}),
                                "lon": ("lon", grid.lon, {"units": "degrees_east"})})


@pytest.fixture(scope="module")
def files(tmp_path_factory, grid, field):
    d = tmp_path_factory.mktemp("hostile")
    da = dataarray(grid, field)
    da.to_dataset().to_netcdf(d / "field.nc")
    sxr.write_dataset(sxr.analyze(da), d / "coef.nc")
    xr.concat([da, da + 1.0], dim="time").to_dataset().to_netcdf(d / "series.nc")
    return {"dir": d, "field": d / "field.nc", "coef": d / "coef.nc", "da": da,
            "series": d / "series.nc"}


# ---------------------------------------------------------------------------
# masked arrays
# ---------------------------------------------------------------------------
def test_masked_netcdf4_values_are_refused_with_count_and_place(tmp_path, grid, field):
    # netCDF4 hands back a numpy.ma array whose masked cells hold the fill value
    # (-32767 here); analysing it silently used the fill value
    path = tmp_path / "filled.nc"
    dataarray(grid, field).to_dataset().to_netcdf(path, encoding={"f": {"_FillValue": -32767.0}})
    with netCDF4.Dataset(path, "a") as nc:
        nc["f"][3, 5] = np.ma.masked
        nc["f"][10, 7] = np.ma.masked
    with netCDF4.Dataset(path) as nc:
        masked = nc["f"][:]
        assert isinstance(masked, np.ma.MaskedArray) and masked.mask.sum() == 2
        for values in (masked, nc["f"]):  # the array, and the variable itself
            with pytest.raises(ValueError) as e:
                sphex.analyze(values, grid)
            msg = str(e.value)
            assert "2 masked elements" in msg and "row 3, column 5" in msg
            assert f"latitude {grid.lat[3]:.6g} deg" in msg and "fit_masked" in msg
        with pytest.raises(ValueError, match="masked"):
            grid.integrate(masked)
        with pytest.raises(ValueError, match="north: values are a masked array with 2"):
            analyze_flow(np.zeros(grid.shape), masked, grid)
        with pytest.raises(ValueError, match="masked"):
            sphex.regrid(masked, grid, grid)
        coef = np.ma.masked_array(np.ones((3, 3)), mask=np.eye(3, dtype=bool))
        with pytest.raises(ValueError, match="C is a masked array with 3 masked elements"):
            sphex.Harmonics.from_cos_sin(coef, np.zeros((3, 3)))
        with pytest.raises(ValueError, match="coef is a masked array"):
            sphex.Harmonics(coef)
    # a masked array without masked cells is just its data
    clean = np.ma.masked_array(field, mask=np.zeros(grid.shape, bool))
    assert np.array_equal(sphex.analyze(clean, grid).coef, sphex.analyze(field, grid).coef)


def test_masked_cells_of_a_file_are_refused_by_the_command_line(tmp_path, grid, field):
    path = tmp_path / "filled.nc"
    values = field.copy()
    values[4, 9] = -32767.0
    dataarray(grid, values).to_dataset().to_netcdf(
        path, encoding={"f": {"_FillValue": -32767.0}})  # read back as NaN by xarray
    out = tmp_path / "c.nc"
    r = run("analyze", path, "-o", out)
    assert_one_line_error(r.returncode, r.stderr, "1 missing value", "--missing fit")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["filled.nc"]


# ---------------------------------------------------------------------------
# overflow
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("power", [1000, 700, -700, -1000])
@pytest.mark.reference
def test_extreme_values_are_rescaled_exactly(grid, field, power):
    # multiplying by a power of two is exact in binary floating point (common
    # practice), so the transforms of 2**k f must be 2**k times those of f, bit for bit
    h = sphex.analyze(field, grid)
    hs = sphex.analyze(np.ldexp(field, power), grid)
    assert np.array_equal(np.ldexp(hs.coef.real, -power), h.coef.real)
    assert np.array_equal(np.ldexp(hs.coef.imag, -power), h.coef.imag)
    back = sphex.synthesize(hs, grid)
    assert np.array_equal(np.ldexp(back, -power), sphex.synthesize(h, grid))
    half = int(np.sign(power)) * 450  # squares of 2**+-450 coefficients stay in range
    scaled = h.replace(coef=np.ldexp(h.coef.real, half) + 1j * np.ldexp(h.coef.imag, half))
    assert np.array_equal(np.ldexp(degree_power(scaled), -2 * half), degree_power(h))


@pytest.mark.reference
def test_results_beyond_the_double_range_are_refused(grid):
    flat = np.full(grid.shape, 1e308)
    # the orthonormal C00 of a constant c is c sqrt(4 pi) (common practice): beyond 1.8e308
    with pytest.raises(ValueError, match=r"orthonormal coefficients of a field reaching 1e\+308 "
                                         r"overflow the double range.*norm='full'"):
        sphex.analyze(flat, grid)
    # the fully normalised C00 of a constant is the constant itself (common practice)
    full = sphex.analyze(flat, grid, norm="full")
    assert full[0, 0].real == pytest.approx(1e308, rel=1e-14)
    # at the north pole every zonal Y_l0 is sqrt((2l+1)/(4 pi)) (common practice): the sum
    # over l <= 15 of 5e307 times that is about 8.6e308
    zonal = np.zeros((LMAX + 1, LMAX + 1), complex)
    zonal[:, 0] = 5e307
    big = sphex.Harmonics(zonal)
    with pytest.raises(ValueError, match="synthesised from coefficients up to 5e\\+307 overflow"):
        sphex.synthesize(big, grid)
    with pytest.raises(ValueError, match="overflow"):
        big * 1e10
    with pytest.raises(ValueError, match="overflow"):
        filters.laplacian(big)                      # degree factors up to l(l+1) = 240
    with pytest.raises(ValueError, match="coefficients computed from coefficients up to 5e\\+307 "
                                         "overflow"):
        with np.errstate(over="ignore"):
            Flow(big, big).vorticity()              # any operator: checked in Harmonics.replace
    with pytest.raises(ValueError, match="degree power of coefficients up to 1e\\+200 overflow"):
        degree_power(sphex.Harmonics(np.diag(np.full(LMAX + 1, 1e200)).astype(complex)))


@pytest.mark.reference
def test_real_form_beyond_the_double_range_is_refused(grid):
    # the cosine/sine form of a_lm (m > 0) is sqrt(2) times it (common practice), so complex
    # coefficients of 1.5e308 are in range and their real form is not, in C as in S
    for a11 in (1.5e308, -1.5e308j):
        coef = np.zeros((3, 3), complex)
        coef[1, 1] = a11
        h = sphex.Harmonics(coef)
        with pytest.raises(ValueError, match=r"real-form \(cosine/sine\) coefficients.*overflow"):
            h.cos_sin()
        with pytest.raises(ValueError, match=r"real-form \(cosine/sine\) coefficients.*overflow"):
            h.cos_sin(out=(np.empty((3, 3)), np.empty((3, 3))))
    # f = c sin(theta) cos(phi) has a_11 = -c sqrt(2 pi / 3) (common practice): 1.74e308 for
    # c = 1.2e308, in range; its C_11 = -c sqrt(4 pi / 3) is not, and the adapter says so
    # (numpy- and dask-backed input both go through the block function of the tasks)
    values = 1.2e308 * np.sin(grid.colat)[:, None] * np.cos(np.radians(grid.lon))[None, :]
    assert abs(sphex.analyze(values, grid)[1, 1] + 1.2e308 * math.sqrt(2 * math.pi / 3)) \
        < 1e-13 * 1.74e308
    two = dataarray(grid, values)
    da = xr.concat([two / 1e300, two], dim="time")
    for obj in (da, da.chunk({"time": 1})):
        with pytest.raises(ValueError, match=r"real-form \(cosine/sine\) coefficients.*overflow"):
            sxr.analyze(obj).load()


def test_finiteness_is_tested_exactly_when_the_sum_overflows():
    # limits.all_finite adds the elements first: a finite array whose sum overflows must
    # still count as finite, and one inf or NaN anywhere (real or imaginary part) must not
    from sphex.limits import all_finite, refuse_overflow

    big = np.full(8, 1e308)
    assert all_finite(big) and all_finite(-big) and all_finite(big + 1e308j)
    refuse_overflow(big, "x", "y")  # finite: no error although the sum is inf
    for bad in (np.inf, -np.inf, np.nan):
        a = np.ones(1000)
        a[617] = bad
        assert not all_finite(a)
        in_imag = np.zeros(1000, complex)
        in_imag.imag = a
        assert not all_finite(in_imag) and not all_finite(a + 0j)
        with pytest.raises(ValueError, match="x overflow the double range"):
            refuse_overflow(a, "x", "y")
    assert all_finite(np.zeros(0)) and all_finite(np.arange(5))


@pytest.mark.reference
def test_overflow_through_the_xarray_layer_and_the_command_line(tmp_path, capsys, grid, files):
    da = dataarray(grid, np.full(grid.shape, 1e308))
    with pytest.raises(ValueError, match="overflow"):
        sxr.analyze(da)
    ds = sxr.analyze(da, norm="full")
    assert float(ds.cos_coef[0, 0]) == pytest.approx(1e308, rel=1e-14)
    path = tmp_path / "huge.nc"
    da.to_dataset().to_netcdf(path)
    r = run("analyze", path, "-o", tmp_path / "c.nc")
    assert_one_line_error(r.returncode, r.stderr, "overflow the double range", "norm='full'")
    assert not (tmp_path / "c.nc").exists()
    status, _, err = cli_main(capsys, "analyze", path, "--norm", "full", "-o", tmp_path / "f.nc")
    assert status == 0, err
    assert float(sxr.open_coefficients(tmp_path / "f.nc").cos_coef[0, 0]) == pytest.approx(
        1e308, rel=1e-14)
    zonal = np.zeros((LMAX + 1, LMAX + 1), complex)
    zonal[:, 0] = 5e307  # finite coefficients whose field and power are not (see above)
    sxr.write_harmonics(sphex.Harmonics(zonal), tmp_path / "huge_coef.nc")
    for args in (("synthesize", tmp_path / "huge_coef.nc", "--grid", "gauss:20",
                  "-o", tmp_path / "s.nc"),
                 ("spectrum", tmp_path / "huge_coef.nc")):
        status, _, err = cli_main(capsys, *args)
        assert_one_line_error(status, err, "overflow the double range")
    assert not (tmp_path / "s.nc").exists()


# ---------------------------------------------------------------------------
# coefficient files read by their labels
# ---------------------------------------------------------------------------
def test_coefficients_are_read_by_their_degree_and_order_labels(tmp_path, files, grid, field):
    ds = sxr.open_coefficients(files["coef"])
    h = sxr.to_harmonics(ds)
    path = tmp_path / "reversed.nc"
    ds.isel(degree=slice(None, None, -1), order=slice(None, None, -1)).to_netcdf(path)
    with xr.open_dataset(path) as f:
        assert list(f.degree.values[:3]) == [LMAX, LMAX - 1, LMAX - 2]  # stored 15..0
    assert np.array_equal(sxr.open_harmonics(path).coef, h.coef)
    out = tmp_path / "back.nc"
    r = run("synthesize", path, "--grid", files["field"], "-o", out)
    assert r.returncode == 0, r.stderr
    with xr.open_dataset(out) as back:
        assert float(np.max(np.abs(back["f"].values - field))) < 1e-9


@pytest.mark.parametrize("change,words", [
    (lambda ds: ds.assign_coords(degree=np.r_[np.arange(5), np.arange(6, LMAX + 2)]),
     ("degree labels skip 5", "add the missing degrees")),
    (lambda ds: ds.assign_coords(degree=np.r_[np.arange(LMAX), LMAX - 1]),
     (f"degree {LMAX - 1} appears 2 times",)),
    (lambda ds: ds.assign_coords(order=np.arange(1, LMAX + 2)),
     ("order labels start at 1, not 0",)),
    (lambda ds: ds.assign_coords(degree=np.arange(LMAX + 1) + 0.5),
     ("not whole numbers",)),
    (lambda ds: ds.assign_attrs(lmax=np.int32(LMAX + 5)),
     (f"attribute lmax = {LMAX + 5} but the data hold degrees 0..{LMAX}",)),
    (lambda ds: ds.assign(cos_coef=ds.cos_coef.transpose(..., "order", "degree")
                          .rename(order="degree", degree="order")),
     ("order > degree", "swapped")),
    (lambda ds: ds.assign(cos_coef=ds.cos_coef.where(ds.degree != 3)),
     ("cos_coef holds", "NaN or inf", "first at degree 3, order 0")),
], ids=["gap", "repeat", "start", "fraction", "lmax", "transposed", "nan"])
def test_inconsistent_coefficient_files_are_refused(tmp_path, capsys, files, change, words):
    ds = change(sxr.open_coefficients(files["coef"]))
    path = tmp_path / "bad.nc"
    ds.to_netcdf(path)
    with pytest.raises(ValueError) as e:
        sxr.open_harmonics(path)
    for w in words:
        assert w in str(e.value)
    status, _, err = cli_main(capsys, "synthesize", path, "--grid", "gauss:20",
                              "-o", tmp_path / "s.nc")
    assert_one_line_error(status, err, *words)
    assert not (tmp_path / "s.nc").exists()


# ---------------------------------------------------------------------------
# convention attributes
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("attrs,words", [
    ({"phase_convention": "geodesy"},
     ("phase_convention = 'geodesy'", "'condon-shortley', 'none'")),
    ({"condon_shortley_phase": np.int8(0)},
     ("phase_convention = 'condon-shortley' and condon_shortley_phase = 0 contradict",)),
    ({"phase_convention": "none"},
     ("phase_convention = 'none' and condon_shortley_phase = 1 contradict",)),
    ({"normalization": '4pi'}, ("normalization = '4pi'", "'orthonormal', 'full'")),
    ({"normalization": "full"}, ("normalization_meaning describes 'orthonormal'",)),
    ({"condon_shortley_phase": np.int8(3)}, ("condon_shortley_phase = 3",)),
    ({"reference_radius": 6.4e6, "reference_radius_units": "furlong"},
     ("reference_radius_units = 'furlong'", "'m'")),
    ({"reference_radius": -1.0}, ("reference_radius = -1.0",)),
    ({"units": "K"}, ("variable cos_coef has units 'm'",)),
], ids=["phase", "flag", "flag2", "norm", "meaning", "flag3", "radius_units", "radius", "units"])
def test_unknown_or_contradictory_conventions_are_refused(tmp_path, capsys, files, attrs, words):
    ds = sxr.open_coefficients(files["coef"])
    ds["cos_coef"].attrs["units"] = "m"
    path = tmp_path / "bad.nc"
    ds.assign_attrs(attrs).to_netcdf(path)
    with pytest.raises(ValueError) as e:
        sxr.open_coefficients(path)
    for w in words:
        assert w in str(e.value)
    status, _, err = cli_main(capsys, "spectrum", path)
    assert_one_line_error(status, err, *words)


@pytest.mark.reference
def test_conventions_are_applied_and_a_file_without_them_is_read_with_the_defaults_said(
        tmp_path, files, grid, field):
    ds = sxr.open_coefficients(files["coef"])
    h = sxr.to_harmonics(ds)
    # without the phase, odd orders change sign (convention_factor, from memory)
    nophase = sxr.from_harmonics(h.to(condon_shortley=False))
    nophase.to_netcdf(tmp_path / "nophase.nc")
    g = sxr.open_harmonics(tmp_path / "nophase.nc")
    assert not g.condon_shortley
    assert np.allclose(sphex.synthesize(g, grid), field, atol=1e-9)
    bare = ds.copy()
    bare.attrs = {}
    bare.to_netcdf(tmp_path / "bare.nc")
    with pytest.warns(MissingConventionWarning, match="no normalization attribute, read as "
                                                      "'orthonormal'.*Condon-Shortley"):
        opened = sxr.open_coefficients(tmp_path / "bare.nc")
    assert opened.attrs["normalization"] == "orthonormal"  # the defaults are stated from now on
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        sxr.to_harmonics(opened)
    out = tmp_path / "bare_field.nc"
    r = run("synthesize", tmp_path / "bare.nc", "--grid", files["field"], "-o", out,
            env_extra={"PYTHONWARNINGS": "ignore"})
    assert r.returncode == 0, r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sphex synthesize: warning: ")
    assert "no normalization attribute, read as 'orthonormal'" in lines[0]
    (tmp_path / "bare.txt").write_text("0 0 1.0 0.0\n1 1 0.5 0.25\n")
    with pytest.warns(MissingConventionWarning, match="no normalization header line"):
        sxr.read_table(tmp_path / "bare.txt")


# ---------------------------------------------------------------------------
# complex data
# ---------------------------------------------------------------------------
def test_complex_data_are_refused_with_what_to_do(tmp_path, grid, field):
    with pytest.raises(ValueError, match="complex.*real and imaginary parts"):
        sphex.analyze(field * (1 + 1j), grid)
    da = dataarray(grid, field * (1 + 1j))
    for call in (sxr.analyze, lambda d: sxr.smooth(d, cap_deg=10.0),
                 lambda d: sxr.regrid(d, "gauss:10")):
        with pytest.raises(ValueError, match=r"'f' is complex.*da\.real and da\.imag"):
            call(da)
    path = tmp_path / "complex.nc"
    with netCDF4.Dataset(path, "w", auto_complex=True) as nc:  # stored as a compound type
        nc.createDimension("lat", grid.nlat)
        nc.createDimension("lon", grid.nlon)
        nc.createVariable("lat", "f8", ("lat",))[:] = grid.lat
        nc.createVariable("lon", "f8", ("lon",))[:] = grid.lon
        nc["lat"].units, nc["lon"].units = "degrees_north", "degrees_east"
        nc.createVariable("z", "c16", ("lat", "lon"))[:] = field * (1 + 1j)
    with pytest.raises(ValueError, match="'z' is complex"):
        streaming.stream_analyze(path, "z", tmp_path / "c.nc", progress=False)
    r = run("analyze", path, "-v", "z", "-o", tmp_path / "c.nc")
    assert_one_line_error(r.returncode, r.stderr, "'z' is complex", "real and imaginary parts")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["complex.nc"]


# ---------------------------------------------------------------------------
# damaged files
# ---------------------------------------------------------------------------
def _cut(path, fraction, out):
    data = path.read_bytes()
    out.write_bytes(data[: int(len(data) * fraction)])
    return out


@pytest.mark.parametrize("fmt", ["NETCDF3_CLASSIC", "NETCDF3_64BIT_OFFSET", "NETCDF3_64BIT_DATA"])
@pytest.mark.reference
def test_classic_header_promises_the_size_the_library_writes(tmp_path, fmt):
    # files written by the netCDF library itself, with record variables of two
    # types: the size read from the header is the file's, up to the 4-byte padding
    # of the last record variable (netCDF classic format specification)
    path = tmp_path / "r.nc"
    with netCDF4.Dataset(path, "w", format=fmt) as nc:
        nc.createDimension("time", None)
        nc.createDimension("lat", 5)
        nc.createDimension("lon", 3)
        nc.title = "odd length"
        nc.createVariable("f", "f4", ("time", "lat", "lon"))[:3] = np.ones((3, 5, 3))
        nc.createVariable("g", "i2", ("time", "lon"))[:3] = np.ones((3, 3))
        nc.createVariable("c", "i1", ("lat",))[:] = 1
    size = path.stat().st_size
    assert size - 4 < expected_classic_size(path) <= size


@pytest.mark.parametrize("fmt", ["NETCDF3_CLASSIC", "NETCDF4"])
def test_files_cut_short_are_refused_as_damaged(tmp_path, capsys, files, fmt):
    whole = tmp_path / f"whole_{fmt}.nc"
    files["da"].to_dataset().to_netcdf(whole, format=fmt)
    coef = tmp_path / f"coef_{fmt}.nc"
    sxr.open_coefficients(files["coef"]).to_netcdf(coef, format=fmt)
    for fraction in (0.5, 0.97):
        half = _cut(whole, fraction, tmp_path / "half.nc")
        with pytest.raises(ValueError, match="is damaged: it has .* bytes but its"):
            streaming.stream_analyze(half, "f", tmp_path / "c.nc", progress=False)
        with pytest.raises(ValueError, match="damaged"):
            sxr.open_coefficients(_cut(coef, fraction, tmp_path / "half_coef.nc"))
        status, _, err = cli_main(capsys, "analyze", half, "-o", tmp_path / "c.nc")
        assert_one_line_error(status, err, "damaged", "copy or download it again")
    if fmt == "NETCDF3_CLASSIC":  # the case that used to be read as zeros
        r = run("analyze", tmp_path / "half.nc", "-o", tmp_path / "c.nc")
        assert_one_line_error(r.returncode, r.stderr, "damaged", "netCDF-3 header promises")
    assert not (tmp_path / "c.nc").exists()


# ---------------------------------------------------------------------------
# requests too large: refused at once, before any heavy work
# ---------------------------------------------------------------------------
# The bound is CPU time, generous (5 s) because the machines are shared: the refusals
# take milliseconds, the requests they stop took minutes (156 s of Gauss nodes for
# gauss:100000) before ending in a MemoryError.
REFUSAL_CPU_SECONDS = 5.0


def _refused_quickly(call):
    t0 = time.process_time()
    with pytest.raises(RequestTooLarge) as e:
        call()
    assert time.process_time() - t0 < REFUSAL_CPU_SECONDS
    assert "needs about" in str(e.value) and "available" in str(e.value)
    return str(e.value)


def test_impossible_requests_are_refused_at_once_by_the_api(tmp_path, grid, field):
    msg = _refused_quickly(lambda: sphex.Grid.gauss(10**9))
    assert "EiB" in msg and "use a lower lmax" in msg
    _refused_quickly(lambda: sphex.Grid.equiangular(100000, 200000, "poles"))
    _refused_quickly(lambda: sxr.parse_grid("gauss:1000000000"))
    _refused_quickly(lambda: sphex.analyze(field, grid, lmax=10**9, allow_aliasing=True))
    _refused_quickly(lambda: sphex.Harmonics(np.zeros((3, 3), complex)).truncate(10**9))
    _refused_quickly(lambda: sxr.analyze(dataarray(grid, field), 10**9, allow_aliasing=True))
    _refused_quickly(lambda: filters.gaussian(100.0, 10**12, 6371.0))


def test_a_table_is_sized_from_its_rows_not_its_header(tmp_path):
    # 74 bytes claiming lmax 5000 would take (5001^2) * 16 bytes * 3 = 1.1 GiB
    path = tmp_path / "claim.txt"
    path.write_text("# normalization: orthonormal\n# lmax: 5000\n0 0 1.0 0.0\n1 1 0.5 0.2\n"
                    "1 0 2 0\n")
    assert path.stat().st_size == 74
    tracemalloc.start()
    try:
        with pytest.raises(ValueError, match="header says lmax 5000 but the rows run to degree 1"):
            sxr.read_table(path)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 10 * 2**20
    far = tmp_path / "far.txt"  # a row itself claims the degree: refused by the estimate
    far.write_text("0 0 1.0 0.0\n1000000000 0 1.0 0.0\n")
    _refused_quickly(lambda: sxr.read_table(far))


def _child_cpu_seconds():
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


@pytest.mark.parametrize("args,words", [
    (("synthesize", "{coef}", "--grid", "gauss:1000000000", "-o", "{out}"), ("EiB",)),
    (("synthesize", "{coef}", "--grid", "equiangular:100000x200000:poles", "-o", "{out}"),
     ("149 GiB",)),
    (("regrid", "{field}", "--grid", "gauss:100000", "-o", "{out}"), ("Grid.gauss(100000)",)),
    (("synthesize", "{table}", "--grid", "gauss:10", "-o", "{out}"),
     ("header says lmax 1000000000",)),
], ids=["gauss-1e9", "equiangular", "regrid-gauss-1e5", "table"])
def test_impossible_requests_are_refused_at_once_by_the_command_line(tmp_path, files, args, words):
    table = tmp_path / "t.txt"
    table.write_text("# lmax: 1000000000\n0 0 1.0 0.0\n")
    out = tmp_path / "out.nc"
    fmt = {"coef": files["coef"], "field": files["field"], "table": table, "out": out}
    before = _child_cpu_seconds()
    r = run(*(a.format(**fmt) for a in args))
    # startup (imports, numba's cache) included; still far from the minutes it took
    assert _child_cpu_seconds() - before < 3 * REFUSAL_CPU_SECONDS
    assert_one_line_error(r.returncode, r.stderr, *words)
    assert not out.exists()


def test_a_memory_cap_is_obeyed_and_named(tmp_path, files, monkeypatch):
    monkeypatch.setenv("SPHEX_MEMORY_LIMIT", "1K")
    with pytest.raises(RequestTooLarge, match="1 KiB available \\(capped by SPHEX_MEMORY_LIMIT\\)"):
        sxr.analyze(files["da"])
    monkeypatch.setenv("SPHEX_MEMORY_LIMIT", "lots")
    with pytest.raises(ValueError, match="SPHEX_MEMORY_LIMIT='lots' is not a size"):
        sxr.analyze(files["da"])


# ---------------------------------------------------------------------------
# integer arguments that are not whole numbers
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("bad", [2.5, float("nan"), float("inf"), -1, True, "3"],
                         ids=["fraction", "nan", "inf", "negative", "bool", "text"])
def test_integer_arguments_are_refused_by_name_in_every_layer(tmp_path, grid, field, files, bad):
    h = sphex.analyze(field, grid)
    calls = {
        "lmax": [lambda: sphex.analyze(field, grid, lmax=bad), lambda: h.truncate(bad),
                 lambda: sphex.Grid.gauss(bad), lambda: sxr.analyze(files["da"], bad),
                 lambda: sxr.synthesize(sxr.analyze(files["da"]), grid, lmax=bad),
                 lambda: sxr.regrid(files["da"], "gauss:10", lmax=bad)],
        "band L1": [lambda: sxr.smooth(files["da"], band=(bad, 10))],
        "chunks time": [lambda: streaming.stream_analyze(files["series"], "f", tmp_path / "c.nc",
                                                        chunks={"time": bad}, progress=False)],
        "nlon": [lambda: sphex.Grid.gauss(4, nlon=bad)],
    }
    for name, funcs in calls.items():
        for call in funcs:
            with pytest.raises(ValueError, match=f"{name} must be a whole number"):
                call()
    assert not (tmp_path / "c.nc").exists()


def test_integer_options_are_refused_by_the_command_line(tmp_path, capsys, files):
    out = tmp_path / "c.nc"
    r = run("analyze", files["field"], "--lmax", "2.5", "-o", out)
    assert_one_line_error(r.returncode, r.stderr, "--lmax", "'2.5' is not a whole number")
    for value in ("nan", "inf", "-1", "1e3"):
        with pytest.raises(SystemExit) as e:
            cli.main(["analyze", str(files["field"]), "--lmax", value, "-o", str(out)])
        assert e.value.code == 2
        assert "--lmax" in capsys.readouterr().err
    with pytest.raises(SystemExit) as e:
        cli.main(["smooth", str(files["field"]), "--band", "2.5:10", "-o", str(out)])
    assert e.value.code == 2 and "L1:L2" in capsys.readouterr().err
    r = run("bench", "--sizes", "2.5")
    assert r.returncode == 2 and "invalid int value" in r.stderr and "Traceback" not in r.stderr
    assert not out.exists()
