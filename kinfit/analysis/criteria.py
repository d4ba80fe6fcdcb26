"""Information-criterion weights, evidence words, nested-model tests and model averages.

The statistics a ranking is built from, each a small function of numbers
(criteria, χ², log-likelihoods, weights), with the sources of every scale
and the words kinfit uses in verdicts.

Information criteria
--------------------
AIC, AICc and BIC come from each fit, with the likelihood conventions of
:mod:`kinfit.numerics.problem` (statsmodels' OLS convention; every candidate is
fitted to the same data points, so constants cancel in differences). For a
criterion X the difference Δ_i = X_i − min X and the weights

    w_i = exp(−Δ_i/2) / Σ_j exp(−Δ_j/2)

are the Akaike weights for AIC/AICc (Burnham & Anderson 2002, §2.9, from
memory) and approximate posterior model probabilities under equal prior
odds for BIC (Kass & Raftery 1995, §4.1.3, from memory).

Evidence scales (the words used in verdicts)
--------------------------------------------
* ΔAICc, Burnham & Anderson, *Model Selection and Multimodel Inference*
  (2nd ed. 2002), §2.6 (from memory): 0–2 substantial support, 4–7
  considerably less support, > 10 essentially no support. kinfit calls 2–4
  "less support" and 7–10 "little support" to fill the gaps (kinfit's
  wording).
* ΔBIC read as 2 ln(Bayes factor), Kass & Raftery, "Bayes Factors", JASA
  90 (1995) 773, §3.2 (from memory): 0–2 not worth more than a bare
  mention, 2–6 positive, 6–10 strong, > 10 very strong.

Tests of a nested pair
----------------------
For a smaller model nested in a larger one (see :mod:`kinfit.analysis.nesting`)
the extra-sum-of-squares F-test

    F = [(χ²_s − χ²_l)/(p_l − p_s)] / [χ²_l/(N − p_l)],   F ~ F(p_l − p_s, N − p_l)

and the likelihood-ratio test D = 2(ln L_l − ln L_s) ~ χ²(p_l − p_s)
(Wilks 1938).

Model averaging
---------------
A rate constant or order is averaged only over the candidates that estimate
it: a candidate that fixes it (an order search's fixed-order candidates fix
their orders) or lacks it says nothing about its uncertainty and is left out,
and so is one whose rate constant has another unit than the best
estimating candidate's (a rate constant's unit changes with the overall
order). Over the candidates that remain, with Akaike (AICc) weights w_i
renormalised to sum to 1 among them,

    θ̄ = Σ w_i θ_i,
    var(θ̄) = [Σ w_i sqrt(var(θ_i) + (θ_i − θ̄)²)]²

the unconditional variance of Burnham & Anderson, *Model Selection and
Multimodel Inference*, 2nd ed. (2002), chapter 4 (eq. 4.9, from
memory), whose square root is the unconditional standard error. A parameter
estimated by one candidate only is not averaged (its own estimate and
standard error stand); each average lists the candidates it used with their
renormalised weights and the supported candidates it left out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.parameters import Role

__all__ = ["CRITERIA", "NOTABLE_WEIGHT", "SOURCES", "ModelAverage", "criterion_weights",
           "evidence_aicc", "evidence_bic", "evidence_bic_for_best", "f_test",
           "likelihood_ratio_test", "model_averages"]

CRITERIA = ("aicc", "aic", "bic")
NOTABLE_WEIGHT = 0.001     # Akaike weight below which a left-out candidate goes unnamed

# Burnham & Anderson (2002) §2.6, from memory; the 2–4 and 7–10 bands are kinfit's.
_AICC_SCALE = ((2.0, "substantial support"), (4.0, "less support"),
               (7.0, "considerably less support"), (10.0, "little support"),
               (math.inf, "essentially no support"))
# Kass & Raftery (1995) §3.2, 2 ln B scale, from memory.
_BIC_SCALE = ((2.0, "not worth more than a bare mention"), (6.0, "positive"),
              (10.0, "strong"), (math.inf, "very strong"))
SOURCES = {
    "aicc": "Burnham & Anderson, Model Selection and Multimodel Inference, 2nd ed. (2002), "
            "§2.6: ΔAICc 0–2 substantial support, 4–7 considerably less, >10 essentially "
            "none",
    "bic": "Kass & Raftery, Bayes Factors, J. Am. Stat. Assoc. 90 (1995) 773, §3.2: "
           "ΔBIC ≈ 2 ln B; 0–2 not worth more than a bare mention, 2–6 positive, "
           "6–10 strong, >10 very strong",
    "nested": "extra-sum-of-squares F-test; likelihood-ratio test (Wilks 1938); boundary "
              "cases conservative (Self & Liang 1987)",
    "averaging": "Burnham & Anderson (2002), chapter 4, eq. 4.9: unconditional variance "
                 "[Σ w_i sqrt(var_i + (θ_i − θ̄)²)]² over the candidates that estimate the "
                 "parameter, weights renormalised among them",
}


@dataclass(frozen=True)
class ModelAverage:
    """A parameter averaged over the candidates that estimate it (AICc weights).

    Attributes
    ----------
    name : str
    role : Role
        Rate constant or order.
    unit : str
    value : float
        θ̄ = Σ w_i θ_i with the renormalised weights.
    stderr : float or None
        Unconditional standard error, the square root of Burnham & Anderson's
        unconditional variance (2002, chapter 4, eq. 4.9).
    weight : float
        Total Akaike weight of the candidates averaged over (before
        renormalising).
    n_candidates : int
    candidates : tuple of (str, float)
        Each candidate averaged over and its renormalised weight w_i, best
        first.
    left_out : tuple of str
        Candidates of Akaike weight at least :data:`NOTABLE_WEIGHT` that
        have the parameter but do not estimate it (they fix it) or give it
        another unit.

    With `n_candidates` 1 the parameter is not averaged: `value` and
    `stderr` are the one estimating candidate's own.
    """

    name: str
    role: Role
    unit: str
    value: float
    stderr: float | None
    weight: float
    n_candidates: int
    candidates: tuple[tuple[str, float], ...] = ()
    left_out: tuple[str, ...] = ()

    def to_dict(self):
        """Plain-Python form: one entry of ``model_averages`` in ``ranking.json``."""
        return {"name": self.name, "role": self.role, "unit": self.unit,
                "value": self.value, "stderr": self.stderr, "weight": self.weight,
                "n_candidates": self.n_candidates,
                "candidates": [{"name": n, "weight": w} for n, w in self.candidates],
                "left_out": list(self.left_out)}


# ------------------------------------------------------------- weights, words

def criterion_weights(values):
    """Weights exp(−Δ/2)/Σ exp(−Δ/2) of criterion values (AIC, AICc or BIC).

    Parameters
    ----------
    values : array_like [n]
        Infinite or NaN values get weight 0.

    Returns
    -------
    deltas, weights : ndarray [n]
    """
    values = np.asarray(values, dtype=float)
    finite = np.isfinite(values)
    deltas = np.full(values.shape, math.inf)
    weights = np.zeros(values.shape)
    if finite.any():
        deltas[finite] = values[finite] - values[finite].min()
        raw = np.exp(-0.5 * deltas[finite])
        weights[finite] = raw / raw.sum()
    return deltas, weights


def evidence_aicc(delta):
    """Burnham & Anderson's reading of ΔAICc (see the module notes)."""
    if not math.isfinite(delta):
        return "not comparable (AICc undefined)"
    if delta == 0:
        return "best"
    return next(text for limit, text in _AICC_SCALE if delta <= limit)


