"""Temperature summaries and files."""

from __future__ import annotations

import json

from kinfit.output.fit import write_fit


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


def test_interval_columns_only_for_analyses_that_were_run(arrhenius_study):
    from dataclasses import replace

    from kinfit.analysis.activation import activation_parameters
    from kinfit.output.temperature import format_activation

    acts = activation_parameters(arrhenius_study["result"])
    header = next(line for line in format_activation(acts).splitlines()
                  if line.strip().startswith("quantity"))
    assert header.split()[-3:] == ["95", "%", "interval"]      # no profile, no posterior
    # with a profile interval on one quantity, its column appears
    est = [replace(e, profile_interval=(1.0, 2.0)) if i == 0 else e
           for i, e in enumerate(acts[0].estimates)]
    text = format_activation([replace(acts[0], estimates=tuple(est))])
    header = next(line for line in text.splitlines() if line.strip().startswith("quantity"))
    assert header.split()[-1] == "profile"
