"""Streaming analysis of a netCDF variable far larger than memory.

:func:`stream_analyze` opens the file lazily, works through it a block of
time steps at a time on dask (local threads that follow the thread rule of
:mod:`sphex.xr.scaleout`, or a ``dask.distributed`` scheduler) and writes the
coefficient file incrementally to a temporary file that is renamed at the
end, with progress on stderr.  The output is exactly what
:func:`sphex.xr.analyze` and :func:`sphex.xr.write_dataset` make, computed
lazily.
"""
from __future__ import annotations

import math
import os
import sys
import time
from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TextIO

from sphex.xr.coords import check_lmax, choose_variable, find_grid
from sphex.xr.fields import analyze
from sphex.xr.files import netcdf_encoding, open_netcdf, write_failure, write_netcdf
from sphex.xr.output import atomic_output, check_distinct, check_output_path
from sphex.limits import check_memory, whole_number
from sphex.xr.scaleout import cpu_count, default_block, thread_pool

__all__ = ["parse_chunks", "StreamResult", "stream_analyze", "write_lazily", "CONNECT_TIMEOUT"]

#: How long to try reaching a distributed scheduler.
CONNECT_TIMEOUT = "10s"


def parse_chunks(text: str) -> dict[str, int]:
    """Read ``"time=64"`` or ``"time=64,member=1"`` (the ``--chunks`` option).

    Raises
    ------
    ValueError
        If a part is not ``NAME=N`` with a whole number N >= 1.
    """
    out: dict[str, int] = {}
    for part in str(text).split(","):
        name, sep, num = part.partition("=")
        name, num = name.strip(), num.strip()
        if not sep or not name or not num.isdigit() or int(num) < 1:
            raise ValueError(f"cannot read chunks {text!r}: write DIM=N with N >= 1, "
                             "for example time=64 (several: time=64,member=1)")
        out[name] = int(num)
    return out


@dataclass(frozen=True)
class StreamResult:
    """What :func:`stream_analyze` did (for the command line's report).

    Attributes
    ----------
    output : pathlib.Path
    variable : str
    grid : str
        One-line description of the input grid.
    lmax : int
    norm : str
    condon_shortley : bool
    fields : int
        Number of fields analysed.
    dim : str or None
        Dimension streamed over (None for a single field).
    block : int
        Fields along ``dim`` per chunk.
    chunks : int
        Number of chunks.
    scheduler : str
        ``"threads"`` or the address of the distributed scheduler.
    seconds : float
    """

    output: Path
    variable: str
    grid: str
    lmax: int
    norm: str
    condon_shortley: bool
    fields: int
    dim: str | None
    block: int
    chunks: int
    scheduler: str
    seconds: float


def _open_lazily(path: str | os.PathLike) -> Any:
    # cache=False: reading a slice never loads (and keeps) the whole variable
    return open_netcdf(path, cache=False)


def _check_chunk_memory(info: Any, lmax: int, fields_per_chunk: int, chunks: int) -> None:
    """Refuse a run whose chunks, as many at a time as there are threads, cannot fit in
    memory: each holds its fields as read and in float64, and their coefficients."""
    per_field = 16.0 * info.grid.nlat * info.grid.nlon + 32.0 * (lmax + 1) ** 2
    at_once = min(cpu_count(), chunks)
    check_memory(per_field * fields_per_chunk * at_once,
                 f"analysing {at_once} chunk{'s' if at_once != 1 else ''} of {fields_per_chunk} "
                 f"field{'s' if fields_per_chunk != 1 else ''} at a time on a {info.grid.nlat} x "
                 f"{info.grid.nlon} grid to degree {lmax}",
                 "give fewer fields per chunk (--chunks time=1), a lower lmax, or run on a "
                 "machine with more memory")


def _plan_chunks(da: Any, info: Any, chunks: Mapping[str, int] | None
                 ) -> tuple[dict[Hashable, int], str | None, int]:
    """Chunk spec for the lazy variable, the streamed dimension and its block length."""
    spatial = (info.lat_dim, info.lon_dim)
    others = [d for d in da.dims if d not in spatial]
    chunks = dict(chunks or {})
    for d in chunks:
        if d in spatial:
            raise ValueError(f"--chunks {d}={chunks[d]}: {d!r} is a spatial dimension and each "
                             "chunk must hold whole fields; chunk along "
                             f"{', '.join(map(repr, others)) or 'time'} instead")
        if d not in da.dims:
            raise ValueError(f"--chunks names {d!r}, but {da.name!r} has dimensions "
                             f"{', '.join(map(str, da.dims))}")
    spec: dict[Hashable, int] = {d: -1 for d in da.dims}
    if not others:
        return spec, None, 1
    if chunks:
        dim = next(iter(chunks))
        for d, n in chunks.items():
            spec[d] = min(whole_number(n, f"chunks {d}", 1), int(da.sizes[d]))
    else:
        dim = "time" if "time" in others else max(others, key=lambda d: da.sizes[d])
        per = 8 * math.prod(int(da.sizes[d]) for d in da.dims if d != dim)
        spec[dim] = min(default_block(per), int(da.sizes[dim]))
    return spec, str(dim), int(spec[dim]) if spec[dim] != -1 else int(da.sizes[dim])


