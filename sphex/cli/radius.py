"""The one radius option of the command line, ``--radius``, and where a radius comes from.

Every subcommand for which a radius matters takes ``--radius R``: in km, or
with a unit, ``1350km`` or ``1350000m``.  Without it the radius comes from
the input file (the variable's, then the file's ``planet_radius_km``
attribute; on a coefficient file its ``reference_radius``).  The subcommand
says which radius it used and where it came from, and warns when a value
looks like the wrong unit (a planet of 1350 m).

Standard library only at import (the attribute rules are in
:mod:`sphex.xr.radius`, imported when a radius is chosen).
"""
from __future__ import annotations

import argparse
import sys
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

__all__ = ["radius_km", "add_radius_option", "Radius", "choose_radius"]


def radius_km(text: str) -> float:
    """A radius in km from ``1350``, ``1350km``, ``1350 km``, ``1350000m`` or ``1350000 m``."""
    t = text.strip().lower()
    number, scale = t, 1.0
    for unit, factor in (("km", 1.0), ("m", 1e-3)):
        if t.endswith(unit):
            number, scale = t[: -len(unit)].strip(), factor
            break
    try:
        value = float(number)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r}: give the radius in km (a number), or mark the unit: 1350km or "
            "1350000m") from None
    if not value > 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r}: the radius must be a positive number")
    return value * scale


def add_radius_option(q: argparse.ArgumentParser, use: str) -> None:
    """Add ``--radius R`` to a subcommand; ``use`` says what the radius is for."""
    q.add_argument("--radius", type=radius_km, metavar="R",
                   help=f"{use}; in km, or with a unit: 1350km, 1350000m (default: the input's "
                        "planet_radius_km attribute)")


@dataclass(frozen=True)
class Radius:
    """A radius in km and where it came from (``--radius``, an attribute, an assumption)."""

    km: float
    source: str

    def describe(self) -> str:
        """``radius 1350 km (from the file's planet_radius_km attribute)``."""
        from sphex.xr.radius import number_text

        return f"radius {number_text(self.km)} km ({self.source})"

    @property
    def metres(self) -> float:
        return self.km * 1e3


def choose_radius(command: str, option_km: float | None,
                  *sources: tuple[str, Mapping[str, Any]],
                  assume_earth: bool = False) -> Radius | None:
    """The radius to use: ``--radius``, else the first attribute found, else Earth or None.

    Parameters
    ----------
    command : str
        The subcommand, for the warning line.
    option_km : float or None
        The value of ``--radius``.
    *sources : (str, mapping)
        ``(description, attributes)`` in order of preference, e.g.
        ``("the variable's", da.attrs)``, ``("the file's", ds.attrs)``.
    assume_earth : bool
        Without an option or attribute, use Earth's mean radius (and say so)
        instead of returning None.

    Returns
    -------
    Radius or None
        A warning goes to stderr when the radius looks like the wrong unit.
    """
    from sphex.xr.radius import EARTH_RADIUS_KM, number_text, radius_from_attributes, radius_warning

    if option_km is not None:
        chosen = Radius(float(option_km), "from --radius")
    else:
        found = radius_from_attributes(*sources)
        if found is not None:
            chosen = Radius(found[0], f"from {found[1]}")
        elif assume_earth:
            chosen = Radius(EARTH_RADIUS_KM, "assumed Earth's mean radius: no --radius and no "
                                             "planet_radius_km attribute")
        else:
            return None
    note = radius_warning(chosen.km)
    if note:
        sys.stderr.write(f"sphex {command}: warning: radius {number_text(chosen.km)} km "
                         f"{chosen.source}: {note}\n")
    return chosen
