"""Ranking candidates against statsmodels, scipy, closed forms and seeded synthetic data."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.tools.eval_measures import aicc as sm_aicc

import test_objective
from conftest import MODELS, synthetic_power_law
from kinfit.analysis.ranking import (CRITERIA, Candidate, _structure, _on_boundary, _warm_start,
                            compare, criterion_weights, evidence_aicc, evidence_bic, f_test,
                            fit_candidates, fitted_orders, likelihood_ratio_test, model_averages,
                            nests, order_lattice, parse_order_grid, rank)
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text, with_fixed


# ------------------------------------------------- criteria and nested tests

@pytest.fixture(scope="module")
def linear_pair(tmp_path_factory):
    """Zero-order A -> P with [A]0 fitted (a straight line) and the same with k fixed.

    Both are ordinary least-squares problems, so statsmodels OLS is the reference:
    full: [A] ~ 1 + t; restricted (k fixed at 0.05): [A] + 0.05 t ~ 1.
    """
    folder = tmp_path_factory.mktemp("linear")
    exp, mech, t, y = test_objective.zero_order_case(folder)
    fixed = with_fixed(mech, {"k": 0.05}, name="k fixed")
    fits = [fit(exp, mech, starts=1), fit(exp, fixed, starts=1)]
    full = sm.OLS(y, sm.add_constant(t)).fit()
    restricted = sm.OLS(y + 0.05 * t, np.ones_like(t)).fit()
    return compare(fits, ["free", "k fixed"]), full, restricted


def test_criteria_match_statsmodels_ols(linear_pair):
    # Reference: statsmodels OLS aic/bic (-2 llf + 2 k, -2 llf + k ln N, k the
    # regression parameters) and eval_measures.aicc (Hurvich & Tsai 1989).
    comparison, full, restricted = linear_pair
    for name, ols in (("free", full), ("k fixed", restricted)):
        row = comparison[name]
        k = ols.df_model + ols.k_constant
        assert row.n_params == k
        assert row.log_likelihood == pytest.approx(ols.llf, abs=1e-8)
        assert row.aic == pytest.approx(ols.aic, abs=1e-7)
        assert row.bic == pytest.approx(ols.bic, abs=1e-7)
        assert row.aicc == pytest.approx(sm_aicc(ols.llf, ols.nobs, k), abs=1e-7)
        assert row.chisqr == pytest.approx(ols.ssr, rel=1e-9)
    assert comparison["k fixed"].fixed == {"k": 0.05} and comparison["free"].fixed == {}


def test_nested_tests_match_statsmodels(linear_pair):
    # Reference: statsmodels RegressionResults.compare_f_test / compare_lr_test.
    comparison, full, restricted = linear_pair
    (test,) = comparison.nested
    assert (test.smaller, test.larger, test.extra_params) == ("k fixed", "free", 1)
    f_value, f_p, df_diff = full.compare_f_test(restricted)
    lr_value, lr_p, _ = full.compare_lr_test(restricted)
    assert test.f_statistic == pytest.approx(f_value, rel=1e-7)
    assert test.f_pvalue == pytest.approx(f_p, rel=1e-6, abs=1e-300)
    assert test.lr_statistic == pytest.approx(lr_value, rel=1e-7)
    assert test.lr_pvalue == pytest.approx(lr_p, rel=1e-6, abs=1e-300)
    assert df_diff == 1 and test.df_residual == full.df_resid


def test_deltas_agree_with_lmfit_up_to_the_documented_constant(linear_pair):
    # lmfit's aic is N ln(χ²/N) + 2p (lmfit documentation, MinimizerResult.aic);
    # kinfit's (statsmodels') differs by N (ln 2π + 1) for estimated noise, so
    # both conventions give the same ΔAIC. Reference: lmfit.minimize itself.
    import lmfit

    comparison, full, restricted = linear_pair
    t = np.asarray(full.model.exog[:, 1])
    y = np.asarray(full.model.endog)

    def line(p):
        return p["a"] - p["k"] * t - y

    params = lmfit.Parameters()
    params.add("a", value=1.0)
    params.add("k", value=0.01)
    lm_full = lmfit.minimize(line, params)
    params["k"].set(value=0.05, vary=False)
    lm_fixed = lmfit.minimize(line, params)
    n = comparison.n_points
    constant = n * (math.log(2 * math.pi) + 1)
    assert comparison["free"].aic - lm_full.aic == pytest.approx(constant, rel=1e-9)
    assert comparison["k fixed"].aic - lm_fixed.aic == pytest.approx(constant, rel=1e-9)
    assert comparison["k fixed"].delta_aic - comparison["free"].delta_aic == pytest.approx(
        lm_fixed.aic - lm_full.aic, abs=1e-7)


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


# ------------------------------------------------------- weights, evidence

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


# ----------------------------------------------------------------- nesting

def test_nesting_from_model_structure():
    free = load_mechanism(MODELS / "power_law_two.toml")
    first_each = load_mechanism(MODELS / "second_order_ab.toml")
    assert nests(first_each, free) and not nests(free, first_each)
    assert nests(with_fixed(free, {"m": 1}), free)
    # a tie m = n is a restriction of free m and n
    tied = mechanism_from_text('[[steps]]\nreaction = "A + B -> P"\nrate = "k*[A]^q*[B]^q"\n'
                               '[parameters]\nk = 1\nq = 1\n')
    assert nests(tied, free) and not nests(free, tied)
    # different reactions or a fixed rate constant in the larger model: not nested
    first = load_mechanism(MODELS / "first_order.toml")
    assert nests(first, load_mechanism(MODELS / "power_law_one.toml"))
    assert not nests(first, load_mechanism(MODELS / "second_order.toml"))    # 2 A -> P
    assert not nests(first, free)
    assert not nests(first_each, with_fixed(first_each, {"k": 0.5}))


def test_boundary_of_the_larger_model_is_flagged():
    # An order fixed at its minimum (0) lies on the boundary of the larger
    # model; the χ² reference is then conservative (Self & Liang 1987, from memory).
    free = load_mechanism(MODELS / "power_law_two.toml")
    at_zero, inside = with_fixed(free, {"m": 0.0}), with_fixed(free, {"m": 1.0})
    big = _structure(free)
    assert _on_boundary(_structure(at_zero), big, SimpleNamespace(values={"n": 1.3}))
    assert not _on_boundary(_structure(inside), big, SimpleNamespace(values={"n": 1.3}))


# ---------------------------------------------------------------- averaging

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


# ----------------------------------------------------------- order search

def test_order_lattice():
    free = load_mechanism(MODELS / "power_law_two.toml")
    lattice = order_lattice(free, {"m": (0, 0.5, 1), "n": (1, 2)})
    assert len(lattice) == 6
    assert lattice[0].name == "A + B -> P, free orders [m=0, n=1]"
    assert lattice[-1].template == "A + B -> P, free orders"
    last = lattice[-1].mechanism.parameters
    assert (last["m"].value, last["m"].vary, last["n"].value, last["k"].vary) == (1, False, 2,
                                                                                  True)
    with pytest.raises(KinfitError, match="'k' is not an order parameter"):
        order_lattice(free, {"k": (1,)})
    with pytest.raises(KinfitError, match="cannot fix m at 4"):
        order_lattice(free, {"m": (4,)})
    with pytest.raises(KinfitError, match="at most 2000"):
        order_lattice(free, {"m": tuple(np.linspace(0, 3, 50)), "n": tuple(np.linspace(0, 3,
                                                                                       50))})


def test_parse_order_grid():
    assert parse_order_grid(["m=0,0.5,1,1.5,2", " n = 0, 1,2,1 "]) == {
        "m": (0.0, 0.5, 1.0, 1.5, 2.0), "n": (0.0, 1.0, 2.0)}
    assert parse_order_grid(None) == {}
    for bad, message in (("m", "expected NAME=V1"), ("m=", "'' is not a number"),
                         ("m=1,,2", "is not a number"), ("m=1,x", "'x' is not a number"),
                         ("m=nan", "'nan' is not a number"), ("2m=1", "expected NAME"),
                         ("m=inf", "is not a number")):
        with pytest.raises(KinfitError, match=message):
            parse_order_grid([bad])
    with pytest.raises(KinfitError, match="given twice"):
        parse_order_grid(["m=1", "m=2"])


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=30), max_size=4))
def test_parse_order_grid_raises_only_its_own_error(items):
    # Property (common practice for parsers): any text gives a grid or a KinfitError.
    try:
        grid = parse_order_grid(items)
    except KinfitError:
        return
    for name, values in grid.items():
        assert name.isidentifier() and values
        assert all(math.isfinite(v) for v in values)


@settings(max_examples=200, deadline=None)
@given(st.dictionaries(st.from_regex(r"[a-z][a-z0-9_]{0,6}", fullmatch=True),
                       st.lists(st.floats(allow_nan=False, allow_infinity=False), min_size=1,
                                max_size=5), min_size=1, max_size=3))
def test_parse_order_grid_round_trip(grid):
    items = [f"{n}=" + ",".join(repr(v) for v in vals) for n, vals in grid.items()]
    parsed = parse_order_grid(items)
    assert list(parsed) == list(grid)
    for n, vals in grid.items():
        assert parsed[n] == tuple(dict.fromkeys(float(v) for v in vals))


def test_warm_start_keeps_the_rate_at_typical_concentrations(small_ranking):
    # The start of a fixed-order candidate has the template's rate at the
    # geometric-mean starting concentrations (algebraic property of _warm_start).
    comparison, exp, mech = small_ranking
    template = comparison["A + B -> P, free orders"].fit
    fixed = with_fixed(mech, {"m": 2.0, "n": 1.0})
    start = _warm_start(fixed, template, exp).parameters
    a_bar = math.exp(np.mean(np.log([r.initial["A"] for r in exp.runs])))
    b_bar = math.exp(np.mean(np.log([r.initial["B"] for r in exp.runs])))
    v = template.values
    rate_template = v["k"] * a_bar ** v["m"] * b_bar ** v["n"]
    assert start["k"].value * a_bar ** 2 * b_bar == pytest.approx(rate_template, rel=1e-12)


# ---------------------------------------------------------------- ranking

def test_small_ranking_contract(small_ranking):
    comparison, exp, _ = small_ranking
    data = comparison.to_dict()
    assert data["criterion"] == "aicc"
    rows = data["candidates"]
    assert len(rows) == 5
    required = {"name", "fixed", "n_params", "chisqr", "aic", "aicc", "bic", "delta_aicc",
                "akaike_weight", "bic_weight"}
    assert all(required <= set(r) for r in rows)
    assert [r["aicc"] for r in rows] == sorted(r["aicc"] for r in rows)
    assert sum(r["akaike_weight"] for r in rows) == pytest.approx(1.0)
    assert sum(r["bic_weight"] for r in rows) == pytest.approx(1.0)
    assert rows[0]["delta_aicc"] == 0.0
    assert rows[0]["fixed"] == {"m": 1.0, "n": 2.0}            # the true orders
    assert rows[0]["n_params"] == 1
    free = next(r for r in rows if r["fixed"] == {})
    assert free["n_params"] == 3 and free["template"] is None
    pairs = {(t["smaller"], t["larger"]) for t in data["nested_tests"]}
    assert (rows[0]["name"], free["name"]) in pairs and len(pairs) == 4
    assert data["verdicts"][0].startswith("Best by AICc: 'A + B -> P, free orders [m=1, n=2]'")
    assert data["evidence_scales"]["aicc"].startswith("Burnham & Anderson")
    assert data["initial_rates"]["compared_with"] == rows[0]["name"]
    assert {o["species"] for o in data["initial_rates"]["orders"]} == {"A", "B"}


def test_fitted_orders_carry_the_fit_standard_errors(small_ranking):
    comparison, _, _ = small_ranking
    free = comparison["A + B -> P, free orders"].fit
    orders = fitted_orders(free)
    assert orders["A"] == (free.values["m"], pytest.approx(free.stderr["m"], rel=1e-9))
    fixed = fitted_orders(comparison.best.fit)
    assert fixed == {"A": (1.0, 0.0), "B": (2.0, 0.0)}


def test_parallel_workers_give_the_same_fits(tmp_path):
    # Every fit has the same seed and derived candidates start from their
    # template's fit, so the number of processes cannot change the answer.
    exp, mech = synthetic_power_law(tmp_path, seed=2, times=np.linspace(0, 100, 9),
                                    starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0),
                                            "r3": (1.0, 2.0)})
    candidates = [Candidate("free", mech, starts=1)] + order_lattice(
        mech, {"m": (1, 2)}, name="free")
    seen = []
    one = fit_candidates(exp, candidates, workers=1, progress=lambda *a: seen.append(a))
    two = fit_candidates(exp, candidates, workers=2)
    assert [f.chi2 for f in one] == [f.chi2 for f in two]
    assert [f.values for f in one] == [f.values for f in two]
    assert [s[:2] for s in seen] == [(1, 3), (2, 3), (3, 3)] and seen[0][2] == "free"


def test_true_orders_rank_first_in_seeded_replicates(tmp_path):
    # Small version of tests/benchmarks/study_rank_recovery.py: 10 seeded
    # replicates of synthetic data from k [A]^1 [B]^2 with 1 % noise, ranked with
    # the free-order model and 9 fixed-order neighbours of the truth. Required:
    # the true orders first among the fixed-order candidates in at least 9 of 10,
    # and first overall by BIC in at least 9 of 10. (By AICc the free-order
    # template, which contains the truth, wins whenever its χ² drops by more than
    # 4 for its 2 extra orders: probability e^−2 ≈ 0.135 for a χ²(2) variable
    # (Wilks 1938); the study reports that count too.)
    truth = {"m": 1.0, "n": 2.0}
    first_fixed = first_bic = 0
    for seed in range(1, 11):
        (tmp_path / str(seed)).mkdir()
        exp, mech = synthetic_power_law(tmp_path / str(seed), seed=seed)   # 4 runs x 21 times
        result = rank(exp, mech, {"m": (0.5, 1, 1.5), "n": (1.5, 2, 2.5)}, starts=2,
                      workers=2, criterion="bic", cross_check=False)
        fixed = [r for r in result.candidates if r.template is not None]
        first_fixed += fixed[0].fixed == truth
        first_bic += result.best.fixed == truth
    assert first_fixed >= 9 and first_bic >= 9, (first_fixed, first_bic)


def test_rank_refusals(tmp_path, small):
    from kinfit.inputs.experiment import load_experiment

    exp = load_experiment(small["experiment"])
    mech = load_mechanism(small["model"])
    with pytest.raises(KinfitError, match="at least two candidates"):
        rank(exp, mech)
    with pytest.raises(KinfitError, match="no model given has order parameter"):
        rank(exp, [mech, mech], {"m": (1, 2)})
    with pytest.raises(KinfitError, match="unknown criterion 'r2'"):
        rank(exp, [mech, mech], criterion="r2")
    assert set(CRITERIA) == {"aic", "aicc", "bic"}


def test_compare_refuses_fits_to_different_data(linear_pair, small):
    from kinfit.inputs.experiment import load_experiment

    comparison, _, _ = linear_pair
    other = fit(load_experiment(small["experiment"]), load_mechanism(small["model"]), starts=1)
    with pytest.raises(KinfitError, match="fitted to different data"):
        compare([comparison.best.fit, other])
    with pytest.raises(KinfitError, match="at least two candidates"):
        compare([other])


def test_reversible_candidates_skip_the_cross_check(small):
    # A <=> P against the same with the back reaction switched off (k2 fixed at
    # its bound 0): nested, on the boundary, and no one-step irreversible
    # candidate for the initial-rates method.
    from kinfit.inputs.experiment import load_experiment

    exp = load_experiment(small["experiment"])
    both = mechanism_from_text('[[steps]]\nreaction = "A <=> P"\nrate = "k * [A]"\n'
                               'reverse_rate = "k2 * [P]"\n[parameters]\nk = 0.05\n'
                               'k2 = 0.001\n')
    result = rank(exp, [both, with_fixed(both, {"k2": 0.0}, name="forward only")], starts=1,
                  workers=1)
    assert result.cross_check is None
    assert any("cross-check was skipped" in w for w in result.warnings)
    (test,) = result.nested
    assert test.smaller == "forward only" and test.on_boundary
    assert "conservative" in test.note
