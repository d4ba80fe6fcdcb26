"""Integrating the rate equations: the front door and the table of methods.

:func:`simulate` integrates one mechanism from one set of starting
concentrations; :func:`simulate_runs` and :func:`integrate_flat` integrate
many systems (runs under parameter sets, each with its own output times) in
one call, for the residual problem. Which integrators run is set by a name
in :data:`METHODS`, as in :func:`scipy.integrate.solve_ivp`:

* ``"auto"`` (the default): the compiled Dormand–Prince 5(4) method
  (:mod:`kinfit.numerics.integrators.dopri`) for all systems at once; those it
  finds stiff go to the compiled Rosenbrock 4(3) method
  (:mod:`~kinfit.numerics.integrators.rosenbrock`), and those to LSODA
  (:mod:`~kinfit.numerics.integrators.scipy_ivp`) if it too gives up;
* ``"compiled"``: the compiled Dormand–Prince method alone (stiff systems
  fail);
* ``"LSODA"``, ``"BDF"``, ``"Radau"``, ``"RK45"``, ``"DOP853"``:
  :func:`scipy.integrate.solve_ivp` alone.

Without numba the compiled methods are not there and ``"auto"`` and
``"compiled"`` use LSODA. :func:`describe_method` says in words which
integrators did the work, for reports.

Tolerances and failures
-----------------------
rtol 1e-8 and atol 1e-12 times each system's largest starting concentration
(:mod:`kinfit.numerics.integrators`): an integration error far below any
measurement noise. A work bound (``max_rhs`` right-hand-side evaluations)
marks a system failed instead of integrating forever; a concentration beyond
``BLOWUP_FACTOR`` (1e6) times the largest start ends that system at once --
the equations diverge for those parameters, and no other method is tried.
Every system has its own status, so one failed system never spoils the
others; the residual problem gives a failed parameter set a large constant
residual so that an optimiser backs away.

Why compiled integrators
------------------------
A per-run Python loop around :func:`scipy.integrate.solve_ivp` costs
milliseconds per evaluation, while the compiled kernel costs microseconds
per run (``tests/benchmarks/bench_speed.py`` measures it); exact forward
sensitivities remove the finite-difference integrations from every
Jacobian; and the compiled Rosenbrock method keeps rough starting points and
stiff mechanisms (fast pre-equilibria, a reactant of fractional order running
out) off the slow path. The price is compilation on first use, once per
machine (numba caches the kernels on disk beside their modules, or under
``NUMBA_CACHE_DIR``): :func:`compiled_cache_ready` tells from numba's cache
index whether that is still to come, and :func:`compile_integrators` does it
up front, so that a command can say so first. The
right-hand side is inlined into the step loops, which roughly halved the run
time when it was measured, at the cost of compile time; run time was chosen
because the cache makes compilation a one-off.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.integrators import (
    ATOL,
    AVAILABLE,
    BLOWUP,
    FAILED,
    MAX_RHS_CALLS,
    OK,
    RTOL,
    STIFF,
    dopri,
    rosenbrock,
    scipy_ivp,
)
from kinfit.numerics.rate_system import compile_mechanism

__all__ = ["Method", "METHODS", "describe_method", "Trajectory", "FlatSolution",
           "integrate_flat", "simulate", "simulate_runs", "initial_array",
           "compiled_cache_ready", "compile_integrators"]


@dataclass(frozen=True)
class Method:
    """One entry of :data:`METHODS`: which integrators a method name runs.

    Attributes
    ----------
    name : str
    compiled : bool
        Starts with the compiled Dormand–Prince method (when numba is there).
    hands_over : bool
        Systems the compiled explicit method finds stiff go on to the compiled
        Rosenbrock method and then to `implicit`; otherwise they fail.
    implicit : str
        The :func:`scipy.integrate.solve_ivp` method of the systems left (all
        of them for a method that is not compiled).
    """

    name: str
    compiled: bool
    hands_over: bool
    implicit: str


METHODS = {m.name: m for m in (
    Method("auto", compiled=True, hands_over=True, implicit="LSODA"),
    Method("compiled", compiled=True, hands_over=False, implicit="LSODA"),
    *(Method(name, compiled=False, hands_over=False, implicit=name)
      for name in scipy_ivp.METHODS))}


def describe_method(method, n_stiff=0, n_implicit=0, *, tally=False):
    """Which integrators did the work, in words.

    Parameters
    ----------
    method : str
        A key of :data:`METHODS`.
    n_stiff, n_implicit : int
        Systems finished by the compiled Rosenbrock method and by solve_ivp
        (:attr:`FlatSolution.n_stiff` and ``n_implicit``, or their sums over
        the integrations of a fit).
    tally : bool
        Name every integrator that ran, with how many run evaluations the
        fallbacks took (for a fit); otherwise name the last one that ran (for
        one trajectory).

    Returns
    -------
    str
        The method's own name for a solve_ivp method; for a compiled one, e.g.
        ``"compiled Dormand-Prince 5(4)"``, or with `tally`
        ``"compiled Dormand-Prince 5(4); compiled Rosenbrock 4(3) for 2 stiff
        run evaluation(s)"``.
    """
    entry = METHODS.get(method)
    if entry is None or not entry.compiled:
        return method
    if not tally:
        return entry.implicit if n_implicit else rosenbrock.NAME if n_stiff else dopri.NAME
    text = dopri.NAME
    if n_stiff:
        text += f"; {rosenbrock.NAME} for {n_stiff} stiff run evaluation(s)"
    if n_implicit:
        text += f"; {entry.implicit} for {n_implicit} run evaluation(s)"
    return text


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
        The integrator that ran, in words (:func:`describe_method`).
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
        Rosenbrock method (stiff), and by solve_ivp (see
        :func:`describe_method`).
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
    method : str
        A key of :data:`METHODS` (see the module notes).
    rtol, atol : float
        Relative tolerance, and absolute tolerance relative to each system's
        largest starting concentration.
    max_rhs : int
        Bound on right-hand-side evaluations of one integration.
    sens : tuple (kind, direction, species) of int arrays, optional
        Kernel parameters for forward sensitivities (see
        :mod:`kinfit.numerics.integrators`).
    fallback : bool
        With "auto", whether stiff systems are handed on to the implicit
        methods (a screen of many rough candidates may prefer to drop them).
    extents : tuple, optional
        ``RateSystem.extents``: lets the compiled integrator work in extents
        of reaction (fewer equations when there are fewer steps than species).

    Returns
    -------
    FlatSolution
    """
    entry = METHODS.get(method)
    if entry is None:
        raise KinfitError(f"unknown integrator {method!r}; choose one of {', '.join(METHODS)}")
    conc0 = np.asarray(conc0, dtype=float)
    n_sys, n_species = conc0.shape
    n_sens = 0 if sens is None else len(sens[0])
    scale = np.maximum(conc0.max(axis=1), 1e-300)
    compiled_ok = entry.compiled and AVAILABLE
    if compiled_ok:
        conc, sens_out, status, n_rhs = dopri.integrate_batch(
            stoichiometry, present, conc0, k, orders, t_out, out_start, rtol=rtol,
            atol=atol * scale, eps=1e-9 * scale, sens=sens,
            max_steps=max(1000, max_rhs // 6), basis=extents)
        # systems found stiff go to the implicit methods; a system whose steps collapsed
        # or whose concentrations diverge has a singularity no method will pass
        todo = np.flatnonzero(status == STIFF) if (entry.hands_over and fallback) else []
        ok = status == OK
    else:
        conc = np.full((t_out.size, n_species), np.nan)
        sens_out = np.full((t_out.size, n_species, n_sens), np.nan)
        ok = np.zeros(n_sys, dtype=bool)
        n_rhs = 0
        todo = range(n_sys)
    message = "ok"
    n_implicit = n_stiff = 0
    for i in todo:
        lo, hi = out_start[i], out_start[i + 1]
        c = None
        if compiled_ok:      # the compiled Rosenbrock method first, LSODA as a last resort
            c, s_i, status, calls = rosenbrock.integrate_stiff(
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
            c, s_i, calls, msg = scipy_ivp.integrate_one(
                stoichiometry, present, conc0[i], k[i], orders[i], t_out[lo:hi], entry.implicit,
                rtol, atol, max_rhs, sens)
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


def simulate_runs(system, rates_by_run, conc0, times, *, method="auto", rtol=RTOL,
                  atol=ATOL, max_rhs=MAX_RHS_CALLS):
    """Concentrations of every run under every parameter set.

    Parameters
    ----------
    system : RateSystem
        Supplies the stoichiometry and which species gate each direction.
    rates_by_run : sequence of (k, orders), one per run
        k [n_sets, n_directions] and orders [n_sets, n_directions, n_species]
        for the run (see :meth:`RateSystem.rate_arrays`); runs at different
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
    sol = integrate_flat(system.stoichiometry, system.present,
                         conc0.reshape(n_sets * n_runs, -1), k, orders, t_out, out_start,
                         method=method, rtol=rtol, atol=atol, max_rhs=max_rhs,
                         extents=system.extents)
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
        A key of :data:`METHODS`; the default "auto" uses the compiled
        integrators and LSODA as a last resort where the equations are stiff.

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
    system = compile_mechanism(mechanism)
    k, orders = system.rate_arrays(row)
    sol = integrate_flat(system.stoichiometry, system.present, conc0[None], k, orders,
                         times, np.array([0, times.size]), method=method, rtol=rtol, atol=atol,
                         extents=system.extents)
    used = describe_method(method, sol.n_stiff, sol.n_implicit)
    return Trajectory(times, sol.conc, mechanism.species, bool(sol.ok[0]), sol.message, used)


def initial_array(mechanism, initial):
    """Starting concentrations as a row [n_species] from a mapping species -> value."""
    conc0 = np.zeros(mechanism.n_species)
    for name, value in initial.items():
        if name not in mechanism.species:
            raise KinfitError(f"the model '{mechanism.name}' has no species {name!r}; its "
                              f"species are {', '.join(mechanism.species)}")
        conc0[mechanism.species.index(name)] = float(value)
    return conc0


def compiled_cache_ready():
    """Whether numba's on-disk cache holds this machine's compiled integrators.

    Reads the cache index of each compiled entry point, as numba itself does
    before compiling: an index that is missing, written by another numba
    version or older than its module's source counts as empty. Takes about
    a millisecond.

    Returns
    -------
    bool or None
        True when every entry point is cached (loading takes well under a
        second), False when the first integration will compile (about half a
        minute), None when it cannot be told (no numba, or a numba whose
        cache is laid out differently).
    """
    if not AVAILABLE:
        return None
    import pickle

    try:
        return all(bool(entry._cache._cache_file._load_index())
                   for entry in dopri.COMPILED + rosenbrock.COMPILED)
    except (AttributeError, OSError, EOFError, ValueError, pickle.UnpicklingError):
        return None


def compile_integrators():
    """Compile the compiled integrators now (or load them from numba's cache).

    Integrates a one-step system with each compiled entry point, with the
    argument types every later call uses, so that no later call compiles.
    """
    if not AVAILABLE:
        return
    stoich = np.array([[-1.0], [1.0]])
    present = np.array([[True, False]])
    conc0 = np.array([[1.0, 0.0]])
    k, orders = np.array([[0.1]]), np.array([[[1.0, 0.0]]])
    times, start = np.array([0.0, 1.0]), np.array([0, 2])
    common = dict(rtol=RTOL, atol=np.array([ATOL]), eps=np.array([1e-9]))
    dopri.integrate_batch(stoich, present, conc0, k, orders, times, start, **common)
    sens = tuple(np.zeros(1, dtype=np.int64) for _ in range(3))
    dopri.integrate_batch(stoich, present, conc0, k, orders, times, start, sens=sens,
                          **common)
    rosenbrock.integrate_stiff(stoich, present, conc0[0], k[0], orders[0], times, rtol=RTOL,
                               atol=ATOL, eps=1e-9)
