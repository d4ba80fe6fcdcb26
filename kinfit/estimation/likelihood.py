"""The Gaussian likelihood and the information criteria: kinfit's one statement of them.

The fit, the profile likelihood, the sampler and the model ranking all use
the functions here, so each convention below is written once.

Residuals and noise
-------------------
Measurement errors are Gaussian and independent. With residuals r_i = f_i − y_i
(model minus data) at N points and RSS = Σ r_i²:

**Declared noise** (the experiment's ``[noise]`` gives every point its σ_i;
the problem's residuals are then weighted, r_i/σ_i)::

    ln L = −½ [χ² + Σ ln(2π σ_i²)],      χ² = Σ (r_i/σ_i)²

**Estimated noise, one σ for all points** (the fit's default when nothing is
declared): σ is replaced by its maximum-likelihood value σ̂² = RSS/N, which
gives the concentrated likelihood::

    ln L = −(N/2) [ln(2π RSS/N) + 1]

**Sampled noise, one σ_g per group** (the posterior's ``per-species`` mode,
or one group for ``shared``), with n_g points and RSS_g in group g::

    ln L = Σ_g [−RSS_g/(2σ_g²) − n_g ln σ_g] − (N/2) ln 2π

Its maximum over a single shared σ is the concentrated likelihood above.

All three include every constant, so they are true log densities: the first
two are statsmodels' OLS ``llf`` for a model linear in its parameters
(``tests/numerics/test_problem.py`` checks it), the first and third are sums of
``scipy.stats.norm.logpdf``.

Deviance of the profile likelihood
----------------------------------
The profile needs only differences of D = −2 ln L between parameter sets of
one problem, so it drops what does not change with them::

    declared noise:   D = χ²             (−2 ln L minus Σ ln 2πσ_i²)
    estimated noise:  D = N ln RSS       (−2 ln L minus N (ln(2π/N) + 1))

ΔD equals Δ(−2 ln L) exactly.

Information criteria
--------------------
From the maximised ln L, with p parameters and N points::

    AIC  = −2 ln L + 2p                                  (Akaike 1974)
    AICc = AIC + 2p(p + 1)/(N − p − 1), ∞ if N ≤ p + 1   (Hurvich & Tsai 1989)
    BIC  = −2 ln L + p ln N                              (Schwarz 1978)

p counts the free model parameters (rate constants, orders, temperature-law
parameters, fitted initial concentrations and time offsets) **and the linear
unknowns** of spectrometer signals (absorptivities, offsets, drifts: they are
estimated, by variable projection, inside every evaluation). **The noise
level is not counted**, neither a declared one nor the estimated σ̂: this is
statsmodels' OLS convention (``df_model + k_constant``). Counting σ would add
the same 2 (or ln N) to every model fitted to the same data, so rankings are
unchanged. lmfit reports N ln(χ²/N) + 2p, which differs from AIC here by the
constant N (ln 2π + 1) for estimated noise and ranks models identically.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from kinfit.numerics.problem import build_problem

if TYPE_CHECKING:
    from kinfit.inputs.experiment import Experiment
    from kinfit.inputs.mechanism import Mechanism
    from kinfit.numerics.problem import Problem

__all__ = ["gaussian_log_likelihood", "grouped_log_likelihood", "deviance", "DEVIANCE_NAMES",
           "count_parameters", "information_criteria", "log_likelihood"]

_LOG_2PI = math.log(2.0 * math.pi)
DEVIANCE_NAMES = {True: "chi2", False: "N ln RSS"}    # by whether the noise is declared


def gaussian_log_likelihood(res, sigma=None):
    """ln L of residual rows with declared or estimated noise (see the module notes).

    Parameters
    ----------
    res : ndarray [n_sets, n_points] or [n_points]
        Residuals as :meth:`Problem.residuals` gives them: (f − y)/σ with
        declared noise, f − y otherwise.
    sigma : ndarray [n_points] or None
        The declared σ of each point; ``None`` when the noise is estimated.

    Returns
    -------
    ndarray [n_sets]
    """
    res = np.atleast_2d(res)
    n = res.shape[1]
    chi2 = np.einsum("ij,ij->i", res, res)
    if sigma is not None:
        const = np.sum(np.log(2 * math.pi * sigma ** 2))
        return -0.5 * (chi2 + const)
    with np.errstate(divide="ignore"):
        return -0.5 * n * (np.log(2 * math.pi * chi2 / n) + 1.0)


def grouped_log_likelihood(res, sigma, group_index):
    """ln L with one sampled σ per group of points (see the module notes).

    Parameters
    ----------
    res : ndarray [n_sets, n_points]
        Unweighted residuals f − y.
    sigma : ndarray [n_sets, n_groups]
        Each set's noise level of each group.
    group_index : ndarray [n_points] of int
        The group of each point.

    Returns
    -------
    ndarray [n_sets]
    """
    res = np.atleast_2d(res)
    n_groups = sigma.shape[1]
    ss = np.zeros((res.shape[0], n_groups))
    counts = np.bincount(group_index, minlength=n_groups)
    for g in range(n_groups):
        block = res[:, group_index == g]
        ss[:, g] = np.einsum("ij,ij->i", block, block)
    return (-0.5 * np.sum(ss / sigma ** 2, axis=1) - np.sum(counts * np.log(sigma), axis=1)
            - 0.5 * res.shape[1] * _LOG_2PI)


def deviance(res, declared):
    """The profile deviance D of one residual vector [n_points] (see the module notes).

    Returns
    -------
    float
        χ² when `declared`, else N ln RSS.
    """
    rss = float(res @ res)
    if declared:
        return rss
    return res.size * math.log(max(rss, 1e-300))


def count_parameters(problem: Problem):
    """p of the information criteria: free parameters plus linear unknowns (not σ)."""
    return sum(1 for p in problem.parameters if p.vary) + problem.n_linear


def information_criteria(log_lik, n_points, n_params):
    """AIC, AICc and BIC from a maximised log-likelihood (see the module notes).

    Parameters
    ----------
    log_lik : float
        Maximised log-likelihood.
    n_points, n_params : int
        N data points and p parameters (as :func:`count_parameters` counts them).

    Returns
    -------
    dict with keys ``aic``, ``aicc``, ``bic``
    """
    aic = -2.0 * log_lik + 2.0 * n_params
    denom = n_points - n_params - 1
    aicc = aic + 2.0 * n_params * (n_params + 1) / denom if denom > 0 else math.inf
    bic = -2.0 * log_lik + n_params * math.log(n_points)
    return {"aic": aic, "aicc": aicc, "bic": bic}


def log_likelihood(mechanism: Mechanism, experiment: Experiment, values=None):
    """Gaussian log-likelihood of one parameter set over all runs (see the module notes).

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
    values : mapping of str to float, optional
        Parameter values; starting values for any not given.

    Returns
    -------
    float
    """
    problem = build_problem(mechanism, experiment)
    return float(gaussian_log_likelihood(problem.residuals(values),
                                         problem.observation.sigma)[0])
