"""Checks for running sphex on dask: laziness, whole-field chunks, the thread rule,
a distributed cluster, and streaming a series through a netCDF file."""
from __future__ import annotations

import inspect
import io
import os
import pickle
import re
import warnings

import numpy as np
import pytest

dask = pytest.importorskip("dask")
xr = pytest.importorskip("xarray")
netCDF4 = pytest.importorskip("netCDF4")

import numba  # noqa: E402
from dask.callbacks import Callback  # noqa: E402

import sphex  # noqa: E402
import sphex.xr as sxr  # noqa: E402
from sphex import _scale  # noqa: E402
from sphex._io import OutputExistsError  # noqa: E402

LMAX = 15


def _band_limited(rng: np.random.Generator, n: int, lmax: int, grid: sphex.Grid) -> np.ndarray:
    """n random fields band-limited to lmax, synthesised on grid (analysis is exact)."""
    coef = rng.standard_normal((n, lmax + 1, lmax + 1)) + 1j * rng.standard_normal((n, lmax + 1, lmax + 1))
    coef = np.tril(coef)
    coef[..., 0] = coef[..., 0].real
    return sphex.synthesize(sphex.Harmonics(coef), grid)


@pytest.fixture
def series(rng) -> xr.DataArray:
    """Twelve daily fields on a Gauss grid, as a CF-style DataArray."""
    g = sphex.Grid.gauss(LMAX)
    vals = _band_limited(rng, 12, LMAX, g)
    time = np.arange("2031-03-01", "2031-03-13", dtype="datetime64[D]").astype("datetime64[ns]")
    return xr.DataArray(vals, dims=("time", "lat", "lon"),
                        coords={"time": time, "lat": g.lat, "lon": g.lon},
                        name="surface_temp", attrs={"units": "K", "long_name": "synthetic field"})


class _Count(Callback):
    """Counts tasks executed by dask's local schedulers while active."""

    def __init__(self) -> None:
        super().__init__()
        self.n = 0

    def _posttask(self, key, result, dsk, state, worker_id) -> None:
        self.n += 1


# ----------------------------------------------------------------------------
# laziness
# ----------------------------------------------------------------------------
def test_lazy_results_equal_eager_and_nothing_runs_before_compute(series):
    lazy_in = series.chunk({"time": 5})
    target = sphex.Grid.equiangular(33, 64, "poles")
    with _Count() as count:
        ana = sxr.analyze(lazy_in)
        syn = sxr.synthesize(ana, like=series)
        smo = sxr.smooth(lazy_in, cap_deg=20.0)
        reg = sxr.regrid(lazy_in, target)
        assert count.n == 0  # building the four results computed nothing
        assert all(x.chunks is not None for x in (ana[sxr.COS], syn, smo, reg))
        got = [ana[sxr.COS].compute(), ana[sxr.SIN].compute(), syn.compute(), smo.compute(),
               reg.compute()]
        assert count.n > 0
    ref_ana = sxr.analyze(series)
    ref = [ref_ana[sxr.COS], ref_ana[sxr.SIN], sxr.synthesize(ref_ana, like=series),
           sxr.smooth(series, cap_deg=20.0), sxr.regrid(series, target)]
    for g, r in zip(got, ref):
        assert g.dims == r.dims
        scale = float(np.abs(r.values).max())
        assert float(np.abs(g.values - r.values).max()) <= 1e-12 * scale
    # the band-limited input comes back through analysis and synthesis
    assert float(np.abs(got[2].values - series.values).max()) < 1e-12 * float(np.abs(series).max())


# ----------------------------------------------------------------------------
# whole fields in every chunk
# ----------------------------------------------------------------------------
def test_space_chunks_are_merged_with_a_warning_that_shows_the_call(series):
    split = series.chunk({"time": 4, "lat": 5})
    with pytest.warns(_scale.SplitFieldWarning) as rec:
        whole = _scale.whole_fields(split, ("lat", "lon"))
    msg = str(rec[0].message)
    assert "'lat' (4 chunks)" in msg
    assert "da.chunk({'lat': -1, 'lon': -1})" in msg
    assert whole.chunks == ((4, 4, 4), (series.sizes["lat"],), (series.sizes["lon"],))
    np.testing.assert_array_equal(whole.values, series.values)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # already whole: no warning, same object back
        assert _scale.whole_fields(whole, ("lat", "lon")) is whole
        assert _scale.whole_fields(series, ("lat", "lon")) is series


