"""Convergence verdicts on chains whose behaviour is known by construction."""

from __future__ import annotations

import numpy as np

from kinfit.estimation.diagnostics import MAX_RHAT, diagnose


def _ar1(rng, n_steps, n_walkers, n_dim, rho):
    """AR(1) chains, whose integrated autocorrelation time is (1 + ρ)/(1 − ρ)."""
    x = np.empty((n_steps, n_walkers, n_dim))
    x[0] = rng.normal(size=(n_walkers, n_dim))
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


def test_stuck_walkers_are_reported():
    rng = np.random.default_rng(5)
    chain = rng.normal(size=(3000, 8, 1))
    diag = diagnose(chain, ["k"], accepted=np.full(8, 30))
    assert not diag.converged and "acceptance fraction 0.01" in diag.reasons[-1]
    assert diag.to_dict()["converged"] is False
