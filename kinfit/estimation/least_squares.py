"""Global least-squares fit of a mechanism to every run at once.

All runs are fitted together: rate constants and orders are shared by every
run; fitted initial concentrations and time offsets belong to one run each.

How the fit is set up
---------------------
* Rate constants are fitted as log10 k (positive by construction and well
  conditioned when k is far from 1); orders, initial concentrations and time
  offsets on their own scale. Values, standard errors and correlations are
  reported on the natural scale (delta method).
* Several starting points: the model file's values, plus the best of a
  Latin-hypercube screen of the start box (all screened sets are evaluated in
  one vectorised integration). The start box is the bounds where they are
  finite, else ±2 decades around a rate constant's start, ±1.5 around an
  order, ±50 % around an initial concentration. Each start is refined by a
  bounded Levenberg–Marquardt loop; the best is kept and the number of
  starts that reached it is reported.
* The Jacobian is exact: forward sensitivity equations are integrated with
  the states (:mod:`kinfit.compiled`), so one integration gives residuals and
  Jacobian together. lmfit is used at the edges — the result converts to
  :class:`lmfit.Parameters` — not inside the loop, where its parameter
  objects would cost more than the integration.
* Standard errors come from (JᵀJ)⁻¹, scaled by the reduced χ² when the noise
  is estimated from the fit and unscaled when it is declared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from kinfit.core.defaults import DEFAULT_STARTS
from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import format_rate_law
from kinfit.estimation.linear_unknowns import resolve_signals
from kinfit.estimation.residual_checks import check_residuals
from kinfit.numerics.problem import FAILED_RESIDUAL, build_problem, information_criteria
from kinfit.numerics.integrate import Trajectory, describe_method
from kinfit.inputs.temperature import ENERGY_UNIT
from kinfit.inputs.parameters import Role

__all__ = ["FitResult", "fit"]

_SCREEN_RHS = 5_000
_STEP_CAP_LOG = 2.0   # largest move of log10 k in one iteration (decades)
_STEP_CAP_REL = 1.0   # largest move elsewhere, relative to the value (or its scale)
_LN10 = math.log(10.0)


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
    roles : dict of str to str
        "rate constant", "order", "initial concentration", "time offset".
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
        Estimated noise standard deviation sqrt(χ²/(N - p)) when not declared.
    noise_declared : bool
    log_likelihood, aic, aicc, bic : float
        See :mod:`kinfit.objective` for the conventions.
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
        Integrator used.
    signals : SignalFit or None
        For spectrometer signals: absorptivities, offsets and drifts solved
        by variable projection with standard errors from the full Jacobian,
        resolved spectra and the SVD of full-spectrum data (see
        :mod:`kinfit.spectra`).
    residual_checks : tuple of TraceCheck
        Runs test and lag-1 autocorrelation of each trace's residuals (see
        :mod:`kinfit.estimation.residual_checks`).
    """

    mechanism: object
    experiment: object
    values: dict
    stderr: dict
    units: dict
    roles: dict
    free_names: tuple
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
    overall_orders: dict
    curves: tuple
    success: bool
    message: str
    warnings: tuple = ()
    starts: int = 1
    starts_at_best: int = 1
    n_evaluations: int = 0
    n_integrations: int = 0
    n_failed: int = 0
    method: str = "auto"
    at_bounds: tuple = ()
    bounds: dict = field(default_factory=dict, repr=False)
    signals: object = None
    residual_checks: tuple = ()

    @property
    def reduced_chi2(self):
        dof = self.n_points - self.n_free
        return self.chi2 / dof if dof > 0 else math.nan

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
            }
        stats = {
            "n_data": self.n_points,
            "n_params": self.n_free,
            "chisqr": self.chi2,
            "reduced_chisqr": self.reduced_chi2,
            "noise": "declared" if self.noise_declared else "estimated",
            "sigma": self.sigma,
            "log_likelihood": self.log_likelihood,
            "aic": self.aic,
            "aicc": self.aicc,
            "bic": self.bic,
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
        }


# ----------------------------------------------------------------- layout

