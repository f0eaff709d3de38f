"""Checks for streaming a series through a netCDF file (sphex.xr.streaming), locally and
on a dask.distributed cluster, and its progress report."""
from __future__ import annotations

import io
import os

import numpy as np
import pytest

dask = pytest.importorskip("dask")
xr = pytest.importorskip("xarray")
netCDF4 = pytest.importorskip("netCDF4")

import numba  # noqa: E402

import sphex.xr as sxr  # noqa: E402
from _sample_fields import SERIES_LMAX  # noqa: E402
from sphex.xr import scaleout, streaming  # noqa: E402
from sphex.xr.output import OutputExistsError  # noqa: E402



def _layout(path) -> dict:
    """Everything about a netCDF file except the numbers in its big variables."""
    with netCDF4.Dataset(path) as d:
        return {
            "dims": {k: (len(v), v.isunlimited()) for k, v in d.dimensions.items()},
            "attrs": {a: str(d.getncattr(a)) for a in d.ncattrs()},
            "vars": {k: (v.dimensions, str(v.dtype), str(v.chunking()),
                         {a: str(v.getncattr(a)) for a in v.ncattrs()})
                     for k, v in d.variables.items()},
        }


def _write_series(da: xr.DataArray, path) -> None:
    da.astype(np.float32).to_dataset().to_netcdf(path, engine="netcdf4")


def test_streamed_file_matches_the_in_memory_path(series, tmp_path):
    src = tmp_path / "series.nc"
    _write_series(series, src)
    out = tmp_path / "coef_streamed.nc"
    res = streaming.stream_analyze(src, "surface_temp", out, lmax=12, norm="full", chunks="time=5")
    assert (res.fields, res.dim, res.block, res.chunks, res.lmax) == (12, "time", 5, 3, 12)
    assert res.scheduler == "threads" and "gauss" in res.grid
    with xr.open_dataset(src) as ds:
        da = ds["surface_temp"].load()
    ref = sxr.analyze(da, 12, norm="full")
    ref.attrs["history"] = f"sphex analyze {src} -v surface_temp --lmax 12 --norm full"
    sxr.write_dataset(ref, tmp_path / "coef_memory.nc")
    assert _layout(out) == _layout(tmp_path / "coef_memory.nc")
    got = sxr.open_coefficients(out)
    for v in (sxr.COS, sxr.SIN):
        np.testing.assert_allclose(got[v].values, ref[v].values, rtol=0, atol=1e-12)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["coef_memory.nc", "coef_streamed.nc",
                                                          "series.nc"]


def test_streamed_coefficients_are_the_core_real_form_to_the_bit(series, tmp_path):
    # internal consistency: each task writes the real form of its chunk straight into its
    # output block; the file must hold, bit for bit, what the numeric core gives for the
    # same chunks of fields (sphex.analyze, then Harmonics.cos_sin)
    import sphex

    src = tmp_path / "series.nc"
    _write_series(series, src)
    out = tmp_path / "coef.nc"
    streaming.stream_analyze(src, "surface_temp", out, lmax=11, norm="schmidt", chunks="time=5",
                             progress=False)
    with xr.open_dataset(src) as ds:
        values = ds["surface_temp"].values.astype(np.float64)
    grid = sphex.Grid.gauss(SERIES_LMAX)
    parts = [sphex.analyze(values[i:i + 5], grid, lmax=11, norm="schmidt").cos_sin()
             for i in range(0, 12, 5)]
    with netCDF4.Dataset(out) as d:
        for k, name in enumerate((sxr.COS, sxr.SIN)):
            want = np.concatenate([p[k] for p in parts])
            assert d[name][:].tobytes() == want.tobytes(), name


