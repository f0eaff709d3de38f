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

from sphex.cli import (
    bench, demo, fields, flow, inspection, localized, points, potential, report, spectrum,
    transforms,
)
from sphex.cli.shared import FORMATTER, PROG, UserError, report_error

__all__ = ["main", "build_parser"]

MAIN_HELP = """\
Spherical-harmonic expansion of global latitude-longitude fields.

Reads CF-style netCDF files, finds latitude and longitude by name or by CF
attributes, and works on any extra dimensions (time, level, member) as a batch.

commands:
  analyze     grid file -> spherical-harmonic coefficient file
  synthesize  coefficient file -> grid file (any supported grid)
  spectrum    degree power spectrum (table, CSV, plot)
  local-spectrum  localised (multitaper) spectrum of a region, with errors
  smooth      isotropic smoothing (Gaussian, spherical cap, degree taper)
  regrid      spectral regridding onto another grid
  flow        vorticity, divergence, streamfunction, velocity potential and
              kinetic-energy spectrum of winds or currents
  sample      coefficients or a model at the points of a CSV file (stations, tracks)
  inspect     what grid each variable is on, or why it is not usable
  report      one self-contained HTML page: maps, spectra, key numbers, comparison
  gravity     gravity model file -> grid of geoid, anomalies, deflections
              (not certified for surveying, engineering or navigation)
  geomagnetic geomagnetic model file -> grid of field components, D and I
  demo        the whole job on bundled synthetic data
  bench       speed measurements

Grids (--grid): a netCDF file whose latitude/longitude define the grid,
gauss:LMAX, or equiangular:NLATxNLON:LAYOUT with LAYOUT poles, cells or north.

start here:
  sphex demo
  sphex inspect my_field.nc
  sphex analyze my_field.nc -v topo -o topo_coef.nc
"""

#: The subcommand modules, in the order their subcommands are listed.
COMMAND_MODULES = (transforms, spectrum, localized, fields, flow, potential, points, inspection,
                   report, demo, bench)


class OneLineParser(argparse.ArgumentParser):
    """ArgumentParser whose errors are one line (and exit 2)."""

    def error(self, message: str) -> NoReturn:
        msg = " ".join(message.split())
        sys.stderr.write(f"{self.prog}: error: {msg} (see '{self.prog} --help')\n")
        raise SystemExit(2)


def build_parser() -> OneLineParser:
    """The parser of ``sphex`` with every subcommand registered."""
    p = OneLineParser(prog=PROG, description=MAIN_HELP, formatter_class=FORMATTER)
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
