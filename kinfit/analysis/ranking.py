"""Ranking candidate rate laws and mechanisms fitted to the same runs: the front door.

A chemist rarely knows the rate law in advance. :func:`rank` fits every
candidate to all runs at once (:mod:`kinfit.analysis.candidates`), optionally
adds a search over orders (:mod:`kinfit.analysis.lattice`: a template model with
some order parameters fixed to every combination of listed values), and
:func:`compare` ranks the fits by an information criterion.

A :class:`Comparison` holds the ranked rows (:class:`Ranked`) with their
criterion differences, weights and evidence words
(:mod:`kinfit.analysis.criteria`), the tests of nested pairs
(:mod:`kinfit.analysis.nesting`), model averages, warnings, a plain-language
verdict and, from :func:`rank`, the initial-rates cross-check
(:mod:`kinfit.analysis.cross_check`).

Rows are sorted by the chosen criterion (AICc by default), ties by fewer
parameters. When the runner-up is within ΔAICc 2 of the best the verdict
says the two are not distinguishable with these data and names the measured
point where their predictions differ most, in noise standard deviations
(``Comparison.separation``): a run there would separate them.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np

from kinfit.analysis.candidates import (
    MAX_CANDIDATES,
    Candidate,
    candidate_names,
    fit_candidates,
    unique_names,
)
from kinfit.analysis.criteria import (
    CRITERIA,
    SOURCES,
    criterion_weights,
    evidence_aicc,
    evidence_bic,
    evidence_bic_for_best,
    model_averages,
)
from kinfit.analysis.cross_check import CrossCheck, check_against_initial_rates
from kinfit.analysis.lattice import order_lattice, template_for
from kinfit.analysis.nesting import nested_tests
from kinfit.core.defaults import (
    DEFAULT_CRITERION,
    DEFAULT_MAX_CONVERSION,
    DEFAULT_STARTS,
    LATTICE_STARTS,
)
from kinfit.core.errors import KinfitError

if TYPE_CHECKING:
    from kinfit.analysis.criteria import ModelAverage
    from kinfit.analysis.nesting import NestedTest
    from kinfit.estimation.fit_result import FitResult

__all__ = ["Ranked", "Comparison", "compare", "rank"]

_INDISTINCT = 2.0     # ΔAICc within which the top candidates are not distinguished
_NEAR = 4.0           # ΔAICc within which a candidate's fit warnings are shown


# ------------------------------------------------------------------ results

@dataclass(frozen=True)
class Ranked:
    """One fitted candidate in a ranking.

    Attributes
    ----------
    name : str
    fit : FitResult
    fixed : dict of str to float
        Model parameters the candidate does not fit (empty for none).
    template : str or None
    n_params : int
        Fitted parameters p (per-run ones included).
    chisqr, log_likelihood, aic, aicc, bic : float
    delta_aic, delta_aicc, delta_bic : float
        Differences from the smallest value of each criterion.
    aic_weight, akaike_weight, bic_weight : float
        Weights from AIC, AICc and BIC (each sums to 1 over the candidates).
    evidence_aicc, evidence_bic : str
        Plain-language reading of delta_aicc and delta_bic.
    """

    name: str
    fit: FitResult = field(repr=False)
    fixed: dict[str, float]
    template: str | None
    n_params: int
    chisqr: float
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    delta_aic: float
    delta_aicc: float
    delta_bic: float
    aic_weight: float
    akaike_weight: float
    bic_weight: float
    evidence_aicc: str
    evidence_bic: str

    @property
    def label(self):
        """Short label: the fixed orders for a derived candidate, else the name."""
        if self.template is not None and self.fixed:
            return ", ".join(f"{k}={v:g}" for k, v in self.fixed.items())
        return self.name

    def to_dict(self):
        """Plain-Python form: one entry of ``candidates`` in ``ranking.json``.

        The model, parameters, rate laws and fit warnings are the fit's own
        (:meth:`FitResult.to_dict`), so a candidate's parameter table has the
        fields of ``result.json`` plus ``fitted`` (the same as ``vary``; the
        name earlier ``ranking.json`` files used, kept for their readers).
        """
        fit_ = self.fit.to_dict()
        parameters = {name: {**entry, "fitted": entry["vary"]}
                      for name, entry in fit_["parameters"].items()}
        return {
            "name": self.name,
            "model": fit_["model"],
            "model_file": fit_["model_file"],
            "template": self.template,
            "fixed": dict(self.fixed),
            "n_params": self.n_params,
            "chisqr": self.chisqr,
            "log_likelihood": self.log_likelihood,
            "aic": self.aic,
            "aicc": self.aicc,
            "bic": self.bic,
            "delta_aic": self.delta_aic,
            "delta_aicc": self.delta_aicc,
            "delta_bic": self.delta_bic,
            "aic_weight": self.aic_weight,
            "akaike_weight": self.akaike_weight,
            "bic_weight": self.bic_weight,
            "evidence_aicc": self.evidence_aicc,
            "evidence_bic": self.evidence_bic,
            "success": fit_["success"],
            "rate_laws": fit_["rate_laws"],
            "parameters": parameters,
            "fit": {"starts": fit_["fit"]["starts"],
                    "starts_at_best": fit_["fit"]["starts_at_best"]},
            "warnings": fit_["warnings"],
        }


@dataclass(frozen=True)
class Comparison:
    """Candidates ranked by an information criterion.

    Attributes
    ----------
    candidates : tuple of Ranked
        Best first by `criterion` (ties: fewer parameters first).
    criterion : str
        "aicc", "aic" or "bic".
    n_points : int
    noise_declared : bool
    nested : tuple of NestedTest
    averages : tuple of ModelAverage
    verdict : tuple of str
        Plain-language sentences, most important first.
    warnings : tuple of str
    separation : dict or None
        When the top two are not distinguished: where their predictions for
        the measured points differ most (run, species, time, difference in
        noise standard deviations).
    cross_check : CrossCheck or None
    """

    candidates: tuple[Ranked, ...]
    criterion: str
    n_points: int
    noise_declared: bool
    nested: tuple[NestedTest, ...] = ()
    averages: tuple[ModelAverage, ...] = ()
    verdict: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    separation: dict | None = None
    cross_check: CrossCheck | None = None

    @property
    def best(self):
        return self.candidates[0]

    def __getitem__(self, name):
        for row in self.candidates:
            if row.name == name:
                return row
        raise KeyError(name)

    def to_dict(self):
        """Plain-Python form: the content of ``ranking.json``."""
        exp = self.best.fit.experiment
        return {
            "experiment": exp.name,
            "experiment_file": exp.source,
            "criterion": self.criterion,
            "n_points": self.n_points,
            "noise": "declared" if self.noise_declared else "estimated",
            "candidates": [r.to_dict() for r in self.candidates],
            "nested_tests": [vars(t).copy() for t in self.nested],
            "model_averages": [a.to_dict() for a in self.averages],
            "verdicts": list(self.verdict),
            "warnings": list(self.warnings),
            "separation": self.separation,
            "initial_rates": None if self.cross_check is None else self.cross_check.to_dict(),
            "evidence_scales": dict(SOURCES),
        }


# ----------------------------------------------------------------- compare

def compare(fits, names=None, criterion=DEFAULT_CRITERION, templates=None):
    """Rank fits of several candidates to the same runs.

    Parameters
    ----------
    fits : sequence of FitResult
        All fitted to the same experiment.
    names : sequence of str, optional
        Candidate names (default: the models' names, made unique).
    criterion : {"aicc", "aic", "bic"}
        Sorting criterion.
    templates : sequence of str or None, optional
        For each fit, the candidate it was derived from (order search).

    Returns
    -------
    Comparison
        Rows sorted best first, with deltas, weights and evidence; nested
        tests, model averages, verdict and warnings.
    """
    fits = list(fits)
    if len(fits) < 2:
        raise KinfitError("a ranking needs at least two candidates")
    if criterion not in CRITERIA:
        raise KinfitError(f"unknown criterion {criterion!r}; choose one of "
                          f"{', '.join(CRITERIA)}")
    names = unique_names(list(names) if names is not None else
                         [f.mechanism.name for f in fits])
    if len(set(names)) != len(names):
        raise KinfitError("candidate names must be unique")
    templates = list(templates) if templates is not None else [None] * len(fits)
    first = fits[0]
    for f, n in zip(fits, names):
        if (f.experiment.source, f.n_points, f.noise_declared) != (
                first.experiment.source, first.n_points, first.noise_declared):
            raise KinfitError(f"candidate '{n}' was fitted to different data "
                              f"({f.experiment.source}, {f.n_points} points) than "
                              f"'{names[0]}' ({first.experiment.source}, {first.n_points} "
                              f"points); information criteria compare fits to the same data "
                              f"only")
    crit = {c: criterion_weights([getattr(f, c) for f in fits]) for c in CRITERIA}
    rows = []
    for i, (f, n, t) in enumerate(zip(fits, names, templates)):
        fixed = {p: v.value for p, v in f.mechanism.parameters.items() if not v.vary}
        rows.append(Ranked(
            name=n, fit=f, fixed=fixed, template=t, n_params=f.n_free, chisqr=f.chi2,
            log_likelihood=f.log_likelihood, aic=f.aic, aicc=f.aicc, bic=f.bic,
            delta_aic=float(crit["aic"][0][i]), delta_aicc=float(crit["aicc"][0][i]),
            delta_bic=float(crit["bic"][0][i]), aic_weight=float(crit["aic"][1][i]),
            akaike_weight=float(crit["aicc"][1][i]), bic_weight=float(crit["bic"][1][i]),
            evidence_aicc=evidence_aicc(float(crit["aicc"][0][i])),
            evidence_bic=evidence_bic(float(crit["bic"][0][i]))))
    key = {"aicc": "delta_aicc", "aic": "delta_aic", "bic": "delta_bic"}[criterion]
    rows.sort(key=lambda r: (getattr(r, key), r.n_params, r.name))
    nested, equivalent = nested_tests(rows, first.n_points)
    warnings = _warnings(rows, equivalent)
    separation = _separation(rows) if len(rows) > 1 and \
        rows[1].delta_aicc - rows[0].delta_aicc <= _INDISTINCT else None
    comparison = Comparison(candidates=tuple(rows), criterion=criterion,
                            n_points=first.n_points, noise_declared=first.noise_declared,
                            nested=nested, averages=model_averages(rows),
                            warnings=tuple(warnings), separation=separation)
    return replace(comparison, verdict=tuple(_verdict(comparison)))


def _warnings(rows, equivalent):
    out = []
    failed = [r.name for r in rows if not r.fit.success]
    if failed:
        out.append(f"{len(failed)} candidate(s) did not report convergence: "
                   f"{', '.join(failed[:5])}{' ...' if len(failed) > 5 else ''}; their "
                   f"criteria may be too high")
    for a, b in equivalent:
        out.append(f"'{a}' and '{b}' are the same model written twice; their weights split "
                   f"the support one model would get")
    # fit warnings of the candidates that matter: the best and those near it
    for r in rows:
        if r is rows[0] or r.delta_aicc - rows[0].delta_aicc <= _NEAR:
            out.extend(f"{r.name}: {w}" for w in r.fit.warnings)
    return out


def _separation(rows):
    """Where the top two candidates' predictions of the measured points differ most."""
    a, b = rows[0].fit, rows[1].fit
    scale = 1.0 if a.noise_declared else (a.sigma or 1.0)
    diff = (a.residuals - b.residuals) / scale
    i = int(np.argmax(np.abs(diff)))
    start = 0
    for run in a.experiment.runs:
        for trace in run.traces:
            n = trace.times.size
            if i < start + n:
                return {"run": run.name, "species": trace.species,
                        "time": float(trace.times[i - start]),
                        "difference_in_sigma": float(abs(diff[i]))}
            start += n
    return None


def _verdict(comparison):
    rows, crit = comparison.candidates, comparison.criterion
    best = rows[0]
    label = {"aicc": "AICc", "aic": "AIC", "bic": "BIC"}[crit]
    out = [f"Best by {label}: '{best.name}' (Akaike weight {best.akaike_weight:.3g}, "
           f"BIC weight {best.bic_weight:.3g})."]
    if len(rows) > 1:
        second = rows[1]
        d_aicc = second.delta_aicc - best.delta_aicc
        d_bic = second.delta_bic - best.delta_bic
        out.append(f"Runner-up '{second.name}': ΔAICc = {d_aicc:.2f} "
                   f"({evidence_aicc(d_aicc) if d_aicc > 0 else 'as good'}, Burnham & "
                   f"Anderson); ΔBIC = {d_bic:.2f} ({evidence_bic_for_best(d_bic)}, Kass & "
                   f"Raftery).")
        if d_aicc <= _INDISTINCT:
            sep = comparison.separation
            where = ""
            if sep:
                where = (f" Their predictions of the measured points differ by at most "
                         f"{sep['difference_in_sigma']:.2g} noise standard deviations (run "
                         f"{sep['run']}, {sep['species']} at t = {sep['time']:g}); a run "
                         f"where they differ by several would separate them.")
            out.append(f"The top candidates are not distinguishable with these data "
                       f"(ΔAICc ≤ {_INDISTINCT:g}).{where}")
    for test in comparison.nested:
        if best.name not in (test.smaller, test.larger):
            continue
        other = test.larger if test.smaller == best.name else test.smaller
        if test.smaller == best.name:
            out.append(f"Against the larger '{other}' ({test.extra_params} more parameter(s)): "
                       f"F-test p = {test.f_pvalue:.3g}, likelihood-ratio p = "
                       f"{test.lr_pvalue:.3g}; "
                       + ("the extra parameters are not needed at the 5 % level."
                          if test.f_pvalue >= 0.05 else
                          "the data call for the extra parameters at the 5 % level."))
        elif test.f_pvalue >= 0.05:
            out.append(f"The simpler '{other}' is not rejected against the best (F-test "
                       f"p = {test.f_pvalue:.3g}).")
    return out


# ----------------------------------------------------------------- rank

def rank(experiment, mechanisms, orders=None, *, starts=DEFAULT_STARTS,
         lattice_starts=LATTICE_STARTS, seed=0, workers=None, criterion=DEFAULT_CRITERION,
         cross_check=True, max_conversion=DEFAULT_MAX_CONVERSION, progress=None):
    """Fit candidate models to every run and rank them.

    Parameters
    ----------
    experiment : Experiment
    mechanisms : Mechanism or sequence of Mechanism
        Candidates given as they are.
    orders : mapping of str to sequence of float, optional
        An order search: the first mechanism that has all these order
        parameters is the template; each combination of values gives one
        fixed-order candidate, ranked alongside the template's own fit.
    starts : int
        Starting points for each given model's fit.
    lattice_starts : int
        Starting points for each fixed-order candidate (which starts from
        the template's fit; see :data:`LATTICE_STARTS`).
    seed : int
    workers : int, optional
        Processes for the fits (default: the CPUs available).
    criterion : {"aicc", "aic", "bic"}
    cross_check : bool
        Run the initial-rates method beside the best one-step candidate.
    max_conversion : float
        Window of the initial-rates method.
    progress : callable, optional
        ``progress(n_done, n_total, name)`` after each fit.

    Returns
    -------
    Comparison
    """
    if hasattr(mechanisms, "parameters"):
        mechanisms = [mechanisms]
    mechanisms = list(mechanisms)
    if not mechanisms:
        raise KinfitError("give at least one model to rank")
    if criterion not in CRITERIA:
        raise KinfitError(f"unknown criterion {criterion!r}; choose one of "
                          f"{', '.join(CRITERIA)}")
    names = candidate_names(mechanisms)
    candidates = [Candidate(n, m) for n, m in zip(names, mechanisms)]
    if orders:
        grid = {k: tuple(float(v) for v in vals) for k, vals in dict(orders).items()}
        t = template_for(mechanisms, grid)
        candidates += order_lattice(mechanisms[t], grid, name=names[t], starts=lattice_starts)
    if len(candidates) < 2:
        raise KinfitError("a ranking needs at least two candidates: give another --model or "
                          "an order search with --orders")
    if len(candidates) > MAX_CANDIDATES:
        raise KinfitError(f"{len(candidates)} candidates; kinfit ranks at most "
                          f"{MAX_CANDIDATES}")
    fits = fit_candidates(experiment, candidates, starts=starts, seed=seed, workers=workers,
                          progress=progress)
    comparison = compare(fits, [c.name for c in candidates], criterion,
                         [c.template for c in candidates])
    if cross_check:
        check = check_against_initial_rates(comparison.candidates, experiment,
                                            max_conversion)
        if isinstance(check, str):
            comparison = replace(comparison, warnings=comparison.warnings + (check,))
        else:
            comparison = replace(comparison, cross_check=check,
                                 warnings=comparison.warnings + check.warnings)
    return comparison
