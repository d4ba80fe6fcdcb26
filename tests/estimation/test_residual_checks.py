"""Residual checks: the exact runs distribution against statsmodels and enumeration, the
lag-1 test against statsmodels' Ljung–Box, and the verdicts on short traces."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from statsmodels.sandbox.stats.runs import TotalRunsProb, runstest_1samp
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf

from kinfit.estimation.residual_checks import (
    MISFIT_P,
    RULE,
    check_residuals,
    lag1_test,
    runs_distribution,
    runs_test,
    summarize_checks,
)


def _count_runs(signs):
    return 1 + sum(a != b for a, b in zip(signs[1:], signs[:-1]))


@pytest.mark.parametrize("n_pos, n_neg", [(1, 1), (1, 5), (2, 2), (3, 4), (5, 5), (4, 9),
                                          (6, 7)])
def test_runs_distribution_by_enumerating_every_arrangement(n_pos, n_neg):
    # Reference: the definition itself. Every placement of the n₊ positive signs among
    # n positions is equally likely; count the runs of each (itertools enumeration).
    n = n_pos + n_neg
    counts = {}
    for where in itertools.combinations(range(n), n_pos):
        signs = [1 if i in where else -1 for i in range(n)]
        r = _count_runs(signs)
        counts[r] = counts.get(r, 0) + 1
    total = math.comb(n, n_pos)
    exact = runs_distribution(n_pos, n_neg)
    assert set(exact) == set(counts)
    for r, c in counts.items():
        assert exact[r] == pytest.approx(c / total, rel=1e-12)


@pytest.mark.parametrize("n_pos, n_neg", [(2, 3), (5, 5), (9, 10), (8, 11), (3, 16),
                                          (20, 25), (40, 37)])
def test_runs_distribution_matches_statsmodels(n_pos, n_neg):
    # Reference: statsmodels.sandbox.stats.runs.TotalRunsProb (the exact distribution of
    # the total number of runs, formulas from the SAS manual), pdf and cdf; and the
    # Wald–Wolfowitz mean 2 n₊ n₋ / n + 1 (Wald & Wolfowitz 1940).
    ref = TotalRunsProb(n_pos, n_neg)
    exact = runs_distribution(n_pos, n_neg)
    rs = np.array(sorted(exact))
    np.testing.assert_allclose([exact[r] for r in rs], ref.pdf(rs), rtol=1e-10)
    assert sum(exact.values()) == pytest.approx(1.0, rel=1e-12)
    mean = sum(r * p for r, p in exact.items())
    assert mean == pytest.approx(2 * n_pos * n_neg / (n_pos + n_neg) + 1, rel=1e-12)
    rng = np.random.default_rng(n_pos * 100 + n_neg)
    signs = rng.permutation([1.0] * n_pos + [-1.0] * n_neg)
    runs, _, p = runs_test(signs)
    assert p == pytest.approx(ref.cdf(runs), rel=1e-10)


@pytest.mark.parametrize("seed", range(5))
def test_normal_approximation_matches_statsmodels(seed):
    # Reference: statsmodels.sandbox.stats.runs.runstest_1samp (Wald–Wolfowitz normal
    # approximation, no continuity correction), cutting at zero; kept for information.
    x = np.random.default_rng(seed).standard_normal(40)
    _, z, _ = runs_test(x)
    z_ref, _ = runstest_1samp(x, cutoff=0.0, correction=False)
    assert z == pytest.approx(z_ref, rel=1e-12)


@pytest.mark.parametrize("seed", range(5))
def test_lag1_test_matches_statsmodels_ljung_box(seed):
    # Reference: statsmodels.stats.diagnostic.acorr_ljungbox at lag 1 (Ljung & Box 1978,
    # two-sided χ²(1) p-value) and statsmodels.tsa.stattools.acf for r₁; kinfit's
    # one-sided p must satisfy 2 min(p, 1 − p) = the two-sided p.
    x = np.cumsum(np.random.default_rng(seed).standard_normal(19)) * 0.3 \
        + np.random.default_rng(seed + 10).standard_normal(19)
    r1, p = lag1_test(x)
    assert r1 == pytest.approx(acf(x, nlags=1, fft=False)[1], rel=1e-12)
    lb = acorr_ljungbox(x, lags=[1])
    assert 2 * min(p, 1 - p) == pytest.approx(float(lb["lb_pvalue"].iloc[0]), rel=1e-9)
    assert (p < 0.5) == (r1 > 0)


def test_a_long_stretch_on_a_short_trace_is_flagged():
    # 19 residuals in the shape a missed curvature leaves: 5 above, 9 below, 5 above
    # (3 runs). Exactly (Swed & Eisenhart 1943 formula, by hand): with 10 positive and 9
    # negative, P(R ≤ 3) = [2 + C(9,1)C(8,0) + C(9,0)C(8,1)] / C(19,10)
    #                    = (2 + 9 + 8) / 92378.
    res = np.cos(np.linspace(0.0, 2.0 * math.pi, 19)) + 0.15
    runs, _, p = runs_test(res)
    assert (runs, int(np.sum(res > 0)), int(np.sum(res < 0))) == (3, 10, 9)
    assert p == pytest.approx(19 / 92378, rel=1e-12)


def test_one_sign_only():
    assert runs_test(np.ones(10)) == (1, None, None)
    assert runs_test(np.zeros(5)) == (0, None, None)
    assert lag1_test(np.ones(2)) == (None, None)


def _power_law_fit(tmp_path, model_rate, n_points=19):
    """Seeded second-order data A + B -> P ([A] and [P] measured, four runs), fitted
    with the given rate law (a right one or a wrong one)."""
    from conftest import write

    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import mechanism_from_text
    from kinfit.numerics.integrate import simulate

    truth = mechanism_from_text('[[steps]]\nreaction = "A + B -> P"\nrate = "k*[A]*[B]"\n'
                                '[parameters]\nk = 0.05\n')
    rng = np.random.default_rng(1913)
    t = np.linspace(0.0, 60.0, n_points)
    rows, runs = [], []
    for name, (a0, b0) in {"r1": (1.0, 1.0), "r2": (2.0, 1.0), "r3": (1.0, 2.0),
                           "r4": (1.5, 1.5)}.items():
        traj = simulate(truth, {"A": a0, "B": b0}, {"k": 0.05}, t)
        for s in ("A", "P"):
            y = traj[s] + rng.normal(0.0, 0.005, t.size)
            rows += [f"{name},{ti:.6g},{s},{v:.8g}" for ti, v in zip(t, y)]
        runs.append(f'[[runs]]\nname = "{name}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    write(tmp_path, "traces.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(tmp_path, "e.toml", '[units]\ntime = "s"\nconcentration = "M"\n'
                              '[data]\nfile = "traces.csv"\n' + "\n".join(runs))
    mech = mechanism_from_text(f'[[steps]]\nreaction = "A + B -> P"\nrate = "{model_rate}"\n'
                               '[parameters]\nk = 0.01\n')
    return fit(load_experiment(tmp_path / "e.toml"), mech, starts=2)


def test_short_traces_are_judged_and_a_wrong_model_is_caught(tmp_path):
    # 8 traces of 19 points, a first-order law fitted to second-order data: under the old
    # rule (8 residuals of each sign needed) most were "too few to judge" under the
    # heading "No trace shows systematic misfit". Now every trace is judged and caught;
    # a trace lopsided in sign (the runs test cannot reach p < 0.01) is caught by its
    # lag-1 autocorrelation.
    wrong = _power_law_fit(tmp_path, "k*[A]")
    summary = wrong.residual_check_summary
    assert summary["heading"] == "8 traces judged, 8 show systematic misfit"
    assert all(c.verdict.startswith("systematic misfit") for c in wrong.residual_checks)
    lopsided = [c for c in wrong.residual_checks
                if not c.n_positive or not c.n_negative
                or 2 / math.comb(c.n, c.n_positive) >= MISFIT_P]
    assert lopsided and all(c.judged and c.p_autocorrelation < MISFIT_P for c in lopsided)


def test_a_right_model_passes_and_the_output_names_the_tests(tmp_path):
    from kinfit.output.fit import format_fit

    right = _power_law_fit(tmp_path, "k*[A]*[B]")
    summary = right.residual_check_summary
    assert summary["heading"] == "8 traces judged, 0 show systematic misfit"
    assert all(c.verdict == "no sign of systematic misfit" for c in right.residual_checks)
    text = format_fit(right)
    assert "Residual checks: 8 traces judged, 0 show systematic misfit" in text
    assert "exact runs test" in text and "Ljung–Box" in text
    data = right.to_dict()
    assert data["residual_check_summary"]["rule"] == RULE
    assert {"p_few_runs", "p_autocorrelation", "judged", "expected_runs"} <= set(
        data["residual_checks"][0])


def test_a_trace_is_not_judged_only_when_the_exact_test_cannot_reach_the_level(small):
    # The rule: judged when P(R = 2) = 2 / C(n, n₊) < 0.01. Four residuals, the first
    # exactly zero ([A]0 is given): 2 positive and 1 negative, 2 / C(3, 2) = 2/3, so not
    # even two runs could be called systematic.
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    result = fit(load_experiment(small["experiment"]), load_mechanism(small["model"]), starts=1)
    checks = check_residuals(result.experiment, result.residuals)
    assert tuple(checks) == result.residual_checks
    (check,) = checks
    assert (check.run, check.species, check.n) == ("r1", "A", 4)
    assert not check.judged and not check.misfit
    assert check.verdict.startswith("too short to judge: with ")
    assert (check.n_positive, check.n_negative) == (2, 1)
    assert "2 positive and 1 negative residuals, even 2 runs have p = 0.67 ≥ 0.01" in \
        check.verdict
    assert summarize_checks(checks)["heading"] == "0 traces judged, 0 show systematic " \
                                                   "misfit; 1 too short to judge"


@pytest.mark.parametrize("n_pos, n_neg, judged", [(5, 5, True), (4, 6, True), (4, 5, False),
                                                  (3, 8, False), (3, 9, True), (2, 17, False),
                                                  (3, 16, True)])
def test_the_judging_rule_at_its_edges(n_pos, n_neg, judged):
    # 2 / C(n, n₊), by hand: C(10,5) = 252 → 0.0079; C(10,4) = 210 → 0.0095;
    # C(9,4) = 126 → 0.016; C(11,3) = 165 → 0.0121; C(12,3) = 220 → 0.0091;
    # C(19,2) = 171 → 0.0117; C(19,3) = 969 → 0.0021.
    from types import SimpleNamespace

    # signs spread as evenly as they go (many runs, no autocorrelation to find)
    signs = -np.ones(n_pos + n_neg)
    signs[np.round(np.linspace(0, n_pos + n_neg - 1, n_pos)).astype(int)] = 1.0
    trace = SimpleNamespace(species="A", times=np.arange(signs.size, dtype=float))
    exp = SimpleNamespace(runs=[SimpleNamespace(name="r", traces=[trace])])
    (check,) = check_residuals(exp, signs)
    assert check.judged is judged and not check.misfit
    assert (2 / math.comb(n_pos + n_neg, n_pos) < 0.01) is judged
