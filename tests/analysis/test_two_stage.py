"""The two-stage analysis: straight lines against reference libraries, and the global fit."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc
import statsmodels.api as sm
from scipy.stats import linregress

from kinfit.analysis.activation import activation_parameters
from kinfit.analysis.two_stage import order_differences, two_stage, weighted_line
from kinfit.core.errors import KinfitError


def test_unweighted_line_equals_scipy_linregress(arrhenius_study):
    # Reference: scipy.stats.linregress on the same ln k and 1/T values.
    law = arrhenius_study["two_stage"].law("k")
    x, y = 1.0 / law.temperatures, np.log(law.k)
    line = weighted_line(x, y)
    ref = linregress(x, y)
    assert line.slope == pytest.approx(ref.slope, rel=1e-10)
    assert line.intercept == pytest.approx(ref.intercept, rel=1e-10)
    assert line.slope_stderr == pytest.approx(ref.stderr, rel=1e-8)
    assert line.intercept_stderr == pytest.approx(ref.intercept_stderr, rel=1e-8)
    assert line.rvalue == pytest.approx(ref.rvalue, rel=1e-10)


def test_two_stage_arrhenius_line_against_linregress_and_wls(arrhenius_study):
    # The weighted Arrhenius line of the two-stage analysis: its slope and intercept are
    # statsmodels' WLS with weights 1/se(ln k)²; with equal weights both reduce to
    # scipy.stats.linregress (checked on the analysis's own points).
    law = arrhenius_study["two_stage"].law("k")
    x, y, sigma = 1.0 / law.temperatures, np.log(law.k), law.k_stderr / law.k
    design = sm.add_constant(x)
    wls = sm.WLS(y, design, weights=1.0 / sigma ** 2).fit()
    assert law.arrhenius.intercept == pytest.approx(wls.params[0], rel=1e-10)
    assert law.arrhenius.slope == pytest.approx(wls.params[1], rel=1e-10)
    assert law.arrhenius.slope_stderr == pytest.approx(wls.bse[1], rel=1e-8)
    fixed = sm.WLS(y, design, weights=1.0 / sigma ** 2).fit(cov_type="fixed scale",
                                                            cov_kwds={"scale": 1.0})
    assert math.sqrt(law.arrhenius.covariance_weights[0, 0]) == pytest.approx(fixed.bse[1],
                                                                               rel=1e-8)
    equal = weighted_line(x, y, np.full(x.size, 0.3))
    ref = linregress(x, y)
    assert equal.slope == pytest.approx(ref.slope, rel=1e-10)
    assert equal.slope_stderr == pytest.approx(ref.stderr, rel=1e-8)


def test_two_stage_recovers_the_truth(arrhenius_study):
    # Truth of the seeded data (conftest): Ea = 60 kJ/mol, within 3 standard errors.
    analysis = arrhenius_study["two_stage"]
    ea = analysis.law("k").estimate("Ea")
    assert abs(ea.value - arrhenius_study["truth"]["Ea"]) < 3 * ea.stderr
    assert [g.temperature for g in analysis.groups] == [288.15, 298.15, 308.15, 318.15]
    assert all(len(g.runs) == 2 and g.success for g in analysis.groups)
    # Ea from the slope: -slope R (Arrhenius), with R from scipy.constants
    line = analysis.law("k").arrhenius
    assert ea.value == pytest.approx(-line.slope * sc.R / 1e3, rel=1e-12)


def test_global_interval_for_ea_is_no_wider_than_the_two_stage_one(arrhenius_study):
    # The point of the global fit: sharing the order across temperatures keeps the
    # correlations the two-stage method loses.
    (act,) = activation_parameters(arrhenius_study["result"])
    law = arrhenius_study["two_stage"].law("k")
    glob, two = act.estimate("Ea"), law.estimate("Ea")
    assert glob.interval[1] - glob.interval[0] <= two.interval[1] - two.interval[0]
    # also against the two-stage error from the per-temperature errors alone
    weights_only = math.sqrt(law.arrhenius.covariance_weights[0, 0]) * sc.R / 1e3
    assert glob.stderr <= weights_only


def test_eyring_line_gives_enthalpy_and_entropy(arrhenius_study):
    # ln(k/T) = ln(κ k_B/h) + ΔS‡/R − ΔH‡/(RT) (Eyring equation); k in s^-1 here.
    law = arrhenius_study["two_stage"].law("k")
    line = law.eyring
    assert law.estimate("dH").value == pytest.approx(-line.slope * sc.R / 1e3, rel=1e-12)
    assert law.estimate("dS").value == pytest.approx(
        sc.R * (line.intercept - math.log(sc.k / sc.h)), rel=1e-12)
    # Textbook: Ea ≈ ΔH‡ + RT over the range (Atkins; from memory)
    t_mid = 1.0 / np.mean(1.0 / law.temperatures)
    assert law.estimate("Ea").value == pytest.approx(
        law.estimate("dH").value + sc.R * t_mid / 1e3, abs=0.05)


def test_orders_fixed_at_the_global_values(arrhenius_study):
    study = arrhenius_study
    analysis = two_stage(study["experiment"], study["mechanism"], study["result"],
                         orders="global", starts=1)
    assert all(g.values["m"] == study["result"].values["m"] for g in analysis.groups)
    assert all(g.stderr["m"] is None for g in analysis.groups)
    assert order_differences(analysis, study["result"]) == analysis.order_warnings == ()


def test_order_differences_are_reported(arrhenius_study):
    import dataclasses

    study = arrhenius_study
    shifted = dataclasses.replace(study["result"], values={**study["result"].values, "m": 1.5})
    messages = order_differences(study["two_stage"], shifted)
    assert len(messages) == 4 and "may change with temperature" in messages[0]
    assert "combined standard errors" in messages[0]
    assert "k has different units at different temperatures" in messages[0]
    assert order_differences(study["two_stage"], study["result"]) == ()


def test_the_default_is_the_global_orders(arrhenius_study):
    # The default two-stage analysis keeps the global fit's orders, so every k has one
    # unit; without the global fit it is fitted first.
    import inspect

    from kinfit.core.defaults import DEFAULT_TWO_STAGE

    study = arrhenius_study
    assert DEFAULT_TWO_STAGE == "global"
    assert inspect.signature(two_stage).parameters["orders"].default == DEFAULT_TWO_STAGE
    analysis = two_stage(study["experiment"], study["mechanism"], starts=1)
    assert analysis.orders == "global"
    assert all(g.values["m"] == pytest.approx(study["result"].values["m"], rel=1e-6)
               for g in analysis.groups)
    assert len({g.units["k"] for g in analysis.groups}) == 1
    assert not any("different unit" in n for n in analysis.law("k").notes)


def test_free_orders_state_the_units_of_k_at_each_temperature(arrhenius_study):
    # With its own order at each temperature, k at each temperature has the unit of that
    # temperature's overall order: ln k across them mixes units, and the output says so.
    from kinfit.output.temperature import format_activation

    study = arrhenius_study
    analysis = study["two_stage"]
    assert analysis.orders == "free"
    units = [g.units["k"] for g in analysis.groups]
    for g, unit in zip(analysis.groups, units):
        # unit of a rate constant of overall order m: M^(1−m) s^-1
        assert unit == study["experiment"].units.rate_constant(g.values["m"])
    assert len(set(units)) == 4
    (note,) = [n for n in analysis.law("k").notes if "different unit" in n]
    assert all(f"{u} at {g.temperature:.2f} K" in note for g, u in zip(analysis.groups, units))
    assert "not one Arrhenius quantity" in note and "--two-stage global" in note
    text = " ".join(format_activation(activation_parameters(study["result"]), analysis)
                    .split())
    assert "k has the unit of each temperature's own overall order" in text
    assert "unit of k" in text and units[0] in text
    assert analysis.to_dict()["groups"][0]["units"] == {"k": units[0]}


def test_errors(arrhenius_study):
    study = arrhenius_study
    with pytest.raises(KinfitError, match="orders must be one of free, global"):
        two_stage(study["experiment"], study["mechanism"], orders="both")
    with pytest.raises(KinfitError, match="at least two points"):
        weighted_line([1.0], [2.0])
    with pytest.raises(KinfitError, match="different x"):
        weighted_line([1.0, 1.0], [2.0, 3.0])
    with pytest.raises(KinfitError, match="positive, finite uncertainty"):
        weighted_line([1.0, 2.0], [2.0, 3.0], [0.1, 0.0])
