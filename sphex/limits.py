"""What a request may ask for: whole-number arguments, memory against the machine's,
and results within the double range.

Every layer (the numeric core, the xarray adapters, the command line) checks
its integer arguments with :func:`whole_number` and, before allocating what a
request needs, holds an estimate of the bytes against the memory this machine
has free with :func:`check_memory`.  A request that cannot fit is refused at
once (:class:`RequestTooLarge`), with the estimate and the memory available
in the message, instead of running for minutes and then failing.

The memory available is ``MemAvailable`` of ``/proc/meminfo`` (Linux), else
the free physical pages reported by ``os.sysconf``; the environment variable
``SPHEX_MEMORY_LIMIT`` (bytes, or with a suffix ``K``, ``M``, ``G``, ``T``)
caps it, to share a machine or to try the refusals.  The estimates count the
large arrays a request must hold at once, so they are lower bounds of what
it uses: a refused request could not have run.

Results are held to the double range with :func:`refuse_overflow`: a
computation on finite input whose result holds inf or NaN is refused, saying
what overflowed, rather than handed on.  :func:`binary_exponent` gives the
power of two that brings extreme input (beyond 2**+-600) near 1, so the
transforms rescale exactly and overflow only where the result itself is
beyond the double range.

Standard library and numpy only.
"""
from __future__ import annotations

import math
import numbers
import os

import numpy as np

__all__ = ["RequestTooLarge", "whole_number", "available_memory", "check_memory",
           "format_bytes", "MEMORY_LIMIT_VARIABLE", "peak_magnitude", "all_finite",
           "binary_exponent", "refuse_overflow", "LARGEST_DOUBLE"]

#: The largest finite float64.
LARGEST_DOUBLE = float(np.finfo(np.float64).max)
#: Input whose largest magnitude lies outside 2**-SAFE_EXPONENT .. 2**SAFE_EXPONENT is
#: rescaled by a power of two before a transform (exact, and cheap).
SAFE_EXPONENT = 600

#: Environment variable that caps the memory sphex assumes it may use.
MEMORY_LIMIT_VARIABLE = "SPHEX_MEMORY_LIMIT"
_SUFFIXES = {"": 1, "B": 1, "K": 2**10, "M": 2**20, "G": 2**30, "T": 2**40}


class RequestTooLarge(ValueError, MemoryError):
    """A request needs more memory than the machine has available.

    A ValueError (bad input, refused before any work) and a MemoryError (what
    it would have ended in), so either ``except`` catches it.
    """


def whole_number(value: object, name: str, minimum: int = 0) -> int:
    """``value`` as an int, refusing anything that is not a whole number >= ``minimum``.

    Parameters
    ----------
    value : object
        An int, a numpy integer, or a float with an integral value (``3.0``).
    name : str
        The argument's name, for the message.
    minimum : int

    Returns
    -------
    int

    Raises
    ------
    ValueError
        For booleans, NaN, inf, fractions such as 2.5, strings and other
        types, and for values below ``minimum``; the message names the
        argument and the value.

    Examples
    --------
    >>> whole_number(3.0, "lmax")
    3
    >>> whole_number(2.5, "lmax")
    Traceback (most recent call last):
    ...
    ValueError: lmax must be a whole number >= 0, got 2.5
    """
    text = f"{name} must be a whole number >= {minimum}, got {value!r}"
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise ValueError(text)
    if isinstance(value, numbers.Integral):
        number = int(value)
    else:
        v = float(value)
        if not math.isfinite(v) or v != math.floor(v):
            raise ValueError(text)
        number = int(v)
    if number < minimum:
        raise ValueError(text)
    return number


def _limit_from_environment() -> int | None:
    text = os.environ.get(MEMORY_LIMIT_VARIABLE, "").strip().upper()
    if not text:
        return None
    unit = text[-1] if text[-1] in _SUFFIXES and not text[-1].isdigit() else ""
    number = text[: len(text) - len(unit)] if unit else text
    try:
        v = float(number)
    except ValueError:
        raise ValueError(f"{MEMORY_LIMIT_VARIABLE}={os.environ[MEMORY_LIMIT_VARIABLE]!r} is not a "
                         "size: write bytes, or a number with K, M, G or T (e.g. 4G)") from None
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{MEMORY_LIMIT_VARIABLE} must be a positive size, e.g. 4G")
    return int(v * _SUFFIXES[unit])


def _machine_available() -> int | None:
    try:
        with open("/proc/meminfo", encoding="ascii") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
    except (AttributeError, ValueError, OSError):
        return None


