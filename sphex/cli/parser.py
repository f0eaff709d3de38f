"""The parser of the ``sphex`` command line and :func:`main`.

Each subcommand module registers its subcommands (their options, help text
and example) on the parser built here; :func:`main` runs the chosen one and
turns user errors into one line on stderr and exit status 2.
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
from collections.abc import Sequence
from typing import Any, NoReturn

from sphex.cli import bench, demo, drawing, fields, inspection, spectrum, transforms
from sphex.cli.shared import FORMATTER, PROG, UserError, report_error

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
"""

#: The subcommand modules, in the order their subcommands are listed.
COMMAND_MODULES = (transforms, spectrum, fields, drawing, inspection, demo, bench)


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
    p.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=OneLineParser)
    for module in COMMAND_MODULES:
        module.register(sub)
    return p


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
        0 on success, 2 on a user error, 130 when interrupted.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    if argv and argv[0] == "bench":
        return bench.run(argv[1:])
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    debug = os.environ.get("SPHEX_DEBUG", "") not in ("", "0")
    previous = None
    try:
        previous = signal.signal(signal.SIGTERM, _interrupt_on_sigterm)
    except (ValueError, OSError):  # not in the main thread
        pass
    try:
        return int(args.func(args) or 0)
    except BrokenPipeError:  # output piped into head & co.: not an error
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        sys.stderr.write(f"{PROG} {args.command}: interrupted; no output written\n")
        return 130
    except (UserError, ValueError, OSError) as exc:
        if debug:
            raise
        return report_error(args.command, exc)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
