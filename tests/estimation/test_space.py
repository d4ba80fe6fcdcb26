"""The inference scale, default priors and the noise conventions of the likelihood."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import write_line_problem
from scipy import stats

from kinfit.core.errors import KinfitError
from kinfit.estimation.likelihood import gaussian_log_likelihood
from kinfit.estimation.space import parameter_space
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.problem import build_problem


def _problem(folder, declared=True):
    paths = write_line_problem(folder, declared=declared)
    return build_problem(load_mechanism(paths["model"]), load_experiment(paths["experiment"]))


def test_layout_scales_and_default_priors(tmp_path):
    space = parameter_space(_problem(tmp_path))
    assert space.names == ("k", "A_0_r1")
    assert space.labels == ("log10_k", "A_0_r1")
    assert space.noise == "declared"
    assert [p.kind for p in space.priors] == ["uniform", "uniform"]   # k's from the model file
    assert space.upper[0] == 0.0 and space.lower[0] == -math.inf     # log10 of [0, 1]
    values = space.to_values(np.array([[math.log10(0.05), 1.2]]))
    np.testing.assert_allclose(values, [[0.05, 1.2]])


def test_uniform_prior_on_k_seen_from_log10_k(tmp_path):
    # change of variables: a flat density in k is ∝ k in u = log10 k
    space = parameter_space(_problem(tmp_path))
    u = np.array([[math.log10(0.01), 1.0], [math.log10(0.1), 1.0]])
    lp = space.log_prior(u)
    assert lp[1] - lp[0] == pytest.approx(math.log(10.0))
    assert space.log_prior(np.array([[0.5, 1.0]]))[0] == -np.inf     # k = 3.2 > max 1


def test_unknown_noise_adds_one_sigma_per_species(tmp_path):
    problem = _problem(tmp_path, declared=False)
    space = parameter_space(problem)
    assert space.noise == "per-species"
    assert space.names == ("k", "A_0_r1", "sigma_A")
    assert space.priors[-1].kind == "log-uniform"
    shared = parameter_space(problem, noise="shared")
    assert shared.names[-1] == "sigma"
    with pytest.raises(KinfitError, match="has no \\[noise\\] table"):
        parameter_space(problem, noise="declared")
    with pytest.raises(KinfitError, match="noise 'loud' is not known"):
        parameter_space(problem, noise="loud")


def test_per_species_likelihood_matches_scipy(tmp_path):
    # reference: a sum of scipy.stats.norm.logpdf over the points
    problem = _problem(tmp_path, declared=False)
    space = parameter_space(problem)
    u = np.array([[math.log10(0.05), 1.0, math.log10(0.02)]])
    res = problem.residuals(space.to_values(u))
    expected = stats.norm(0.0, 0.02).logpdf(res[0]).sum()
    assert space.log_likelihood(res, u)[0] == pytest.approx(expected, rel=1e-12)


def test_shared_sigma_maximised_is_the_fits_concentrated_likelihood(tmp_path):
    # consistency with kinfit.estimation.likelihood: max over σ of the shared-σ likelihood
    # is -N/2 (ln(2π RSS/N) + 1), the convention of the fit (statsmodels' OLS llf)
    problem = _problem(tmp_path, declared=False)
    space = parameter_space(problem, noise="shared")
    u = np.array([[math.log10(0.05), 1.0, 0.0]])
    res = problem.residuals(space.to_values(u))
    sigma_hat = math.sqrt(float(res[0] @ res[0]) / res.shape[1])
    u[0, 2] = math.log10(sigma_hat)
    concentrated = gaussian_log_likelihood(res)[0]
    assert space.log_likelihood(res, u)[0] == pytest.approx(concentrated, rel=1e-12)
    u[0, 2] = math.log10(1.1 * sigma_hat)
    assert space.log_likelihood(res, u)[0] < concentrated


def test_noise_name_clash(files):
    files("m.toml", """
        [[steps]]
        reaction = "A -> P"
        rate = "sigma_A * [A]"
        [parameters]
        sigma_A = { value = 0.1, min = 0 }
    """)
    paths = write_line_problem(files.folder, declared=False)
    problem = build_problem(load_mechanism(files.folder / "m.toml"),
                            load_experiment(paths["experiment"]))
    with pytest.raises(KinfitError, match="names the noise level 'sigma_A'"):
        parameter_space(problem)