def test_stream_default_block_and_single_field(series, tmp_path):
    src = tmp_path / "one.nc"
    _write_series(series.isel(time=0, drop=True), src)
    res = streaming.stream_analyze(src, None, tmp_path / "c.nc")
    assert (res.fields, res.dim, res.chunks) == (1, None, 1)
    src2 = tmp_path / "all.nc"
    _write_series(series, src2)
    res2 = streaming.stream_analyze(src2, None, tmp_path / "c2.nc")
    # default block: about BLOCK_BYTES of float64 input, here more than the whole series
    assert res2.dim == "time" and res2.block == 12 and res2.chunks == 1
    per_field = series.sizes["lat"] * series.sizes["lon"] * 8
    assert scaleout.default_block(per_field) == scaleout.BLOCK_BYTES // per_field
    assert scaleout.default_block(10 * scaleout.BLOCK_BYTES) == 1


def test_stream_user_errors_leave_no_output(series, tmp_path):
    src = tmp_path / "s.nc"
    _write_series(series, src)
    out = tmp_path / "c.nc"
    out.write_text("keep me")
    with pytest.raises(OutputExistsError, match="overwrite=True"):
        streaming.stream_analyze(src, "surface_temp", out)
    assert out.read_text() == "keep me"
    with pytest.raises(ValueError, match=r"has no variable 'nope' \(variables: surface_temp\)"):
        streaming.stream_analyze(src, "nope", tmp_path / "d.nc")
    with pytest.raises(ValueError, match="spatial dimension"):
        streaming.stream_analyze(src, "surface_temp", tmp_path / "d.nc", chunks={"lat": 4})
    with pytest.raises(ValueError, match="names 'member'"):
        streaming.stream_analyze(src, "surface_temp", tmp_path / "d.nc", chunks={"member": 4})
    with pytest.raises(ValueError, match="above the exact limit"):
        streaming.stream_analyze(src, "surface_temp", tmp_path / "d.nc", lmax=SERIES_LMAX + 1)
    with pytest.raises(FileNotFoundError):
        streaming.stream_analyze(tmp_path / "missing.nc", "x", tmp_path / "d.nc")
    holes = series.copy()
    holes[7, 3, 3] = np.nan
    _write_series(holes, tmp_path / "holes.nc")
    # the step is named although the task that meets it sees only its own chunk of 4
    step = np.datetime_as_string(series.time.values[7], unit="D")
    with pytest.raises(ValueError, match=rf"1 missing value \(NaN or inf\), in time={step} "
                                         r"\(index 7\);"):
        streaming.stream_analyze(tmp_path / "holes.nc", "surface_temp", tmp_path / "d.nc",
                              chunks="time=4")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.nc", "holes.nc", "s.nc"]


def test_a_task_still_writing_after_a_failure_leaves_no_partial_file(series, tmp_path, monkeypatch):
    # Forced order: the blocks without gaps are analysed at once and their writes are
    # held back, the block with a gap fails later; the failure must not leave the
    # temporary file behind (netCDF's append mode would make it anew for a late write).
    import time

    import xarray.backends.netCDF4_ as netcdf_backend

    from sphex.xr import fields

    analyse, store = fields._analyze_block, netcdf_backend.NetCDF4ArrayWrapper.__setitem__

    def late_failure(values, pos=None, **kw):
        if not np.isfinite(values).all():
            time.sleep(0.5)
        return analyse(values, pos, **kw)

    def slow_store(self, key, value):
        if np.ndim(value) == 3:  # the coefficient blocks
            time.sleep(1.0)
        return store(self, key, value)

    monkeypatch.setattr(fields, "_analyze_block", late_failure)
    monkeypatch.setattr(netcdf_backend.NetCDF4ArrayWrapper, "__setitem__", slow_store)
    holes = series.copy()
    holes[11, 3, 3] = np.nan
    _write_series(holes, tmp_path / "holes.nc")
    with pytest.raises(ValueError, match="missing value"):
        streaming.stream_analyze(tmp_path / "holes.nc", "surface_temp", tmp_path / "c.nc",
                                 chunks="time=4", progress=False)
    time.sleep(1.5)  # a write that was not waited for would have happened by now
    assert sorted(p.name for p in tmp_path.iterdir()) == ["holes.nc"]


