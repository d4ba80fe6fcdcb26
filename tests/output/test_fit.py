"""The text summary and output folder of a fit."""

from __future__ import annotations

import json

import pytest
from conftest import MODELS

from kinfit.core.formatting import CAUTIONS
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.output.fit import format_fit, write_fit


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("r")
    (folder / "e.toml").write_text('[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n')
    (folder / "a.csv").write_text("time,A\n0,1\n5,0.61\n10,0.37\n20,0.14\n")
    return fit(load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml"),
               starts=1)


def test_format_fit_has_the_essentials(result):
    text = format_fit(result)
    assert "rate = k [A]" in text and "overall order 1" in text
    assert "s^-1" in text and "AICc" in text
    assert "calorimetry" in text and "process-safety review" in text
    assert "calorimetry" in CAUTIONS


def test_write_fit(tmp_path, result):
    written = write_fit(tmp_path / "out", result)
    names = {p.name for p in written}
    assert {"result.json", "fit.png", "residuals.png", "fitted_curves.csv",
            "summary.txt"} <= names
    data = json.loads((tmp_path / "out" / "result.json").read_text())
    assert data["parameters"]["k"]["unit"] == "s^-1"
    header = (tmp_path / "out" / "fitted_curves.csv").read_text().splitlines()[0]
    assert header == "run,time,A,P"
    assert not [p for p in (tmp_path / "out").iterdir() if ".part" in p.name]
