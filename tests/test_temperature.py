"""Temperature laws: constants, Arrhenius and Eyring arithmetic, the [temperature] table."""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as sc
from hypothesis import given, settings, strategies as st

from kinfit.inputs import temperature as tm
from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.inputs.temperature import (ARRHENIUS, EYRING, TemperatureSpec, RateLaw, join_temperatures,
                                linear_forms, ln_rate_form, parse_temperature, rate_constant,
                                reference_temperature)


def test_constants_are_codata_from_scipy():
    # CODATA values through scipy.constants; nothing typed by hand.
    assert tm.R == sc.R and tm.K_B == sc.k and tm.H == sc.h
    assert tm.R == pytest.approx(sc.N_A * sc.k, rel=1e-12)   # R = N_A k_B (exact in SI 2019)
    assert tm.STANDARD_TEMPERATURE == pytest.approx(sc.convert_temperature(25.0, "C", "K"))


def test_no_hand_typed_physical_constants_in_the_code():
    # Leading digits of R, k_B, h and the 0 °C offset must not appear as literals.
    root = Path(tm.__file__).parent
    pattern = re.compile(r"8\.314|1\.380649|6\.626|273\.15")
    offenders = [p.name for p in root.glob("*.py") if pattern.search(p.read_text("utf-8"))]
    assert offenders == []


def test_arrhenius_closed_form():
    # k(T) = k_ref exp[-Ea/R (1/T - 1/T_ref)] (Arrhenius equation), computed here.
    k = rate_constant(0.02, 60.0, 318.15, 298.15, ARRHENIUS)
    expected = 0.02 * math.exp(-60e3 / sc.R * (1 / 318.15 - 1 / 298.15))
    assert k == pytest.approx(expected, rel=1e-14)
    assert rate_constant(0.02, 60.0, 298.15, 298.15) == pytest.approx(0.02, rel=1e-15)


def test_eyring_form_equals_the_eyring_equation():
    # Eyring equation k = (κ k_B T/h) exp(ΔS‡/R) exp(-ΔH‡/RT) (physical-chemistry
    # textbook, e.g. Atkins' Physical Chemistry, activated-complex theory; from memory).
    dh, ds, t_ref = 75.0, -30.0, 300.0

    def eyring(T):
        return sc.k * T / sc.h * math.exp(ds / sc.R) * math.exp(-dh * 1e3 / (sc.R * T))

    for T in (280.0, 300.0, 350.0):
        assert rate_constant(eyring(t_ref), dh, T, t_ref, EYRING) == pytest.approx(eyring(T),
                                                                                   rel=1e-12)


def test_ten_kelvin_doubling_rule_of_thumb():
    # Common practice: many reactions near room temperature roughly double in rate for
    # a 10 K rise. Between 298 and 308 K that is Ea = R ln 2 / (1/298 - 1/308),
    # computed here, about 53 kJ/mol.
    ea = sc.R * math.log(2.0) / (1 / 298.0 - 1 / 308.0) / 1e3
    assert ea == pytest.approx(53.0, abs=0.5)
    assert rate_constant(1.0, ea, 308.0, 298.0) == pytest.approx(2.0, rel=1e-12)
    assert rate_constant(1.0, 53.0, 308.0, 298.0) == pytest.approx(2.0, rel=0.01)


def test_activation_energy_is_enthalpy_plus_rt_for_the_eyring_form():
    # Textbook relation for a reaction in solution: Ea = ΔH‡ + RT (Atkins' Physical
    # Chemistry, activated-complex theory; from memory), Ea defined as R T² d ln k/dT.
    dh, t_ref = 80.0, 310.0
    for T in (290.0, 310.0, 330.0):
        step = 1e-3
        slope = (math.log(rate_constant(1.0, dh, T + step, t_ref, EYRING))
                 - math.log(rate_constant(1.0, dh, T - step, t_ref, EYRING))) / (2 * step)
        ea = sc.R * T ** 2 * slope / 1e3
        assert ea == pytest.approx(dh + sc.R * T / 1e3, rel=1e-8)
    forms = linear_forms(EYRING, t_ref)
    assert forms["Ea"].value(0.0, dh) == pytest.approx(dh + sc.R * t_ref / 1e3, rel=1e-14)


def test_prefactor_and_entropy_textbook_relation():
    # A = (e k_B T/h) exp(ΔS‡/R) for a first-order rate constant in s^-1 (Atkins'
    # Physical Chemistry, activated-complex theory; from memory), both from an
    # Arrhenius fit's (ln k_ref, Ea) through the linear forms.
    t_ref, ln_k, ea = 305.0, math.log(3.0e-3), 70.0
    forms = linear_forms(ARRHENIUS, t_ref, kappa=1.0, si_factor=1.0)
    a = math.exp(forms["lnA"].value(ln_k, ea))
    ds = forms["dS"].value(ln_k, ea)
    assert a == pytest.approx(math.e * sc.k * t_ref / sc.h * math.exp(ds / sc.R), rel=1e-12)
    assert a == pytest.approx(3.0e-3 * math.exp(ea * 1e3 / (sc.R * t_ref)), rel=1e-12)
    dh = forms["dH"].value(ln_k, ea)
    assert forms["dG"].value(ln_k, ea) == pytest.approx(dh - 298.15 * ds / 1e3, rel=1e-12)


def test_ln_rate_form_matches_rate_constant():
    for law in (ARRHENIUS, EYRING):
        form = ln_rate_form(law, 300.0, 340.0)
        assert math.exp(form.value(math.log(0.5), 65.0)) == pytest.approx(
            rate_constant(0.5, 65.0, 340.0, 300.0, law), rel=1e-13)


def test_reference_is_the_centre_of_the_inverse_temperature_range():
    spec = TemperatureSpec((RateLaw("k", ARRHENIUS, "Ea"),))
    t_ref = reference_temperature(spec, [288.15, 300.0, 318.15])
    assert 1 / t_ref == pytest.approx((1 / 288.15 + 1 / 318.15) / 2, rel=1e-14)
    assert reference_temperature(TemperatureSpec(spec.laws, reference=310.0), [280.0]) == 310.0


def test_join_groups_runs_by_temperature():
    spec = TemperatureSpec((RateLaw("k", ARRHENIUS, "Ea"),))
    layout = join_temperatures(spec, ["k", "m", "Ea"], [300.0, 320.0, 300.0],
                               {"k": True, "m": True, "Ea": True})
    assert layout.run_group == (0, 1, 0)
    np.testing.assert_array_equal(layout.temperatures, [300.0, 320.0])
    rows = layout.group_values(np.array([[0.1, 1.0, 50.0]]))
    assert rows[1][0, 0] == pytest.approx(float(rate_constant(0.1, 50.0, 320.0,
                                                              layout.reference)))
    assert rows[1][0, 1:].tolist() == [1.0, 50.0]


def test_join_errors():
    spec = TemperatureSpec((RateLaw("k", ARRHENIUS, "Ea"),))
    with pytest.raises(KinfitError, match="run 'b'.*needs a temperature"):
        join_temperatures(spec, ["k", "Ea"], [300.0, None], {"Ea": True}, "e.toml", ["a", "b"])
    with pytest.raises(KinfitError, match="all runs are at 300.00 K.*cannot be fitted"):
        join_temperatures(spec, ["k", "Ea"], [300.0, 300.0], {"Ea": True}, "e.toml")
    join_temperatures(spec, ["k", "Ea"], [300.0, 300.0], {"Ea": False})   # fixed Ea: fine


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
