"""Ranking candidates against statsmodels, lmfit and seeded synthetic data."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from cases import zero_order_case
from conftest import synthetic_power_law
from statsmodels.tools.eval_measures import aicc as sm_aicc

from kinfit.analysis.criteria import CRITERIA
from kinfit.analysis.ranking import compare, rank
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text, with_fixed


@pytest.fixture(scope="module")
def linear_pair(tmp_path_factory):
    """Zero-order A -> P with [A]0 fitted (a straight line) and the same with k fixed.

    Both are ordinary least-squares problems, so statsmodels OLS is the reference:
    full: [A] ~ 1 + t; restricted (k fixed at 0.05): [A] + 0.05 t ~ 1.
    """
    folder = tmp_path_factory.mktemp("linear")
    exp, mech, t, y = zero_order_case(folder)
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
    # a candidate's parameter table is its fit's (the fields of result.json), plus
    # "fitted", the name earlier ranking.json files used for "vary"
    params = rows[0]["parameters"]
    own = comparison.best.fit.to_dict()["parameters"]
    assert {n: {k: v for k, v in p.items() if k != "fitted"} for n, p in params.items()} == own
    assert params["k"]["vary"] is params["k"]["fitted"] is True
    assert params["m"]["vary"] is params["m"]["fitted"] is False
    assert params["m"]["value"] == 1.0 and params["m"]["stderr"] is None
    free = next(r for r in rows if r["fixed"] == {})
    assert free["n_params"] == 3 and free["template"] is None
    pairs = {(t["smaller"], t["larger"]) for t in data["nested_tests"]}
    assert (rows[0]["name"], free["name"]) in pairs and len(pairs) == 4
    assert data["verdicts"][0].startswith("Best by AICc: 'A + B -> P, free orders [m=1, n=2]'")
    assert data["evidence_scales"]["aicc"].startswith("Burnham & Anderson")
    assert data["initial_rates"]["compared_with"] == rows[0]["name"]
    assert {o["species"] for o in data["initial_rates"]["orders"]} == {"A", "B"}


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
