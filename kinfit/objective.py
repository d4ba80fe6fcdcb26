"""Residuals and likelihood of a mechanism against all runs of an experiment.

:func:`build_problem` joins a mechanism and an experiment once: it lays out
the parameter vector (the model's parameters, then each run's fitted initial
concentrations and time offset), flattens the data and checks that they fit
together. :meth:`Problem.predict` then evaluates any number of parameter sets
in one vectorised integration.

Likelihood conventions (stated in README and DEVELOPERS.md)
-------------------------------------------------------------
With declared noise σ_i (Gaussian, independent)::

    -2 ln L = χ² + Σ ln(2π σ_i²),      χ² = Σ ((y_i - f_i)/σ_i)²

With the noise unknown (the default) one σ shared by all points is estimated
by maximum likelihood, σ̂² = RSS/N, which gives the concentrated likelihood::

    -2 ln L = N ln(2π RSS/N) + N

Then AIC = -2 ln L + 2p, AICc = AIC + 2p(p+1)/(N-p-1), BIC = -2 ln L + p ln N,
where p counts the fitted parameters (the noise level is not counted). This
is statsmodels' OLS convention; lmfit reports N ln(χ²/N) + 2p, which differs
from ours by the constant N(ln 2π + 1) for unknown noise and so ranks models
identically.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import KinfitError
from .observables import build_observation, observe
from .simulate import MAX_RHS_CALLS, RTOL, ATOL, simulate_runs
from .temperature import join_temperatures

__all__ = ["Problem", "build_problem", "residuals", "log_likelihood",
           "information_criteria", "FAILED_RESIDUAL"]

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
    method : str
        Integrator passed to :func:`kinfit.simulate.integrate`.
    temperature : TemperatureLayout or None
        Each run's temperature group and T_ref, when the model's rate
        constants depend on temperature (see :mod:`kinfit.temperature`).
    """

    mechanism: object
    experiment: object
    observation: object
    parameters: tuple
    method: str = "LSODA"
    rtol: float = RTOL
    atol: float = ATOL
    max_rhs: int = MAX_RHS_CALLS
    temperature: object = None
    _conc0: np.ndarray = field(default=None, repr=False)
    _initial_map: tuple = field(default=(), repr=False)
    _offset_map: tuple = field(default=(), repr=False)
    _times: tuple = field(default=(), repr=False)

    @property
    def names(self):
        return tuple(p.name for p in self.parameters)

    @property
    def n_model(self):
        return len(self.mechanism.parameters)

    @property
    def sigma_known(self):
        return self.observation.sigma is not None

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
            groups = [self.mechanism.rate_arrays(rows) for rows in
                      self.temperature.group_values(values[:, :self.n_model])]
            return [groups[g] for g in self.temperature.run_group]
        shared = self.mechanism.rate_arrays(values[:, :self.n_model])
        return [shared] * len(self.experiment.runs)

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
        conc0 = np.repeat(self._conc0[None], n_sets, axis=0)
        for r, s, p in self._initial_map:
            conc0[:, r, s] = values[:, p]
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
        info : Integration
        """
        values = self.values_array(values)
        conc0, model_times = self.run_inputs(values, times)
        conc, ok, info = simulate_runs(self.mechanism, self.rate_arrays(values), conc0,
                                       model_times, method=self.method, rtol=self.rtol,
                                       atol=self.atol, max_rhs=max_rhs or self.max_rhs)
        return conc, ok, info

    def predict(self, values, max_rhs=None):
        """Model value at every data point, for each parameter set.

        Returns
        -------
        pred : ndarray [n_sets, n_points]
        ok : ndarray [n_sets] of bool
        """
        conc, ok, _ = self.simulate(values, max_rhs=max_rhs)
        return observe(conc, self.observation), ok

    def residuals(self, values, max_rhs=None):
        """Residuals (f - y)/σ, or f - y when the noise is unknown.

        Returns
        -------
        ndarray [n_sets, n_points]
            Rows of failed parameter sets are filled with
            :data:`FAILED_RESIDUAL`.
        """
        pred, ok = self.predict(values, max_rhs=max_rhs)
        res = pred - self.observation.values
        if self.observation.sigma is not None:
            res = res / self.observation.sigma
        res[~ok] = FAILED_RESIDUAL
        return res

    def log_likelihood(self, res):
        """Gaussian log-likelihood of residual rows [n_sets, n_points] (see module notes)."""
        res = np.atleast_2d(res)
        n = res.shape[1]
        chi2 = np.einsum("ij,ij->i", res, res)
        if self.observation.sigma is not None:
            const = np.sum(np.log(2 * math.pi * self.observation.sigma ** 2))
            return -0.5 * (chi2 + const)
        with np.errstate(divide="ignore"):
            return -0.5 * n * (np.log(2 * math.pi * chi2 / n) + 1.0)


def build_problem(mechanism, experiment, method="LSODA"):
    """Join `mechanism` and `experiment` into a :class:`Problem`.

    Raises
    ------
    KinfitError
        If the data name species the model lacks, or per-run parameter names
        collide with the model's.
    """
    observation = build_observation(mechanism, experiment)
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
    return Problem(mechanism=mechanism, experiment=experiment, observation=observation,
                   parameters=tuple(parameters), method=method, temperature=temperature,
                   _conc0=conc0,
                   _initial_map=tuple(initial_map), _offset_map=tuple(offset_map),
                   _times=observation.run_times)


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


def log_likelihood(mechanism, experiment, values=None):
    """Gaussian log-likelihood of one parameter set (see the module notes)."""
    problem = build_problem(mechanism, experiment)
    return float(problem.log_likelihood(problem.residuals(values))[0])


def information_criteria(log_lik, n_points, n_params):
    """AIC, AICc and BIC from a maximised log-likelihood.

    Parameters
    ----------
    log_lik : float
        Maximised log-likelihood.
    n_points, n_params : int
        N data points and p fitted parameters.

    Returns
    -------
    dict with keys ``aic``, ``aicc``, ``bic``
        AIC = -2 ln L + 2p (Akaike 1974); AICc = AIC + 2p(p+1)/(N-p-1)
        (Hurvich & Tsai 1989; infinite when N <= p + 1); BIC = -2 ln L + p ln N
        (Schwarz 1978).
    """
    aic = -2.0 * log_lik + 2.0 * n_params
    denom = n_points - n_params - 1
    aicc = aic + 2.0 * n_params * (n_params + 1) / denom if denom > 0 else math.inf
    bic = -2.0 * log_lik + n_params * math.log(n_points)
    return {"aic": aic, "aicc": aicc, "bic": bic}

