"""The result of a least-squares fit: finished, plain data.

:class:`FitResult` carries everything a report quotes (values, standard
errors, intervals, units, roles, statistics, residual checks, warnings, the
settings of the problem it fitted) and serialises itself for ``result.json``;
:func:`kinfit.estimation.least_squares.fit` builds it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.formatting import covariance_interval, interval_quantile
from kinfit.core.units import format_power
from kinfit.estimation.noise import noise_experiment, resolved_mode
from kinfit.estimation.residual_checks import summarize_checks
from kinfit.inputs.mechanism import format_rate_law
from kinfit.inputs.parameters import Role
from kinfit.numerics.integrate import Trajectory
from kinfit.numerics.problem import Problem, build_problem

if TYPE_CHECKING:
    from kinfit.estimation.linear_unknowns import SignalFit
    from kinfit.estimation.residual_checks import TraceCheck
    from kinfit.inputs.experiment import Experiment
    from kinfit.inputs.mechanism import Mechanism

__all__ = ["FitResult", "ProblemSettings", "run_conditions"]


@dataclass(frozen=True)
class ProblemSettings:
    """How the fit's residual problem was built, besides the model and the data.

    The profile likelihood and the sampler rebuild the problem from these, so
    that they work on the problem that was fitted.

    Attributes
    ----------
    method : str
        Integrator (see :func:`kinfit.numerics.integrate.integrate_flat`).
    components : int or str or None
        For full-spectrum data, the override of the experiment's
        ``components`` ("auto", "all" or a number); ``None`` keeps the
        experiment's.
    noise : str
        A mode of :data:`kinfit.estimation.noise.FIT_NOISE_MODES`.
    noise_levels : tuple of (str, float)
        For ``per-species``: the σ of each species the problem is weighted with.
    """

    method: str = "auto"
    components: int | str | None = None
    noise: str = "auto"
    noise_levels: tuple[tuple[str, float], ...] = ()

    def build(self, mechanism: Mechanism, experiment: Experiment) -> Problem:
        """The :class:`~kinfit.numerics.problem.Problem` of `mechanism` and `experiment`."""
        if self.noise != "auto":
            experiment = noise_experiment(experiment, resolved_mode(self.noise, experiment),
                                          dict(self.noise_levels))
        return build_problem(mechanism, experiment, method=self.method,
                             components=self.components)


@dataclass(frozen=True)
class FitResult:
    """Outcome of a global fit.

    Attributes
    ----------
    mechanism, experiment
        What was fitted.
    values : dict of str to float
        Best values of every parameter (fixed ones too).
    stderr : dict of str to float or None
        Standard errors; ``None`` for fixed or unidentifiable parameters.
    units : dict of str to str or None
        Unit of each parameter in the experiment's units ("" if dimensionless).
    roles : dict of str to Role
        Rate constant, order, initial concentration, time offset, ...
    free_names : tuple of str
        Fitted parameters, the order of `covariance` and `correlation`.
    covariance, correlation : ndarray [n_free, n_free] or None
    residuals : ndarray [n_points]
        (f - y)/σ with declared noise, f - y otherwise.
    predicted : ndarray [n_points]
        Model values at the data points.
    n_points, n_free : int
        Data points and fitted parameters (the linear unknowns of signals
        included; see `signals`).
    chi2 : float
        Sum of squared residuals.
    sigma : float or None
        Estimated noise standard deviation sqrt(χ²/(N - p)) when one level is
        shared by all points.
    noise_declared : bool
        Whether the residuals are divided by a σ of each point (declared
        noise, or σ estimated per species).
    noise : {"declared", "shared", "per-species"}
        How the noise was treated (see :mod:`kinfit.estimation.noise`).
    noise_levels : dict of str to float or None
        With ``per-species``: the estimated σ of each species.
    log_likelihood, aic, aicc, bic : float
        See :mod:`kinfit.estimation.likelihood` for the conventions.
    overall_orders : dict of str to float or None
        Overall order of each rate constant's rate law at the fitted values.
    curves : tuple of Trajectory
        Fitted concentrations of each run on a fine grid (data-clock times).
    success : bool
    message : str
    warnings : tuple of str
    starts, starts_at_best : int
    n_evaluations, n_integrations, n_failed : int
        Model evaluations (parameter sets), integrator calls, failed sets.
    method : str
        Integrator used, in words.
    at_bounds : tuple of str
        Fitted parameters that ended at a bound.
    bounds : dict of str to (float, float, bool)
        (min, max, vary) of every parameter.
    signals : SignalFit or None
        For spectrometer signals: absorptivities, offsets and drifts solved
        by variable projection with standard errors from the full Jacobian,
        resolved spectra and the SVD of full-spectrum data (see
        :mod:`kinfit.numerics.signal_model`).
    residual_checks : tuple of TraceCheck
        Runs test and lag-1 autocorrelation of each trace's residuals (see
        :mod:`kinfit.estimation.residual_checks`).
    problem_settings : ProblemSettings
        What the residual problem was built with (integrator, spectral
        components); the profile and the sampler rebuild it from these.
    """

    mechanism: Mechanism
    experiment: Experiment
    values: dict[str, float]
    stderr: dict[str, float | None]
    units: dict[str, str | None]
    roles: dict[str, Role]
    free_names: tuple[str, ...]
    covariance: np.ndarray | None
    correlation: np.ndarray | None
    residuals: np.ndarray
    predicted: np.ndarray
    n_points: int
    n_free: int
    chi2: float
    sigma: float | None
    noise_declared: bool
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    overall_orders: dict[str, float | None]
    curves: tuple[Trajectory, ...]
    success: bool
    message: str
    warnings: tuple[str, ...] = ()
    starts: int = 1
    starts_at_best: int = 1
    n_evaluations: int = 0
    n_integrations: int = 0
    n_failed: int = 0
    method: str = "auto"
    at_bounds: tuple[str, ...] = ()
    bounds: dict[str, tuple[float, float, bool]] = field(default_factory=dict, repr=False)
    signals: SignalFit | None = None
    residual_checks: tuple[TraceCheck, ...] = ()
    problem_settings: ProblemSettings = ProblemSettings()
    noise: str = "shared"
    noise_levels: dict[str, float] | None = None

    @property
    def reduced_chi2(self):
        dof = self.n_points - self.n_free
        return self.chi2 / dof if dof > 0 else math.nan

    @property
    def residual_unit(self):
        """Unit of the unweighted residuals and of σ̂ (plain text): the concentration
        unit, the signal unit ("" for absorbance), or None when both are fitted."""
        exp = self.experiment
        conc = {t.species in self.mechanism.species for r in exp.runs for t in r.traces}
        if self.signals is None or conc == {True}:
            return exp.units.concentration
        return None if True in conc else (self.signals.unit or "")

    def interval(self, name, level=0.95):
        """Covariance interval [lo, hi] of a fitted parameter, or None.

        value ± q·SE with q from Student's t (N − p degrees of freedom) when the
        noise is estimated, from the normal distribution when it is declared;
        symmetric in the parameter itself, k rather than log k (see
        :data:`kinfit.core.formatting.INTERVAL_NOTE`).
        """
        return covariance_interval(self.values.get(name), self.stderr.get(name),
                                   interval_quantile(level, self.interval_dof))

    @property
    def interval_dof(self):
        """Degrees of freedom of the intervals' t quantile: N − p, or None (normal) when
        the noise is declared."""
        return None if self.noise_declared else max(self.n_points - self.n_free, 1)

    @property
    def residual_check_summary(self):
        """What the residual checks judged (see
        :func:`kinfit.estimation.residual_checks.summarize_checks`)."""
        return summarize_checks(self.residual_checks)

    def rate_laws(self, digits=3):
        """Each direction's rate law with fitted orders.

        Returns
        -------
        list of dict
            Keys ``step``, ``reaction``, ``direction``, ``rate``,
            ``rate_constant``, ``overall_order``.
        """
        out = []
        for i, law, sign in self.mechanism.directions:
            step = self.mechanism.steps[i]
            out.append({
                "step": step.label,
                "reaction": step.reaction.text,
                "direction": "forward" if sign > 0 else "reverse",
                "rate": format_rate_law(law, self.values, digits),
                "rate_law": format_rate_law(law),
                "rate_constant": law.constant,
                "overall_order": law.overall_order(self.values),
            })
        return out

    def lmfit_parameters(self):
        """The fitted parameters as :class:`lmfit.Parameters` (values, bounds, standard
        errors and correlations), for users who continue in lmfit."""
        import lmfit

        params = lmfit.Parameters()
        for name, value in self.values.items():
            lo, hi, vary = self.bounds.get(name, (-math.inf, math.inf, False))
            params.add(name, value=value, min=lo, max=hi, vary=vary)
            params[name].stderr = self.stderr.get(name)
        if self.correlation is not None:
            for i, a in enumerate(self.free_names):
                params[a].correl = {b: float(self.correlation[i, j])
                                    for j, b in enumerate(self.free_names) if b != a}
        return params

    def to_dict(self):
        """Plain-Python summary (the content of ``result.json``)."""
        params = {}
        for name, value in self.values.items():
            se = self.stderr.get(name)
            lo, hi, vary = self.bounds.get(name, (-math.inf, math.inf, False))
            params[name] = {
                "value": value,
                "stderr": se,
                "relative_stderr": (se / abs(value)) if se is not None and value else None,
                "unit": self.units.get(name),
                "role": self.roles.get(name),
                "vary": vary,
                "min": lo if math.isfinite(lo) else None,
                "max": hi if math.isfinite(hi) else None,
                "at_bound": name in self.at_bounds,
                "ci95": self.interval(name),
            }
        unit = self.residual_unit
        weighted = self.noise_declared
        stats = {
            "n_data": self.n_points,
            "n_params": self.n_free,
            "chisqr": self.chi2,
            "reduced_chisqr": self.reduced_chi2,
            "noise": {"shared": "estimated"}.get(self.noise, self.noise),
            "sigma": self.sigma,
            "noise_levels": self.noise_levels,
            "log_likelihood": self.log_likelihood,
            "aic": self.aic,
            "aicc": self.aicc,
            "bic": self.bic,
            # chisqr and reduced_chisqr keep their old meaning (the sum of squared residuals,
            # weighted or not); these name what it is
            "weighted": weighted,
            "chi_square": self.chi2 if weighted else None,
            "reduced_chi_square": self.reduced_chi2 if weighted else None,
            "residual_sum_of_squares": None if weighted else self.chi2,
            "residual_sum_of_squares_unit": (None if weighted or unit is None
                                             else format_power(unit, 2) if unit else ""),
            "sigma_unit": None if weighted else unit,
            "ci95_quantile": interval_quantile(0.95, self.interval_dof),
            "ci95_distribution": ("normal" if self.interval_dof is None
                                  else f"Student t, {self.interval_dof} degrees of freedom"),
        }
        corr = None
        if self.correlation is not None:
            corr = {"names": list(self.free_names), "matrix": self.correlation.tolist()}
        return {
            "model": self.mechanism.name,
            "model_file": self.mechanism.source,
            "experiment": self.experiment.name,
            "experiment_file": self.experiment.source,
            "success": self.success,
            "message": self.message,
            "units": {"time": self.experiment.units.time,
                      "concentration": self.experiment.units.concentration},
            "rate_laws": self.rate_laws(),
            "parameters": params,
            "correlation": corr,
            "statistics": stats,
            "fit": {"starts": self.starts, "starts_at_best": self.starts_at_best,
                    "evaluations": self.n_evaluations, "integrations": self.n_integrations,
                    "failed_evaluations": self.n_failed, "integrator": self.method},
            "warnings": list(self.warnings),
            "signals": None if self.signals is None else self.signals.to_dict(),
            "residual_checks": [c.to_dict() for c in self.residual_checks],
            "runs": [run_conditions(run) for run in self.experiment.runs],
            "residual_check_summary": self.residual_check_summary,
        }


def run_conditions(run):
    """A run's starting conditions for the reports' table of runs."""
    measured = list(run.species) + (["spectra"] if run.spectrum is not None else [])
    return {"name": run.name, "initial": dict(run.initial),
            "fitted_initial": {s: p.name for s, p in run.fitted_initial.items()},
            "temperature_K": run.temperature,
            "n_points": run.n_points, "measured": measured}
