"""Criterion weights, evidence words, F and likelihood-ratio tests and model averages
against closed forms, scipy and hand calculation."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy import stats

from kinfit.analysis.criteria import (
    criterion_weights,
    evidence_aicc,
    evidence_bic,
    evidence_bic_for_best,
    f_test,
    likelihood_ratio_test,
    model_averages,
)
from kinfit.core.errors import KinfitError


def test_f_test_against_closed_form_and_scipy():
    # For F(2, ν), P(F > x) = (1 + 2x/ν)^(−ν/2) (closed form of the F
    # distribution's survival function with 2 numerator degrees of freedom).
    stat, p = f_test(chi2_small=130.0, chi2_large=100.0, p_small=2, p_large=4, n_points=54)
    assert stat == pytest.approx((30.0 / 2) / (100.0 / 50))
    assert p == pytest.approx((1 + 2 * stat / 50) ** (-50 / 2), rel=1e-10)
    # and for other degrees of freedom, scipy.stats.f directly
    stat, p = f_test(150.0, 100.0, 1, 4, 24)
    assert p == pytest.approx(stats.f.sf((50.0 / 3) / (100.0 / 20), 3, 20), rel=1e-12)
    # a larger model fitting worse than the smaller: no evidence, not a negative F
    assert f_test(99.0, 100.0, 1, 2, 20) == (0.0, 1.0)
    with pytest.raises(KinfitError, match="p_small < p_large"):
        f_test(1.0, 1.0, 2, 2, 10)


def test_likelihood_ratio_against_closed_form():
    # χ² with 2 degrees of freedom: P(D > x) = exp(−x/2) (closed form).
    stat, p = likelihood_ratio_test(-110.0, -106.5, 2)
    assert stat == pytest.approx(7.0)
    assert p == pytest.approx(math.exp(-3.5), rel=1e-12)
    assert likelihood_ratio_test(-100.0, -101.0, 1) == (0.0, 1.0)


def test_weights_hand_computed():
    # Akaike weights w_i = exp(−Δ_i/2)/Σ exp(−Δ_j/2) (Burnham & Anderson 2002,
    # from memory). By hand for Δ = 0, 2, 4: 1, e^−1, e^−2 over 1.503214:
    # 0.665241, 0.244728, 0.090031.
    deltas, weights = criterion_weights([100.0, 102.0, 104.0, math.inf])
    np.testing.assert_allclose(deltas[:3], [0.0, 2.0, 4.0])
    np.testing.assert_allclose(weights, [0.665241, 0.244728, 0.090031, 0.0], atol=1e-6)


@pytest.mark.parametrize("delta, words", [
    (0.0, "best"), (1.9, "substantial support"), (2.0, "substantial support"),
    (3.0, "less support"), (5.0, "considerably less support"), (7.0, "considerably less"),
    (8.0, "little support"), (10.5, "essentially no support")])
def test_aicc_evidence_scale(delta, words):
    # Burnham & Anderson (2002) §2.6 (from memory): 0–2 substantial, 4–7
    # considerably less, > 10 essentially none; 2–4 and 7–10 are kinfit's words.
    assert evidence_aicc(delta).startswith(words)


@pytest.mark.parametrize("delta, words", [
    (1.0, "not worth more than a bare mention"), (4.0, "positive"), (8.0, "strong"),
    (12.0, "very strong")])
def test_bic_evidence_scale(delta, words):
    # Kass & Raftery (1995) §3.2, 2 ln B scale (from memory).
    assert words in evidence_bic(delta)


@pytest.mark.parametrize("delta, words", [
    (0.0, "no evidence either way"), (1.0, "evidence for the best not worth more than a bare "
                                          "mention"),
    (4.0, "positive evidence for the best"), (8.0, "strong evidence for the best"),
    (12.0, "very strong evidence for the best")])
def test_bic_evidence_for_the_best(delta, words):
    # Kass & Raftery (1995) §3.2, 2 ln B scale (from memory), read in favour of
    # the best candidate: 0–2 bare mention, 2–6 positive, 6–10 strong, > 10 very strong.
    assert evidence_bic_for_best(delta) == words


def test_model_averages_hand_computed():
    # Burnham & Anderson (2002) eq. 4.9 (from memory), by hand: weights 0.6, 0.3
    # (the 0.1 candidate lacks n); k̄ = (0.6·2.0 + 0.3·2.6)/0.9 = 2.2;
    # se = [0.6·sqrt(0.1² + 0.2²) + 0.3·sqrt(0.2² + 0.4²)]/0.9
    #    = [0.6·0.223607 + 0.3·0.447214]/0.9 = 0.298142.
    def row(w, k, se_k, n=None, se_n=None):
        values, stderr, roles, units = {"k": k}, {"k": se_k}, {"k": "rate constant"}, \
            {"k": "M^-1 s^-1"}
        if n is not None:
            values["n"], stderr["n"], roles["n"], units["n"] = n, se_n, "order", ""
        fit_ = SimpleNamespace(values=values, stderr=stderr, roles=roles, units=units,
                               free_names=tuple(values))
        return SimpleNamespace(fit=fit_, akaike_weight=w)

    rows = [row(0.6, 2.0, 0.1, 1.0, 0.05), row(0.3, 2.6, 0.2, 1.2, 0.1), row(0.1, 9.0, 1.0)]
    rows[2].fit.units["k"] = "M^-2 s^-1"      # a different overall order: not averaged
    averages = {a.name: a for a in model_averages(rows)}
    k = averages["k"]
    assert k.value == pytest.approx(2.2) and k.stderr == pytest.approx(0.298142, rel=1e-5)
    assert k.weight == pytest.approx(0.9) and k.n_candidates == 2
    assert averages["n"].value == pytest.approx((0.6 * 1.0 + 0.3 * 1.2) / 0.9)
