"""Initial slopes of polynomials fitted over an early window, against statsmodels and
closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from kinfit.analysis.initial_slopes import (
    initial_slope,
    polynomial_fit,
    run_initial_rate,
)
from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import Run, Trace


def test_polynomial_fit_matches_statsmodels_ols():
    # Reference: statsmodels OLS on the design [1, t, t²]; unknown noise, so the
    # covariance is scaled by RSS/(n − 3) in both.
    rng = np.random.default_rng(11)
    t = np.linspace(0.0, 12.0, 9)
    y = 5.0 - 0.4 * t + 0.01 * t ** 2 + rng.normal(0.0, 0.05, t.size)
    coef, cov = polynomial_fit(t, y, degree=2)
    ols = sm.OLS(y, np.vander(t, 3, increasing=True)).fit()
    np.testing.assert_allclose(coef, ols.params, rtol=1e-9)
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), ols.bse, rtol=1e-8)
    slope, se = initial_slope(t, y, degree=2)
    assert slope == pytest.approx(ols.params[1], rel=1e-9)
    assert se == pytest.approx(ols.bse[1], rel=1e-8)


def test_polynomial_fit_with_declared_noise_matches_statsmodels_wls():
    # Reference: statsmodels WLS with weights 1/σ² and a fixed scale of 1 (the
    # declared σ are trusted, as in kinfit's global fit).
    rng = np.random.default_rng(12)
    t = np.linspace(0.0, 6.0, 7)
    sigma = 0.02 + 0.01 * t
    y = 2.0 - 0.3 * t + rng.normal(0.0, sigma)
    coef, cov = polynomial_fit(t, y, degree=2, sigma=sigma)
    wls = sm.WLS(y, np.vander(t, 3, increasing=True), weights=1 / sigma ** 2).fit(
        cov_type="fixed scale")
    np.testing.assert_allclose(coef, wls.params, rtol=1e-9)
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), wls.bse, rtol=1e-8)


def test_slope_of_a_zero_order_trace_is_exact():
    # Zero order, textbook closed form [A] = [A]0 − k t: a straight line, so a
    # polynomial of any degree returns the slope −k exactly.
    t = np.linspace(0.0, 10.0, 6)
    slope, se = initial_slope(t, 0.8 - 0.035 * t, degree=2)
    assert slope == pytest.approx(-0.035, rel=1e-12)
    assert se < 1e-12


def test_straight_tangent_bias_follows_taylor_and_quadratic_removes_it():
    # First order, textbook closed form [A] = exp(−k t). Taylor expansion: a
    # least-squares line through [0, T] has slope −k (1 − kT/2 + ...) to first
    # order, i.e. relative bias ≈ kT/2 (common practice; derived for this test);
    # the quadratic removes that term, leaving O((kT)²).
    k, t = 0.1, np.linspace(0.0, 1.0, 11)
    y = np.exp(-k * t)
    line, _ = initial_slope(t, y, degree=1)
    quad, _ = initial_slope(t, y, degree=2)
    assert abs(line / -k - 1) == pytest.approx(k * 1.0 / 2, rel=0.1)
    assert abs(quad / -k - 1) < (k * 1.0) ** 2 / 5


def test_too_few_points_for_a_standard_error():
    with pytest.raises(KinfitError, match="needs at least 4 points"):
        initial_slope([0, 1, 2], [1, 0.9, 0.8], degree=2)


def _run(name, a0, k, times, species=("A", "P")):
    """A -> 2 P, first order (textbook closed form).

    [A] = [A]0 e^(−kt) and [P] = 2 [A]0 (1 − e^(−kt)).
    """
    values = {"A": a0 * np.exp(-k * times), "P": 2 * a0 * (1 - np.exp(-k * times))}
    traces = tuple(Trace(s, times, values[s], np.arange(times.size)) for s in species)
    return Run(name=name, traces=traces, initial={"A": a0})


def test_first_order_run_gives_the_exact_initial_rate():
    # ln(fraction of A left) = −k t is a straight line, so the window's polynomial
    # returns the slope exactly, and r0 = k [A]0 (IUPAC rate of reaction, the
    # product's d[P]/dt divided by ν_P = 2) from either trace.
    times = np.linspace(0.0, 30.0, 31)
    rate = run_initial_rate(_run("r1", 0.8, 0.02, times), {"A": -1.0, "P": 2.0})
    assert rate.rate == pytest.approx(0.02 * 0.8, rel=1e-9)
    assert [t.species for t in rate.traces] == ["A", "P"]
    for t in rate.traces:
        assert t.rate == pytest.approx(0.016, rel=1e-9)
        # the window ends at the last point within 20 % conversion (1 − e^(−0.02 t) ≤ 0.2)
        assert t.t_end == math.floor(-math.log(0.8) / 0.02)
        assert t.conversion <= 0.2


def test_a_run_without_a_reactant_is_explained():
    times = np.linspace(0.0, 30.0, 31)
    rate = run_initial_rate(_run("r0", 0.0, 0.02, times), {"A": -1.0, "P": 2.0})
    assert rate.rate is None and "starts without A" in rate.note
