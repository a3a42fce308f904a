"""Quantities at the boundaries: parsing, dimensions, documented units."""

import pytest

from peatburn.errors import UnitError
from peatburn.units import Q_, conversion_factor, to_magnitude, ureg


def test_one_registry():
    assert Q_(1, "m").u._REGISTRY is ureg


@pytest.mark.parametrize("value, unit, expected", [
    ("3 cm/yr", "m/yr", 0.03),            # 3 cm = 0.03 m (SI prefix)
    ("100 kg/m^3", "g/cm^3", 0.1),        # 1000 kg/m^3 = 1 g/cm^3 (SI)
    (0.1, "g/cm^3", 0.1),                 # bare numbers are in the documented unit
    ("0.1", "g/cm^3", 0.1),
    ("55 percent", "dimensionless", 0.55),
    ("36 months", "yr", 3.0),             # pint's year is the Julian year; 36 months = 3 yr
])
def test_parse(value, unit, expected):
    assert to_magnitude(value, unit) == pytest.approx(expected)


def test_wrong_dimension_names_key():
    with pytest.raises(UnitError, match="subsidence_rate.*kg"):
        to_magnitude("3 kg/yr", "m/yr", "subsidence_rate")


def test_garbage():
    with pytest.raises(UnitError, match="cannot read"):
        to_magnitude("three metres", "m", "depth")
    with pytest.raises(UnitError):
        to_magnitude(True, "m", "depth")


def test_conversion_factor():
    assert conversion_factor("cm", "m") == pytest.approx(0.01)
    with pytest.raises(UnitError):
        conversion_factor("bogus_unit", "m")
