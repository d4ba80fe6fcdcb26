"""The rate system: stoichiometry and the numpy rate law."""

from __future__ import annotations

import numpy as np
import pytest

from conftest import MODELS
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text, with_fixed, with_start
from kinfit.numerics.integrate import simulate
from kinfit.numerics.rate_system import compile_mechanism


def test_stoichiometry():
    system = compile_mechanism(load_mechanism(MODELS / "power_law_two.toml"))
    assert system.species == ("A", "B", "P") and system.parameter_names == ("k", "m", "n")
    np.testing.assert_array_equal(system.stoichiometry, [[-1], [-1], [1]])


def test_iupac_convention_two_a():
    # IUPAC Gold Book, "rate of reaction" (from memory): d[X]/dt = nu_X v.
    # For 2 A -> P with v = k[A]^2: d[A]/dt = -2 k [A]^2, d[P]/dt = +k [A]^2.
    system = compile_mechanism(load_mechanism(MODELS / "second_order.toml"))
    k, orders = system.rate_arrays([0.5])
    d = system.rhs(np.array([[0.4, 0.0]]), k, orders, 1e-9)
    np.testing.assert_allclose(d, [[-2 * 0.5 * 0.16, 0.5 * 0.16]])


def test_stoichiometry_does_not_set_orders():
    # A + 2 B -> P with rate k [A] [B]: B is used twice as fast, order in B stays 1.
    system = compile_mechanism(mechanism_from_text("""
        [[steps]]
        reaction = "A + 2 B -> P"
        rate = "k * [A] * [B]"
        [parameters]
        k = 1.0
    """))
    k, orders = system.rate_arrays([1.0])
    d = system.rhs(np.array([[0.5, 2.0, 0.0]]), k, orders, 1e-9)
    np.testing.assert_allclose(d, [[-1.0, -2.0, 1.0]])


def test_reversible_and_held_constant():
    mech = mechanism_from_text("""
        held_constant = ["H"]
        [[steps]]
        reaction = "A <=> B"
        rate = "kf * [A] * [H]"
        reverse_rate = "kr * [B]"
        [parameters]
        kf = 2.0
        kr = 1.0
    """)
    system = compile_mechanism(mech)
    assert system.n_directions == 2
    np.testing.assert_array_equal(system.stoichiometry, [[-1, 1], [1, -1], [0, 0]])
    traj = simulate(mech, {"A": 1.0, "H": 0.5}, times=[0.0, 5.0])
    assert traj["H"][-1] == 0.5


def test_analytic_jacobian_matches_finite_differences():
    # Central differences as an independent check (common practice).
    mech = load_mechanism(MODELS / "pre_equilibrium.toml")
    system = compile_mechanism(mech)
    values = np.array([mech.values()[n] for n in mech.parameter_names])
    k, orders = system.rate_arrays(values)
    c = np.array([[0.7, 0.4, 0.05, 0.2]])
    jac = system.jacobian(c, k, orders, 1e-12)[0]
    h = 1e-6
    fd = np.empty((4, 4))
    for j in range(4):
        up, down = c.copy(), c.copy()
        up[0, j] += h
        down[0, j] -= h
        fd[:, j] = (system.rhs(up, k, orders, 1e-12) - system.rhs(down, k, orders, 1e-12))[0] \
            / (2 * h)
    np.testing.assert_allclose(jac, fd, rtol=1e-6, atol=1e-9)


def test_fractional_order_jacobian_is_finite_at_zero():
    system = compile_mechanism(load_mechanism(MODELS / "power_law_one.toml"))
    k, orders = system.rate_arrays([0.1, 0.5])
    jac = system.jacobian(np.array([[0.0, 1.0]]), k, orders, 1e-9)
    assert np.isfinite(jac).all()


def test_copies_share_one_compiled_system():
    free = load_mechanism(MODELS / "power_law_two.toml")
    fixed = with_fixed(free, {"m": 1.5}, name="m fixed")
    started = with_start(fixed, {"k": 2e-3})
    system = compile_mechanism(free)
    assert compile_mechanism(fixed) is system and compile_mechanism(started) is system
    # fixing changes values, not the layout: the orders follow the values given
    _, orders = system.rate_arrays([0.5, 1.5, 2.0])
    assert orders[0, 0, free.species.index("A")] == 1.5
    # the shared arrays cannot be changed by a caller
    with pytest.raises(ValueError):
        system.stoichiometry[0, 0] = 5.0
    # a different structure is a different system
    assert compile_mechanism(load_mechanism(MODELS / "power_law_three.toml")) is not system
