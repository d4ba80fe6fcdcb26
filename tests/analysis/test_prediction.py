"""Predictions at new conditions: uncertainty bands, rate constants and extrapolation flags."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from kinfit.analysis.activation import activation_parameters
from kinfit.analysis.prediction import (
    basis_from_fit,
    extrapolation_flags,
    fitted_range,
    predict,
)
from kinfit.core.errors import KinfitError
from kinfit.inputs.fit_basis import FittedRange

TIMES = np.linspace(0.0, 200.0, 41)


def test_fitted_range(arrhenius_study):
    rng = fitted_range(arrhenius_study["result"])
    assert rng.temperature == (288.15, 318.15)
    assert rng.initial == {"A": (0.5, 1.0), "P": (0.0, 0.0)}


def test_flags():
    rng = FittedRange((288.15, 318.15), {"A": (0.5, 1.0), "P": (0.0, 0.0)})
    assert extrapolation_flags(rng, {"A": 0.7}, 300.0, "M") == ()
    assert extrapolation_flags(rng, {"A": 1.0}, 318.15) == ()          # edges are inside
    flags = extrapolation_flags(rng, {"A": 2.0, "P": 0.1}, 333.15, "M")
    assert len(flags) == 3
    assert flags[0].startswith("temperature 333.15 K (60.0 °C) is outside")
    assert "starting [A] = 2 M is outside the fitted range 0.5–1 M" in flags
    assert extrapolation_flags(FittedRange(None, {}), {"A": 9.0}, 400.0) == ()


def test_prediction_inside_the_range(arrhenius_study):
    result = arrhenius_study["result"]
    basis = basis_from_fit(result)
    pred = predict(basis, {"A": 0.8}, TIMES, temperature=300.0, seed=1)
    assert not pred.extrapolated and pred.flags == ()
    assert pred.uncertainty == "covariance" and pred.draws == 200 and pred.failed == 0
    # at the fitted values the model is A0 exp(-k t) with m ≈ 1; k from the
    # Arrhenius equation (computed here with scipy.constants.R)
    v = result.values
    k = v["k"] * math.exp(-v["Ea"] * 1e3 / sc.R * (1 / 300.0 - 1 / basis.reference))
    (name, rate), = pred.rates
    assert name == "k" and rate.value == pytest.approx(k, rel=1e-12)
    (act,) = activation_parameters(result)
    assert rate.stderr == pytest.approx(act.rate_at(300.0).stderr, rel=1e-10)
    # the band holds the central prediction and has width where A changes
    assert np.all(pred.lower <= pred.conc + 1e-12) and np.all(pred.conc <= pred.upper + 1e-12)
    assert np.all(pred.upper[5:, 0] - pred.lower[5:, 0] > 0)
    closed = 0.8 * np.exp(-k * TIMES)        # first order, closed form (m is near 1)
    assert np.max(np.abs(pred.conc[:, 0] - closed)) < 0.01


def test_prediction_outside_the_range_is_flagged(arrhenius_study):
    basis = basis_from_fit(arrhenius_study["result"])
    pred = predict(basis, {"A": 2.0}, TIMES, temperature=333.15, seed=1)
    assert pred.extrapolated and len(pred.flags) == 2
    (_, rate), = pred.rates
    assert rate.extrapolated
    data = pred.to_dict()
    assert data["extrapolated"] is True and data["flags"] == list(pred.flags)
    assert data["rate_constants"]["k"]["extrapolated"] is True


def test_band_from_samples(arrhenius_study):
    result = arrhenius_study["result"]
    basis = basis_from_fit(result)
    names = list(result.free_names)
    rng = np.random.default_rng(5)
    mean = np.array([result.values[n] for n in names])
    samples = rng.multivariate_normal(mean, result.covariance, size=1000)
    pred = predict(basis, {"A": 0.8}, TIMES, temperature=300.0, samples=samples, names=names,
                   draws=100, seed=2)
    assert pred.uncertainty == "samples" and pred.draws == 100
    (_, rate), = pred.rates
    lo, hi = rate.posterior_interval
    assert lo < rate.value < hi
    ref = predict(basis, {"A": 0.8}, TIMES, temperature=300.0, draws=100, seed=2)
    # same Gaussian, so bands of similar width (sampling accuracy, common practice)
    width = pred.upper[20, 0] - pred.lower[20, 0]
    assert width == pytest.approx(ref.upper[20, 0] - ref.lower[20, 0], rel=0.35)


def test_prediction_errors(arrhenius_study):
    basis = basis_from_fit(arrhenius_study["result"])
    with pytest.raises(KinfitError, match="depend on temperature; give the temperature"):
        predict(basis, {"A": 1.0}, TIMES)
    with pytest.raises(KinfitError, match="no species 'Z'"):
        predict(basis, {"Z": 1.0}, TIMES, 300.0)
    with pytest.raises(KinfitError, match="above absolute zero"):
        predict(basis, {"A": 1.0}, TIMES, -3.0)
    with pytest.raises(KinfitError, match="increasing"):
        predict(basis, {"A": 1.0}, TIMES[::-1], 300.0)
