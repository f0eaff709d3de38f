"""The radius of the sphere a field lives on: from attributes, with a check of its unit.

sphex's one convention: a planet's radius is given in **kilometres**.  Files
state it in an attribute, ``planet_radius_km`` (also read:
``sphere_radius_km``) on the variable or the file, or, on coefficient files,
``reference_radius`` in metres.  Where a radius matters and none is given or
found, sphex assumes Earth's mean radius, :data:`EARTH_RADIUS_KM`, and says so.

Standard library only.

Examples
--------
>>> radius_from_attributes(("the variable's", {}), ("the file's", {"planet_radius_km": 1350.0}))
(1350.0, "the file's planet_radius_km attribute")
>>> radius_warning(1.35) is not None, radius_warning(6371.0) is None
(True, True)
"""
from __future__ import annotations

from collections.abc import Mapping
from typing import Any

__all__ = ["EARTH_RADIUS_KM", "RADIUS_ATTRIBUTES", "radius_from_attributes", "radius_warning",
           "number_text"]

#: Earth's mean radius in km (IUGG mean radius R1 = 6371.0088 km, rounded; common practice).
EARTH_RADIUS_KM = 6371.0
#: Attributes read as a radius in km, in this order.
RADIUS_ATTRIBUTES = ("planet_radius_km", "sphere_radius_km")
#: Radii below this (km) draw a warning: likely metres or a typing slip.
SMALLEST_LIKELY_KM = 10.0
#: Radii above this (km) draw a warning: larger than any planet, likely metres given as km.
LARGEST_LIKELY_KM = 1.0e6


def _positive(value: Any) -> float | None:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if v > 0 and v != float("inf") else None


def radius_from_attributes(*sources: tuple[str, Mapping[str, Any]]) -> tuple[float, str] | None:
    """The first radius (km) stated by the attribute sets, and where it was found.

    Parameters
    ----------
    *sources : (str, mapping)
        ``(description, attributes)`` pairs in order of preference, for
        example ``("the variable's", da.attrs)`` then ``("the file's",
        ds.attrs)``.

    Returns
    -------
    (float, str) or None
        The radius in km and a phrase naming the attribute, or None.
    """
    for where, attrs in sources:
        for key in RADIUS_ATTRIBUTES:
            v = _positive(attrs.get(key))
            if v is not None:
                return v, f"{where} {key} attribute"
        v = _positive(attrs.get("reference_radius"))
        if v is not None:
            unit = str(attrs.get("reference_radius_units", "m")).strip().lower()
            km = v if unit in ("km", "kilometre", "kilometer", "kilometres", "kilometers") else v / 1e3
            return km, f"{where} reference_radius attribute"
    return None


def number_text(value: float) -> str:
    """A radius for messages: ``1350``, ``1350000``, ``1.35``, ``6371.0088``."""
    return str(int(value)) if value == int(value) and abs(value) < 1e15 else f"{value:.6g}"


def radius_warning(radius_km: float) -> str | None:
    """A sentence when ``radius_km`` looks like the wrong unit, else None."""
    if radius_km < SMALLEST_LIKELY_KM:
        return (f"that is {number_text(radius_km * 1e3)} m, small for a planet or moon; radii are "
                f"in km unless marked: write {number_text(radius_km * 1e3)}km if that was meant")
    if radius_km > LARGEST_LIKELY_KM:
        return ("that is larger than any planet (Jupiter's radius is about 71 500 km); radii are "
                f"in km unless marked: write {number_text(radius_km)}m if the value is in metres "
                f"({number_text(radius_km / 1e3)} km)")
    return None
