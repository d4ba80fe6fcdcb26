"""The likelihood conventions and the information criteria against reference formulas."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import write_line_problem
from scipy.stats import norm

from kinfit.estimation.least_squares import fit
from kinfit.estimation.likelihood import (
    count_parameters,
    deviance,
    gaussian_log_likelihood,
    grouped_log_likelihood,
    information_criteria,
)
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.problem import build_problem


def test_aicc_formula():
    # Hurvich & Tsai (1989): AICc = AIC + 2p(p+1)/(N-p-1)
    crit = information_criteria(-10.0, 20, 3)
    assert crit["aic"] == 26.0
    assert crit["aicc"] == pytest.approx(26.0 + 2 * 3 * 4 / 16)
    assert crit["bic"] == pytest.approx(20.0 + 3 * math.log(20))
    assert information_criteria(-10.0, 4, 3)["aicc"] == math.inf


def test_declared_noise_is_a_sum_of_normal_log_densities():
    # reference: scipy.stats.norm.logpdf summed over the points, each with its own σ
    rng = np.random.default_rng(1)
    sigma = rng.uniform(0.01, 0.1, 40)
    raw = rng.normal(0.0, sigma, (3, 40))
    expected = norm.logpdf(raw, scale=sigma).sum(axis=1)
    np.testing.assert_allclose(gaussian_log_likelihood(raw / sigma, sigma), expected,
                               rtol=1e-12)


def test_estimated_noise_is_the_likelihood_at_the_ml_sigma():
    # reference: with σ̂² = RSS/N the Gaussian log density (scipy.stats.norm) is the
    # concentrated likelihood, and no other σ gives more
    rng = np.random.default_rng(2)
    res = rng.normal(0.0, 0.03, 25)
    sigma_hat = math.sqrt(res @ res / res.size)
    value = gaussian_log_likelihood(res)[0]
    assert value == pytest.approx(norm.logpdf(res, scale=sigma_hat).sum(), rel=1e-12)
    for factor in (0.9, 1.1):
        assert norm.logpdf(res, scale=factor * sigma_hat).sum() < value


def test_grouped_noise_is_a_sum_over_groups():
    # reference: scipy.stats.norm.logpdf with each group's σ
    rng = np.random.default_rng(3)
    groups = np.repeat([0, 1, 0, 2], 6)
    sigmas = np.array([[0.02, 0.5, 0.1], [0.03, 0.4, 0.2]])
    res = rng.normal(0.0, 0.1, (2, groups.size))
    expected = [norm.logpdf(res[i], scale=sigmas[i, groups]).sum() for i in range(2)]
    np.testing.assert_allclose(grouped_log_likelihood(res, sigmas, groups), expected,
                               rtol=1e-12)


@pytest.mark.parametrize("declared", [True, False])
def test_deviance_differences_are_minus_twice_the_log_likelihood_ratio(declared):
    # the profile's deviance drops only terms that are the same for every parameter set
    rng = np.random.default_rng(4)
    sigma = np.full(30, 0.05) if declared else None
    a, b = rng.normal(0.0, 1.0, (2, 30))
    diff = deviance(a, declared) - deviance(b, declared)
    lr = -2.0 * (gaussian_log_likelihood(a, sigma)[0] - gaussian_log_likelihood(b, sigma)[0])
    assert diff == pytest.approx(lr, rel=1e-10)


def test_parameter_count_leaves_the_noise_out(tmp_path):
    # statsmodels' OLS counts the regression coefficients, not σ (df_model + k_constant),
    # and so does kinfit: the straight line has k and A0
    paths = write_line_problem(tmp_path, declared=False)
    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    assert count_parameters(build_problem(mech, exp)) == 2
    result = fit(exp, mech, starts=1)
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit()
    assert ols.df_model + ols.k_constant == result.n_free == 2
    assert result.aic == pytest.approx(ols.aic, abs=1e-7)
    assert result.bic == pytest.approx(ols.bic, abs=1e-7)
