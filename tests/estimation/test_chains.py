"""Chain files: round trip, damage, fingerprints and the resume check."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import write_line_problem

from kinfit.core.errors import KinfitError
from kinfit.estimation.chains import (
    CHAIN_FILE,
    check_resumable,
    fingerprint,
    load_chain,
    write_chain,
)
from kinfit.estimation.sampler import run_ensemble
from kinfit.estimation.space import parameter_space
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.problem import build_problem


def _chain(n_steps=20):
    start = np.random.default_rng(0).normal(size=(6, 2))
    state, _ = run_ensemble(lambda x: -0.5 * np.sum(x ** 2, axis=1), start, n_steps, seed=3)
    return state


def test_chain_round_trip(tmp_path):
    state = _chain()
    path = tmp_path / CHAIN_FILE
    write_chain(path, state, {"labels": ["log10_k", "A_0_r1"]})
    loaded, meta = load_chain(path)
    np.testing.assert_array_equal(loaded.chain, state.chain)
    np.testing.assert_array_equal(loaded.log_prob, state.log_prob)
    np.testing.assert_array_equal(loaded.accepted, state.accepted)
    assert loaded.random_state[2] == state.random_state[2]
    np.testing.assert_array_equal(loaded.random_state[1], state.random_state[1])
    assert meta["labels"] == ["log10_k", "A_0_r1"] and meta["n_done"] == 20
    # the loaded state continues exactly as the original would
    a, _ = run_ensemble(lambda x: -0.5 * np.sum(x ** 2, axis=1), None, 30, resume=state)
    b, _ = run_ensemble(lambda x: -0.5 * np.sum(x ** 2, axis=1), None, 30, resume=loaded)
    np.testing.assert_array_equal(a.chain, b.chain)


def test_damaged_chain_file(tmp_path):
    bad = tmp_path / CHAIN_FILE
    bad.write_bytes(b"not a zip file")
    with pytest.raises(KinfitError, match="not a kinfit chain file or damaged"):
        load_chain(bad)
    with pytest.raises(KinfitError, match="no such chain file"):
        load_chain(tmp_path / "missing.npz")


def test_fingerprint_follows_what_shapes_the_chain(tmp_path):
    paths = write_line_problem(tmp_path)
    problem = build_problem(load_mechanism(paths["model"]), load_experiment(paths["experiment"]))
    space = parameter_space(problem)
    same = fingerprint(space, 8, 4, "de")
    assert fingerprint(parameter_space(problem), 8, 4, "de") == same
    assert len({same, fingerprint(space, 8, 5, "de"), fingerprint(space, 10, 4, "de"),
                fingerprint(space, 8, 4, "stretch")}) == 4
    settings = {"walkers": 8, "seed": 4, "moves": "de", "noise": "declared"}
    check_resumable(tmp_path / CHAIN_FILE, {"fingerprint": same, "settings": settings}, same,
                    settings)
    with pytest.raises(KinfitError, match="different settings \\(seed 4 -> 5\\)"):
        check_resumable(tmp_path / CHAIN_FILE, {"fingerprint": same, "settings": settings},
                        fingerprint(space, 8, 5, "de"), {**settings, "seed": 5})


def test_a_chain_with_the_former_names_of_starting_concentrations_is_refused_clearly(tmp_path):
    # chains written when a fitted [A]0 of run r1 was named A0_r1 cannot be resumed now that
    # it is A_0_r1; the message says so instead of "the model, the data ... differ"
    settings = {"walkers": 8, "seed": 4, "moves": "de", "noise": "declared"}
    old = {"fingerprint": "old", "settings": settings, "names": ["k", "A0_r1"]}
    with pytest.raises(KinfitError, match=r"in the chain only: A0_r1; now only: A_0_r1; kinfit "
                                          r"now names fitted starting concentrations like "
                                          r"A_0_r1 \(was A0_r1\)\); start a new chain"):
        check_resumable(tmp_path / CHAIN_FILE, old, "new", settings, ("k", "A_0_r1"))
    # the same names: the settings message as before
    with pytest.raises(KinfitError, match="the model, the data, bounds or priors differ"):
        check_resumable(tmp_path / CHAIN_FILE, {**old, "names": ["k", "A_0_r1"]}, "new",
                        settings, ("k", "A_0_r1"))
