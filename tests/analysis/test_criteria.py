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


def _candidate(name, w, values, stderr, fixed=(), units=None):
    """A ranked row as model_averages reads it; parameters in `fixed` are not estimated."""
    roles = {n: "rate constant" if n.startswith("k") else "order" for n in values}
    units = units or {n: ("M^-1 s^-1" if n.startswith("k") else "") for n in values}
    fit_ = SimpleNamespace(values=values, stderr={n: (None if n in fixed else stderr[n])
                                                  for n in values},
                           roles=roles, units=units,
                           free_names=tuple(n for n in values if n not in fixed))
    return SimpleNamespace(name=name, fit=fit_, akaike_weight=w)


def test_model_averages_hand_computed():
    # Burnham & Anderson, Model Selection and Multimodel Inference, 2nd ed. (2002),
    # chapter 4, eq. 4.9 (from memory): θ̄ = Σ w_i θ_i and
    # var(θ̄) = [Σ w_i sqrt(var_i + (θ_i − θ̄)²)]², over the candidates that estimate θ,
    # with their Akaike weights renormalised. By hand:
    #   k (estimated by all three, weights 0.5, 0.3, 0.2):
    #     k̄ = 0.5·2.0 + 0.3·2.6 + 0.2·2.3 = 2.24
    #     se = 0.5·sqrt(0.1² + 0.24²) + 0.3·sqrt(0.2² + 0.36²) + 0.2·sqrt(0.15² + 0.06²)
    #        = 0.5·0.26 + 0.3·0.4118252 + 0.2·0.1615549 = 0.2858585
    #   n (fixed at 1 by 'n=1', so over 'free' and 'wide' only, weights 0.5/0.8 = 0.625 and
    #     0.3/0.8 = 0.375):
    #     n̄ = 0.625·1.0 + 0.375·1.2 = 1.075
    #     se = 0.625·sqrt(0.05² + 0.075²) + 0.375·sqrt(0.1² + 0.125²)
    #        = 0.0563367 + 0.0600293 = 0.1163660
    #   (with the fixed candidate counted as se 0, as before: 1.06 ± 0.1027, too sure)
    rows = [_candidate("free", 0.5, {"k": 2.0, "n": 1.0}, {"k": 0.1, "n": 0.05}),
            _candidate("wide", 0.3, {"k": 2.6, "n": 1.2}, {"k": 0.2, "n": 0.1}),
            _candidate("n=1", 0.2, {"k": 2.3, "n": 1.0}, {"k": 0.15, "n": 0.0}, fixed=("n",)),
            _candidate("other", 0.0, {"k": 9.0}, {"k": 1.0}, units={"k": "M^-2 s^-1"})]
    averages = {a.name: a for a in model_averages(rows)}
    k, n = averages["k"], averages["n"]
    assert k.value == pytest.approx(2.24, rel=1e-12)
    assert k.stderr == pytest.approx(0.2858585, rel=1e-6)
    assert k.n_candidates == 3 and k.weight == pytest.approx(1.0) and k.left_out == ()
    assert n.value == pytest.approx(1.075, rel=1e-12)
    assert n.stderr == pytest.approx(0.1163660, rel=1e-6)
    assert n.candidates == (("free", pytest.approx(0.625)), ("wide", pytest.approx(0.375)))
    assert n.left_out == ("n=1",) and n.weight == pytest.approx(0.8)
    data = n.to_dict()
    assert data["candidates"][0] == {"name": "free", "weight": pytest.approx(0.625)}
    assert data["left_out"] == ["n=1"]


def test_an_order_estimated_by_one_candidate_is_not_averaged():
    # An order search: the free-order candidate estimates m = 1.0010 ± 0.0063, the
    # fixed-order candidate m = 1 has most of the weight. Averaging the two (the fixed one
    # as ± 0) gave a spuriously small error; now m is not averaged: the free fit's own
    # estimate and error stand, and the fixed candidate is named as left out.
    rows = [_candidate("m=1", 0.7, {"k": 0.05, "m": 1.0}, {"k": 0.001, "m": 0.0},
                       fixed=("m",)),
            _candidate("free", 0.3, {"k": 0.0502, "m": 1.0010}, {"k": 0.002, "m": 0.0063},
                       units={"k": "M^-1.001 s^-1", "m": ""})]
    averages = {a.name: a for a in model_averages(rows)}
    m = averages["m"]
    assert (m.n_candidates, m.value, m.stderr) == (1, 1.0010, 0.0063)
    assert m.candidates == (("free", 1.0),) and m.left_out == ("m=1",)
    # k has another unit in each candidate: not averaged either
    assert averages["k"].n_candidates == 1 and averages["k"].left_out == ("free",)


def test_a_ranking_averages_only_over_candidates_that_estimate(small_ranking):
    from kinfit.output.ranking import format_ranking

    comparison, _, _ = small_ranking
    assert comparison.averages
    for a in comparison.averages:
        for name, _w in a.candidates:
            assert a.name in comparison[name].fit.free_names
        for name in a.left_out:
            fit_ = comparison[name].fit
            assert a.name not in fit_.free_names or fit_.units[a.name] != a.unit
        assert sum(w for _, w in a.candidates) == pytest.approx(1.0)
    m = next(a for a in comparison.averages if a.name == "m")
    free = comparison["A + B -> P, free orders"].fit
    assert (m.value, m.stderr) == (free.values["m"], free.stderr["m"])
    text = format_ranking(comparison)
    assert "m is estimated by 'A + B -> P, free orders' alone, so it is not averaged" in text
    assert comparison.to_dict()["model_averages"][0]["candidates"]