def available_memory() -> int | None:
    """Bytes of memory available to a new request now (None when unknown).

    ``MemAvailable`` from ``/proc/meminfo``, else ``os.sysconf`` free pages
    times the page size; at most ``SPHEX_MEMORY_LIMIT`` when that is set.
    """
    machine = _machine_available()
    limit = _limit_from_environment()
    if limit is None:
        return machine
    return limit if machine is None else min(machine, limit)


def format_bytes(n: float) -> str:
    """``1536`` -> ``'1.5 KiB'`` (binary units up to EiB).

    Examples
    --------
    >>> format_bytes(1536), format_bytes(3 * 2**40)
    ('1.5 KiB', '3 TiB')
    """
    n = float(n)
    if n < 1024:
        return f"{int(n)} bytes"
    for unit in ("KiB", "MiB", "GiB", "TiB", "PiB", "EiB"):
        n /= 1024
        if n < 1024 or unit == "EiB":
            return f"{n:.3g} {unit}"
    raise AssertionError("unreachable")  # pragma: no cover


def check_memory(nbytes: float, what: str, fix: str) -> None:
    """Refuse a request whose estimate ``nbytes`` exceeds the memory available.

    Parameters
    ----------
    nbytes : float
        Estimated bytes the request must hold at once (any size; a float so
        that estimates beyond 2**63 need no care).
    what : str
        What needs the memory (``"analysis of 1 field to degree 1000000000"``).
    fix : str
        What the user can do instead (``"use a lower lmax"``).

    Raises
    ------
    RequestTooLarge
        With the estimate, the memory available and ``fix`` in the message.
    """
    avail = available_memory()
    if avail is None or float(nbytes) <= avail:
        return
    limit, machine = _limit_from_environment(), _machine_available()
    capped = limit is not None and (machine is None or limit < machine)
    note = f" (capped by {MEMORY_LIMIT_VARIABLE})" if capped else ""
    raise RequestTooLarge(f"{what} needs about {format_bytes(nbytes)} of memory but this machine "
                          f"has {format_bytes(avail)} available{note}; {fix}")


# ---------------------------------------------------------------------------
# the double range
# ---------------------------------------------------------------------------
def _extremes(a: np.ndarray) -> tuple[float, float]:
    """Smallest and largest element (NaN when any is NaN), without a temporary array."""
    if a.size == 0:
        return 0.0, 0.0
    return float(np.min(a)), float(np.max(a))


def peak_magnitude(a: np.ndarray) -> float:
    """Largest magnitude of the real (or real and imaginary) parts of ``a``; NaN or inf
    when ``a`` holds any.  Two passes over ``a``, no temporary array."""
    parts = (a.real, a.imag) if np.iscomplexobj(a) else (a,)
    peak = 0.0
    for part in parts:
        lo, hi = _extremes(part)
        if not (math.isfinite(lo) and math.isfinite(hi)):
            return math.nan if math.isnan(lo) or math.isnan(hi) else math.inf
        peak = max(peak, -lo, hi)
    return peak


def all_finite(a: np.ndarray) -> bool:
    """Whether every element of ``a`` (real and imaginary parts) is finite.

    One pass: the sum of finite elements is finite unless it overflows, and an inf
    or NaN element makes it inf or NaN; only a sum that is not finite is followed
    by the exact test (:func:`peak_magnitude`, two passes per part).
    """
    with np.errstate(over="ignore", invalid="ignore"):
        total = np.sum(a)
    if np.isfinite(total):
        return True
    return math.isfinite(peak_magnitude(a))


def binary_exponent(peak: float) -> int:
    """``e`` such that ``peak * 2**-e`` lies in [0.5, 1) when ``peak`` is beyond
    ``2**+-SAFE_EXPONENT``; 0 otherwise (zero, or no rescaling needed).

    Examples
    --------
    >>> binary_exponent(1e308), binary_exponent(1.0), binary_exponent(1e-300)
    (1024, 0, -996)
    """
    if not math.isfinite(peak) or peak == 0.0:
        return 0
    if 2.0 ** -SAFE_EXPONENT <= peak <= 2.0 ** SAFE_EXPONENT:
        return 0
    return math.frexp(peak)[1]


def refuse_overflow(result: np.ndarray, what: str, fix: str) -> None:
    """Raise a ValueError when ``result`` (computed from finite input) holds inf or NaN.

    Parameters
    ----------
    result : ndarray
    what : str
        What overflowed and from what (``"the coefficients of a field reaching 1e308"``).
    fix : str
        What to do instead.

    Raises
    ------
    ValueError
        ``"<what> overflow the double range (largest 1.8e308); <fix>"``.
    """
    if all_finite(result):
        return
    raise ValueError(f"{what} overflow the double range (largest finite double "
                     f"{LARGEST_DOUBLE:.3g}); {fix}")
