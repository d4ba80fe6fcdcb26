"""Activation parameters from global fits of synthetic runs at four temperatures."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from kinfit.analysis.activation import (
    activation_parameters,
    si_factor,
    with_posterior,
    with_profile,
)
from kinfit.core.errors import KinfitError
from kinfit.core.units import Units
from kinfit.numerics.temperature_laws import rate_constant


def test_arrhenius_study_recovers_ea_and_k_ref(arrhenius_study):
    # The truth the seeded data were made from (conftest), recovered within 3 standard
    # errors (common practice).
    result, truth = arrhenius_study["result"], arrhenius_study["truth"]
    (act,) = activation_parameters(result)
    assert act.reference == pytest.approx(arrhenius_study["reference"], rel=1e-12)
    ea = act.estimate("Ea")
    assert ea.fitted and ea.unit == "kJ/mol"
    assert abs(ea.value - truth["Ea"]) < 3 * ea.stderr
    assert abs(result.values["k"] - truth["k"]) < 3 * result.stderr["k"]
    # A = k_ref exp(Ea/(R T_ref)) (Arrhenius), truth computed here; compared on ln A
    a = act.estimate("A")
    true_a = truth["k"] * math.exp(truth["Ea"] * 1e3 / (sc.R * act.reference))
    assert abs(math.log(a.value) - math.log(true_a)) < 3 * a.stderr / a.value
    assert a.unit == result.units["k"]
    # k at each measured temperature, against the Arrhenius equation with the truth
    for rate in act.rates:
        true_k = truth["k"] * math.exp(-truth["Ea"] * 1e3 / sc.R
                                       * (1 / rate.temperature - 1 / act.reference))
        assert abs(rate.value - true_k) < 3 * rate.stderr
        assert rate.interval[0] < rate.value < rate.interval[1]
        assert not rate.extrapolated


def test_eyring_study_recovers_enthalpy_and_entropy(eyring_study):
    # Truth ΔH‡ = 50 kJ/mol, ΔS‡ = -100 J/(mol K) at 1 mol/L, data in mM and min
    # (conftest); recovered within 3 standard errors, which checks the conversion of
    # k to M^-1 s^-1 as well.
    result, truth = eyring_study["result"], eyring_study["truth"]
    (act,) = activation_parameters(result)
    dh, ds = act.estimate("dH"), act.estimate("dS")
    assert dh.fitted and not ds.fitted
    assert abs(dh.value - truth["dH"]) < 3 * dh.stderr
    assert abs(ds.value - truth["dS"]) < 3 * ds.stderr
    assert ds.unit == "J/(mol K)"
    dg = act.estimate("dG")
    true_dg = truth["dH"] - 298.15 * truth["dS"] / 1e3
    assert abs(dg.value - true_dg) < 3 * dg.stderr


def test_textbook_relations_hold_between_the_reported_parameters(eyring_study):
    # Ea = ΔH‡ + RT and A = (e k_B T/h) exp(ΔS‡/R) (c°)^(1-n) at T_ref (Atkins' Physical
    # Chemistry, activated-complex theory; from memory), with CODATA constants.
    (act,) = activation_parameters(eyring_study["result"])
    e = {x.name: x for x in act.estimates}
    t = act.reference
    assert e["Ea"].value == pytest.approx(e["dH"].value + sc.R * t / 1e3, rel=1e-12)
    assert e["Ea"].stderr == pytest.approx(e["dH"].stderr, rel=1e-12)
    a_si = e["A"].value * act.si_factor                 # M^-1 s^-1
    assert a_si == pytest.approx(math.e * sc.k * t / sc.h * math.exp(e["dS"].value / sc.R),
                                 rel=1e-10)
    assert act.si_factor == pytest.approx(1000.0 / 60.0, rel=1e-12)   # mM^-1 min^-1 -> M^-1 s^-1
    assert e["dG"].value == pytest.approx(e["dH"].value - 298.15 * e["dS"].value / 1e3,
                                          rel=1e-12)


def test_delta_method_matches_monte_carlo(arrhenius_study):
    # Common practice: the delta-method standard errors of the derived quantities agree
    # with the spread of draws from the same Gaussian (seeded); exact here because every
    # quantity is linear in (ln k_ref, Ea).
    (act,) = activation_parameters(arrhenius_study["result"])
    rng = np.random.default_rng(3)
    draws = rng.multivariate_normal(act.center, act.covariance, size=40_000)
    forms = act.forms()
    for e in act.estimates:
        if e.name == "A":
            continue
        spread = np.std(forms[e.name].value(draws[:, 0], draws[:, 1]))
        assert spread == pytest.approx(e.stderr, rel=0.02)


def test_posterior_hook_gives_intervals_from_samples(arrhenius_study):
    # Samples from the fit's own Gaussian: the equal-tailed 95 % posterior interval must
    # match value ± 1.96 se (normal quantile, scipy) to sampling accuracy.
    result = arrhenius_study["result"]
    acts = activation_parameters(result)
    rng = np.random.default_rng(11)
    names = list(result.free_names)
    mean = np.array([result.values[n] for n in names])
    samples = rng.multivariate_normal(mean, result.covariance, size=20_000)
    (act,) = with_posterior(acts, samples, names)
    ea = act.estimate("Ea")
    assert ea.posterior_interval == pytest.approx(ea.interval, abs=0.05 * ea.stderr * 4)
    for rate in act.rates:
        lo, hi = rate.posterior_interval
        assert lo < rate.value < hi
    with pytest.raises(KinfitError, match="2 columns but 3 names"):
        with_posterior(acts, samples[:, :2], names)


def test_profile_hook_carries_the_energy_interval(arrhenius_study):
    (act,) = activation_parameters(arrhenius_study["result"])
    (out,) = with_profile((act,), {"Ea": (59.5, 60.5)})
    assert out.estimate("Ea").profile_interval == (59.5, 60.5)
    shift = sc.R * act.reference / 1e3
    assert out.estimate("dH").profile_interval == pytest.approx((59.5 - shift, 60.5 - shift))
    assert out.estimate("dS").profile_interval is None    # needs a profile of its own


def test_rate_at_flags_temperatures_outside_the_runs(arrhenius_study):
    (act,) = activation_parameters(arrhenius_study["result"])
    inside, outside = act.rate_at(300.0), act.rate_at(340.0)
    assert not inside.extrapolated and outside.extrapolated
    values = arrhenius_study["result"].values
    assert outside.value == pytest.approx(float(rate_constant(values["k"], values["Ea"], 340.0,
                                                              act.reference)), rel=1e-12)
    # the uncertainty grows with distance from T_ref in 1/T
    assert outside.stderr / outside.value > inside.stderr / inside.value


def test_si_factor_through_pint():
    # 1 mM^-1 min^-1 = 1000/60 M^-1 s^-1; a first-order k needs no concentration unit.
    assert si_factor(Units("min", "mM"), 2.0) == pytest.approx(1000.0 / 60.0)
    assert si_factor(Units("h", "mol/kg"), 1.0) == pytest.approx(1.0 / 3600.0)
    assert si_factor(Units("s", "mol/kg"), 2.0) is None
    assert si_factor(Units("s", "M"), None) is None


def test_model_without_temperature_dependence_is_refused(arrhenius_study):
    import dataclasses

    result = arrhenius_study["result"]
    plain = dataclasses.replace(result, mechanism=dataclasses.replace(result.mechanism,
                                                                      temperature=None))
    with pytest.raises(KinfitError, match="declares no temperature dependence"):
        activation_parameters(plain)
    with pytest.raises(KinfitError, match="level must be between 0 and 1"):
        activation_parameters(result, level=1.5)
