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
