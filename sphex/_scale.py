"""Running sphex on dask: whole-field chunks, nested threads, streaming long series.

Three pieces sit here, below the xarray adapters and the command line:

- :func:`whole_fields` makes sure every dask chunk holds whole spatial fields
  (all latitudes and longitudes, or all degrees and orders).  A field split
  across chunks is merged with a :class:`SplitFieldWarning` when the merged
  chunks stay small, and refused with a ``ValueError`` that shows the
  ``.chunk(...)`` call to make otherwise.
- :func:`task_threads` / :func:`in_tasks` set how many numba threads one dask
  task uses (the rule is below), so that dask's threads and numba's threads
  never oversubscribe the machine.  :func:`thread_pool` is a dask thread pool
  whose threads already follow the rule.
- :func:`stream_analyze` analyses a netCDF variable far larger than memory:
  it opens the file lazily, works through it a block of time steps at a time
  on dask (local threads or a ``dask.distributed`` scheduler) and writes the
  coefficient file incrementally to a temporary file that is renamed at the
  end, with progress on stderr.

The rule for nested parallelism
-------------------------------
The transform kernels are numba ``parallel=True`` with ``nogil=True``: one call
from the main thread uses all of numba's threads (one per core), and calls from
several threads run truly in parallel.  Inside a dask task a call uses

    max(1, C // T) numba threads,

where ``C`` is the number of CPUs this process may run on and ``T`` the number
of tasks that run at once in this process:

- local threaded scheduler: ``T`` is dask's ``num_workers`` setting
  (``dask.config.set(num_workers=N)``), else the size of dask's default pool
  (one thread per CPU, so each task gets one numba thread);
- ``dask.distributed`` worker: ``T`` is the worker's thread count.  Worker
  processes started by a nanny get ``OMP_NUM_THREADS=1`` from dask (its
  ``distributed.nanny.pre-spawn-environ`` setting), because several workers
  usually share one machine; sphex follows that value when it is set, so each
  task then uses one numba thread;
- ``SPHEX_TASK_THREADS=N`` in the environment overrides both (clipped to
  ``1..NUMBA_NUM_THREADS``).

Calls from the main thread (plain numpy input, or dask's synchronous
scheduler) are left alone: numba uses every core.  BLAS threads are
process-wide, so they follow the rule only inside :func:`thread_pool` (which
the streaming analysis uses) and only when ``threadpoolctl`` is installed;
distributed workers get ``OPENBLAS_NUM_THREADS=1`` from their nanny.  numba's thread count is
thread-local, so the setting is made on entry of each task and restored on
exit; nothing global changes, and worker processes need no set-up (the
wrapper and its function pickle by reference).
"""
from __future__ import annotations

import contextlib
import functools
import math
import os
import sys
import threading
import time
import warnings
from collections.abc import Callable, Hashable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TextIO

__all__ = [
    "SplitFieldWarning", "whole_fields", "cpu_count", "task_threads", "in_tasks",
    "task_function", "limited_threads", "thread_pool", "parse_chunks", "default_block", "StreamResult", "stream_analyze",
]

#: Largest merged chunk (bytes) that :func:`whole_fields` makes by itself.
MERGE_LIMIT = 512 * 2**20
#: Input bytes per block that :func:`default_block` aims at.
BLOCK_BYTES = 8 * 2**20
#: How long to try reaching a distributed scheduler.
CONNECT_TIMEOUT = "10s"


# ----------------------------------------------------------------------------
# Chunks that hold whole fields
# ----------------------------------------------------------------------------
class SplitFieldWarning(UserWarning):
    """A dask chunk split a spatial field; sphex merged the chunks."""


def _chunk_call(name: str, spec: Mapping[Hashable, int]) -> str:
    inner = ", ".join(f"{str(k)!r}: {v}" for k, v in spec.items())
    return f"{name}.chunk({{{inner}}})"