class _Layout:
    """Free parameters on the fitting scale (log10 for rate constants)."""

    def __init__(self, problem):
        self.problem = problem
        params = problem.parameters
        self.base = np.array([p.value for p in params])
        self.free = [i for i, p in enumerate(params) if p.vary]
        self.names = tuple(params[i].name for i in self.free)
        self.log = np.array([params[i].role == Role.RATE_CONSTANT for i in self.free], bool)
        lo, hi, u0, box_lo, box_hi, scale = [], [], [], [], [], []
        t_max = max(run.t_max for run in problem.experiment.runs)
        for i in self.free:
            p = params[i]
            if p.role == Role.RATE_CONSTANT:
                a = math.log10(p.min) if p.min > 0 else -math.inf
                b = math.log10(p.max) if math.isfinite(p.max) else math.inf
                u = math.log10(p.value)
                half, s = 2.0, 1.0
            else:
                a, b, u = p.min, p.max, p.value
                if p.role == Role.ORDER:
                    half, s = 1.5, 1.0
                elif p.role == Role.INITIAL:
                    half, s = 0.5 * abs(u) or 1.0, abs(u) or 1.0
                elif p.role == Role.TIME_OFFSET:
                    half, s = 0.05 * t_max, 0.01 * t_max
                else:
                    half, s = max(abs(u), 1.0), max(abs(u), 1.0)
            lo.append(a)
            hi.append(b)
            u0.append(u)
            box_lo.append(a if math.isfinite(a) else u - half)
            box_hi.append(b if math.isfinite(b) else u + half)
            scale.append(s)
        self.lo, self.hi, self.u0 = np.array(lo), np.array(hi), np.array(u0)
        self.box_lo, self.box_hi = np.array(box_lo), np.array(box_hi)
        self.scale = np.array(scale)

    def to_values(self, u):
        """Fitting-scale rows [n_sets, n_free] -> full parameter rows [n_sets, n_params]."""
        u = np.atleast_2d(u)
        out = np.repeat(self.base[None], u.shape[0], axis=0)
        out[:, self.free] = np.where(self.log, 10.0 ** np.clip(u, -300.0, 300.0), u)
        return out

    def natural_slope(self, u):
        """d(value)/d(u) for each free parameter [n_free]."""
        return np.where(self.log, _LN10 * 10.0 ** u, 1.0)


class _Evaluator:
    """Evaluates residuals (and their exact Jacobian) on the fitting scale.

    One integration gives both the residuals and, through forward
    sensitivities, their Jacobian; the last one is cached so that the
    optimiser's separate calls for residuals and Jacobian at one point cost a
    single integration. Counts evaluations and integrations for the report.
    """

    def __init__(self, problem, layout):
        self.problem, self.layout = problem, layout
        self.evaluations = self.integrations = self.failed = 0
        self.n_compiled = self.n_stiff = self.n_implicit = 0
        self._cache_u = None
        self._cache = None

    def _count(self, n_sets, ok, info):
        self.integrations += 1
        self.evaluations += n_sets
        self.failed += int((~ok).sum())
        self.n_compiled += info.n_compiled
        self.n_stiff += info.n_stiff
        self.n_implicit += info.n_implicit

    def residuals(self, u, max_rhs=None, fallback=True):
        """Residual rows [n_sets, n_points] for fitting-scale rows `u` (no Jacobian)."""
        values = self.layout.to_values(u)
        pred, ok, _, info = self.problem.evaluate(values, max_rhs=max_rhs, fallback=fallback)
        self._count(values.shape[0], ok, info)
        return self.problem._weigh(pred, ok)

    def both(self, u):
        """(residuals [n_points], Jacobian [n_points, n_free]) at one point, cached."""
        u = np.asarray(u, dtype=float)
        if self._cache_u is not None and np.array_equal(u, self._cache_u):
            return self._cache
        values = self.layout.to_values(u)
        res, jac, ok, info = self.problem.residuals_jacobian(values)
        self._count(1, np.array([ok]), info)
        jac_u = jac[:, self.layout.free] * self.layout.natural_slope(u)[None, :]
        self._cache_u, self._cache = u.copy(), (res, jac_u)
        return self._cache


# -------------------------------------------------------------------- fit

