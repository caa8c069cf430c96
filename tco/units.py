"""Units at the edges: parsing quantity inputs with pint and converting for display.

Everything inside the models is SI (m, s, kg, W, J, m³, K, m/s). Users write either a
plain number in a field's documented default unit or a string with units (``"36 t"``,
``"73000 lb"``, ``"62 mph"``, ``"1.3 kWh/km"``); :func:`to_si` turns either into a float
in SI. Display text (metric or US customary) is written by :mod:`tco.report.formatting`.

Money is never a pint quantity: pint silently drops a ``$`` sign, so amounts are plain
numbers in the scenario's declared ISO 4217 currency, and a currency symbol in a
quantity string is rejected with a clear message.
"""
from __future__ import annotations

import re
from functools import lru_cache

import numpy as np
import pint

ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
ureg.define("percent_grade = 0.01 = pct_grade")
Q_ = ureg.Quantity

#: Standard acceleration of gravity [m/s²] (CGPM 1901; equals ``scipy.constants.g``).
G = 9.80665
#: Joules in one kilowatt-hour [J/kWh] (exact: 1000 W × 3600 s).
J_PER_KWH = 3.6e6
#: Metres in one international mile [m/mi] (exact, 1959 international yard and pound).
M_PER_MILE = 1609.344
#: Cubic metres in one US liquid gallon [m³/gal] (exact: 231 in³).
M3_PER_US_GALLON = 3.785411784e-3
#: Kilograms in one avoirdupois pound [kg/lb] (exact, 1959 agreement).
KG_PER_LB = 0.45359237

_CURRENCY_SIGNS = re.compile(r"[$€£¥₹]")


class UnitError(ValueError):
    """A quantity string that cannot be read in the expected unit."""


@lru_cache(maxsize=512)
def _si_factor(unit: str) -> tuple[float, float, str]:
    """Scale and offset taking ``unit`` to its SI base unit, and the base unit's name."""
    try:
        q = Q_(1.0, unit).to_base_units()
        zero = Q_(0.0, unit).to_base_units().magnitude
    except ValueError:  # a scaled unit such as "L/(100 km)"
        q = ureg.parse_expression(unit).to_base_units()
        zero = 0.0
    return q.magnitude - zero, zero, str(q.units)


#: Longest quantity string read ("1.3 kWh/km", "823.1 lb/MWh" ...). [characters]
MAX_QUANTITY_TEXT = 100
_POWER = re.compile(r"(\*\*|\^)\s*\(?\s*([-+]?[\d.]+)")


def _parse_string(text: str) -> pint.Quantity:
    if len(text) > MAX_QUANTITY_TEXT:
        from tco.report import formatting as fm  # here: formatting imports this module

        raise UnitError(f"a quantity is at most {fm.count(MAX_QUANTITY_TEXT)} characters "
                        f"(got {fm.count(len(text))})")
    # a power is a unit's exponent (m^2, m**3): refuse big ones before pint evaluates them
    # (2**2000 is an integer too large for a float; 9**9**9 would take hours)
    if text.count("**") + text.count("^") > 3 or any(
            abs(float(m.group(2))) > 4 for m in _POWER.finditer(text)
            if m.group(2).strip(".")):
        raise UnitError(f"cannot read '{_short(text)}' as a quantity (exponents of units "
                        "are at most 4)")
    if _CURRENCY_SIGNS.search(text):
        raise UnitError(
            f"'{text}' has a currency sign: write amounts as plain numbers in the "
            "scenario's currency (study.currency), e.g. 120000"
        )
    cleaned = text.strip().replace("%", " percent").replace("²", "^2").replace("³", "^3")
    try:
        q = ureg.parse_expression(cleaned)
    except Exception as exc:  # pint raises several unrelated types
        raise UnitError(f"cannot read '{text}' as a quantity ({type(exc).__name__})") from None
    if not isinstance(q, pint.Quantity):
        q = Q_(float(q), "")
    return q


