"""The parameter space that intervals and posteriors are computed in.

:func:`parameter_space` takes the free parameters of a
:class:`~kinfit.numerics.problem.Problem` onto the scale the fit already uses,
adds noise levels when they are to be sampled, and gives every parameter its
prior.

Scales
------
The fit's scale (:mod:`kinfit.estimation.scale`): rate constants as
u = log10 k, orders, initial concentrations and time offsets on their own
scale; sampled noise levels as log10 σ.

Default priors (a model file may replace one, see :mod:`kinfit.inputs.priors`)
------------------------------------------------------------------------
* rate constant: log-uniform between its bounds, i.e. uniform in log10 k;
* order, initial concentration, time offset: uniform between the bounds;
* noise level σ of a species (when sampled): log-uniform between 10⁻⁶ and
  10 times the largest magnitude measured for it (a proper prior whatever
  the data; the likelihood is negligible near either end).

A bound that is open makes the default prior flat (improper) on that side:
the posterior is then proper only if the data pin the parameter down, which
the profile-likelihood check reports (see :mod:`kinfit.estimation.profile`).

Noise (how the likelihood treats measurement error)
----------------------------------------------------
The formulas are those of :mod:`kinfit.estimation.likelihood`.

``declared``
    The experiment's ``[noise]`` gives each point its σ_i; nothing is
    sampled.
``per-species``
    One unknown σ per measured species, named ``sigma_<species>``, sampled
    with the other parameters.
``shared``
    One unknown σ for all points, named ``sigma``: the fit's convention; its
    maximum over σ is the fit's concentrated likelihood.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.estimation.likelihood import gaussian_log_likelihood, grouped_log_likelihood
from kinfit.estimation.scale import FitScale, fit_scale
from kinfit.inputs.parameters import Role
from kinfit.inputs.priors import Prior

if TYPE_CHECKING:
    from kinfit.numerics.problem import Problem

__all__ = ["ParameterSpace", "parameter_space", "NOISE_MODES"]

NOISE_MODES = ("auto", "declared", "per-species", "shared")
# support of the default noise prior, relative to the largest measured magnitude
_SIGMA_RANGE = (1e-6, 10.0)


@dataclass(frozen=True)
class ParameterSpace:
    """Free parameters (and sampled noise levels) on their inference scale.

    Attributes
    ----------
    problem : Problem
    scale : FitScale
        The problem's free parameters in order, then the sampled noise
        levels: names, roles, scales and bounds (see
        :mod:`kinfit.estimation.scale`).
    priors : tuple of Prior
        Natural-scale priors, cut to the bounds.
    noise : str
        ``"declared"``, ``"per-species"`` or ``"shared"``.
    noise_groups : tuple of str
        Species of each sampled σ (``("all",)`` when shared).
    group_index : ndarray [n_points] of int
        The σ group of each data point (all 0 when declared).
    """

    problem: Problem
    scale: FitScale
    priors: tuple[Prior, ...]
    noise: str
    noise_groups: tuple[str, ...] = ()
    group_index: np.ndarray = field(default=None, repr=False)

    @property
    def names(self):
        """Natural names [n_dim]: free parameters, then noise levels."""
        return self.scale.names

    @property
    def labels(self):
        """Names on the inference scale (``log10_k`` for a rate constant k)."""
        return self.scale.labels

    @property
    def roles(self):
        return self.scale.roles

    @property
    def log10(self):
        """Whether each dimension is handled as log10 of the natural value [n_dim]."""
        return self.scale.log10

    @property
    def lower(self):
        """Lower bounds on the inference scale [n_dim]."""
        return self.scale.lower

    @property
    def upper(self):
        """Upper bounds on the inference scale [n_dim]."""
        return self.scale.upper

    @property
    def free_index(self):
        """Columns of the problem's parameter rows that are free [n_model]."""
        return self.scale.free_index

    @property
    def base(self):
        """Values of all the problem's parameters [n_params] (fixed ones keep them)."""
        return self.scale.base

    @property
    def n_dim(self):
        return self.scale.n_dim

    @property
    def n_model(self):
        """Number of the problem's free parameters (the leading dimensions)."""
        return self.scale.n_model

    def to_natural(self, u):
        """Inference-scale rows [n, n_dim] -> natural values [n, n_dim]."""
        return self.scale.to_natural(u)

    def from_natural(self, x):
        """Natural values [n, n_dim] -> inference scale [n, n_dim]."""
        return self.scale.from_natural(x)

    def to_values(self, u):
        """Full parameter rows of the problem [n, n_params] from rows [n, ≥ n_model]."""
        return self.scale.to_values(u)

    def log_prior(self, u):
        """Log prior density on the inference scale [n] (−inf outside the support).

        Includes the change-of-variables term ln |dx/du| of each logarithmic
        dimension (up to a constant), so a log-uniform prior is flat in u.
        """
        u = np.atleast_2d(np.asarray(u, dtype=float))
        x = self.to_natural(u)
        jacobian = self.scale.log_jacobian(u)
        out = np.zeros(u.shape[0])
        for j, prior in enumerate(self.priors):
            out += prior.log_density(x[:, j])
            out += jacobian[:, j]
        out[~np.all((u >= self.lower) & (u <= self.upper), axis=1)] = -np.inf
        return np.where(np.isnan(out), -np.inf, out)

    def log_likelihood(self, res, u):
        """Gaussian log-likelihood of residual rows [n, n_points] (see the module notes).

        `res` are the problem's residuals with declared noise, unweighted
        residuals f − y when the noise levels are sampled (their σ is in `u`).
        """
        res = np.atleast_2d(res)
        if self.noise == "declared":
            return gaussian_log_likelihood(res, self.problem.observation.sigma)
        return grouped_log_likelihood(res, self.to_natural(u)[:, self.n_model:],
                                      self.group_index)

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
    scale = fit_scale(problem)
    params = problem.parameters
    priors = []
    for i, logarithmic in zip(scale.free_index, scale.logarithmic):
        p = params[i]
        default = Prior("log-uniform") if logarithmic else Prior("uniform")
        priors.append((p.prior or default).within(p.min, p.max))

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
        names, lower, upper = [], [], []
        for g in groups:
            name = "sigma" if g == "all" else f"sigma_{g}"
            if name in taken:
                raise KinfitError(f"{problem.mechanism.source}: kinfit names the noise level "
                                  f"{name!r}, but the model already has a parameter of that "
                                  f"name; rename the model's parameter")
            size = float(np.max(np.abs(obs.values[group_index == groups.index(g)]))) or 1.0
            lo, hi = _SIGMA_RANGE[0] * size, _SIGMA_RANGE[1] * size
            names.append(name)
            lower.append(lo)
            upper.append(hi)
            priors.append(Prior("log-uniform").within(lo, hi))
        scale = scale.extended(names, [Role.NOISE] * len(names), lower, upper, "log10")
    return ParameterSpace(problem=problem, scale=scale, priors=tuple(priors), noise=mode,
                          noise_groups=groups, group_index=group_index)
