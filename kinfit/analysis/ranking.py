"""Ranking candidate rate laws and mechanisms fitted to the same runs.

A chemist rarely knows the rate law in advance. :func:`rank` fits every
candidate to all runs at once (:func:`kinfit.fit.fit`), optionally adds a
search over orders (a template model with some order parameters fixed to
every combination of listed values), and :func:`compare` ranks the fits.

Information criteria
--------------------
AIC, AICc and BIC come from each fit, with the likelihood conventions of
:mod:`kinfit.objective` (statsmodels' OLS convention; every candidate is
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

Nested candidates
-----------------
A candidate is nested in another when it is the other with some parameters
fixed or tied (found from the models' structure by :func:`nests`, bounds
ignored). For such pairs the extra-sum-of-squares F-test

    F = [(χ²_s − χ²_l)/(p_l − p_s)] / [χ²_l/(N − p_l)],   F ~ F(p_l − p_s, N − p_l)

and the likelihood-ratio test D = 2(ln L_l − ln L_s) ~ χ²(p_l − p_s)
(Wilks 1938) are reported. When the fixed value lies on a bound of the
larger model (an order fixed at its minimum 0) the χ² reference distribution
is conservative (Self & Liang 1987, from memory), and the pair is flagged.

Model averaging
---------------
For a rate constant or order present, with the same unit, in several
candidates: θ̄ = Σ w_i θ_i / Σ w_i over those candidates (AICc weights), with
the unconditional standard error Σ w_i sqrt(se_i² + (θ_i − θ̄)²) / Σ w_i
(Burnham & Anderson 2002, eq. 4.9, from memory). Only candidates whose
parameter has the unit of the best candidate's are averaged (a rate
constant's unit changes with the overall order).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace
from itertools import product

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import DEFAULT_STARTS, fit
from kinfit.analysis.initial_rates import (DEFAULT_MAX_CONVERSION, AGREEMENT_Z, check_orders, initial_rates,
                            rate_constant_at)
from kinfit.inputs.mechanism import with_fixed, with_start
from kinfit.inputs.parameters import Role
from kinfit.numerics.rate_system import compile_mechanism

__all__ = ["Candidate", "Ranked", "NestedTest", "ModelAverage", "CrossCheck", "Comparison",
           "compare", "rank", "order_lattice", "parse_order_grid", "fit_candidates", "nests",
           "criterion_weights", "f_test", "likelihood_ratio_test", "evidence_aicc",
           "evidence_bic", "model_averages", "fitted_orders", "CRITERIA",
           "DEFAULT_CRITERION", "LATTICE_STARTS", "MAX_CANDIDATES"]

CRITERIA = ("aicc", "aic", "bic")
DEFAULT_CRITERION = "aicc"
# Fixed-order candidates have only their rate constants (and per-run
# nuisances) free and start from the template's best fit, rescaled (see
# _warm_start); one start is enough there (checked against four in
# tests/benchmarks/bench_rank.py).
LATTICE_STARTS = 1
MAX_CANDIDATES = 2000
_INDISTINCT = 2.0     # ΔAICc within which the top candidates are not distinguished
_NEAR = 4.0           # ΔAICc within which a candidate's fit warnings are shown

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
    "averaging": "Burnham & Anderson (2002) eq. 4.9, unconditional standard error",
}


# ------------------------------------------------------------------ results

@dataclass(frozen=True)
class Candidate:
    """A model to fit and rank.

    Attributes
    ----------
    name : str
        Unique within a ranking.
    mechanism : Mechanism
    template : str or None
        Name of the candidate this one was derived from by fixing orders
        (its fit provides the starting values); ``None`` for a model given
        as is.
    starts : int or None
        Starting points of its fit (``None``: the ranking's default).
    """

    name: str
    mechanism: object
    template: str | None = None
    starts: int | None = None


@dataclass(frozen=True)
class Ranked:
    """One fitted candidate in a ranking.

    Attributes
    ----------
    name : str
    fit : FitResult
    fixed : dict of str to float
        Model parameters the candidate does not fit (empty for none).
    template : str or None
    n_params : int
        Fitted parameters p (per-run ones included).
    chisqr, log_likelihood, aic, aicc, bic : float
    delta_aic, delta_aicc, delta_bic : float
        Differences from the smallest value of each criterion.
    aic_weight, akaike_weight, bic_weight : float
        Weights from AIC, AICc and BIC (each sums to 1 over the candidates).
    evidence_aicc, evidence_bic : str
        Plain-language reading of delta_aicc and delta_bic.
    """

    name: str
    fit: object = field(repr=False)
    fixed: dict
    template: str | None
    n_params: int
    chisqr: float
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    delta_aic: float
    delta_aicc: float
    delta_bic: float
    aic_weight: float
    akaike_weight: float
    bic_weight: float
    evidence_aicc: str
    evidence_bic: str

    @property
    def label(self):
        """Short label: the fixed orders for a derived candidate, else the name."""
        if self.template is not None and self.fixed:
            return ", ".join(f"{k}={v:g}" for k, v in self.fixed.items())
        return self.name


@dataclass(frozen=True)
class NestedTest:
    """Tests of a candidate against a larger one that contains it.

    Attributes
    ----------
    smaller, larger : str
    extra_params : int
        p_l − p_s.
    f_statistic, f_pvalue : float
        Extra-sum-of-squares F-test with (extra_params, N − p_l) degrees of
        freedom.
    lr_statistic, lr_pvalue : float
        Likelihood-ratio statistic 2(ln L_l − ln L_s) against χ²(extra_params).
    on_boundary : bool
        The smaller model fixes a parameter at a bound of the larger: the
        p-values are conservative (too large).
    note : str
    """

    smaller: str
    larger: str
    extra_params: int
    df_residual: int
    f_statistic: float
    f_pvalue: float
    lr_statistic: float
    lr_pvalue: float
    on_boundary: bool = False
    note: str = ""


@dataclass(frozen=True)
class ModelAverage:
    """A parameter averaged over the candidates that share it (AICc weights).

    Attributes
    ----------
    name, role, unit : str
    value : float
    stderr : float or None
        Unconditional standard error (Burnham & Anderson 2002, eq. 4.9).
    weight : float
        Total Akaike weight of the candidates averaged over.
    n_candidates : int
    """

    name: str
    role: str
    unit: str
    value: float
    stderr: float | None
    weight: float
    n_candidates: int


@dataclass(frozen=True)
class CrossCheck:
    """The initial-rates method beside one time-course fit.

    Attributes
    ----------
    candidate : str
        The ranked candidate compared (the best with one irreversible step).
    initial_rates : InitialRates
    orders : tuple of OrderCheck
    rate_constant : dict or None
        k from the initial rates with the orders fixed at the fitted ones,
        beside the fitted k: keys ``name``, ``unit``, ``initial_rates``,
        ``initial_rates_stderr``, ``time_course``, ``time_course_stderr``,
        ``z`` (on ln k), ``agrees``.
    warnings : tuple of str
    """

    candidate: str
    initial_rates: object
    orders: tuple
    rate_constant: dict | None
    warnings: tuple = ()


@dataclass(frozen=True)
class Comparison:
    """Candidates ranked by an information criterion.

    Attributes
    ----------
    candidates : tuple of Ranked
        Best first by `criterion` (ties: fewer parameters first).
    criterion : str
        "aicc", "aic" or "bic".
    n_points : int
    noise_declared : bool
    nested : tuple of NestedTest
    averages : tuple of ModelAverage
    verdict : tuple of str
        Plain-language sentences, most important first.
    warnings : tuple of str
    separation : dict or None
        When the top two are not distinguished: where their predictions for
        the measured points differ most (run, species, time, difference in
        noise standard deviations).
    cross_check : CrossCheck or None
    """

    candidates: tuple
    criterion: str
    n_points: int
    noise_declared: bool
    nested: tuple = ()
    averages: tuple = ()
    verdict: tuple = ()
    warnings: tuple = ()
    separation: dict | None = None
    cross_check: CrossCheck | None = None

    @property
    def best(self):
        return self.candidates[0]

    def __getitem__(self, name):
        for row in self.candidates:
            if row.name == name:
                return row
        raise KeyError(name)

    def to_dict(self):
        """Plain-Python form: the content of ``ranking.json``."""
        exp = self.best.fit.experiment
        return {
            "experiment": exp.name,
            "experiment_file": exp.source,
            "criterion": self.criterion,
            "n_points": self.n_points,
            "noise": "declared" if self.noise_declared else "estimated",
            "candidates": [_row_dict(r) for r in self.candidates],
            "nested_tests": [vars(t).copy() for t in self.nested],
            "model_averages": [vars(a).copy() for a in self.averages],
            "verdicts": list(self.verdict),
            "warnings": list(self.warnings),
            "separation": self.separation,
            "initial_rates": None if self.cross_check is None else _cross_check_dict(
                self.cross_check),
            "evidence_scales": dict(SOURCES),
        }


def _row_dict(row):
    fit_ = row.fit
    return {
        "name": row.name,
        "model": fit_.mechanism.name,
        "model_file": fit_.mechanism.source,
        "template": row.template,
        "fixed": dict(row.fixed),
        "n_params": row.n_params,
        "chisqr": row.chisqr,
        "log_likelihood": row.log_likelihood,
        "aic": row.aic,
        "aicc": row.aicc,
        "bic": row.bic,
        "delta_aic": row.delta_aic,
        "delta_aicc": row.delta_aicc,
        "delta_bic": row.delta_bic,
        "aic_weight": row.aic_weight,
        "akaike_weight": row.akaike_weight,
        "bic_weight": row.bic_weight,
        "evidence_aicc": row.evidence_aicc,
        "evidence_bic": row.evidence_bic,
        "success": fit_.success,
        "rate_laws": fit_.rate_laws(),
        "parameters": {n: {"value": v, "stderr": fit_.stderr.get(n),
                           "unit": fit_.units.get(n), "role": fit_.roles.get(n),
                           "fitted": n in fit_.free_names}
                       for n, v in fit_.values.items()},
        "fit": {"starts": fit_.starts, "starts_at_best": fit_.starts_at_best},
        "warnings": list(fit_.warnings),
    }


def _cross_check_dict(check):
    out = check.initial_rates.to_dict()
    out["compared_with"] = check.candidate
    out["orders"] = [vars(c).copy() for c in check.orders]
    out["rate_constant"] = check.rate_constant
    out["agreement_limit_z"] = AGREEMENT_Z
    out["warnings"] = list(check.warnings)
    return out


# ------------------------------------------------------------- statistics

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


# --------------------------------------------------------------- nesting

def _structure(mech):
    """Arrays describing `mech` for :func:`nests`.

    Returns
    -------
    dict
        ``species`` order, ``stoich`` [n_species, n_dir], per-direction rate
        constant names and factors, and the orders as an affine map of the
        free order parameters: E = e0 + C θ, flattened over (direction,
        species).
    """
    names = mech.parameter_names
    params = mech.parameters
    system = compile_mechanism(mech)
    free = [i for i, n in enumerate(names) if params[n].vary and params[n].role == Role.ORDER]
    base = np.array([params[n].value for n in names])
    base[free] = 0.0            # e0: the orders with every free order parameter at 0
    _, e0 = system.rate_arrays(base)
    columns = []
    for i in free:
        row = base.copy()
        row[i] += 1.0
        columns.append((system.rate_arrays(row)[1] - e0).ravel())
    e0 = e0.ravel()
    return {
        "species": mech.species,
        "held": frozenset(mech.held_constant),
        "stoich": system.stoichiometry,
        "constants": tuple(law.constant for _, law, _ in mech.directions),
        "factors": np.array([law.factor for _, law, _ in mech.directions]),
        "e0": e0,
        "C": np.column_stack(columns) if columns else np.zeros((e0.size, 0)),
        "free_orders": tuple(names[i] for i in free),
        "params": params,
        "temperature": getattr(mech, "temperature", None),
        "others": {n: p for n, p in params.items()
                   if p.role not in (Role.ORDER, Role.RATE_CONSTANT)},
    }


def _aligned(small, large):
    """Small's orders re-indexed to large's species order (e0, C), or None."""
    if set(small["species"]) != set(large["species"]) or small["held"] != large["held"]:
        return None
    idx = [small["species"].index(s) for s in large["species"]]
    n_dir = len(small["constants"])
    if n_dir != len(large["constants"]):
        return None
    if not np.allclose(small["stoich"][idx], large["stoich"], atol=1e-12):
        return None
    n_sp = len(idx)
    e0 = small["e0"].reshape(n_dir, n_sp)[:, idx].ravel()
    c = small["C"].reshape(n_dir, n_sp, -1)[:, idx, :].reshape(n_dir * n_sp, -1)
    return e0, c, idx


def nests(small, large, tol=1e-9):
    """Whether mechanism `small` is mechanism `large` with parameters fixed or tied.

    The two must have the same species, held-constant species, steps (same
    stoichiometry, direction by direction) and temperature laws, and the
    same other parameters (activation energies), fixed in `small` wherever
    `large` fixes them. Then `small` is nested in
    `large` when (1) every set of directions sharing a rate constant in
    `large` shares one in `small` with the same ratio of factors, and a rate
    constant `large` fixes is fixed to the same rate in `small`; and (2) the
    orders `small` can reach, an affine set e0_s + C_s θ_s, lie inside those
    `large` can reach: e0_s − e0_l and the columns of C_s are in the column
    space of C_l. Bounds are ignored.

    Parameters
    ----------
    small, large : Mechanism
    tol : float

    Returns
    -------
    bool
    """
    return _nests(_structure(small), _structure(large), tol)


def _nests(s, l, tol=1e-9):
    aligned = _aligned(s, l)
    if aligned is None or s["temperature"] != l["temperature"]:
        return False
    # other parameters (activation energies): the same ones, and those the larger
    # model fixes are fixed to the same value in the smaller
    if set(s["others"]) != set(l["others"]):
        return False
    for name, p_l in l["others"].items():
        p_s = s["others"][name]
        if not p_l.vary and (p_s.vary or not math.isclose(p_s.value, p_l.value,
                                                          rel_tol=1e-12)):
            return False
    e0_s, c_s, _ = aligned
    n_dir = len(l["constants"])
    for i in range(n_dir):
        k_l, k_s = l["params"][l["constants"][i]], s["params"][s["constants"][i]]
        if not k_l.vary and (k_s.vary or not math.isclose(
                k_s.value * s["factors"][i], k_l.value * l["factors"][i], rel_tol=1e-9)):
            return False
        for j in range(i + 1, n_dir):
            if l["constants"][i] == l["constants"][j]:
                if s["constants"][i] != s["constants"][j] or not math.isclose(
                        s["factors"][i] / l["factors"][i], s["factors"][j] / l["factors"][j],
                        rel_tol=1e-9):
                    return False
    target = np.column_stack([e0_s - l["e0"], c_s])
    if l["C"].shape[1] == 0:
        return bool(np.all(np.abs(target) <= tol))
    sol, *_ = np.linalg.lstsq(l["C"], target, rcond=None)
    return bool(np.all(np.abs(l["C"] @ sol - target) <= tol * max(1.0, np.abs(target).max())))


def _on_boundary(s, l, small_fit):
    """Whether the smaller model's orders or rate constants sit on a bound of the larger's."""
    e0_s, c_s, _ = _aligned(s, l)
    theta_s = np.array([small_fit.values[n] for n in s["free_orders"]])
    orders = e0_s + (c_s @ theta_s if theta_s.size else 0.0)
    if l["C"].shape[1]:
        theta_l, *_ = np.linalg.lstsq(l["C"], orders - l["e0"], rcond=None)
        if np.linalg.matrix_rank(l["C"]) == l["C"].shape[1]:
            for name, value in zip(l["free_orders"], theta_l):
                p = l["params"][name]
                if _at(value, p.min) or _at(value, p.max):
                    return True
    for i, name in enumerate(l["constants"]):
        k_l, k_s = l["params"][name], s["params"][s["constants"][i]]
        if k_l.vary and not k_s.vary:
            value = k_s.value * s["factors"][i] / l["factors"][i]
            if _at(value, k_l.min) or _at(value, k_l.max):
                return True
    return False


def _at(value, bound):
    return math.isfinite(bound) and abs(value - bound) <= 1e-9 * max(1.0, abs(bound))


def _nested_tests(rows, n_points):
    """F and likelihood-ratio tests of every nested pair; (tests, equivalent pairs)."""
    structures = [_structure(r.fit.mechanism) for r in rows]
    tests, equivalent = [], []
    for i, small in enumerate(rows):
        for j, large in enumerate(rows):
            if i == j or small.n_params > large.n_params:
                continue
            if small.n_params == large.n_params:
                # the same model written twice fits the same data equally well, so
                # only pairs with equal χ² need the (costlier) structural check
                if i < j and math.isclose(small.chisqr, large.chisqr, rel_tol=1e-6) and \
                        _nests(structures[i], structures[j]) and \
                        _nests(structures[j], structures[i]):
                    equivalent.append((small.name, large.name))
                continue
            if not _nests(structures[i], structures[j]):
                continue
            extra = large.n_params - small.n_params
            df2 = n_points - large.n_params
            if df2 <= 0:
                continue
            f, fp = f_test(small.chisqr, large.chisqr, small.n_params, large.n_params,
                           n_points)
            lr, lp = likelihood_ratio_test(small.log_likelihood, large.log_likelihood, extra)
            boundary = _on_boundary(structures[i], structures[j], small.fit)
            notes = []
            if small.chisqr < large.chisqr * (1 - 1e-9):
                notes.append("the larger model fitted worse than the smaller one it contains, "
                             "so its fit missed the optimum; refit it with more starting "
                             "points")
            if boundary:
                notes.append("the smaller model fixes a value on a bound of the larger one; "
                             "these p-values are conservative (too large)")
            tests.append(NestedTest(small.name, large.name, extra, df2, f, fp, lr, lp,
                                    boundary, "; ".join(notes)))
    return tuple(tests), equivalent


# ------------------------------------------------------------- averaging

def model_averages(rows):
    """Rate constants and orders averaged over the candidates sharing them.

    Parameters
    ----------
    rows : sequence of Ranked
        Best first; a parameter is averaged over the candidates in which it
        has the same role and unit as in the best candidate that has it.

    Returns
    -------
    tuple of ModelAverage
        One per parameter shared by at least two candidates.
    """
    names = []
    for row in rows:
        for n, role in row.fit.roles.items():
            if role in (Role.RATE_CONSTANT, Role.ORDER) and n not in names:
                names.append(n)
    out = []
    for name in names:
        holders = [r for r in rows if name in r.fit.values]
        role = holders[0].fit.roles[name]
        unit = holders[0].fit.units.get(name)
        same = [r for r in holders if r.fit.roles.get(name) == role
                and r.fit.units.get(name) == unit and r.akaike_weight > 0]
        if len(same) < 2:
            continue
        w = np.array([r.akaike_weight for r in same])
        values = np.array([r.fit.values[name] for r in same])
        errors = []
        for r in same:
            se = r.fit.stderr.get(name)
            errors.append(0.0 if name not in r.fit.free_names else
                          (math.nan if se is None else se))
        errors = np.array(errors)
        total = float(w.sum())
        mean = float(np.sum(w * values) / total)
        spread = np.sqrt(errors ** 2 + (values - mean) ** 2)
        stderr = float(np.sum(w * spread) / total)
        out.append(ModelAverage(name, role, unit or "", mean,
                                stderr if math.isfinite(stderr) else None, total, len(same)))
    return tuple(out)


# ----------------------------------------------------------------- compare

def _unique(names):
    seen, out = {}, []
    for n in names:
        seen[n] = seen.get(n, 0) + 1
        out.append(n if seen[n] == 1 else f"{n} #{seen[n]}")
    return out


def compare(fits, names=None, criterion=DEFAULT_CRITERION, templates=None):
    """Rank fits of several candidates to the same runs.

    Parameters
    ----------
    fits : sequence of FitResult
        All fitted to the same experiment.
    names : sequence of str, optional
        Candidate names (default: the models' names, made unique).
    criterion : {"aicc", "aic", "bic"}
        Sorting criterion.
    templates : sequence of str or None, optional
        For each fit, the candidate it was derived from (order search).

    Returns
    -------
    Comparison
        Rows sorted best first, with deltas, weights and evidence; nested
        tests, model averages, verdict and warnings.
    """
    fits = list(fits)
    if len(fits) < 2:
        raise KinfitError("a ranking needs at least two candidates")
    if criterion not in CRITERIA:
        raise KinfitError(f"unknown criterion {criterion!r}; choose one of "
                          f"{', '.join(CRITERIA)}")
    names = _unique(list(names) if names is not None else [f.mechanism.name for f in fits])
    if len(set(names)) != len(names):
        raise KinfitError("candidate names must be unique")
    templates = list(templates) if templates is not None else [None] * len(fits)
    first = fits[0]
    for f, n in zip(fits, names):
        if (f.experiment.source, f.n_points, f.noise_declared) != (
                first.experiment.source, first.n_points, first.noise_declared):
            raise KinfitError(f"candidate '{n}' was fitted to different data "
                              f"({f.experiment.source}, {f.n_points} points) than "
                              f"'{names[0]}' ({first.experiment.source}, {first.n_points} "
                              f"points); information criteria compare fits to the same data "
                              f"only")
    crit = {c: criterion_weights([getattr(f, c) for f in fits]) for c in CRITERIA}
    rows = []
    for i, (f, n, t) in enumerate(zip(fits, names, templates)):
        fixed = {p: v.value for p, v in f.mechanism.parameters.items() if not v.vary}
        rows.append(Ranked(
            name=n, fit=f, fixed=fixed, template=t, n_params=f.n_free, chisqr=f.chi2,
            log_likelihood=f.log_likelihood, aic=f.aic, aicc=f.aicc, bic=f.bic,
            delta_aic=float(crit["aic"][0][i]), delta_aicc=float(crit["aicc"][0][i]),
            delta_bic=float(crit["bic"][0][i]), aic_weight=float(crit["aic"][1][i]),
            akaike_weight=float(crit["aicc"][1][i]), bic_weight=float(crit["bic"][1][i]),
            evidence_aicc=evidence_aicc(float(crit["aicc"][0][i])),
            evidence_bic=evidence_bic(float(crit["bic"][0][i]))))
    key = {"aicc": "delta_aicc", "aic": "delta_aic", "bic": "delta_bic"}[criterion]
    rows.sort(key=lambda r: (getattr(r, key), r.n_params, r.name))
    nested, equivalent = _nested_tests(rows, first.n_points)
    warnings = _warnings(rows, equivalent)
    separation = _separation(rows) if len(rows) > 1 and \
        rows[1].delta_aicc - rows[0].delta_aicc <= _INDISTINCT else None
    comparison = Comparison(candidates=tuple(rows), criterion=criterion,
                            n_points=first.n_points, noise_declared=first.noise_declared,
                            nested=nested, averages=model_averages(rows),
                            warnings=tuple(warnings), separation=separation)
    return replace(comparison, verdict=tuple(_verdict(comparison)))


def _warnings(rows, equivalent):
    out = []
    failed = [r.name for r in rows if not r.fit.success]
    if failed:
        out.append(f"{len(failed)} candidate(s) did not report convergence: "
                   f"{', '.join(failed[:5])}{' ...' if len(failed) > 5 else ''}; their "
                   f"criteria may be too high")
    for a, b in equivalent:
        out.append(f"'{a}' and '{b}' are the same model written twice; their weights split "
                   f"the support one model would get")
    # fit warnings of the candidates that matter: the best and those near it
    for r in rows:
        if r is rows[0] or r.delta_aicc - rows[0].delta_aicc <= _NEAR:
            out.extend(f"{r.name}: {w}" for w in r.fit.warnings)
    return out


def _separation(rows):
    """Where the top two candidates' predictions of the measured points differ most."""
    a, b = rows[0].fit, rows[1].fit
    scale = 1.0 if a.noise_declared else (a.sigma or 1.0)
    diff = (a.residuals - b.residuals) / scale
    i = int(np.argmax(np.abs(diff)))
    start = 0
    for run in a.experiment.runs:
        for trace in run.traces:
            n = trace.times.size
            if i < start + n:
                return {"run": run.name, "species": trace.species,
                        "time": float(trace.times[i - start]),
                        "difference_in_sigma": float(abs(diff[i]))}
            start += n
    return None


def _verdict(comparison):
    rows, crit = comparison.candidates, comparison.criterion
    best = rows[0]
    label = {"aicc": "AICc", "aic": "AIC", "bic": "BIC"}[crit]
    out = [f"Best by {label}: '{best.name}' (Akaike weight {best.akaike_weight:.3g}, "
           f"BIC weight {best.bic_weight:.3g})."]
    if len(rows) > 1:
        second = rows[1]
        d_aicc = second.delta_aicc - best.delta_aicc
        d_bic = second.delta_bic - best.delta_bic
        out.append(f"Runner-up '{second.name}': ΔAICc = {d_aicc:.2f} "
                   f"({evidence_aicc(d_aicc) if d_aicc > 0 else 'as good'}, Burnham & "
                   f"Anderson); ΔBIC = {d_bic:.2f} ({_bic_phrase(d_bic)}, Kass & Raftery).")
        if d_aicc <= _INDISTINCT:
            sep = comparison.separation
            where = ""
            if sep:
                where = (f" Their predictions of the measured points differ by at most "
                         f"{sep['difference_in_sigma']:.2g} noise standard deviations (run "
                         f"{sep['run']}, {sep['species']} at t = {sep['time']:g}); a run "
                         f"where they differ by several would separate them.")
            out.append(f"The top candidates are not distinguishable with these data "
                       f"(ΔAICc ≤ {_INDISTINCT:g}).{where}")
    for test in comparison.nested:
        if best.name not in (test.smaller, test.larger):
            continue
        other = test.larger if test.smaller == best.name else test.smaller
        if test.smaller == best.name:
            out.append(f"Against the larger '{other}' ({test.extra_params} more parameter(s)): "
                       f"F-test p = {test.f_pvalue:.3g}, likelihood-ratio p = "
                       f"{test.lr_pvalue:.3g}; "
                       + ("the extra parameters are not needed at the 5 % level."
                          if test.f_pvalue >= 0.05 else
                          "the data call for the extra parameters at the 5 % level."))
        elif test.f_pvalue >= 0.05:
            out.append(f"The simpler '{other}' is not rejected against the best (F-test "
                       f"p = {test.f_pvalue:.3g}).")
    return out


def _bic_phrase(delta):
    if delta <= 0:
        return "no evidence either way"
    word = next(text for limit, text in _BIC_SCALE if delta <= limit)
    return f"evidence for the best {word}" if delta <= 2 else f"{word} evidence for the best"


# --------------------------------------------------------- order search

def parse_order_grid(items):
    """Parse ``NAME=V1,V2,...`` strings into a grid of order values.

    Parameters
    ----------
    items : sequence of str
        e.g. ``["m=0,0.5,1,1.5,2", "n=0,1,2"]``.

    Returns
    -------
    dict of str to tuple of float
        In the order given; values in the order given, repeats removed.

    Raises
    ------
    KinfitError
        For anything that is not NAME=NUMBER[,NUMBER...], or a name given
        twice.
    """
    grid = {}
    for item in items or ():
        if not isinstance(item, str):
            raise KinfitError(f"--orders {item!r}: expected NAME=V1,V2,... like m=0,0.5,1")
        name, sep, rest = item.partition("=")
        name = name.strip()
        if not sep or not name.isidentifier() or not name.isascii():
            raise KinfitError(f"--orders {item!r}: expected NAME=V1,V2,... like m=0,0.5,1")
        if name in grid:
            raise KinfitError(f"--orders {name} is given twice; list all its values once, "
                              f"like {name}=0,1,2")
        values = []
        for part in rest.split(","):
            text = part.strip()
            try:
                value = float(text)
            except ValueError:
                value = math.nan
            if not text or not math.isfinite(value):
                raise KinfitError(f"--orders {item!r}: {text!r} is not a number; expected "
                                  f"{name}=V1,V2,... like {name}=0,0.5,1")
            if value not in values:
                values.append(value)
        grid[name] = tuple(values)
    return grid


def _template_for(mechanisms, grid):
    """Index of the first mechanism that has every grid name as an order parameter."""
    for i, mech in enumerate(mechanisms):
        params = mech.parameters
        if all(n in params and params[n].role == Role.ORDER for n in grid):
            return i
    orders = sorted({n for m in mechanisms for n in m.orders})
    raise KinfitError(f"--orders {', '.join(grid)}: no model given has order parameter(s) "
                      f"named {', '.join(grid)}; their order parameters are "
                      f"{', '.join(orders) or 'none'}")


def order_lattice(template, grid, name=None, starts=LATTICE_STARTS):
    """Candidates fixing the named orders of `template` at every combination of values.

    Parameters
    ----------
    template : Mechanism
    grid : mapping of str to sequence of float
        Order parameter -> values; orders not named stay free.
    name : str, optional
        The template candidate's name (default: the model's name).
    starts : int
        Starting points for each fixed-order fit.

    Returns
    -------
    list of Candidate
        Named ``"<template> [m=1, n=0]"``, with ``template`` set to `name`.
    """
    name = name or template.name
    for pname in grid:
        p = template.parameters.get(pname)
        if p is None or p.role != Role.ORDER:
            raise KinfitError(f"{template.source}: {pname!r} is not an order parameter of "
                              f"'{template.name}'; its orders are "
                              f"{', '.join(template.orders) or 'none'}")
        if not grid[pname]:
            raise KinfitError(f"--orders {pname}: give at least one value")
    size = math.prod(len(v) for v in grid.values())
    if size > MAX_CANDIDATES:
        raise KinfitError(f"the order search has {size} combinations; kinfit fits at most "
                          f"{MAX_CANDIDATES}; use fewer values")
    out = []
    for combo in product(*grid.values()):
        fixed = dict(zip(grid, combo))
        label = ", ".join(f"{k}={v:g}" for k, v in fixed.items())
        mech = with_fixed(template, fixed, name=f"{template.name} [{label}]")
        out.append(Candidate(f"{name} [{label}]", mech, template=name, starts=starts))
    return out


# ----------------------------------------------------------- fitting

def _typical_log_conc(experiment, species):
    """ln of each species' geometric-mean starting concentration (0 where unknown)."""
    out = np.zeros(len(species))
    for i, s in enumerate(species):
        values = [run.initial.get(s, run.fitted_initial[s].value if s in run.fitted_initial
                                  else 0.0) for run in experiment.runs]
        if all(v > 0 for v in values):
            out[i] = float(np.mean(np.log(values)))
    return out


def _warm_start(mechanism, template_fit, experiment):
    """`mechanism` starting from its template's best fit.

    Orders left free start at the template's fitted values. Each rate
    constant is rescaled so that its rate at typical starting concentrations
    c̄ (geometric means over runs) is unchanged:
    k_new = k_fit Π_s c̄_s^(e_fit,s − e_new,s), which puts a fixed-order
    candidate's start close to its own optimum whatever the orders' effect
    on the units of k.
    """
    names = mechanism.parameter_names
    fitted = template_fit.values
    row_fit = np.array([fitted.get(n, mechanism.parameters[n].value) for n in names])
    row_new = np.array([fitted.get(n, p.value) if p.vary else p.value
                        for n, p in mechanism.parameters.items()])
    system = compile_mechanism(mechanism)
    _, e_fit = system.rate_arrays(row_fit)
    _, e_new = system.rate_arrays(row_new)
    shift = (e_fit[0] - e_new[0]) @ _typical_log_conc(experiment, mechanism.species)
    start = {n: v for n, v in zip(names, row_new)}
    done = set()
    for d, (_, law, _) in enumerate(mechanism.directions):
        if law.constant not in done:
            done.add(law.constant)
            start[law.constant] = start[law.constant] * math.exp(float(shift[d]))
    return with_start(mechanism, start)


def _fit_task(experiment, mechanism, starts, seed):
    """Worker entry point (top level so that it pickles)."""
    return fit(experiment, mechanism, starts=starts, seed=seed)


def _workers(requested, n_tasks):
    if requested is not None:
        if not isinstance(requested, int) or requested < 1:
            raise KinfitError(f"workers must be a whole number of at least 1, got "
                              f"{requested!r}")
        return min(requested, n_tasks)
    try:
        available = len(os.sched_getaffinity(0))
    except AttributeError:
        available = os.cpu_count() or 1
    return max(1, min(available, n_tasks))


def fit_candidates(experiment, candidates, starts=DEFAULT_STARTS, seed=0, workers=None,
                   progress=None):
    """Fit every candidate, in parallel over processes.

    A candidate derived from a template (``Candidate.template``) is fitted
    after its template, starting from the template's best fit (see
    :func:`_warm_start`). Every fit gets the same `seed`, so the results do
    not depend on the number of workers or the order in which fits finish.

    Parameters
    ----------
    experiment : Experiment
    candidates : sequence of Candidate
    starts : int
        Starting points for candidates whose ``starts`` is ``None``.
    seed : int
    workers : int, optional
        Processes (default: the CPUs available, at most one per candidate);
        1 fits in this process.
    progress : callable, optional
        Called as ``progress(n_done, n_total, name)`` after each fit.

    Returns
    -------
    list of FitResult
        In the order of `candidates`.
    """
    candidates = list(candidates)
    by_name = {c.name: c for c in candidates}
    if len(by_name) != len(candidates):
        raise KinfitError("candidate names must be unique")
    for c in candidates:
        if c.template is not None and c.template not in by_name:
            raise KinfitError(f"candidate '{c.name}' names a template '{c.template}' that is "
                              f"not among the candidates")
    children = {}
    for c in candidates:
        if c.template is not None:
            children.setdefault(c.template, []).append(c)
    # templates first, so that their derived candidates can start early
    ready = sorted((c for c in candidates if c.template is None),
                   key=lambda c: c.name not in children)
    results, total = {}, len(candidates)

    def job(c, template_fit=None):
        mech = c.mechanism if template_fit is None else _warm_start(
            c.mechanism, template_fit, experiment)
        return (experiment, mech, c.starts or starts, seed)

    def finished(c, result):
        results[c.name] = result
        if progress is not None:
            progress(len(results), total, c.name)
        return [(child, job(child, result)) for child in children.get(c.name, [])]

    n_workers = _workers(workers, total)
    if n_workers == 1:
        queue = [(c, job(c)) for c in ready]
        while queue:
            c, args = queue.pop(0)
            queue.extend(finished(c, _named(c, _fit_task, *args)))
    else:
        _fit_in_pool(n_workers, [(c, job(c)) for c in ready], finished)
    return [results[c.name] for c in candidates]


def _named(candidate, function, *args):
    try:
        return function(*args)
    except KinfitError as exc:
        raise KinfitError(f"candidate '{candidate.name}': {exc}") from None


def _fit_in_pool(n_workers, initial, finished):
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    pool = ProcessPoolExecutor(max_workers=n_workers)
    try:
        pending = {pool.submit(_fit_task, *args): c for c, args in initial}
        while pending:
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for future in done:
                c = pending.pop(future)
                result = _named(c, future.result)
                for child, args in finished(c, result):
                    pending[pool.submit(_fit_task, *args)] = child
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown()


# ----------------------------------------------------------------- rank

def _candidate_names(mechanisms):
    names = [m.name for m in mechanisms]
    out = []
    for m, n in zip(mechanisms, names):
        if names.count(n) > 1:
            from pathlib import Path

            n = f"{n} ({Path(m.source).name})"
        out.append(n)
    return _unique(out)


def fitted_orders(result):
    """Order of each species in a one-step fit, with its standard error.

    Parameters
    ----------
    result : FitResult
        Of a mechanism whose first step gives the rate law.

    Returns
    -------
    dict of str to (float, float or None)
        Species -> (order, standard error); the error is 0 for an order the
        model fixes and ``None`` when the fit has no covariance.
    """
    law = result.mechanism.directions[0][1]
    free = list(result.free_names)
    out = {}
    for species, affine in law.orders:
        value = affine.value(result.values)
        grad = np.zeros(len(free))
        for pname, coef in affine.coef:
            if pname in free:
                grad[free.index(pname)] = coef
        if not grad.any():
            out[species] = (value, 0.0)
        elif result.covariance is None:
            out[species] = (value, None)
        else:
            out[species] = (value, float(math.sqrt(max(grad @ result.covariance @ grad, 0.0))))
    return out


def _cross_check(comparison, experiment, max_conversion):
    """The initial-rates method beside the best one-step candidate.

    Returns
    -------
    CrossCheck or str
        The check, or why it was skipped.
    """
    if len({run.temperature for run in experiment.runs}) > 1:
        return ("the runs are at several temperatures, so the initial-rates cross-check "
                "(one rate constant for all runs) was skipped")
    for row in comparison.candidates:
        mech = row.fit.mechanism
        if len(mech.steps) == 1 and not mech.steps[0].reaction.reversible:
            break
    else:
        return ("no candidate has a single irreversible step, so the initial-rates "
                "cross-check was skipped")
    result = initial_rates(experiment, mech, max_conversion=max_conversion)
    warnings, orders, k_check = [], (), None
    fitted = fitted_orders(row.fit)
    if result.regression is not None:
        orders = check_orders(result.regression, fitted)
        for c in orders:
            if c.agrees is False:
                warnings.append(
                    f"the initial-rates order in {c.species} ({c.initial_rates:.3g} ± "
                    f"{c.initial_rates_stderr:.2g}) differs from the time-course fit's "
                    f"({c.time_course:.3g}) by {abs(c.z):.1f} combined standard errors")
    law = mech.directions[0][1]
    k_name = law.constant
    fit_k, fit_se = row.fit.values[k_name] * law.factor, row.fit.stderr.get(k_name)
    # with a temperature law the fitted k is k at the reference temperature
    at = None if getattr(mech, "temperature", None) is not None else rate_constant_at(
        result, {s: m for s, (m, _) in fitted.items()})
    if at is not None and fit_k > 0:
        k_ir, k_ir_se = at
        ln_se_fit = (fit_se * law.factor / fit_k) if fit_se is not None else 0.0
        ln_se_ir = k_ir_se / k_ir if k_ir_se is not None else None
        z = agrees = None
        if ln_se_ir is not None and math.hypot(ln_se_ir, ln_se_fit) > 0:
            z = (math.log(k_ir) - math.log(fit_k)) / math.hypot(ln_se_ir, ln_se_fit)
            agrees = abs(z) <= AGREEMENT_Z
        k_check = {"name": k_name if law.factor == 1 else f"{law.factor:g}·{k_name}",
                   "unit": row.fit.units.get(k_name), "initial_rates": k_ir,
                   "initial_rates_stderr": k_ir_se, "time_course": fit_k,
                   "time_course_stderr": fit_se * law.factor if fit_se is not None else None,
                   "z": z, "agrees": agrees}
        if agrees is False:
            warnings.append(f"k from the initial rates at the fitted orders ({k_ir:.3g}) "
                            f"differs from the time-course fit's ({fit_k:.3g}) by "
                            f"{abs(z):.1f} combined standard errors (on ln k)")
    if warnings:
        warnings.append("initial rates from sparse early points are biased; the time-course "
                        "fit uses every point, but a disagreement can also mean the rate law "
                        "changes during the reaction (product inhibition, catalyst decay)")
    return CrossCheck(row.name, result, orders, k_check, tuple(warnings))


def rank(experiment, mechanisms, orders=None, *, starts=DEFAULT_STARTS,
         lattice_starts=LATTICE_STARTS, seed=0, workers=None, criterion=DEFAULT_CRITERION,
         cross_check=True, max_conversion=DEFAULT_MAX_CONVERSION, progress=None):
    """Fit candidate models to every run and rank them.

    Parameters
    ----------
    experiment : Experiment
    mechanisms : Mechanism or sequence of Mechanism
        Candidates given as they are.
    orders : mapping of str to sequence of float, optional
        An order search: the first mechanism that has all these order
        parameters is the template; each combination of values gives one
        fixed-order candidate, ranked alongside the template's own fit.
    starts : int
        Starting points for each given model's fit.
    lattice_starts : int
        Starting points for each fixed-order candidate (which starts from
        the template's fit; see :data:`LATTICE_STARTS`).
    seed : int
    workers : int, optional
        Processes for the fits (default: the CPUs available).
    criterion : {"aicc", "aic", "bic"}
    cross_check : bool
        Run the initial-rates method beside the best one-step candidate.
    max_conversion : float
        Window of the initial-rates method.
    progress : callable, optional
        ``progress(n_done, n_total, name)`` after each fit.

    Returns
    -------
    Comparison
    """
    if hasattr(mechanisms, "parameters"):
        mechanisms = [mechanisms]
    mechanisms = list(mechanisms)
    if not mechanisms:
        raise KinfitError("give at least one model to rank")
    if criterion not in CRITERIA:
        raise KinfitError(f"unknown criterion {criterion!r}; choose one of "
                          f"{', '.join(CRITERIA)}")
    names = _candidate_names(mechanisms)
    candidates = [Candidate(n, m) for n, m in zip(names, mechanisms)]
    if orders:
        grid = {k: tuple(float(v) for v in vals) for k, vals in dict(orders).items()}
        t = _template_for(mechanisms, grid)
        candidates += order_lattice(mechanisms[t], grid, name=names[t], starts=lattice_starts)
    if len(candidates) < 2:
        raise KinfitError("a ranking needs at least two candidates: give another --model or "
                          "an order search with --orders")
    if len(candidates) > MAX_CANDIDATES:
        raise KinfitError(f"{len(candidates)} candidates; kinfit ranks at most "
                          f"{MAX_CANDIDATES}")
    fits = fit_candidates(experiment, candidates, starts=starts, seed=seed, workers=workers,
                          progress=progress)
    comparison = compare(fits, [c.name for c in candidates], criterion,
                         [c.template for c in candidates])
    if cross_check:
        check = _cross_check(comparison, experiment, max_conversion)
        if isinstance(check, str):
            comparison = replace(comparison, warnings=comparison.warnings + (check,))
        else:
            comparison = replace(comparison, cross_check=check,
                                 warnings=comparison.warnings + check.warnings)
    return comparison
