"""Matching measured traces to the model's species."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MODELS

from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.observation import build_observation, observe


def test_observation_layout(files):
    files("e.toml", '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n'
                    '[[runs]]\nname = "b"\nfile = "b.csv"\ninitial = { A = 2 }\n')
    files("a.csv", "time,A,P\n0,1,0\n5,0.5,\n10,0.25,0.75\n")
    files("b.csv", "time,P\n1,0.1\n2,0.2\n3,0.3\n")
    exp = load_experiment(files.folder / "e.toml")
    mech = load_mechanism(MODELS / "first_order.toml")
    obs = build_observation(mech, exp)
    np.testing.assert_array_equal(obs.run_times[0], [0, 5, 10])
    np.testing.assert_array_equal(obs.time_index, [0, 1, 2, 0, 2, 0, 1, 2])
    np.testing.assert_array_equal(obs.species_index, [0, 0, 0, 1, 1, 1, 1, 1])
    conc = [np.arange(6.0).reshape(1, 3, 2), 10 + np.arange(6.0).reshape(1, 3, 2)]
    np.testing.assert_array_equal(observe(conc, obs)[0], [0, 2, 4, 1, 5, 11, 13, 15])


def test_species_the_model_lacks(small):
    exp = load_experiment(small["experiment"])
    mech = mechanism_from_text('[[steps]]\nreaction = "B -> P"\nrate = "k*[B]"\n'
                               '[parameters]\nk = 1\n')
    with pytest.raises(KinfitError, match=r"traces\.csv, line 2: species 'A' .* is not in the "
                                          r"model"):
        build_observation(mech, exp)


def test_initial_concentration_of_a_species_the_model_lacks(files):
    files("e.toml", '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1, Z = 2 }\n')
    files("a.csv", "time,A\n0,1\n5,0.5\n10,0.25\n")
    mech = load_mechanism(MODELS / "first_order.toml")
    with pytest.raises(KinfitError, match=r"run 'a' \(initial\.Z\): the model .* has no "
                                          r"species 'Z'"):
        build_observation(mech, load_experiment(files.folder / "e.toml"))


def test_held_constant_species_needs_a_concentration(files):
    files("e.toml", '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1, B = 1 }\n')
    files("a.csv", "time,A\n0,1\n5,0.5\n10,0.25\n")
    mech = load_mechanism(MODELS / "catalysed.toml")
    with pytest.raises(KinfitError, match="cat is held constant .* no initial concentration"):
        build_observation(mech, load_experiment(files.folder / "e.toml"))


# ------------------------------------------------------------ each point's own σ

DECAY_MODEL = """
name = "first-order decay"
[[steps]]
reaction = "A -> P"
rate = "k * [A]"
[parameters]
k = { value = 0.03, min = 0 }
"""


def _decay_study(files, seed=20260514, sigma_column=True, noise=""):
    """Seeded A -> P data with each point's σ in a sigma column (long layout).

    Returns (experiment path, model path, times [n], values [n], sigma [n])."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 60.0, 25)
    sigma = rng.uniform(0.002, 0.03, t.size)            # very unequal σ: weighting matters
    y = 0.8 * np.exp(-0.05 * t) + sigma * rng.normal(size=t.size)
    header = "run,time,species,value" + (",sigma" if sigma_column else "")
    rows = "".join(f"r1,{ti!r},A,{yi!r}" + (f",{si!r}" if sigma_column else "") + "\n"
                   for ti, yi, si in zip(t.tolist(), y.tolist(), sigma.tolist()))
    files("traces.csv", header + "\n" + rows)
    files("e.toml", '[units]\ntime = "s"\nconcentration = "M"\n[data]\nfile = "traces.csv"\n'
                    '[[runs]]\nname = "r1"\ninitial = { A = { value = 1.0, vary = true } }\n'
                    + noise)
    model = files("model.toml", DECAY_MODEL)
    return files.folder / "e.toml", model, t, y, sigma


