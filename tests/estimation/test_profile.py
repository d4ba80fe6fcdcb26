"""Profile-likelihood intervals against ordinary least squares, and non-identifiability."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import LINE_SIGMA, write_line_problem

from kinfit.core.errors import KinfitError
from kinfit.estimation import profile as profile_module
from kinfit.estimation.least_squares import fit
from kinfit.estimation.profile import profile_intervals
from kinfit.estimation.space import parameter_space
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


def test_straight_line_profile_equals_the_ols_interval(tmp_path):
    # reference: statsmodels OLS with the known σ ("fixed scale"); for a model linear in
    # its parameters the profile deviance is exactly quadratic, so the profile interval
    # is the normal-theory interval b ± z·SE (any regression text)
    paths = write_line_problem(tmp_path)
    result = fit(load_experiment(paths["experiment"]), load_mechanism(paths["model"]), starts=1)
    profiles = profile_intervals(result)
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit(
        cov_type="fixed scale", cov_kwds={"scale": LINE_SIGMA ** 2})
    (a_lo, a_hi), (b_lo, b_hi) = ols.conf_int(alpha=0.05)
    k95 = profiles.parameters["k"].intervals[0.95]
    a95 = profiles.parameters["A_0_r1"].intervals[0.95]
    np.testing.assert_allclose(k95, [-b_hi, -b_lo], rtol=2e-4)    # k is minus the slope
    np.testing.assert_allclose(a95, [a_lo, a_hi], rtol=2e-5)
    (a68lo, a68hi), _ = ols.conf_int(alpha=0.32)
    np.testing.assert_allclose(profiles.parameters["A_0_r1"].intervals[0.68], [a68lo, a68hi],
                               rtol=2e-5)
    assert all(p.closed for p in profiles.parameters.values())
    assert profiles.deviance == "chi2" and profiles.warnings == ()
    # thresholds: χ²₁ quantiles (scipy.stats.chi2.ppf(0.95, 1) = 3.841...)
    assert profiles.thresholds[0.95] == pytest.approx(3.841458820694124)


def test_a_rate_constant_the_data_cannot_see_does_not_close(files):
    files("model.toml", """
        name = "consecutive"
        [[steps]]
        reaction = "A -> B"
        rate = "k1 * [A]"
        [[steps]]
        reaction = "B -> C"
        rate = "k2 * [B]"
        [parameters]
        k1 = { value = 0.1, min = 1e-4, max = 10 }
        k2 = { value = 0.3, min = 1e-3, max = 10 }
    """)
    files("experiment.toml", """
        [units]
        time = "s"
        concentration = "M"
        [data]
        file = "traces.csv"
        [noise]
        default = { absolute = 0.01 }
        [[runs]]
        name = "r1"
        initial = { A = 1.0 }
    """)
    t = np.linspace(0, 20, 9)
    rows = "\n".join(f"r1,{ti:g},A,{np.exp(-0.1 * ti):.6f}" for ti in t)
    files("traces.csv", "run,time,species,value\n" + rows + "\n")
    result = fit(load_experiment(files.folder / "experiment.toml"),
                 load_mechanism(files.folder / "model.toml"), starts=1)
    profiles = profile_intervals(result)
    assert profiles.parameters["k1"].closed
    k2 = profiles.parameters["k2"]
    assert not k2.closed and k2.intervals[0.95] == (None, None)
    assert any("k2: the 95 % profile interval does not close" in w for w in profiles.warnings)
    assert "not identifiable" in profiles.warnings[-1]


def test_bad_requests(tmp_path):
    paths = write_line_problem(tmp_path)
    result = fit(load_experiment(paths["experiment"]), load_mechanism(paths["model"]), starts=1)
    with pytest.raises(KinfitError, match="cannot profile 'm'"):
        profile_intervals(result, names=["m"])
    with pytest.raises(KinfitError, match="between 0 and 1"):
        profile_intervals(result, levels=(95,))


def test_profile_refits_the_fitted_problem(tmp_path, monkeypatch):
    # a fit made with a chosen integrator is profiled with that integrator, and the
    # interval is still the straight line's (statsmodels OLS, fixed scale)
    paths = write_line_problem(tmp_path)
    result = fit(load_experiment(paths["experiment"]), load_mechanism(paths["model"]),
                 starts=1, method="Radau")
    seen = []

    def spy(problem, *args, **kwargs):
        seen.append(problem)
        return parameter_space(problem, *args, **kwargs)

    monkeypatch.setattr(profile_module, "parameter_space", spy)
    profiles = profile_intervals(result, names=["k"])
    assert [p.method for p in seen] == ["Radau"]
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit(
        cov_type="fixed scale", cov_kwds={"scale": LINE_SIGMA ** 2})
    b_lo, b_hi = ols.conf_int(alpha=0.05)[1]
    np.testing.assert_allclose(profiles.parameters["k"].intervals[0.95], [-b_hi, -b_lo],
                               rtol=2e-4)
