"""The ensemble sampler: emcee wiring, progress reports, the log posterior and the start."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import write_line_problem

from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.estimation.sampler import (
    LogPosterior,
    emcee_moves,
    run_ensemble,
    start_ball,
)
from kinfit.estimation.space import parameter_space
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.problem import build_problem

MEAN = np.array([1.0, -2.0, 0.5])
COV = np.array([[1.0, 0.6, 0.0], [0.6, 1.0, 0.3], [0.0, 0.3, 0.25]])
PREC = np.linalg.inv(COV)


def gaussian(x):
    d = x - MEAN
    return -0.5 * np.einsum("ij,jk,ik->i", d, PREC, d)


def test_emcee_recovers_a_gaussian_target():
    # reference: emcee's documented behaviour (its quickstart and the normal-target test
    # of its own suite, from memory): on a Gaussian the ensemble's mean and covariance
    # are the target's, within Monte Carlo error
    rng = np.random.default_rng(0)
    start = MEAN + 0.1 * rng.normal(size=(32, 3))
    state, stopped = run_ensemble(gaussian, start, 2500, seed=1, moves="stretch")
    assert stopped == "completed" and state.chain.shape == (2500, 32, 3)
    flat = state.chain[500:].reshape(-1, 3)
    n_eff = flat.shape[0] / 40.0          # τ of the stretch move in 3-D is below 40 steps
    np.testing.assert_array_less(np.abs(flat.mean(axis=0) - MEAN),
                                 4 * np.sqrt(np.diag(COV) / n_eff))
    np.testing.assert_allclose(np.cov(flat, rowvar=False), COV, atol=0.08)
    assert 0.3 < state.accepted.mean() / 2500 < 0.8


def test_progress_is_reported_after_every_step_and_from_a_resumed_chain():
    # the callback protocol of analysis.ranking.fit_candidates: (n_done, n_total, name)
    start = MEAN + 0.1 * np.random.default_rng(0).normal(size=(8, 3))
    seen = []
    first, _ = run_ensemble(gaussian, start, 5, seed=2, progress=lambda *a: seen.append(a))
    assert seen == [(i, 5, "sampling") for i in range(1, 6)]
    seen.clear()
    whole, _ = run_ensemble(gaussian, start, 8, seed=2, resume=first,
                            progress=lambda *a: seen.append(a))
    assert seen == [(i, 8, "sampling") for i in range(6, 9)]
    assert whole.n_done == 8 and whole.n_evaluations == 8 + 8 * 8


def test_checkpoints_every_n_steps_and_at_the_end():
    start = MEAN + 0.1 * np.random.default_rng(0).normal(size=(8, 3))
    saved = []
    run_ensemble(gaussian, start, 7, seed=2, on_checkpoint=lambda s: saved.append(s.n_done),
                 checkpoint_every=3)
    assert saved == [3, 6, 7]


def test_unknown_moves_and_a_dead_start():
    with pytest.raises(KinfitError, match="moves 'hop' is not known"):
        emcee_moves("hop")
    start = np.zeros((8, 3))
    with pytest.raises(KinfitError, match="some walkers start where the posterior is zero"):
        run_ensemble(lambda x: np.full(len(x), -np.inf), start, 3)


@pytest.fixture(scope="module")
def line(tmp_path_factory):
    paths = write_line_problem(tmp_path_factory.mktemp("sampler"))
    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    space = parameter_space(build_problem(mech, exp))
    return space, fit(exp, mech, starts=1)


def test_log_posterior_integrates_only_inside_the_support(line):
    # k has a uniform prior on [0, 1] (tests/conftest.py): log10 k = 0.5 is outside
    space, result = line
    target = LogPosterior(space)
    u = space.from_fit(result)
    rows = np.array([u, [0.5, u[1]], u + [0.01, 0.0]])
    lp = target(rows)
    assert lp[1] == -np.inf and np.isfinite(lp[[0, 2]]).all()
    assert target.evaluations == 2 and target.failed == 0
    # at the optimum: the declared-noise log-likelihood plus the prior
    assert lp[0] == pytest.approx(result.log_likelihood + space.log_prior(u[None])[0],
                                  abs=1e-6)


def test_start_ball_spreads_by_half_the_fit_covariance(line):
    # draws from N(û, Σ_u/4): the spread of log10 k is half its standard error on that
    # scale (delta method: se(log10 k) = se(k)/(k ln 10))
    space, result = line
    points, lp = start_ball(space, result, LogPosterior(space), 4000,
                            np.random.default_rng(5))
    assert np.isfinite(lp).all() and points.shape == (4000, 2)
    k = result.values["k"]
    expected = 0.5 * result.stderr["k"] / (k * math.log(10.0))
    assert np.std(points[:, 0]) == pytest.approx(expected, rel=0.05)
    assert np.mean(points[:, 0]) == pytest.approx(math.log10(k), abs=3 * expected / 60)
