"""Global least-squares fit of a mechanism to every run at once.

All runs are fitted together: rate constants and orders are shared by every
run; fitted initial concentrations and time offsets belong to one run each.

How the fit is set up
---------------------
* Rate constants are fitted as log10 k, orders, initial concentrations and
  time offsets on their own scale (:mod:`kinfit.estimation.scale` owns the
  fitting scale and its start box). Values, standard errors and correlations
  are reported on the natural scale (delta method).
* Several starting points: the model file's values, plus the best of a
  Latin-hypercube screen of the start box (all screened sets are evaluated in
  one vectorised integration, in chunks that keep a chunk's model values
  under about 50 MB, with a small work bound and no hand-over to the stiff
  integrators, so that a candidate that is hard to integrate is dropped
  cheaply). Each start is refined by a bounded
  Levenberg–Marquardt loop (:mod:`kinfit.estimation.levenberg_marquardt`);
  the best is kept and the number of starts that reached it is reported.
* The Jacobian is exact: forward sensitivity equations are integrated with
  the states (:mod:`kinfit.numerics.integrators`), so one integration gives
  residuals and Jacobian together. lmfit is used at the edges — the result converts to
  :class:`lmfit.Parameters` — not inside the loop, where its parameter
  objects would cost more than the integration.
* Standard errors come from (JᵀJ)⁻¹ on the fitting scale, scaled by the
  reduced χ² when the noise is estimated from the fit and unscaled when it is
  declared, then mapped to the natural scale by the delta method. A parameter
  that does not change the model, or a near-singular JᵀJ (condition number of
  the column-scaled matrix above 1e14), gives no covariance and a warning
  naming the problem. With spectrometer signals the covariance uses Kaufman's
  projected Jacobian, whose JᵀJ is the Schur complement of the full normal
  matrix, so the kinetic standard errors are those of a fit of every
  parameter (:mod:`kinfit.numerics.signal_model`). The log-likelihood and
  AIC, AICc and BIC follow :mod:`kinfit.estimation.likelihood`.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from kinfit.core.defaults import DEFAULT_STARTS
from kinfit.core.errors import KinfitError
from kinfit.core.formatting import covariance_interval, interval_quantile
from kinfit.estimation.fit_result import FitResult, ProblemSettings
from kinfit.estimation.levenberg_marquardt import local_fit
from kinfit.estimation.likelihood import (
    count_parameters,
    gaussian_log_likelihood,
    information_criteria,
)
from kinfit.estimation.linear_unknowns import resolve_signals
from kinfit.estimation.noise import (
    MAX_PASSES,
    converged,
    resolved_mode,
    species_levels,
)
from kinfit.estimation.residual_checks import check_residuals
from kinfit.estimation.run_warnings import run_warnings
from kinfit.estimation.scale import ScaledProblem, fit_scale
from kinfit.inputs.parameters import Role
from kinfit.inputs.temperature import ENERGY_UNIT
from kinfit.numerics.integrate import Trajectory, describe_method

if TYPE_CHECKING:
    pass

__all__ = ["fit", "parameter_unit", "rate_constant_warnings"]

_SCREEN_RHS = 5_000


# -------------------------------------------------------------------- fit

def fit(experiment, mechanism, starts=DEFAULT_STARTS, seed=0, method="auto",
        max_evaluations=None, components=None, noise="auto"):
    """Fit `mechanism` to all runs of `experiment` at once.

    Parameters
    ----------
    experiment : Experiment
    mechanism : Mechanism
    starts : int
        Number of starting points refined by least squares (1 = only the
        model file's values).
    seed : int
        Seed of the start screen (the fit is otherwise deterministic).
    method : str
        Integrator, see :func:`kinfit.numerics.integrate.integrate_flat` (default
        "auto": compiled explicit, LSODA where stiff).
    max_evaluations : int, optional
        Bound on residual evaluations per start (default 100 (p + 1)).
    components : int or str, optional
        For full-spectrum data, overrides the experiment's ``components``
        ("auto", "all" or a number of singular vectors to fit).
    noise : {"auto", "declared", "shared", "per-species"}
        How measurement noise is treated (see :mod:`kinfit.estimation.noise`):
        the declared noise if any, else one level shared by all points
        ("auto"); only the declared; one shared level estimated; or one
        level per species estimated.

    Returns
    -------
    FitResult
    """
    if not isinstance(starts, int) or starts < 1:
        raise KinfitError(f"starts must be a whole number of at least 1, got {starts!r}")
    mode = resolved_mode(noise, experiment)
    settings = ProblemSettings(method=method, components=components,
                               noise="shared" if mode == "per-species" else noise)
    problem = settings.build(mechanism, experiment)
    scale = fit_scale(problem)
    evaluator = ScaledProblem(problem, scale)
    n_points, n_free = problem.observation.n_points, count_parameters(problem)
    if n_free >= n_points:
        raise KinfitError(f"{experiment.source}: {n_free} fitted parameters but only {n_points} "
                          f"data points; fix some parameters or add data")

    if not scale.n_model:
        outcomes = [(scale.start, float(np.sum(evaluator.residuals(scale.start)[0] ** 2)), True,
                     "no free parameters: evaluated at the given values", 0)]
    else:
        outcomes = [local_fit(evaluator, u, max_evaluations)
                    for u in _start_points(evaluator, starts, seed)]
    best = min(outcomes, key=lambda o: o[1] if math.isfinite(o[1]) else math.inf)
    u_best, chi2_best, success, message, failed = best
    tol = 1e-6 * max(chi2_best, 1e-300) + 1e-12
    at_best = sum(1 for o in outcomes if o[1] <= chi2_best + tol)
    if mode == "per-species":
        evaluator, settings, (u_best, _, success, message, failed) = _per_species(
            evaluator, settings, u_best, max_evaluations)
    return _result(evaluator, u_best, success, message, len(outcomes), at_best, failed,
                   settings)


def _deviations(evaluator, u):
    """Model − data at `u`, in the data's units."""
    res = evaluator.residuals(u)[0]
    sigma = evaluator.problem.observation.sigma
    return res if sigma is None else res * sigma


def _per_species(evaluator, settings, u, max_evaluations):
    """Alternate weighted fits and σ_s updates until the σ_s settle (see
    :mod:`kinfit.estimation.noise`); the last fit's evaluator, settings and outcome."""
    problem = evaluator.problem
    mechanism, experiment = problem.mechanism, problem.experiment
    n_free, source = count_parameters(problem), experiment.source
    levels = species_levels(problem.observation, _deviations(evaluator, u), n_free, source)
    for _ in range(MAX_PASSES):
        settings = ProblemSettings(method=settings.method, components=settings.components,
                                   noise="per-species", noise_levels=tuple(levels.items()))
        problem = settings.build(mechanism, experiment)
        evaluator = ScaledProblem(problem, fit_scale(problem))
        outcome = local_fit(evaluator, u, max_evaluations)
        u = outcome[0]
        new = species_levels(problem.observation, _deviations(evaluator, u), n_free, source)
        if converged(levels, new):
            return evaluator, settings, outcome
        levels = new
    u, chi2, _, message, failed = outcome
    return evaluator, settings, (u, chi2, False, f"the noise levels per species did not "
                                 f"settle in {MAX_PASSES} passes ({message})", failed)


def _start_points(evaluator, starts, seed):
    """The model file's start plus the best points of a Latin-hypercube screen."""
    scale = evaluator.scale
    points = [scale.start]
    if starts == 1:
        return points
    from scipy.stats import qmc

    n_screen = max(16, 4 * starts)
    sampler = qmc.LatinHypercube(d=scale.n_dim, seed=np.random.default_rng(seed))
    cand = scale.box_lower + sampler.random(n_screen) * (scale.box_upper - scale.box_lower)
    # All candidates in one call, with a small work bound and no hand-over to
    # the implicit integrator: a candidate whose equations are very hard to
    # integrate is a poor start and is dropped cheaply.
    # (in chunks small enough that the model values of a chunk stay well under
    # ~50 MB, so that a million-point data set does not multiply its memory)
    size = evaluator.problem.observation.n_points * evaluator.problem.mechanism.n_species
    per_call = int(max(1, min(n_screen, 6_000_000 // max(size, 1))))
    chi2 = np.concatenate([
        np.sum(evaluator.residuals(chunk, max_rhs=_SCREEN_RHS, fallback=False) ** 2, axis=1)
        for chunk in np.array_split(cand, math.ceil(n_screen / per_call))])
    order = np.argsort(chi2)
    points.extend(cand[i] for i in order[:starts - 1])
    return points


# ----------------------------------------------------------------- result

class _Statistics(NamedTuple):
    """Goodness of fit at the optimum."""

    chi2: float
    dof: int
    sigma: float | None         # estimated noise σ̂ = sqrt(χ²/(N − p)); None when declared
    noise_scale: float          # factor of (JᵀJ)⁻¹: 1 when declared, else χ²/(N − p)
    log_likelihood: float
    criteria: dict


def _result(evaluator, u, success, message, n_starts, at_best, failed, settings):
    """Assemble the :class:`FitResult` at the best point `u` of the fitting scale."""
    problem, scale = evaluator.problem, evaluator.scale
    values_row = scale.to_values(u)[0]
    values = {n: float(v) for n, v in zip(problem.names, values_row)}
    if scale.n_model:
        res, jac = evaluator.residuals_jacobian(u)
    else:
        res, jac = evaluator.residuals(u)[0], None
    pred = res * problem.observation.sigma if problem.sigma_known else res.copy()
    pred = pred + problem.observation.values
    stats = _statistics(problem, res)
    covariance, correlation, stderr, singular = _uncertainty(problem, scale, jac, u,
                                                             stats.noise_scale)
    at_bounds = _at_bounds(scale, u)
    signals = None
    if problem.signal is not None:
        signals = resolve_signals(problem, values_row, covariance,
                                  scale.free_index.tolist(), stats.noise_scale)
    mech, exp = problem.mechanism, problem.experiment
    overall = mech.overall_orders(values)
    units, roles, unit_warnings = _units_and_roles(problem, overall)
    warnings = singular + _fit_warnings(
        problem, values, at_bounds, n_starts, at_best, stats,
        () if signals is None else signals.warnings, failed, success, message) + unit_warnings
    # Per-run warnings (kinfit.estimation.run_warnings): steps a run cannot start, a run
    # that carries the misfit, a reference temperature outside the runs.
    warnings += run_warnings(mech, exp, values, res)
    dof = None if problem.sigma_known else max(res.size - count_parameters(problem), 1)
    warnings += rate_constant_warnings(mech, values, stderr, units,
                                       interval_quantile(0.95, dof))   # as FitResult.interval
    return FitResult(
        mechanism=mech, experiment=exp, values=values, stderr=stderr, units=units,
        roles=roles, free_names=scale.names, covariance=covariance, correlation=correlation,
        residuals=res, predicted=pred, n_points=res.size, n_free=count_parameters(problem),
        chi2=stats.chi2, sigma=stats.sigma, noise_declared=problem.sigma_known,
        log_likelihood=stats.log_likelihood, aic=stats.criteria["aic"],
        aicc=stats.criteria["aicc"], bic=stats.criteria["bic"], overall_orders=overall,
        curves=_curves(problem, values_row), success=success, message=message,
        warnings=tuple(warnings), starts=n_starts, starts_at_best=at_best,
        n_evaluations=evaluator.evaluations, n_integrations=evaluator.integrations,
        n_failed=evaluator.failed,
        method=describe_method(problem.method, evaluator.n_stiff, evaluator.n_implicit,
                               tally=True),
        at_bounds=at_bounds,
        bounds={p.name: (p.min, p.max, p.vary) for p in problem.parameters}, signals=signals,
        residual_checks=tuple(check_residuals(exp, res)), problem_settings=settings,
        noise=("per-species" if settings.noise == "per-species"
               else "declared" if problem.sigma_known else "shared"),
        noise_levels=dict(settings.noise_levels) or None)


def _statistics(problem, res):
    """χ², degrees of freedom, σ̂, log-likelihood and information criteria."""
    n_free = count_parameters(problem)
    chi2 = float(res @ res)
    declared = problem.sigma_known
    dof = res.size - n_free
    sigma = None if declared else math.sqrt(chi2 / dof)
    log_lik = float(gaussian_log_likelihood(res, problem.observation.sigma)[0])
    return _Statistics(chi2=chi2, dof=dof, sigma=sigma,
                       noise_scale=1.0 if declared else chi2 / dof, log_likelihood=log_lik,
                       criteria=information_criteria(log_lik, res.size, n_free))


def _uncertainty(problem, scale, jac, u, noise_scale):
    """Natural-scale covariance, correlation and standard errors of the free parameters.

    Returns
    -------
    (covariance or None, correlation or None, stderr dict, list of warnings)
    """
    covariance = correlation = None
    stderr = {n: None for n in problem.names}
    if not scale.n_model:
        return covariance, correlation, stderr, []
    if problem.signal is not None:
        jac = _kaufman_jacobian(problem, scale, u)
    covariance, singular = _covariance(jac, scale, u, noise_scale)
    warnings = []
    if singular:
        warnings.append("the data cannot pin down all parameters together (the Jacobian "
                        f"is singular): {singular}; fix one of them or add runs that "
                        "separate them")
    if covariance is not None:
        se = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
        for n, s in zip(scale.names, se):
            stderr[n] = float(s) if np.isfinite(s) else None
        with np.errstate(invalid="ignore", divide="ignore"):
            correlation = covariance / np.outer(se, se)
    return covariance, correlation, stderr, warnings


def _at_bounds(scale, u):
    """Names of the free parameters within 1e-6 (relative) of a finite bound."""
    return tuple(n for n, x, a, b in zip(scale.names, u, scale.lower, scale.upper)
                 if (math.isfinite(a) and x - a <= 1e-6 * max(1.0, abs(a)))
                 or (math.isfinite(b) and b - x <= 1e-6 * max(1.0, abs(b))))


def _fit_warnings(problem, values, at_bounds, n_starts, at_best, stats, signal_warnings,
                  failed, success, message):
    """Bounds, starts, the χ² test of declared noise, signals, failures, convergence."""
    warnings = []
    for n in at_bounds:
        warnings.append(f"{n} = {values[n]:.4g} is at a bound; its standard error assumes it "
                        f"is not, and the true optimum may lie beyond")
    if n_starts > 1 and at_best < max(2, n_starts // 2):
        warnings.append(f"only {at_best} of {n_starts} starting points reached the best fit; "
                        f"the least-squares surface has other minima (try more starts)")
    chi2, dof = stats.chi2, stats.dof
    if problem.sigma_known and dof > 0:
        from scipy.stats import chi2 as chi2_dist

        p_high = chi2_dist.sf(chi2, dof)
        if p_high < 1e-3:
            warnings.append(f"χ²/(N−p) = {chi2 / dof:.3g}: the residuals are larger than the "
                            f"declared noise; the model may miss something or the noise is "
                            f"underestimated")
        elif chi2_dist.cdf(chi2, dof) < 1e-3:
            warnings.append(f"χ²/(N−p) = {chi2 / dof:.3g}: the residuals are smaller than the "
                            f"declared noise; the noise may be overestimated")
    warnings += list(signal_warnings)
    if failed:
        warnings.append(f"{failed} model evaluation(s) failed to integrate on the way to the "
                        f"best fit and were treated as very poor fits")
    if not success:
        warnings.append(f"the optimiser did not report convergence: {message}")
    return warnings


# ------------------------------------------- rate constants the data barely pin down

def rate_constant_warnings(mechanism, values, stderr, units, quantile=1.959963984540054):
    """Fitted rate constants whose 95 % interval includes zero or spans over a factor of ten.

    The interval is the one the reports show beside the standard error,
    k ± q se (covariance, delta method; q from :meth:`FitResult.interval`'s rule:
    Student's t with N − p degrees of freedom when the noise is estimated, the
    normal 1.96 by default). One that reaches zero means the
    data do not show the step at all; one whose ends differ by more than a
    factor of ten (se/k above about 0.42) means they hardly measure it. Each
    warning names the rate constant and the step(s) it belongs to, and
    suggests the model without that step (or, for a reverse rate constant,
    with the step irreversible), to be compared with this one by a ranking.

    Parameters
    ----------
    mechanism : Mechanism
    values, stderr, units : dict of str
        Of the fit (see :class:`FitResult`).
    quantile : float
        q of the 95 % interval.

    Returns
    -------
    list of str
    """
    out = []
    for name, par in mechanism.parameters.items():
        se = stderr.get(name)
        if par.role != Role.RATE_CONSTANT or not par.vary or se is None or not se > 0:
            continue
        k = values[name]
        lo, hi = covariance_interval(k, se, quantile)
        span = f"[{lo:.2g}, {hi:.2g}] {units.get(name) or ''}".rstrip()
        if lo <= 0:
            what = f"its 95 % interval {span} includes zero: the data do not show this step"
        elif hi / lo > 10:
            what = (f"its 95 % interval {span} spans a factor of {hi / lo:.0f}: the data "
                    f"hardly measure it")
        else:
            continue
        uses = [(mechanism.steps[i], sign) for i, law, sign in mechanism.directions
                if law.constant == name]
        if len(mechanism.steps) > 1 or any(sign < 0 for _, sign in uses):
            options = [f"with {step.label} ({step.reaction.text}) irreversible" if sign < 0
                       else f"without {step.label} ({step.reaction.text})" for step, sign in uses]
            advice = (f"try the model {' and '.join(options)}, and rank the two (kinfit rank "
                      f"with both model files)")
        else:
            advice = "runs over a longer time or a wider range of concentrations would pin it down"
        out.append(f"{name} = {k:.3g} ± {se:.2g}: {what}; {advice}")
    return out


# Unit of each role, from the experiment's units and the overall order of the
# rate law a rate constant belongs to; roles not listed are dimensionless.
_UNIT_OF_ROLE = {
    Role.RATE_CONSTANT: lambda units, order: units.rate_constant(order),
    Role.INITIAL: lambda units, order: units.concentration,
    Role.TIME_OFFSET: lambda units, order: units.time,
    Role.NOISE: lambda units, order: units.concentration,
    Role.ACTIVATION_ENERGY: lambda units, order: ENERGY_UNIT,
    Role.ACTIVATION_ENTHALPY: lambda units, order: ENERGY_UNIT,
}


def parameter_unit(role, units, overall_order=None):
    """Unit of a parameter of `role` in the experiment's `units` ("" if dimensionless).

    Parameters
    ----------
    role : Role
    units : Units
        The experiment's units.
    overall_order : float or None
        For a rate constant, the overall order of its rate law (None when it
        has none: the unit is then left open).
    """
    rule = _UNIT_OF_ROLE.get(role)
    return "" if rule is None else rule(units, overall_order)


def _units_and_roles(problem, overall):
    """Unit and role of every parameter, and warnings about units that do not exist."""
    units = {p.name: parameter_unit(p.role, problem.experiment.units, overall.get(p.name))
             for p in problem.parameters}
    roles = {p.name: p.role for p in problem.parameters}
    warnings = [f"{name} appears in rate laws of different overall order, so it has no "
                f"single unit" for name, order in overall.items() if order is None]
    return units, roles, warnings


def _covariance(jac, scale, u, noise_scale):
    """Natural-scale covariance from a fitting-scale Jacobian; (cov, singular names)."""
    jtj = jac.T @ jac
    try:
        # scale columns to unit norm so the condition number reflects identifiability
        norms = np.sqrt(np.diag(jtj))
        if np.any(norms == 0):
            zero = ", ".join(n for n, v in zip(scale.names, norms) if v == 0)
            return None, f"{zero} do(es) not change the model at all"
        scaled = jtj / np.outer(norms, norms)
        if np.linalg.cond(scaled) > 1e14:
            return None, "near-linear dependence between parameters"
        cov_u = np.linalg.inv(scaled) / np.outer(norms, norms) * noise_scale
    except np.linalg.LinAlgError:
        return None, "the normal matrix cannot be inverted"
    return scale.covariance_to_natural(cov_u, u), ""


def _kaufman_jacobian(problem, scale, u):
    """Fitting-scale Jacobian with Kaufman's projection for signals: its JᵀJ is the
    Schur complement of the full normal matrix of the kinetic parameters and the
    linear unknowns, so the covariance is that of the full Jacobian (see
    :mod:`kinfit.numerics.signal_model`)."""
    from dataclasses import replace

    plain = replace(problem, signal=problem.signal.kaufman())
    jac = plain.residuals_jacobian(scale.to_values(u))[1]
    return scale.jacobian_to_scale(jac, u)


def _curves(problem, values_row, n=200):
    grids = [np.unique(np.concatenate([np.linspace(0.0, run.t_max, n),
                                       problem.observation.run_times[r]]))
             for r, run in enumerate(problem.experiment.runs)]
    conc, ok, info = problem.simulate(values_row, times=grids)
    method = describe_method(problem.method, info.n_stiff, info.n_implicit)
    return tuple(Trajectory(g, c[0], problem.mechanism.species, bool(ok[0]), info.message,
                            method) for g, c in zip(grids, conc))
