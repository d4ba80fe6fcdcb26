"""Posterior sampling: emcee wiring, agreement with least squares, checkpoints and resume."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import LINE_SIGMA, write, write_line_problem

from kinfit.core.errors import KinfitError
from kinfit.estimation import posterior as posterior_module
from kinfit.estimation import profile as profile_module
from kinfit.estimation.chains import CHAIN_FILE, load_chain
from kinfit.estimation.fit_result import ProblemSettings
from kinfit.estimation.least_squares import fit
from kinfit.estimation.posterior import compare_intervals, sample
from kinfit.estimation.space import parameter_space
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.problem import build_problem


def test_declared_noise_posterior_is_the_least_squares_answer(line_posterior):
    # reference: with known σ and flat priors the posterior of a linear model is Gaussian
    # with the OLS estimate as mean and its standard error (σ known) as sd — any
    # statistics textbook; values from statsmodels OLS with cov_type="fixed scale"
    post, paths = line_posterior
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit(
        cov_type="fixed scale", cov_kwds={"scale": LINE_SIGMA ** 2})
    expected = {"A_0_r1": (ols.params[0], ols.bse[0]), "k": (-ols.params[1], ols.bse[1])}
    for name, (value, se) in expected.items():
        s, ess = post.summary[name], post.diagnostics.ess[name]
        assert ess > 300
        assert abs(s["mean"] - value) < 4 * se / math.sqrt(ess), name       # Monte Carlo error
        assert abs(s["sd"] / se - 1) < 4 * math.sqrt(0.5 / ess), name
        # and the fit's covariance interval is the same straight-line answer
        assert post.fit.stderr[name] == pytest.approx(se, rel=1e-4)


def test_unknown_noise_posterior_is_the_t_interval(tmp_path):
    # reference: with flat priors on the coefficients and p(σ) ∝ 1/σ, the marginal
    # posterior of a regression coefficient is Student-t with N - p degrees of freedom
    # around the OLS estimate, scaled by its standard error (Gelman et al., Bayesian Data
    # Analysis, 3rd ed., section 14.2; from memory): the 95 % credible interval is the
    # classical t interval, here from statsmodels OLS (use_t)
    paths = write_line_problem(tmp_path, declared=False, seed=5, n=7)
    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    post = sample(exp, mech, walkers=32, steps=2000, seed=2, noise="shared", starts=1,
                  profile=False, bands=False)
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit()
    nu = len(paths["y"]) - 2
    lo, hi = ols.conf_int(alpha=0.05)[1]
    s, ess = post.summary["k"], post.diagnostics.ess["k"]
    assert ess > 400
    assert abs(s["mean"] + ols.params[1]) < 4 * s["sd"] / math.sqrt(ess)
    # Student-t sd is SE·sqrt(ν/(ν−2)); the heavier tails make the sd noisier than a normal's
    assert abs(s["sd"] / (ols.bse[1] * math.sqrt(nu / (nu - 2))) - 1) < 0.12
    half = (hi - lo) / 2
    np.testing.assert_allclose(s["ci95"], [-hi, -lo], atol=0.1 * half)
    # with ν = 5 the normal interval (1.96 SE) is 24 % narrower: the posterior is nearer
    # the t interval than the normal one
    width = (s["ci95"][1] - s["ci95"][0]) / 2
    assert abs(width - half) < abs(width - 1.96 * ols.bse[1])
    # σ's posterior sits at the residual scale
    assert 0.5 * LINE_SIGMA < post.summary["sigma"]["median"] < 2 * LINE_SIGMA


def test_three_intervals_side_by_side(line_posterior):
    post, _ = line_posterior
    rows = {r["name"]: r for r in compare_intervals(post)}
    for name in ("k", "A_0_r1"):
        row = rows[name]
        # a straight line: covariance, profile and posterior intervals agree
        np.testing.assert_allclose(row["profile"], row["covariance"], rtol=1e-3)
        np.testing.assert_allclose(row["posterior"], row["covariance"],
                                   atol=0.15 * (row["covariance"][1] - row["covariance"][0]))
        assert row["flags"] == [] and row["profile_closed"]


def test_posterior_json_contract(line_posterior):
    post, _ = line_posterior
    data = json.loads(json.dumps(post.to_dict()))
    for name in ("k", "A_0_r1"):
        entry = data["parameters"][name]
        assert {"median", "mean", "sd", "ci95", "ci68", "prior", "profile", "fit"} <= set(entry)
        assert entry["ci95"][0] < entry["ci68"][0] < entry["median"] < entry["ci68"][1] \
            < entry["ci95"][1]
    diag = data["diagnostics"]
    assert {"converged", "autocorr_time", "ess", "rhat", "acceptance_fraction"} <= set(diag)
    assert isinstance(diag["converged"], bool)
    assert data["seed"] == 11 and data["settings"]["walkers"] == 16
    assert data["parameters"]["k"]["prior"]["kind"] == "uniform"


def test_bands_match_the_straight_line_bands(line_posterior):
    # reference: for a linear model with known σ the 95 % band of the line is
    # ŷ ± 1.96·sqrt(x'Cx) and that of a new measurement ŷ ± 1.96·sqrt(x'Cx + σ²) (any
    # regression text), with C from statsmodels OLS (fixed scale); 200 posterior draws
    # give the percentiles to about 10 %
    post, paths = line_posterior
    (band,) = post.bands
    assert band.species == ("A",)
    ols = sm.OLS(paths["y"], sm.add_constant(paths["t"])).fit(
        cov_type="fixed scale", cov_kwds={"scale": LINE_SIGMA ** 2})
    x = sm.add_constant(band.times)
    var_line = np.einsum("ij,jk,ik->i", x, ols.cov_params(), x)
    np.testing.assert_allclose(band.median[:, 0], x @ ols.params, atol=0.2 * LINE_SIGMA)
    half_line = (band.curve_high[:, 0] - band.curve_low[:, 0]) / 2
    half_new = (band.predictive_high[:, 0] - band.predictive_low[:, 0]) / 2
    np.testing.assert_allclose(half_line, 1.96 * np.sqrt(var_line), rtol=0.25)
    np.testing.assert_allclose(half_new, 1.96 * np.sqrt(var_line + LINE_SIGMA ** 2), rtol=0.25)
    assert np.all(band.curve_low <= band.median) and np.all(band.median <= band.curve_high)


@pytest.fixture(scope="module")
def line_fit(tmp_path_factory):
    paths = write_line_problem(tmp_path_factory.mktemp("resume"))
    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    return exp, mech, fit(exp, mech, starts=1)


def _short(line_fit, steps, **kw):
    exp, mech, result = line_fit
    return sample(exp, mech, walkers=8, steps=steps, seed=4, fit_result=result, profile=False,
                  bands=False, checkpoint_every=50, **kw)


def test_resumed_chain_equals_an_uninterrupted_one(line_fit, tmp_path):
    whole = _short(line_fit, 240)
    part_file = tmp_path / CHAIN_FILE
    first = _short(line_fit, 130, checkpoint=part_file)
    state, meta = load_chain(part_file)
    assert state.n_done == 130 and meta["settings"]["seed"] == 4
    resumed = _short(line_fit, 240, checkpoint=part_file, resume=True)
    np.testing.assert_array_equal(resumed.chain, whole.chain)
    np.testing.assert_array_equal(resumed.log_prob, whole.log_prob)
    np.testing.assert_array_equal(resumed.state.accepted, whole.state.accepted)
    np.testing.assert_array_equal(resumed.chain[:130], first.chain)
    assert load_chain(part_file)[0].n_done == 240


def test_resume_refuses_a_chain_made_differently(line_fit, tmp_path):
    path = tmp_path / CHAIN_FILE
    _short(line_fit, 60, checkpoint=path)
    exp, mech, result = line_fit
    with pytest.raises(KinfitError, match="different settings \\(seed 4 -> 5\\)"):
        sample(exp, mech, walkers=8, steps=80, seed=5, fit_result=result, profile=False,
               bands=False, checkpoint=path, resume=True)


def test_time_budget_stops_early_and_says_so(line_fit):
    post = _short(line_fit, 100_000, max_time=0.5)
    assert post.stopped == "time budget" and post.chain.shape[0] < 100_000
    assert not post.converged
    assert "time budget ran out" in post.warnings[0]


@pytest.mark.parametrize("kwargs, message", [
    ({"walkers": 3}, "walkers must be even and at least twice"),
    ({"walkers": 2}, "walkers must be even and at least twice"),
    ({"steps": 0}, "steps must be a whole number of at least 1"),
    ({"moves": "hop"}, "moves 'hop' is not known"),
    ({"burn": -1}, "burn must be a whole number"),
    ({"max_time": 0}, "max_time must be a positive number"),
])
def test_bad_settings(line_fit, kwargs, message):
    exp, mech, result = line_fit
    args = dict(walkers=8, steps=10, seed=0, fit_result=result, profile=False, bands=False)
    args.update(kwargs)
    with pytest.raises(KinfitError, match=message):
        sample(exp, mech, **args)


def full_spectra_case(folder):
    """Seeded synthetic full spectra of A -> B (k = 0.05 s⁻¹, first order, closed form
    [A] = [A]0 exp(-k t)), two invented Gaussian bands, 9 wavelengths, declared noise."""
    wavelengths = np.linspace(400.0, 600.0, 9)
    eps = np.array([np.exp(-0.5 * ((wavelengths - 450) / 40) ** 2),
                    0.8 * np.exp(-0.5 * ((wavelengths - 540) / 40) ** 2)])
    rng = np.random.default_rng(8)
    t = np.linspace(0, 60, 16)
    runs = []
    for r, a0 in enumerate((1.0, 0.6)):
        a = a0 * np.exp(-0.05 * t)
        y = np.column_stack([a, a0 - a]) @ eps + rng.normal(0, 0.002, (t.size, eps.shape[1]))
        lines = ["time," + ",".join(f"{w:g}" for w in wavelengths)]
        lines += [f"{ti:g}," + ",".join(f"{v:.6f}" for v in row) for ti, row in zip(t, y)]
        write(folder, f"s{r}.csv", "\n".join(lines) + "\n")
        runs.append(f'[[runs]]\nname = "s{r}"\nspectrum = "s{r}.csv"\ninitial = {{ A = {a0} }}\n')
    write(folder, "e.toml", '[units]\ntime = "s"\nconcentration = "mM"\n[signals]\n'
                            'offset = "none"\n[signals.spectra]\nabsorbers = ["A", "B"]\n'
                            'components = "auto"\nnoise = 0.002\n' + "\n".join(runs))
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.03\n')
    return load_experiment(folder / "e.toml"), mech


def test_sampled_and_profiled_problems_are_the_fitted_one(tmp_path, monkeypatch):
    # A fit with a chosen integrator and every wavelength ("all" components, where the
    # experiment file asks for "auto", which keeps 2 singular vectors here) must be
    # sampled and profiled on that same residual problem, not on the default one.
    exp, mech = full_spectra_case(tmp_path)
    result = fit(exp, mech, starts=1, method="LSODA", components="all")
    assert result.problem_settings == ProblemSettings(method="LSODA", components="all")
    default = build_problem(mech, exp)
    assert default.observation.n_points < result.n_points == 2 * 16 * 9
    seen = []

    def spy(problem, *args, **kwargs):
        seen.append(problem)
        return parameter_space(problem, *args, **kwargs)

    monkeypatch.setattr(posterior_module, "parameter_space", spy)
    monkeypatch.setattr(profile_module, "parameter_space", spy)
    post = sample(exp, mech, walkers=4, steps=3, seed=1, fit_result=result, bands=False)
    assert len(seen) == 2 and post.profiles is not None       # the sampler's, the profile's
    for problem in seen:
        assert problem.method == "LSODA"
        assert problem.observation.n_points == result.n_points
        np.testing.assert_allclose(problem.residuals(result.values)[0], result.residuals,
                                   rtol=1e-6, atol=1e-6 * np.abs(result.residuals).max())


def test_signal_channels_get_no_concentration_bands(tmp_path):
    # a run measured only as absorbance has no concentration to draw a band of: the
    # posterior says so instead of failing, and its folder has no bands figure
    from signal_cases import ab_signal_case

    from kinfit.output.posterior import posterior_bundle

    exp, mech = ab_signal_case(tmp_path)
    post = sample(exp, mech, walkers=8, steps=60, seed=1, starts=1, profile=False)
    assert post.bands == ()
    assert any("spectrometer signal channels have none" in w for w in post.warnings)
    files = posterior_bundle(post)
    assert "bands.png" not in files and "corner.png" in files


def test_the_covariance_interval_beside_the_posterior_is_the_fits_own(line_posterior):
    # one 95 % covariance interval everywhere: the posterior's table quotes the fit's
    # (Student t with N − p degrees of freedom when the noise is estimated)
    post, _ = line_posterior
    for row in post.intervals:
        pair = post.fit.interval(row["name"])
        if pair is not None and row["stderr"] is not None:
            assert row["covariance"] == pytest.approx(list(pair), rel=1e-12)
