"""The rate system: stoichiometry, the numpy rate law, and the compiled kernels agreeing with it.

The compiled integrators evaluate the rate law in numba loops
(``kinfit/numerics/integrators/_kernels.py``), the scipy path and the residual
problem in numpy (``kinfit/numerics/rate_system.py``). The tests at the end
evaluate both on random states -- random concentrations (some zero, some
negative, some below the chord threshold), rate constants and orders, for
mechanisms with reversible steps, held-constant species, zero, negative and
non-integer orders -- and check that they agree to rounding, and that the
Jacobians and sensitivity terms match central differences of the numpy
right-hand side (common practice for checking derivatives).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MODELS

from kinfit.inputs.mechanism import (
    load_mechanism,
    mechanism_from_text,
    with_fixed,
    with_start,
)
from kinfit.numerics.integrate import simulate
from kinfit.numerics.integrators import (
    KIND_INITIAL,
    KIND_LOG_K,
    KIND_ORDER,
    dopri,
    rosenbrock,
)
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


# --------------------------------------- the compiled kernels against the numpy law

KERNEL_MODELS = {
    # non-integer orders that are parameters
    "free orders": ("""
        [[steps]]
        reaction = "A + B -> P"
        rate = "k * [A]^m * [B]^n"
        [parameters]
        k = 0.3
        m = { value = 1.2, min = -1, max = 3 }
        n = { value = 0.7, min = -1, max = 3 }
    """, {"m": (-0.5, 2.5), "n": (0.0, 1.0)}),
    # reversible steps, a held-constant species, orders 1 and 2 (the kernel's special cases)
    "reversible, held constant": ("""
        held_constant = ["H"]
        [[steps]]
        reaction = "A + B <=> I"
        rate = "k1 * [A] * [B] * [H]^2"
        reverse_rate = "k_1 * [I]"
        [[steps]]
        reaction = "2 I -> P"
        rate = "k2 * [I]^2"
        [parameters]
        k1 = 2.0
        k_1 = 1.0
        k2 = 0.5
    """, {}),
    # zero order (the reactant still gates the step), order 0.5 (square root), a
    # negative order of a held-constant inhibitor and an order that is a sum
    "zero, half, negative": ("""
        held_constant = ["X"]
        [[steps]]
        reaction = "A -> B"
        rate = "k1"
        [[steps]]
        reaction = "B -> C"
        rate = "k2 * [B]^0.5 * [X]^-1"
        [[steps]]
        reaction = "B + C <=> D"
        rate = "k3 * [B]^(q + 1) * [C]^q"
        reverse_rate = "k4 * [D]^1.5"
        [parameters]
        k1 = 0.1
        k2 = 1.0
        k3 = 1.0
        k4 = 0.2
        q = { value = 0.3, min = -1, max = 2 }
    """, {"q": (-0.8, 1.5)}),
}


def _random_case(name, seed, n_sys=40, eps=1e-3, away_from_kinks=False):
    """A compiled system and random states, rate constants, orders (seeded)."""
    text, order_ranges = KERNEL_MODELS[name]
    mech = mechanism_from_text(text)
    system = compile_mechanism(mech)
    rng = np.random.default_rng(seed)
    values = np.empty((n_sys, len(mech.parameters)))
    for p, pname in enumerate(mech.parameter_names):
        if pname in order_ranges:
            values[:, p] = rng.uniform(*order_ranges[pname], n_sys)
        else:                                    # rate constants over four decades
            values[:, p] = 10.0 ** rng.uniform(-2, 2, n_sys)
    k, orders = system.rate_arrays(values)
    shape = (n_sys, system.n_species)
    if away_from_kinks:
        # the law has kinks at 0 and at eps: differences need states clear of both,
        # either well above eps or inside the linear chord below it
        conc = np.where(rng.random(shape) < 0.8, 10.0 ** rng.uniform(-1.5, 0.5, shape),
                        eps * rng.uniform(0.2, 0.8, shape))
    else:
        conc = 10.0 ** rng.uniform(-2, 0.5, shape)
        special = rng.random(shape)
        conc[special < 0.1] = 0.0                                    # used up
        below = (special >= 0.1) & (special < 0.25)
        conc[below] = eps * rng.random(below.sum())                  # chord region
        conc[special >= 0.9] = -1e-4 * rng.random((special >= 0.9).sum())   # overshoot
    return system, conc, k, orders, eps


def _assert_close(actual, expected, rtol):
    """Agreement to `rtol` of the largest magnitude of each system (rounding scale)."""
    scale = np.abs(expected).reshape(len(expected), -1).max(axis=1)
    scale = np.maximum(scale, 1e-300).reshape((-1,) + (1,) * (expected.ndim - 1))
    np.testing.assert_allclose(actual / scale, expected / scale, rtol=0, atol=rtol)


CASES = [(name, seed) for name in KERNEL_MODELS for seed in (1, 2, 3)]


@pytest.mark.parametrize("name, seed", CASES)
def test_compiled_right_hand_sides_equal_the_numpy_law(name, seed):
    # Same law, different arithmetic order (and sqrt, x*x for the orders 0.5, 2):
    # agreement to 1e-12 of each system's largest term is rounding only.
    system, conc, k, orders, eps = _random_case(name, seed)
    f_np = system.rhs(conc, k, orders, eps)
    jac_np = system.jacobian(conc, k, orders, eps)
    f_ros, jac_ros = rosenbrock.right_hand_side(conc, system.stoichiometry, system.present, k,
                                                orders, eps)
    f_dp, jac_dp, _ = dopri.right_hand_side(conc, system.stoichiometry, system.present, k,
                                            orders, eps)
    assert np.isfinite(f_np).all() and np.isfinite(jac_np).all()
    for f, jac in ((f_ros, jac_ros), (f_dp, jac_dp)):
        _assert_close(f, f_np, 1e-12)
        _assert_close(jac, jac_np, 1e-11)


@pytest.mark.parametrize("name, seed", CASES)
def test_rates_equal_the_kernel_rate_of_each_direction(name, seed):
    # ∂f/∂ln k_j = S[:, j] r_j: the kernel's sensitivity term gives each direction's rate.
    system, conc, k, orders, eps = _random_case(name, seed)
    n_dir = system.n_directions
    sens = (np.full(n_dir, KIND_LOG_K), np.arange(n_dir), np.zeros(n_dir, dtype=int))
    _, _, dfdq = dopri.right_hand_side(conc, system.stoichiometry, system.present, k, orders,
                                       eps, sens=sens)
    expected = system.stoichiometry[None] * system.rates(conc, k, orders, eps)[:, None, :]
    _assert_close(dfdq, expected, 1e-12)


@pytest.mark.parametrize("name, seed", CASES)
def test_jacobians_match_central_differences(name, seed):
    system, conc, k, orders, eps = _random_case(name, seed, away_from_kinks=True)
    jac = system.jacobian(conc, k, orders, eps)
    _, jac_ros = rosenbrock.right_hand_side(conc, system.stoichiometry, system.present, k,
                                            orders, eps)
    fd = np.empty_like(jac)
    for s in range(system.n_species):
        h = 1e-6 * np.abs(conc[:, s])                 # relative step
        up, down = conc.copy(), conc.copy()
        up[:, s] += h
        down[:, s] -= h
        fd[:, :, s] = (system.rhs(up, k, orders, eps)
                       - system.rhs(down, k, orders, eps)) / (2 * h[:, None])
    _assert_close(jac, fd, 1e-6)
    _assert_close(jac_ros, fd, 1e-6)


@pytest.mark.parametrize("name, seed", CASES)
def test_sensitivity_terms_match_central_differences(name, seed):
    # The inhomogeneous terms ∂f/∂q of the forward-sensitivity equations the explicit
    # method integrates: q = ln k of each direction, each exponent that is a
    # parameter, and each starting concentration (then ∂f/∂c, a Jacobian column).
    system, conc, k, orders, eps = _random_case(name, seed, away_from_kinks=True)
    n_dir, n_species = system.n_directions, system.n_species
    entries = system.order_entries
    kind = [KIND_LOG_K] * n_dir + [KIND_ORDER] * len(entries) + [KIND_INITIAL] * n_species
    jj = list(range(n_dir)) + [j for j, _ in entries] + [0] * n_species
    ss = [0] * n_dir + [s for _, s in entries] + list(range(n_species))
    _, _, dfdq = dopri.right_hand_side(conc, system.stoichiometry, system.present, k, orders,
                                       eps, sens=(np.array(kind), np.array(jj), np.array(ss)))
    h = 1e-6
    fd = np.empty_like(dfdq)
    for p, (kd, j, s) in enumerate(zip(kind, jj, ss)):
        if kd == KIND_LOG_K:
            k_up, k_down = k.copy(), k.copy()
            k_up[:, j] *= np.exp(h)
            k_down[:, j] *= np.exp(-h)
            diff = system.rhs(conc, k_up, orders, eps) - system.rhs(conc, k_down, orders, eps)
            fd[:, :, p] = diff / (2 * h)
        elif kd == KIND_ORDER:
            e_up, e_down = orders.copy(), orders.copy()
            e_up[:, j, s] += h
            e_down[:, j, s] -= h
            diff = system.rhs(conc, k, e_up, eps) - system.rhs(conc, k, e_down, eps)
            fd[:, :, p] = diff / (2 * h)
        else:
            step = 1e-6 * np.abs(conc[:, s])
            up, down = conc.copy(), conc.copy()
            up[:, s] += step
            down[:, s] -= step
            diff = system.rhs(up, k, orders, eps) - system.rhs(down, k, orders, eps)
            fd[:, :, p] = diff / (2 * step[:, None])
    _assert_close(dfdq, fd, 1e-6)


@pytest.mark.parametrize("name", ["free orders", "zero, half, negative"])
def test_extents_right_hand_side_maps_back_to_the_concentrations(name):
    # In extents of reaction (c = c0 + N z, dz/dt = M r) the kernel's right-hand side
    # and Jacobian must map back to the plain ones: N dz/dt = S r and N J_z = J_c N.
    system, conc, k, orders, eps = _random_case(name, 7)
    assert system.extents is not None            # fewer steps than species
    n_basis, _ = system.extents
    f_z, jac_z, _ = dopri.right_hand_side(conc, system.stoichiometry, system.present, k,
                                          orders, eps, basis=system.extents)
    _assert_close(f_z @ n_basis.T, system.rhs(conc, k, orders, eps), 1e-12)
    _assert_close(n_basis @ jac_z, system.jacobian(conc, k, orders, eps) @ n_basis, 1e-11)