def to_si(value: float | int | str, unit: str) -> float:
    """Convert a user's value to SI.

    Parameters
    ----------
    value : float, int or str
        A number in ``unit``, or a string with its own unit (``"62 mph"``).
    unit : str
        The field's documented default unit, as pint writes it (``"km/h"``, ``"t"``).

    Returns
    -------
    float
        The value in the SI base unit of ``unit``'s dimension.

    Raises
    ------
    UnitError
        When the string cannot be parsed or has the wrong dimension.

    Examples
    --------
    >>> round(to_si("62 mph", "km/h"), 4)
    27.7165
    >>> to_si(36, "t")
    36000.0
    """
    if isinstance(value, bool):
        raise UnitError("expected a number or a quantity string, got true/false")
    if isinstance(value, (int, float, np.integer, np.floating)):
        scale, offset, _ = _si_factor(unit)
        try:
            out = float(value) * scale + offset
        except OverflowError:  # an integer beyond the range of a float
            raise UnitError("is too large to be a number") from None
    elif isinstance(value, str):
        q = _parse_string(value)
        target = ureg.parse_expression(unit) if "(" in unit else Q_(1.0, unit)
        if q.dimensionality != target.dimensionality:
            if not q._units:  # pint's unitless is true for "%" too; this is "no unit at all"
                # a bare number inside a string ("12"): read it in the default unit
                try:
                    return to_si(float(q.magnitude), unit)
                except OverflowError:
                    raise UnitError(f"'{_short(value)}' is too large to be a number") from None
            # A unit of the wrong dimension, including a dimensionless one such as "%" on
            # a length: never guess what was meant.
            expected = f"a unit like '{unit}'" if unit else "a plain number or a '%'"
            raise UnitError(
                f"'{_short(value)}' is not {_a(_dimension_name(unit))}: its unit "
                f"'{_unit_text(q)}' is {_given_dimension(q)}; expected {expected}"
            )
        try:
            out = float(q.to_base_units().magnitude)
        except OverflowError:
            raise UnitError(f"'{_short(value)}' is too large to be a number") from None
    else:
        raise UnitError(f"expected a number or a quantity string, got {type(value).__name__}")
    if not np.isfinite(out):
        raise UnitError(f"'{value}' is not a finite number")
    return out


def from_si(value, unit: str):
    """Convert an SI value (scalar or array) to ``unit``."""
    scale, offset, _ = _si_factor(unit)
    return (np.asarray(value, dtype=float) - offset) / scale if not np.isscalar(value) \
        else (float(value) - offset) / scale


def si_unit_of(unit: str) -> str:
    """Name of the SI base unit for ``unit``'s dimension (``"km/h"`` -> ``"meter / second"``)."""
    return _si_factor(unit)[2]


_DIMENSION_NAMES = {
    "[length]": "length",
    "[mass]": "mass",
    "[time]": "time",
    "[length] / [time]": "speed",
    "[length] ** 2": "area",
    "[length] ** 3": "volume",
    "[mass] * [length] ** 2 / [time] ** 3": "power",
    "[mass] * [length] ** 2 / [time] ** 2": "energy",
    "[temperature]": "temperature",
    "[mass] / [length] ** 3": "density",
    "[mass] * [length] / [time] ** 2": "force",
    "[mass] * [length] / [time] ** 2 / [length]": "energy per distance",
}
_DIMENSION_NAMES.update({
    str(Q_(1.0, unit).dimensionality): name
    for unit, name in (("1/km", "price per distance"), ("1/L", "price per volume"),
                       ("1/kWh", "price per energy"), ("1/kW", "price per power"),
                       ("1/h", "price per time"), ("g/kWh", "mass per energy"),
                       ("kg/L", "density"), ("kW/K", "power per kelvin"),
                       ("s/m", "time per distance"), ("m/s^2", "acceleration"),
                       ("L/h", "volume per time"), ("MJ/kg", "energy per mass"))
})


def _short(text: str, limit: int = 40) -> str:
    """``text`` cut to ``limit`` characters for an error message."""
    text = str(text)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _unit_text(q: pint.Quantity) -> str:
    return _short(f"{q.units:~}" or str(q.units), 30)


def _given_dimension(q: pint.Quantity) -> str:
    if q.dimensionless:
        return "dimensionless"
    dim = str(q.dimensionality)
    name = _DIMENSION_NAMES.get(dim)
    return _a(name) if name else f"of dimension {dim}"


def _a(noun: str) -> str:
    return ("an " if noun[:1] in "aeiou" else "a ") + noun


def _dimension_name(unit: str) -> str:
    dim = str(ureg.parse_expression(unit).dimensionality) if "(" in unit \
        else str(Q_(1.0, unit).dimensionality)
    if dim == "dimensionless":
        return "plain number (dimensionless)"
    return _DIMENSION_NAMES.get(dim, f"quantity of dimension {dim}")


def mpg_us(volume_per_distance_si: float) -> float:
    """Miles per US gallon from fuel use [m³/m]; ``inf`` for zero use."""
    if volume_per_distance_si <= 0:
        return float("inf")
    return 1.0 / from_si(volume_per_distance_si, "gal/mi")
