"""Residuals of a mechanism against all runs of an experiment.

:func:`build_problem` joins a mechanism and an experiment once: it lays out
the parameter vector (the model's parameters, then each run's fitted initial
concentrations and time offset), flattens the data and checks that they fit
together. :meth:`Problem.predict` then evaluates any number of parameter sets
in one vectorised integration.

The likelihood built on these residuals, and the information criteria, are
stated in :mod:`kinfit.estimation.likelihood`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.integrate import integrate_flat, simulate_runs
from kinfit.numerics.integrators import (
    ATOL,
    KIND_INITIAL,
    KIND_LOG_K,
    KIND_ORDER,
    MAX_RHS_CALLS,
    RTOL,
)
from kinfit.numerics.observation import build_observation
from kinfit.numerics.rate_system import RateSystem, compile_mechanism
from kinfit.numerics.signal_build import build_signal_model
from kinfit.numerics.temperature_laws import join_temperatures

if TYPE_CHECKING:
    from kinfit.inputs.experiment import Experiment
    from kinfit.inputs.mechanism import Mechanism
    from kinfit.numerics.observation import Observation
    from kinfit.numerics.signal_model import SignalModel
    from kinfit.numerics.temperature_laws import TemperatureLayout

__all__ = ["Problem", "build_problem", "residuals", "FAILED_RESIDUAL"]

# Residual given to every point of a parameter set whose integration failed:
# large enough that an optimiser always prefers a set that integrates.
FAILED_RESIDUAL = 1e8


@dataclass(frozen=True)
class Problem:
    """A mechanism joined to an experiment, ready to evaluate.

    Attributes
    ----------
    mechanism : Mechanism
    experiment : Experiment
    observation : Observation
    parameters : tuple of Parameter
        The model's parameters, then each run's fitted initial concentrations
        and time offset, in that order.
    system : RateSystem
        The mechanism's rate equations as arrays
        (:func:`~kinfit.numerics.rate_system.compile_mechanism`).
    method : str
        Integrator, a key of :data:`kinfit.numerics.integrate.METHODS`.
    temperature : TemperatureLayout or None
        Each run's temperature group and T_ref, when the model's rate
        constants depend on temperature (see :mod:`kinfit.numerics.temperature_laws`).
    signal : SignalModel or None
        When the experiment measures spectrometer signals: how
        concentrations become signals, with the linear unknowns
        (absorptivities, offsets, drifts) profiled out by variable projection
        in every evaluation (see :mod:`kinfit.numerics.signal_model`). ``observation`` then
        holds the measured points and ``points`` the concentrations the model
        is evaluated at.
    """

    mechanism: Mechanism
    experiment: Experiment
    observation: Observation
    parameters: tuple
    system: RateSystem
    method: str = "auto"
    rtol: float = RTOL
    atol: float = ATOL
    max_rhs: int = MAX_RHS_CALLS
    temperature: TemperatureLayout | None = None
    signal: SignalModel | None = None
    _points: Observation | None = field(default=None, repr=False)
    _conc0: np.ndarray = field(default=None, repr=False)
    _initial_map: tuple = field(default=(), repr=False)
    _offset_map: tuple = field(default=(), repr=False)
    _times: tuple = field(default=(), repr=False)
    _layout: dict = field(default=None, repr=False, compare=False)

    @property
    def names(self):
        return tuple(p.name for p in self.parameters)

    @property
    def n_model(self):
        return len(self.mechanism.parameters)

    @property
    def sigma_known(self):
        return self.observation.sigma is not None

    @property
    def points(self):
        """The concentration points the model is evaluated at (the observation,
        unless signals map concentrations onto measured points)."""
        return self._points if self._points is not None else self.observation

    @property
    def n_linear(self):
        """Linear unknowns solved inside each evaluation (0 without signals)."""
        return 0 if self.signal is None else self.signal.n_linear

    def values_array(self, values):
        """Parameter sets as an array [n_sets, n_params].

        Parameters
        ----------
        values : mapping of str to float, or array_like [n_params] or [n_sets, n_params]
            A mapping may give only some parameters; the rest take their
            starting values.
        """
        if isinstance(values, dict) or values is None:
            start = {p.name: p.value for p in self.parameters}
            for name, v in (values or {}).items():
                if name not in start:
                    raise KinfitError(f"no parameter named {name!r}; the parameters are "
                                      f"{', '.join(start)}")
                start[name] = float(v)
            return np.array([[start[n] for n in self.names]])
        arr = np.atleast_2d(np.asarray(values, dtype=float))
        if arr.shape[1] != len(self.parameters):
            raise KinfitError(f"expected {len(self.parameters)} parameter values "
                              f"({', '.join(self.names)}), got {arr.shape[1]}")
        return arr

    def rate_arrays(self, values):
        """Rate constants and orders of every run for every parameter set.

        Parameters
        ----------
        values : ndarray [n_sets, n_params]

        Returns
        -------
        list of (k [n_sets, n_directions], orders [n_sets, n_directions, n_species])
            One pair per run. Without temperature dependence all runs share
            one pair; with it, runs at one temperature share one.
        """
        if self.temperature is not None:
            groups = [self.system.rate_arrays(rows) for rows in
                      self.temperature.group_values(values[:, :self.n_model])]
            return [groups[g] for g in self.temperature.run_group]
        shared = self.system.rate_arrays(values[:, :self.n_model])
        return [shared] * len(self.experiment.runs)

    def log_rate_derivatives(self, values):
        """∂ ln k_j / ∂θ_p of every direction j, for every run and parameter set.

        Returns
        -------
        list of ndarray [n_sets, n_directions, n_params], one per run
        """
        constant_index = self.system.constant_index
        out = np.zeros((values.shape[0], self.system.n_directions, len(self.parameters)))
        for j, p in enumerate(constant_index):
            with np.errstate(divide="ignore"):
                out[:, j, p] = 1.0 / values[:, p]
        if self.temperature is None:
            return [out] * len(self.experiment.runs)
        # k_j(T) = k_ref g(T, E): ∂ln k_j/∂k_ref is as above; add ∂ln k_j/∂E per temperature
        groups = []
        for slopes in self.temperature.energy_slopes():
            group = out.copy()
            for k_col, e_col, slope in slopes:
                group[:, constant_index == k_col, e_col] = slope
            groups.append(group)
        return [groups[g] for g in self.temperature.run_group]

    def _starting_concentrations(self, values):
        """Starting concentrations [n_sets, n_runs, n_species], fitted ones filled in."""
        conc0 = np.repeat(self._conc0[None], values.shape[0], axis=0)
        for r, s, p in self._initial_map:
            conc0[:, r, s] = values[:, p]
        return conc0

    def run_inputs(self, values, times=None):
        """Starting concentrations and model times of every run.

        Parameters
        ----------
        values : ndarray [n_sets, n_params]
        times : sequence of ndarray [n_times_run], optional
            Data-clock times per run (default: each run's data times).

        Returns
        -------
        conc0 : ndarray [n_sets, n_runs, n_species]
        model_times : list of ndarray [n_sets, n_times_run]
            Data-clock times plus each set's time offset of the run.
        """
        n_sets = values.shape[0]
        conc0 = self._starting_concentrations(values)
        model_times = []
        for r, grid in enumerate(self._times if times is None else times):
            p = self._offset_map[r]
            shift = values[:, p][:, None] if p >= 0 else np.zeros((n_sets, 1))
            model_times.append(np.asarray(grid, dtype=float)[None, :] + shift)
        return conc0, model_times

    def simulate(self, values, times=None, max_rhs=None):
        """Concentrations of every run for every parameter set.

        Parameters
        ----------
        values : see :meth:`values_array`
        times : sequence of ndarray [n_times_run], optional
            Data-clock times per run (default: each run's data times).
        max_rhs : int, optional
            Work bound of the integrator (default: the problem's).

        Returns
        -------
        conc : list of ndarray [n_sets, n_times_run, n_species]
        ok : ndarray [n_sets] of bool
        info : FlatSolution
        """
        values = self.values_array(values)
        conc0, model_times = self.run_inputs(values, times)
        return simulate_runs(self.system, self.rate_arrays(values), conc0, model_times,
                             method=self.method, rtol=self.rtol, atol=self.atol,
                             max_rhs=max_rhs or self.max_rhs)

    def evaluate(self, values, jacobian=False, max_rhs=None, fallback=True):
        """Model values at every data point, optionally with exact derivatives.

        All runs of all parameter sets are integrated in one call; with
        `jacobian`, forward sensitivities are integrated alongside (no finite
        differences, except for systems handed to the implicit integrator).

        Parameters
        ----------
        values : ndarray [n_sets, n_params]
        jacobian : bool
        max_rhs : int, optional
        fallback : bool
            Whether systems found stiff are handed on to the implicit methods
            (see :func:`kinfit.numerics.integrate.integrate_flat`).

        Returns
        -------
        pred : ndarray [n_sets, n_points]
        ok : ndarray [n_sets] of bool
        dpred : ndarray [n_sets, n_points, n_params] or None
            ∂pred/∂θ on the parameters' natural scale.
        info : FlatSolution
        """
        values = self.values_array(values)
        lay = self._layout
        n_sets, n_runs = values.shape[0], len(self._times)
        rates = self.rate_arrays(values)
        if all(r is rates[0] for r in rates):     # one (k, orders) pair shared by all runs
            k = np.repeat(rates[0][0], n_runs, axis=0)
            orders = np.repeat(rates[0][1], n_runs, axis=0)
        else:
            k = np.stack([kr for kr, _ in rates], axis=1).reshape(n_sets * n_runs, -1)
            orders = np.stack([er for _, er in rates], axis=1)
            orders = orders.reshape(n_sets * n_runs, *orders.shape[2:])
        conc0 = self._starting_concentrations(values)
        t_out, out_start, rows = _grid_for(lay, n_sets)
        if lay["has_offsets"]:
            shift = np.zeros((n_sets, n_runs))
            for r, p in enumerate(self._offset_map):
                if p >= 0:
                    shift[:, r] = values[:, p]
            t_out = t_out + np.repeat(shift.ravel(), np.tile(lay["sizes"], n_sets))
        sol = integrate_flat(self.system.stoichiometry, self.system.present,
                             conc0.reshape(n_sets * n_runs, -1), k, orders, t_out, out_start,
                             method=self.method, rtol=self.rtol, atol=self.atol,
                             max_rhs=max_rhs or self.max_rhs,
                             sens=lay["sens"] if jacobian else None, fallback=fallback,
                             extents=self.system.extents)
        species = self.points.species_index
        pred = sol.conc[rows, species[None, :]]
        ok = sol.ok.reshape(n_sets, n_runs).all(axis=1)
        dpred = None
        if jacobian:
            dpred = self._chain_rule(values, rates, sol, rows, t_out)
        if self.signal is not None:
            pred, dpred = self.signal.project(pred, dpred, ok)
        return pred, ok, dpred, sol

    def _chain_rule(self, values, rates, sol, rows, t_out):
        """∂pred/∂θ from kernel sensitivities ∂pred/∂q and ∂q/∂θ."""
        lay = self._layout
        n_sets = values.shape[0]
        n_runs = len(self._times)
        run_of_point = lay["run_of_point"]
        species = self.points.species_index
        dq = np.repeat(lay["dq_static"][None], n_sets, axis=0)     # [sets, runs, q, params]
        dlnk = self.log_rate_derivatives(values)
        for r in range(n_runs):
            dq[:, r, :lay["n_logk"], :] += dlnk[r]
        sens = sol.sens[rows, species[None, :], :]                  # [sets, points, q]
        dpred = np.einsum("spq,spqn->spn", sens, dq[:, run_of_point])
        if lay["has_offsets"]:
            for r, p in enumerate(self._offset_map):
                if p < 0:
                    continue
                sl = self.points.run_slices[r]
                k_r, e_r = rates[r]
                for s_i in range(n_sets):
                    conc = sol.conc[rows[s_i, sl]]
                    eps = 1e-9 * max(float(np.max(self._conc0[r])), 1e-300)
                    f = self.system.rhs(conc, np.repeat(k_r[s_i:s_i + 1], len(conc), axis=0),
                                        np.repeat(e_r[s_i:s_i + 1], len(conc), axis=0), eps)
                    started = t_out[rows[s_i, sl]] > 0
                    dpred[s_i, sl, p] = np.where(started, f[np.arange(len(conc)),
                                                             species[sl]], 0.0)
        return dpred

    def predict(self, values, max_rhs=None):
        """Model value at every data point, for each parameter set.

        Returns
        -------
        pred : ndarray [n_sets, n_points]
        ok : ndarray [n_sets] of bool
        """
        pred, ok, _, _ = self.evaluate(values, max_rhs=max_rhs)
        return pred, ok

    def residuals(self, values, max_rhs=None):
        """Residuals (f - y)/σ, or f - y when the noise is unknown.

        Returns
        -------
        ndarray [n_sets, n_points]
            Rows of failed parameter sets are filled with
            :data:`FAILED_RESIDUAL`.
        """
        pred, ok = self.predict(values, max_rhs=max_rhs)
        return self.weigh(pred, ok)

    def weigh(self, pred, ok):
        """Residuals f - y of predictions [n_sets, n_points], divided by σ where the
        noise is declared; sets that failed to integrate (``ok`` false) get
        ``FAILED_RESIDUAL`` everywhere."""
        res = pred - self.observation.values
        if self.observation.sigma is not None:
            res = res / self.observation.sigma
        res[~ok] = FAILED_RESIDUAL
        return res

    def residuals_jacobian(self, values):
        """Residuals and their exact Jacobian for one parameter set.

        Returns
        -------
        res : ndarray [n_points]
        jac : ndarray [n_points, n_params]
            ∂res/∂θ on the natural scale of every parameter (fixed ones
            included); zero when the integration failed.
        ok : bool
        info : FlatSolution
        """
        pred, ok, dpred, info = self.evaluate(values, jacobian=True)
        res = self.weigh(pred, ok)[0]
        jac = dpred[0]
        if self.observation.sigma is not None:
            jac = jac / self.observation.sigma[:, None]
        if ok[0] and not (np.isfinite(jac).all() and np.abs(jac).max(initial=0.0) < 1e150):
            # sensitivities that overflow mean the equations blow up here: a failed point
            ok = np.array([False])
            res = self.weigh(pred, ok)[0]
        if not ok[0]:
            jac = np.zeros_like(jac)
        return res, jac, bool(ok[0]), info

def build_problem(mechanism, experiment, method="auto", components=None):
    """Join `mechanism` and `experiment` into a :class:`Problem`.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
    method : str
        Integrator, a key of :data:`kinfit.numerics.integrate.METHODS`.
    components : int or str, optional
        For full-spectrum data: overrides the experiment's ``components``
        ("auto", "all" or a number; see :mod:`kinfit.numerics.signal_model`).

    Raises
    ------
    KinfitError
        If the data name species the model lacks, or per-run parameter names
        collide with the model's.
    """
    signal = None
    if getattr(experiment, "signals", None) is not None:
        observation, points, signal = build_signal_model(mechanism, experiment, components)
    else:
        observation = points = build_observation(mechanism, experiment)
    species = {s: i for i, s in enumerate(mechanism.species)}
    parameters = list(mechanism.parameters.values())
    names = set(mechanism.parameters)
    conc0 = np.zeros((len(experiment.runs), mechanism.n_species))
    initial_map, offset_map = [], []
    for r, run in enumerate(experiment.runs):
        for s, value in run.initial.items():
            conc0[r, species[s]] = value
        for s, p in run.fitted_initial.items():
            initial_map.append((r, species[s], len(parameters)))
            parameters.append(_unique(p, names, experiment))
        if run.time_offset is not None:
            offset_map.append(len(parameters))
            parameters.append(_unique(run.time_offset, names, experiment))
        else:
            offset_map.append(-1)
    temperature = None
    if mechanism.temperature is not None:
        temperature = join_temperatures(
            mechanism.temperature, mechanism.parameter_names,
            [run.temperature for run in experiment.runs],
            {n: p.vary for n, p in mechanism.parameters.items()}, experiment.source,
            [run.name for run in experiment.runs])
    system = compile_mechanism(mechanism)
    return Problem(mechanism=mechanism, experiment=experiment, observation=observation,
                   parameters=tuple(parameters), system=system, method=method,
                   temperature=temperature,
                   signal=signal, _points=points, _conc0=conc0,
                   _initial_map=tuple(initial_map), _offset_map=tuple(offset_map),
                   _times=points.run_times,
                   _layout=_flat_layout(system, points, len(parameters), initial_map,
                                        offset_map))


def _grid_for(layout, n_sets):
    """Output times, output starts and point rows for `n_sets` parameter sets (memoised)."""
    key = ("grid", n_sets)
    if key not in layout:
        sizes = np.tile(layout["sizes"], n_sets)
        layout[key] = (np.tile(layout["t_base"], n_sets),
                       np.concatenate([[0], np.cumsum(sizes)]),
                       np.arange(n_sets)[:, None] * layout["n_out"] + layout["point_out"][None, :])
        if len(layout) > 64:                     # keep the memo small
            for old in [k for k in layout if isinstance(k, tuple)][:32]:
                del layout[old]
    return layout[key]


def _flat_layout(system, observation, n_params, initial_map, offset_map):
    """Index arrays of the flat evaluation path and the kernel-parameter map.

    Kernel parameters (see :mod:`kinfit.numerics.integrators`): ln k of every direction,
    each rate-law exponent that depends on a parameter, and the starting
    concentration of each species that some run fits. ``dq_static`` holds
    ∂q/∂θ for the exponents and starting concentrations [n_runs, n_q, n_params];
    the ln k rows are filled per evaluation (they depend on θ).
    """
    sizes = np.array([g.size for g in observation.run_times])
    run_offset = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    run_of_point = np.concatenate([np.full(sl.stop - sl.start, r)
                                   for r, sl in enumerate(observation.run_slices)])
    n_dir = system.n_directions
    kind, jj, ss = [KIND_LOG_K] * n_dir, list(range(n_dir)), [0] * n_dir
    coef = system.order_coef                                     # [D, S, n_model]
    order_entries = system.order_entries
    for j, s in order_entries:
        kind.append(KIND_ORDER)
        jj.append(j)
        ss.append(s)
    init_species = sorted({s for _, s, _ in initial_map})
    for s in init_species:
        kind.append(KIND_INITIAL)
        jj.append(0)
        ss.append(s)
    n_runs = len(observation.run_times)
    dq = np.zeros((n_runs, len(kind), n_params))
    for q, (j, s) in enumerate(order_entries, start=n_dir):
        dq[:, q, :coef.shape[2]] = coef[j, s]
    for r, s, p in initial_map:
        dq[r, n_dir + len(order_entries) + init_species.index(s), p] = 1.0
    return {
        "sizes": sizes,
        "n_out": int(sizes.sum()),
        "t_base": np.concatenate(observation.run_times),
        "point_out": run_offset[run_of_point] + observation.time_index,
        "run_of_point": run_of_point,
        "has_offsets": any(p >= 0 for p in offset_map),
        "sens": (np.array(kind), np.array(jj), np.array(ss)),
        "n_logk": n_dir,
        "dq_static": dq,
    }


def _unique(parameter, names, experiment):
    if parameter.name in names:
        raise KinfitError(f"{experiment.source}: kinfit names a per-run parameter "
                          f"{parameter.name!r}, but the model already has a parameter of that "
                          f"name; rename the model's parameter")
    names.add(parameter.name)
    return parameter


def residuals(mechanism, experiment, values=None):
    """Residuals of one parameter set over all runs.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
    values : mapping of str to float, optional
        Parameter values; starting values for any not given.

    Returns
    -------
    ndarray [n_points]
        (f - y)/σ with declared noise, f - y otherwise; points ordered run by
        run, trace by trace, as in the data files.
    """
    return build_problem(mechanism, experiment).residuals(values)[0]
