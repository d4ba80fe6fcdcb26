"""The fitting scale: the one place a parameter changes between natural values and u.

Least squares, the profile likelihood and the posterior sampler all move the
free parameters on a scale u chosen per parameter from its :class:`Role`:

============================  ==============  =======================================
role                          u               start box (when a bound is open)
============================  ==============  =======================================
rate constant                 log10 k         ±2 decades around the start
order                         m               ±1.5 around the start
initial concentration         [A]0            ±50 % of the start (±1 when it is 0)
time offset                   t0              ±5 % of the longest run
noise level (sampled)         log10 σ         its bounds (always finite)
any other (e.g. Ea, ΔH‡)      θ               ±max(|θ|, 1)
============================  ==============  =======================================

Rate constants on log10 k are positive by construction and well scaled when k
is far from 1. A scale may also be the natural logarithm (``"ln"``; used by no
caller today, offered for draws made on ln k). With x the natural value:

=========  ============  ============  ====================  ===================
scale      u             x             dx/du                 ln |dx/du|
=========  ============  ============  ====================  ===================
log10      log10 x       10^u          x ln 10               u ln 10 + ln ln 10
ln         ln x          e^u           x                     u
natural    x             u             1                     0
=========  ============  ============  ====================  ===================

What follows from dx/du (the delta method, first order):

* Jacobian: ∂r/∂u = ∂r/∂x · dx/du (:meth:`FitScale.jacobian_to_scale`);
* covariance: Σ_x = D Σ_u D with D = diag(dx/du) (:meth:`FitScale.covariance_to_natural`);
* densities: p_u(u) = p_x(x) |dx/du|, so a log-uniform prior is flat in u
  (:meth:`FitScale.log_jacobian`, which leaves out the constant ln ln 10).

Bounds on x become bounds on u (a lower bound of 0 on a rate constant becomes
−∞); values of u are clipped to ±300 decades (±690 e-folds) before
exponentiation, so that no overflow reaches the integrator.

:class:`ScaledProblem` evaluates a :class:`~kinfit.numerics.problem.Problem`
on this scale: residuals and their exact Jacobian with respect to u, cached
and counted, for the least-squares fit and the profile's refits.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from functools import cached_property
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.parameters import Role

if TYPE_CHECKING:
    from kinfit.numerics.problem import Problem

__all__ = ["FitScale", "fit_scale", "ScaledProblem", "SCALES"]

SCALES = ("log10", "ln", "natural")
_LN10 = math.log(10.0)
_CLIP_LOG10 = 300.0
_CLIP_LN = 690.0


class _Rule(NamedTuple):
    """How a role is fitted: its scale, the half width of its start box and a
    typical move, both on the fitting scale, from the start u and the longest run."""

    scale: str
    half: Callable[[float, float], float]
    typical: Callable[[float, float], float]


_RULES = {
    Role.RATE_CONSTANT: _Rule("log10", lambda u, t: 2.0, lambda u, t: 1.0),
    Role.ORDER: _Rule("natural", lambda u, t: 1.5, lambda u, t: 1.0),
    Role.INITIAL: _Rule("natural", lambda u, t: 0.5 * abs(u) or 1.0, lambda u, t: abs(u) or 1.0),
    Role.TIME_OFFSET: _Rule("natural", lambda u, t: 0.05 * t, lambda u, t: 0.01 * t),
}
_OTHER = _Rule("natural", lambda u, t: max(abs(u), 1.0), lambda u, t: max(abs(u), 1.0))


def _to_scale(x, scale):
    """One natural value (a bound or a start) onto the scale; a bound of 0 or less
    on a logarithmic scale becomes −∞."""
    if scale == "natural":
        return x
    if not math.isfinite(x):
        return x
    if x <= 0:
        return -math.inf
    return math.log10(x) if scale == "log10" else math.log(x)


@dataclass(frozen=True)
class FitScale:
    """Free parameters on their fitting scale.

    The first `n_model` dimensions are the problem's free parameters, in the
    order of `free_index`; any further ones (sampled noise levels) have no
    column in the problem's parameter rows.

    Attributes
    ----------
    names : tuple of str [n_dim]
        Natural names.
    roles : tuple of Role [n_dim]
    scales : tuple of str [n_dim]
        ``"log10"``, ``"ln"`` or ``"natural"``.
    log10, ln : ndarray [n_dim] of bool
        Masks of the logarithmic dimensions.
    lower, upper : ndarray [n_dim]
        Bounds on the fitting scale (±inf when open).
    start : ndarray [n_dim]
        Starting point on the fitting scale.
    box_lower, box_upper : ndarray [n_dim]
        The start box: the bounds where finite, else the start ± the role's
        half width (see the module notes).
    typical : ndarray [n_dim]
        A typical size of a move on the fitting scale (1 decade for a rate
        constant, the value's size elsewhere).
    free_index : ndarray [n_model] of int
        Columns of the problem's parameter rows that are free.
    base : ndarray [n_params]
        Values of all the problem's parameters (fixed ones keep them).
    """

    names: tuple[str, ...]
    roles: tuple[Role, ...]
    scales: tuple[str, ...]
    log10: np.ndarray
    ln: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    start: np.ndarray
    box_lower: np.ndarray
    box_upper: np.ndarray
    typical: np.ndarray
    free_index: np.ndarray
    base: np.ndarray

    @property
    def n_dim(self):
        return len(self.names)

    @property
    def n_model(self):
        """Number of the problem's free parameters (the leading dimensions)."""
        return self.free_index.size

    @property
    def logarithmic(self):
        """Mask [n_dim] of the dimensions on a logarithmic scale."""
        return self.log10 | self.ln

    @cached_property
    def _any_ln(self):
        # the sampler calls the conversions twice per step: skip the ln pass when unused
        return bool(self.ln.any())

    @cached_property
    def _jacobian_weight(self):
        # ln |dx/du| = u × weight (up to a constant): ln 10 on log10, 1 on ln, 0 elsewhere
        return np.where(self.log10, _LN10, np.where(self.ln, 1.0, 0.0))

    @property
    def labels(self):
        """Names on the fitting scale: ``log10_k`` for a rate constant k."""
        return tuple(name if s == "natural" else f"{s}_{name}"
                     for name, s in zip(self.names, self.scales))

    def to_natural(self, u):
        """Fitting-scale rows [n, n_dim] -> natural values [n, n_dim]."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        return _natural(u, self.log10, self.ln if self._any_ln else None)

    def from_natural(self, x):
        """Natural values [n, n_dim] -> fitting scale [n, n_dim] (−inf for x = 0 on a log)."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.where(self.log10, np.log10(x), x)
            if self.ln.any():
                out = np.where(self.ln, np.log(x), out)
        return out

    def to_values(self, u):
        """Full parameter rows of the problem [n, n_params] from rows [n, ≥ n_model]."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        m = self.n_model
        out = np.repeat(self.base[None], u.shape[0], axis=0)
        out[:, self.free_index] = _natural(u[:, :m], self.log10[:m],
                                           self.ln[:m] if self._any_ln else None)
        return out

    def jacobian_factor(self, u):
        """dx/du of each dimension, the shape of `u` ([n_dim] or [n, n_dim])."""
        u = np.asarray(u, dtype=float)
        out = np.where(self.log10, _LN10 * 10.0 ** u, 1.0)
        if self.ln.any():
            out = np.where(self.ln, np.exp(u), out)
        return out

    def log_jacobian(self, u):
        """ln |dx/du| of each dimension up to a constant [n, n_dim]: u ln 10 on log10
        (without ln ln 10), u on ln, 0 on the natural scale."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        return u * self._jacobian_weight

    def jacobian_to_scale(self, jac, u):
        """∂r/∂u [n_points, n_model] from the natural-scale Jacobian of all the
        problem's parameters [n_points, n_params] at one point u [≥ n_model]."""
        m = self.n_model
        factor = np.where(self.log10[:m], _LN10 * 10.0 ** u[:m], 1.0)
        if self.ln[:m].any():
            factor = np.where(self.ln[:m], np.exp(u[:m]), factor)
        return jac[:, self.free_index] * factor[None, :]

    def covariance_to_natural(self, cov_u, u):
        """Σ_x = D Σ_u D, D = diag(dx/du) at u (dimensions of `cov_u`: the leading ones)."""
        slope = self.jacobian_factor(u)[:cov_u.shape[0]]
        return cov_u * np.outer(slope, slope)

    def covariance_from_natural(self, cov_x, u):
        """Σ_u = D⁻¹ Σ_x D⁻¹, the inverse of :meth:`covariance_to_natural`."""
        slope = self.jacobian_factor(u)[:cov_x.shape[0]]
        return cov_x / np.outer(slope, slope)

    def extended(self, names, roles, lower, upper, scale="log10"):
        """This scale with further dimensions (sampled noise levels) appended.

        Parameters
        ----------
        names, roles : sequence [n_new]
        lower, upper : sequence of float [n_new]
            Finite natural bounds; they are also the start box, and the
            start is its centre on the fitting scale.
        scale : str
        """
        lo = np.array([_to_scale(float(x), scale) for x in lower], dtype=float)
        hi = np.array([_to_scale(float(x), scale) for x in upper], dtype=float)
        if not (np.isfinite(lo).all() and np.isfinite(hi).all()):
            raise KinfitError(f"the added dimensions {', '.join(names)} need finite "
                              f"positive bounds")
        n = len(names)
        return replace(
            self, names=self.names + tuple(names), roles=self.roles + tuple(roles),
            scales=self.scales + (scale,) * n,
            log10=np.concatenate([self.log10, np.full(n, scale == "log10")]),
            ln=np.concatenate([self.ln, np.full(n, scale == "ln")]),
            lower=np.concatenate([self.lower, lo]), upper=np.concatenate([self.upper, hi]),
            start=np.concatenate([self.start, 0.5 * (lo + hi)]),
            box_lower=np.concatenate([self.box_lower, lo]),
            box_upper=np.concatenate([self.box_upper, hi]),
            typical=np.concatenate([self.typical, np.ones(n)]))


def _natural(u, log10, ln):
    """Natural values of fitting-scale rows; `ln` None when no dimension is on ln."""
    out = np.where(log10, 10.0 ** np.clip(u, -_CLIP_LOG10, _CLIP_LOG10), u)
    if ln is not None and ln.any():
        out = np.where(ln, np.exp(np.clip(u, -_CLIP_LN, _CLIP_LN)), out)
    return out


def fit_scale(problem: Problem, rate_scale="log10"):
    """The :class:`FitScale` of the free parameters of `problem`.

    Parameters
    ----------
    problem : Problem
    rate_scale : {"log10", "ln", "natural"}
        Scale of the rate constants (log10 everywhere in kinfit's fits).

    Returns
    -------
    FitScale
    """
    if rate_scale not in SCALES:
        raise KinfitError(f"scale {rate_scale!r} is not known; choose one of {', '.join(SCALES)}")
    params = problem.parameters
    free = [i for i, p in enumerate(params) if p.vary]
    t_max = max(run.t_max for run in problem.experiment.runs)
    scales, lower, upper, start, box_lo, box_hi, typical = [], [], [], [], [], [], []
    for i in free:
        p = params[i]
        rule = _RULES.get(p.role, _OTHER)
        scale = rate_scale if p.role == Role.RATE_CONSTANT else rule.scale
        a, b = _to_scale(p.min, scale), _to_scale(p.max, scale)
        u = _to_scale(p.value, scale)
        half = rule.half(u, t_max)
        scales.append(scale)
        lower.append(a)
        upper.append(b)
        start.append(u)
        box_lo.append(a if math.isfinite(a) else u - half)
        box_hi.append(b if math.isfinite(b) else u + half)
        typical.append(rule.typical(u, t_max))
    scales = tuple(scales)
    return FitScale(
        names=tuple(params[i].name for i in free), roles=tuple(params[i].role for i in free),
        scales=scales, log10=np.array([s == "log10" for s in scales], dtype=bool),
        ln=np.array([s == "ln" for s in scales], dtype=bool),
        lower=np.array(lower, dtype=float), upper=np.array(upper, dtype=float),
        start=np.array(start, dtype=float), box_lower=np.array(box_lo, dtype=float),
        box_upper=np.array(box_hi, dtype=float), typical=np.array(typical, dtype=float),
        free_index=np.array(free, dtype=int),
        base=np.array([p.value for p in params], dtype=float))


class ScaledProblem:
    """Residuals (and their exact Jacobian) of a problem on the fitting scale.

    One integration gives both the residuals and, through forward
    sensitivities, their Jacobian; the last one is cached so that an
    optimiser's separate calls for residuals and Jacobian at one point cost a
    single integration. Counts evaluations and integrations for the report.

    Parameters
    ----------
    problem : Problem
    scale : FitScale
        Of the problem's free parameters (further dimensions are ignored).
    """

    def __init__(self, problem: Problem, scale: FitScale):
        self.problem, self.scale = problem, scale
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
        values = self.scale.to_values(u)
        pred, ok, _, info = self.problem.evaluate(values, max_rhs=max_rhs, fallback=fallback)
        self._count(values.shape[0], ok, info)
        return self.problem.weigh(pred, ok)

    def residuals_jacobian(self, u):
        """(residuals [n_points], ∂r/∂u [n_points, n_model]) at one point, cached."""
        u = np.asarray(u, dtype=float)
        if self._cache_u is not None and np.array_equal(u, self._cache_u):
            return self._cache
        values = self.scale.to_values(u)
        res, jac, ok, info = self.problem.residuals_jacobian(values)
        self._count(1, np.array([ok]), info)
        self._cache_u, self._cache = u.copy(), (res, self.scale.jacobian_to_scale(jac, u))
        return self._cache
