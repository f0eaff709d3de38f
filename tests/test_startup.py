"""What a command-line call imports before it works, and the notice of a first call that
compiles the kernels.

No timings here (speed lives in the benchmark and docs/performance.md): each check
runs a fresh interpreter and looks at ``sys.modules`` afterwards, so an import of a
heavy package where it is not needed (numba for ``sphex --help``, matplotlib or
dask.distributed for ``sphex analyze``) fails a test instead of silently costing
every call a few tenths of a second again.
"""
from __future__ import annotations

import gc
import io
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import sphex
from sphex import compiling

ROOT = Path(__file__).resolve().parent.parent
HEAVY = ("numpy", "numba", "scipy", "xarray", "netCDF4", "dask", "dask.array", "distributed",
         "matplotlib", "pandas", "importlib.metadata")

PROBE = """\
import runpy, sys
sys.argv = ["sphex"] + sys.argv[1:]
try:
    runpy.run_module("sphex", run_name="__main__")
except SystemExit:
    pass
print("@@", " ".join(sorted(m for m in {heavy!r} if m in sys.modules)), file=sys.stderr)
"""


def reported_by(code: str, *args, cwd=None) -> list[str]:
    """The words a fresh interpreter running ``code`` printed after ``@@`` on stderr."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    r = subprocess.run([sys.executable, "-c", code, *map(str, args)], capture_output=True,
                       text=True, env=env, cwd=cwd, timeout=300)
    marker = [ln for ln in r.stderr.splitlines() if ln.startswith("@@")]
    assert marker, r.stderr
    return marker[-1][2:].split()


def loaded_by(code: str, *args, cwd=None) -> set[str]:
    """The heavy packages a fresh interpreter has imported after running ``code``."""
    return set(reported_by(code, *args, cwd=cwd))


def command_loads(*args, cwd=None) -> set[str]:
    return loaded_by(PROBE.format(heavy=HEAVY), *args, cwd=cwd)


def import_loads(module: str) -> set[str]:
    return loaded_by(f"import sys, {module}\n"
                     f"print('@@', ' '.join(m for m in {HEAVY!r} if m in sys.modules), "
                     "file=sys.stderr)")


@pytest.fixture(scope="module")
def small_file(tmp_path_factory):
    """A 16 x 32 field on the equiangular cell-centre grid (no Gauss nodes to compute)."""
    path = tmp_path_factory.mktemp("startup") / "small.nc"
    g = sphex.Grid.equiangular(16, 32, "cells")
    xr.Dataset({"t": (("lat", "lon"), np.random.default_rng(3).standard_normal(g.shape))},
               coords={"lat": g.lat, "lon": g.lon}).to_netcdf(path)
    return path


def test_help_and_the_parser_load_no_numeric_package():
    # (nor the package metadata: the version is read when --version asks for it)
    assert command_loads("--help") == set()
    assert command_loads("analyze", "--help") == set()
    assert import_loads("sphex.cli.parser") == set()
    assert import_loads("sphex") == set()


def test_the_adapters_and_conventions_load_no_numba_nor_scipy():
    # registering the accessors and the model reader needs xarray, not the transforms
    assert not import_loads("sphex.xr") & {"numba", "scipy", "matplotlib", "distributed"}
    for core in ("sphex.harmonics", "sphex.legendre", "sphex.grids", "sphex.compiling"):
        assert not import_loads(core) & {"numba", "scipy", "xarray"}, core


def test_inspect_loads_no_kernels_plots_or_cluster(small_file, tmp_path):
    loaded = command_loads("inspect", small_file)
    assert {"xarray", "netCDF4"} <= loaded                     # it did read the file
    # (nor scipy: an equiangular grid is recognised by its latitudes, its weights wait)
    assert not loaded & {"numba", "scipy", "matplotlib", "distributed"}
    # a Gauss grid too: recognised from a numpy estimate, its nodes wait for a transform
    g = sphex.Grid.gauss(31)
    path = tmp_path / "gauss.nc"
    xr.Dataset({"t": (("lat", "lon"), np.ones(g.shape))},
               coords={"lat": g.lat[::-1], "lon": g.lon}).to_netcdf(path)
    loaded = command_loads("inspect", path)
    assert "xarray" in loaded and not loaded & {"numba", "scipy", "matplotlib", "distributed"}


def test_recognising_an_equiangular_grid_needs_no_fft_its_weights_do():
    code = ("import sys\nfrom sphex.grids import Grid\n"
            "g = Grid.equiangular(8, 16, 'poles')\n"
            "h = Grid.from_coords(g.lat[::-1], g.lon + 11.25)\n"
            "before = 'scipy' in sys.modules\n"
            "print('@@', before, round(h.weights.sum(), 12), 'scipy' in sys.modules, "
            "file=sys.stderr)\n")
    assert reported_by(code) == ["False", "2.0", "True"]


def test_analyze_of_a_small_file_loads_no_plots_nor_cluster(small_file, tmp_path):
    loaded = command_loads("analyze", small_file, "-o", tmp_path / "c.nc")
    assert (tmp_path / "c.nc").exists() and "numba" in loaded   # it did analyse
    # (xarray itself imports dask.array when it makes a DataArray, if dask is installed)
    assert not loaded & {"matplotlib", "distributed"}


def test_the_command_line_process_tunes_the_collector_and_freezes_at_the_end(small_file):
    # the process ends right after main() returns (sys.exit(main()) in python -m sphex and the
    # sphex script): its objects are frozen so that the interpreter's shutdown does not pass the
    # cyclic collector over xarray's, pandas' and numba's objects (gc.freeze, Python's gc docs),
    # and its start-up collects the young generation only (a callback ends that); main() called
    # with arguments from Python leaves the collector alone
    probe = ("import gc, runpy, sys\n"
             "sys.argv = ['sphex'] + sys.argv[1:]\n"
             "try:\n    runpy.run_module('sphex', run_name='__main__')\n"
             "except SystemExit as exc:\n    assert exc.code == 0, exc.code\n"
             "ours = [c for c in gc.callbacks if c.__module__ == 'sphex.cli.parser']\n"
             "print('@@', 'frozen', gc.get_freeze_count(), 'callbacks', len(ours), "
             "file=sys.stderr)\n")
    words = reported_by(probe, "inspect", small_file)
    assert words[0::2] == ["frozen", "callbacks"]
    assert int(words[1]) > 10000 and words[3] == "1"
    in_python = ("import gc, sys\nfrom sphex.cli import main\n"
                 "assert main(['inspect', sys.argv[1]]) == 0\n"
                 "ours = [c for c in gc.callbacks if c.__module__ == 'sphex.cli.parser']\n"
                 "print('@@', 'frozen', gc.get_freeze_count(), 'callbacks', len(ours), "
                 "file=sys.stderr)\n")
    assert reported_by(in_python, small_file) == ["frozen", "0", "callbacks", "0"]


def test_start_up_collects_the_young_generation_only_then_as_before():
    from sphex.cli import parser

    before, callbacks = gc.get_threshold(), list(gc.callbacks)
    try:
        parser._collect_young_only_at_start(0.5)
        held = (before[0], 1 << 30, 1 << 30)
        assert gc.get_threshold() == held
        gc.collect(0)                       # within the window: still held
        assert gc.get_threshold() == held
        time.sleep(0.6)
        gc.collect(0)                       # the first collection after it restores the thresholds
        assert gc.get_threshold() == before
    finally:
        gc.set_threshold(*before)
        gc.callbacks[:] = callbacks


def test_a_small_file_analysed_in_memory_writes_what_the_streamed_run_writes(small_file,
                                                                            tmp_path):
    # one chunk: analysed in memory; the same chunk streamed through dask writes the same file
    import sphex.xr as sxr
    from sphex.xr.streaming import stream_analyze, write_lazily

    two = tmp_path / "two.nc"
    with xr.open_dataset(small_file) as f:
        xr.concat([f["t"], 2 * f["t"]], dim="time").to_dataset().to_netcdf(two)
    r = stream_analyze(two, "t", tmp_path / "whole.nc", progress=False, history="h")
    assert r.chunks == 1 and r.fields == 2
    with xr.open_dataset(two, chunks={"time": 2}) as f:
        lazy = sxr.analyze(f["t"])
        assert lazy["cos_coef"].chunks is not None
        lazy.attrs["history"] = "h"
        write_lazily(lazy, tmp_path / "streamed.nc", progress=False)
    with xr.open_dataset(tmp_path / "whole.nc") as a, \
            xr.open_dataset(tmp_path / "streamed.nc") as b:
        assert a.identical(b)
        np.testing.assert_allclose(a["cos_coef"].isel(time=1), 2 * a["cos_coef"].isel(time=0),
                                   rtol=0, atol=1e-15)


# --------------------------------------------------------------------------------------------
# the notice of a first call that compiles
# --------------------------------------------------------------------------------------------
class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.fixture
def empty_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "numba"))
    monkeypatch.delenv("SPHEX_COMPILE_NOTICE", raising=False)
    monkeypatch.setattr(compiling, "_told", set())
    return tmp_path / "numba"


def test_notice_on_a_terminal_once_per_kernel_module(empty_cache):
    out = Terminal()
    assert compiling.missing_kernels(("scalar", "vector")) == ["scalar", "vector"]
    assert compiling.compile_notice("sphex demo", ("scalar", "vector"), out)
    text = out.getvalue()
    assert text.count("\n") == 1 and text.startswith("sphex demo: compiling the numeric kernels")
    assert "scalar transforms, wind and current transforms, about 17 s" in text
    assert not compiling.compile_notice("sphex demo", ("scalar",), out)   # said already
    assert compiling.compile_notice("sphex demo", ("gauss",), out)        # a new module


def test_no_notice_off_a_terminal_nor_with_the_kernels_cached(empty_cache, monkeypatch):
    assert not compiling.compile_notice("sphex analyze", ("scalar",), io.StringIO())
    monkeypatch.setenv("SPHEX_COMPILE_NOTICE", "0")
    assert not compiling.compile_notice("sphex analyze", ("scalar",), Terminal())
    monkeypatch.setenv("SPHEX_COMPILE_NOTICE", "1")
    forced = io.StringIO()
    assert compiling.compile_notice("sphex analyze", ("scalar",), forced)
    assert "scalar transforms, about 7 s" in forced.getvalue()
    # index files newer than the sources stand for cached kernels; older ones do not
    (folder,) = compiling.kernel_cache_directories()
    folder.mkdir(parents=True)
    index = folder / "scalar.analysis_kernel-30.py311.nbi"
    index.write_bytes(b"")
    assert compiling.missing_kernels(("scalar",)) == []
    os.utime(index, (1.0, 1.0))
    assert compiling.missing_kernels(("scalar",)) == ["scalar"]


def test_cache_older_than_an_inlined_source_or_partly_stale_counts_as_missing(empty_cache, tmp_path):
    # numba's cache keys a kernel on its own module only (common practice of numba's
    # caching): an edit of recursion.py, which the scalar kernels inline, or an index file
    # left from an earlier version beside fresh ones must still count as not prepared
    kernels = tmp_path / "kernels"
    kernels.mkdir()
    for name in ("scalar.py", "recursion.py"):
        (kernels / name).write_text("")
        os.utime(kernels / name, (100.0, 100.0))
    (folder,) = compiling.kernel_cache_directories(kernels)
    folder.mkdir(parents=True)
    fresh = folder / "scalar.synthesis_single-40.py311.nbi"
    fresh.write_bytes(b"")
    os.utime(fresh, (200.0, 200.0))
    assert compiling.missing_kernels(("scalar",), kernels) == []
    os.utime(kernels / "recursion.py", (300.0, 300.0))      # the inlined source edited later
    assert compiling.missing_kernels(("scalar",), kernels) == ["scalar"]
    os.utime(kernels / "recursion.py", (100.0, 100.0))
    stale = folder / "scalar.analysis_single-30.py311.nbi"   # one index from before the edit
    stale.write_bytes(b"")
    os.utime(stale, (50.0, 50.0))
    assert compiling.missing_kernels(("scalar",), kernels) == ["scalar"]


# --------------------------------------------------------------------------------------------
# compiling kernel groups in a second process
# --------------------------------------------------------------------------------------------
HIT_COUNTS = """
import json
from sphex.kernels import scalar, vector
print("@@", json.dumps({{f.py_func.__name__: [sum(f.stats.cache_hits.values()),
                                              sum(f.stats.cache_misses.values())]
                        for f in ({kernels})}}))
