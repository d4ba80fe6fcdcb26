"""The compiled Rosenbrock 4(3) integrator against closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import MODELS

from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.integrators import KIND_LOG_K, OK
from kinfit.numerics.integrators.rosenbrock import integrate_stiff
from kinfit.numerics.rate_system import compile_mechanism


def test_rosenbrock_first_order_and_convergence_order():
    # [Atkins] first order A = A0 exp(-k t); the Rosenbrock pair is of order 4
    # (Hairer & Wanner, Solving ODEs II, IV.7): 100x tighter tolerance costs
    # about 100^(1/4) ~ 3x more steps.
    system = compile_mechanism(load_mechanism(MODELS / "first_order.toml"))
    k, orders = system.rate_arrays(np.array([1.0]))
    calls = []
    for rtol in (1e-6, 1e-8):
        y, _, status, n_rhs = integrate_stiff(system.stoichiometry, system.present, [1.0, 0.0],
                                              k[0], orders[0], np.array([0.0, 5.0]), rtol=rtol,
                                              atol=1e-14, eps=1e-9)
        assert status == OK
        assert y[1, 0] == pytest.approx(math.exp(-5.0), rel=100 * rtol)
        calls.append(n_rhs)
    assert 2.0 < calls[1] / calls[0] < 5.0


def test_rosenbrock_half_order_runs_out():
    # [Laidler] n = 0.5, A0 = 1, k = 0.1: A = (1 - 0.05 t)^2 until t_end = 20 s, then 0
    system = compile_mechanism(load_mechanism(MODELS / "power_law_one.toml"))
    k, orders = system.rate_arrays(np.array([0.1, 0.5]))
    t = np.array([0.0, 5.0, 10.0, 19.0, 25.0, 60.0])
    y, s, status, _ = integrate_stiff(system.stoichiometry, system.present, [1.0, 0.0], k[0],
                                      orders[0], t, rtol=1e-9, atol=1e-13, eps=1e-9,
                                      sens=(np.array([KIND_LOG_K]), np.array([0]), np.array([0])))
    assert status == OK
    np.testing.assert_allclose(y[:, 0], np.where(t < 20, (1 - 0.05 * t) ** 2, 0.0), atol=1e-8)
    # d[A]/d ln k = -2 (1 - 0.05 t)(0.05 t) before t_end, 0 after (differentiating the closed form)
    np.testing.assert_allclose(s[:, 0, 0], np.where(t < 20, -2 * (1 - 0.05 * t) * 0.05 * t, 0.0),
                               atol=1e-6)
