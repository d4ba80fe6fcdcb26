"""Text summaries and output folders."""

from __future__ import annotations

import json

import pytest

from conftest import MODELS
from kinfit.data import load_experiment
from kinfit.fit import fit
from kinfit.mechanism import load_mechanism
from kinfit.report import (CAUTIONS, format_fit, format_posterior, format_value, write_fit,
                           write_posterior)


@pytest.mark.parametrize("value, se, text", [
    (1.4887e-4, 6.11e-6, "1.489e-04 ± 6.1e-06"),
    (1.00374, 0.00567, "1.0037 ± 0.0057"),
    (213.809, 12.35, "214 ± 12"),
    (0.54724, 0.10456, "0.55 ± 0.10"),
    (2.5, None, "2.5"),
])
def test_format_value(value, se, text):
    assert format_value(value, se) == text


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


def test_format_posterior(line_posterior):
    post, _ = line_posterior
    text = format_posterior(post)
    assert text.startswith("Posterior of 'zero order' given 1 runs (11 points)")
    assert ("NOT CONVERGED" in text) != text.splitlines()[3].startswith("CONVERGED")
    header = [line for line in text.splitlines() if "covariance 95 %" in line][0]
    assert header.split() == ["name", "unit", "posterior", "covariance", "95", "%", "profile",
                              "95", "%", "posterior", "95", "%", "flags"]
    assert "k: uniform on [0, 1] (from the model file)" in text
    assert "autocorrelation time τ (steps): k" in text
    assert " ".join(CAUTIONS.split()[:6]) in " ".join(text.split())


def test_write_posterior(line_posterior, tmp_path):
    post, _ = line_posterior
    written = write_posterior(tmp_path / "out", post)
    names = sorted(p.name for p in written)
    assert names == sorted(["chain.npz", "corner.png", "bands.png", "profiles.png",
                            "posterior_summary.txt", "posterior.json"])
    data = json.loads((tmp_path / "out" / "posterior.json").read_text())
    assert data["parameters"]["k"]["unit"] == "M s^-1"
    assert not [p for p in (tmp_path / "out").iterdir() if ".part" in p.name]