def fit(experiment, mechanism, starts=DEFAULT_STARTS, seed=0, method="auto",
        max_evaluations=None, components=None):
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
        Integrator, see :func:`kinfit.simulate.integrate_flat` (default
        "auto": compiled explicit, LSODA where stiff).
    max_evaluations : int, optional
        Bound on residual evaluations per start (default 100 (p + 1)).
    components : int or str, optional
        For full-spectrum data, overrides the experiment's ``components``
        ("auto", "all" or a number of singular vectors to fit).

    Returns
    -------
    FitResult
    """
    if not isinstance(starts, int) or starts < 1:
        raise KinfitError(f"starts must be a whole number of at least 1, got {starts!r}")
    problem = build_problem(mechanism, experiment, method=method, components=components)
    layout = _Layout(problem)
    evaluator = _Evaluator(problem, layout)
    n_points, n_free = problem.observation.n_points, len(layout.free) + problem.n_linear
    if n_free >= n_points:
        raise KinfitError(f"{experiment.source}: {n_free} fitted parameters but only {n_points} "
                          f"data points; fix some parameters or add data")

    if not layout.free:
        outcomes = [(layout.u0, float(np.sum(evaluator.residuals(layout.u0)[0] ** 2)), True,
                     "no free parameters: evaluated at the given values", 0)]
    else:
        outcomes = [_local_fit(evaluator, u, max_evaluations)
                    for u in _start_points(evaluator, layout, starts, seed)]
    best = min(outcomes, key=lambda o: o[1] if math.isfinite(o[1]) else math.inf)
    u_best, chi2_best, success, message, failed = best
    tol = 1e-6 * max(chi2_best, 1e-300) + 1e-12
    at_best = sum(1 for o in outcomes if o[1] <= chi2_best + tol)
    return _result(problem, layout, evaluator, u_best, success, message, len(outcomes),
                   at_best, failed)


def _start_points(evaluator, layout, starts, seed):
    """The model file's start plus the best points of a Latin-hypercube screen."""
    points = [layout.u0]
    if starts == 1:
        return points
    from scipy.stats import qmc

    n_screen = max(16, 4 * starts)
    sampler = qmc.LatinHypercube(d=layout.u0.size, seed=np.random.default_rng(seed))
    cand = layout.box_lo + sampler.random(n_screen) * (layout.box_hi - layout.box_lo)
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


def _local_fit(evaluator, u0, max_evaluations):
    """Refine one start by Levenberg–Marquardt with the exact Jacobian.

    A compact bounded Levenberg–Marquardt loop on plain arrays (Marquardt's
    diagonal scaling, Nielsen's damping update, steps projected onto the
    bounds with variables held at an active bound): with exact Jacobians the
    problems are small and well scaled, and a loop in a few lines of numpy
    costs far less per iteration than a general-purpose solver. It stops when
    a further Gauss–Newton step would lower χ² by less than 1e-10 σ̂², that is
    move the parameters by less than about 1e-5 of their standard errors. lmfit
    stays at the edges (see :meth:`FitResult.lmfit_parameters`).

    Returns
    -------
    tuple
        (u, chi2, success, message, number of failed evaluations on the way)
    """
    layout = evaluator.layout
    lo, hi = layout.lo, layout.hi
    failed_before = evaluator.failed
    u = np.clip(np.asarray(u0, dtype=float), lo, hi)
    n = u.size
    dof = max(evaluator.problem.observation.n_points - n - evaluator.problem.n_linear, 1)
    max_evaluations = max_evaluations or 100 * (n + 1)
    res, jac = evaluator.both(u)
    chi2 = float(res @ res)
    if not np.isfinite(chi2) or np.any(res == FAILED_RESIDUAL):
        return (u, math.inf, False, "the model could not be integrated at the starting values",
                evaluator.failed - failed_before)
    damping, growth = 1e-3, 2.0
    message, success = "stopped after the largest number of evaluations", False
    evaluations = 1
    while evaluations < max_evaluations:
        grad = jac.T @ res
        normal = jac.T @ jac
        free = ~(((u <= lo) & (grad > 0)) | ((u >= hi) & (grad < 0)))
        if not free.any():
            message, success = "converged at the bounds", True
            break
        nf = normal[np.ix_(free, free)]
        gf = grad[free]
        scale = 1.0 if evaluator.problem.sigma_known else chi2 / dof
        gauss_newton = np.linalg.lstsq(nf, -gf, rcond=None)[0]
        if -float(gf @ gauss_newton) < 1e-10 * max(scale, 1e-300):
            message = ("converged: a further Gauss-Newton step would move the parameters by "
                       "less than 1e-5 standard errors")
            success = True
            break
        diag = np.diag(nf).copy()
        diag[diag <= 0] = 1.0
        # a direction the data do not see (a parameter whose effect the linear
        # unknowns of signals take up) must not get an unbounded step
        diag = np.maximum(diag, 1e-10 * diag.max())
        try:
            step_f = np.linalg.solve(nf + damping * np.diag(diag), -gf)
        except np.linalg.LinAlgError:
            step_f = np.linalg.lstsq(nf + damping * np.diag(diag), -gf, rcond=None)[0]
        step = np.zeros(n)
        step[free] = step_f
        # keep each move modest (a decade in a rate constant, about the size of
        # the value elsewhere), so that a first step from a poor start cannot
        # leap onto a plateau where the data no longer constrain anything
        cap = np.where(layout.log, _STEP_CAP_LOG,
                       _STEP_CAP_REL * np.maximum(layout.scale, np.abs(u)))
        over = np.max(np.abs(step) / cap)
        if over > 1.0:
            step /= over
        trial = np.clip(u + step, lo, hi)
        step = trial - u
        predicted = -(2.0 * float(step @ grad) + float(step @ normal @ step))
        if not np.any(step) or predicted <= 0:
            damping *= growth
            growth *= 2.0
            if damping > 1e16:
                message, success = "converged: no step lowers χ² any further", True
                break
            continue
        res_new, jac_new = evaluator.both(trial)
        evaluations += 1
        chi2_new = float(res_new @ res_new)
        if np.isfinite(chi2_new) and chi2_new < chi2 and not np.any(res_new == FAILED_RESIDUAL):
            rho = (chi2 - chi2_new) / predicted
            u, res, jac, chi2 = trial, res_new, jac_new, chi2_new
            damping *= max(1.0 / 3.0, 1.0 - (2.0 * rho - 1.0) ** 3)
            growth = 2.0
        else:
            damping *= growth
            growth *= 2.0
            if damping > 1e16:
                message, success = "converged: no step lowers χ² any further", True
                break
    if not success:
        return _trust_region_fit(evaluator, u, max_evaluations, failed_before)
    return u, chi2, success, message, evaluator.failed - failed_before


