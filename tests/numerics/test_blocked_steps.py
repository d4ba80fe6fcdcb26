"""Steps a run cannot start: found from the specifications, confirmed by integration."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from kinfit.inputs.experiment import Experiment, Run
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.inputs.parameters import Parameter, Role
from kinfit.numerics.blocked_steps import blocked_step_warnings, blocked_steps

CHAIN = """
[[steps]]
reaction = "A -> B"
rate = "k1 * [A]"
[[steps]]
reaction = "B + C -> D"
rate = "k2 * [B] * [C]"
label = "coupling"
[parameters]
k1 = 0.3
k2 = 0.5
"""


def _run(initial, name="r1", fitted=None):
    return Run(name=name, traces=(), initial=initial, fitted_initial=fitted or {})


def _chain_by_hand(a0, c0):
    """A -> B, B + C -> D integrated by scipy's solve_ivp with the rate laws written out
    (an outside reference: no kinfit code), at k1 = 0.3, k2 = 0.5."""
    def rhs(_, y):
        a, b, c, _d = y
        r1, r2 = 0.3 * a, 0.5 * b * c
        return [-r1, r1 - r2, -r2, r2]
    return solve_ivp(rhs, (0.0, 20.0), [a0, 0.0, c0, 0.0], rtol=1e-10, atol=1e-12).y


@pytest.mark.parametrize("initial, expected", [
    # nothing missing: both steps run
    ({"A": 1.0, "C": 1.0}, []),
    # C left out: the coupling cannot start, although B is formed
    ({"A": 1.0}, [("coupling", ("C",))]),
    # A left out: step 1 cannot start, so B is never formed and the coupling is blocked too
    ({"C": 1.0}, [("steps[1]", ("A",)), ("coupling", ("B",))]),
])
def test_blocked_steps_follow_chains_and_agree_with_integration(initial, expected):
    mech = mechanism_from_text(CHAIN)
    found = [(b.step, b.missing) for b in blocked_steps(mech, _run(initial))]
    assert found == expected
    a, b, c, d = _chain_by_hand(initial.get("A", 0.0), initial.get("C", 0.0))
    # what the check says, the integration shows: a blocked step forms nothing
    assert (np.ptp(a) == 0.0) == any(s == "steps[1]" for s, _ in expected)
    assert (np.max(d) == 0.0) == any(s == "coupling" for s, _ in expected)


def test_the_warning_names_run_step_and_species():
    mech = mechanism_from_text(CHAIN)
    [message] = blocked_step_warnings(mech, Experiment("e", runs=(_run({"A": 1.0}, "d1"),)))
    assert message == ("run 'd1': coupling (B + C -> D) cannot proceed: C starts at zero and no "
                       "step forms it (left out of the run's initial?)")


def test_reversible_steps_and_negative_orders():
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A <=> B"
        rate = "kf * [A]"
        reverse_rate = "kr * [B]"
        [[steps]]
        reaction = "B -> P"
        rate = "k3 * [B] * [P]^-1"
        [parameters]
        kf = 1
        kr = 1
        k3 = 1
    """.replace("        ", ""))
    # B is formed by the forward direction, so the reverse runs; the product P, an inhibitor
    # starting at zero, does not stop step 2 (a negative order's power is of max([P], eps))
    assert blocked_steps(mech, _run({"A": 1.0})) == ()
    # from B alone the reverse direction forms A, so the forward one runs too
    assert blocked_steps(mech, _run({"B": 1.0})) == ()
    nothing = blocked_steps(mech, _run({"P": 1.0}))      # P is formed, not consumed, by all
    assert [(b.step, b.direction, b.missing) for b in nothing] == [
        ("steps[1]", "forward", ("A",)), ("steps[1]", "reverse", ("B",)),
        ("steps[2]", "forward", ("B",))]
    assert "(A <=> B, reverse direction) cannot proceed" in nothing[1].message()


def test_zero_order_reactants_held_species_and_fitted_starts():
    mech = mechanism_from_text("""
        held_constant = ["cat"]
        [[steps]]
        reaction = "A -> P"
        rate = "k0"
        [[steps]]
        reaction = "S -> Q"
        rate = "k1 * [S] * [cat]"
        [parameters]
        k0 = 1
        k1 = 1
    """.replace("        ", ""))
    # a zero-order reactant still stops its step when it is absent (it is consumed)
    missing = {b.step: b.missing for b in blocked_steps(mech, _run({"S": 1.0, "cat": 1.0}))}
    assert missing == {"steps[1]": ("A",)}
    # a held-constant species at zero is formed by nothing
    missing = {b.step: b.missing for b in blocked_steps(mech, _run({"A": 1.0, "S": 1.0}))}
    assert missing == {"steps[2]": ("cat",)}
    # a fitted starting concentration counts at its value: the start, or the values given
    fitted = {"A": Parameter("A_0_r1", 1.0, 0.0, 5.0, True, Role.INITIAL)}
    run = _run({"S": 1.0, "cat": 1.0}, fitted=fitted)
    assert blocked_steps(mech, run) == ()
    assert [b.missing for b in blocked_steps(mech, run, {"A_0_r1": 0.0})] == [("A",)]


def test_orders_are_read_at_the_values_given():
    mech = mechanism_from_text("""
        held_constant = ["B"]
        [[steps]]
        reaction = "A -> P"
        rate = "k * [A] * [B]^n"
        [parameters]
        k = 1
        n = { value = 1, min = -2, max = 3 }
    """.replace("        ", ""))
    assert [b.missing for b in blocked_steps(mech, _run({"A": 1.0}))] == [("B",)]
    assert blocked_steps(mech, _run({"A": 1.0}), {"n": -1.0}) == ()
