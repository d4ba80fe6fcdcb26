"""Shared fixtures of the figure tests."""

from __future__ import annotations

import pytest
from conftest import MODELS

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("p")
    (folder / "e.toml").write_text('[units]\ntime = "min"\nconcentration = "mM"\n'
                                   '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n'
                                   '[[runs]]\nname = "b"\nfile = "b.csv"\ninitial = { A = 2 }\n')
    (folder / "a.csv").write_text("time,A,P\n0,1,0\n5,0.61,0.39\n10,0.37,0.63\n20,0.14,0.86\n")
    (folder / "b.csv").write_text("time,A\n0,2\n5,1.2\n10,0.74\n")
    return fit(load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml"),
               starts=1)
