"""Prediction summaries and files."""

from __future__ import annotations

import json


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
    assert header == ("time (s),A (M),P (M),A_lower (M),A_upper (M),P_lower (M),"
                      "P_upper (M)")
    data = json.loads((tmp_path / "p" / "prediction.json").read_text())
    assert data["extrapolated"] is True and "calorimetry" in data["cautions"]
