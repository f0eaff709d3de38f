"""Faults: a full disk, a folder that cannot be written, an output that is an input,
SIGKILL and SIGTERM in the middle of a write, and a bug, through the command line.

Promises checked: nothing partial is left at the target, an existing file is not
overwritten unless asked (and an input never), every failure ends in one line with
status 2 (70 for a bug, with a hint to rerun with --debug), and the hidden temporary
files a killed run could not remove are swept by the next run in that folder while
those of live runs stay.

The subprocesses that must be caught in the middle of a write get a small
``sitecustomize`` module on their path that makes each netCDF write sleep (the
``SPHEX_TEST_SLOW_WRITES`` seconds), so the tests wait for the temporary file to
appear instead of guessing times.
"""
from __future__ import annotations

import errno
import os
import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
import xarray.backends.netCDF4_ as netcdf_backend

import sphex
import sphex.xr as sxr
from sphex import cli
from sphex.xr import output, streaming

LMAX = 15
WAIT = 180.0  # seconds to wait for a subprocess to reach a point (machines are shared)

SITECUSTOMIZE = '''\
import os
import time

_delay = float(os.environ.get("SPHEX_TEST_SLOW_WRITES", "0") or 0)
if _delay:
    import xarray.backends.netCDF4_ as _backend

    _store = _backend.NetCDF4ArrayWrapper.__setitem__

    def _slow_store(self, key, value):
        time.sleep(_delay)
        return _store(self, key, value)

    _backend.NetCDF4ArrayWrapper.__setitem__ = _slow_store
if os.environ.get("SPHEX_TEST_BUG"):
    import sphex.cli.inspection as _inspection

    def _broken(args):
        return None + 1  # a TypeError: stands for a bug in sphex

    _inspection.run = _broken
'''


@pytest.fixture(scope="module")
def inject(tmp_path_factory):
    d = tmp_path_factory.mktemp("inject")
    (d / "sitecustomize.py").write_text(SITECUSTOMIZE)
    return d


def environment(inject=None, **extra):
    env = dict(os.environ)
    env.pop("SPHEX_DEBUG", None)
    if inject is not None:
        env["PYTHONPATH"] = os.pathsep.join([str(inject)] + [p for p in
                                                            [env.get("PYTHONPATH")] if p])
    env.update({k: str(v) for k, v in extra.items()})
    return env


def run(*args, env=None, cwd=None):
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, env=env or environment(), cwd=cwd,
                          timeout=600)


