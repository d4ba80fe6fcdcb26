"""The text summary and output folder of a fit: statistics named for what they are, the
parameter and point tables."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest
from conftest import MODELS

from kinfit.core.formatting import CAUTIONS
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.output.fit import (
    fit_bundle,
    format_fit,
    parameters_csv,
    points_csv,
    write_fit,
)

TIMES = np.array([0.0, 5.0, 10.0, 20.0])
VALUES = np.array([1.0, 0.61, 0.37, 0.14])


def _rows(text):
    return list(csv.DictReader(io.StringIO(text)))


@pytest.fixture(scope="module")
def weighted(tmp_path_factory):
    """The same decay in mM and min, with declared noise (a weighted fit)."""
    folder = tmp_path_factory.mktemp("w")
    (folder / "e.toml").write_text(
        '[units]\ntime = "min"\nconcentration = "mM"\n'
        '[noise]\ndefault = { absolute = 0.01, relative = 0.02 }\n'
        '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n')
    (folder / "a.csv").write_text("time,A\n" + "".join(
        f"{t:g},{v:g}\n" for t, v in zip(TIMES, VALUES)))
    return fit(load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml"),
               starts=1)


def test_format_fit_has_the_essentials(result):
    text = format_fit(result)
    assert "rate = k [A]" in text and "overall order 1" in text
    assert "s^-1" in text and "AICc" in text
    assert "calorimetry" in text and "process-safety review" in text
    assert "calorimetry" in CAUTIONS
    # the runs and their starting conditions
    assert "Runs (starting concentrations in M)" in text
    assert text.splitlines()[text.splitlines().index("Runs (starting concentrations in M)") + 2
                             ].split() == ["a", "1", "4", "A"]


def test_an_unweighted_fit_reports_the_residual_sum_of_squares_not_chi_square(result):
    # no [noise]: the sum of squared residuals is in concentration² units, not a χ²
    text = " ".join(format_fit(result).split())         # lines joined again
    assert "χ²" not in text
    rss = float(np.sum((VALUES - result.predicted) ** 2))
    assert f"residual sum of squares RSS = {rss:.6g} M^2" in text
    sigma = np.sqrt(rss / (4 - 1))
    assert result.sigma == pytest.approx(sigma, rel=1e-12)
    assert f"σ̂ = √(RSS/(N−p)) = {sigma:.3g} M" in text
    stats = result.to_dict()["statistics"]
    assert stats["weighted"] is False and stats["chi_square"] is None
    assert stats["residual_sum_of_squares"] == pytest.approx(rss, rel=1e-12)
    assert stats["residual_sum_of_squares_unit"] == "M^2" and stats["sigma_unit"] == "M"
    assert stats["chisqr"] == stats["residual_sum_of_squares"]      # old key kept


def test_a_weighted_fit_reports_chi_square(weighted):
    text = " ".join(format_fit(weighted).split())
    assert "χ² = " in text and "(weighted by the declared noise)" in text
    assert "residual sum of squares" not in text
    stats = weighted.to_dict()["statistics"]
    assert stats["weighted"] is True and stats["residual_sum_of_squares"] is None
    assert stats["chi_square"] == stats["chisqr"] and stats["ci95_distribution"] == "normal"


def test_parameters_csv_against_curve_fit(result):
    # Outside check: scipy.optimize.curve_fit on the closed-form first-order decay
    # [A] = [A]0 exp(−k t) ([A]0 = 1 given; textbook integrated rate law), ordinary least
    # squares (absolute_sigma=False scales the covariance by RSS/(N − p)), and the
    # Student t quantile from scipy.stats.t with N − p = 3 degrees of freedom.
    from scipy import stats
    from scipy.optimize import curve_fit

    popt, pcov = curve_fit(lambda t, k: np.exp(-k * t), TIMES, VALUES, p0=[0.1])
    k, se = popt[0], float(np.sqrt(pcov[0, 0]))
    q = stats.t.ppf(0.975, 3)
    rows = _rows(parameters_csv(result))
    assert list(rows[0]) == ["name", "value", "standard error", "95 % low", "95 % high",
                             "unit", "role", "fitted"]
    row = {r["name"]: r for r in rows}["k"]
    assert float(row["value"]) == pytest.approx(k, rel=1e-6)
    assert float(row["standard error"]) == pytest.approx(se, rel=1e-3)
    # symmetric in k itself (not in log k), with the t quantile
    assert float(row["95 % low"]) == pytest.approx(k - q * se, rel=1e-3)
    assert float(row["95 % high"]) == pytest.approx(k + q * se, rel=1e-3)
    assert (row["unit"], row["role"], row["fitted"]) == ("s^-1", "rate constant", "yes")
    assert result.to_dict()["parameters"]["k"]["ci95"] == pytest.approx(
        [float(row["95 % low"]), float(row["95 % high"])], rel=1e-9)
    # the summary quotes the same interval and says how it was formed
    text = " ".join(format_fit(result).split())
    assert "Student t, N − p = 3 degrees of freedom" in text and "not in log k" in text


def test_points_csv_is_observed_minus_fitted_with_units(result, weighted):
    rows = _rows(points_csv(result))
    assert list(rows[0]) == ["run", "time (s)", "species", "observed (M)", "fitted (M)",
                             "residual (M)", "sigma (M)"]
    k = result.values["k"]
    for row, t, y in zip(rows, TIMES, VALUES):
        fitted = np.exp(-k * t)                      # closed form at the fitted k (textbook)
        assert float(row["time (s)"]) == t and float(row["observed (M)"]) == y
        assert float(row["fitted (M)"]) == pytest.approx(fitted, rel=1e-6)
        assert float(row["residual (M)"]) == pytest.approx(y - fitted, abs=1e-9)
        assert float(row["sigma (M)"]) == pytest.approx(result.sigma, rel=1e-9)
    # declared noise: each point's own σ = sqrt(a² + (r·y)²) (the README's noise model)
    rows = _rows(points_csv(weighted))
    assert list(rows[0])[1] == "time (min)" and list(rows[0])[6] == "sigma (mM)"
    for row, y in zip(rows, VALUES):
        assert float(row["sigma (mM)"]) == pytest.approx(np.hypot(0.01, 0.02 * y), rel=1e-9)


def test_write_fit(tmp_path, result):
    written = write_fit(tmp_path / "out", result)
    names = {p.name for p in written}
    assert {"result.json", "fit.png", "residuals.png", "fitted_curves.csv", "summary.txt",
            "parameters.csv", "points.csv"} <= names
    data = json.loads((tmp_path / "out" / "result.json").read_text())
    assert data["parameters"]["k"]["unit"] == "s^-1"
    assert data["runs"] == [{"name": "a", "initial": {"A": 1.0}, "fitted_initial": {},
                             "temperature_K": None, "n_points": 4, "measured": ["A"]}]
    header = (tmp_path / "out" / "fitted_curves.csv").read_text().splitlines()[0]
    assert header == "run,time,A,P"
    assert not [p for p in (tmp_path / "out").iterdir() if ".part" in p.name]
    assert list(fit_bundle(result))[-3:] == ["parameters.csv", "points.csv", "result.json"]


def test_write_fit_from_python_records_the_prediction_basis(tmp_path, result):
    # a fit written from a notebook can start `kinfit simulate --fit result.json` too
    import json

    from kinfit.inputs.fit_basis import load_basis

    write_fit(tmp_path / "out", result)
    data = json.loads((tmp_path / "out" / "result.json").read_text())
    assert data["prediction_basis"] is not None
    basis = load_basis(tmp_path / "out" / "result.json", result.mechanism)
    assert basis.values["k"] == pytest.approx(result.values["k"], rel=1e-12)
