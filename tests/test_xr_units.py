"""Checks of sphex.xr.units and sphex.xr.radius: unit strings as users write them, radii in km."""
from __future__ import annotations

import pytest

from sphex.xr.radius import EARTH_RADIUS_KM, radius_from_attributes, radius_warning
from sphex.xr.units import product_units, root_units, squared_units, typeset_units


@pytest.mark.parametrize("units,squared,back", [
    ("m", "m2", "m"), ("K", "K2", "K"), ("m s-1", "m2 s-2", "m s-1"), ("m/s", "m2 s-2", "m s-1"),
    ("kg m-2 s-1", "kg2 m-4 s-2", "kg m-2 s-1"), ("W m**-2", "W2 m-4", "W m-2"),
    ("m.s-1", "m2 s-2", "m s-1"), ("1", "1", "1"), ("10 m", "(10 m)^2", "10 m")])
@pytest.mark.reference
def test_squared_units_in_the_udunits_habit(units, squared, back):
    # UDUNITS writes products with spaces or '.', exponents as trailing integers (common practice)
    assert squared_units(units) == squared
    assert root_units(squared) == back


def test_products_and_typesetting():
    assert product_units("m", "K") == "m K" and product_units("m s-1", "m") == "m2 s-1"
    assert root_units("m3") == "sqrt(m3)"
    assert typeset_units("m2 s-2") == "m\u00b2 s\u207b\u00b2" and typeset_units("m^2") == "m\u00b2"


@pytest.mark.reference
def test_radius_attributes_and_unit_warnings():
    assert radius_from_attributes(("the variable's", {}), ("the file's", {"planet_radius_km": "1350"})) \
        == (1350.0, "the file's planet_radius_km attribute")
    # coefficient files state reference_radius in metres
    assert radius_from_attributes(("x", {"reference_radius": 6.371e6})) == (6371.0, "x reference_radius attribute")
    assert radius_from_attributes(("x", {"planet_radius_km": -3})) is None
    assert EARTH_RADIUS_KM == 6371.0          # IUGG mean radius, rounded (from memory)
    assert "1350 m" in radius_warning(1.35) and "1350km" in radius_warning(1.35)
    assert "1350 km" in radius_warning(1.35e6)
    assert radius_warning(1737.4) is None and radius_warning(11.1) is None     # the Moon, Phobos
