"""Noise modes of a fit: declared, one shared level, one level per species."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MODELS, write
from scipy.optimize import curve_fit

from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.estimation.noise import FIT_NOISE_MODES, species_levels
from kinfit.estimation.space import NOISE_MODES
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism

K_TRUE, SIGMA_A, SIGMA_P = 0.05, 0.004, 0.04
TIMES = np.linspace(0.0, 60.0, 31)
STARTS = (1.0, 2.0)


def _decay(tmp_path, declared=False):
    """A -> P, first order; A measured with σ 0.004 M and P with σ 0.04 M (seeded).

    Data from the closed form [A] = [A]0 exp(−kt), [P] = [A]0 (1 − exp(−kt))
    (physical-chemistry textbooks), not from kinfit's integrator.
    """
    rng = np.random.default_rng(11)
    rows = ["run,time,species,value"]
    for r, a0 in enumerate(STARTS):
        a = a0 * np.exp(-K_TRUE * TIMES)
        rows += [f"r{r},{t:g},A,{v:.8f}" for t, v in
                 zip(TIMES, a + rng.normal(0, SIGMA_A, TIMES.size))]
        rows += [f"r{r},{t:g},P,{v:.8f}" for t, v in
                 zip(TIMES, a0 - a + rng.normal(0, SIGMA_P, TIMES.size))]
    write(tmp_path, "traces.csv", "\n".join(rows) + "\n")
    noise = "[noise]\ndefault = { absolute = 0.01 }\n" if declared else ""
    runs = "".join(f'[[runs]]\nname = "r{r}"\ninitial = {{ A = {a0} }}\n'
                   for r, a0 in enumerate(STARTS))
    write(tmp_path, "e.toml", f'[units]\ntime = "s"\nconcentration = "M"\n[data]\n'
                              f'file = "traces.csv"\n{noise}{runs}')
    write(tmp_path, "m.toml", '[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                              '[parameters]\nk = { value = 0.1, min = 0 }\n')
    return load_experiment(tmp_path / "e.toml"), load_mechanism(tmp_path / "m.toml")


def _stacked(times_species, k):
    """Closed-form model of every point, in the order of traces.csv."""
    out = []
    for a0 in STARTS:
        a = a0 * np.exp(-k * TIMES)
        out += [a, a0 - a]
    return np.concatenate(out)


def _points(exp):
    values = np.concatenate([t.values for run in exp.runs for t in run.traces])
    species = [t.species for run in exp.runs for t in run.traces for _ in t.values]
    return values, np.array(species)


def test_the_fit_offers_the_sampler_noise_modes():
    assert FIT_NOISE_MODES == NOISE_MODES


def test_per_species_noise_matches_weighted_least_squares(tmp_path):
    exp, mech = _decay(tmp_path)
    result = fit(exp, mech, noise="per-species", starts=1)
    assert result.noise == "per-species" and result.success
    levels = result.noise_levels
    assert set(levels) == {"A", "P"}
    # the levels are those of the data, within sampling error (62 points each)
    assert levels["A"] == pytest.approx(SIGMA_A, rel=0.3)
    assert levels["P"] == pytest.approx(SIGMA_P, rel=0.3)
    y, species = _points(exp)
    sigma = np.where(species == "A", levels["A"], levels["P"])
    # outside check: scipy.optimize.curve_fit with these σ (absolute_sigma=True) on the
    # closed form gives the same k and standard error
    popt, pcov = curve_fit(_stacked, None, y, p0=[0.1], sigma=sigma, absolute_sigma=True)
    assert result.values["k"] == pytest.approx(popt[0], rel=1e-6)
    assert result.stderr["k"] == pytest.approx(np.sqrt(pcov[0, 0]), rel=1e-3)
    # and the levels are the fixed point σ_s² = RSS_s / (N_s − p N_s/N) at that fit
    dev = _stacked(None, popt[0]) - y
    n, p = y.size, 1
    for s in ("A", "P"):
        part = dev[species == s]
        assert levels[s] == pytest.approx(np.sqrt(part @ part / (part.size * (1 - p / n))),
                                          rel=1e-4)
    assert result.chi2 == pytest.approx(n - p, rel=1e-4)
    data = result.to_dict()["statistics"]
    assert data["noise"] == "per-species" and data["noise_levels"] == levels


def test_shared_noise_ignores_the_declared_noise(tmp_path):
    exp, mech = _decay(tmp_path, declared=True)
    declared = fit(exp, mech, starts=1)
    assert declared.noise == "declared" and declared.noise_declared
    shared = fit(exp, mech, noise="shared", starts=1)
    assert shared.noise == "shared" and not shared.noise_declared
    y, _ = _points(exp)
    # outside check: ordinary least squares by scipy.optimize.curve_fit (σ̂ from the fit)
    popt, pcov = curve_fit(_stacked, None, y, p0=[0.1])
    assert shared.values["k"] == pytest.approx(popt[0], rel=1e-6)
    assert shared.stderr["k"] == pytest.approx(np.sqrt(pcov[0, 0]), rel=1e-3)
    assert shared.to_dict()["statistics"]["noise"] == "estimated"


def test_declared_noise_must_be_declared(tmp_path):
    exp, mech = _decay(tmp_path)
    with pytest.raises(KinfitError, match=r"noise 'declared' was asked for, but the "
                                          r"experiment declares none; add a \[noise\]"):
        fit(exp, mech, noise="declared")
    with pytest.raises(KinfitError, match="noise 'loud' is not known"):
        fit(exp, mech, noise="loud")


def test_a_species_fitted_exactly_has_no_noise_level(tmp_path):
    exp, mech = _decay(tmp_path)
    from kinfit.numerics.observation import build_observation

    obs = build_observation(mech, exp)
    deviations = np.zeros(obs.n_points)
    with pytest.raises(KinfitError, match="'A' are fitted exactly"):
        species_levels(obs, deviations, 1, "e.toml")


def test_estimated_noise_modes_replace_the_readings_own_sigma(tmp_path):
    # a sigma column is declared noise: auto uses it; shared and per-species estimate
    # the noise instead and ignore it (the weights of the readings are then equal)
    t = np.arange(0.0, 12.0)
    y = np.exp(-0.3 * t) + 0.01 * np.cos(7 * t)            # deterministic "noise"
    sigma = np.where(t < 6, 0.002, 0.05)                    # very unequal weights
    rows = "\n".join(f"r1,{a:g},A,{b:.6f},{s:g}" for a, b, s in zip(t, y, sigma))
    write(tmp_path, "d.csv", "run,time,species,value,sigma\n" + rows + "\n")
    write(tmp_path, "e.toml", '[data]\nfile = "d.csv"\n[[runs]]\nname = "r1"\n'
                              'initial = { A = 1 }\n')
    exp = load_experiment(tmp_path / "e.toml")
    mech = load_mechanism(MODELS / "first_order.toml")
    auto = fit(exp, mech, starts=1)
    shared = fit(exp, mech, starts=1, noise="shared")
    per_species = fit(exp, mech, starts=1, noise="per-species")
    assert auto.noise_declared and not shared.noise_declared
    assert auto.values["k"] != pytest.approx(shared.values["k"], rel=1e-4)
    # with one species the per-species σ is the shared σ̂ (textbook: σ̂² = RSS/(N − p))
    assert per_species.values["k"] == pytest.approx(shared.values["k"], rel=1e-6)
    assert per_species.noise_levels["A"] == pytest.approx(shared.sigma, rel=1e-6)
