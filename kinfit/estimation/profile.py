"""Profile-likelihood intervals of each fitted parameter.

For a parameter θ the profile is the best fit with θ held at a value and all
other free parameters re-optimised. With deviance D = −2 ln L (up to a
constant: χ² when the noise is declared, N ln RSS when one noise level is
estimated, which profiles σ out; see :mod:`kinfit.estimation.likelihood`),
the interval at level L is where

    ΔD(θ) = D_profile(θ) − D_min ≤ q_L,    q_L = χ²₁ quantile at L

(Wilks' theorem; q = 3.841 at 95 %, 0.989 at 68 %; from
``scipy.stats.chi2.ppf``). Unlike the covariance interval (value ± z·SE) the
profile follows the curvature of a non-linear model, and it tells when the
data cannot pin a parameter down: if ΔD stays below q all the way to a bound
(or for many standard errors with an open bound) the interval "does not
close" on that side.

How it is computed: the problem is rebuilt as the fit built it (its
``problem_settings``: integrator, spectral components). From the fit's
optimum, steps of one standard error (on the fitting scale of
:mod:`kinfit.estimation.scale`, log10 for rate constants) outwards on each
side, each step re-optimising the other parameters with
``scipy.optimize.least_squares`` from the previous step's solution, with the
problem's exact Jacobian (forward sensitivities, as in the fit), until ΔD
passes the highest level; each crossing is then located by interpolating
the signed root √ΔD (nearly linear in θ) and refined with a few more
re-optimisations to |√ΔD − √q| < 0.01. After six steps of one standard
error each further step doubles; a side that reaches a bound, or takes 14
steps towards an open bound, without crossing "does not close".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.estimation.likelihood import DEVIANCE_NAMES, deviance
from kinfit.estimation.scale import ScaledProblem
from kinfit.estimation.space import parameter_space

if TYPE_CHECKING:
    from kinfit.estimation.fit_result import FitResult
    from kinfit.estimation.space import ParameterSpace

__all__ = ["ParameterProfile", "Profiles", "profile_intervals", "LEVELS"]

LEVELS = (0.68, 0.95)
_MAX_STEPS = 14          # per side; the step doubles after 6 steps without a crossing
_ROOT_TOL = 0.01         # on √ΔD
_MAX_REFINE = 4


@dataclass(frozen=True)
class ParameterProfile:
    """The profile of one parameter.

    Attributes
    ----------
    name : str
    best : float
        Natural value at the optimum.
    values : ndarray [n]
        Natural values at which the profile was computed, sorted.
    delta : ndarray [n]
        ΔD at those values.
    intervals : dict of float to (float or None, float or None)
        Natural-scale interval at each level; ``None`` on a side where the
        profile does not close.
    closed : bool
        Whether the interval at the highest level closes on both sides.
    """

    name: str
    best: float
    values: np.ndarray
    delta: np.ndarray
    intervals: dict[float, tuple[float | None, float | None]]
    closed: bool

    def to_dict(self):
        return {"best": self.best, "closed": self.closed,
                "intervals": {f"ci{round(100 * lv)}": list(iv)
                              for lv, iv in self.intervals.items()},
                "points": {"values": self.values.tolist(), "delta_deviance": self.delta.tolist()}}


@dataclass(frozen=True)
class Profiles:
    """Profile-likelihood intervals of every free parameter of a fit.

    Attributes
    ----------
    parameters : dict of str to ParameterProfile
    levels : tuple of float
    thresholds : dict of float to float
        ΔD threshold q of each level.
    deviance : str
        ``"chi2"`` (declared noise) or ``"N ln RSS"`` (noise estimated).
    n_optimisations : int
        Constrained re-fits performed.
    warnings : tuple of str
    """

    parameters: dict[str, ParameterProfile]
    levels: tuple[float, ...]
    thresholds: dict[float, float]
    deviance: str
    n_optimisations: int
    warnings: tuple[str, ...] = ()

    def to_dict(self):
        return {"levels": list(self.levels),
                "thresholds": {f"ci{round(100 * lv)}": q for lv, q in self.thresholds.items()},
                "deviance": self.deviance, "optimisations": self.n_optimisations,
                "warnings": list(self.warnings),
                "parameters": {n: p.to_dict() for n, p in self.parameters.items()}}


class _Profiler:
    """Constrained re-fits of a problem with one parameter held fixed."""

    def __init__(self, space: ParameterSpace):
        self.space = space
        self.problem = space.problem
        self.declared = self.problem.sigma_known
        self.scaled = ScaledProblem(self.problem, space.scale)
        self.count = 0

    def deviance_at(self, u):
        """D at one point `u` [n_dim] of the inference scale."""
        return deviance(self.scaled.residuals(u)[0], self.declared)

    def refit(self, j, uj, start):
        """Best deviance with parameter j held at uj, other parameters from `start`.

        Returns
        -------
        (u [n_dim], deviance)
        """
        from scipy.optimize import least_squares

        self.count += 1
        sp = self.space
        others = np.array([i for i in range(sp.n_dim) if i != j], dtype=int)
        u = np.array(start, dtype=float)
        u[j] = uj
        if others.size == 0:
            return u, self.deviance_at(u)
        lo, hi = sp.lower[others], sp.upper[others]
        x0 = np.clip(u[others], lo, hi)
        # keep the start strictly inside finite bounds, as least_squares requires
        span = np.where(np.isfinite(hi - lo), hi - lo, 1.0)
        x0 = np.clip(x0, lo + 1e-10 * span, hi - 1e-10 * span)

        def point(x):
            full = u.copy()
            full[others] = x
            return full

        def fun(x):
            return self.scaled.residuals(point(x))[0]

        def jac(x):
            return self.scaled.residuals_jacobian(point(x))[1][:, others]

        sol = least_squares(fun, x0, jac=jac, bounds=(lo, hi), method="trf", x_scale="jac",
                            ftol=1e-10, xtol=1e-10, gtol=1e-10, max_nfev=100 * (others.size + 1))
        u[others] = sol.x
        return u, deviance(sol.fun, self.declared)


def _step_size(space, fit_result, j, u_hat):
    name = space.names[j]
    se = fit_result.stderr.get(name)
    logarithmic = space.scale.logarithmic[j]
    if se is not None and math.isfinite(se) and se > 0:
        if logarithmic:      # the standard error on the fitting scale, by the delta method
            return float(np.clip(se / space.scale.jacobian_factor(u_hat)[j], 1e-4, 1.0))
        return float(se)
    return 0.1 if logarithmic else 0.1 * max(abs(u_hat[j]), 1.0)


def _profile_side(prof, j, u_hat, d_min, step, direction, q_max):
    """Points (u_j, ΔD, u) walking from the optimum in one direction."""
    sp = prof.space
    bound = sp.upper[j] if direction > 0 else sp.lower[j]
    points, start, uj = [], u_hat.copy(), u_hat[j]
    for k in range(_MAX_STEPS):
        h = step * (2.0 ** max(0, k - 5))
        nxt = uj + direction * h
        at_bound = math.isfinite(bound) and (nxt - bound) * direction >= 0
        if at_bound:
            nxt = bound
        u, d = prof.refit(j, nxt, start)
        points.append((nxt, d - d_min, u))
        if d - d_min >= q_max or at_bound:
            break
        start, uj = u, nxt
    return points


def _crossing(prof, j, d_min, side, q, u_hat):
    """Where ΔD crosses q on one side: (u_j or None, extra points)."""
    target = math.sqrt(q)
    prev = (u_hat[j], 0.0, u_hat)
    for point in side:
        if point[1] >= q:
            break
        prev = point
    else:
        return None, []
    extra = []
    lo_pt, hi_pt = prev, point
    for _ in range(_MAX_REFINE):
        za, zb = math.sqrt(max(lo_pt[1], 0.0)), math.sqrt(max(hi_pt[1], 0.0))
        if zb - za <= 1e-12:
            break
        uj = lo_pt[0] + (target - za) * (hi_pt[0] - lo_pt[0]) / (zb - za)
        u, d = prof.refit(j, uj, lo_pt[2])
        new = (uj, d - d_min, u)
        extra.append(new)
        z = math.sqrt(max(new[1], 0.0))
        if abs(z - target) < _ROOT_TOL:
            return uj, extra
        if new[1] < q:
            lo_pt = new
        else:
            hi_pt = new
    za, zb = math.sqrt(max(lo_pt[1], 0.0)), math.sqrt(max(hi_pt[1], 0.0))
    return lo_pt[0] + (target - za) * (hi_pt[0] - lo_pt[0]) / max(zb - za, 1e-12), extra


def profile_intervals(fit_result: FitResult, levels=LEVELS, names=None):
    """Profile-likelihood intervals of the free parameters of a fit.

    Parameters
    ----------
    fit_result : FitResult
    levels : sequence of float
        Confidence levels, each in (0, 1).
    names : sequence of str, optional
        Parameters to profile (default: every free parameter).

    Returns
    -------
    Profiles
    """
    from scipy.stats import chi2

    levels = tuple(sorted(float(lv) for lv in levels))
    if not levels or not all(0.0 < lv < 1.0 for lv in levels):
        raise KinfitError(f"profile levels must be between 0 and 1, got {levels}")
    problem = fit_result.problem_settings.build(fit_result.mechanism, fit_result.experiment)
    space = parameter_space(problem, with_noise=False)
    unknown = [n for n in (names or ()) if n not in space.names]
    if unknown:
        raise KinfitError(f"cannot profile {unknown[0]!r}: the free parameters are "
                          f"{', '.join(space.names)}")
    prof = _Profiler(space)
    u_hat = space.from_natural(np.array([fit_result.values[n] for n in space.names]))[0]
    d_min = prof.deviance_at(u_hat)
    thresholds = {lv: float(chi2.ppf(lv, 1)) for lv in levels}
    q_max = max(thresholds.values())
    out, warnings = {}, []
    best_found = d_min
    for j, name in enumerate(space.names):
        if names and name not in names:
            continue
        step = _step_size(space, fit_result, j, u_hat)
        sides = {d: _profile_side(prof, j, u_hat, d_min, step, d, q_max) for d in (-1, 1)}
        intervals, pts = {}, []
        for lv, q in thresholds.items():
            ends = []
            for d in (-1, 1):
                uj, extra = _crossing(prof, j, d_min, sides[d], q, u_hat)
                pts += extra
                ends.append(None if uj is None else float(space.to_natural(
                    np.where(np.arange(space.n_dim) == j, uj, u_hat)[None])[0, j]))
            intervals[lv] = tuple(ends)
        pts += sides[-1] + sides[1]
        u_vals = np.array([p[0] for p in pts] + [u_hat[j]])
        delta = np.array([p[1] for p in pts] + [0.0])
        best_found = min(best_found, d_min + float(delta.min()))
        order = np.argsort(u_vals)
        nat = space.to_natural(
            np.where(np.arange(space.n_dim)[None, :] == j, u_vals[order][:, None],
                     u_hat[None, :]))[:, j]
        out[name] = ParameterProfile(
            name=name, best=float(fit_result.values[name]), values=nat, delta=delta[order],
            intervals=intervals, closed=None not in intervals[levels[-1]])
    if best_found < d_min - max(1e-6 * abs(d_min), 1e-3):
        warnings.append(f"the profile found a better fit than the optimiser (deviance lower "
                        f"by {d_min - best_found:.3g}); the intervals are relative to the "
                        f"optimiser's fit: refit with more starting points")
    for name, p in out.items():
        if not p.closed:
            warnings.append(f"{name}: the {round(100 * levels[-1])} % profile interval does not "
                            f"close inside the bounds; the data cannot pin {name} down (it is "
                            f"not identifiable from these data)")
    return Profiles(parameters=out, levels=levels, thresholds=thresholds,
                    deviance=DEVIANCE_NAMES[prof.declared],
                    n_optimisations=prof.count, warnings=tuple(warnings))
