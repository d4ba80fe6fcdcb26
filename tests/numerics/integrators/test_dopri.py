"""The compiled Dormand–Prince integrator against closed forms and central differences."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import MODELS

from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.integrators import KIND_INITIAL, KIND_LOG_K, KIND_ORDER, OK, STIFF
from kinfit.numerics.integrators.dopri import integrate_batch
from kinfit.numerics.rate_system import compile_mechanism


def run(system, y0, values, t, sens=None, rtol=1e-10):
    k, orders = system.rate_arrays(np.asarray(values, float))
    y0 = np.atleast_2d(np.asarray(y0, float))
    scale = y0.max(axis=1)
    return integrate_batch(system.stoichiometry, system.present, y0, k, orders,
                           np.asarray(t, float), np.array([0, len(t)]), rtol=rtol,
                           atol=1e-13 * scale, eps=1e-9 * scale, sens=sens)


def test_a_plus_b_closed_form():
    # [Laidler; Espenson] A + B -> P: A(5 s) = 0.435266598393584 for A0 = 1, B0 = 2, k = 0.1
    system = compile_mechanism(load_mechanism(MODELS / "second_order_ab.toml"))
    y, _, status, _ = run(system, [1.0, 2.0, 0.0], [0.1], [0.0, 5.0])
    assert status[0] == OK
    assert y[1, 0] == pytest.approx(0.435266598393584, rel=1e-8)


def test_sensitivities_match_central_differences():
    # Forward sensitivities against central differences of the states
    # (common practice for checking derivatives).
    system = compile_mechanism(mechanism_from_text("""
        [[steps]]
        reaction = "A + B -> P"
        rate = "k * [A]^m * [B]^n"
        [parameters]
        k = 0.3
        m = 1.2
        n = 0.7
    """))
    sens = (np.array([KIND_LOG_K, KIND_ORDER, KIND_ORDER, KIND_INITIAL]),
            np.array([0, 0, 0, 0]), np.array([0, 0, 1, 0]))
    t = [0.0, 1.0, 4.0, 10.0]
    y, s, status, _ = run(system, [1.0, 1.5, 0.0], [0.3, 1.2, 0.7], t, sens=sens, rtol=1e-11)
    assert status[0] == OK

    def states(k=0.3, m=1.2, n=0.7, a0=1.0):
        return run(system, [a0, 1.5, 0.0], [k, m, n], t, rtol=1e-12)[0]

    h = 1e-5
    fd = [(states(k=0.3 * math.exp(h)) - states(k=0.3 * math.exp(-h))) / (2 * h),
          (states(m=1.2 + h) - states(m=1.2 - h)) / (2 * h),
          (states(n=0.7 + h) - states(n=0.7 - h)) / (2 * h),
          (states(a0=1.0 + h) - states(a0=1.0 - h)) / (2 * h)]
    np.testing.assert_allclose(s, np.stack(fd, axis=-1), rtol=1e-5, atol=1e-8)


def test_stiff_system_is_reported_stiff():
    # A fast pre-equilibrium (k1 = 1e5, k-1 = 1e4) before a slow step: the explicit
    # method's stiffness test (Hairer's DOPRI5) hands it over rather than crawl.
    system = compile_mechanism(load_mechanism(MODELS / "pre_equilibrium.toml"))
    _, _, status, _ = run(system, [1.0, 0.5, 0.0, 0.0], [1e5, 1e4, 0.1], np.linspace(0, 60, 7))
    assert status[0] == STIFF


def test_many_systems_each_keep_their_own_steps():
    # Systems with very different speeds in one call give the same answers as alone.
    system = compile_mechanism(load_mechanism(MODELS / "first_order.toml"))
    ks = np.array([[1e-3], [1.0], [30.0]])
    y0 = np.array([[1.0, 0.0]] * 3)
    k, orders = system.rate_arrays(ks)
    t = np.linspace(0, 10, 11)
    y, _, status, _ = integrate_batch(system.stoichiometry, system.present, y0, k, orders,
                                      np.tile(t, 3), np.array([0, 11, 22, 33]), rtol=1e-10,
                                      atol=np.full(3, 1e-13), eps=np.full(3, 1e-9))
    assert (status == OK).all()
    # [Atkins] first order: A = A0 exp(-k t)
    np.testing.assert_allclose(y[:, 0], np.exp(-np.repeat(ks[:, 0], 11) * np.tile(t, 3)),
                               rtol=1e-7, atol=1e-12)


@pytest.mark.parametrize("name, values", [("power_law_two.toml", [0.3, 1.2, 0.7]),
                                          ("consecutive.toml", [0.5, 0.2]),
                                          ("pre_equilibrium.toml", [2.0, 1.0, 0.3]),
                                          ("catalysed.toml", [0.5, 1.0, 0.5, 1.0])])
def test_extents_of_reaction_give_the_same_states_and_sensitivities(name, values):
    # Integrating one extent per step (c = c0 + N z) must give what integrating the
    # concentrations themselves gives: the same equations in other coordinates.
    system = compile_mechanism(load_mechanism(MODELS / name))
    assert system.extents is not None
    k, orders = system.rate_arrays(np.array(values, float))
    y0 = np.linspace(1.0, 0.4, system.n_species)[None]
    n_dir = system.n_directions
    entries = system.order_entries
    sens = (np.array([KIND_LOG_K] * n_dir + [KIND_ORDER] * len(entries) + [KIND_INITIAL] * 2),
            np.array(list(range(n_dir)) + [j for j, _ in entries] + [0, 0]),
            np.array([0] * n_dir + [s for _, s in entries] + [0, 1]))
    t = np.linspace(0, 8, 9)
    common = dict(rtol=1e-10, atol=np.array([1e-14]), eps=np.array([1e-9]), sens=sens)
    y1, s1, st1, _ = integrate_batch(system.stoichiometry, system.present, y0, k, orders, t,
                                     np.array([0, 9]), **common)
    y2, s2, st2, _ = integrate_batch(system.stoichiometry, system.present, y0, k, orders, t,
                                     np.array([0, 9]), basis=system.extents, **common)
    assert st1[0] == OK and st2[0] == OK
    np.testing.assert_allclose(y2, y1, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(s2, s1, rtol=1e-6, atol=1e-8)
