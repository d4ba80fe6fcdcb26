"""Residual checks against statsmodels' runs test."""

from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.sandbox.stats.runs import runstest_1samp

from kinfit.estimation.residual_checks import runs_test


@pytest.mark.parametrize("seed", range(5))
def test_runs_test_matches_statsmodels(seed):
    # Reference: statsmodels.sandbox.stats.runs.runstest_1samp (Wald–Wolfowitz,
    # no continuity correction), cutting at zero.
    x = np.random.default_rng(seed).standard_normal(40)
    runs, z, p = runs_test(x)
    z_ref, p_two_sided = runstest_1samp(x, cutoff=0.0, correction=False)
    assert z == pytest.approx(z_ref, rel=1e-12)
    assert 2 * min(p, 1 - p) == pytest.approx(p_two_sided, rel=1e-9)


def test_long_stretches_are_flagged():
    # A sine-shaped residual pattern has few runs: p far below 0.01.
    res = np.sin(np.linspace(0, 3 * math.pi, 60))
    runs, z, p = runs_test(res)
    assert runs == 3 and z < -5 and p < 1e-6


def test_one_sign_only():
    assert runs_test(np.ones(10)) == (1, None, None)
    assert runs_test(np.zeros(5)) == (0, None, None)


def test_checks_of_a_fit(small):
    from kinfit.estimation.least_squares import fit
    from kinfit.estimation.residual_checks import check_residuals
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    result = fit(load_experiment(small["experiment"]), load_mechanism(small["model"]), starts=1)
    checks = check_residuals(result.experiment, result.residuals)
    assert tuple(checks) == result.residual_checks
    assert [(c.run, c.species, c.n) for c in checks] == [("r1", "A", 4)]
    assert checks[0].verdict == "too few residuals of each sign to judge"