def test_parse_chunks():
    assert streaming.parse_chunks("time=64") == {"time": 64}
    assert streaming.parse_chunks(" time=8, member=1 ") == {"time": 8, "member": 1}
    for bad in ("time", "time=0", "time=x", "=3", "time=-2"):
        with pytest.raises(ValueError, match="DIM=N"):
            streaming.parse_chunks(bad)


def test_progress_lines_in_logs_and_a_bar_on_terminals():
    log = io.StringIO()
    rep = streaming._ProgressReporter(200, "sphex analyze", stream=log, after=0.0)
    for f in np.linspace(0, 1, 41):
        rep.fraction(float(f))
    rep.close()
    lines = log.getvalue().splitlines()
    assert lines[0] == "sphex analyze: 0/200 fields (0 %), " + lines[0].split(", ")[-1]
    assert lines[-1].startswith("sphex analyze: 200/200 fields (100 %)")
    assert len(lines) == 11  # one line per tenth

    class Tty(io.StringIO):
        def isatty(self) -> bool:
            return True

    term = Tty()
    rep = streaming._ProgressReporter(10, "x", stream=term, after=0.0)
    rep.fraction(1.0)
    rep.close()
    assert term.getvalue().startswith("\rx |" + "=" * 28 + "| 10/10 fields")
    assert term.getvalue().endswith("\n")
    quiet = io.StringIO()
    for stream in (quiet, Tty()):  # a run shorter than two seconds shows nothing
        rep = streaming._ProgressReporter(10, "x", stream=stream)
        rep.fraction(0.5)
        rep.fraction(1.0)
        rep.close()
        assert stream.getvalue() == ""


def test_local_cluster_gives_the_same_results(series, tmp_path, monkeypatch):
    distributed = pytest.importorskip("distributed")
    src = tmp_path / "series.nc"
    _write_series(series, src)
    with xr.open_dataset(src) as ds:
        eager_in = ds["surface_temp"].load()
    ref = sxr.analyze(eager_in)
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            # functions, grid descriptions and results travel to worker processes and back
            got = sxr.analyze(eager_in.chunk({"time": 3})).compute()
            back = sxr.synthesize(ref.chunk({"time": 4}), like=series).compute()
            # thread rule on workers: the nanny's OMP_NUM_THREADS hint, else cores per thread
            hints = client.run(os.getenv, "OMP_NUM_THREADS")
            probe = scaleout.in_tasks(numba.get_num_threads)
            seen = client.gather([client.submit(probe, pure=False) for _ in range(4)])
            pids = set(client.run(os.getpid).values())
        res = streaming.stream_analyze(src, "surface_temp", tmp_path / "c.nc", chunks="time=5",
                                    scheduler=cluster.scheduler_address)
    assert len(pids) == 2 and os.getpid() not in pids
    for v in (sxr.COS, sxr.SIN):
        np.testing.assert_allclose(got[v].values, ref[v].values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(back.values, eager_in.values, rtol=0, atol=1e-5)  # float32 input
    hint = {h for h in hints.values()}
    assert len(hint) == 1
    h = hint.pop()
    want = int(h) if h else scaleout.cpu_count()
    assert set(seen) == {max(1, min(want, numba.config.NUMBA_NUM_THREADS))}
    assert res.scheduler == cluster.scheduler_address and res.chunks == 3
    streamed = sxr.open_coefficients(tmp_path / "c.nc")
    for v in (sxr.COS, sxr.SIN):
        np.testing.assert_allclose(streamed[v].values, ref[v].values, rtol=0, atol=1e-12)
    monkeypatch.setattr(streaming, "CONNECT_TIMEOUT", "1s")
    with pytest.raises(ValueError, match="cannot reach a dask scheduler"):
        streaming.stream_analyze(src, "surface_temp", tmp_path / "d.nc",
                              scheduler="tcp://127.0.0.1:9")
    assert not (tmp_path / "d.nc").exists()
