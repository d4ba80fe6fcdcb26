"""Integrating stacked systems with scipy's solve_ivp (the fallback and reference path)."""

from __future__ import annotations

import numpy as np

from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.integrators.scipy_ivp import integrate
from kinfit.numerics.rate_system import compile_mechanism


def one_step(reaction, rate, **params):
    lines = [f'[[steps]]\nreaction = "{reaction}"\nrate = "{rate}"\n[parameters]']
    lines += [f"{k} = {v!r}" for k, v in params.items()]
    return compile_mechanism(mechanism_from_text("\n".join(lines) + "\n"))


def test_batched_integration_equals_one_at_a_time():
    system = one_step("A + B -> P", "k * [A]^m * [B]", k=0.3, m=1.0)
    values = np.array([[0.3, 1.0], [0.1, 0.5], [1.0, 2.0]])
    k, orders = system.rate_arrays(values)
    conc0 = np.array([[1.0, 2.0, 0.0], [0.5, 1.0, 0.0], [1.0, 1.5, 0.0]])
    t = np.linspace(0, 20, 11)
    together = integrate(system.stoichiometry, system.present, conc0, k, orders, t)
    for i in range(3):
        alone = integrate(system.stoichiometry, system.present, conc0[i:i + 1], k[i:i + 1],
                          orders[i:i + 1], t)
        np.testing.assert_allclose(together.conc[i], alone.conc[0], rtol=1e-6, atol=1e-12)


def test_failed_system_does_not_spoil_others():
    # A work bound of a few evaluations makes the hard system fail; the easy one
    # integrated alongside it must still come back.
    system = one_step("A -> P", "k * [A]", k=1.0)
    k, orders = system.rate_arrays(np.array([[1e-3], [1e6]]))
    out = integrate(system.stoichiometry, system.present, np.array([[1.0, 0.0], [1.0, 0.0]]),
                    k, orders, np.linspace(0, 100, 5), max_rhs=300)
    assert out.ok.tolist() == [True, False]
    assert np.isfinite(out.conc[0]).all() and np.isnan(out.conc[1]).all()
