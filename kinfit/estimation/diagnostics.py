"""Convergence of an ensemble chain, said plainly.

The estimators come from well-kept libraries, not from kinfit:

* integrated autocorrelation time τ: ``emcee.autocorr.integrated_time``
  (Goodman & Weare 2010; Sokal's automatic window, as emcee documents);
* effective sample size (bulk) and rank-normalised split R-hat across
  walkers: ``arviz_stats`` (Vehtari et al. 2021, "Rank-normalization,
  folding, and localization").

Burn-in is discarded from τ: by default 3 τ (emcee's documentation suggests
"a few times" τ), never more than half the chain. The verdict follows emcee's
own rule and the R-hat rule of Vehtari et al.: a chain is called converged
when the kept part is at least 50 τ long for every parameter and every
R-hat ≤ 1.01; otherwise the diagnostics say why and how many steps to run.
R-hat is printed with enough digits to show its distance from the limit
(:func:`format_rhat`: 1.0104, not 1.010).

How many steps to advise
------------------------
The advice ``--steps N --resume`` is meant to be followed once, so N carries
a margin. With τ the largest integrated autocorrelation time measured (over
the parameters, on the kept part and on the whole chain, whichever is
larger), n_kept the steps kept and R̂ the largest R-hat,

    N = ⌈1.5 × (3 τ + max(100 τ, n_kept (R̂ − 1) / 0.01))⌉,

at least one step more than the chain has. The parts:

* 3 τ: the burn-in the next diagnosis will discard.
* 100 τ: for chains in equilibrium, split R-hat − 1 ≈ (τ − 1)/n_kept
  (derived here: each half-chain of n = n_kept/2 steps has a mean with variance σ² τ/n,
  so the between-chain variance is B ≈ σ² τ and
  R̂² = (n − 1)/n + B/(n W) ≈ 1 + (τ − 1)/n, halved by the square root),
  so R̂ ≤ 1.01 needs about 100 τ kept, more than emcee's 50 τ.
* n_kept (R̂ − 1)/0.01: the same 1/n_kept law applied to the R-hat measured
  now, which is larger than the equilibrium value while the walkers still
  remember their start.
* 1.5: the margin. R̂ − 1 rests on the between-chain variance of 2 W split
  chains (W walkers), whose relative standard deviation is about
  sqrt(2/(2W − 1)) ≈ 0.18 for 32 walkers, so clearing the limit 19 times in
  20 needs about 1 + 1.645 × 0.18 ≈ 1.3 times the expected length; and τ
  measured on a chain shorter than 50 τ is biased low (emcee's
  documentation, from memory). Measured (``tests/benchmarks/study_resume_advice.py``,
  12 seeds of each demo study, 6000-step chains cut after 200, 400, 800 and
  1200 steps): the advice followed once reached the criterion in 95 of the
  95 unconverged cuts, against 85 with a margin of 1.25, 60 with none, and
  81 with the earlier rule (63 τ of the kept part, or the R-hat scaling with
  a margin of 1.2), for a median N about a quarter larger than the earlier
  rule's. A posterior much harder than these (τ still growing with the
  chain) can need a second resume; the advice is then computed afresh from
  the longer chain.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Diagnostics", "diagnose", "format_rhat", "MIN_TAU_MULTIPLE", "MAX_RHAT",
           "ACCEPTANCE_RANGE", "RHAT_TAU_MULTIPLE", "ADVICE_MARGIN"]

MIN_TAU_MULTIPLE = 50      # emcee's documented rule of thumb (tol=50 in integrated_time)
MAX_RHAT = 1.01            # Vehtari et al. 2021
BURN_TAU_MULTIPLE = 3      # "a few times" τ, as emcee's documentation suggests
RHAT_TAU_MULTIPLE = 100    # kept steps / τ at which split R-hat − 1 ≈ 0.01 (module notes)
ADVICE_MARGIN = 1.5        # margin of the advised number of steps (module notes)
# Acceptance fractions outside this range are worth a look: common practice for the
# affine-invariant ensemble sampler (Foreman-Mackey et al. 2013 suggest 0.2-0.5, from memory).
ACCEPTANCE_RANGE = (0.15, 0.75)


@dataclass(frozen=True)
class Diagnostics:
    """How far an ensemble chain can be trusted.

    Attributes
    ----------
    converged : bool
    reasons : tuple of str
        Why not, in plain words (empty when converged).
    advice : str
        What to do next ("" when converged).
    autocorr_time, ess, rhat : dict of str to float
        Per parameter, on the kept part of the chain (τ in steps).
    acceptance_fraction : float
        Mean over walkers.
    acceptance_range : tuple of float
        Lowest and highest walker's acceptance fraction.
    n_steps, burn_in, thin, n_kept : int
        Steps run, steps discarded, thinning, steps kept.
    n_walkers : int
    tau_multiple : float
        Kept steps / largest τ (50 or more wanted).
    steps_suggested : int
        Total steps to run (``--steps N --resume``) so that one resume
        usually reaches the criterion (see the module notes).
    """

    converged: bool
    reasons: tuple[str, ...]
    advice: str
    autocorr_time: dict[str, float]
    ess: dict[str, float]
    rhat: dict[str, float]
    acceptance_fraction: float
    acceptance_range: tuple[float, float]
    n_steps: int
    burn_in: int
    thin: int
    n_kept: int
    n_walkers: int
    tau_multiple: float
    steps_suggested: int

    def to_dict(self):
        return {
            "converged": self.converged, "reasons": list(self.reasons), "advice": self.advice,
            "autocorr_time": self.autocorr_time, "ess": self.ess, "rhat": self.rhat,
            "acceptance_fraction": self.acceptance_fraction,
            "acceptance_fraction_range": list(self.acceptance_range),
            "n_steps": self.n_steps, "burn_in": self.burn_in, "thin": self.thin,
            "n_kept": self.n_kept, "n_walkers": self.n_walkers,
            "chain_length_over_autocorr_time": self.tau_multiple,
            "steps_suggested": self.steps_suggested,
            "rules": {"min_chain_over_autocorr_time": MIN_TAU_MULTIPLE, "max_rhat": MAX_RHAT},
        }


def autocorr_time(chain):
    """Integrated autocorrelation time of each parameter, in steps.

    Parameters
    ----------
    chain : ndarray [n_steps, n_walkers, n_dim]

    Returns
    -------
    ndarray [n_dim]
        emcee's estimate with ``tol=0`` (no exception for short chains).
    """
    import emcee

    if chain.shape[0] < 2:
        return np.full(chain.shape[2], np.inf)
    with np.errstate(all="ignore"):
        tau = emcee.autocorr.integrated_time(chain, tol=0, quiet=True)
    return np.where(np.isfinite(tau) & (tau > 0), tau, np.inf)


def _ess_rhat(kept):
    """Bulk ESS and rank-normalised split R-hat per parameter of [n_steps, n_walkers, n_dim]."""
    from arviz_stats.base import array_stats

    arr = np.moveaxis(kept, (2, 1, 0), (0, 1, 2))               # [n_dim, n_walkers, n_steps]
    if kept.shape[0] < 4:
        return np.full(kept.shape[2], np.nan), np.full(kept.shape[2], np.nan)
    with np.errstate(all="ignore"):
        ess = np.asarray(array_stats.ess(arr, chain_axis=-2, draw_axis=-1), dtype=float)
        rhat = np.asarray(array_stats.rhat(arr, chain_axis=-2, draw_axis=-1), dtype=float)
    return ess, rhat


def format_rhat(value):
    """R-hat with the digits that show its distance from 1 and from :data:`MAX_RHAT`.

    Four decimals (3 to 4 significant digits of R-hat − 1 near the limit),
    more when a value above the limit would otherwise print as the limit.

    >>> format_rhat(1.0104), format_rhat(1.003), format_rhat(1.01002)
    ('1.0104', '1.0030', '1.01002')
    """
    if not math.isfinite(value):
        return "undefined"
    for decimals in range(4, 9):
        text = f"{value:.{decimals}f}"
        if not value > MAX_RHAT or float(text) > MAX_RHAT:
            return text
    return text


def _steps_to_advise(tau, n_kept, worst_rhat, n_steps):
    """Total steps N of the advice (see the module notes); τ the larger of the kept
    part's and the whole chain's."""
    if not (math.isfinite(tau) and tau > 0):
        return 4 * max(n_steps, 100)
    kept = RHAT_TAU_MULTIPLE * tau
    if math.isfinite(worst_rhat) and worst_rhat > MAX_RHAT:
        kept = max(kept, n_kept * (worst_rhat - 1.0) / (MAX_RHAT - 1.0))
    return math.ceil(ADVICE_MARGIN * (BURN_TAU_MULTIPLE * tau + kept))


def diagnose(chain, names, accepted, burn=None, thin=1):
    """Diagnose an ensemble chain.

    Parameters
    ----------
    chain : ndarray [n_steps, n_walkers, n_dim]
        On the scale the sampler moved in.
    names : sequence of str [n_dim]
    accepted : ndarray [n_walkers]
        Accepted proposals of each walker over the whole chain.
    burn : int, optional
        Steps to discard; by default 3 τ of the whole chain, at most half.
    thin : int
        Keep every `thin`-th step after burn-in (τ and ESS are computed on
        the unthinned kept steps; thinning only reduces what is stored).

    Returns
    -------
    Diagnostics
    """
    n_steps, n_walkers, n_dim = chain.shape
    tau_whole = float(np.max(autocorr_time(chain))) if n_dim else 0.0
    if burn is None:
        worst = tau_whole
        burn = int(min(math.ceil(BURN_TAU_MULTIPLE * worst), n_steps // 2)) \
            if math.isfinite(worst) else n_steps // 2
    burn = int(min(max(burn, 0), max(n_steps - 1, 0)))
    kept = chain[burn:]
    tau = autocorr_time(kept)
    ess, rhat = _ess_rhat(kept)
    tau_max = float(np.max(tau)) if n_dim else 0.0
    multiple = kept.shape[0] / tau_max if tau_max > 0 and math.isfinite(tau_max) else 0.0
    acc = np.asarray(accepted, dtype=float) / max(n_steps, 1)
    reasons = []
    if multiple < MIN_TAU_MULTIPLE:
        slow = names[int(np.argmax(tau))] if n_dim else ""
        reasons.append(f"the chain after burn-in is only {multiple:.0f} autocorrelation times "
                       f"long (τ = {tau_max:.0f} steps for {slow}); {MIN_TAU_MULTIPLE} are "
                       f"needed for reliable estimates")
    bad_rhat = [f"{n} {format_rhat(r)}" for n, r in zip(names, rhat) if not r <= MAX_RHAT]
    if bad_rhat:
        reasons.append(f"R-hat above {MAX_RHAT} (walkers disagree): {', '.join(bad_rhat)}")
    lo, hi = ACCEPTANCE_RANGE
    if n_walkers and not lo <= float(np.mean(acc)) <= hi:
        reasons.append(f"mean acceptance fraction {np.mean(acc):.2f} is outside {lo}–{hi}; "
                       f"the posterior may be badly shaped (a parameter the data cannot pin "
                       f"down, or several separate modes)")
    worst_rhat = float(np.nanmax(rhat)) if n_dim and np.isfinite(rhat).any() else math.nan
    suggested = _steps_to_advise(max(tau_max, tau_whole), kept.shape[0], worst_rhat,
                                 n_steps)
    suggested = max(suggested, n_steps + 1) if reasons else n_steps
    advice = "" if not reasons else (
        f"not converged: extend this chain with --steps {suggested} --resume (from the "
        f"measured autocorrelation time, τ = {max(tau_max, tau_whole):.0f} steps: burn-in "
        f"and {RHAT_TAU_MULTIPLE} τ or what R-hat needs, with a margin of {ADVICE_MARGIN:g}, "
        f"so that one resume usually suffices); if R-hat stays high, look at the profile "
        f"and corner plots for a parameter the data cannot pin down")
    return Diagnostics(
        converged=not reasons, reasons=tuple(reasons), advice=advice,
        autocorr_time={n: float(t) for n, t in zip(names, tau)},
        ess={n: float(e) for n, e in zip(names, ess)},
        rhat={n: float(r) for n, r in zip(names, rhat)},
        acceptance_fraction=float(np.mean(acc)) if n_walkers else math.nan,
        acceptance_range=(float(np.min(acc)), float(np.max(acc))) if n_walkers else (0, 0),
        n_steps=n_steps, burn_in=burn, thin=int(thin), n_kept=kept.shape[0],
        n_walkers=n_walkers, tau_multiple=float(multiple), steps_suggested=int(suggested))
