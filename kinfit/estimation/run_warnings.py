"""Warnings about single runs of a fit: runs that cannot react, runs that carry the misfit.

A global fit can look converged while one run is wrong in a way the totals
hide. :func:`run_warnings` collects, at the fitted values:

* steps that cannot proceed in a run because a species they need starts at
  zero and nothing forms it (:mod:`kinfit.numerics.blocked_steps`);
* a declared reference temperature outside the runs' temperatures
  (:func:`kinfit.inputs.temperature.reference_warning`);
* runs that carry much more of the misfit than their share of the points
  (:func:`misfit_runs`).

Which run carries the misfit
----------------------------
For run r with n_r residuals (weighted by 1/σ when the noise is declared)
and sum of squares S_r, against the other runs pooled (n_o, S_o), the ratio
of mean squares

    F = (S_r / n_r) / (S_o / n_o)

is, when every run fits equally well, close to an F(n_r, n_o) variate (the
variance-ratio test of Snedecor; the degrees of freedom ignore the few
fitted parameters). A run is named when both

* F ≥ 4: its root-mean-square residual is at least twice the other runs'
  (kinfit's choice of a size that matters: with thousands of points the
  test alone would name trivial differences), and
* the upper-tail p-value of F is below 0.01 / n_runs (Bonferroni over the
  runs, so that a study of many runs does not name one by chance).

The comparison assumes what the fit itself assumes: one noise level for
every point (or declared σ, which puts every residual on the scale of its
noise). A run named this way is fitted much worse than the rest: a wrong
starting concentration, temperature or data file, noisier readings (then
declare the noise), or a model that misses what that run's conditions
show (a wrong candidate in a ranking typically fails on one run). With
fewer than two runs nothing is compared.
"""

from __future__ import annotations

import math

import numpy as np

from kinfit.inputs.temperature import reference_warning
from kinfit.numerics.blocked_steps import blocked_step_warnings

__all__ = ["MISFIT_RATIO", "MISFIT_ALPHA", "misfit_runs", "run_warnings"]

MISFIT_RATIO = 4.0      # mean-square ratio at or above which a run may be named
MISFIT_ALPHA = 0.01     # family-wise level of the variance-ratio test over the runs


def _run_sums(experiment, residuals):
    """(names, n per run, sum of squares per run) from residuals in trace order."""
    names, counts, sums = [], [], []
    start = 0
    for run in experiment.runs:
        n = sum(t.times.size for t in run.traces)
        res = np.asarray(residuals[start:start + n], dtype=float)
        start += n
        if n:
            names.append(run.name)
            counts.append(n)
            sums.append(float(res @ res))
    return names, np.array(counts, dtype=float), np.array(sums)


def misfit_runs(experiment, residuals):
    """Runs fitted much worse than the others (see the module docstring for the rule).

    Parameters
    ----------
    experiment : Experiment
    residuals : ndarray [n_points]
        The fit's residuals, trace by trace in the order of the runs
        (spectral points after them are not used).

    Returns
    -------
    list of (str, float, float, float, float)
        For each run named: name, share of the sum of squares, share of the
        points, mean-square ratio F, p-value.
    """
    from scipy.stats import f as f_dist

    names, counts, sums = _run_sums(experiment, residuals)
    total, n_total = float(sums.sum()), float(counts.sum())
    if len(names) < 2 or not total > 0:
        return []
    out = []
    for name, n, s in zip(names, counts, sums):
        rest, n_rest = total - s, n_total - n
        ratio = math.inf if rest <= 0 else (s / n) / (rest / n_rest)
        if ratio < MISFIT_RATIO:
            continue
        p = 0.0 if math.isinf(ratio) else float(f_dist.sf(ratio, n, n_rest))
        if p < MISFIT_ALPHA / len(names):
            out.append((name, s / total, n / n_total, ratio, p))
    return out


def run_warnings(mechanism, experiment, values, residuals):
    """Every per-run warning of a fit at its best values.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
    values : mapping of str to float
        The fitted values (orders, fitted starting concentrations, ...).
    residuals : ndarray [n_points]

    Returns
    -------
    list of str
    """
    out = blocked_step_warnings(mechanism, experiment, values)
    reference = reference_warning(mechanism.temperature,
                                  [r.temperature for r in experiment.runs], mechanism.source)
    if reference is not None:
        out.append(reference)
    for name, share, points, ratio, p in misfit_runs(experiment, residuals):
        share = f"{share:.0%}" if share < 0.995 else "over 99%"
        test = f"p = {p:.2g}" if p >= 1e-16 else "p < 1e-16"
        out.append(f"run {name!r} carries {share} of the sum of squared residuals with "
                   f"{points:.0%} of the points (its root-mean-square residual is "
                   f"{math.sqrt(ratio):.3g} times the other runs', variance-ratio test "
                   f"{test}): check its starting concentrations, temperature and data file; "
                   f"if they are right, the model misses what this run's conditions show, or "
                   f"its readings are noisier (then declare the noise)")
    return out
