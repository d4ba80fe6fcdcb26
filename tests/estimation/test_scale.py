"""The fitting scale: transforms, their derivatives, bounds, the start box, scaled problems."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import write_line_problem

from kinfit.core.errors import KinfitError
from kinfit.estimation.scale import ScaledProblem, fit_scale
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.inputs.parameters import Role
from kinfit.numerics.problem import build_problem


def _line_problem(folder):
    paths = write_line_problem(folder)
    return build_problem(load_mechanism(paths["model"]), load_experiment(paths["experiment"]))


def _first_order_problem(small):
    text = ('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]^m"\n[parameters]\n'
            'k = { value = 0.05, min = 0 }\nm = { value = 1.0, min = 0, max = 3 }\n')
    return build_problem(mechanism_from_text(text), load_experiment(small["experiment"]))


def test_scales_bounds_and_start_box_by_role(tmp_path):
    # the line model: k in [0, 1] from 0.04, A0 in [0, 5] from 1.0 (tests/conftest.py)
    scale = fit_scale(_line_problem(tmp_path))
    assert scale.names == ("k", "A_0_r1")
    assert scale.roles == (Role.RATE_CONSTANT, Role.INITIAL)
    assert scale.scales == ("log10", "natural")
    assert scale.labels == ("log10_k", "A_0_r1")
    assert scale.lower[0] == -math.inf and scale.upper[0] == 0.0       # log10 of [0, 1]
    assert scale.start[0] == pytest.approx(math.log10(0.04))
    # open lower bound of log10 k: 2 decades below the start; finite bounds are the box
    np.testing.assert_allclose(scale.box_lower, [math.log10(0.04) - 2.0, 0.0])
    np.testing.assert_allclose(scale.box_upper, [0.0, 5.0])
    np.testing.assert_allclose(scale.typical, [1.0, 1.0])


def test_open_order_box(small):
    # an order without bounds gets ±1.5 around its start (kinfit's choice)
    from dataclasses import replace

    problem = _first_order_problem(small)
    params = tuple(replace(p, min=-math.inf, max=math.inf) if p.name == "m" else p
                   for p in problem.parameters)
    scale = fit_scale(replace(problem, parameters=params))
    j = scale.names.index("m")
    assert (scale.box_lower[j], scale.box_upper[j]) == (-0.5, 2.5)


def test_round_trip_and_fixed_values(small):
    problem = _first_order_problem(small)
    scale = fit_scale(problem)
    x = np.array([[0.2, 1.5], [3e-4, 0.5]])
    u = scale.from_natural(x)
    np.testing.assert_allclose(u[:, 0], np.log10(x[:, 0]), rtol=1e-15)
    np.testing.assert_allclose(scale.to_natural(u), x, rtol=1e-14)
    np.testing.assert_allclose(scale.to_values(u), x, rtol=1e-14)


@pytest.mark.parametrize("rate_scale", ["log10", "ln", "natural"])
def test_jacobian_factor_is_the_derivative(small, rate_scale):
    # dx/du against central differences (common practice), and ln|dx/du| against the
    # closed forms ln(x ln 10), ln x and 0 up to their constants
    scale = fit_scale(_first_order_problem(small), rate_scale=rate_scale)
    u = scale.from_natural(np.array([0.05, 1.3]))[0]
    h = 1e-6
    numeric = (scale.to_natural(u + h) - scale.to_natural(u - h))[0] / (2 * h)
    np.testing.assert_allclose(scale.jacobian_factor(u), numeric, rtol=1e-7)
    u2 = scale.from_natural(np.array([0.5, 1.3]))[0]
    diff = scale.log_jacobian(u2)[0] - scale.log_jacobian(u)[0]
    exact = np.log(scale.jacobian_factor(u2) / scale.jacobian_factor(u))
    np.testing.assert_allclose(diff, exact, atol=1e-12)
    assert scale.labels[0] == ("k" if rate_scale == "natural" else f"{rate_scale}_k")


def test_delta_method_covariance(small):
    # first-order delta method: var(k) = (k ln 10)² var(log10 k) (any statistics text),
    # and the inverse transform returns the fitting-scale covariance
    scale = fit_scale(_first_order_problem(small))
    u = scale.from_natural(np.array([0.05, 1.2]))[0]
    cov_u = np.array([[1e-4, 2e-5], [2e-5, 4e-4]])
    cov_x = scale.covariance_to_natural(cov_u, u)
    slope = 0.05 * math.log(10.0)
    assert cov_x[0, 0] == pytest.approx(slope ** 2 * 1e-4, rel=1e-12)
    assert cov_x[0, 1] == pytest.approx(slope * 2e-5, rel=1e-12)
    assert cov_x[1, 1] == pytest.approx(4e-4, rel=1e-12)
    np.testing.assert_allclose(scale.covariance_from_natural(cov_x, u), cov_u, rtol=1e-12)


def test_extended_dimensions_and_bad_scale(small):
    scale = fit_scale(_first_order_problem(small))
    more = scale.extended(["sigma_A"], [Role.NOISE], [1e-6], [10.0])
    assert more.names[-1] == "sigma_A" and more.labels[-1] == "log10_sigma_A"
    assert (more.lower[-1], more.upper[-1]) == (-6.0, 1.0)
    assert more.n_model == scale.n_model == 2 and more.n_dim == 3
    # the extra dimension has no column in the problem's parameter rows
    np.testing.assert_allclose(more.to_values(np.array([[-1.0, 1.0, 0.5]])), [[0.1, 1.0]])
    with pytest.raises(KinfitError, match="need finite positive bounds"):
        scale.extended(["s"], [Role.NOISE], [0.0], [1.0])
    with pytest.raises(KinfitError, match="scale 'log2' is not known"):
        fit_scale(_first_order_problem(small), rate_scale="log2")


def test_scaled_jacobian_matches_finite_differences(small):
    # the exact Jacobian on the fitting scale against central differences of the
    # residuals on that scale (common practice), and one integration per point
    problem = _first_order_problem(small)
    scaled = ScaledProblem(problem, fit_scale(problem))
    u = scaled.scale.from_natural(np.array([0.04, 1.2]))[0]
    res, jac = scaled.residuals_jacobian(u)
    assert scaled.integrations == 1
    scaled.residuals_jacobian(u.copy())
    assert scaled.integrations == 1                 # cached
    h = 1e-6
    for j in range(2):
        step = np.zeros(2)
        step[j] = h
        numeric = (scaled.residuals(u + step)[0] - scaled.residuals(u - step)[0]) / (2 * h)
        np.testing.assert_allclose(jac[:, j], numeric, rtol=1e-5, atol=1e-8)
    np.testing.assert_allclose(res, scaled.residuals(u)[0], atol=1e-8)
