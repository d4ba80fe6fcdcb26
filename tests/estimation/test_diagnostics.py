"""Convergence verdicts on chains whose behaviour is known by construction."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinfit.estimation.diagnostics import MAX_RHAT, diagnose, format_rhat


def _ar1(rng, n_steps, n_walkers, n_dim, rho, start=0.0):
    """AR(1) chains, whose integrated autocorrelation time is (1 + ρ)/(1 − ρ)."""
    x = np.empty((n_steps, n_walkers, n_dim))
    x[0] = start + rng.normal(size=(n_walkers, n_dim))
    scale = np.sqrt(1 - rho ** 2)
    for i in range(1, n_steps):
        x[i] = rho * x[i - 1] + scale * rng.normal(size=(n_walkers, n_dim))
    return x


def test_long_independent_chain_is_converged():
    rng = np.random.default_rng(1)
    chain = rng.normal(size=(3000, 8, 2))
    diag = diagnose(chain, ["a", "b"], accepted=np.full(8, 900))
    assert diag.converged and diag.reasons == () and diag.advice == ""
    assert max(diag.rhat.values()) <= MAX_RHAT
    # ESS of independent draws is about the number of draws kept
    for ess in diag.ess.values():
        assert 0.8 * 8 * diag.n_kept < ess < 1.2 * 8 * diag.n_kept
    assert diag.acceptance_fraction == 0.3


def test_autocorrelation_time_of_ar1_chains():
    # reference: for an AR(1) process τ = (1 + ρ)/(1 − ρ) (any time-series text, e.g.
    # Sokal 1997, "Monte Carlo methods in statistical mechanics"; from memory)
    rng = np.random.default_rng(2)
    chain = _ar1(rng, 4000, 16, 1, 0.8)
    diag = diagnose(chain, ["x"], accepted=np.full(16, 1000), burn=0)
    assert abs(diag.autocorr_time["x"] - 9.0) < 1.0


def test_short_chain_is_not_converged_and_says_what_to_do():
    rng = np.random.default_rng(3)
    chain = _ar1(rng, 300, 16, 2, 0.95)                     # τ ≈ 39 steps
    diag = diagnose(chain, ["k", "m"], accepted=np.full(16, 90))
    assert not diag.converged
    assert "autocorrelation times long" in diag.reasons[0]
    assert diag.steps_suggested > 300 and "--resume" in diag.advice
    assert diag.burn_in > 0


def test_walkers_in_different_places_fail_rhat():
    rng = np.random.default_rng(4)
    chain = rng.normal(size=(2000, 8, 1))
    chain[:, :4] += 3.0                                      # two groups of walkers
    diag = diagnose(chain, ["k"], accepted=np.full(8, 600), burn=0)
    assert not diag.converged
    assert any("R-hat" in r for r in diag.reasons)


def test_rhat_is_printed_with_the_digits_that_show_why_it_fails():
    # "R-hat above 1.01: b 1.010" hid the failure; 4 decimals, more where needed.
    assert format_rhat(1.0104) == "1.0104"
    assert format_rhat(1.01002) == "1.01002"
    assert format_rhat(1.0099) == "1.0099" and format_rhat(1.2) == "1.2000"
    assert format_rhat(float("nan")) == "undefined"
    rng = np.random.default_rng(4)
    chain = rng.normal(size=(2000, 8, 1))
    chain[:, :4] += 0.28                                    # walkers slightly apart
    diag = diagnose(chain, ["b"], accepted=np.full(8, 600), burn=0)
    (reason,) = [r for r in diag.reasons if "R-hat" in r]
    assert f"{diag.rhat['b']:.3f}" == "1.010"               # what was printed before
    assert reason.endswith("b 1.0101")


@pytest.mark.parametrize("seed", range(5))
def test_following_the_advice_once_reaches_the_criterion(seed):
    # Deterministic synthetic chains: 32 AR(1) walkers, ρ = 0.9 (τ = 19 steps), started
    # 3 standard deviations from the centre, stopped after 300 steps. The chain cut at
    # the advised N (what --steps N --resume would give: the same walkers run on) meets
    # the criterion. Burn-in plus emcee's 50 τ alone would not: split R-hat − 1 is about
    # τ / (kept steps) at equilibrium, so R-hat ≤ 1.01 needs about 100 τ (module notes).
    rng = np.random.default_rng(seed)
    chain = _ar1(rng, 4000, 32, 2, 0.9, start=3.0)
    def accepted(n):                                        # a fraction of 0.3
        return np.full(32, 0.3 * n)

    short = diagnose(chain[:300], ["a", "b"], accepted(300))
    assert not short.converged
    n = short.steps_suggested
    assert f"--steps {n} --resume" in short.advice and 300 < n <= 4000
    assert diagnose(chain[:n], ["a", "b"], accepted(n)).converged
    tau = max(short.autocorr_time.values())
    emcee_only = math.ceil(53 * tau)
    assert not diagnose(chain[:emcee_only], ["a", "b"], accepted(emcee_only)).converged


def test_following_the_advice_once_on_a_sampled_chain(tmp_path):
    # The sampler itself: a seeded 300-step chain of the straight-line problem, then one
    # resume with the advised --steps, reaches the criterion.
    from conftest import write_line_problem

    from kinfit.estimation.posterior import sample
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    paths = write_line_problem(tmp_path)
    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    checkpoint = tmp_path / "chain.npz"
    kwargs = {"walkers": 32, "seed": 7, "starts": 1, "profile": False, "bands": False,
              "checkpoint": checkpoint}
    first = sample(exp, mech, steps=300, **kwargs)
    assert not first.diagnostics.converged
    n = first.diagnostics.steps_suggested
    resumed = sample(exp, mech, steps=n, resume=True, **kwargs)
    assert resumed.diagnostics.n_steps == n and resumed.diagnostics.converged


def test_stuck_walkers_are_reported():
    rng = np.random.default_rng(5)
    chain = rng.normal(size=(3000, 8, 1))
    diag = diagnose(chain, ["k"], accepted=np.full(8, 30))
    assert not diag.converged and "acceptance fraction 0.01" in diag.reasons[-1]
    assert diag.to_dict()["converged"] is False