def start(*args, env):
    return subprocess.Popen([sys.executable, "-m", "sphex.cli", *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def partials(folder: Path) -> list[Path]:
    return sorted(p for p in folder.iterdir() if p.name.endswith(".sphex-partial"))


def wait_for_partial(folder: Path, proc: subprocess.Popen) -> Path:
    """The temporary file ``proc`` writes in ``folder``, once it has lasted a second
    (so it is the output being written, not the writability probe)."""
    pattern = re.compile(rf"\.pid{proc.pid}@")
    deadline = time.monotonic() + WAIT
    while time.monotonic() < deadline:
        assert proc.poll() is None, proc.communicate()
        found = [p for p in partials(folder) if pattern.search(p.name)]
        if found:
            time.sleep(1.0)
            if found[0].exists():
                return found[0]
        time.sleep(0.02)
    proc.kill()
    raise AssertionError("the run never started writing")


def one_line(status, err, *words, expected=2):
    assert status == expected, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for w in words:
        assert w.lower() in lines[0].lower(), (w, lines[0])


@pytest.fixture
def folder(tmp_path):
    """A folder with a series of 6 fields and a single field on a Gauss grid."""
    grid = sphex.Grid.gauss(LMAX)
    rng = np.random.default_rng(1919)
    values = 280.0 + rng.standard_normal((6,) + grid.shape)
    da = xr.DataArray(values, dims=("time", "lat", "lon"), name="t",
                      coords={"time": np.arange(6.0),
                              "lat": ("lat", grid.lat, {"units": "degrees_north"}),
                              "lon": ("lon", grid.lon, {"units": "degrees_east"})})
    da.to_dataset().to_netcdf(tmp_path / "series.nc")
    da.isel(time=0).to_dataset().to_netcdf(tmp_path / "single.nc")
    return tmp_path


# ---------------------------------------------------------------------------
# a full disk
# ---------------------------------------------------------------------------
def _full_disk_store(self, key, value):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


@pytest.mark.parametrize("command", [
    ("analyze", "series.nc", "-o", "c.nc"),                          # streamed through dask
    ("smooth", "series.nc", "--cap", "10", "-o", "c.nc"),             # written at once
], ids=["analyze", "smooth"])
def test_a_full_disk_ends_in_one_line_and_leaves_nothing(folder, capsys, monkeypatch, command):
    # a stand-in for a full disk: the writer fails with ENOSPC half way through the file
    monkeypatch.setattr(netcdf_backend.NetCDF4ArrayWrapper, "__setitem__", _full_disk_store)
    before = sorted(p.name for p in folder.iterdir())
    status = cli.main([str(folder / a) if a.endswith(".nc") else a for a in command])
    one_line(status, capsys.readouterr().err, "no space left", "free some space")
    assert sorted(p.name for p in folder.iterdir()) == before


def test_a_library_error_on_a_full_disk_is_named_as_such(folder, capsys, monkeypatch):
    # the netCDF library reports a full disk as "NetCDF: HDF error" (a RuntimeError)
    def hdf_error(self, key, value):
        raise RuntimeError("NetCDF: HDF error")

    class Full:
        f_bfree = f_bavail = 0
        f_frsize = 4096

    monkeypatch.setattr(netcdf_backend.NetCDF4ArrayWrapper, "__setitem__", hdf_error)
    monkeypatch.setattr("sphex.xr.files.os.statvfs", lambda path: Full())
    status = cli.main(["smooth", str(folder / "single.nc"), "--cap", "10",
                       "-o", str(folder / "s.nc")])
    one_line(status, capsys.readouterr().err, "no space left while writing", "s.nc", "0 bytes free")
    assert not (folder / "s.nc").exists() and not partials(folder)


def test_a_full_disk_while_writing_a_table(folder, capsys, monkeypatch):
    def savetxt(*args, **kw):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr("sphex.xr.tables.np.savetxt", savetxt)
    status = cli.main(["analyze", str(folder / "single.nc"), "-o", str(folder / "c.txt")])
    one_line(status, capsys.readouterr().err, "no space left on device", "free some space")
    assert not (folder / "c.txt").exists() and not partials(folder)


@pytest.fixture
def small_disk(tmp_path):
    """A 96 KiB tmpfs (needs the right to mount; skipped where it is missing)."""
    mount = tmp_path / "small"
    mount.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=96k", "tmpfs", str(mount)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here ({r.stderr.strip() or r.returncode})")
    try:
        yield mount
    finally:
        subprocess.run(["umount", str(mount)], capture_output=True)


def test_a_real_full_disk(folder, small_disk):
    # 12 fields to degree 31: cosine and sine coefficients of 96 KiB each, more than the
    # whole tmpfs; the netCDF library meets the full disk
    big = folder / "big.nc"
    grid = sphex.Grid.gauss(31)
    da = xr.DataArray(np.random.default_rng(2).standard_normal((12,) + grid.shape),
                      dims=("time", "lat", "lon"), name="t",
                      coords={"lat": ("lat", grid.lat, {"units": "degrees_north"}),
                              "lon": ("lon", grid.lon, {"units": "degrees_east"})})
    da.to_dataset().to_netcdf(big)
    r = run("analyze", big, "-o", small_disk / "c.nc")
    one_line(r.returncode, r.stderr, "no space left")
    assert list(small_disk.iterdir()) == []


# ---------------------------------------------------------------------------
# folders that cannot be written, outputs that are inputs
# ---------------------------------------------------------------------------
@pytest.fixture
def read_only(tmp_path):
    """A folder this process cannot write: chmod 555, or for root a read-only tmpfs."""
    d = tmp_path / "ro"
    d.mkdir()
    if os.geteuid() != 0:
        d.chmod(0o555)
        yield d
        d.chmod(0o755)
        return
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "ro,size=64k", "tmpfs", str(d)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"root ignores permissions and cannot mount here ({r.stderr.strip()})")
    try:
        yield d
    finally:
        subprocess.run(["umount", str(d)], capture_output=True)


def test_an_output_folder_that_cannot_be_written_is_refused_before_any_work(folder, read_only):
    r = run("smooth", folder / "series.nc", "--gaussian", "500", "-o", read_only / "s.nc")
    one_line(r.returncode, r.stderr, str(read_only), "choose another folder")
    assert list(read_only.iterdir()) == []


