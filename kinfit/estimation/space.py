"""The parameter space that intervals and posteriors are computed in.

:func:`parameter_space` takes the free parameters of a :class:`~kinfit.objective.Problem`
onto the scale the fit already uses, adds noise levels when they are to be
sampled, and gives every parameter its prior.

Scales
------
Rate constants are handled as u = log10 k (positive by construction, well
scaled when k is far from 1); noise levels as log10 σ; orders, initial
concentrations and time offsets on their own scale.

Default priors (a model file may replace one, see :mod:`kinfit.priors`)
------------------------------------------------------------------------
* rate constant: log-uniform between its bounds, i.e. uniform in log10 k;
* order, initial concentration, time offset: uniform between the bounds;
* noise level σ of a species (when sampled): log-uniform between 10⁻⁶ and
  10 times the largest magnitude measured for it (a proper prior whatever
  the data; the likelihood is negligible near either end).

A bound that is open makes the default prior flat (improper) on that side:
the posterior is then proper only if the data pin the parameter down, which
the profile-likelihood check reports (see :mod:`kinfit.profile`).

Noise (how the likelihood treats measurement error)
----------------------------------------------------
``declared``
    The experiment's ``[noise]`` gives each point its σ_i; nothing is
    sampled; ln L as in :mod:`kinfit.objective`.
``per-species``
    One unknown σ per measured species, named ``sigma_<species>``, sampled
    with the other parameters: ln L = Σ_s [−RSS_s/(2σ_s²) − n_s ln σ_s] − (N/2) ln 2π.
``shared``
    One unknown σ for all points, named ``sigma``: the fit's convention; its
    maximum over σ is the concentrated likelihood of :mod:`kinfit.objective`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.priors import Prior
from kinfit.inputs.parameters import Role

__all__ = ["ParameterSpace", "parameter_space", "NOISE_MODES"]

NOISE_MODES = ("auto", "declared", "per-species", "shared")
_LN10 = math.log(10.0)
_LOG_2PI = math.log(2.0 * math.pi)
# support of the default noise prior, relative to the largest measured magnitude
_SIGMA_RANGE = (1e-6, 10.0)


@dataclass(frozen=True)
class ParameterSpace:
    """Free parameters (and sampled noise levels) on their inference scale.

    Attributes
    ----------
    problem : Problem
    names : tuple of str
        Natural names: the problem's free parameters in order, then the
        sampled noise levels.
    labels : tuple of str
        Names on the inference scale (``log10_k`` for a rate constant k).
    roles : tuple of str
    log10 : ndarray [n_dim] of bool
        Whether each is handled as log10 of the natural value.
    lower, upper : ndarray [n_dim]
        Bounds on the inference scale.
    priors : tuple of Prior
        Natural-scale priors, cut to the bounds.
    free_index : ndarray [n_model] of int
        Columns of the problem's parameter rows that are free.
    base : ndarray [n_params]
        Values of all the problem's parameters (fixed ones keep them).
    noise : str
        ``"declared"``, ``"per-species"`` or ``"shared"``.
    noise_groups : tuple of str
        Species of each sampled σ (``("all",)`` when shared).
    group_index : ndarray [n_points] of int
        The σ group of each data point (all 0 when declared).
    """

    problem: object
    names: tuple
    labels: tuple
    roles: tuple
    log10: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    priors: tuple
    free_index: np.ndarray
    base: np.ndarray
    noise: str
    noise_groups: tuple = ()
    group_index: np.ndarray = field(default=None, repr=False)

    @property
    def n_dim(self):
        return len(self.names)

    @property
    def n_model(self):
        """Number of the problem's free parameters (the leading dimensions)."""
        return self.free_index.size

    def to_natural(self, u):
        """Inference-scale rows [n, n_dim] -> natural values [n, n_dim]."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        return np.where(self.log10, 10.0 ** np.clip(u, -300.0, 300.0), u)

    def from_natural(self, x):
        """Natural values [n, n_dim] -> inference scale [n, n_dim]."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.log10, np.log10(x), x)

    def to_values(self, u):
        """Full parameter rows of the problem [n, n_params] from rows [n, ≥ n_model]."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        out = np.repeat(self.base[None], u.shape[0], axis=0)
        m = self.n_model
        out[:, self.free_index] = np.where(self.log10[:m], 10.0 ** np.clip(u[:, :m], -300, 300),
                                           u[:, :m])
        return out

    def log_prior(self, u):
        """Log prior density on the inference scale [n] (−inf outside the support).

        Includes the change-of-variables term ln(x ln 10) of each log10
        dimension, so a log-uniform prior is flat in u.
        """
        u = np.atleast_2d(np.asarray(u, dtype=float))
        x = self.to_natural(u)
        out = np.zeros(u.shape[0])
        for j, prior in enumerate(self.priors):
            out += prior.log_density(x[:, j])
            if self.log10[j]:
                out += u[:, j] * _LN10
        out[~np.all((u >= self.lower) & (u <= self.upper), axis=1)] = -np.inf
        return np.where(np.isnan(out), -np.inf, out)

    def log_likelihood(self, res, u):
        """Gaussian log-likelihood of residual rows [n, n_points] (see the module notes)."""
        res = np.atleast_2d(res)
        if self.noise == "declared":
            return self.problem.log_likelihood(res)
        n_groups = len(self.noise_groups)
        sigma = self.to_natural(u)[:, self.n_model:]                     # [n, n_groups]
        ss = np.zeros((res.shape[0], n_groups))
        counts = np.bincount(self.group_index, minlength=n_groups)
        for g in range(n_groups):
            block = res[:, self.group_index == g]
            ss[:, g] = np.einsum("ij,ij->i", block, block)
        return (-0.5 * np.sum(ss / sigma ** 2, axis=1) - np.sum(counts * np.log(sigma), axis=1)
                - 0.5 * res.shape[1] * _LOG_2PI)

    def from_fit(self, fit_result):
        """The fit's best values on the inference scale [n_dim], noise at its RMS residual."""
        x = [fit_result.values[n] for n in self.names[:self.n_model]]
        res = np.asarray(fit_result.residuals)
        for g in range(len(self.noise_groups)):
            block = res[self.group_index == g]
            x.append(max(float(np.sqrt(np.mean(block ** 2))), 1e-300))
        return self.from_natural(np.array(x))[0]