def test_space_chunks_raise_when_asked_or_when_merging_is_too_big(series):
    split = series.chunk({"lon": 8})
    with pytest.raises(ValueError, match=re.escape("rechunk first with da.chunk({'lat': -1, 'lon': -1})")):
        _scale.whole_fields(split, ("lat", "lon"), split="raise")
    with pytest.raises(ValueError, match="'merge' or 'raise'"):
        _scale.whole_fields(split, ("lat", "lon"), split="later")
    field = series.sizes["lat"] * series.sizes["lon"] * 8
    with pytest.raises(ValueError, match="merging them would make chunks of") as exc:
        _scale.whole_fields(split, ("lat", "lon"), limit_bytes=3 * field)
    call = re.search(r"da\.chunk\((\{.*\})\)", str(exc.value)).group(1)
    spec = eval(call)  # the suggested call, run as written
    assert spec["lat"] == -1 and spec["lon"] == -1 and spec["time"] >= 1
    fixed = split.chunk(spec)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert _scale.whole_fields(fixed, ("lat", "lon")) is fixed


def test_coefficient_datasets_need_whole_degree_and_order(series):
    ds = sxr.analyze(series).chunk({"time": 6, "degree": 4})
    with pytest.warns(_scale.SplitFieldWarning, match=re.escape("ds.chunk({'degree': -1, 'order': -1})")):
        whole = _scale.whole_fields(ds, ("degree", "order"))
    assert whole[sxr.COS].chunks[1:] == ((LMAX + 1,), (LMAX + 1,))


_INTEGRATED = "whole_fields" in inspect.getsource(sxr)


@pytest.mark.skipif(not _INTEGRATED, reason="sphex.xr does not call sphex._scale.whole_fields yet")
def test_xr_functions_merge_space_chunks_with_the_warning(series):
    split = series.chunk({"time": 6, "lat": 8})
    with pytest.warns(_scale.SplitFieldWarning):
        ds = sxr.analyze(split)
    ref = sxr.analyze(series)
    np.testing.assert_allclose(ds[sxr.COS].values, ref[sxr.COS].values, rtol=0, atol=1e-12)
    with pytest.warns(_scale.SplitFieldWarning):
        sxr.synthesize(ref.chunk({"degree": 4}), like=series)
    with pytest.warns(_scale.SplitFieldWarning):
        sxr.smooth(split, cap_deg=10.0)
    with pytest.warns(_scale.SplitFieldWarning):
        sxr.regrid(split, "gauss:7")


