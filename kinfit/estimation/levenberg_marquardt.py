"""Bounded Levenberg–Marquardt refinement of one start, with the exact Jacobian.

:func:`local_fit` is the loop that :func:`kinfit.estimation.least_squares.fit`
runs from each starting point: a compact bounded Levenberg–Marquardt method on
plain arrays, working on the fitting scale of a
:class:`~kinfit.estimation.scale.ScaledProblem`, which hands it residuals and
their exact Jacobian from one integration.

* Marquardt's diagonal scaling of the damping (Marquardt 1963) and Nielsen's
  damping update, ν doubling after a rejected step and
  μ ← μ · max(1/3, 1 − (2ρ − 1)³) after an accepted one with gain ratio ρ
  (Nielsen 1999; Madsen, Nielsen & Tingleff, "Methods for non-linear least
  squares problems", 2004, from memory);
* steps projected onto the bounds, with a variable held at an active bound
  when the gradient pushes it outwards;
* each move capped at 2 units of a logarithmic dimension (decades of a rate
  constant) and at the size of the value elsewhere, so that a first step from
  a poor start cannot leap onto a plateau where the data no longer constrain
  anything.

It stops when a further Gauss–Newton step would lower χ² by less than
1e-10 σ̂² (σ̂² = χ²/(N − p) when the noise is estimated, 1 when declared),
that is, would move the parameters by less than about 1e-5 of their standard
errors. When it has not converged within its budget, scipy's trust-region
reflective least squares (:func:`trust_region_fit`) continues from its best
point.

Why a loop of its own: with exact Jacobians the problems are small and well
scaled, and a few lines of numpy per iteration cost far less than a
general-purpose solver's bookkeeping, which rivalled the integrations
themselves.
"""

from __future__ import annotations

import math

import numpy as np

from kinfit.numerics.problem import FAILED_RESIDUAL

__all__ = ["local_fit", "trust_region_fit"]

_STEP_CAP_LOG = 2.0   # largest move of a logarithmic dimension in one iteration (decades)
_STEP_CAP_REL = 1.0   # largest move elsewhere, relative to the value (or its typical size)


def local_fit(evaluator, u0, max_evaluations):
    """Refine one start by Levenberg–Marquardt with the exact Jacobian.

    The method, its stopping rule and why it is a loop of its own are in the
    module notes. lmfit stays at the edges (see
    :meth:`FitResult.lmfit_parameters`).

    Parameters
    ----------
    evaluator : ScaledProblem
        The problem on its fitting scale (bounds, typical moves).
    u0 : ndarray [n_model]
        Start on the fitting scale (clipped into the bounds).
    max_evaluations : int or None
        Bound on evaluations (default 100 (p + 1)).

    Returns
    -------
    tuple
        (u, chi2, success, message, number of failed evaluations on the way)
    """
    scale = evaluator.scale
    lo, hi = scale.lower, scale.upper
    failed_before = evaluator.failed
    u = np.clip(np.asarray(u0, dtype=float), lo, hi)
    n = u.size
    dof = max(evaluator.problem.observation.n_points - n - evaluator.problem.n_linear, 1)
    max_evaluations = max_evaluations or 100 * (n + 1)
    res, jac = evaluator.residuals_jacobian(u)
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
        noise_scale = 1.0 if evaluator.problem.sigma_known else chi2 / dof
        gauss_newton = np.linalg.lstsq(nf, -gf, rcond=None)[0]
        if -float(gf @ gauss_newton) < 1e-10 * max(noise_scale, 1e-300):
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
        # keep each move modest (two decades of a rate constant, about the size of
        # the value elsewhere), so that a first step from a poor start cannot
        # leap onto a plateau where the data no longer constrain anything
        cap = np.where(scale.logarithmic, _STEP_CAP_LOG,
                       _STEP_CAP_REL * np.maximum(scale.typical, np.abs(u)))
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
        res_new, jac_new = evaluator.residuals_jacobian(trial)
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
        return trust_region_fit(evaluator, u, max_evaluations, failed_before)
    return u, chi2, success, message, evaluator.failed - failed_before


def trust_region_fit(evaluator, u0, max_evaluations, failed_before=None):
    """Fallback when Levenberg–Marquardt has not converged: scipy's trust-region
    reflective least squares from the best point so far.

    Returns the tuple of :func:`local_fit`; failures are counted from
    `failed_before` (the evaluator's count when the start was first tried).
    """
    from scipy.optimize import least_squares

    scale = evaluator.scale
    if failed_before is None:
        failed_before = evaluator.failed
    out = least_squares(lambda u: evaluator.residuals_jacobian(u)[0], u0,
                        jac=lambda u: evaluator.residuals_jacobian(u)[1],
                        bounds=(scale.lower, scale.upper), method="trf", x_scale="jac",
                        ftol=1e-10, xtol=1e-10, gtol=1e-10, max_nfev=max_evaluations)
    res = evaluator.residuals_jacobian(out.x)[0]
    chi2 = float(res @ res)
    failed = evaluator.failed - failed_before
    if not np.isfinite(chi2) or np.any(res == FAILED_RESIDUAL):
        return (out.x, math.inf, False, "the model could not be integrated at the final values",
                failed)
    return out.x, chi2, bool(out.success), f"trust-region fallback: {out.message}", failed