def test_the_folder_is_checked_before_the_input_is_read(folder, capsys, monkeypatch):
    def computed(*args, **kw):
        raise AssertionError("the field was read before the output folder was checked")

    def no_permission(*args, **kw):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))

    monkeypatch.setattr("sphex.cli.fields.load_variable", computed)
    monkeypatch.setattr(output.tempfile, "mkstemp", no_permission)
    status = cli.main(["smooth", str(folder / "series.nc"), "--cap", "5",
                       "-o", str(folder / "s.nc")])
    one_line(status, capsys.readouterr().err, "is not writable (permission denied)")


def test_an_output_that_is_an_input_is_refused_even_with_overwrite(folder, capsys):
    src = folder / "series.nc"
    before = src.read_bytes()
    r = run("analyze", src, "-o", src, "--overwrite")
    one_line(r.returncode, r.stderr, "is the input file", "not even with --overwrite")
    os.link(src, folder / "same.nc")  # another name of the same file
    (folder / "alias.nc").symlink_to(src)
    for args in (("smooth", src, "--cap", "5", "-o", folder / "same.nc", "--overwrite"),
                 ("regrid", folder / "single.nc", "--grid", src, "-o", folder / "alias.nc",
                  "--overwrite"),
                 ("spectrum", folder / "single.nc", "--plot", folder / "p.png",
                  "--csv", folder / "p.png")):
        status = cli.main([str(a) for a in args])
        one_line(status, capsys.readouterr().err, "same file" if "spectrum" in args else "input")
    assert src.read_bytes() == before and not (folder / "p.png").exists()
    with pytest.raises(ValueError, match="is the input file"):
        streaming.stream_analyze(src, "t", folder / "same.nc", overwrite=True, progress=False)
    with xr.open_dataset(src) as lazy:
        with pytest.raises(ValueError, match="is the input file"):
            sxr.write_dataset(lazy.chunk(), src, overwrite=True)
    assert src.read_bytes() == before


# ---------------------------------------------------------------------------
# kill -9 and SIGTERM in the middle of a write
# ---------------------------------------------------------------------------
def _dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_kill_9_leaves_no_output_and_the_next_run_sweeps_its_temporary_file(folder, inject):
    out = folder / "c.nc"
    proc = start("analyze", folder / "series.nc", "--chunks", "time=1", "-o", out,
                 env=environment(inject, SPHEX_TEST_SLOW_WRITES=1.0))
    stale = wait_for_partial(folder, proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=WAIT)
    assert not out.exists() and stale.exists()  # a killed process cannot clean up
    host = re.sub(r"[^A-Za-z0-9_-]", "_", socket.gethostname())[:40]
    keep = [folder / f".x.nc.pid{os.getpid()}@{host}.abcd1234.sphex-partial",  # a live run's
            folder / f".x.nc.pid{_dead_pid()}@another-host.abcd1234.sphex-partial",
            folder / ".x.nc.abcd1234.sphex-partial",                          # older naming
            folder / "notes.sphex-partial"]
    for p in keep:
        p.write_bytes(b"someone's bytes")
    gone = folder / f".y.nc.pid{_dead_pid()}@{host}.abcd1234.sphex-partial"
    gone.write_bytes(b"left by a dead run")
    r = run("analyze", folder / "single.nc", "-o", folder / "other.nc")
    assert r.returncode == 0, r.stderr
    assert not stale.exists() and not gone.exists()
    assert all(p.read_bytes() == b"someone's bytes" for p in keep)
    assert not out.exists() and (folder / "other.nc").exists()


@pytest.mark.parametrize("command,sig", [
    (("analyze", "series.nc", "--chunks", "time=1"), signal.SIGTERM),   # dask's threads write
    (("smooth", "series.nc", "--cap", "10"), signal.SIGTERM),            # the main thread writes
    (("analyze", "series.nc", "--chunks", "time=2"), signal.SIGINT),
], ids=["analyze-term", "smooth-term", "analyze-int"])
def test_sigterm_and_sigint_leave_nothing_and_nothing_reappears(folder, inject, command, sig):
    out = folder / "c.nc"
    keep = folder / "keep.nc"
    keep.write_bytes(b"precious")
    args = [folder / a if a.endswith(".nc") else a for a in command]
    for target, extra in ((out, ()), (keep, ("--overwrite",))):
        proc = start(*args, "-o", target, *extra,
                     env=environment(inject, SPHEX_TEST_SLOW_WRITES=0.7))
        wait_for_partial(folder, proc)
        proc.send_signal(sig)
        _, err = proc.communicate(timeout=WAIT)
        one_line(proc.returncode, err, "interrupted; no output written", expected=130)
        for _ in range(2):  # writes still under way would make the file anew by now
            assert not partials(folder) and not out.exists()
            assert keep.read_bytes() == b"precious"
            time.sleep(1.5)


