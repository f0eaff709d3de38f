"""Running the adapters on dask: whole-field chunks and numba threads inside dask tasks.

Two pieces sit here, below the field adapters and the streaming analysis:

- :func:`whole_fields` makes sure every dask chunk holds whole spatial fields
  (all latitudes and longitudes, or all degrees and orders).  A field split
  across chunks is merged with a :class:`SplitFieldWarning` when the merged
  chunks stay small, and refused with a ``ValueError`` that shows the
  ``.chunk(...)`` call to make otherwise.  :func:`default_block` sizes blocks
  of whole fields.
- :func:`task_threads` / :func:`in_tasks` set how many numba threads one dask
  task uses (the rule is below), so that dask's threads and numba's threads
  never oversubscribe the machine.  :func:`thread_pool` is a dask thread pool
  whose threads already follow the rule.

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
the streaming analysis of :mod:`sphex.xr.streaming` uses) and only when
``threadpoolctl`` is installed; distributed workers get
``OPENBLAS_NUM_THREADS=1`` from their nanny.  numba's thread count is
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
import warnings
from collections.abc import Callable, Hashable, Iterator, Mapping, Sequence
from typing import Any

import xarray as xr

__all__ = [
    "SplitFieldWarning", "whole_fields", "default_block", "cpu_count", "task_threads", "in_tasks",
    "task_function", "limited_threads", "thread_pool", "initialize_pool_thread",
]

#: Largest merged chunk (bytes) that :func:`whole_fields` makes by itself.
MERGE_LIMIT = 512 * 2**20
#: Input bytes per block that :func:`default_block` aims at.
BLOCK_BYTES = 16 * 2**20


# ----------------------------------------------------------------------------
# Chunks that hold whole fields
# ----------------------------------------------------------------------------
class SplitFieldWarning(UserWarning):
    """A dask chunk split a spatial field; sphex merged the chunks."""


def _chunk_call_text(name: str, spec: Mapping[Hashable, int]) -> str:
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
    fix = _chunk_call_text(name, spec)
    head = (f"{label} is chunked along {parts}, but each sphex call needs whole fields "
            f"(all of {', '.join(repr(str(d)) for d in dims)}) in one chunk")
    if split == "raise" or too_big:
        why = (f"; merging them would make chunks of {merged / 2**20:.0f} MiB"
               if too_big else "")
        raise ValueError(f"{head}{why}; rechunk first with {fix}")
    warnings.warn(f"{head}; sphex rechunked it with {fix} (do that yourself to silence this "
                  "warning)", SplitFieldWarning, stacklevel=3)
    return obj.chunk(spec)


def default_block(field_bytes: int, target: int = BLOCK_BYTES) -> int:
    """Fields per block so one block holds about ``target`` bytes (at least 1)."""
    return max(1, int(target // max(int(field_bytes), 1)))


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


def _numba_thread_limit() -> int:
    from sphex.kernels import numba  # sphex sets the vector width before numba loads

    return int(numba.config.NUMBA_NUM_THREADS)


def _positive_environment_value(name: str) -> int | None:
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
    top = _numba_thread_limit()
    forced = _positive_environment_value("SPHEX_TASK_THREADS")
    if forced is not None:
        return min(forced, top)
    nthreads = _distributed_threads()
    if nthreads is not None:
        hint = _positive_environment_value("OMP_NUM_THREADS")
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


def _limit_blas_threads(n: int) -> Any:
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


def initialize_pool_thread(n: int) -> None:
    """Start a pool thread with numba limited to ``n`` threads (a ThreadPoolExecutor initializer)."""
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
    inner = max(1, min(cpu_count() // n, _numba_thread_limit()))
    forced = _positive_environment_value("SPHEX_TASK_THREADS")
    if numba_threads is not None:
        if int(numba_threads) < 1:
            raise ValueError(f"numba_threads must be 1 or more, not {numba_threads}")
        inner = min(int(numba_threads), _numba_thread_limit())
    elif forced is not None:
        inner = min(forced, _numba_thread_limit())
    pool = ThreadPoolExecutor(n, thread_name_prefix="sphex-dask",
                              initializer=initialize_pool_thread, initargs=(inner,))
    try:
        with dask.config.set({"scheduler": "threads", "pool": pool, "num_workers": n,
                              "sphex.task-threads": inner}), _limit_blas_threads(inner):
            yield pool
    finally:
        pool.shutdown(wait=True)
