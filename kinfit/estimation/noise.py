"""How a fit treats measurement noise: declared, one level shared, or one per species.

The sampler's noise modes (:mod:`kinfit.estimation.space`) apply to a fit
too; the fit estimates a noise level where the sampler samples it.

``auto``
    The experiment's declared noise if it has any, else ``shared`` (the
    fit's convention since the start).
``declared``
    Each point's σ_i from the experiment (``[noise]``); refused when none
    is declared. Weights 1/σ_i², standard errors not rescaled.
``shared``
    One unknown σ for all points, declared noise ignored: ordinary least
    squares, σ̂² = RSS/(N − p), standard errors scaled by it.
``per-species``
    One unknown σ_s for each measured species (or signal channel),
    estimated with the parameters by alternating two steps until the σ_s
    change by less than 1e-6 (relative): a weighted fit with weights
    1/σ_s², then σ_s² = RSS_s / (N_s − p N_s/N), the residual sum of
    squares of species s over its share of the degrees of freedom (the
    shared convention σ̂² = RSS/(N − p) applied to each species; so
    χ² = N − p at the end). Each pass is a stationary point of the weighted
    sum of squares at the current σ_s, and the standard errors treat the
    final σ_s as known (the usual feasible weighted least squares; common
    practice). The likelihood is the Gaussian one at those σ_s.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import Noise

__all__ = ["FIT_NOISE_MODES", "resolved_mode", "noise_experiment", "species_levels",
           "converged"]

FIT_NOISE_MODES = ("auto", "declared", "per-species", "shared")
TOLERANCE = 1e-6         # relative change of every σ_s that ends the per-species passes
MAX_PASSES = 50


def resolved_mode(mode, experiment):
    """The mode a fit uses: ``auto`` becomes ``declared`` or ``shared``.

    Raises
    ------
    KinfitError
        For an unknown mode, ``declared`` without declared noise, or
        ``shared``/``per-species`` on full spectra (their noise is the
        ``[signals.spectra]`` one).
    """
    if mode not in FIT_NOISE_MODES:
        raise KinfitError(f"noise {mode!r} is not known; choose one of "
                          f"{', '.join(FIT_NOISE_MODES)}")
    if mode == "auto":
        return "declared" if experiment.sigma_known else "shared"
    if mode == "declared" and not experiment.sigma_known:
        raise KinfitError(f"{experiment.source}: noise 'declared' was asked for, but the "
                          f"experiment declares none; add a [noise] table, or choose "
                          f"'shared' or 'per-species'")
    signals = experiment.signals
    if mode != "declared" and signals is not None and signals.spectra is not None:
        raise KinfitError(f"{experiment.source}: noise {mode!r} is not available for full "
                          f"spectra; their noise is [signals.spectra] noise (declared, or "
                          f"estimated from the singular values)")
    return mode


def noise_experiment(experiment, mode, levels=None):
    """`experiment` with the noise of `mode` (a resolved mode, see :func:`resolved_mode`).

    Parameters
    ----------
    experiment : Experiment
    mode : {"declared", "shared", "per-species"}
    levels : mapping of str to float, optional
        For ``per-species``: σ of each species, concentration (or signal)
        units.

    Returns
    -------
    Experiment
    """
    if mode == "declared":
        return experiment
    # the estimated modes replace every σ, the readings' own (σ columns) included
    runs = tuple(replace(run, traces=tuple(replace(t, sigma=None) for t in run.traces))
                 for run in experiment.runs)
    if mode == "shared":
        return replace(experiment, runs=runs, noise=None)
    return replace(experiment, runs=runs,
                   noise={s: Noise(absolute=float(v)) for s, v in levels.items()})


def species_levels(observation, deviations, n_free, source="<experiment>"):
    """σ_s² = RSS_s / (N_s − p N_s/N) of each measured species.

    Parameters
    ----------
    observation : Observation
        The fitted points (``traces`` gives each trace's species and slice).
    deviations : ndarray [n_points]
        Model − data, in the data's units (not divided by σ).
    n_free : int
        Fitted parameters p.

    Returns
    -------
    dict of str to float
        In order of first appearance.

    Raises
    ------
    KinfitError
        When a species is fitted exactly (its σ would be zero).
    """
    n_total = deviations.size
    sums, counts = {}, {}
    for _, species, sl in observation.traces:
        part = deviations[sl]
        sums[species] = sums.get(species, 0.0) + float(part @ part)
        counts[species] = counts.get(species, 0) + part.size
    levels = {}
    for species, rss in sums.items():
        dof = counts[species] * (1.0 - n_free / n_total)
        if not rss > 0 or not dof > 0:
            raise KinfitError(f"{source}: the points of {species!r} are fitted exactly, so "
                              f"their noise cannot be estimated; use noise 'shared'")
        levels[species] = float(np.sqrt(rss / dof))
    return levels


def converged(old, new):
    """Whether no σ_s changed by more than :data:`TOLERANCE` (relative)."""
    return all(abs(new[s] - old[s]) <= TOLERANCE * old[s] for s in new)
