"""The compiled integrator against scipy's solve_ivp and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from conftest import MODELS
from kinfit.numerics.compiled import (KIND_INITIAL, KIND_LOG_K, KIND_ORDER, OK, STIFF, integrate_batch,
                             integrate_stiff)
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.simulate import integrate_flat, simulate


def run(mech, y0, values, t, sens=None, rtol=1e-10):
    k, orders = mech.rate_arrays(np.asarray(values, float))
    y0 = np.atleast_2d(np.asarray(y0, float))
    scale = y0.max(axis=1)
    return integrate_batch(mech.stoichiometry, mech.present, y0, k, orders, np.asarray(t, float),
                           np.array([0, len(t)]), rtol=rtol, atol=1e-13 * scale,
                           eps=1e-9 * scale, sens=sens)


def test_a_plus_b_closed_form():
    # [Laidler; Espenson] A + B -> P: A(5 s) = 0.435266598393584 for A0 = 1, B0 = 2, k = 0.1
    mech = load_mechanism(MODELS / "second_order_ab.toml")
    y, _, status, _ = run(mech, [1.0, 2.0, 0.0], [0.1], [0.0, 5.0])
    assert status[0] == OK
    assert y[1, 0] == pytest.approx(0.435266598393584, rel=1e-8)


@pytest.mark.parametrize("path", sorted(MODELS.glob("*.toml")), ids=lambda p: p.name)
def test_every_model_agrees_with_scipy_radau(path):
    # Reference: scipy's Radau at rtol 1e-12 on the same right-hand side.
    from kinfit.inputs.mechanism import rhs

    mech = load_mechanism(path)
    values = np.array([mech.values()[n] for n in mech.parameter_names])
    start = np.linspace(1.0, 0.5, mech.n_species)
    t = np.linspace(0.0, 30.0, 16)
    traj = simulate(mech, dict(zip(mech.species, start)), times=t)
    k, orders = mech.rate_arrays(values)
    ref = solve_ivp(lambda _, y: rhs(y[None], k, orders, mech.present, 1e-9, mech.stoichiometry)[0],
                    (0, 30), start, method="Radau", t_eval=t, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(traj.conc, ref.y.T, rtol=1e-6, atol=1e-9)


def test_sensitivities_match_central_differences():
    # Forward sensitivities against central differences of the states
    # (common practice for checking derivatives).
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A + B -> P"
        rate = "k * [A]^m * [B]^n"
        [parameters]
        k = 0.3
        m = 1.2
        n = 0.7
    """)
    sens = (np.array([KIND_LOG_K, KIND_ORDER, KIND_ORDER, KIND_INITIAL]),
            np.array([0, 0, 0, 0]), np.array([0, 0, 1, 0]))
    t = [0.0, 1.0, 4.0, 10.0]
    y, s, status, _ = run(mech, [1.0, 1.5, 0.0], [0.3, 1.2, 0.7], t, sens=sens, rtol=1e-11)
    assert status[0] == OK

    def states(k=0.3, m=1.2, n=0.7, a0=1.0):
        return run(mech, [a0, 1.5, 0.0], [k, m, n], t, rtol=1e-12)[0]

    h = 1e-5
    fd = [(states(k=0.3 * math.exp(h)) - states(k=0.3 * math.exp(-h))) / (2 * h),
          (states(m=1.2 + h) - states(m=1.2 - h)) / (2 * h),
          (states(n=0.7 + h) - states(n=0.7 - h)) / (2 * h),
          (states(a0=1.0 + h) - states(a0=1.0 - h)) / (2 * h)]
    np.testing.assert_allclose(s, np.stack(fd, axis=-1), rtol=1e-5, atol=1e-8)


def test_stiff_system_is_detected_and_handed_to_the_implicit_method():
    mech = load_mechanism(MODELS / "pre_equilibrium.toml")
    values = [1e5, 1e4, 0.1]
    y0 = [1.0, 0.5, 0.0, 0.0]
    _, _, status, _ = run(mech, y0, values, np.linspace(0, 60, 7))
    assert status[0] == STIFF
    k, orders = mech.rate_arrays(np.array(values))
    sol = integrate_flat(mech.stoichiometry, mech.present, np.array([y0]), k, orders,
                         np.linspace(0, 60, 7), np.array([0, 7]))
    assert sol.ok[0] and sol.n_stiff == 1 and sol.n_compiled == 0 and sol.n_implicit == 0
    ref = integrate_flat(mech.stoichiometry, mech.present, np.array([y0]), k, orders,
                         np.linspace(0, 60, 7), np.array([0, 7]), method="Radau")
    np.testing.assert_allclose(sol.conc, ref.conc, rtol=1e-6, atol=1e-10)