def evidence_bic(delta):
    """Kass & Raftery's reading of ΔBIC as evidence against a candidate."""
    if not math.isfinite(delta):
        return "not comparable (BIC undefined)"
    if delta == 0:
        return "best"
    word = next(text for limit, text in _BIC_SCALE if delta <= limit)
    return f"evidence against it {word}" if delta <= 2 else f"{word} evidence against it"


def evidence_bic_for_best(delta):
    """Kass & Raftery's reading of a runner-up's ΔBIC as evidence for the best."""
    if delta <= 0:
        return "no evidence either way"
    word = next(text for limit, text in _BIC_SCALE if delta <= limit)
    return f"evidence for the best {word}" if delta <= 2 else f"{word} evidence for the best"


# ------------------------------------------------------------- nested pairs

def f_test(chi2_small, chi2_large, p_small, p_large, n_points):
    """Extra-sum-of-squares F-test of a nested pair.

    Parameters
    ----------
    chi2_small, chi2_large : float
        Residual sums of squares (weighted with declared noise).
    p_small, p_large : int
        Fitted parameters, p_small < p_large.
    n_points : int

    Returns
    -------
    f, pvalue : float
        F = [(χ²_s − χ²_l)/(p_l − p_s)] / [χ²_l/(N − p_l)] against
        F(p_l − p_s, N − p_l); a negative difference (the larger fit missed
        the smaller one's optimum) gives F = 0, p = 1.
    """
    from scipy.stats import f as f_dist

    df1, df2 = p_large - p_small, n_points - p_large
    if df1 <= 0 or df2 <= 0:
        raise KinfitError(f"an F-test needs p_small < p_large < N; got {p_small}, {p_large}, "
                          f"{n_points}")
    if chi2_large <= 0:
        return math.inf, 0.0
    stat = max(chi2_small - chi2_large, 0.0) / df1 / (chi2_large / df2)
    return float(stat), float(f_dist.sf(stat, df1, df2))


