"""Temperature laws as declared: the constants and the [temperature] table of a model file."""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
import scipy.constants as sc
from hypothesis import given, settings
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError
from kinfit.inputs import temperature as tm
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.inputs.temperature import ARRHENIUS, RateLaw, parse_temperature


def test_constants_are_codata_from_scipy():
    # CODATA values through scipy.constants; nothing typed by hand.
    assert tm.R == sc.R and tm.K_B == sc.k and tm.H == sc.h
    assert tm.R == pytest.approx(sc.N_A * sc.k, rel=1e-12)   # R = N_A k_B (exact in SI 2019)
    assert tm.STANDARD_TEMPERATURE == pytest.approx(sc.convert_temperature(25.0, "C", "K"))


def test_no_hand_typed_physical_constants_in_the_code():
    # Leading digits of R, k_B, h and the 0 °C offset must not appear as literals.
    root = Path(tm.__file__).parents[1]          # the whole package, every layer
    pattern = re.compile(r"8\.314|1\.380649|6\.626|273\.15")
    offenders = [p.name for p in root.rglob("*.py") if pattern.search(p.read_text("utf-8"))]
    assert offenders == []


# ------------------------------------------------------------- model files

MODEL = """
[[steps]]
reaction = "A -> P"
rate = "k * [A]"
[parameters]
k = { value = 0.1, min = 0 }
Ea = { value = 50 }
[temperature]
"""


def test_model_file_declares_a_law():
    mech = mechanism_from_text(MODEL + 'arrhenius = { k = "Ea" }\nreference = "25 degC"\n')
    assert mech.temperature.laws == (RateLaw("k", ARRHENIUS, "Ea"),)
    assert mech.temperature.reference == pytest.approx(sc.convert_temperature(25, "C", "K"))
    assert mech.parameters["Ea"].role == "activation energy"
    assert mech.parameters["Ea"].min == -math.inf
    mech = mechanism_from_text(MODEL.replace("Ea", "dH") + 'eyring = { k = "dH" }\nkappa = 0.5\n')
    assert mech.parameters["dH"].role == "activation enthalpy"
    assert mech.temperature.kappa == 0.5


@pytest.mark.parametrize("table, message", [
    ('arrhenius = { k = "Ea" }\nwarm = 1\n', r"line 10 \(temperature.warm\): unknown key 'warm'"),
    ("", "no rate constant is made temperature-dependent"),
    ('arrhenius = "Ea"\n', "expected a table of rate constant"),
    ('arrhenius = { k = 5 }\n', "5 is not a parameter name"),
    ('arrhenius = { k = "k" }\n', "cannot be its own activation energy"),
    ('arrhenius = { k = "Ea" }\neyring = { k = "Eb" }\n', "k appears twice"),
    ('arrhenius = { k = "Ea" }\nkappa = 0\n', "transmission coefficient must be a positive"),
    ('arrhenius = { k = "Ea" }\nreference = -5\n', "above absolute zero"),
    ('arrhenius = { k = "Ea" }\nreference = "warm"\n', "expected a temperature in kelvin"),
    ('arrhenius = { k = "Ea" }\nreference = "25 m"\n', "cannot read '25 m' as a temperature"),
    ('arrhenius = { Ea = "k" }\n', "Ea is not in any rate law"),
    ('arrhenius = { k = "Eb" }\n', "the activation energy Eb is not defined"),
])
def test_model_file_errors(table, message):
    with pytest.raises(KinfitError, match=message):
        mechanism_from_text(MODEL + table)


def test_energy_used_in_a_rate_law_is_refused():
    text = MODEL.replace('rate = "k * [A]"', 'rate = "k * [A]^Ea"') + 'arrhenius = { k = "Ea" }\n'
    with pytest.raises(KinfitError, match="Ea is used in a rate law"):
        mechanism_from_text(text)


_VALUES = st.recursive(
    st.none() | st.booleans() | st.integers(-10, 400) | st.floats(allow_nan=True)
    | st.text(max_size=12),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=8), inner,
                                                                max_size=3),
    max_leaves=8)


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(st.sampled_from(["arrhenius", "eyring", "kappa", "reference", "x"])
                       | st.text(max_size=8), _VALUES, max_size=4))
def test_temperature_table_parser_raises_only_its_own_error(raw):
    # Property: any table gives a TemperatureSpec or a KinfitError, nothing else.
    try:
        spec = parse_temperature(raw, "[temperature]\n", "m.toml")
    except KinfitError:
        return
    assert spec.laws and spec.kappa > 0


# --------------------------------------------------- temperatures against the runs

def test_plausible_range_is_that_of_solution_kinetics():
    # 150-700 K (common practice): below, most solvents are frozen; above, most organic
    # molecules decompose; 25 (°C read as K) lies far below
    low, high = tm.PLAUSIBLE_KELVIN
    assert low < sc.convert_temperature(-78, "C", "K")      # dry-ice bath, still plausible
    assert high > sc.convert_temperature(300, "C", "K")
    assert not low <= 25.0 <= high


def test_reference_outside_the_runs_is_named():
    # runs at 10-50 °C meant, read as 10-50 K; reference 25 °C (scipy.constants conversion)
    mech = mechanism_from_text(MODEL + 'arrhenius = { k = "Ea" }\nreference = "25 degC"\n',
                               source="m.toml")
    message = tm.reference_warning(mech.temperature, [10.0, 30.0, 50.0], "m.toml")
    assert message.startswith("m.toml: the reference temperature 298.15 K (25.0 °C) lies "
                              "outside the runs' temperatures 10.00–50.00 K")
    assert "[units] temperature" in message
    inside = [sc.convert_temperature(t, "C", "K") for t in (10.0, 30.0, 50.0)]
    assert tm.reference_warning(mech.temperature, inside) is None
    assert tm.reference_warning(mech.temperature, [None, None]) is None
    # the default reference (centre of the runs' 1/T) is always inside
    default = mechanism_from_text(MODEL + 'arrhenius = { k = "Ea" }\n')
    assert tm.reference_warning(default.temperature, [10.0, 50.0]) is None
