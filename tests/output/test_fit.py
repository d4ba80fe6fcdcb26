"""The text summary and output folder of a fit."""

from __future__ import annotations

import json

from kinfit.core.formatting import CAUTIONS
from kinfit.output.fit import format_fit, write_fit


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
