"""The order regression and the whole initial-rates method against closed forms, hand
calculation and statsmodels."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import write

from kinfit.analysis.initial_rates import (
    check_orders,
    initial_rates,
    rate_constant_at,
    regress_orders,
)
from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.integrate import simulate

# ------------------------------------------------------------ regression

def test_regression_returns_exact_orders_from_noise_free_rates():
    # Noise-free initial rates r0 = k [A]0^m [B]0^n [C]0^q (the rate law itself),
    # with runs that vary several concentrations at once: the multiple log-log
    # regression must return the orders and k exactly (to 1e-6).
    k, orders = 0.37, np.array([1.0, 2.0, 0.5])
    conc = np.array([[0.10, 0.20, 0.010], [0.20, 0.20, 0.010], [0.10, 0.40, 0.020],
                     [0.30, 0.10, 0.005], [0.15, 0.25, 0.040], [0.05, 0.30, 0.015]])
    rates = k * np.prod(conc ** orders, axis=1)
    reg = regress_orders(conc, rates, species=("A", "B", "C"))
    for s, m in zip("ABC", orders):
        assert reg.orders[s] == pytest.approx(m, abs=1e-6)
        assert reg.stderr[s] < 1e-6
    assert reg.k == pytest.approx(k, rel=1e-6)
    assert reg.overall_order == pytest.approx(3.5, abs=1e-6)
    assert reg.dof == 2


def test_regression_reproduces_a_hand_computed_table():
    # Invented for this test, computed by hand. Initial rates (M s^-1):
    #   run  [A]0/M  [B]0/M  r0
    #   1    0.10    0.10    2.40e-4
    #   2    0.20    0.10    9.70e-4
    #   3    0.10    0.30    7.10e-4
    # By hand: m = ln(9.70/2.40)/ln 2 = ln 4.041667/0.693147 = 1.396657/0.693147 = 2.01495;
    #          n = ln(7.10/2.40)/ln 3 = ln 2.958333/1.098612 = 1.084626/1.098612 = 0.98727;
    #          k = 2.40e-4 / 0.10^(2.01495 + 0.98727) = 2.40e-4/9.94902e-4 = 0.24123
    #          in M^(1 − 3.00222) s^-1.
    reg = regress_orders([[0.10, 0.10], [0.20, 0.10], [0.10, 0.30]],
                         [2.40e-4, 9.70e-4, 7.10e-4], species=("A", "B"))
    assert reg.orders["A"] == pytest.approx(2.01495, abs=1e-5)
    assert reg.orders["B"] == pytest.approx(0.98727, abs=1e-5)
    assert reg.k == pytest.approx(0.24123, rel=1e-4)
    assert reg.dof == 0 and reg.stderr["A"] is None      # exactly determined, unweighted


def weighted_case(seed, scatter):
    """Seeded noisy rates; the stated errors are `scatter` times the true noise."""
    rng = np.random.default_rng(seed)
    conc = np.array([[0.1, 0.1], [0.2, 0.1], [0.1, 0.2], [0.3, 0.15], [0.15, 0.3],
                     [0.25, 0.25], [0.05, 0.2]])
    true = 2.0 * conc[:, 0] * conc[:, 1] ** 2
    rel = np.linspace(0.02, 0.06, conc.shape[0])
    rates = true * np.exp(rng.normal(0.0, rel))
    return conc, rates, rates * rel * scatter


@pytest.mark.parametrize("scatter", [0.5, 3.0], ids=["errors understated", "overstated"])
def test_weighted_regression_matches_statsmodels_wls(scatter):
    # Reference: statsmodels WLS of ln r0 on (1, ln[A]0, ln[B]0) with weights
    # 1/se(ln r0)². kinfit multiplies the unscaled covariance by max(1, χ²/dof)
    # (Particle Data Group scale factor, from memory): equal to statsmodels'
    # default (scaled) standard errors when the scatter exceeds the stated errors,
    # and to its fixed-scale ones when it does not.
    conc, rates, se = weighted_case(5, scatter)
    reg = regress_orders(conc, rates, se, species=("A", "B"))
    design = sm.add_constant(np.log(conc))
    weights = (rates / se) ** 2
    scaled = sm.WLS(np.log(rates), design, weights=weights).fit()
    fixed = sm.WLS(np.log(rates), design, weights=weights).fit(cov_type="fixed scale")
    np.testing.assert_allclose([reg.log_k, reg.orders["A"], reg.orders["B"]], scaled.params,
                               rtol=1e-9)
    expected = scaled.bse if scaled.scale > 1 else fixed.bse
    np.testing.assert_allclose([reg.log_k_stderr, reg.stderr["A"], reg.stderr["B"]], expected,
                               rtol=1e-8)
    assert reg.scale_factor == pytest.approx(max(1.0, scaled.scale), rel=1e-9)
    assert (scaled.scale > 1) == (scatter < 1)


def test_regression_refuses_what_it_cannot_do():
    with pytest.raises(KinfitError, match="not vary the starting concentrations of A, B "
                                          "independently"):
        regress_orders([[0.1, 0.2], [0.2, 0.4], [0.3, 0.6], [0.4, 0.8]], [1, 2, 3, 4],
                       species=("A", "B"))
    with pytest.raises(KinfitError, match="at least 3 runs are needed"):
        regress_orders([[0.1, 0.2], [0.2, 0.1]], [1, 2])
    with pytest.raises(KinfitError, match="must be positive"):
        regress_orders([[0.1], [0.2], [0.3]], [1, -2, 3])


def test_check_orders_combines_standard_errors():
    # z = (m_ir − m_fit)/sqrt(se_ir² + se_fit²) (common practice).
    reg = regress_orders([[0.1, 0.1], [0.2, 0.1], [0.1, 0.2], [0.2, 0.2]],
                         [1.0, 2.2, 3.9, 8.1], species=("A", "B"))
    checks = {c.species: c for c in check_orders(reg, {"A": (1.0, 0.05), "B": (2.0, 0.0)})}
    a = checks["A"]
    assert a.z == pytest.approx((reg.orders["A"] - 1.0) / math.hypot(reg.stderr["A"], 0.05))
    assert a.agrees == (abs(a.z) <= 2.0)
    bad = check_orders(reg, {"A": (3.0, 0.01), "B": (2.0, 0.01)})
    assert bad[0].agrees is False and bad[1].agrees is True


# ----------------------------------------------------- whole method, runs

PSEUDO_FIRST = """
    held_constant = ["cat"]
    [[steps]]
    reaction = "A -> 2 P"
    rate = "k * [A] * [cat]^0.5"
    [parameters]
    k = 0.04
