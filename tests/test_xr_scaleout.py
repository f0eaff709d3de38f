"""Checks for running the adapters on dask (sphex.xr.scaleout): laziness, whole-field
chunks, the thread rule for numba inside dask tasks."""
from __future__ import annotations

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
from _sample_fields import SERIES_LMAX  # noqa: E402
from sphex.xr import fields, scaleout  # noqa: E402



class _Count(Callback):
    """Counts tasks executed by dask's local schedulers while active."""

    def __init__(self) -> None:
        super().__init__()
        self.n = 0

    def _posttask(self, key, result, dsk, state, worker_id) -> None:
        self.n += 1


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


def test_space_chunks_are_merged_with_a_warning_that_shows_the_call(series):
    split = series.chunk({"time": 4, "lat": 5})
    with pytest.warns(scaleout.SplitFieldWarning) as rec:
        whole = scaleout.whole_fields(split, ("lat", "lon"))
    msg = str(rec[0].message)
    assert "'lat' (4 chunks)" in msg
    assert "da.chunk({'lat': -1, 'lon': -1})" in msg
    assert whole.chunks == ((4, 4, 4), (series.sizes["lat"],), (series.sizes["lon"],))
    np.testing.assert_array_equal(whole.values, series.values)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # already whole: no warning, same object back
        assert scaleout.whole_fields(whole, ("lat", "lon")) is whole
        assert scaleout.whole_fields(series, ("lat", "lon")) is series


def test_space_chunks_raise_when_asked_or_when_merging_is_too_big(series):
    split = series.chunk({"lon": 8})
    with pytest.raises(ValueError, match=re.escape("rechunk first with da.chunk({'lat': -1, 'lon': -1})")):
        scaleout.whole_fields(split, ("lat", "lon"), split="raise")
    with pytest.raises(ValueError, match="'merge' or 'raise'"):
        scaleout.whole_fields(split, ("lat", "lon"), split="later")
    field = series.sizes["lat"] * series.sizes["lon"] * 8
    with pytest.raises(ValueError, match="merging them would make chunks of") as exc:
        scaleout.whole_fields(split, ("lat", "lon"), limit_bytes=3 * field)
    call = re.search(r"da\.chunk\((\{.*\})\)", str(exc.value)).group(1)
    spec = eval(call)  # the suggested call, run as written
    assert spec["lat"] == -1 and spec["lon"] == -1 and spec["time"] >= 1
    fixed = split.chunk(spec)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert scaleout.whole_fields(fixed, ("lat", "lon")) is fixed


def test_coefficient_datasets_need_whole_degree_and_order(series):
    ds = sxr.analyze(series).chunk({"time": 6, "degree": 4})
    with pytest.warns(scaleout.SplitFieldWarning, match=re.escape("ds.chunk({'degree': -1, 'order': -1})")):
        whole = scaleout.whole_fields(ds, ("degree", "order"))
    assert whole[sxr.COS].chunks[1:] == ((SERIES_LMAX + 1,), (SERIES_LMAX + 1,))


def test_xr_functions_merge_space_chunks_with_the_warning(series):
    split = series.chunk({"time": 6, "lat": 8})
    with pytest.warns(scaleout.SplitFieldWarning):
        ds = sxr.analyze(split)
    ref = sxr.analyze(series)
    np.testing.assert_allclose(ds[sxr.COS].values, ref[sxr.COS].values, rtol=0, atol=1e-12)
    with pytest.warns(scaleout.SplitFieldWarning):
        sxr.synthesize(ref.chunk({"degree": 4}), like=series)
    with pytest.warns(scaleout.SplitFieldWarning):
        sxr.smooth(split, cap_deg=10.0)
    with pytest.warns(scaleout.SplitFieldWarning):
        sxr.regrid(split, "gauss:7")


def _expected(workers: int) -> int:
    return max(1, min(scaleout.cpu_count() // workers, numba.config.NUMBA_NUM_THREADS))


def _threads_in_tasks(n_tasks: int) -> list[int]:
    """numba thread counts seen inside n_tasks dask tasks (through the wrapper)."""
    probe = scaleout.in_tasks(numba.get_num_threads)
    parts = [dask.delayed(probe)(dask_key_name=f"probe-{i}") for i in range(n_tasks)]
    return list(dask.compute(*parts))


def test_thread_rule_in_dask_threads_and_the_main_thread(monkeypatch):
    monkeypatch.delenv("SPHEX_TASK_THREADS", raising=False)
    before = numba.get_num_threads()
    assert scaleout.task_threads() is None  # main thread: numba keeps every core
    assert scaleout.in_tasks(numba.get_num_threads)() == before
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
    with scaleout.thread_pool(2):
        assert dask.config.get("num_workers") == 2
        assert set(dask.compute(*plain)) == {_expected(2)}
    with scaleout.thread_pool(1):
        assert set(dask.compute(*plain)) == {_expected(1)}
    with pytest.raises(ValueError, match="1 or more"):
        with scaleout.thread_pool(-1):
            pass


def test_task_function_wraps_only_for_dask_backed_input(series):
    assert scaleout.task_function(fields._analyze_block, series) is fields._analyze_block
    assert isinstance(scaleout.task_function(fields._analyze_block, series.chunk({"time": 4})),
                      scaleout.in_tasks)
    coef = sxr.analyze(series)
    assert scaleout.task_function(fields._synthesize_block, coef) is fields._synthesize_block
    assert isinstance(scaleout.task_function(fields._synthesize_block, coef.chunk({"time": 4})),
                      scaleout.in_tasks)


def test_wrapper_pickles_and_keeps_the_name():
    w = scaleout.in_tasks(fields._analyze_block)
    back = pickle.loads(pickle.dumps(w))
    assert back.func is fields._analyze_block and back.__name__ == "_analyze_block"
    assert "in_tasks" in repr(back)