class _ProgressReporter:
    """Progress of a run in fields: a bar on a terminal, a line every ~10 % in logs."""

    def __init__(self, total: int, label: str, stream: TextIO | None = None,
                 enabled: bool = True, after: float = 2.0) -> None:
        self.total = max(int(total), 1)
        self.label = label
        self.stream = sys.stderr if stream is None else stream
        self.enabled = enabled
        self.after = after
        self.start = time.monotonic()
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.last_decile = -1
        self.last_draw = 0.0
        self.shown = False

    def fraction(self, frac: float) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        elapsed = now - self.start
        if elapsed < self.after and not self.shown:
            return  # short runs stay quiet
        done = int(round(min(max(frac, 0.0), 1.0) * self.total))
        if self.tty:
            if now - self.last_draw < 0.2 and frac < 1.0:
                return
            self.last_draw = now
            left = elapsed * (1 - frac) / frac if frac > 0 else float("nan")
            eta = f", ~{left:.0f} s left" if frac > 0 and frac < 1 else ""
            width = 28
            full = int(round(frac * width))
            bar = "=" * full + " " * (width - full)
            self.stream.write(f"\r{self.label} |{bar}| {done}/{self.total} fields "
                              f"{elapsed:6.1f} s{eta}   ")
            self.stream.flush()
            self.shown = True
            return
        decile = int(frac * 10 + 1e-9)
        if decile > self.last_decile:
            self.last_decile = decile
            self.stream.write(f"{self.label}: {done}/{self.total} fields ({100 * frac:.0f} %), "
                              f"{elapsed:.1f} s\n")
            self.stream.flush()
            self.shown = True

    def close(self) -> None:
        if self.enabled and self.shown and self.tty:
            self.stream.write("\n")
            self.stream.flush()


class _CallbackReporter:
    """Progress handed to a ``(done, total)`` callback in fields."""

    def __init__(self, total: int, callback: Callable[[int, int], None]) -> None:
        self.total = max(int(total), 1)
        self.callback = callback
        self.done = -1

    def fraction(self, frac: float) -> None:
        done = int(min(max(frac, 0.0), 1.0) * self.total)
        if done != self.done:
            self.done = done
            self.callback(done, self.total)

    def close(self) -> None:
        pass


def _local_progress_callback(reporter: _ProgressReporter) -> Any:
    from dask.callbacks import Callback

    class _Tasks(Callback):
        def _posttask(self, key: Any, result: Any, dsk: Any, state: dict, worker_id: Any) -> None:
            done = len(state["finished"])
            total = done + sum(len(state[k]) for k in ("ready", "waiting", "running"))
            reporter.fraction(done / total if total else 1.0)

    return _Tasks()


def _task_group_names(graph_keys: Any) -> set[str]:
    names = set()
    for k in graph_keys:
        names.add(str(k[0]) if isinstance(k, tuple) else str(k))
    return names


def _count_group_tasks(dask_scheduler: Any = None, names: Sequence[str] = ()) -> tuple[int, int]:
    """Run on the scheduler: (finished, total) tasks over the named task groups."""
    done = total = 0
    for name in names:
        tg = dask_scheduler.task_groups.get(name)
        if tg is None:
            continue
        st = tg.states
        total += sum(st.values())
        done += st.get("memory", 0) + st.get("released", 0) + st.get("forgotten", 0)
    return done, total


def _run_distributed(client: Any, delayed: Any, reporter: _ProgressReporter) -> None:
    names = sorted(_task_group_names(delayed.__dask_graph__().keys()))
    fut = client.compute(delayed)
    try:
        _follow(client, fut, names, reporter)
    except BaseException:
        # the workers' tasks would go on writing into the temporary file after the caller
        # removed it: cancel them and wait until none of ours runs any more
        _stop_tasks(client, fut, names)
        raise
    reporter.fraction(1.0)


def _executing_tasks(dask_worker: Any = None, names: Sequence[str] = ()) -> int:
    """Run on a worker: how many of its running tasks belong to the named task groups."""
    state = getattr(dask_worker, "state", dask_worker)
    count = 0
    for ts in list(getattr(state, "executing", ())):
        key = getattr(ts, "key", ts)
        if (str(key[0]) if isinstance(key, tuple) else str(key)) in names:
            count += 1
    return count


