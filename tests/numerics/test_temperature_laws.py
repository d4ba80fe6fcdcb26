"""Arithmetic of the temperature laws: Arrhenius and Eyring k(T), T_ref, linear forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from kinfit.core.errors import KinfitError
from kinfit.inputs.temperature import ARRHENIUS, EYRING, RateLaw, TemperatureSpec
from kinfit.numerics.temperature_laws import (
    join_temperatures,
    linear_forms,
    ln_rate_form,
    rate_constant,
    reference_temperature,
)


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