def _trust_region_fit(evaluator, u0, max_evaluations, failed_before):
    """Fallback when Levenberg–Marquardt has not converged: scipy's trust-region
    reflective least squares from the best point so far."""
    from scipy.optimize import least_squares

    layout = evaluator.layout
    out = least_squares(lambda u: evaluator.both(u)[0], u0, jac=lambda u: evaluator.both(u)[1],
                        bounds=(layout.lo, layout.hi), method="trf", x_scale="jac",
                        ftol=1e-10, xtol=1e-10, gtol=1e-10, max_nfev=max_evaluations)
    res = evaluator.both(out.x)[0]
    chi2 = float(res @ res)
    failed = evaluator.failed - failed_before
    if not np.isfinite(chi2) or np.any(res == FAILED_RESIDUAL):
        return (out.x, math.inf, False, "the model could not be integrated at the final values",
                failed)
    return out.x, chi2, bool(out.success), f"trust-region fallback: {out.message}", failed


def _result(problem, layout, evaluator, u, success, message, n_starts, at_best, failed):
    values_row = layout.to_values(u)[0]
    names = problem.names
    values = {n: float(v) for n, v in zip(names, values_row)}
    if layout.free:
        res, jac = evaluator.both(u)
    else:
        res, jac = evaluator.residuals(u)[0], None
    pred = res * problem.observation.sigma if problem.sigma_known else res.copy()
    pred = pred + problem.observation.values
    n_points, n_free = res.size, len(layout.free) + problem.n_linear
    chi2 = float(res @ res)
    declared = problem.sigma_known
    dof = n_points - n_free
    sigma = None if declared else math.sqrt(chi2 / dof)
    warnings = []

    covariance = correlation = None
    stderr = {n: None for n in names}
    at_bounds = tuple(n for n, x, a, b in zip(layout.names, u, layout.lo, layout.hi)
                      if (math.isfinite(a) and x - a <= 1e-6 * max(1.0, abs(a)))
                      or (math.isfinite(b) and b - x <= 1e-6 * max(1.0, abs(b))))
    if layout.free:
        if problem.signal is not None:
            jac = _kaufman_jacobian(problem, layout, u)
        covariance, singular = _covariance(jac, layout.natural_slope(u),
                                           1.0 if declared else chi2 / dof, layout.names)
        if singular:
            warnings.append("the data cannot pin down all parameters together (the Jacobian "
                            f"is singular): {singular}; fix one of them or add runs that "
                            "separate them")
        if covariance is not None:
            se = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
            for n, s in zip(layout.names, se):
                stderr[n] = float(s) if np.isfinite(s) else None
            with np.errstate(invalid="ignore", divide="ignore"):
                correlation = covariance / np.outer(se, se)
    for n in at_bounds:
        warnings.append(f"{n} = {values[n]:.4g} is at a bound; its standard error assumes it "
                        f"is not, and the true optimum may lie beyond")
    if n_starts > 1 and at_best < max(2, n_starts // 2):
        warnings.append(f"only {at_best} of {n_starts} starting points reached the best fit; "
                        f"the least-squares surface has other minima (try more starts)")
    if declared and dof > 0:
        from scipy.stats import chi2 as chi2_dist

        p_high = chi2_dist.sf(chi2, dof)
        if p_high < 1e-3:
            warnings.append(f"χ²/(N−p) = {chi2 / dof:.3g}: the residuals are larger than the "
                            f"declared noise; the model may miss something or the noise is "
                            f"underestimated")
        elif chi2_dist.cdf(chi2, dof) < 1e-3:
            warnings.append(f"χ²/(N−p) = {chi2 / dof:.3g}: the residuals are smaller than the "
                            f"declared noise; the noise may be overestimated")
    signals = None
    if problem.signal is not None:
        signals = resolve_signals(problem, values_row, covariance, layout.free,
                                  1.0 if declared else chi2 / dof)
        warnings += list(signals.warnings)
    if failed:
        warnings.append(f"{failed} model evaluation(s) failed to integrate on the way to the "
                        f"best fit and were treated as very poor fits")
    if not success:
        warnings.append(f"the optimiser did not report convergence: {message}")

    log_lik = float(problem.log_likelihood(res)[0])
    crit = information_criteria(log_lik, n_points, n_free)
    mech, exp = problem.mechanism, problem.experiment
    overall = mech.overall_orders(values)
    units, roles = {}, {}
    for p in problem.parameters:
        roles[p.name] = p.role
        if p.role == Role.RATE_CONSTANT:
            units[p.name] = exp.units.rate_constant(overall.get(p.name))
        elif p.role == Role.INITIAL:
            units[p.name] = exp.units.concentration
        elif p.role == Role.TIME_OFFSET:
            units[p.name] = exp.units.time
        elif p.role in (Role.ACTIVATION_ENERGY, Role.ACTIVATION_ENTHALPY):
            units[p.name] = ENERGY_UNIT
        else:
            units[p.name] = ""
    for name, order in overall.items():
        if order is None:
            warnings.append(f"{name} appears in rate laws of different overall order, so it "
                            f"has no single unit")
    return FitResult(
        mechanism=mech, experiment=exp, values=values, stderr=stderr, units=units,
        roles=roles, free_names=layout.names, covariance=covariance, correlation=correlation,
        residuals=res, predicted=pred, n_points=n_points, n_free=n_free, chi2=chi2,
        sigma=sigma, noise_declared=declared, log_likelihood=log_lik, aic=crit["aic"],
        aicc=crit["aicc"], bic=crit["bic"], overall_orders=overall,
        curves=_curves(problem, values_row), success=success, message=message,
        warnings=tuple(warnings), starts=n_starts, starts_at_best=at_best,
        n_evaluations=evaluator.evaluations, n_integrations=evaluator.integrations,
        n_failed=evaluator.failed,
        method=describe_method(problem.method, evaluator.n_stiff, evaluator.n_implicit,
                               tally=True),
        at_bounds=at_bounds,
        bounds={p.name: (p.min, p.max, p.vary) for p in problem.parameters}, signals=signals,
        residual_checks=tuple(check_residuals(exp, res)))


def _kaufman_jacobian(problem, layout, u):
    """Fitting-scale Jacobian with Kaufman's projection for signals: its JᵀJ is the
    Schur complement of the full normal matrix of the kinetic parameters and the
    linear unknowns, so the covariance is that of the full Jacobian (see
    :mod:`kinfit.spectra`)."""
    from dataclasses import replace

    plain = replace(problem, signal=problem.signal.kaufman())
    jac = plain.residuals_jacobian(layout.to_values(u))[1]
    return jac[:, layout.free] * layout.natural_slope(u)[None, :]


def _covariance(jac, slope, scale, names):
    """Natural-scale covariance from a fitting-scale Jacobian; (cov, singular names)."""
    jtj = jac.T @ jac
    try:
        # scale columns to unit norm so the condition number reflects identifiability
        norms = np.sqrt(np.diag(jtj))
        if np.any(norms == 0):
            zero = ", ".join(n for n, v in zip(names, norms) if v == 0)
            return None, f"{zero} do(es) not change the model at all"
        scaled = jtj / np.outer(norms, norms)
        if np.linalg.cond(scaled) > 1e14:
            return None, "near-linear dependence between parameters"
        cov_u = np.linalg.inv(scaled) / np.outer(norms, norms) * scale
    except np.linalg.LinAlgError:
        return None, "the normal matrix cannot be inverted"
    return cov_u * np.outer(slope, slope), ""


def _curves(problem, values_row, n=200):
    grids = [np.unique(np.concatenate([np.linspace(0.0, run.t_max, n),
                                       problem.observation.run_times[r]]))
             for r, run in enumerate(problem.experiment.runs)]
    conc, ok, info = problem.simulate(values_row, times=grids)
    method = describe_method(problem.method, info.n_stiff, info.n_implicit)
    return tuple(Trajectory(g, c[0], problem.mechanism.species, bool(ok[0]), info.message,
                            method) for g, c in zip(grids, conc))