def likelihood_ratio_test(loglik_small, loglik_large, extra_params):
    """Likelihood-ratio test: D = 2(ln L_l − ln L_s) against χ²(extra_params).

    Returns
    -------
    statistic, pvalue : float
        A negative D (the larger fit missed) is reported as 0 with p = 1.
    """
    from scipy.stats import chi2

    stat = max(2.0 * (loglik_large - loglik_small), 0.0)
    return float(stat), float(chi2.sf(stat, extra_params))


# ---------------------------------------------------------------- averaging

def model_averages(rows):
    """Rate constants and orders averaged over the candidates that estimate them.

    Parameters
    ----------
    rows : sequence of Ranked
        Best first. Each row needs ``name``, ``akaike_weight`` and a ``fit``
        with ``values``, ``stderr``, ``roles``, ``units`` and
        ``free_names``.

    Returns
    -------
    tuple of ModelAverage
        One per parameter estimated by at least two candidates with weight,
        with the same role and unit as in the best candidate that estimates
        it (see the module notes); and one, with ``n_candidates`` 1 and that
        candidate's own estimate, for a parameter that only one candidate
        estimates while others of weight at least :data:`NOTABLE_WEIGHT`
        fix it, so that a report can say why it is not averaged.
    """
    names = []
    for row in rows:
        for n, role in row.fit.roles.items():
            if role in (Role.RATE_CONSTANT, Role.ORDER) and n not in names:
                names.append(n)
    out = []
    for name in names:
        holders = [r for r in rows if name in r.fit.values and r.akaike_weight > 0]
        estimating = [r for r in holders if name in r.fit.free_names]
        if not estimating:
            continue
        role = estimating[0].fit.roles[name]
        unit = estimating[0].fit.units.get(name)
        same = [r for r in estimating if r.fit.roles.get(name) == role
                and r.fit.units.get(name) == unit]
        left_out = tuple(r.name for r in holders if r.akaike_weight >= NOTABLE_WEIGHT
                         and all(r is not x for x in same))
        if len(same) < 2 and not left_out:
            continue
        total = float(sum(r.akaike_weight for r in same))
        w = np.array([r.akaike_weight for r in same]) / total
        values = np.array([r.fit.values[name] for r in same])
        variances = np.array([math.nan if r.fit.stderr.get(name) is None
                              else r.fit.stderr[name] ** 2 for r in same])
        mean = float(np.sum(w * values))
        # Burnham & Anderson (2002) eq. 4.9: var = [Σ w_i sqrt(var_i + (θ_i − θ̄)²)]²
        variance = float(np.sum(w * np.sqrt(variances + (values - mean) ** 2))) ** 2
        stderr = math.sqrt(variance) if math.isfinite(variance) else None
        out.append(ModelAverage(
            name, role, unit or "", mean, stderr, total, len(same),
            candidates=tuple((r.name, float(wi)) for r, wi in zip(same, w)),
            left_out=left_out))
    return tuple(out)