# ----------------------------------------------------------------------------
# numba threads inside dask tasks
# ----------------------------------------------------------------------------
def _expected(workers: int) -> int:
    return max(1, min(_scale.cpu_count() // workers, numba.config.NUMBA_NUM_THREADS))


def _threads_in_tasks(n_tasks: int) -> list[int]:
    """numba thread counts seen inside n_tasks dask tasks (through the wrapper)."""
    probe = _scale.in_tasks(numba.get_num_threads)
    parts = [dask.delayed(probe)(dask_key_name=f"probe-{i}") for i in range(n_tasks)]
    return list(dask.compute(*parts))


def test_thread_rule_in_dask_threads_and_the_main_thread(monkeypatch):
    monkeypatch.delenv("SPHEX_TASK_THREADS", raising=False)
    before = numba.get_num_threads()
    assert _scale.task_threads() is None  # main thread: numba keeps every core
    assert _scale.in_tasks(numba.get_num_threads)() == before
    for workers in (1, 2):
        with dask.config.set(scheduler="threads", num_workers=workers):
            assert set(_threads_in_tasks(4)) == {_expected(workers)}
    with dask.config.set(scheduler="threads", num_workers=None):  # dask's default pool
        assert set(_threads_in_tasks(2)) == {_expected(dask.system.CPU_COUNT)}
    monkeypatch.setenv("SPHEX_TASK_THREADS", "1")
    with dask.config.set(scheduler="threads", num_workers=1):
        assert set(_threads_in_tasks(2)) == {1}
    assert numba.get_num_threads() == before  # nothing leaked into the caller's thread


def test_thread_pool_sets_the_rule_for_its_threads(monkeypatch):
    monkeypatch.delenv("SPHEX_TASK_THREADS", raising=False)
    plain = [dask.delayed(numba.get_num_threads)(dask_key_name=f"plain-{i}") for i in range(3)]
    with _scale.thread_pool(2):
        assert dask.config.get("num_workers") == 2
        assert set(dask.compute(*plain)) == {_expected(2)}
    with _scale.thread_pool(1):
        assert set(dask.compute(*plain)) == {_expected(1)}
    with pytest.raises(ValueError, match="1 or more"):
        with _scale.thread_pool(-1):
            pass


def test_task_function_wraps_only_for_dask_backed_input(series):
    assert _scale.task_function(sxr._analyze_np, series) is sxr._analyze_np
    assert isinstance(_scale.task_function(sxr._analyze_np, series.chunk({"time": 4})),
                      _scale.in_tasks)
    coef = sxr.analyze(series)
    assert _scale.task_function(sxr._synth_np, coef) is sxr._synth_np
    assert isinstance(_scale.task_function(sxr._synth_np, coef.chunk({"time": 4})),
                      _scale.in_tasks)


def test_wrapper_pickles_and_keeps_the_name():
    w = _scale.in_tasks(sxr._analyze_np)
    back = pickle.loads(pickle.dumps(w))
    assert back.func is sxr._analyze_np and back.__name__ == "_analyze_np"
    assert "in_tasks" in repr(back)


# ----------------------------------------------------------------------------
# streaming a series through a netCDF file
# ----------------------------------------------------------------------------
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
    res = _scale.stream_analyze(src, "surface_temp", out, lmax=12, norm="full", chunks="time=5")
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


def test_stream_default_block_and_single_field(series, tmp_path):
    src = tmp_path / "one.nc"
    _write_series(series.isel(time=0, drop=True), src)
    res = _scale.stream_analyze(src, None, tmp_path / "c.nc")
    assert (res.fields, res.dim, res.chunks) == (1, None, 1)
    src2 = tmp_path / "all.nc"
    _write_series(series, src2)
    res2 = _scale.stream_analyze(src2, None, tmp_path / "c2.nc")
    # default block: about BLOCK_BYTES of float64 input, here more than the whole series
    assert res2.dim == "time" and res2.block == 12 and res2.chunks == 1
    per_field = series.sizes["lat"] * series.sizes["lon"] * 8
    assert _scale.default_block(per_field) == _scale.BLOCK_BYTES // per_field
    assert _scale.default_block(10 * _scale.BLOCK_BYTES) == 1


def test_stream_user_errors_leave_no_output(series, tmp_path):
    src = tmp_path / "s.nc"
    _write_series(series, src)
    out = tmp_path / "c.nc"
    out.write_text("keep me")
    with pytest.raises(OutputExistsError, match="--overwrite"):
        _scale.stream_analyze(src, "surface_temp", out)
    assert out.read_text() == "keep me"
    with pytest.raises(ValueError, match=r"has no variable 'nope' \(variables: surface_temp\)"):
        _scale.stream_analyze(src, "nope", tmp_path / "d.nc")
    with pytest.raises(ValueError, match="spatial dimension"):
        _scale.stream_analyze(src, "surface_temp", tmp_path / "d.nc", chunks={"lat": 4})
    with pytest.raises(ValueError, match="names 'member'"):
        _scale.stream_analyze(src, "surface_temp", tmp_path / "d.nc", chunks={"member": 4})
    with pytest.raises(ValueError, match="above the exact limit"):
        _scale.stream_analyze(src, "surface_temp", tmp_path / "d.nc", lmax=LMAX + 1)
    with pytest.raises(FileNotFoundError):
        _scale.stream_analyze(tmp_path / "missing.nc", "x", tmp_path / "d.nc")
    holes = series.copy()
    holes[7, 3, 3] = np.nan
    _write_series(holes, tmp_path / "holes.nc")
    # the step is named although the task that meets it sees only its own chunk of 4
    step = np.datetime_as_string(series.time.values[7], unit="D")
    with pytest.raises(ValueError, match=rf"1 missing value \(NaN or inf\), in time={step} "
                                         r"\(index 7\);"):
        _scale.stream_analyze(tmp_path / "holes.nc", "surface_temp", tmp_path / "d.nc",
                              chunks="time=4")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.nc", "holes.nc", "s.nc"]


def test_parse_chunks():
    assert _scale.parse_chunks("time=64") == {"time": 64}
    assert _scale.parse_chunks(" time=8, member=1 ") == {"time": 8, "member": 1}
    for bad in ("time", "time=0", "time=x", "=3", "time=-2"):
        with pytest.raises(ValueError, match="DIM=N"):
            _scale.parse_chunks(bad)


def test_progress_lines_in_logs_and_a_bar_on_terminals():
    log = io.StringIO()
    rep = _scale._Reporter(200, "sphex analyze", stream=log, after=0.0)
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
    rep = _scale._Reporter(10, "x", stream=term, after=0.0)
    rep.fraction(1.0)
    rep.close()
    assert term.getvalue().startswith("\rx |" + "=" * 28 + "| 10/10 fields")
    assert term.getvalue().endswith("\n")
    quiet = io.StringIO()
    for stream in (quiet, Tty()):  # a run shorter than two seconds shows nothing
        rep = _scale._Reporter(10, "x", stream=stream)
        rep.fraction(0.5)
        rep.fraction(1.0)
        rep.close()
        assert stream.getvalue() == ""


# ----------------------------------------------------------------------------
# a distributed cluster (one start for every check)
# ----------------------------------------------------------------------------
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
            probe = _scale.in_tasks(numba.get_num_threads)
            seen = client.gather([client.submit(probe, pure=False) for _ in range(4)])
            pids = set(client.run(os.getpid).values())
        res = _scale.stream_analyze(src, "surface_temp", tmp_path / "c.nc", chunks="time=5",
                                    scheduler=cluster.scheduler_address)
    assert len(pids) == 2 and os.getpid() not in pids
    for v in (sxr.COS, sxr.SIN):
        np.testing.assert_allclose(got[v].values, ref[v].values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(back.values, eager_in.values, rtol=0, atol=1e-5)  # float32 input
    hint = {h for h in hints.values()}
    assert len(hint) == 1
    h = hint.pop()
    want = int(h) if h else _scale.cpu_count()
    assert set(seen) == {max(1, min(want, numba.config.NUMBA_NUM_THREADS))}
    assert res.scheduler == cluster.scheduler_address and res.chunks == 3
    streamed = sxr.open_coefficients(tmp_path / "c.nc")
    for v in (sxr.COS, sxr.SIN):
        np.testing.assert_allclose(streamed[v].values, ref[v].values, rtol=0, atol=1e-12)
    monkeypatch.setattr(_scale, "CONNECT_TIMEOUT", "1s")
    with pytest.raises(ValueError, match="cannot reach a dask scheduler"):
        _scale.stream_analyze(src, "surface_temp", tmp_path / "d.nc",
                              scheduler="tcp://127.0.0.1:9")
    assert not (tmp_path / "d.nc").exists()


# ----------------------------------------------------------------------------
# the benchmark's measuring tools (no timing)
# ----------------------------------------------------------------------------
def test_benchmark_reads_the_child_peak_memory_not_the_parent(tmp_path):
    import sys

    from sphex import bench_scale

    ballast = np.ones(2**26)  # 512 MiB in this process: must not show in the child's figure
    small = bench_scale._peak_rss([sys.executable, "-S", "-c", "pass"])
    big = bench_scale._peak_rss([sys.executable, "-c",
                                 "import numpy as np; x = np.ones(2**25); x += 1"])  # 256 MiB
    assert ballast[-1] == 1.0
    assert small["exit"] == 0 and small["peak_rss_bytes"] < 64 * 2**20
    assert 256 * 2**20 < big["peak_rss_bytes"] < 512 * 2**20
    info = bench_scale.make_series(tmp_path / "s.nc", nbytes=3e6, lmax=31)
    assert info["fields"] == int(np.ceil(3e6 / (32 * 64 * 8)))
    assert info["file_bytes"] >= info["data_bytes"]
    with xr.open_dataset(tmp_path / "s.nc") as ds:
        assert sxr.find_grid(ds["field"]).grid == sphex.Grid.gauss(31)
        assert ds["field"].shape == (info["fields"], 32, 64)
