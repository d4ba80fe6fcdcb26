"""Shared fixtures of the output tests."""

from __future__ import annotations

import pytest
from conftest import MODELS

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("r")
    (folder / "e.toml").write_text('[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n')
    (folder / "a.csv").write_text("time,A\n0,1\n5,0.61\n10,0.37\n20,0.14\n")
    return fit(load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml"),
               starts=1)
