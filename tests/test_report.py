"""Text summaries and output folders (kinfit.output: fit, temperature, prediction, ranking,
posterior, signals, notebook)."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from conftest import MODELS

from kinfit.core.formatting import CAUTIONS, format_value
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.output.fit import format_fit, write_fit
from kinfit.output.posterior import format_posterior, write_posterior


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


def test_csv_fields_are_quoted_where_needed(tmp_path):
    # a run name with a comma survives the round trip through a general CSV reader (pandas)
    import pandas as pd

    from kinfit.output.fit import curves_csv

    (tmp_path / "e.toml").write_text('[[runs]]\nname = "cold, 1"\nfile = "a.csv"\n'
                                     'initial = { A = 1 }\n')
    (tmp_path / "a.csv").write_text("time,A\n0,1\n5,0.61\n10,0.37\n20,0.14\n")
    result = fit(load_experiment(tmp_path / "e.toml"),
                 load_mechanism(MODELS / "first_order.toml"), starts=1)
    table = pd.read_csv(io.StringIO(curves_csv(result)))
    assert list(table.columns) == ["run", "time", "A", "P"]
    assert set(table["run"]) == {"cold, 1"}
    # first order, [A] = [A]0 exp(-k t) (closed form): the curve at its last time
    k = result.values["k"]
    last = table.iloc[-1]
    assert last["A"] == pytest.approx(np.exp(-k * last["time"]), rel=1e-5)


# ------------------------------------------------------------ temperature

def test_temperature_summary_and_files(tmp_path, arrhenius_study):
    from kinfit.analysis.activation import activation_parameters
    from kinfit.analysis.prediction import basis_from_fit
    from kinfit.output.temperature import format_activation, temperature_bundle

    result = arrhenius_study["result"]
    acts = activation_parameters(result)
    text = format_activation(acts, arrhenius_study["two_stage"])
    for needed in ("Ea (fitted)", "ΔH‡", "ΔS‡", "ΔG‡(298.15 K)", "T_ref = 302.41 K (29.3 °C), where k = k_ref",
                   "Two-stage analysis", "global fit 95 %", "Extrapolation beyond the measured "
                   "range is unsafe", "calorimetry", "process-safety review", "local codes",
                   "licensed professional practice", "thermal runaway"):
        assert needed in " ".join(text.split()), needed
    files = temperature_bundle(acts, arrhenius_study["two_stage"], basis_from_fit(result))
    assert list(files) == ["temperature.json", "arrhenius.png", "arrhenius.svg", "eyring.png",
                           "eyring.svg"]
    data = json.loads(files["temperature.json"])
    assert list(data) == ["schema", "activation", "two_stage", "order_warnings",
                          "prediction_basis", "cautions"]
    assert data["schema"] == "kinfit.temperature/1"
    ea = data["activation"][0]["estimates"]["Ea"]
    assert ea["unit"] == "kJ/mol" and ea["stderr"] > 0 and ea["fitted"] is True
    assert "calorimetry" in data["cautions"]
    written = write_fit(tmp_path / "out", result, extra_files=files, extra_summary=text)
    assert {"temperature.json", "arrhenius.png", "eyring.svg"} <= {p.name for p in written}
    assert "Caution (temperature)" in (tmp_path / "out" / "summary.txt").read_text()


def test_write_prediction(tmp_path, arrhenius_study):
    import numpy as np

    from kinfit.analysis.prediction import basis_from_fit, predict
    from kinfit.output.bundle import write_bundle
    from kinfit.output.prediction import format_prediction, prediction_bundle

    basis = basis_from_fit(arrhenius_study["result"])
    pred = predict(basis, {"A": 0.8}, np.linspace(0, 100, 11), 333.15, draws=20)
    text = format_prediction(pred, "decay")
    assert text.startswith("EXTRAPOLATED") and "calorimetry" in text
    written = write_bundle(tmp_path / "p", prediction_bundle(pred, "decay"))
    assert [p.name for p in written] == ["simulation.csv", "simulation.png", "simulation.svg",
                                         "prediction.json"]
    header = (tmp_path / "p" / "simulation.csv").read_text().splitlines()[0]
    assert header == "time,A,P,A_lower,A_upper,P_lower,P_upper"
    data = json.loads((tmp_path / "p" / "prediction.json").read_text())
    assert data["extrapolated"] is True and "calorimetry" in data["cautions"]


def test_format_ranking(small_ranking):
    from kinfit.output.ranking import format_ranking

    comparison, _, _ = small_ranking
    text = format_ranking(comparison, top=3)
    lines = text.splitlines()
    assert lines[0].startswith("Ranking of 5 candidates fitted to")
    assert "sorted by AICc" in lines[0]
    header = next(line for line in lines if "ΔAICc" in line)
    assert header.split()[:4] == ["#", "candidate", "p", "χ²"]
    assert "  1  m=1, n=2" in text and "... 2 more in ranking.json" in text
    assert "Verdict" in text and "Nested pairs" in text
    assert "Initial-rates cross-check" in text and "Burnham & Anderson" in text
    assert "Kass & Raftery" in text and "process-safety review" in text


def test_write_ranking(small_ranking, tmp_path):
    from kinfit.output.ranking import write_ranking

    comparison, _, _ = small_ranking
    written = write_ranking(tmp_path / "out", comparison)
    names = {p.name for p in written}
    assert {"ranking.json", "ranking.txt", "weights.png", "weights.svg", "initial_rates.png",
            "initial_rates.csv", "result.json"} <= names
    data = json.loads((tmp_path / "out" / "ranking.json").read_text())
    assert data["candidates"][0]["name"] == comparison.best.name
    assert (tmp_path / "out" / "best" / "fit.png").exists()
    csv = (tmp_path / "out" / "initial_rates.csv").read_text().splitlines()
    assert csv[0] == "run,A0,B0,rate,stderr,note" and len(csv) == 4
    import pandas as pd  # notes with commas stay one field each

    table = pd.read_csv(tmp_path / "out" / "initial_rates.csv", keep_default_na=False)
    assert list(table["note"]) == [r.note for r in comparison.cross_check.initial_rates.rates]
    assert json.loads((tmp_path / "out" / "best" / "result.json").read_text())["schema"] \
        == "kinfit.result/1"


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
                            "corner.svg", "bands.svg", "profiles.svg",
                            "posterior_summary.txt", "posterior.json"])
    data = json.loads((tmp_path / "out" / "posterior.json").read_text())
    assert data["parameters"]["k"]["unit"] == "M s^-1"
    assert not [p for p in (tmp_path / "out").iterdir() if ".part" in p.name]


def test_signal_summary_and_files():
    from conftest import DEMO

    from kinfit.output.signals import format_components, format_signals, signals_bundle

    folder = DEMO / "spectra"
    mech = load_mechanism(folder / "dye_formation.toml")
    result = fit(load_experiment(folder / "spectra.toml"), mech, starts=1)
    text = format_signals(result, [400.0])
    assert "spectra of precursor, intermediate, dye resolved at 71 wavelengths" in text
    assert "significant components: 3" in text and "the fit used the leading 3" in text
    first = format_components(result.signals.components).splitlines()[0]
    assert "  " + first in text
    files = signals_bundle(result)
    assert set(files) >= {"spectra.csv", "spectra.png", "spectra.svg", "components.png",
                          "residual_map.png", "residual_map_r1.csv", "wavelength_traces.png"}
    rows = files["spectra.csv"].splitlines()
    assert len(rows) == 72
    assert json.loads(json.dumps(result.to_dict()))["signals"]["reduced"] is True


def test_notebook_tables_and_figures(result):
    # a notebook shows tidy HTML tables for results, and kinfit.figures returns the plots
    import xml.etree.ElementTree as ET

    import kinfit
    from kinfit.output.notebook import fit_html

    html = fit_html(result)
    root = ET.fromstring(f"<div>{html}</div>")        # well-formed markup
    assert len(root.findall("table")) == 3 and "s^-1" in html
    figs = kinfit.make_figures(result)
    assert set(figs) == {"fit", "residuals"} and figs["fit"].axes


def test_notebook_tables_of_posteriors_and_rankings(line_posterior, small_ranking):
    import xml.etree.ElementTree as ET

    import kinfit

    line_posterior, small_ranking = line_posterior[0], small_ranking[0]
    from kinfit.output.notebook import posterior_html, ranking_html

    for obj, show in ((line_posterior, posterior_html), (small_ranking, ranking_html)):
        html = show(obj)
        ET.fromstring(f"<div>{html}</div>")
        assert "<table>" in html
    assert {"corner", "bands", "fit", "residuals"} <= set(kinfit.make_figures(line_posterior))
    assert {"weights", "fit"} <= set(kinfit.make_figures(small_ranking))


def test_the_root_registers_notebook_display_by_type_name(result):
    # IPython's formatter API (common practice: display_formatter.formatters["text/html"]
    # .for_type_by_name); a stand-in shell records what kinfit registers.
    import kinfit

    registered = {}

    class Formatter:
        def for_type_by_name(self, module, name, func):
            registered[(module, name)] = func

    class Shell:
        display_formatter = type("D", (), {"formatters": {"text/html": Formatter()}})()

    assert kinfit.register_notebook_display(Shell())
    show = registered[(type(result).__module__, type(result).__name__)]
    assert "<table>" in show(result)
    assert {("kinfit.estimation.posterior", "Posterior"),
            ("kinfit.analysis.ranking", "Comparison")} <= set(registered)