# ---------------------------------------------------------------------------
# exit statuses: a bug, memory, permissions
# ---------------------------------------------------------------------------
def test_a_bug_ends_in_one_line_with_its_own_status_and_debug_shows_the_traceback(folder,
                                                                                   inject):
    env = environment(inject, SPHEX_TEST_BUG=1)
    r = run("inspect", folder / "single.nc", env=env)
    one_line(r.returncode, r.stderr, "internal error: TypeError", "bug in sphex", "--debug",
             "SPHEX_DEBUG=1", expected=70)
    for args, extra in ((("--debug", "inspect"), {}), (("inspect", "--debug"), {}),
                        (("inspect",), {"SPHEX_DEBUG": "1"})):
        r = run(*args, folder / "single.nc", env=dict(env, **extra))
        assert r.returncode == 1 and "Traceback" in r.stderr and "TypeError" in r.stderr


def test_memory_and_permission_failures_are_user_errors(folder, capsys, monkeypatch):
    def no_memory(*args, **kw):
        raise MemoryError

    monkeypatch.setattr("sphex.cli.fields.load_variable", no_memory)
    status = cli.main(["smooth", str(folder / "series.nc"), "--cap", "5",
                       "-o", str(folder / "s.nc")])
    one_line(status, capsys.readouterr().err, "ran out of memory", "--lmax")
    monkeypatch.undo()

    def unreadable(path, **kw):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(path))

    monkeypatch.setattr("sphex.xr.files.xr.open_dataset", unreadable)
    status = cli.main(["inspect", str(folder / "single.nc")])
    one_line(status, capsys.readouterr().err, "cannot read", "permission denied")
    assert sorted(p.name for p in folder.iterdir()) == ["series.nc", "single.nc"]


def test_a_failed_distributed_run_stops_its_writers_before_removing_the_file(folder, monkeypatch):
    # workers in this process (so the monkeypatches reach them): the blocks without gaps
    # are written slowly, the block with a gap fails meanwhile; the tasks still writing
    # are cancelled and waited for before the temporary file goes (netCDF's append mode
    # would make it anew for a late write), so when the call returns none runs any more
    distributed = pytest.importorskip("distributed")
    from sphex.xr import fields

    analyse, store = fields._analyze_block, netcdf_backend.NetCDF4ArrayWrapper.__setitem__
    writes = []  # (start, end) of each coefficient block's write

    def late_failure(values, pos=None, **kw):
        if not np.isfinite(values).all():
            time.sleep(0.5)
        return analyse(values, pos, **kw)

    def slow_store(self, key, value):
        if np.ndim(value) != 3:  # not a coefficient block
            return store(self, key, value)
        began = time.monotonic()
        try:
            time.sleep(1.0)
            return store(self, key, value)
        finally:
            writes.append((began, time.monotonic()))

    with xr.open_dataset(folder / "series.nc") as ds:
        holes = ds.load()
    holes["t"][5, 3, 3] = np.nan
    holes.to_netcdf(folder / "holes.nc")
    monkeypatch.setattr(fields, "_analyze_block", late_failure)
    monkeypatch.setattr(netcdf_backend.NetCDF4ArrayWrapper, "__setitem__", slow_store)
    with distributed.LocalCluster(n_workers=1, processes=False, threads_per_worker=2,
                                  dashboard_address=None) as cluster:
        with pytest.raises(ValueError, match="missing value"):
            streaming.stream_analyze(folder / "holes.nc", "t", folder / "c.nc",
                                     chunks="time=2", scheduler=cluster.scheduler_address,
                                     progress=False)
        returned = time.monotonic()
        time.sleep(2.0)  # a write that was not waited for would have happened by now
    assert writes and all(end <= returned for _, end in writes), (writes, returned)
    assert sorted(p.name for p in folder.iterdir()) == ["holes.nc", "series.nc", "single.nc"]