def whole_fields(obj: Any, dims: Sequence[Hashable], *, split: str = "merge",
                 limit_bytes: int = MERGE_LIMIT) -> Any:
    """Return ``obj`` with every dask chunk holding whole fields along ``dims``.

    Parameters
    ----------
    obj : xarray.DataArray or xarray.Dataset
        numpy-backed objects are returned unchanged.
    dims : sequence of str
        The core dimensions one call needs whole: latitude and longitude for a
        gridded field, ``degree`` and ``order`` for coefficients.
    split : {"merge", "raise"}
        What to do with a chunked core dimension: ``"merge"`` rechunks it to one
        chunk (other dimensions keep their chunks) and warns with
        :class:`SplitFieldWarning`; ``"raise"`` raises.
    limit_bytes : int
        Merging that would make a chunk larger than this raises instead, with a
        ``.chunk`` call that also shortens the other dimensions.

    Returns
    -------
    Same type as ``obj``.

    Raises
    ------
    ValueError
        A core dimension is split and merging is refused or too big; the
        message shows the ``.chunk(...)`` call that fixes it.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> da = xr.DataArray(np.zeros((4, 3, 6)), dims=("time", "lat", "lon")).chunk({"lon": 3})
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     whole_fields(da, ("lat", "lon")).chunks
    ((4,), (3,), (6,))
    """
    if split not in ("merge", "raise"):
        raise ValueError(f"split must be 'merge' or 'raise', not {split!r}")
    chunks = _chunk_sizes(obj)
    if not chunks:
        return obj
    broken = [d for d in dims if d in chunks and len(chunks[d]) > 1]
    if not broken:
        return obj
    import xarray as xr

    kind = "DataArray" if isinstance(obj, xr.DataArray) else "Dataset"
    name = "da" if kind == "DataArray" else "ds"
    label = repr(obj.name) if kind == "DataArray" and obj.name is not None else f"the {kind}"
    sizes = obj.sizes
    itemsize = _itemsize(obj)
    field = itemsize * math.prod(int(sizes[d]) for d in dims if d in sizes)
    others = {d: max(c) for d, c in chunks.items() if d not in dims}
    merged = field * math.prod(others.values())
    spec: dict[Hashable, int] = {d: -1 for d in dims if d in sizes}
    too_big = merged > limit_bytes
    if too_big:
        # shorten the largest other dimension so a chunk stays near BLOCK_BYTES
        budget = max(1, BLOCK_BYTES // max(field, 1))
        for d, c in sorted(others.items(), key=lambda kv: -kv[1]):
            rest = math.prod(v for k, v in others.items() if k != d)
            spec[d] = max(1, budget // max(rest, 1))
            break
    parts = ", ".join(f"{str(d)!r} ({len(chunks[d])} chunks)" for d in broken)
    fix = _chunk_call(name, spec)
    head = (f"{label} is chunked along {parts}, but each sphex call needs whole fields "
            f"(all of {', '.join(repr(str(d)) for d in dims)}) in one chunk")
    if split == "raise" or too_big:
        why = (f"; merging them would make chunks of {merged / 2**20:.0f} MiB"
               if too_big else "")
        raise ValueError(f"{head}{why}; rechunk first with {fix}")
    warnings.warn(f"{head}; sphex rechunked it with {fix} (do that yourself to silence this "
                  "warning)", SplitFieldWarning, stacklevel=3)
    return obj.chunk(spec)


def _chunk_sizes(obj: Any) -> dict[Hashable, tuple[int, ...]]:
    """Chunk sizes per dimension; for a Dataset the finest split of any variable."""
    if hasattr(obj, "data_vars"):
        out: dict[Hashable, tuple[int, ...]] = {}
        for v in obj.data_vars.values():
            for d, c in (v.chunksizes or {}).items():
                if len(c) > len(out.get(d, ())):
                    out[d] = tuple(c)
        return out
    return dict(obj.chunksizes or {})


def _itemsize(obj: Any) -> int:
    import xarray as xr

    if isinstance(obj, xr.DataArray):
        return int(obj.dtype.itemsize)
    return max((int(v.dtype.itemsize) for v in obj.data_vars.values()), default=8)


# ----------------------------------------------------------------------------
# numba threads inside dask tasks
# ----------------------------------------------------------------------------
def cpu_count() -> int:
    """CPUs this process may run on (its affinity mask where the OS has one)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _numba_max() -> int:
    from sphex.kernels import numba  # sphex sets the vector width before numba loads

    return int(numba.config.NUMBA_NUM_THREADS)


def _positive_env(name: str) -> int | None:
    text = os.environ.get(name, "").strip()
    if not text:
        return None
    try:
        v = int(text)
    except ValueError:
        return None
    return v if v >= 1 else None


def _distributed_threads() -> int | None:
    """Thread count of the dask.distributed worker running this code, else None."""
    if "distributed" not in sys.modules:
        return None
    try:
        from distributed import get_worker

        w = get_worker()
    except (ImportError, ValueError):
        return None
    n = getattr(w, "nthreads", None)
    if n is None:
        n = getattr(getattr(w, "state", None), "nthreads", None)
    return int(n) if n else 1


def task_threads() -> int | None:
    """numba threads for a sphex call made here, or None to leave numba alone.

    Returns
    -------
    int or None
        ``max(1, C // T)`` inside a dask task (see the module docstring for
        ``C``, ``T`` and the overrides), clipped to numba's thread count;
        ``None`` in the main thread.
    """
    top = _numba_max()
    forced = _positive_env("SPHEX_TASK_THREADS")
    if forced is not None:
        return min(forced, top)
    nthreads = _distributed_threads()
    if nthreads is not None:
        hint = _positive_env("OMP_NUM_THREADS")
        n = hint if hint is not None else cpu_count() // nthreads
        return max(1, min(n, top))
    if threading.current_thread() is threading.main_thread():
        return None
    import dask
    from dask.system import CPU_COUNT

    pinned = dask.config.get("sphex.task-threads", None)  # set by thread_pool
    if pinned:
        return max(1, min(int(pinned), top))
    t = dask.config.get("num_workers", None) or CPU_COUNT
    return max(1, min(cpu_count() // max(int(t), 1), top))


@contextlib.contextmanager
def limited_threads(n: int | None) -> Iterator[None]:
    """Run the body with numba limited to ``n`` threads in this thread (None: unchanged)."""
    if n is None:
        yield
        return
    from sphex.kernels import numba  # sphex sets the vector width before numba loads

    old = numba.get_num_threads()
    numba.set_num_threads(n)
    try:
        yield
    finally:
        numba.set_num_threads(old)


class in_tasks:  # noqa: N801 - used like a function decorator
    """Wrap ``func`` so that each call follows the nested-parallelism rule.

    The wrapper is what ``xarray.apply_ufunc(..., dask="parallelized")`` or
    ``dask.array.map_blocks`` should call: in a dask task it limits numba to
    :func:`task_threads` threads for the duration of the call, in the main
    thread it calls ``func`` directly.  It pickles whenever ``func`` does
    (a module-level function pickles by reference), so it runs on
    ``dask.distributed`` worker processes unchanged.

    Parameters
    ----------
    func : callable

    Examples
    --------
    >>> import numpy as np
    >>> f = in_tasks(np.sum)
    >>> float(f(np.ones(3)))
    3.0
    """

    def __init__(self, func: Callable[..., Any]) -> None:
        self.func = func
        functools.update_wrapper(self, func)

    def __call__(self, *args: Any, **kwargs: Any) -> Any:
        with limited_threads(task_threads()):
            return self.func(*args, **kwargs)

    def __reduce__(self) -> tuple:
        return (in_tasks, (self.func,))

    def __repr__(self) -> str:
        return f"in_tasks({getattr(self.func, '__qualname__', self.func)!r})"


def task_function(func: Callable[..., Any], *objs: Any) -> Callable[..., Any]:
    """``in_tasks(func)`` when any of ``objs`` is dask-backed, else ``func`` itself.

    This is the one call the xarray adapters make before ``apply_ufunc``: numpy
    input runs ``func`` directly in the caller's thread, exactly as before.
    """
    for o in objs:
        if getattr(o, "chunks", None):
            return in_tasks(func)
        if hasattr(o, "data_vars") and any(v.chunks for v in o.data_vars.values()):
            return in_tasks(func)
    return func


def _blas_limit(n: int) -> Any:
    """Limit BLAS threads process-wide to ``n`` while the context is open, if possible.

    BLAS (OpenBLAS, used by the transform for large batches) keeps one
    process-wide thread count, so it cannot follow a per-task rule; inside a
    :func:`thread_pool` it is set to the same per-task count.  This needs the
    optional ``threadpoolctl`` package; without it BLAS keeps its own setting.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return contextlib.nullcontext()
    return threadpool_limits(limits=n, user_api="blas")


def _init_pool_thread(n: int) -> None:
    from sphex.kernels import numba  # sphex sets the vector width before numba loads

    numba.set_num_threads(n)


@contextlib.contextmanager
def thread_pool(workers: int | None = None, numba_threads: int | None = None) -> Iterator[Any]:
    """Use a dask thread pool of ``workers`` threads that follow the thread rule.

    Inside the body, dask's threaded scheduler runs on this pool; each pool
    thread starts with numba limited to ``max(1, C // workers)`` threads (or
    ``numba_threads``, or ``SPHEX_TASK_THREADS``), and ``dask.config`` carries
    ``num_workers=workers`` so :func:`task_threads` agrees.

    Parameters
    ----------
    workers : int, optional
        Number of dask threads (default: one per CPU).
    numba_threads : int, optional
        numba threads per pool thread, instead of the rule (the benchmark uses
        it to compare settings).

    Yields
    ------
    concurrent.futures.ThreadPoolExecutor
    """
    from concurrent.futures import ThreadPoolExecutor

    import dask

    n = int(workers) if workers else cpu_count()
    if n < 1:
        raise ValueError(f"workers must be 1 or more, not {workers}")
    inner = max(1, min(cpu_count() // n, _numba_max()))
    forced = _positive_env("SPHEX_TASK_THREADS")
    if numba_threads is not None:
        if int(numba_threads) < 1:
            raise ValueError(f"numba_threads must be 1 or more, not {numba_threads}")
        inner = min(int(numba_threads), _numba_max())
    elif forced is not None:
        inner = min(forced, _numba_max())
    pool = ThreadPoolExecutor(n, thread_name_prefix="sphex-dask",
                              initializer=_init_pool_thread, initargs=(inner,))
    try:
        with dask.config.set({"scheduler": "threads", "pool": pool, "num_workers": n,
                              "sphex.task-threads": inner}), _blas_limit(inner):
            yield pool
    finally:
        pool.shutdown(wait=True)


# ----------------------------------------------------------------------------
# Streaming analysis of a long series
# ----------------------------------------------------------------------------
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


def default_block(field_bytes: int, target: int = BLOCK_BYTES) -> int:
    """Fields per block so one block holds about ``target`` bytes (at least 1)."""
    return max(1, int(target // max(int(field_bytes), 1)))


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


def _open_lazy(path: str | os.PathLike) -> Any:
    import sphex.xr as sxr

    # cache=False: reading a slice never loads (and keeps) the whole variable
    return sxr._open(path, cache=False)


def _pick_variable(ds: Any, var: str | None, path: str) -> str:
    import sphex.xr as sxr

    listed = ", ".join(map(str, ds.data_vars)) or "none"
    if var is None:
        names = []
        for k, v in ds.data_vars.items():
            try:
                sxr.find_grid(v)
            except ValueError:
                continue
            names.append(str(k))
        if len(names) != 1:
            raise ValueError(f"{path}: choose a variable with -v (variables: {listed})")
        return names[0]
    if var not in ds.data_vars:
        raise ValueError(f"{path} has no variable {var!r} (variables: {listed})")
    return var


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
            spec[d] = min(int(n), int(da.sizes[d]))
    else:
        dim = "time" if "time" in others else max(others, key=lambda d: da.sizes[d])
        per = 8 * math.prod(int(da.sizes[d]) for d in da.dims if d != dim)
        spec[dim] = min(default_block(per), int(da.sizes[dim]))
    return spec, str(dim), int(spec[dim]) if spec[dim] != -1 else int(da.sizes[dim])


class _Reporter:
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


def _local_callback(reporter: _Reporter) -> Any:
    from dask.callbacks import Callback

    class _Tasks(Callback):
        def _posttask(self, key: Any, result: Any, dsk: Any, state: dict, worker_id: Any) -> None:
            done = len(state["finished"])
            total = done + sum(len(state[k]) for k in ("ready", "waiting", "running"))
            reporter.fraction(done / total if total else 1.0)

    return _Tasks()


def _group_names(graph_keys: Any) -> set[str]:
    names = set()
    for k in graph_keys:
        names.add(str(k[0]) if isinstance(k, tuple) else str(k))
    return names


def _count_groups(dask_scheduler: Any = None, names: Sequence[str] = ()) -> tuple[int, int]:
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


def _run_distributed(client: Any, delayed: Any, reporter: _Reporter) -> None:
    from distributed import wait

    names = sorted(_group_names(delayed.__dask_graph__().keys()))
    fut = client.compute(delayed)
    while not fut.done():
        try:
            wait(fut, timeout=1.0)
        except Exception:  # noqa: BLE001 - distributed raises its own TimeoutError type
            pass
        if fut.done():
            break
        try:
            done, total = client.run_on_scheduler(_count_groups, names=names)
            if total:
                reporter.fraction(min(done / total, 0.999))
        except Exception:  # noqa: BLE001 - progress is best effort
            pass
    fut.result()
    reporter.fraction(1.0)


def _client(address: str) -> Any:
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
                   radius: float | None = None, progress: bool = True,
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
        ``"time=64"``; default about 8 MiB of float64 input per chunk along
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
    progress : bool
        Report progress on stderr for runs longer than two seconds.
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
    import sphex.xr as sxr
    from sphex._io import check_output_path

    t0 = time.monotonic()
    check_output_path(output, overwrite)
    if isinstance(chunks, str):
        chunks = parse_chunks(chunks)
    path = str(input)
    src = _open_lazy(path)
    try:
        name = _pick_variable(src, var, path)
        da = src[name]
        try:
            info = sxr.find_grid(da)
        except ValueError as exc:
            raise ValueError(f"{path}: {exc}") from None
        lmax = sxr._check_lmax(lmax, info.grid, False, f"variable {name!r}")
        spec, dim, block = _plan_chunks(da, info, chunks)
        lazy = da.chunk(spec)
        n_fields = math.prod(int(lazy.sizes[d]) for d in lazy.dims
                             if d not in (info.lat_dim, info.lon_dim))
        n_chunks = math.prod(len(c) for c in lazy.chunks)
        ds = sxr.analyze(lazy, lmax, norm=norm, condon_shortley=condon_shortley, radius=radius)
        ds.attrs["history"] = history or (f"sphex analyze {path} -v {name} --lmax {lmax} "
                                          f"--norm {norm}")
        reporter = _Reporter(n_fields, "sphex analyze", enabled=progress)
        try:
            if scheduler:
                _write_distributed(ds, output, overwrite, scheduler, reporter)
            else:
                with thread_pool(), _local_callback(reporter):
                    sxr.write_dataset(ds, output, overwrite)
                reporter.fraction(1.0)
        finally:
            reporter.close()
    finally:
        src.close()
    return StreamResult(Path(output), name, info.describe(), int(lmax), norm,
                        bool(condon_shortley), int(n_fields), dim, int(block), int(n_chunks),
                        scheduler or "threads", time.monotonic() - t0)


def _write_distributed(ds: Any, output: str | os.PathLike, overwrite: bool, address: str,
                       reporter: _Reporter) -> None:
    """Write the lazy coefficient Dataset through a distributed scheduler, atomically."""
    import sphex.xr as sxr
    from sphex._io import atomic_output

    enc = sxr._netcdf_encoding(ds)
    client = _client(address)
    try:
        with atomic_output(output, overwrite) as tmp:
            # with the client as default, xarray defines the file here, closes it after
            # each write and guards the writes of the workers with a distributed lock
            delayed = ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=enc,
                                   compute=False)
            _run_distributed(client, delayed, reporter)
    finally:
        client.close()


def main(argv: Sequence[str] | None = None) -> int:
    """``python -m sphex._scale IN.nc VAR OUT.nc [time=N] [ADDRESS]`` (for the benchmark)."""
    args = list(sys.argv[1:] if argv is None else argv)
    if len(args) < 3:
        sys.stderr.write("usage: python -m sphex._scale IN.nc VAR OUT.nc [DIM=N] [ADDRESS]\n")
        return 2
    chunks = args[3] if len(args) > 3 and args[3] != "-" else None
    address = args[4] if len(args) > 4 else None
    try:
        r = stream_analyze(args[0], args[1], args[2], chunks=chunks, scheduler=address,
                           overwrite=True)
    except (ValueError, OSError) as exc:
        sys.stderr.write(f"sphex: error: {' '.join(str(exc).split())}\n")
        return 2
    print(f"wrote {r.output}: {r.fields} fields in {r.chunks} chunks of {r.block} along "
          f"{r.dim}, {r.seconds:.1f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
