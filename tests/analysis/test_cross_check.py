"""Fitted orders beside the initial-rates method."""

from __future__ import annotations

import pytest

from kinfit.analysis.cross_check import check_against_initial_rates, fitted_orders
from kinfit.analysis.initial_rates import AGREEMENT_Z


def test_fitted_orders_carry_the_fit_standard_errors(small_ranking):
    comparison, _, _ = small_ranking
    free = comparison["A + B -> P, free orders"].fit
    orders = fitted_orders(free)
    assert orders["A"] == (free.values["m"], pytest.approx(free.stderr["m"], rel=1e-9))
    fixed = fitted_orders(comparison.best.fit)
    assert fixed == {"A": (1.0, 0.0), "B": (2.0, 0.0)}


def test_cross_check_compares_the_best_one_step_candidate(small_ranking):
    comparison, exp, _ = small_ranking
    # the ranking's own check (20 % window) cannot check these sparse runs (below); with a
    # window wide enough to hold their first four points it compares
    assert comparison.cross_check.status == "cannot check"
    check = check_against_initial_rates(comparison.candidates, exp, 0.9)
    assert check.cannot_check is None
    assert check.candidate == comparison.best.name
    assert {c.species for c in check.orders} == {"A", "B"}
    for c in check.orders:
        # z is the difference in combined standard errors (hypot of the two)
        combined = (c.initial_rates_stderr ** 2 + c.time_course_stderr ** 2) ** 0.5
        if combined > 0:
            assert c.z == pytest.approx((c.initial_rates - c.time_course) / combined)
            assert c.agrees == (abs(c.z) <= AGREEMENT_Z)
    data = check.to_dict()
    assert data["compared_with"] == comparison.best.name
    assert data["agreement_limit_z"] == AGREEMENT_Z
    assert data["status"] == ("disagree" if any(c.agrees is False for c in check.orders)
                              or check.rate_constant["agrees"] is False else "agree")
    assert comparison.cross_check.to_dict() == comparison.to_dict()["initial_rates"]


def test_cross_check_is_skipped_across_temperatures(arrhenius_study):
    reason = check_against_initial_rates((), arrhenius_study["experiment"], 0.2)
    assert isinstance(reason, str) and "several temperatures" in reason


def test_initial_rates_from_beyond_the_window_cannot_check(tmp_path):
    # Correct data (seeded A + B -> P, rate k [A][B]², true orders 1 and 2) sampled so
    # sparsely that the first reading after t = 0 already lies beyond the 20 % window in
    # every run. The initial rates are then biased and differ from the (right) fit by
    # several standard errors; the check must say "cannot check", with the reason, and
    # not "DISAGREE".
    from conftest import synthetic_power_law

    from kinfit.analysis.ranking import rank
    from kinfit.output.ranking import format_ranking

    starts = {"r1": (1.0, 1.0), "r2": (2.0, 1.0), "r3": (1.0, 2.0), "r4": (0.5, 1.5)}
    exp, mech = synthetic_power_law(tmp_path, seed=5, times=[0, 20, 40, 60, 80, 100, 130],
                                    starts=starts)
    for run in exp.runs:                       # the slip: the first reading is past 20 %
        a = next(t for t in run.traces if t.species == "A").values
        a0, b0 = starts[run.name]
        assert (a0 - a[1]) / min(a0, b0) > 0.2
    comparison = rank(exp, mech, {"m": [1, 2], "n": [1, 2]}, starts=2, workers=1)
    assert comparison.best.fixed == {"m": 1.0, "n": 2.0}
    check = comparison.cross_check
    assert any(abs(c.z) > AGREEMENT_Z for c in check.orders)      # would have "disagreed"
    assert check.status == "cannot check"
    assert all(c.agrees is None for c in check.orders)
    assert check.rate_constant["agrees"] is None
    assert "r1, r2, r3, r4" in check.cannot_check and "beyond the 20 % window" in \
        check.cannot_check
    assert not any("differs from the time-course fit" in w for w in comparison.warnings)
    assert any(w.startswith("the initial-rates cross-check cannot check the fit: the "
                            "initial rates of run(s) r1, r2, r3, r4") for w in comparison.warnings)
    text = format_ranking(comparison)
    assert "DISAGREE" not in text and "(cannot check)" in text
    assert "verdict: CANNOT CHECK, not a disagreement" in text
    data = comparison.to_dict()["initial_rates"]
    assert data["status"] == "cannot check" and data["cannot_check"] == check.cannot_check