def _noise_mode(noise, problem):
    if noise not in NOISE_MODES:
        raise KinfitError(f"noise {noise!r} is not known; choose one of {', '.join(NOISE_MODES)}")
    if noise == "auto":
        return "declared" if problem.sigma_known else "per-species"
    if noise == "declared" and not problem.sigma_known:
        raise KinfitError(f"{problem.experiment.source}: noise 'declared' was asked for but the "
                          f"experiment has no [noise] table; declare it or sample the noise "
                          f"('per-species' or 'shared')")
    return noise


def parameter_space(problem, noise="auto", with_noise=True):
    """Build the :class:`ParameterSpace` of `problem`.

    Parameters
    ----------
    problem : Problem
    noise : {"auto", "declared", "per-species", "shared"}
        How measurement error enters the likelihood (see the module notes);
        ``auto`` uses the declared noise when there is one, else one σ per
        species.
    with_noise : bool
        False leaves the noise levels out (profile likelihood concentrates
        them out instead of sampling them).

    Returns
    -------
    ParameterSpace

    Raises
    ------
    KinfitError
        For an unknown noise mode, or a noise-level name that a model
        parameter already uses.
    """
    mode = _noise_mode(noise, problem) if with_noise else "declared"
    params = problem.parameters
    free = [i for i, p in enumerate(params) if p.vary]
    names, labels, roles, log10, lower, upper, priors = [], [], [], [], [], [], []
    for i in free:
        p = params[i]
        is_log = p.role == Role.RATE_CONSTANT
        default = Prior("log-uniform") if is_log else Prior("uniform")
        prior = (p.prior or default).within(p.min, p.max)
        names.append(p.name)
        labels.append(f"log10_{p.name}" if is_log else p.name)
        roles.append(p.role)
        log10.append(is_log)
        if is_log:
            lower.append(math.log10(p.min) if p.min > 0 else -math.inf)
            upper.append(math.log10(p.max) if math.isfinite(p.max) else math.inf)
        else:
            lower.append(p.min)
            upper.append(p.max)
        priors.append(prior)

    obs = problem.observation
    group_index = np.zeros(obs.n_points, dtype=int)
    groups = ()
    if mode in ("per-species", "shared"):
        species = list(dict.fromkeys(s for _, s, _ in obs.traces))
        groups = ("all",) if mode == "shared" else tuple(species)
        if mode == "per-species":
            for _, s, sl in obs.traces:
                group_index[sl] = species.index(s)
        taken = set(problem.names)
        for g in groups:
            name = "sigma" if g == "all" else f"sigma_{g}"
            if name in taken:
                raise KinfitError(f"{problem.mechanism.source}: kinfit names the noise level "
                                  f"{name!r}, but the model already has a parameter of that "
                                  f"name; rename the model's parameter")
            scale = float(np.max(np.abs(obs.values[group_index == groups.index(g)]))) or 1.0
            lo, hi = _SIGMA_RANGE[0] * scale, _SIGMA_RANGE[1] * scale
            names.append(name)
            labels.append(f"log10_{name}")
            roles.append(Role.NOISE)
            log10.append(True)
            lower.append(math.log10(lo))
            upper.append(math.log10(hi))
            priors.append(Prior("log-uniform").within(lo, hi))
    return ParameterSpace(
        problem=problem, names=tuple(names), labels=tuple(labels), roles=tuple(roles),
        log10=np.array(log10, dtype=bool), lower=np.array(lower, dtype=float),
        upper=np.array(upper, dtype=float), priors=tuple(priors),
        free_index=np.array(free, dtype=int),
        base=np.array([p.value for p in params], dtype=float), noise=mode,
        noise_groups=groups, group_index=group_index)