def test_many_systems_each_keep_their_own_steps():
    # Systems with very different speeds in one call give the same answers as alone.
    mech = load_mechanism(MODELS / "first_order.toml")
    ks = np.array([[1e-3], [1.0], [30.0]])
    y0 = np.array([[1.0, 0.0]] * 3)
    k, orders = mech.rate_arrays(ks)
    t = np.linspace(0, 10, 11)
    y, _, status, _ = integrate_batch(mech.stoichiometry, mech.present, y0, k, orders,
                                      np.tile(t, 3), np.array([0, 11, 22, 33]), rtol=1e-10,
                                      atol=np.full(3, 1e-13), eps=np.full(3, 1e-9))
    assert (status == OK).all()
    # [Atkins] first order: A = A0 exp(-k t)
    np.testing.assert_allclose(y[:, 0], np.exp(-np.repeat(ks[:, 0], 11) * np.tile(t, 3)),
                               rtol=1e-7, atol=1e-12)


def test_rosenbrock_first_order_and_convergence_order():
    # [Atkins] first order A = A0 exp(-k t); the Rosenbrock pair is of order 4
    # (Hairer & Wanner, Solving ODEs II, IV.7): 100x tighter tolerance costs
    # about 100^(1/4) ~ 3x more steps.
    mech = load_mechanism(MODELS / "first_order.toml")
    k, orders = mech.rate_arrays(np.array([1.0]))
    calls = []
    for rtol in (1e-6, 1e-8):
        y, _, status, n_rhs = integrate_stiff(mech.stoichiometry, mech.present, [1.0, 0.0], k[0],
                                              orders[0], np.array([0.0, 5.0]), rtol=rtol,
                                              atol=1e-14, eps=1e-9)
        assert status == OK
        assert y[1, 0] == pytest.approx(math.exp(-5.0), rel=100 * rtol)
        calls.append(n_rhs)
    assert 2.0 < calls[1] / calls[0] < 5.0


def test_rosenbrock_half_order_runs_out():
    # [Laidler] n = 0.5, A0 = 1, k = 0.1: A = (1 - 0.05 t)^2 until t_end = 20 s, then 0
    mech = load_mechanism(MODELS / "power_law_one.toml")
    k, orders = mech.rate_arrays(np.array([0.1, 0.5]))
    t = np.array([0.0, 5.0, 10.0, 19.0, 25.0, 60.0])
    y, s, status, _ = integrate_stiff(mech.stoichiometry, mech.present, [1.0, 0.0], k[0],
                                      orders[0], t, rtol=1e-9, atol=1e-13, eps=1e-9,
                                      sens=(np.array([KIND_LOG_K]), np.array([0]), np.array([0])))
    assert status == OK
    np.testing.assert_allclose(y[:, 0], np.where(t < 20, (1 - 0.05 * t) ** 2, 0.0), atol=1e-8)
    # d[A]/d ln k = -2 (1 - 0.05 t)(0.05 t) before t_end, 0 after (differentiating the closed form)
    np.testing.assert_allclose(s[:, 0, 0], np.where(t < 20, -2 * (1 - 0.05 * t) * 0.05 * t, 0.0),
                               atol=1e-6)


@pytest.mark.parametrize("name, values", [("power_law_two.toml", [0.3, 1.2, 0.7]),
                                          ("consecutive.toml", [0.5, 0.2]),
                                          ("pre_equilibrium.toml", [2.0, 1.0, 0.3]),
                                          ("catalysed.toml", [0.5, 1.0, 0.5, 1.0])])
def test_extents_of_reaction_give_the_same_states_and_sensitivities(name, values):
    # Integrating one extent per step (c = c0 + N z) must give what integrating the
    # concentrations themselves gives: the same equations in other coordinates.
    mech = load_mechanism(MODELS / name)
    assert mech.extents is not None
    k, orders = mech.rate_arrays(np.array(values, float))
    y0 = np.linspace(1.0, 0.4, mech.n_species)[None]
    n_dir = len(mech.directions)
    coef = mech._order_coef
    entries = [(j, s) for j in range(n_dir) for s in range(mech.n_species) if coef[j, s].any()]
    sens = (np.array([KIND_LOG_K] * n_dir + [KIND_ORDER] * len(entries) + [KIND_INITIAL] * 2),
            np.array(list(range(n_dir)) + [j for j, _ in entries] + [0, 0]),
            np.array([0] * n_dir + [s for _, s in entries] + [0, 1]))
    t = np.linspace(0, 8, 9)
    common = dict(rtol=1e-10, atol=np.array([1e-14]), eps=np.array([1e-9]), sens=sens)
    y1, s1, st1, _ = integrate_batch(mech.stoichiometry, mech.present, y0, k, orders, t,
                                     np.array([0, 9]), **common)
    y2, s2, st2, _ = integrate_batch(mech.stoichiometry, mech.present, y0, k, orders, t,
                                     np.array([0, 9]), basis=mech.extents, **common)
    assert st1[0] == OK and st2[0] == OK
    np.testing.assert_allclose(y2, y1, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(s2, s1, rtol=1e-6, atol=1e-8)
