"""Residuals, likelihood and information criteria against reference libraries."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from cases import zero_order_case
from scipy.stats import norm

from kinfit.estimation.least_squares import fit
from kinfit.estimation.likelihood import log_likelihood
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.problem import build_problem, residuals


def test_fit_equals_ordinary_least_squares(tmp_path):
    # Reference: statsmodels OLS of [A] on (1, t) — same Gaussian likelihood with
    # unknown σ, constants included (statsmodels documentation: OLS.loglike,
    # RegressionResults.aic/bic count the regression parameters, not σ).
    exp, mech, t, y = zero_order_case(tmp_path)
    ols = sm.OLS(y, sm.add_constant(t)).fit()
    result = fit(exp, mech, starts=1)
    assert result.values["A_0_r1"] == pytest.approx(ols.params[0], rel=1e-7)
    assert result.values["k"] == pytest.approx(-ols.params[1], rel=1e-6)
    assert result.stderr["A_0_r1"] == pytest.approx(ols.bse[0], rel=1e-5)
    assert result.stderr["k"] == pytest.approx(ols.bse[1], rel=1e-5)
    assert result.log_likelihood == pytest.approx(ols.llf, abs=1e-8)
    assert result.aic == pytest.approx(ols.aic, abs=1e-7)
    assert result.bic == pytest.approx(ols.bic, abs=1e-7)
    assert result.chi2 == pytest.approx(ols.ssr, rel=1e-9)
    # lmfit's convention N ln(χ²/N) + 2p differs by the constant N (ln 2π + 1)
    n = result.n_points
    lmfit_aic = n * math.log(result.chi2 / n) + 2 * result.n_free
    assert result.aic - lmfit_aic == pytest.approx(n * (math.log(2 * math.pi) + 1), rel=1e-12)


def test_declared_noise_likelihood_matches_scipy(tmp_path):
    # Reference: scipy.stats.norm.logpdf summed over the points.
    exp, mech, t, y = zero_order_case(tmp_path, noise="[noise]\ndefault = { absolute = 0.02 }")
    values = {"k": 0.05, "A_0_r1": 1.0}
    model = 1.0 - 0.05 * t
    assert log_likelihood(mech, exp, values) == pytest.approx(
        norm.logpdf(y, loc=model, scale=0.02).sum(), rel=1e-9)
    np.testing.assert_allclose(residuals(mech, exp, values), (model - y) / 0.02, rtol=1e-7,
                               atol=1e-7)


def test_problem_layout_and_batch(small):
    exp = load_experiment(small["experiment"])
    mech = load_mechanism(small["model"])
    problem = build_problem(mech, exp)
    assert problem.names == ("k",)
    rows = problem.values_array(np.array([[0.05], [0.06]]))
    res = problem.residuals(rows)
    assert res.shape == (2, 4)
    t = np.array([0, 10, 20, 30.0])
    expected = np.exp(-0.06 * t) - np.array([1.0, 0.6, 0.37, 0.22])
    np.testing.assert_allclose(res[1], expected, rtol=1e-7, atol=1e-9)


def test_time_offset_shifts_the_model(files):
    files("e.toml", """
        [data]
        file = "traces.csv"
        [[runs]]
        name = "r1"
        initial = { A = 1.0 }
        time_offset = { value = 2.0, vary = false }
    """)
    files("traces.csv", "run,time,species,value\nr1,0,A,0.9\nr1,10,A,0.5\nr1,20,A,0.3\n")
    exp = load_experiment(files.folder / "e.toml")
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n'
                               '[parameters]\nk = 0.05\n')
    res = residuals(mech, exp)
    # [Atkins] first order: model at data time t is A0 exp(-k (t + t0))
    model = np.exp(-0.05 * (np.array([0, 10, 20.0]) + 2.0))
    np.testing.assert_allclose(res, model - [0.9, 0.5, 0.3], rtol=1e-7, atol=1e-9)


def test_each_run_gets_the_rate_constant_of_its_temperature(arrhenius_study):
    # Arrhenius equation computed here with scipy.constants.R, against what the problem
    # hands the integrator for each run.
    from scipy.constants import R

    exp, mech = arrhenius_study["experiment"], arrhenius_study["mechanism"]
    problem = build_problem(mech, exp)
    values = problem.values_array({"k": 0.03, "Ea": 70.0})
    t_ref = problem.temperature.reference
    for run, (k, orders) in zip(exp.runs, problem.rate_arrays(values)):
        expected = 0.03 * math.exp(-70e3 / R * (1 / run.temperature - 1 / t_ref))
        assert k[0, 0] == pytest.approx(expected, rel=1e-13)
        assert orders[0, 0, 0] == values[0, problem.names.index("m")]
    # a model without a temperature law keeps one rate constant for every run
    plain = build_problem(mechanism_from_text(
        '[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n[parameters]\nk = 0.1\n'), exp)
    arrays = plain.rate_arrays(plain.values_array({}))
    assert all(a[0] is arrays[0][0] for a in arrays)


@pytest.mark.parametrize("study", ["arrhenius_study", "eyring_study"])
def test_exact_jacobian_of_a_temperature_problem(request, study):
    # The sensitivities with respect to k_ref and the energy, against central finite
    # differences of the residuals (common practice), at a point away from the optimum.
    data = request.getfixturevalue(study)
    problem = build_problem(data["mechanism"], data["experiment"])
    values = problem.values_array(data["result"].values)[0] * 1.02
    res, jac, ok, _ = problem.residuals_jacobian(values)
    assert ok
    for p, name in enumerate(problem.names):
        h = 1e-6 * abs(values[p])
        up, down = values.copy(), values.copy()
        up[p] += h
        down[p] -= h
        fd = (problem.residuals(up)[0] - problem.residuals(down)[0]) / (2 * h)
        scale = np.abs(fd).max()
        assert np.abs(jac[:, p] - fd).max() <= 1e-4 * scale, name
