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
    check = check_against_initial_rates(comparison.candidates, exp, 0.2)
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
    assert data == comparison.to_dict()["initial_rates"]


def test_cross_check_is_skipped_across_temperatures(arrhenius_study):
    reason = check_against_initial_rates((), arrhenius_study["experiment"], 0.2)
    assert isinstance(reason, str) and "several temperatures" in reason
