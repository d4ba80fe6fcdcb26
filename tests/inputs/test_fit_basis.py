"""The prediction basis written with a fit and read back: round trip and refusals."""

from __future__ import annotations

import json

import numpy as np
import pytest

from kinfit.analysis.prediction import basis_from_fit, predict
from kinfit.core.errors import KinfitError
from kinfit.inputs.fit_basis import basis_to_dict, load_basis

TIMES = np.linspace(0.0, 200.0, 41)


def test_basis_round_trip(tmp_path, arrhenius_study):
    result = arrhenius_study["result"]
    basis = basis_from_fit(result)
    path = tmp_path / "temperature.json"
    path.write_text(json.dumps({"prediction_basis": basis_to_dict(basis)}))
    loaded = load_basis(path, result.mechanism)
    assert loaded.values == basis.values and loaded.free_names == basis.free_names
    np.testing.assert_allclose(loaded.covariance, basis.covariance)
    assert loaded.reference == basis.reference and loaded.fitted == basis.fitted
    a = predict(basis, {"A": 0.8}, TIMES, 330.0, seed=4)
    b = predict(loaded, {"A": 0.8}, TIMES, 330.0, seed=4)
    np.testing.assert_allclose(a.upper, b.upper)


@pytest.mark.parametrize("text, message", [
    ("{", "line 1: not valid JSON"),
    ('{"other": 1}', "holds no prediction basis"),
    ('{"schema": "kinfit.result/1", "prediction_basis": null}', "holds no prediction basis"),
    ('{"schema": "kinfit.posterior/1"}', "holds 'kinfit.posterior/1', not a fit"),
    ('{"schema": "kinfit.result/2"}', "schema 'kinfit.result/2' is not one this kinfit reads"),
    ('{"prediction_basis": {"parameters": {"x": 1}}}', "not a prediction basis"),
])
def test_load_basis_errors(tmp_path, arrhenius_study, text, message):
    path = tmp_path / "t.json"
    path.write_text(text)
    with pytest.raises(KinfitError, match=message):
        load_basis(path, arrhenius_study["mechanism"])
    with pytest.raises(KinfitError, match="file not found"):
        load_basis(tmp_path / "none.json", arrhenius_study["mechanism"])


def test_a_fit_s_result_json_is_read_as_its_temperature_json(tmp_path, arrhenius_study):
    result = arrhenius_study["result"]
    basis = basis_from_fit(result)
    for kind in ("result", "temperature"):
        path = tmp_path / f"{kind}.json"
        path.write_text(json.dumps({"schema": f"kinfit.{kind}/1",
                                    "prediction_basis": basis_to_dict(basis)}))
        loaded = load_basis(path, result.mechanism)
        assert loaded.values == basis.values and loaded.units == basis.units
        np.testing.assert_allclose(loaded.covariance, basis.covariance)


def test_basis_of_another_model_is_refused(tmp_path, arrhenius_study, eyring_study):
    path = tmp_path / "t.json"
    path.write_text(json.dumps({"prediction_basis": basis_to_dict(
        basis_from_fit(eyring_study["result"]))}))
    with pytest.raises(KinfitError, match="are not the model's"):
        load_basis(path, arrhenius_study["mechanism"])
