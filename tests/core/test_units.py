"""Units through pint, and the units of rate constants."""

from __future__ import annotations

import pytest
from scipy.constants import convert_temperature

from kinfit.core.errors import KinfitError
from kinfit.core.units import (
    check_unit,
    conversion_factor,
    format_power,
    parse_units,
    rate_constant_unit,
    to_kelvin,
)


@pytest.mark.parametrize("text", ["M", "mM", "uM", "µM", "μM", "nM", "mol/L", "mol/dm^3",
                                  "mmol/L", "mol/kg", "mg/L"])
def test_concentration_units(text):
    assert check_unit(text, "concentration", "here") == text


@pytest.mark.parametrize("text", ["s", "min", "h", "ms", "d"])
def test_time_units(text):
    assert check_unit(text, "time", "here") == text


@pytest.mark.parametrize("text, kind, message", [
    ("blorps", "time", "cannot read the unit"),
    ("M", "time", "is not a time unit"),
    ("s", "concentration", "is not a concentration unit"),
    ("", "time", "expected a time unit"),
    (3, "time", "expected a time unit"),
])
def test_refused_units(text, kind, message):
    with pytest.raises(KinfitError, match=message):
        check_unit(text, kind, "here")


def test_parse_units_defaults_and_unknown_keys():
    units = parse_units({}, "e.toml")
    assert (units.time, units.concentration, units.temperature) == ("s", "M", "K")
    with pytest.raises(KinfitError, match="unknown key"):
        parse_units({"length": "m"}, "e.toml")


def test_temperatures_against_scipy_constants():
    # scipy.constants.convert_temperature as the outside reference
    assert to_kelvin(25.0, "degC") == pytest.approx(convert_temperature(25.0, "C", "K"))
    assert to_kelvin(300.0, "K") == 300.0


def test_conversion_factor():
    # 1 mM = 1000 µM (SI prefixes, BIPM SI Brochure)
    assert conversion_factor("mM", "uM") == pytest.approx(1000.0)
    assert conversion_factor("min", "s") == pytest.approx(60.0)


@pytest.mark.parametrize("order, expected", [
    # IUPAC Gold Book "order of reaction"/"rate coefficient" (from memory):
    # k has units concentration^(1-n) time^-1
    (0, "M s^-1"), (1, "s^-1"), (2, "M^-1 s^-1"), (3, "M^-2 s^-1"), (1.5, "M^-0.5 s^-1"),
    (2.5, "M^-1.5 s^-1"),
])
def test_rate_constant_units(order, expected):
    assert rate_constant_unit("M", "s", order) == expected


def test_compound_units_are_parenthesised():
    assert rate_constant_unit("mol/L", "min", 2) == "(mol/L)^-1 min^-1"
    assert format_power("mM", 0) == ""
    assert rate_constant_unit("M", "s", float("nan")) is None


def test_one_error_type_from_the_pint_adapter():
    # every pint failure arrives as UnitError; conversions checked against SI definitions
    # (1 mm = 0.1 cm; 0 °C = scipy.constants.zero_Celsius K)
    from scipy.constants import zero_Celsius

    from kinfit.core.units import UnitError, conversion_factor, quantity_in, to_kelvin

    assert quantity_in("2 mm", "cm") == pytest.approx(0.2)
    assert to_kelvin(25.0, "degC") == pytest.approx(zero_Celsius + 25.0)
    assert conversion_factor("mM", "M") == pytest.approx(1e-3)
    for bad in (lambda: conversion_factor("M", "g/L"), lambda: to_kelvin(1.0, "s"),
                lambda: quantity_in("2 parsecs of nothing", "cm"),
                lambda: conversion_factor("furlongs per", "M")):
        with pytest.raises(UnitError):
            bad()
