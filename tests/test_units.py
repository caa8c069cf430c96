"""Tests for tco.units: parsing quantities to SI and display conversions."""
import numpy as np
import pytest
import scipy.constants

from tco.units import (G, J_PER_KWH, KG_PER_LB, M3_PER_US_GALLON, M_PER_MILE, UnitError,
                       from_si, mpg_us, to_si)


def test_standard_gravity_matches_scipy():
    # CGPM 1901 standard gravity, as published in scipy.constants.g (CODATA).
    assert G == scipy.constants.g == 9.80665


@pytest.mark.parametrize(
    "text, unit, expected",
    [
        # Exact definitions: international pound 0.45359237 kg and mile 1609.344 m
        # (1959 international yard and pound agreement); US gallon 231 in³ = 3.785411784 L.
        ("73000 lb", "t", 73000 * 0.45359237),
        ("62 mph", "km/h", 62 * 1609.344 / 3600),
        ("36 t", "t", 36000.0),
        ("6.1 m^2", "m^2", 6.1),
        ("6.1 m²", "m^2", 6.1),
        ("1.3 kWh/km", "kWh/km", 1.3 * 3.6e6 / 1000),
        ("1.4 kWh/mi", "kWh/km", 1.4 * 3.6e6 / 1609.344),
        ("2 %", "percent", 0.02),
        ("59 degF", "degC", 288.15),
        ("4.10 / gal", "1/L", 4.10 / 3.785411784e-3),
        ("0.64 gal/h", "L/h", 0.64 * 3.785411784e-3 / 3600),
    ],
)
def test_strings_convert_like_the_unit_definitions(text, unit, expected):
    assert to_si(text, unit) == pytest.approx(expected, rel=1e-12)


def test_numbers_use_the_default_unit():
    assert to_si(80, "km/h") == pytest.approx(80 / 3.6, rel=1e-15)
    assert to_si(15, "degC") == pytest.approx(288.15, rel=1e-15)
    assert to_si(2, "percent") == pytest.approx(0.02)
    assert to_si(450, "kW") == 450_000.0


def test_round_trip_scalar_and_array():
    v = np.array([0.0, 10.0, 25.0])
    assert np.allclose(from_si(to_si(62, "mph"), "mph"), 62)
    assert np.allclose(from_si(v, "km/h"), v * 3.6)
    assert from_si(288.15, "degC") == pytest.approx(15.0)


@pytest.mark.parametrize(
    "text, unit, fragment",
    [
        ("55 kg", "km/h", "is not a speed"),
        ("$0.12/kWh", "1/kWh", "currency sign"),
        ("twelve", "km", "cannot read"),
        ("nan km", "km", "not a finite"),
    ],
)
def test_bad_strings_raise_one_clear_error(text, unit, fragment):
    with pytest.raises(UnitError, match=fragment):
        to_si(text, unit)


def test_booleans_and_other_types_are_rejected():
    with pytest.raises(UnitError):
        to_si(True, "km")
    with pytest.raises(UnitError):
        to_si([1, 2], "km")


def test_conversion_constants_against_pint():
    """The exact factors of tco.units against pint's own definitions (reference library):
    mile 1609.344 m, US gallon 231 in³ = 3.785411784 L, pound 0.45359237 kg (all exact by
    the 1959 international yard and pound agreement), kWh 3.6 MJ."""
    import pint

    ureg = pint.UnitRegistry()
    assert M_PER_MILE == ureg.Quantity(1, "mile").to("m").magnitude
    assert M3_PER_US_GALLON == pytest.approx(ureg.Quantity(1, "gallon").to("m^3").magnitude,
                                             rel=1e-15)
    assert KG_PER_LB == pytest.approx(ureg.Quantity(1, "lb").to("kg").magnitude, rel=1e-15)
    assert J_PER_KWH == ureg.Quantity(1, "kWh").to("J").magnitude


def test_mpg_from_litres_per_100km():
    # 35 L/100 km = 235.215 / 35 = 6.720 mpg (US), the usual conversion constant 235.215
    # (common practice; follows from the exact gallon and mile definitions).
    per_metre = 35e-3 / 100e3
    assert mpg_us(per_metre) == pytest.approx(235.2146 / 35, rel=1e-5)
    assert mpg_us(0.0) == float("inf")
