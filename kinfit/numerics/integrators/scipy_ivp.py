"""Integrating many systems of rate equations with :func:`scipy.integrate.solve_ivp`.

Many systems (one run under many parameter sets) are stacked into one state
vector and integrated in a single :func:`scipy.integrate.solve_ivp` call. By
default the method is LSODA, which switches between a non-stiff (Adams) and a
stiff (BDF) method as needed, with the analytic Jacobian passed in banded
form (the stacked Jacobian is block-diagonal). LSODA measures the error in
the weighted max-norm, so stacking many systems does not loosen the accuracy
of any one of them. Stacking also means every system sees the same step
sequence, which makes finite differences between parameter sets smooth.
Different runs are integrated in separate calls, because their fast moments
(a reactant running out) fall at different times and a stacked integrator
would have to resolve all of them for every system.

This is the fallback behind the compiled methods (:mod:`.dopri`,
:mod:`.rosenbrock`) and the reference they are tested against. The right-hand
side and Jacobian are the numpy rate law of :mod:`kinfit.numerics.rate_system`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.integrators import (
    ATOL,
    KIND_LOG_K,
    KIND_ORDER,
    MAX_RHS_CALLS,
    RTOL,
)
from kinfit.numerics.rate_system import jacobian, rhs

__all__ = ["METHODS", "Integration", "integrate", "integrate_one"]

METHODS = ("LSODA", "BDF", "Radau", "RK45", "DOP853")    # solve_ivp methods kinfit offers


@dataclass(frozen=True)
class Integration:
    """Raw result of :func:`integrate`.

    Attributes
    ----------
    conc : ndarray [n_sys, n_times, n_species]
    ok : ndarray [n_sys] of bool
        False for a system whose integration failed (its rows are NaN).
    message : str
    n_rhs : int
        Right-hand-side evaluations used (all systems together).
    method : str
    """

    conc: np.ndarray
    ok: np.ndarray
    message: str
    n_rhs: int
    method: str


class _WorkLimit(Exception):
    pass


def _solve(stoich, present, conc0, k, orders, t_eval, method, rtol, atol, max_rhs):
    n_sys, n_species = conc0.shape
    n = n_sys * n_species
    scale = np.maximum(conc0.max(axis=1), 1e-300)
    atol_vec = np.repeat(atol * scale, n_species)
    eps = 1e-9 * scale
    present = np.broadcast_to(present, orders.shape)
    calls = [0]

    def fun(t, y):
        calls[0] += 1
        if calls[0] > max_rhs:
            raise _WorkLimit
        return rhs(y.reshape(n_sys, n_species), k, orders, present, eps, stoich).ravel()

    options = {}
    if method == "LSODA":
        bw = n_species - 1
        p, q = np.meshgrid(np.arange(n_species), np.arange(n_species), indexing="ij")
        rows = np.broadcast_to(bw + p - q, (n_sys, n_species, n_species))
        cols = (np.arange(n_sys)[:, None, None] * n_species + q[None]).astype(int)

        def jac(t, y):
            blocks = jacobian(y.reshape(n_sys, n_species), k, orders, present, eps, stoich)
            band = np.zeros((2 * bw + 1, n))
            band[rows, cols] = blocks
            return band

        options = dict(jac=jac, lband=bw, uband=bw)
    elif method in ("BDF", "Radau"):
        from scipy.sparse import block_diag

        def jac(t, y):
            blocks = jacobian(y.reshape(n_sys, n_species), k, orders, present, eps, stoich)
            return block_diag(list(blocks), format="csc")

        options = dict(jac=jac)

    from scipy.integrate import solve_ivp

    t_end = float(t_eval[-1])
    if t_end <= 0:
        conc = np.repeat(conc0[:, None, :], t_eval.size, axis=1)
        return conc, True, "nothing to integrate", 0
    try:
        with np.errstate(all="ignore"):
            sol = solve_ivp(fun, (0.0, t_end), conc0.ravel(), method=method, t_eval=t_eval,
                            rtol=rtol, atol=atol_vec, **options)
    except _WorkLimit:
        return None, False, (f"stopped after {max_rhs} right-hand-side evaluations (the "
                             f"equations may be extremely stiff for these parameters)"), calls[0]
    except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        return None, False, f"integration failed: {exc}", calls[0]
    if sol.status != 0 or sol.y.shape[1] != t_eval.size:
        return None, False, sol.message, calls[0]
    conc = sol.y.reshape(n_sys, n_species, -1).transpose(0, 2, 1)
    return conc, bool(np.isfinite(conc).all()), sol.message, calls[0]


def integrate(stoichiometry, present, conc0, k, orders, t_eval, *, method="LSODA", rtol=RTOL,
              atol=ATOL, max_rhs=MAX_RHS_CALLS):
    """Integrate many independent systems of rate equations from t = 0.

    Parameters
    ----------
    stoichiometry : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
        Species written in each direction's rate law (``RateSystem.present``).
    conc0 : ndarray [n_sys, n_species]
        Starting concentrations of each system.
    k : ndarray [n_sys, n_directions]
        Rate constants (with factors) of each direction, per system.
    orders : ndarray [n_sys, n_directions, n_species]
    t_eval : ndarray [n_times]
        Sorted, non-negative times at which to report concentrations.
    method : {"LSODA", "BDF", "Radau", "RK45", "DOP853"}
    rtol, atol : float
        Relative tolerance, and absolute tolerance relative to each system's
        largest starting concentration.
    max_rhs : int
        Bound on right-hand-side evaluations; beyond it the systems are
        marked failed rather than integrated forever.

    Returns
    -------
    Integration
        A system that fails is retried alone, so one bad parameter set does
        not spoil the others; the failed ones come back as NaN with
        ``ok = False``.
    """
    if method not in METHODS:
        raise KinfitError(f"unknown integrator {method!r}; choose one of "
                          f"{', '.join(METHODS)}")
    conc0 = np.asarray(conc0, dtype=float)
    t_eval = np.asarray(t_eval, dtype=float)
    n_sys, n_species = conc0.shape
    conc, ok, message, n_rhs = _solve(stoichiometry, present, conc0, k, orders, t_eval, method,
                                      rtol, atol, max_rhs)
    if ok:
        return Integration(conc, np.ones(n_sys, dtype=bool), message, n_rhs, method)
    out = np.full((n_sys, t_eval.size, n_species), np.nan)
    good = np.zeros(n_sys, dtype=bool)
    if n_sys > 1:
        for i in range(n_sys):
            c, ok_i, msg_i, calls = _solve(stoichiometry, present, conc0[i:i + 1], k[i:i + 1],
                                           orders[i:i + 1], t_eval, method, rtol, atol, max_rhs)
            n_rhs += calls
            if ok_i:
                out[i], good[i] = c[0], True
            else:
                message = msg_i
    return Integration(out, good, message, n_rhs, method)


def integrate_one(stoich, present, c0, k, orders, t_out, method, rtol, atol, max_rhs, sens):
    """One system with solve_ivp; sensitivities by central differences in one stacked call.

    Parameters
    ----------
    stoich : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
    c0 : ndarray [n_species]
    k : ndarray [n_directions]
    orders : ndarray [n_directions, n_species]
    t_out : ndarray [n_out]
        Output times, non-decreasing; times at or below zero give `c0`.
    method : str
        One of :data:`METHODS`.
    rtol, atol, max_rhs : as in :func:`integrate`
    sens : tuple (kind, direction, species) of int arrays or None
        Kernel parameters (:mod:`kinfit.numerics.integrators`); each is
        displaced by ±1e-5 (ln k, an exponent) or ±1e-5 of the largest
        starting concentration, and all copies are integrated together.

    Returns
    -------
    conc : ndarray [n_out, n_species] or None
        ``None`` when the integration failed.
    sens : ndarray [n_out, n_species, n_sens] or None
    n_rhs : int
    message : str
    """
    grid, inverse = np.unique(np.clip(t_out, 0.0, None), return_inverse=True)
    n_sens = 0 if sens is None else len(sens[0])
    if n_sens == 0:
        res = integrate(stoich, present, c0[None], k[None], orders[None], grid, method=method,
                        rtol=rtol, atol=atol, max_rhs=max_rhs)
        if not res.ok[0]:
            return None, None, res.n_rhs, res.message
        return res.conc[0][inverse], None, res.n_rhs, res.message
    kind, jj, ss = sens
    scale = max(c0.max(), 1e-300)
    c0s = np.repeat(c0[None], 2 * n_sens + 1, axis=0)
    ks = np.repeat(k[None], 2 * n_sens + 1, axis=0)
    es = np.repeat(orders[None], 2 * n_sens + 1, axis=0)
    steps = np.empty(n_sens)
    for p in range(n_sens):
        for sign, row in ((1.0, 1 + p), (-1.0, 1 + n_sens + p)):
            if kind[p] == KIND_LOG_K:
                h = 1e-5
                ks[row, jj[p]] *= math.exp(sign * h)
            elif kind[p] == KIND_ORDER:
                h = 1e-5
                es[row, jj[p], ss[p]] += sign * h
            else:
                h = 1e-5 * scale
                c0s[row, ss[p]] += sign * h
        steps[p] = h
    res = integrate(stoich, present, c0s, ks, es, grid, method=method, rtol=rtol, atol=atol,
                    max_rhs=max_rhs)
    if not res.ok.all():
        return None, None, res.n_rhs, res.message
    conc = res.conc
    sens_out = (conc[1:1 + n_sens] - conc[1 + n_sens:]) / (2 * steps[:, None, None])
    return conc[0][inverse], sens_out.transpose(1, 2, 0)[inverse], res.n_rhs, res.message
