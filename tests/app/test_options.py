"""Option values of the command line: pairs, lists, and the units of a simulation."""

from __future__ import annotations

import pytest

from kinfit.app.options import (
    check_same_units,
    numbers,
    pairs,
    parse_components,
    simulation_units,
)
from kinfit.core.errors import KinfitError
from kinfit.core.units import Units


def test_pairs_numbers_and_components():
    assert pairs(["A=0.1", " B = 2e-3"], "--initial") == {"A": 0.1, "B": 0.002}
    with pytest.raises(KinfitError, match=r"--set 'k': expected NAME=NUMBER"):
        pairs(["k"], "--set")
    assert numbers("420, 560", "--wavelengths") == [420.0, 560.0] and numbers("", "x") is None
    with pytest.raises(KinfitError, match="expected numbers separated by commas"):
        numbers("blue", "--wavelengths")
    assert parse_components("auto") == "auto" and parse_components("3") == 3
    with pytest.raises(KinfitError, match="expected auto, all or a whole number"):
        parse_components("0")


def test_a_simulation_from_the_model_needs_both_units():
    assert simulation_units("min", "mM", None) == Units("min", "mM")
    assert simulation_units(None, None, "result.json") is None        # the fit's units
    with pytest.raises(KinfitError, match=r"^give --time-unit and --concentration-unit: "
                                          r"the model file's values carry no units"):
        simulation_units(None, None, None)
    with pytest.raises(KinfitError, match=r"^give --concentration-unit:"):
        simulation_units("s", None, None)
    with pytest.raises(KinfitError, match="'mM' is not a time unit"):
        simulation_units("mM", "mM", None)


def test_units_given_beside_a_fit_must_be_the_fit_s():
    fitted = Units("min", "mM")
    check_same_units(fitted, None, None, "r.json")
    check_same_units(fitted, "minute", "mmol/L", "r.json")      # the same, written otherwise
    with pytest.raises(KinfitError, match=r"--time-unit h: the fit in r\.json is in min"):
        check_same_units(fitted, "h", None, "r.json")
    with pytest.raises(KinfitError, match=r"--concentration-unit M: the fit in r\.json is in mM"):
        check_same_units(fitted, None, "M", "r.json")
    with pytest.raises(KinfitError, match="is in mM"):
        check_same_units(fitted, None, "mol/kg", "r.json")      # molal: not convertible
