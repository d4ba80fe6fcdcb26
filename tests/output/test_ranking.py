"""Ranking summaries and files."""

from __future__ import annotations

import json


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


def test_ranking_of_unweighted_fits_shows_the_residual_sum_of_squares(result):
    # no declared noise: the column is the residual sum of squares with its unit, not χ²
    from conftest import MODELS

    from kinfit.analysis.ranking import compare
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.output.notebook import ranking_html
    from kinfit.output.ranking import format_ranking

    other = fit(result.experiment, load_mechanism(MODELS / "zero_order.toml"), starts=1)
    comparison = compare([result, other])
    header = next(line for line in format_ranking(comparison).splitlines() if "ΔAICc" in line)
    assert header.split()[:5] == ["#", "candidate", "p", "RSS", "(M^2)"]
    assert "χ²" not in format_ranking(comparison)
    assert "residual sum of squares (M²)" in ranking_html(comparison)