#: How long to wait for the workers' tasks to stop after a failure or an interruption.
STOP_TIMEOUT = 60.0


def _stop_tasks(client: Any, fut: Any, names: Sequence[str]) -> None:
    """Cancel ``fut`` and wait (up to STOP_TIMEOUT) until no worker runs a task of ours."""
    try:
        client.cancel(fut, force=True)
    except Exception:  # noqa: BLE001 - the scheduler may be gone already
        return
    deadline = time.monotonic() + STOP_TIMEOUT
    while time.monotonic() < deadline:
        try:
            running = sum(client.run(_executing_tasks, names=list(names)).values())
        except Exception:  # noqa: BLE001 - workers gone: nothing runs any more
            return
        if not running:
            return
        time.sleep(0.2)


def _follow(client: Any, fut: Any, names: Sequence[str], reporter: _ProgressReporter) -> None:
    """Wait for ``fut``, reporting progress from the scheduler's task groups."""
    from distributed import wait

    while not fut.done():
        try:
            wait(fut, timeout=1.0)
        except Exception:  # noqa: BLE001 - distributed raises its own TimeoutError type
            pass
        if fut.done():
            break
        try:
            done, total = client.run_on_scheduler(_count_group_tasks, names=names)
            if total:
                reporter.fraction(min(done / total, 0.999))
        except Exception:  # noqa: BLE001 - progress is best effort
            pass
    fut.result()


def _connect_client(address: str) -> Any:
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - distributed is a dependency
        raise ValueError("--scheduler needs the 'distributed' package (pip install distributed)")
    try:
        return Client(address, timeout=CONNECT_TIMEOUT, set_as_default=True)
    except (OSError, TimeoutError, ValueError) as exc:
        msg = " ".join(str(exc).split())
        raise ValueError(f"cannot reach a dask scheduler at {address!r} ({msg}); start one with "
                         "'dask scheduler' and workers with 'dask worker ADDRESS', then pass "
                         "that address") from None


