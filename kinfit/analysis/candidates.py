"""Candidate models and fitting them all, in parallel over processes.

A :class:`Candidate` is a model to fit and rank. :func:`fit_candidates` fits
every candidate to all runs (:func:`kinfit.estimation.least_squares.fit`) in a
pool of processes. A candidate derived from a template (an order search, see
:mod:`kinfit.analysis.lattice`) waits for its template's fit and starts from it
(:func:`warm_start`). Progress is reported through one callback,
``progress(n_done, n_total, name)``, called after each fit, so the command line
can draw a bar without the library knowing about it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.defaults import DEFAULT_STARTS
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.mechanism import with_start
from kinfit.numerics.rate_system import compile_mechanism

if TYPE_CHECKING:
    from kinfit.inputs.mechanism import Mechanism

__all__ = ["Candidate", "fit_candidates", "warm_start", "candidate_names", "unique_names",
           "MAX_CANDIDATES"]

MAX_CANDIDATES = 2000


@dataclass(frozen=True)
class Candidate:
    """A model to fit and rank.

    Attributes
    ----------
    name : str
        Unique within a ranking.
    mechanism : Mechanism
    template : str or None
        Name of the candidate this one was derived from by fixing orders
        (its fit provides the starting values); ``None`` for a model given
        as is.
    starts : int or None
        Starting points of its fit (``None``: the ranking's default).
    """

    name: str
    mechanism: Mechanism
    template: str | None = None
    starts: int | None = None


# ------------------------------------------------------------------ names

def unique_names(names):
    """`names` with repeats numbered: ``["a", "a"]`` gives ``["a", "a #2"]``."""
    seen, out = {}, []
    for n in names:
        seen[n] = seen.get(n, 0) + 1
        out.append(n if seen[n] == 1 else f"{n} #{seen[n]}")
    return out


def candidate_names(mechanisms):
    """Unique candidate names for models: their names, with the file name where two agree."""
    names = [m.name for m in mechanisms]
    out = []
    for m, n in zip(mechanisms, names):
        if names.count(n) > 1:
            n = f"{n} ({Path(m.source).name})"
        out.append(n)
    return unique_names(out)


# ------------------------------------------------------------- warm start

def _typical_log_conc(experiment, species):
    """ln of each species' geometric-mean starting concentration (0 where unknown)."""
    out = np.zeros(len(species))
    for i, s in enumerate(species):
        values = [run.initial.get(s, run.fitted_initial[s].value if s in run.fitted_initial
                                  else 0.0) for run in experiment.runs]
        if all(v > 0 for v in values):
            out[i] = float(np.mean(np.log(values)))
    return out


def warm_start(mechanism, template_fit, experiment):
    """`mechanism` starting from its template's best fit.

    Orders left free start at the template's fitted values. Each rate
    constant is rescaled so that its rate at typical starting concentrations
    c̄ (geometric means over runs) is unchanged:
    k_new = k_fit Π_s c̄_s^(e_fit,s − e_new,s), which puts a fixed-order
    candidate's start close to its own optimum whatever the orders' effect
    on the units of k.

    Parameters
    ----------
    mechanism : Mechanism
        The derived candidate's model (the template with orders fixed).
    template_fit : FitResult
    experiment : Experiment

    Returns
    -------
    Mechanism
        `mechanism` with its starting values replaced.
    """
    names = mechanism.parameter_names
    fitted = template_fit.values
    row_fit = np.array([fitted.get(n, mechanism.parameters[n].value) for n in names])
    row_new = np.array([fitted.get(n, p.value) if p.vary else p.value
                        for n, p in mechanism.parameters.items()])
    system = compile_mechanism(mechanism)
    _, e_fit = system.rate_arrays(row_fit)
    _, e_new = system.rate_arrays(row_new)
    shift = (e_fit[0] - e_new[0]) @ _typical_log_conc(experiment, mechanism.species)
    start = {n: v for n, v in zip(names, row_new)}
    done = set()
    for d, (_, law, _) in enumerate(mechanism.directions):
        if law.constant not in done:
            done.add(law.constant)
            start[law.constant] = start[law.constant] * math.exp(float(shift[d]))
    return with_start(mechanism, start)


# ---------------------------------------------------------------- fitting

def _fit_one(experiment, mechanism, starts, seed):
    """Worker entry point (top level so that it pickles)."""
    return fit(experiment, mechanism, starts=starts, seed=seed)


def _workers(requested, n_fits):
    if requested is not None:
        if not isinstance(requested, int) or requested < 1:
            raise KinfitError(f"workers must be a whole number of at least 1, got "
                              f"{requested!r}")
        return min(requested, n_fits)
    try:
        available = len(os.sched_getaffinity(0))
    except AttributeError:
        available = os.cpu_count() or 1
    return max(1, min(available, n_fits))


def fit_candidates(experiment, candidates, starts=DEFAULT_STARTS, seed=0, workers=None,
                   progress=None):
    """Fit every candidate, in parallel over processes.

    A candidate derived from a template (``Candidate.template``) is fitted
    after its template, starting from the template's best fit (see
    :func:`warm_start`). Every fit gets the same `seed`, so the results do
    not depend on the number of workers or the order in which fits finish.

    Parameters
    ----------
    experiment : Experiment
    candidates : sequence of Candidate
    starts : int
        Starting points for candidates whose ``starts`` is ``None``.
    seed : int
    workers : int, optional
        Processes (default: the CPUs available, at most one per candidate);
        1 fits in this process.
    progress : callable, optional
        Called as ``progress(n_done, n_total, name)`` after each fit.

    Returns
    -------
    list of FitResult
        In the order of `candidates`.
    """
    candidates = list(candidates)
    by_name = {c.name: c for c in candidates}
    if len(by_name) != len(candidates):
        raise KinfitError("candidate names must be unique")
    for c in candidates:
        if c.template is not None and c.template not in by_name:
            raise KinfitError(f"candidate '{c.name}' names a template '{c.template}' that is "
                              f"not among the candidates")
    children = {}
    for c in candidates:
        if c.template is not None:
            children.setdefault(c.template, []).append(c)
    # templates first, so that their derived candidates can start early
    ready = sorted((c for c in candidates if c.template is None),
                   key=lambda c: c.name not in children)
    results, total = {}, len(candidates)

    def job(c, template_fit=None):
        mech = c.mechanism if template_fit is None else warm_start(
            c.mechanism, template_fit, experiment)
        return (experiment, mech, c.starts or starts, seed)

    def finished(c, result):
        results[c.name] = result
        if progress is not None:
            progress(len(results), total, c.name)
        return [(child, job(child, result)) for child in children.get(c.name, [])]

    n_workers = _workers(workers, total)
    if n_workers == 1:
        queue = [(c, job(c)) for c in ready]
        while queue:
            c, args = queue.pop(0)
            queue.extend(finished(c, _named(c, _fit_one, *args)))
    else:
        _fit_in_pool(n_workers, [(c, job(c)) for c in ready], finished)
    return [results[c.name] for c in candidates]


def _named(candidate, function, *args):
    try:
        return function(*args)
    except KinfitError as exc:
        raise KinfitError(f"candidate '{candidate.name}': {exc}") from None


def _fit_in_pool(n_workers, initial, finished):
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    pool = ProcessPoolExecutor(max_workers=n_workers)
    try:
        pending = {pool.submit(_fit_one, *args): c for c, args in initial}
        while pending:
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for future in done:
                c = pending.pop(future)
                result = _named(c, future.result)
                for child, args in finished(c, result):
                    pending[pool.submit(_fit_one, *args)] = child
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown()
