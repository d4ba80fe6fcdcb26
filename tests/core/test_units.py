"""Units through pint, and the units of rate constants."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants
from scipy.constants import convert_temperature

from kinfit.core.errors import KinfitError
from kinfit.core.units import (
    check_unit,
    conversion_factor,
    format_power,
    parse_units,
    rate_constant_unit,
    read_quantity,
    split_quantity,
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
    assert (units.time, units.concentration, units.temperature) == ("s", "M", None)
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


# ------------------------------------------------- quantities written as text

# Factors to mol/m^3 from outside kinfit: SI prefixes and the litre from scipy.constants
# (CODATA/SI definitions); molar M = mol/L and mol/dm^3 = mol/L by the SI definition of the
# litre (BIPM SI Brochure, table 8).
_TO_MOL_PER_M3 = {
    "M": 1.0 / constants.liter,
    "mM": constants.milli / constants.liter,
    "uM": constants.micro / constants.liter,
    "µM": constants.micro / constants.liter,
    "nM": constants.nano / constants.liter,
    "mol/L": 1.0 / constants.liter,
    "mmol/L": constants.milli / constants.liter,
    "mol/dm^3": 1.0 / constants.liter,
    "mol dm^-3": 1.0 / constants.liter,
}
_SPACES = st.text(alphabet=" \t\u00a0", max_size=3)


@settings(max_examples=300, deadline=None)
@given(value=st.floats(min_value=0.0, max_value=1e6, allow_nan=False),
       style=st.sampled_from(["{!r}", "{:g}", "{:.6e}", "{:.3f}"]),
       unit=st.sampled_from(sorted(_TO_MOL_PER_M3)), target=st.sampled_from(["M", "mM", "uM"]),
       lead=_SPACES, middle=_SPACES, trail=_SPACES)
def test_read_quantity_converts_any_spacing_and_number_form(value, style, unit, target, lead,
                                                            middle, trail):
    number = style.format(value)
    text = f"{lead}{number}{middle}{unit}{trail}"
    got = read_quantity(text, "concentration", target, "e.toml, line 3")
    expected = float(number) * _TO_MOL_PER_M3[unit] / _TO_MOL_PER_M3[target]
    assert got == pytest.approx(expected, rel=1e-12, abs=1e-300)
    assert split_quantity(text) == (float(number), unit)


@settings(max_examples=200, deadline=None)
@given(text=st.text(max_size=20))
def test_read_quantity_returns_a_number_or_refuses_with_the_place(text):
    # any text either converts to a finite number or is refused naming where it was
    try:
        value = read_quantity(text, "concentration", "mM", "e.toml, line 3 (initial.A)")
    except KinfitError as exc:
        assert str(exc).startswith("e.toml, line 3 (initial.A): ")
    else:
        assert math.isfinite(value)


@pytest.mark.parametrize("text, message", [
    ("50 g/L", (r"'50 g/L' cannot be converted to mM, the experiment's concentration unit "
                r".*molar mass")),
    ("1 mol/kg", r"'1 mol/kg' cannot be converted to mM"),
    ("10 s", r"'s' in '10 s' is not a concentration unit"),
    ("10 blorps", r"cannot read the unit 'blorps'"),
    ("10", r"'10' has no unit; write the number without quotes for mM \(10\)"),
    ("ten mM", r"cannot read 'ten mM'; expected a concentration such as \"10 mM\""),
    ("1e999 mM", r"'1e999 mM' is not a finite number"),
    ("10,5 mM", r"cannot read the unit ',5 mM'"),
])
def test_read_quantity_refusals(text, message):
    with pytest.raises(KinfitError, match="^e.toml, line 3: " + message):
        read_quantity(text, "concentration", "mM", "e.toml, line 3")