def stream_analyze(input: str | os.PathLike, var: str | None, output: str | os.PathLike,
                   lmax: int | None = None, norm: str = "orthonormal",
                   chunks: Mapping[str, int] | str | None = None, scheduler: str | None = None,
                   overwrite: bool = False, *, condon_shortley: bool = True,
                   radius: float | None = None,
                   progress: bool | Callable[[int, int], None] = True,
                   history: str | None = None) -> StreamResult:
    """Analyse a large netCDF variable block by block into a coefficient file.

    The input is opened lazily and chunked along one non-spatial dimension
    (``time`` by default); each chunk is read, analysed and written into the
    output while the next ones are read, so memory holds a few chunks, never
    the file.  The output has exactly the layout of :func:`sphex.xr.analyze`
    written by :func:`sphex.xr.write_dataset` (it *is* that, computed lazily),
    goes to a temporary file beside ``output`` and is renamed at the end; on
    any error or interruption no output is left.

    Parameters
    ----------
    input : path-like
        netCDF file holding a global gridded variable.
    var : str or None
        Variable name (None: the only gridded variable).
    output : path-like
        Coefficient file to write.
    lmax : int, optional
        Highest degree (default the grid's exact limit).
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
    chunks : mapping or str, optional
        Fields per chunk along a dimension, e.g. ``{"time": 64}`` or
        ``"time=64"``; default about 16 MiB of float64 input per chunk along
        ``time`` (or the longest non-spatial dimension).
    scheduler : str, optional
        Address of a running ``dask.distributed`` scheduler
        (``tcp://host:8786``); default: dask's threads in this process.  On a
        cluster, every worker must see ``input`` and the output directory at
        the same paths.
    overwrite : bool
        Replace an existing ``output``.
    condon_shortley : bool
    radius : float, optional
        Reference radius (metres) to record.
    progress : bool or callable
        True: report progress on stderr for runs longer than two seconds (a
        bar on a terminal, a line every tenth in logs); False: nothing; a
        callable: ``progress(done, total)`` is called with the fields done
        so far instead (the command line draws its own bar with it).
    history : str, optional
        The ``history`` attribute of the output (default: the equivalent
        ``sphex analyze`` command).

    Returns
    -------
    StreamResult

    Raises
    ------
    ValueError
        Unreadable file, unknown variable, no global grid, ``lmax`` too high,
        bad ``chunks``, unreachable scheduler, missing values in the data.
    FileNotFoundError, OutputExistsError
        Missing input; existing output without ``overwrite``.
    """
    t0 = time.monotonic()
    check_distinct([input], [output])
    check_output_path(output, overwrite)
    if isinstance(chunks, str):
        chunks = parse_chunks(chunks)
    path = str(input)
    src = _open_lazily(path)
    try:
        name = choose_variable(src, var, path)
        da = src[name]
        try:
            info = find_grid(da)
        except ValueError as exc:
            raise ValueError(f"{path}: {exc}") from None
        lmax = check_lmax(lmax, info.grid, False, f"variable {name!r}")
        spec, dim, block = _plan_chunks(da, info, chunks)
        sizes = {d: int(da.sizes[d]) for d in da.dims}
        blocks = {d: sizes[d] if spec[d] == -1 else int(spec[d]) for d in da.dims}
        n_fields = math.prod(sizes[d] for d in da.dims if d not in (info.lat_dim, info.lon_dim))
        n_chunks = math.prod(-(-sizes[d] // blocks[d]) for d in da.dims)
        per_chunk = math.prod(blocks[d] for d in da.dims
                              if d not in (info.lat_dim, info.lon_dim))
        _check_chunk_memory(info, lmax, per_chunk, n_chunks)
        # a file that is one chunk is analysed in memory: the same numbers, without
        # loading dask's array and distributed modules (most of a short run's time)
        whole = n_chunks == 1 and not scheduler
        ds = analyze(da if whole else da.chunk(spec), lmax, norm=norm,
                     condon_shortley=condon_shortley, radius=radius)
        ds.attrs["history"] = history or (f"sphex analyze {path} -v {name} --lmax {lmax} "
                                          f"--norm {norm}")
        if whole:
            with atomic_output(output, overwrite) as tmp:
                write_netcdf(ds, tmp, source=path, target=output)
            if callable(progress):
                progress(n_fields, n_fields)
        else:
            write_lazily(ds, output, overwrite, scheduler=scheduler, fields=n_fields,
                         label="sphex analyze", progress=progress, source=path)
    finally:
        src.close()
    return StreamResult(Path(output), name, info.describe(), int(lmax), norm,
                        bool(condon_shortley), int(n_fields), dim, int(block), int(n_chunks),
                        scheduler or "threads", time.monotonic() - t0)


def write_lazily(ds: Any, output: str | os.PathLike, overwrite: bool = False, *,
                 scheduler: str | None = None, fields: int = 1, label: str = "sphex",
                 progress: Any = True, source: str | os.PathLike | None = None) -> None:
    """Compute a lazy (dask-backed) Dataset chunk by chunk into a netCDF file, atomically.

    The streaming writer of :func:`stream_analyze`, for any lazy Dataset made
    by the adapters (the flow diagnostics of :mod:`sphex.xr.flow_streaming`
    use it too): dask's threads in this process following the thread rule of
    :mod:`sphex.xr.scaleout`, or a ``dask.distributed`` scheduler; progress
    on stderr for runs longer than two seconds; a temporary file renamed at
    the end, so an error or interruption leaves no output.

    Parameters
    ----------
    ds : xarray.Dataset
        Lazy Dataset to compute and write.
    output : path-like
    overwrite : bool
    scheduler : str, optional
        Address of a running ``dask.distributed`` scheduler.
    fields : int
        Number of fields the run does (the progress counts them).
    label : str
        Text in front of the progress display.
    progress : bool or callable
        Show sphex's own progress display on stderr, or call ``progress(done, total)``
        as fields finish (the command line's bar).
    source : path-like, optional
        The input file, named when reading it fails during the write.
    """
    if callable(progress):
        reporter: Any = _CallbackReporter(fields, progress)
    else:
        reporter = _ProgressReporter(fields, label, enabled=bool(progress))
    try:
        if scheduler:
            _write_distributed(ds, output, overwrite, scheduler, reporter,
                               None if source is None else str(source))
        else:
            # the pool is left (waiting for every task it runs) before the temporary
            # file is removed: a task still writing after a failure in another one
            # would otherwise make the file anew
            with atomic_output(output, overwrite) as tmp, thread_pool(), \
                    _local_progress_callback(reporter):
                write_netcdf(ds, tmp, source=source, target=output)
            reporter.fraction(1.0)
    finally:
        reporter.close()


def _write_distributed(ds: Any, output: str | os.PathLike, overwrite: bool, address: str,
                       reporter: _ProgressReporter, source: str | None = None) -> None:
    """Write the lazy coefficient Dataset through a distributed scheduler, atomically."""
    enc = netcdf_encoding(ds)
    client = _connect_client(address)
    try:
        with atomic_output(output, overwrite) as tmp:
            # with the client as default, xarray defines the file here, closes it after
            # each write and guards the writes of the workers with a distributed lock
            try:
                delayed = ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=enc,
                                       compute=False)
                _run_distributed(client, delayed, reporter)
            except (RuntimeError, OSError) as exc:
                raise write_failure(output, exc, source) from None
    finally:
        client.close()
