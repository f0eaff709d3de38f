"""The parser of the ``sphex`` command line and :func:`main`.

Each subcommand module registers its subcommands (their options, help text
and example) on the parser built here; :func:`main` runs the chosen one and
turns every failure into one line on stderr: status 2 for a problem the user
can fix, 70 for a bug (with a hint to rerun with ``--debug``), 130 when
interrupted (Ctrl-C or SIGTERM).  Warnings become one line each too.
"""
from __future__ import annotations

import argparse
import gc
import os
import signal
import sys
import time
from collections.abc import Sequence
from typing import Any, NoReturn

from sphex.cli import (
    bench, demo, drawing, fields, flow, inspection, localized, points, potential, report,
    spectrum, transforms,
)
from sphex.cli.shared import (
    DEBUG_VARIABLE, EXIT_INTERRUPTED, FORMATTER, PROG, add_debug_argument, one_line_warnings,
    report_failure,
)

__all__ = ["main", "build_parser"]

MAIN_HELP = """\
Spherical-harmonic expansion of global latitude-longitude fields.

Reads CF-style netCDF files, finds latitude and longitude by name or by CF
attributes, and works on any extra dimensions (time, level, member) as a batch.

Grids (--grid): a netCDF file whose latitude/longitude define the grid,
gauss:LMAX (also gaussian:LMAX), equiangular:NLATxNLON:LAYOUT (latitudes first;
LAYOUT poles, cells or north), or equiangular:SPACINGdeg (poles layout unless
:LAYOUT follows).  Radii (--radius) are in km unless marked: 1350km, 1350000m.

start here:
  sphex demo
  sphex inspect data_demo/velanthe_topography.nc
  sphex analyze data_demo/velanthe_topography.nc -o topo_coef.nc

exit status: 0 done; 2 a problem with the input, the request or the system (one
line on stderr says what and what to do; nothing is written); 70 a bug in sphex
(rerun with --debug, or SPHEX_DEBUG=1, for the traceback); 130 interrupted.
"""

#: The subcommand modules, in the order their subcommands are listed.
COMMAND_MODULES = (transforms, spectrum, localized, fields, flow, potential, points, drawing,
                   inspection, report, demo, bench)


class CommandListFormatter(FORMATTER):
    """The main help: each command once, its help beside it (argparse leaves out the
    commands' own indent when it places the help column, and wraps the longest names)."""

    def add_argument(self, action: argparse.Action) -> None:
        super().add_argument(action)
        for choice in getattr(action, "_choices_actions", ()):
            self._action_max_length = max(self._action_max_length,
                                          len(choice.metavar or choice.dest) + self._current_indent + 2)


class OneLineParser(argparse.ArgumentParser):
    """ArgumentParser whose errors are one line (and exit 2)."""

    def error(self, message: str) -> NoReturn:
        msg = " ".join(message.split())
        sys.stderr.write(f"{self.prog}: error: {msg} (see '{self.prog} --help')\n")
        raise SystemExit(2)


def build_parser() -> OneLineParser:
    """The parser of ``sphex`` with every subcommand registered."""
    p = OneLineParser(prog=PROG, description=MAIN_HELP, formatter_class=CommandListFormatter)
    p.add_argument("--version", action=_Version)
    add_debug_argument(p)
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=OneLineParser)
    for module in COMMAND_MODULES:
        module.register(sub)
    return p


class _Version(argparse.Action):
    """``--version``: the installed version, looked up only when asked for (reading the
    package metadata imports ``importlib.metadata``, a noticeable share of a short call)."""

    def __init__(self, option_strings: Sequence[str], dest: str = argparse.SUPPRESS,
                 default: Any = argparse.SUPPRESS, help: str = "show program's version number "
                 "and exit") -> None:
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser: argparse.ArgumentParser, namespace: Any, values: Any,
                 option_string: str | None = None) -> None:
        print(f"{parser.prog} {_version()}")
        parser.exit()


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("sphex")
    except Exception:
        return "unknown"


def _interrupt_on_sigterm(signum: int, frame: Any) -> None:
    raise KeyboardInterrupt


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments without the program name (default ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 2 on a problem the user can fix, 70 on a bug, 130 when
        interrupted.

    Notes
    -----
    Without ``argv`` this is the process's own command line (the ``sphex``
    script, ``python -m sphex``), and the cyclic garbage collector is told what
    such a process is like.  Its first seconds import xarray, pandas, dask and
    numba, hundreds of thousands of objects that live as long as the process:
    for START_UP_SECONDS only the youngest generation is collected
    (:func:`_collect_young_only_at_start`; the older ones' passes over those
    objects cost about 0.2 s of a small ``analyze``), and then the default
    thresholds are back for a long run.  The process ends as soon as this
    returns: its objects are then frozen (``gc.freeze``), as the collector's
    passes while the interpreter shuts down took another 0.4 s.  Exit handlers
    still run, and every output file is closed before this point.  A call with
    ``argv`` (from Python, the tests) leaves the collector alone.
    """
    if argv is None:
        _collect_young_only_at_start()
    status = _run(argv)
    if argv is None:
        gc.freeze()
    return status


#: Seconds from the start of a command-line process during which the cyclic garbage
#: collector passes over its youngest generation only (see :func:`main`).
START_UP_SECONDS = 2.0


def _collect_young_only_at_start(seconds: float = START_UP_SECONDS) -> None:
    """Hold back the collections of the older generations for ``seconds``: the first
    collection after that time restores the thresholds found here (Python's defaults
    unless the user set others)."""
    thresholds = gc.get_threshold()
    until = time.monotonic() + seconds
    held = [True]

    def restore(phase: str, info: dict) -> None:
        if held[0] and time.monotonic() >= until:
            held[0] = False
            gc.set_threshold(*thresholds)

    gc.set_threshold(thresholds[0], 1 << 30, 1 << 30)
    gc.callbacks.append(restore)


def _run(argv: Sequence[str] | None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = os.environ.get(DEBUG_VARIABLE, "") not in ("", "0")
    if argv and argv[0] == "--debug":
        debug = True
    command_at = 1 if argv and argv[0] == "--debug" else 0
    if len(argv) > command_at and argv[command_at] == "bench":
        return _guarded("bench", lambda: bench.run(argv[command_at + 1:]), debug)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    return _guarded(args.command, lambda: args.func(args), debug or bool(args.debug))


def _guarded(command: str, run: Any, debug: bool) -> int:
    """Run a command with SIGTERM as an interruption and every failure reported in one line."""
    previous = None
    try:
        previous = signal.signal(signal.SIGTERM, _interrupt_on_sigterm)
    except (ValueError, OSError):  # not in the main thread
        pass
    try:
        with one_line_warnings(command):
            return int(run() or 0)
    except BrokenPipeError:  # output piped into head & co.: not an error
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        if debug:
            raise
        sys.stderr.write(f"{PROG} {command}: interrupted; no output written\n")
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - every failure ends in one line (or a traceback)
        if debug:
            raise
        return report_failure(command, exc)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