def test_sigma_column_fit_matches_curve_fit_with_absolute_sigma(files):
    from scipy.optimize import curve_fit

    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import initial_name

    exp_path, model, t, y, sigma = _decay_study(files)
    exp = load_experiment(exp_path)
    result = fit(exp, load_mechanism(model), starts=4)
    a0 = initial_name("A", "r1")
    # Outside check: scipy.optimize.curve_fit weighted by sigma with absolute_sigma=True
    # (standard errors from (JᵀWJ)⁻¹, not rescaled) on the closed-form first-order decay
    # [A] = [A]0 exp(-k t) (integrated rate law, physical-chemistry textbooks)
    popt, pcov = curve_fit(lambda tt, k, c0: c0 * np.exp(-k * tt), t, y, p0=(0.03, 1.0),
                           sigma=sigma, absolute_sigma=True, xtol=1e-14, ftol=1e-14)
    np.testing.assert_allclose([result.values["k"], result.values[a0]], popt, rtol=1e-6)
    np.testing.assert_allclose([result.stderr["k"], result.stderr[a0]],
                               np.sqrt(np.diag(pcov)), rtol=1e-3)
    assert result.noise_declared and result.sigma is None       # σ known: nothing rescaled
    # the residuals (which the residual checks and the likelihood use) are (f - y)/σ
    f = result.values[a0] * np.exp(-result.values["k"] * t)
    np.testing.assert_allclose(result.residuals, (f - y) / sigma, rtol=1e-6, atol=1e-6)
    # Gaussian log-likelihood with known σᵢ, by hand: -½ Σ rᵢ² - Σ ln(σᵢ √(2π))
    by_hand = -0.5 * np.sum(((f - y) / sigma) ** 2) - np.sum(np.log(sigma * np.sqrt(2 * np.pi)))
    assert result.log_likelihood == pytest.approx(by_hand, rel=1e-8)
    # the unweighted fit of the same data differs: the σ column is not ignored
    files("traces.csv", "run,time,species,value\n" + "".join(
        f"r1,{ti!r},A,{yi!r}\n" for ti, yi in zip(t.tolist(), y.tolist())))
    plain = fit(load_experiment(exp_path), load_mechanism(model), starts=4)
    assert abs(plain.values["k"] / result.values["k"] - 1) > 1e-4


def test_posterior_sampling_uses_each_points_own_sigma(files):
    from kinfit.estimation.posterior import sample

    exp_path, model, t, _, sigma = _decay_study(files)
    exp = load_experiment(exp_path)
    post = sample(exp, load_mechanism(model), walkers=16, steps=600, seed=5, starts=2,
                  profile=False)
    assert post.noise == "declared"                  # the σ column, not sampled noise levels
    # short chain: the posterior sd of k agrees with the fit's standard error (flat prior on
    # log k, near-Gaussian likelihood) within the spread of a short chain
    sd = post.summary["k"]["sd"]
    assert sd == pytest.approx(post.fit.stderr["k"], rel=0.3)
    # predictive band of run r1 at its last reading: curve band widened by that point's σ
    band = post.bands[0]
    last = np.searchsorted(band.times, t[-1])
    width = band.predictive_high[last, 0] - band.predictive_low[last, 0]
    assert width == pytest.approx(2 * 1.96 * sigma[-1], rel=0.3)


def test_sigma_at_interpolates_a_traces_own_sigma_and_else_uses_declared_noise(files):
    from kinfit.numerics.observation import sigma_at

    exp_path, _, t, _, sigma = _decay_study(files)
    exp = load_experiment(exp_path)
    np.testing.assert_allclose(sigma_at(exp, 0, "A", t, np.zeros(t.size)), sigma)
    mid = 0.5 * (t[3] + t[4])
    assert sigma_at(exp, 0, "A", np.array([mid]), np.zeros(1))[0] == pytest.approx(
        0.5 * (sigma[3] + sigma[4]))
    exp_path, *_ = _decay_study(files, sigma_column=False,
                                noise="[noise]\nA = { absolute = 0.01, relative = 0.1 }\n")
    declared = load_experiment(exp_path)
    np.testing.assert_allclose(sigma_at(declared, 0, "A", t[:2], np.array([[0.0, 1.0]])),
                               [[0.01, np.hypot(0.01, 0.1)]])


def test_sigma_for_some_traces_only_is_refused_when_built_by_hand(files):
    import dataclasses

    exp_path, model, *_ = _decay_study(files)
    exp = load_experiment(exp_path)
    run = exp.runs[0]
    bare = dataclasses.replace(run.traces[0], species="P", sigma=None)
    mixed = dataclasses.replace(exp, runs=(dataclasses.replace(run, traces=(run.traces[0],
                                                                               bare)),))
    with pytest.raises(KinfitError, match=r"P in run 'r1' has no σ while other traces have "
                                          r"one"):
        build_observation(load_mechanism(model), mixed)
    obs = build_observation(load_mechanism(model), exp)
    np.testing.assert_array_equal(obs.sigma, run.traces[0].sigma)


def test_a_column_that_is_no_species_is_refused_naming_it(files):
    files("e.toml", '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n')
    files("a.csv", "time,A,notes\n0,1,1\n5,0.5,2\n10,0.25,3\n")
    with pytest.raises(KinfitError, match=r"a\.csv, line 2: species 'notes' \(run 'a'\) is not "
                                          r"in the model .*every data column besides time "
                                          r"and run is a species, a \[signals\] channel or "
                                          r"sigma_X"):
        build_observation(load_mechanism(MODELS / "first_order.toml"),
                          load_experiment(files.folder / "e.toml"))