"""
GROUP_KERNELS = ("vector.vector_analysis_kernel, vector.vector_synthesis_kernel, "
                 "vector.flow_to_sequences, vector.sequences_to_flow, scalar.synthesis_batch")


def hit_counts(code: str, env: dict, cwd=None) -> dict[str, list[int]]:
    """Cache hits and misses of the kernel groups' functions after ``code`` ran in a fresh
    interpreter (numba's dispatcher statistics)."""
    r = subprocess.run([sys.executable, "-c", code + HIT_COUNTS.format(kernels=GROUP_KERNELS)],
                       capture_output=True, text=True, env=env, cwd=cwd, timeout=900)
    marker = [ln for ln in r.stdout.splitlines() if ln.startswith("@@")]
    assert r.returncode == 0 and marker, r.stderr[-3000:]
    import json

    return json.loads(marker[-1][2:])


@pytest.fixture(scope="module")
def groups_compiled_beside(tmp_path_factory):
    """A numba cache filled only by the helper process (``python -m sphex.compiling``)."""
    cache = tmp_path_factory.mktemp("beside") / "numba"
    env = dict(os.environ, NUMBA_CACHE_DIR=str(cache), SPHEX_COMPILE_BESIDE="0",
               PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    # as on a fresh command line, each process decides numba's target itself (this test
    # process has decided it already and would hand its choice down)
    for name in ("NUMBA_CPU_NAME", "NUMBA_CPU_FEATURES"):
        env.pop(name, None)
    r = subprocess.run([sys.executable, "-m", "sphex.compiling", "vector", "batch-synthesis"],
                       capture_output=True, text=True, env=env, timeout=900)
    assert r.returncode == 0, r.stderr[-3000:]
    assert r.stdout.splitlines() == ["compiled vector", "compiled batch-synthesis"]
    return env


def test_what_the_helper_compiles_serves_real_calls_on_every_layout(groups_compiled_beside):
    # numba's cache serves a later process only a form compiled for the same argument
    # types and target (common practice of numba's caching); the helper's tiny calls on a
    # small equiangular grid must hand the kernels what real calls on every layout do
    code = """
import numpy as np, sphex
from sphex.vector_transform import analyze_vector, synthesize_vector
rng = np.random.default_rng(5)
for g in (sphex.Grid.gauss(21), sphex.Grid.equiangular(41, 80, "poles"),
          sphex.Grid.equiangular(40, 80, "north"), sphex.Grid.equiangular(40, 80, "cells")):
    u, v = rng.standard_normal((2, 3) + g.shape)
    p, c = analyze_vector(u, v, g, 13)
    synthesize_vector(p, c, g)
    synthesize_vector(sphex.Harmonics(p.coef[0]), sphex.Harmonics(c.coef[0]), g)
    h = sphex.Harmonics(np.tril(rng.standard_normal((3, 14, 14))), norm="schmidt")
    sphex.synthesize(h, g)
"""
    counts = hit_counts(code, groups_compiled_beside)
    for name, (hits, misses) in counts.items():
        assert misses == 0 and hits >= 1, (name, hits, misses)


def test_the_demo_waits_for_its_helper_instead_of_compiling_twice(groups_compiled_beside, tmp_path):
    # a first demo run: the command line starts the helper, the demo waits for it before
    # the winds, so its own process loads every kernel of the groups from the cache
    env = dict(groups_compiled_beside, NUMBA_CACHE_DIR=str(tmp_path / "numba"))
    env.pop("SPHEX_COMPILE_BESIDE")
    code = ("import contextlib, io\nfrom sphex.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    assert main(['demo', '--out', {str(tmp_path / 'out')!r}]) == 0\n")
    counts = hit_counts(code, env)
    for name, (hits, misses) in counts.items():
        assert misses == 0 and hits >= 1, (name, hits, misses)


class _Helper:
    """A stand-in helper process that prints the given lines, then sleeps."""

    def __init__(self, lines: list[str], sleep: float = 0.0):
        code = f"import sys, time\nfor ln in {lines!r}: print(ln, flush=True)\ntime.sleep({sleep})"
        self.process = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                                        text=True)


def test_waiting_for_groups_of_a_helper_that_ends_or_runs_on():
    done = compiling.BesideCompilation(_Helper(["compiled vector"]).process, ("vector", "single"))
    assert done.wait("vector")
    assert not done.wait("single")            # ended without compiling it: compile it yourself
    assert not done.wait("batch-analysis")    # never asked of it
    done.close()
    assert done.process.returncode == 0
    slow = compiling.BesideCompilation(_Helper(["compiled single"], 60).process, ("single",))
    assert slow.wait("single")
    slow.stop()                                # still sleeping: ended at once
    assert slow.process.returncode not in (None, 0)


def test_no_helper_when_cached_switched_off_or_asked_for_an_unknown_group(empty_cache, monkeypatch):
    with pytest.raises(ValueError, match="unknown kernel group 'scalars'.*single"):
        compiling.compile_beside(["scalars"])
    monkeypatch.setenv("SPHEX_COMPILE_BESIDE", "0")
    assert compiling.compile_beside(["vector"]) is None
    monkeypatch.delenv("SPHEX_COMPILE_BESIDE")
    (folder,) = compiling.kernel_cache_directories()
    folder.mkdir(parents=True)
    for name in compiling.KERNEL_GROUPS["vector"][1][:-1]:
        (folder / f"vector.{name}-10.py311.nbi").write_bytes(b"")
    assert compiling._group_missing("vector")          # one function of the group lacks
    (folder / "vector.sequences_to_flow-600.py311.nbi").write_bytes(b"")
    assert not compiling._group_missing("vector")
    assert compiling.compile_beside(["vector"]) is None


def test_a_run_asking_again_for_its_groups_gets_the_helper_already_started(empty_cache,
                                                                          monkeypatch):
    # the command line starts the helper for the demo's groups, the demo asks again: one
    # helper only, also when one of the groups was cached and so left out of its work
    started = []
    real_popen = subprocess.Popen

    def fake_popen(args, **kwargs):
        started.append(args[3:])
        code = f"import time\nfor g in {args[3:]!r}: print('compiled', g, flush=True)\ntime.sleep(30)"
        return real_popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)

    monkeypatch.setattr(compiling.subprocess, "Popen", fake_popen)
    monkeypatch.setattr(compiling, "_beside", None)
    monkeypatch.setattr(compiling, "_group_missing", lambda g: g == "vector")
    first = compiling.compile_beside(("vector", "batch-synthesis"))
    again = compiling.compile_beside(("vector", "batch-synthesis"))
    assert again is first and started == [["vector"]]
    assert first.wait("vector") and not first.wait("batch-synthesis")
    first.stop()
    third = compiling.compile_beside(("vector",))          # that helper has ended: a new one
    assert third is not first and started == [["vector"], ["vector"]]
    third.stop()
