"""The ``sphex`` command line (``sphex = "sphex.cli:main"``, also ``python -m sphex.cli``).

Every subcommand parses its arguments, calls the Python API, prints a short
report and exits 0.  A user error (missing file or variable, not netCDF, a grid
that is not global, a degree limit above the grid's, an unknown option value,
an existing output without ``--overwrite``) prints one line on stderr and exits
2, with no traceback and no output file.  Outputs are written to a temporary
file beside the target and renamed at the end.

Heavy modules (numpy, xarray, numba, matplotlib) are imported inside the
subcommands, so ``sphex --help`` answers at once.  Set ``SPHEX_DEBUG=1`` to see
the full traceback of an error.

Modules
-------
``parser``       the parser and :func:`main`
``shared``       argument types, opening inputs, grid texts, writing outputs and the
                 one-line error report
``progress``     the one progress display of every subcommand; the first run's kernel notice
``radius``       the one radius option, ``--radius`` (km unless marked), and its sources
``transforms``   ``analyze`` and ``synthesize``
``spectrum``     ``spectrum`` (its report and files in ``spectrum_output``)
``fields``       ``smooth`` and ``regrid``
``flow``         ``flow`` (winds and currents)
``points``       ``sample``
``drawing``      ``map``
``inspection``   ``inspect``
``demo``         ``demo``
``bench``        ``bench`` (handed to :mod:`sphex.bench`)

A new subcommand gets a module with a ``register(sub)`` function that adds
its options, help text and example, and a place in ``parser.COMMAND_MODULES``
and in the list of commands of the main help.
"""
from __future__ import annotations

from sphex.cli.parser import main
from sphex.cli.shared import UserError

__all__ = ["main", "UserError"]