"""


def pseudo_first_order_case(folder, measured=("A",)):
    """A -> 2 P, rate k [A] [cat]^0.5 with the catalyst held constant.

    Within each run the decay is first order, so (textbook closed form)
    [A] = [A]0 exp(−k' t), [P] = 2 [A]0 (1 − exp(−k' t)), k' = k [cat]^0.5, and
    the IUPAC rate of reaction at t = 0 is r0 = k [A]0 [cat]0^0.5. Noise-free.
    """
    k = 0.04
    runs = {"r1": (1.0, 0.01), "r2": (2.0, 0.01), "r3": (1.0, 0.04), "r4": (0.5, 0.09),
            "r5": (1.5, 0.02)}
    t = np.linspace(0.0, 30.0, 31)
    rows, blocks = [], []
    for name, (a0, cat) in runs.items():
        kp = k * math.sqrt(cat)
        values = {"A": a0 * np.exp(-kp * t), "P": 2 * a0 * (1 - np.exp(-kp * t))}
        for s in measured:
            rows += [f"{name},{ti:g},{s},{v:.17g}" for ti, v in zip(t, values[s])]
        blocks.append(f'[[runs]]\nname = "{name}"\ninitial = {{ A = {a0}, cat = {cat} }}\n')
    write(folder, "traces.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(folder, "e.toml", '[data]\nfile = "traces.csv"\n' + "\n".join(blocks))
    mech = mechanism_from_text(PSEUDO_FIRST.replace("\n    ", "\n"))
    return load_experiment(folder / "e.toml"), mech, runs, k


@pytest.mark.parametrize("measured", [("A",), ("P",), ("A", "P")],
                         ids=["reactant", "product only", "both"])
def test_noise_free_time_courses_give_exact_orders(tmp_path, measured):
    # In ln(fraction of A left) a first-order decay is a straight line, so the
    # initial rates are exact and the regression returns the orders 1 in A and
    # 0.5 in the catalyst to 1e-6; with only the product measured the rate is
    # d[P]/dt / ν_P with ν_P = 2.
    exp, mech, runs, k = pseudo_first_order_case(tmp_path, measured)
    result = initial_rates(exp, mech)
    for r in result.rates:
        a0, cat = runs[r.run]
        assert r.rate == pytest.approx(k * a0 * math.sqrt(cat), rel=1e-6)
    reg = result.regression
    assert reg.orders["A"] == pytest.approx(1.0, abs=1e-6)
    assert reg.orders["cat"] == pytest.approx(0.5, abs=1e-6)
    assert reg.k == pytest.approx(k, rel=1e-5)
    assert result.k_unit == "M^-0.5 s^-1"
    k_at, _ = rate_constant_at(result, {"A": 1.0, "cat": 0.5})
    assert k_at == pytest.approx(k, rel=1e-6)
    assert result.notes == ()


def test_second_order_densely_sampled_gives_the_orders(tmp_path):
    # A + B -> P with rate k [A][B] and [A]0 != [B]0 (closed form, textbook:
    # ln([B][A]0/([A][B]0)) = ([B]0 − [A]0) k t), simulated noise-free and sampled
    # densely. Leading bias of a quadratic in u = ln(fraction of the limiting
    # reactant L left), from a Taylor expansion (derived for this test): the third
    # derivative of u at 0 is −k³ L0 O0 (L0 + O0) (O the other reactant), and a
    # least-squares quadratic over [0, T] shifts the slope by (3/5) T² u₃/6, so the
    # relative error is about −(X²/10) L0 (L0 + O0)/O0² at conversion X (< 0.5 % here).
    mech = mechanism_from_text('[[steps]]\nreaction = "A + B -> P"\nrate = "k * [A] * [B]"\n'
                               '[parameters]\nk = 0.5\n')
    t = np.linspace(0.0, 4.0, 161)
    runs = {"r1": (1.0, 1.5), "r2": (2.0, 1.5), "r3": (1.0, 3.0), "r4": (1.5, 2.5)}
    rows, blocks = [], []
    for name, (a0, b0) in runs.items():
        a = simulate(mech, {"A": a0, "B": b0}, {"k": 0.5}, t)["A"]
        closed = a0 * (b0 - a0) / (b0 * np.exp((b0 - a0) * 0.5 * t) - a0)
        np.testing.assert_allclose(a, closed, rtol=1e-6)
        rows += [f"{name},{ti:g},A,{v:.17g}" for ti, v in zip(t, a)]
        blocks.append(f'[[runs]]\nname = "{name}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    write(tmp_path, "traces.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(tmp_path, "e.toml", '[data]\nfile = "traces.csv"\n' + "\n".join(blocks))
    result = initial_rates(load_experiment(tmp_path / "e.toml"), mech)
    for r in result.rates:
        a0, b0 = runs[r.run]
        low, other = min(a0, b0), max(a0, b0)
        leading = r.conversion ** 2 / 10 * low * (low + other) / other ** 2
        error = r.rate / (0.5 * a0 * b0) - 1
        assert -1.5 * leading < error < 0, (r.run, error, leading)
        assert r.conversion <= 0.2
    assert result.regression.orders["A"] == pytest.approx(1.0, abs=0.01)
    assert result.regression.orders["B"] == pytest.approx(1.0, abs=0.01)


def test_runs_that_do_not_separate_the_orders_are_explained(tmp_path):
    exp, mech, runs, k = pseudo_first_order_case(tmp_path)
    same = exp.__class__(**{**exp.__dict__, "runs": tuple(
        r.__class__(**{**r.__dict__, "initial": {"A": 1.0, "cat": 0.01}}) for r in exp.runs)})
    result = initial_rates(same, mech)
    assert result.regression is None
    assert any("[A]0 = 1 in every run" in n for n in result.notes)
    assert any("no starting concentration varies" in n for n in result.notes)


def test_reaction_given_as_text_and_refusals(tmp_path):
    exp, mech, runs, k = pseudo_first_order_case(tmp_path)
    by_text = initial_rates(exp, "A -> 2 P")
    assert by_text.regression.orders["A"] == pytest.approx(1.0, abs=1e-6)
    with pytest.raises(KinfitError, match="one irreversible step"):
        initial_rates(exp, mechanism_from_text(
            '[[steps]]\nreaction = "A <=> P"\nrate = "k*[A]"\nreverse_rate = "k2*[P]"\n'
            '[parameters]\nk = 1\nk2 = 1\n'))
    with pytest.raises(KinfitError, match="reaction 'A ->'"):
        initial_rates(exp, "A ->")
    with pytest.raises(KinfitError, match="max_conversion"):
        initial_rates(exp, mech, max_conversion=0)


def test_sparse_early_points_are_flagged(tmp_path):
    # Only every 10th point kept: 4 points reach far beyond 20 % conversion.
    exp, mech, runs, k = pseudo_first_order_case(tmp_path)
    lines = (tmp_path / "traces.csv").read_text().splitlines()
    keep = [lines[0]] + [ln for ln in lines[1:] if float(ln.split(",")[1]) % 10 == 0]
    (tmp_path / "traces.csv").write_text("\n".join(keep) + "\n")
    result = initial_rates(load_experiment(tmp_path / "e.toml"), mech)
    assert any("sample more densely near t = 0" in n for n in result.notes)
    data = result.to_dict()
    assert data["regression"]["orders"]["A"] == pytest.approx(1.0, abs=1e-6)  # still exact
    assert {"run", "rate", "stderr", "conc0", "traces", "note"} <= set(data["runs"][0])
