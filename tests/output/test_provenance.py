"""Provenance records: versions, command, inputs and their SHA-256."""

from __future__ import annotations

import hashlib

from conftest import DEMO

from kinfit import __version__
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.output.provenance import collect, experiment_inputs, sha256


def test_hashes_match_hashlib():
    # Reference: Python's hashlib (FIPS 180-4 SHA-256) over the whole file.
    path = DEMO / "traces.csv"
    assert sha256(path) == hashlib.sha256(path.read_bytes()).hexdigest()


def test_record_names_every_input():
    exp = load_experiment(DEMO / "experiment.toml")
    mech = load_mechanism(DEMO / "thiol_addition.toml")
    record = collect(experiment_inputs(exp, mech), seed=3, command=["kinfit", "fit"],
                     settings={"starts": 8})
    assert record["kinfit"] == __version__
    assert set(record["inputs"]) == {"experiment", "model", "data: traces.csv"}
    for entry in record["inputs"].values():
        with open(entry["file"], "rb") as handle:
            assert entry["sha256"] == hashlib.sha256(handle.read()).hexdigest()
    assert record["seed"] == 3 and record["settings"] == {"starts": 8}
    assert record["libraries"]["numpy"] and record["created"].endswith("+00:00")
