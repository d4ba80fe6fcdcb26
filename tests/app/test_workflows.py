"""The workflows behind the commands: result, files and text, with one fit-folder assembly."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import MODELS, synthetic_power_law

from kinfit.app.workflows import (
    fit_folder,
    fit_workflow,
    predict_workflow,
    prediction_basis,
    rank_workflow,
    simulate_workflow,
)
from kinfit.core.units import Units
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism

TEXT = (".txt", ".csv", ".json")


def _texts(bundle, prefix=""):
    """The text files of a bundle (figures carry a creation date), by name without prefix."""
    return {name[len(prefix):]: bundle[name] for name in bundle
            if name.startswith(prefix) and name.endswith(TEXT)}


@pytest.fixture(scope="module")
def decay(tmp_path_factory):
    """One run of A -> P sampled from [A] = exp(-0.1 t) (first order, closed form)."""
    folder = tmp_path_factory.mktemp("decay")
    times = np.array([0.0, 5.0, 10.0, 20.0, 30.0])
    rows = "\n".join(f"{t:g},{np.exp(-0.1 * t):.6f}" for t in times)
    (folder / "a.csv").write_text("time,A\n" + rows + "\n")
    (folder / "e.toml").write_text('[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n')
    return load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml")


def test_fit_workflow_returns_the_fit_its_folder_and_its_summary(decay):
    exp, mech = decay
    outcome = fit_workflow(exp, mech, starts=1, command=["kinfit", "fit"])
    # exact data of [A] = exp(-k t) with k = 0.1 give back k (first order, closed form)
    assert outcome.result.values["k"] == pytest.approx(0.1, rel=1e-4)
    assert list(outcome.bundle) == ["fit.png", "fit.svg", "residuals.png", "residuals.svg",
                                    "provenance.json", "summary.txt", "fitted_curves.csv",
                                    "parameters.csv", "points.csv", "result.json"]
    assert outcome.bundle["summary.txt"] == outcome.summary + "\n"
    provenance = json.loads(outcome.bundle["provenance.json"])
    assert provenance["schema"] == "kinfit.provenance/1"
    assert provenance["command"] == ["kinfit", "fit"]
    assert provenance["settings"] == {"starts": 1, "noise": "auto"}
    # result.json carries what kinfit simulate --fit needs, in the fit's units
    basis = json.loads(outcome.bundle["result.json"])["prediction_basis"]
    assert basis["free"] == ["k"] and basis["parameters"]["k"] == outcome.result.values["k"]
    assert basis["units"] == {"time": exp.units.time, "concentration": exp.units.concentration,
                              "temperature": exp.units.temperature}


def test_the_best_of_a_ranking_is_the_fit_folder_of_its_fit(tmp_path):
    exp, mech = synthetic_power_law(tmp_path, seed=5, times=np.linspace(0, 100, 9),
                                    starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0),
                                            "r3": (1.0, 2.0)})
    outcome = rank_workflow(exp, [mech], {"m": [1, 2]}, top=2, starts=1, workers=1,
                            command=["kinfit", "rank"])
    comparison = outcome.result
    provenance = json.loads(outcome.bundle["provenance.json"])
    provenance.pop("schema")
    assert set(provenance["inputs"]) == {"experiment", "model 1", "data: traces.csv"}
    alone = fit_folder(comparison.best.fit, provenance=provenance).bundle
    assert [n for n in outcome.bundle if n.startswith("best/")] == [f"best/{n}" for n in alone]
    assert _texts(outcome.bundle, "best/") == _texts(alone)
    assert outcome.summary.startswith("Ranking of 3 candidates")
    assert outcome.bundle["ranking.txt"] == outcome.summary + "\n"


def test_the_best_of_a_temperature_ranking_has_the_temperature_files(arrhenius_study):
    # best/ is assembled as a plain fit's folder, so a temperature model gets its
    # activation parameters there too; the study's truth is Ea = 60 kJ/mol (conftest)
    outcome = rank_workflow(arrhenius_study["experiment"], [arrhenius_study["mechanism"]],
                            {"m": [1]}, starts=1, workers=1, cross_check=False)
    assert {"best/temperature.json", "best/arrhenius.png", "best/eyring.svg"} <= set(
        outcome.bundle)
    data = json.loads(outcome.bundle["best/temperature.json"])
    ea = data["activation"][0]["estimates"]["Ea"]
    assert abs(ea["value"] - arrhenius_study["truth"]["Ea"]) < 3 * ea["stderr"]
    assert "calorimetry" in data["cautions"]


def test_simulate_and_predict_workflows():
    mech = load_mechanism(MODELS / "first_order.toml")
    times = np.linspace(0.0, 10.0, 11)
    outcome = simulate_workflow(mech, {"A": 1.0}, {"k": 0.2}, times, Units("s", "M"))
    # [A] = exp(-k t) (first order, closed form)
    assert outcome.result.conc[-1, 0] == pytest.approx(np.exp(-2.0), rel=1e-5)
    assert list(outcome.bundle) == ["simulation.csv", "simulation.png", "simulation.svg"]
    assert outcome.summary.startswith(f"{mech.name}: at t = 10 s: [A] = 0.1353")
    basis, note = prediction_basis(mech, Units("s", "M"), overrides={"k": 0.2})
    assert note is None and basis.values["k"] == 0.2
    predicted = predict_workflow(basis, {"A": 1.0}, times)
    assert list(predicted.bundle) == ["simulation.csv", "simulation.png", "simulation.svg",
                                      "prediction.json"]
    assert predicted.result.conc[-1, 0] == pytest.approx(np.exp(-2.0), rel=1e-5)
    assert "no uncertainty" in predicted.summary
