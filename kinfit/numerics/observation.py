"""Mapping the model's concentrations onto what was measured.

Every measured column is the concentration of one species of the model,
or a spectrometer signal channel declared in the experiment's ``[signals]``
table (mapped onto concentrations by :mod:`kinfit.numerics.signal_build`; its points get
species index -1 here). :func:`build_observation` flattens all traces of all runs into one
vector of data points and remembers, for each point, its run, its time on
that run's grid and its species; :func:`observe` picks the model's values at
those places. The same order of points is used for residuals, Jacobians and
plots.

Each point's σ is its own when the data file gives one (a σ column), else
the declared ``[noise]`` model at its value (``Experiment.sigma``); the
residual problem divides by it, so the fit, its standard errors (not
rescaled), the likelihood, the posterior and the residual checks all use it.
:func:`sigma_at` gives the same σ at other times, for predictive bands.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError

__all__ = ["Observation", "build_observation", "observe", "check_compatible", "sigma_at"]


@dataclass(frozen=True)
class Observation:
    """Where each data point of an experiment sits in the model's output.

    Attributes
    ----------
    run_times : tuple of ndarray
        For each run, the sorted distinct data times [n_times_run].
    run_slices : tuple of slice
        Points of each run in the flat data vector.
    time_index : ndarray [n_points]
        Index into the run's `run_times`.
    species_index : ndarray [n_points]
        Column of the model's concentration array.
    values : ndarray [n_points]
        Measured values.
    sigma : ndarray [n_points] or None
        Each point's standard deviation (its own, else the declared noise), or
        ``None`` when unknown.
    traces : tuple of (run index, species, slice)
        Each trace's place in the flat vector.
    """

    run_times: tuple
    run_slices: tuple
    time_index: np.ndarray
    species_index: np.ndarray
    values: np.ndarray
    sigma: np.ndarray | None
    traces: tuple

    @property
    def n_points(self):
        return self.values.size


def check_compatible(mechanism, experiment):
    """Check that the experiment's species and initial values fit the model.

    Raises
    ------
    KinfitError
        For a measured species the model lacks, an initial concentration for
        a species the model lacks, or a held-constant species with no initial
        concentration.
    """
    species = set(mechanism.species)
    listing = ", ".join(mechanism.species)
    signals = getattr(experiment, "signals", None)
    channels = set(signals.channels) if signals is not None else set()
    for run in experiment.runs:
        for trace in run.traces:
            if trace.species not in species and trace.species not in channels:
                raise KinfitError(
                    f"{run.source}, line {trace.lines[0]}: species {trace.species!r} (run "
                    f"{run.name!r}) is not in the model '{mechanism.name}' ({mechanism.source});"
                    f" its species are {listing} (every data column besides time and run "
                    f"is a species, a [signals] channel or sigma_X, the σ of column X)")
        for name in list(run.initial) + list(run.fitted_initial):
            if name not in species:
                raise KinfitError(
                    f"{experiment.source}, run {run.name!r} (initial.{name}): the model "
                    f"'{mechanism.name}' has no species {name!r}; its species are {listing}")
        for name in mechanism.held_constant:
            if name not in run.fitted_initial and run.initial.get(name, 0.0) <= 0.0:
                raise KinfitError(
                    f"{experiment.source}, run {run.name!r}: {name} is held constant in the "
                    f"model but has no initial concentration; give initial.{name}")


def build_observation(mechanism, experiment):
    """Flatten the experiment's traces against `mechanism`'s species.

    Returns
    -------
    Observation
    """
    check_compatible(mechanism, experiment)
    index = {s: i for i, s in enumerate(mechanism.species)}
    run_times, run_slices, traces = [], [], []
    time_index, species_index, values, sigma = [], [], [], []
    start = 0
    for r, run in enumerate(experiment.runs):
        grid = np.unique(np.concatenate([t.times for t in run.traces] or [np.empty(0)]))
        run_times.append(grid)
        run_start = start
        for trace in run.traces:
            n = trace.times.size
            time_index.append(np.searchsorted(grid, trace.times))
            species_index.append(np.full(n, index.get(trace.species, -1)))
            values.append(trace.values)
            sigma.append(experiment.sigma(trace))
            traces.append((r, trace.species, slice(start, start + n)))
            start += n
        run_slices.append(slice(run_start, start))
    empty = [np.empty(0, dtype=int)]
    return Observation(
        run_times=tuple(run_times), run_slices=tuple(run_slices),
        time_index=np.concatenate(time_index or empty),
        species_index=np.concatenate(species_index or empty),
        values=np.concatenate(values or [np.empty(0)]),
        sigma=_joined_sigma(sigma, experiment), traces=tuple(traces))


def _joined_sigma(sigma, experiment):
    """Every point's σ [n_points], or None; refuses σ for some traces only."""
    if not sigma or all(s is None for s in sigma):
        return None
    if any(s is None for s in sigma):
        missing = next((run, t) for run in experiment.runs for t in run.traces
                       if experiment.sigma(t) is None)
        raise KinfitError(f"{experiment.source}: {missing[1].species} in run "
                          f"{missing[0].name!r} has no σ while other traces have one; give "
                          f"every trace its σ column or declare [noise]")
    return np.concatenate(sigma)


def sigma_at(experiment, run_index, species, times, values):
    """σ of readings of `species` in one run at other `times`, for predictive bands.

    Parameters
    ----------
    experiment : Experiment
    run_index : int
    species : str
    times : ndarray [n_times]
    values : ndarray [..., n_times]
        Predicted concentrations at `times`.

    Returns
    -------
    ndarray broadcastable to `values`
        A trace's own σ interpolated linearly in time between its readings
        (held at its first and last); otherwise the declared noise at `values`.
    """
    run = experiment.runs[run_index]
    trace = next(t for t in run.traces if t.species == species)
    if trace.sigma is not None:
        return np.interp(times, trace.times, trace.sigma)
    return experiment.noise[species].sigma(values)


def observe(conc_by_run, observation):
    """The model's prediction of every data point.

    Parameters
    ----------
    conc_by_run : sequence of ndarray [n_sets, n_times_run, n_species]
        Concentrations on each run's grid (``observation.run_times``).
    observation : Observation

    Returns
    -------
    ndarray [n_sets, n_points]
    """
    n_sets = conc_by_run[0].shape[0]
    out = np.empty((n_sets, observation.n_points))
    for conc, sl in zip(conc_by_run, observation.run_slices):
        out[:, sl] = conc[:, observation.time_index[sl], observation.species_index[sl]]
    return out
