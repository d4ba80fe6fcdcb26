"""Integrating the rate equations for many runs and parameter sets at once.

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

Tolerances default to rtol = 1e-9 and atol = 1e-12 times each system's
largest starting concentration: far below any measurement noise (common
practice), and tight enough to reproduce closed-form integrated rate laws to
better than 1e-6 relative (tested).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.numerics.compiled import AVAILABLE, BLOWUP, FAILED, OK, STIFF, integrate_batch, integrate_stiff
from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import jacobian, rhs

__all__ = ["Trajectory", "Integration", "FlatSolution", "integrate", "integrate_flat",
           "simulate", "simulate_runs", "initial_array", "RTOL", "ATOL", "MAX_RHS_CALLS"]

RTOL = 1e-8
ATOL = 1e-12
MAX_RHS_CALLS = 50_000
_METHODS = ("auto", "compiled", "LSODA", "BDF", "Radau", "RK45", "DOP853")
_SOLVE_IVP = ("LSODA", "BDF", "Radau", "RK45", "DOP853")


@dataclass(frozen=True)
class Trajectory:
    """Concentrations of every species over time for one run.

    Attributes
    ----------
    times : ndarray [n_times]
    conc : ndarray [n_times, n_species]
    species : tuple of str
    success : bool
    message : str
    method : str
        The integrator that ran.
    """

    times: np.ndarray
    conc: np.ndarray
    species: tuple
    success: bool = True
    message: str = ""
    method: str = "auto"

    def __getitem__(self, species):
        """Concentration of one species over time [n_times]."""
        try:
            return self.conc[:, self.species.index(species)]
        except ValueError:
            raise KinfitError(f"no species {species!r} in this trajectory; it has "
                              f"{', '.join(self.species)}") from None


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
        Species written in each direction's rate law (``Mechanism.present``).
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
    if method not in _SOLVE_IVP:
        raise KinfitError(f"unknown integrator {method!r}; choose one of "
                          f"{', '.join(_SOLVE_IVP)}")
    conc0 = np.asarray(conc0, dtype=float)
    t_eval = np.asarray(t_eval, dtype=float)
    n_sys, n_species = conc0.shape
    conc, ok, message, n_rhs = _solve(stoichiometry, present, conc0, k, orders, t_eval, method, rtol,
                                      atol, max_rhs)
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


def initial_array(mechanism, initial):
    """Starting concentrations as a row [n_species] from a mapping species -> value."""
    conc0 = np.zeros(mechanism.n_species)
    for name, value in initial.items():
        if name not in mechanism.species:
            raise KinfitError(f"the model '{mechanism.name}' has no species {name!r}; its "
                              f"species are {', '.join(mechanism.species)}")
        conc0[mechanism.species.index(name)] = float(value)
    return conc0


@dataclass(frozen=True)
class FlatSolution:
    """Result of :func:`integrate_flat`.

    Attributes
    ----------
    conc : ndarray [n_out_total, n_species]
        Concentrations at every requested output, systems concatenated.
    sens : ndarray [n_out_total, n_species, n_sens] or None
        Forward sensitivities ∂[X]/∂q with respect to the kernel parameters.
    ok : ndarray [n_sys] of bool
    n_rhs : int
        Right-hand-side evaluations.
    n_compiled, n_stiff, n_implicit : int
        Systems finished by the compiled explicit integrator, by the compiled
        Rosenbrock method (stiff), and by solve_ivp.
    message : str
    """

    conc: np.ndarray
    sens: np.ndarray | None
    ok: np.ndarray
    n_rhs: int
    n_compiled: int
    n_stiff: int
    n_implicit: int
    message: str


def _scales(conc0):
    scale = np.maximum(conc0.max(axis=1), 1e-300)
    return scale


def _implicit_one(stoich, present, c0, k, orders, t_out, method, rtol, atol, max_rhs, sens):
    """One system with solve_ivp; sensitivities by central differences in one stacked call."""
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
            if kind[p] == 0:
                h = 1e-5
                ks[row, jj[p]] *= math.exp(sign * h)
            elif kind[p] == 1:
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


def integrate_flat(stoichiometry, present, conc0, k, orders, t_out, out_start, *,
                   method="auto", rtol=RTOL, atol=ATOL, max_rhs=MAX_RHS_CALLS, sens=None,
                   fallback=True, extents=None):
    """Integrate many systems, each with its own output times, in one call.

    Parameters
    ----------
    stoichiometry : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
    conc0 : ndarray [n_sys, n_species]
    k : ndarray [n_sys, n_directions]
    orders : ndarray [n_sys, n_directions, n_species]
    t_out : ndarray [n_out_total]
        Output times of all systems concatenated (non-decreasing within each
        system; times at or below zero give the starting concentrations).
    out_start : ndarray [n_sys + 1] of int
        System i's outputs are ``t_out[out_start[i]:out_start[i + 1]]``.
    method : {"auto", "compiled", "LSODA", "BDF", "Radau", "RK45", "DOP853"}
        "auto" runs the compiled Dormand–Prince 5(4) integrator and hands the
        systems it finds stiff to the compiled Rosenbrock 4(3) method (and
        those to LSODA if it too gives up); "compiled" does not hand them
        over (they fail); the others use :func:`scipy.integrate.solve_ivp`
        only.
    rtol, atol : float
        As in :func:`integrate`.
    sens : tuple (kind, direction, species) of int arrays, optional
        Kernel parameters for forward sensitivities (see
        :mod:`kinfit.compiled`).
    fallback : bool
        With "auto", whether stiff systems are handed to LSODA (a screen of
        many rough candidates may prefer to drop them).
    extents : tuple, optional
        ``Mechanism.extents``: lets the compiled integrator work in extents of
        reaction (fewer equations when there are fewer steps than species).

    Returns
    -------
    FlatSolution
    """
    if method not in _METHODS:
        raise KinfitError(f"unknown integrator {method!r}; choose one of {', '.join(_METHODS)}")
    conc0 = np.asarray(conc0, dtype=float)
    n_sys, n_species = conc0.shape
    n_sens = 0 if sens is None else len(sens[0])
    scale = _scales(conc0)
    compiled_ok = method in ("auto", "compiled") and AVAILABLE
    if compiled_ok:
        conc, sens_out, status, n_rhs = integrate_batch(
            stoichiometry, present, conc0, k, orders, t_out, out_start, rtol=rtol,
            atol=atol * scale, eps=1e-9 * scale, sens=sens,
            max_steps=max(1000, max_rhs // 6), basis=extents)
        # systems found stiff go to the implicit methods; a system whose steps collapsed
        # or whose concentrations diverge has a singularity no method will pass
        todo = np.flatnonzero(status == STIFF) if (method == "auto" and fallback) else []
        ok = status == OK
        implicit_method = "LSODA"
    else:
        conc = np.full((t_out.size, n_species), np.nan)
        sens_out = np.full((t_out.size, n_species, n_sens), np.nan)
        ok = np.zeros(n_sys, dtype=bool)
        n_rhs = 0
        todo = range(n_sys)
        implicit_method = "LSODA" if method in ("auto", "compiled") else method
    message = "ok"
    n_implicit = n_stiff = 0
    for i in todo:
        lo, hi = out_start[i], out_start[i + 1]
        c = None
        if compiled_ok:      # the compiled Rosenbrock method first, LSODA as a last resort
            c, s_i, status, calls = integrate_stiff(
                stoichiometry, present, conc0[i], k[i], orders[i], t_out[lo:hi], rtol=rtol,
                atol=atol * scale[i], eps=1e-9 * scale[i], sens=sens,
                max_steps=max(1000, max_rhs // 3))
            n_rhs += calls
            if status in (BLOWUP, FAILED):
                ok[i], message = False, ("the rate equations diverge for these parameters"
                                         if status == BLOWUP else
                                         "the integration failed (steps collapsed)")
                conc[lo:hi] = np.nan
                continue
            if status != OK:
                c = None
            else:
                n_stiff += 1
        if c is None:
            c, s_i, calls, msg = _implicit_one(stoichiometry, present, conc0[i], k[i],
                                               orders[i], t_out[lo:hi], implicit_method, rtol,
                                               atol, max_rhs, sens)
            n_rhs += calls
            n_implicit += 1
            if c is None:
                ok[i] = False
                message = msg
                conc[lo:hi] = np.nan
                continue
        ok[i] = True
        conc[lo:hi] = c
        if s_i is not None:
            sens_out[lo:hi] = s_i
    n_compiled = int(ok.sum()) - n_implicit - n_stiff if compiled_ok else 0
    if not ok.all() and message == "ok":
        message = "the explicit integrator could not finish some systems (stiff)"
    return FlatSolution(conc, sens_out if n_sens else None, ok, n_rhs, max(n_compiled, 0),
                        n_stiff, n_implicit, message)


def simulate_runs(mechanism, rates_by_run, conc0, times, *, method="auto", rtol=RTOL,
                  atol=ATOL, max_rhs=MAX_RHS_CALLS):
    """Concentrations of every run under every parameter set.

    Parameters
    ----------
    mechanism : Mechanism
        Supplies the stoichiometry and which species gate each direction.
    rates_by_run : sequence of (k, orders), one per run
        k [n_sets, n_directions] and orders [n_sets, n_directions, n_species]
        for the run (see :meth:`Mechanism.rate_arrays`); runs at different
        temperatures may have different rate constants.
    conc0 : ndarray [n_sets, n_runs, n_species]
        Starting concentrations.
    times : sequence of ndarray, one per run, each [n_sets, n_times_run]
        Model times at which each run is wanted (data times plus any time
        offset); times below zero give the starting concentrations.
    method : str
        See :func:`integrate_flat`.

    Returns
    -------
    conc : list of ndarray [n_sets, n_times_run, n_species]
    ok : ndarray [n_sets] of bool
        False where any run of that set failed to integrate.
    info : FlatSolution
        Messages and work counts (``conc`` holds all outputs, flat).
    """
    n_sets, n_runs = conc0.shape[0], conc0.shape[1]
    times = [np.broadcast_to(np.asarray(t, float), (n_sets, np.shape(t)[-1])) for t in times]
    sizes = [t.shape[1] for t in times]
    # systems ordered set-major: system s * n_runs + r is run r under set s
    t_out = np.concatenate([times[r][s] for s in range(n_sets) for r in range(n_runs)])
    out_start = np.concatenate([[0], np.cumsum([sizes[r] for s in range(n_sets)
                                                for r in range(n_runs)])])
    k = np.stack([rates_by_run[r][0] for r in range(n_runs)], axis=1).reshape(
        n_sets * n_runs, -1)
    orders = np.stack([rates_by_run[r][1] for r in range(n_runs)], axis=1).reshape(
        n_sets * n_runs, *rates_by_run[0][1].shape[1:])
    sol = integrate_flat(mechanism.stoichiometry, mechanism.present,
                         conc0.reshape(n_sets * n_runs, -1), k, orders, t_out, out_start,
                         method=method, rtol=rtol, atol=atol, max_rhs=max_rhs,
                         extents=mechanism.extents)
    conc = []
    for r in range(n_runs):
        rows = [sol.conc[out_start[s * n_runs + r]:out_start[s * n_runs + r + 1]]
                for s in range(n_sets)]
        conc.append(np.stack(rows))
    ok = sol.ok.reshape(n_sets, n_runs).all(axis=1)
    return conc, ok, sol


def simulate(mechanism, initial, values=None, times=None, *, method="auto", rtol=RTOL,
             atol=ATOL):
    """Integrate the rate equations for one set of starting concentrations.

    Parameters
    ----------
    mechanism : Mechanism
    initial : Run or mapping of str to float
        A run of an experiment (its known initial concentrations; fitted ones
        at their starting values) or starting concentrations by species.
    values : mapping of str to float, optional
        Parameter values; the model file's values for any not given.
    times : array_like [n_times], optional
        Times to report; by default the run's data times (for a Run) or 201
        points over 0..100 time units.
    method : str
        Integrator (see :func:`integrate_flat`); the default "auto" uses the
        compiled explicit integrator and LSODA where the equations are stiff.

    Returns
    -------
    Trajectory
    """
    if hasattr(initial, "traces"):  # a Run
        start = dict(initial.initial)
        start.update({s: p.value for s, p in initial.fitted_initial.items()})
        if times is None:
            times = np.unique(np.concatenate([t.times for t in initial.traces]))
    else:
        start = dict(initial)
    if times is None:
        times = np.linspace(0.0, 100.0, 201)
    times = np.asarray(times, dtype=float)
    if times.ndim != 1 or times.size == 0 or not np.isfinite(times).all() or \
            (times < 0).any() or (np.diff(times) <= 0).any():
        raise KinfitError("times must be a non-empty, increasing list of non-negative numbers")
    for name, value in start.items():
        if not np.isfinite(value) or value < 0:
            raise KinfitError(f"initial concentration of {name} must be a non-negative "
                              f"number, got {value!r}")
    merged = mechanism.values(values)
    row = np.array([merged[n] for n in mechanism.parameter_names])
    conc0 = initial_array(mechanism, start)
    k, orders = mechanism.rate_arrays(row)
    sol = integrate_flat(mechanism.stoichiometry, mechanism.present, conc0[None], k, orders,
                         times, np.array([0, times.size]), method=method, rtol=rtol, atol=atol,
                         extents=mechanism.extents)
    used = method if method not in ("auto", "compiled") else (
        "LSODA" if sol.n_implicit else "compiled Rosenbrock 4(3)" if sol.n_stiff
        else "compiled Dormand-Prince 5(4)")
    return Trajectory(times, sol.conc, mechanism.species, bool(sol.ok[0]), sol.message, used)
