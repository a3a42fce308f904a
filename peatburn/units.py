"""The one pint unit registry of peatburn, and parsing of quantities at the boundaries.

Parameters reach peatburn as plain numbers in their documented unit, as quantity strings
(``"3 cm/yr"``, ``"0.1 g/cm^3"``) or as pint quantities. :func:`to_magnitude` checks the
dimension and returns a plain float in the documented unit; kernels work on those magnitudes.
"""

from __future__ import annotations

import numbers

import pint

from .errors import UnitError

ureg = pint.UnitRegistry()
ureg.define("percent_mass = 0.01 = pct")
Q_ = ureg.Quantity

#: Documented units of the run parameters. Numbers without units are read in these.
DOCUMENTED_UNITS = {
    "elevation": "m",
    "burn_depth": "m",
    "peat_thickness": "m",
    "subsidence_rate": "m/yr",
    "interval": "yr",
    "bulk_density": "g/cm^3",
    "carbon_fraction": "dimensionless",
    "water_table_depth": "m",
    "emission_factor": "g/kg",
    "biomass": "t/ha",
    "combustion_coefficient": "kg/MJ",
    "frp": "MW",
}


def parse_quantity(value, unit: str, name: str = "value") -> pint.Quantity:
    """Parse a number, a quantity string or a pint quantity into a quantity of ``unit``'s dimension.

    Parameters
    ----------
    value : float, int, str or pint.Quantity
        A bare number is taken to be in ``unit``.
    unit : str
        The documented unit (pint syntax).
    name : str
        The key or argument name, used in error messages.

    Returns
    -------
    pint.Quantity
        Converted to ``unit``.
    """
    if isinstance(value, bool):
        raise UnitError(f"{name}: expected a number or a quantity such as '1 {unit}', got {value!r}")
    if isinstance(value, numbers.Number):
        return Q_(float(value), unit)
    if isinstance(value, pint.Quantity):
        q = value
    elif isinstance(value, str) and _is_plain_number(value):
        return Q_(float(value), unit)
    elif isinstance(value, str):
        try:
            q = ureg.Quantity(value.strip())
        except Exception as exc:  # pint raises several kinds of error here
            raise UnitError(
                f"{name}: cannot read {value!r} as a quantity ({exc.__class__.__name__}); "
                f"write a number and a unit, for example '1 {unit}'"
            ) from None
        if not isinstance(q, pint.Quantity):  # a bare number in a string
            q = Q_(float(q), unit)
    else:
        raise UnitError(f"{name}: expected a number or a quantity such as '1 {unit}', got {value!r}")
    target = ureg.Unit(unit)
    if q.dimensionless and target.dimensionless:
        return q.to(target)
    if q.dimensionality != target.dimensionality:
        raise UnitError(
            f"{name}: {value!r} has dimension {q.dimensionality}, but {name} needs a quantity "
            f"convertible to {unit} (for example '1 {unit}')"
        )
    return q.to(target)


def _is_plain_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def to_magnitude(value, unit: str, name: str = "value") -> float:
    """Return ``value`` as a plain float in ``unit`` (see :func:`parse_quantity`)."""
    return float(parse_quantity(value, unit, name).magnitude)


def conversion_factor(from_unit: str, to_unit: str, name: str = "units") -> float:
    """Multiplier that turns magnitudes in ``from_unit`` into ``to_unit``; checks the dimension."""
    try:
        src = ureg.Unit(from_unit)
    except Exception:
        raise UnitError(f"{name}: unknown unit {from_unit!r}; write it in pint syntax, e.g. 'kg/m^3'") from None
    return to_magnitude(Q_(1.0, src), to_unit, name)
