"""Posterior sampling of rate constants, orders and noise with emcee: the front door.

:func:`sample` fits (unless given a fit), rebuilds the residual problem as
the fit built it (integrator, spectral components), starts an ensemble of
walkers around the least-squares optimum and runs emcee's ensemble sampler
(:mod:`kinfit.estimation.sampler`), checkpoints the chain
(:mod:`kinfit.estimation.chains`), diagnoses convergence
(:mod:`kinfit.estimation.diagnostics`), profiles the likelihood
(:mod:`kinfit.estimation.profile`) and returns a :class:`Posterior` of plain
numbers, with the covariance, profile and posterior intervals side by side.

What is sampled
---------------
The free parameters on the fitting scale (log10 for rate constants,
:mod:`kinfit.estimation.scale`), plus the noise levels when the noise is not
declared; priors and the noise conventions are described in
:mod:`kinfit.estimation.space`, :mod:`kinfit.inputs.priors` and
:mod:`kinfit.estimation.likelihood`.

Checkpoints and resume
----------------------
Every ``checkpoint_every`` steps (and when interrupted by Ctrl-C or
SIGTERM) the chain so far, the log-probabilities, acceptance counts and the
sampler's random state are written atomically to a compressed ``.npz``.
:func:`sample` with ``resume=True`` continues from it; because the saved
random state and walker positions are exactly those of the interrupted run,
the resumed chain is identical to an uninterrupted one with the same seed.
Steps after the last checkpoint of a killed process are recomputed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.defaults import (
    CHECKPOINT_EVERY,
    DEFAULT_MOVES,
    DEFAULT_STARTS,
    DEFAULT_STEPS,
    DEFAULT_WALKERS,
)
from kinfit.core.errors import KinfitError
from kinfit.estimation.chains import (
    CHAIN_FILE,
    ChainState,
    check_resumable,
    fingerprint,
    load_chain,
    write_chain,
)
from kinfit.estimation.diagnostics import diagnose
from kinfit.estimation.fit_result import FitResult
from kinfit.estimation.least_squares import fit, parameter_unit
from kinfit.estimation.profile import profile_intervals
from kinfit.estimation.sampler import (
    LogPosterior,
    emcee_moves,
    run_ensemble,
    start_ball,
)
from kinfit.estimation.space import parameter_space
from kinfit.inputs.parameters import Role
from kinfit.numerics.observation import sigma_at

if TYPE_CHECKING:
    from kinfit.estimation.diagnostics import Diagnostics
    from kinfit.estimation.profile import Profiles
    from kinfit.estimation.space import ParameterSpace
    from kinfit.inputs.experiment import Experiment
    from kinfit.inputs.mechanism import Mechanism
    from kinfit.inputs.priors import Prior

__all__ = ["Posterior", "Settings", "RunBands", "sample", "summarise", "compare_intervals"]

# Intervals "disagree markedly" when one side of the profile or posterior interval
# differs from the covariance interval's half width by more than this fraction
# (kinfit's choice; no standard exists).
DISAGREEMENT = 0.25
_BAND_DRAWS = 200


@dataclass(frozen=True)
class Settings:
    """How a chain was (or is to be) run; recorded in the outputs."""

    walkers: int = DEFAULT_WALKERS
    steps: int = DEFAULT_STEPS
    seed: int = 0
    noise: str = "auto"
    moves: str = DEFAULT_MOVES
    burn: int | None = None
    thin: int = 1
    checkpoint_every: int = CHECKPOINT_EVERY
    max_time: float | None = None

    def to_dict(self):
        return dict(self.__dict__)


@dataclass(frozen=True)
class RunBands:
    """Posterior bands of one run's curves.

    Attributes
    ----------
    run : str
    times : ndarray [n_times]
    species : tuple of str
        The species measured in this run (columns below).
    median, curve_low, curve_high : ndarray [n_times, n_species]
        Median and 95 % band of the model curve (uncertainty of the parameters).
    predictive_low, predictive_high : ndarray [n_times, n_species]
        95 % posterior-predictive band of a new measurement (curve plus noise).
    """

    run: str
    times: np.ndarray
    species: tuple[str, ...]
    median: np.ndarray
    curve_low: np.ndarray
    curve_high: np.ndarray
    predictive_low: np.ndarray
    predictive_high: np.ndarray


@dataclass(frozen=True)
class Posterior:
    """Outcome of posterior sampling, with the fit and profile beside it.

    Attributes
    ----------
    fit : FitResult
        The least-squares fit the walkers started from.
    names : tuple of str
        Sampled parameters (natural names), the columns of `samples`.
    labels : tuple of str
        The same on the inference scale (``log10_k``), the columns of `chain`.
    roles : dict of str to Role
    units : dict of str to str
    priors : dict of str to Prior
    noise : str
        ``"declared"``, ``"per-species"`` or ``"shared"``.
    samples : ndarray [n_samples, n_dim]
        Natural-scale draws after burn-in and thinning, walkers pooled.
    state : ChainState
        The whole chain on the inference scale (see also :attr:`chain`,
        :attr:`log_prob`), with what is needed to extend it.
    chain_meta : dict
        Labels, settings and fingerprint stored beside the chain.
    chain_file : str or None
        Where the sampler checkpointed the chain.
    summary : dict of str to dict
        ``median``, ``mean``, ``sd``, ``ci95``, ``ci68`` of each parameter.
    correlation : ndarray [n_dim, n_dim]
        Posterior correlation (natural scale).
    diagnostics : Diagnostics
    profiles : Profiles or None
    bands : tuple of RunBands
    settings : Settings
    warnings : tuple of str
    n_evaluations, n_failed : int
        Parameter sets evaluated and those whose integration failed.
    elapsed : float
        Sampling wall time, seconds.
    stopped : str
        ``"completed"`` or ``"time budget"``.
    intervals : tuple of dict
        The covariance, profile and posterior 95 % intervals of each parameter
        side by side, with flags (see :func:`compare_intervals`).
    """

    fit: FitResult
    names: tuple[str, ...]
    labels: tuple[str, ...]
    roles: dict[str, Role]
    units: dict[str, str | None]
    priors: dict[str, Prior]
    noise: str
    samples: np.ndarray
    state: ChainState
    chain_meta: dict
    chain_file: str | None
    summary: dict[str, dict]
    correlation: np.ndarray
    diagnostics: Diagnostics
    profiles: Profiles | None
    bands: tuple[RunBands, ...]
    settings: Settings
    warnings: tuple[str, ...] = ()
    n_evaluations: int = 0
    n_failed: int = 0
    elapsed: float = 0.0
    stopped: str = "completed"
    intervals: tuple[dict, ...] = ()

    @property
    def chain(self):
        """Walker positions [n_steps, n_walkers, n_dim] on the inference scale."""
        return self.state.chain

    @property
    def log_prob(self):
        """Log posterior [n_steps, n_walkers] (up to a constant)."""
        return self.state.log_prob

    @property
    def converged(self):
        return self.diagnostics.converged

    def rate_order_correlations(self):
        """Correlation of each rate constant with each order: posterior and fit.

        Returns
        -------
        list of (rate constant, order, posterior ρ, fit ρ or None)
        """
        out = []
        fit_names = list(self.fit.free_names)
        for i, a in enumerate(self.names):
            if self.roles[a] != Role.RATE_CONSTANT:
                continue
            for j, b in enumerate(self.names):
                if self.roles[b] != Role.ORDER:
                    continue
                rho_fit = None
                if self.fit.correlation is not None and a in fit_names and b in fit_names:
                    rho_fit = float(self.fit.correlation[fit_names.index(a), fit_names.index(b)])
                out.append((a, b, float(self.correlation[i, j]), rho_fit))
        return out

    def to_dict(self):
        """Plain-Python content of ``posterior.json``."""
        intervals = {row["name"]: row for row in self.intervals}
        params = {}
        for name in self.names:
            entry = dict(self.summary[name])
            row = intervals[name]
            entry.update({
                "unit": self.units.get(name), "role": self.roles[name],
                "prior": self.priors[name].to_dict(),
                "fit": {"value": row["fit_value"], "stderr": row["stderr"],
                        "ci95_covariance": row["covariance"]},
                "profile": {"ci95": row["profile"], "ci68": row["profile68"],
                            "closed": row["profile_closed"]},
                "flags": row["flags"],
            })
            params[name] = entry
        return {
            "model": self.fit.mechanism.name,
            "model_file": self.fit.mechanism.source,
            "experiment": self.fit.experiment.name,
            "experiment_file": self.fit.experiment.source,
            "units": {"time": self.fit.experiment.units.time,
                      "concentration": self.fit.experiment.units.concentration},
            "converged": self.converged,
            "parameters": params,
            "diagnostics": self.diagnostics.to_dict(),
            "correlation": {"names": list(self.names), "matrix": self.correlation.tolist(),
                            "scale": "natural"},
            "rate_constant_order_correlations": [
                {"rate_constant": a, "order": b, "posterior": r, "fit": f}
                for a, b, r, f in self.rate_order_correlations()],
            "noise": self.noise,
            "seed": self.settings.seed,
            "settings": self.settings.to_dict(),
            "sampler": {"package": "emcee", "vectorized": True, "moves": self.settings.moves,
                        "evaluations": self.n_evaluations,
                        "failed_evaluations": self.n_failed,
                        "wall_time_s": self.elapsed, "stopped": self.stopped,
                        "evaluations_per_s": self.n_evaluations / self.elapsed
                        if self.elapsed > 0 else None},
            "profile": None if self.profiles is None else self.profiles.to_dict(),
            "chain_file": {"name": CHAIN_FILE, "arrays": {
                "chain": "[n_steps, n_walkers, n_dim] positions on the inference scale "
                         "(columns: labels)",
                "log_prob": "[n_steps, n_walkers] log posterior (up to a constant)",
                "accepted": "[n_walkers] accepted proposals",
                "meta": "JSON: labels, names, settings, random state is in rng_*"}},
            "warnings": list(self.warnings),
        }


# --------------------------------------------------------------- summaries

def summarise(samples, names):
    """Median, mean, sd and central 95 % and 68 % intervals of each column.

    Parameters
    ----------
    samples : ndarray [n_samples, n_dim]
    names : sequence of str [n_dim]

    Returns
    -------
    dict of str to dict
        ``ci95`` = [2.5 %, 97.5 %] and ``ci68`` = [16 %, 84 %] percentiles.
    """
    q = np.percentile(samples, [2.5, 16.0, 50.0, 84.0, 97.5], axis=0)
    mean = samples.mean(axis=0)
    sd = samples.std(axis=0, ddof=1) if samples.shape[0] > 1 else np.full(len(names), np.nan)
    return {n: {"median": float(q[2, j]), "mean": float(mean[j]), "sd": float(sd[j]),
                "ci95": [float(q[0, j]), float(q[4, j])],
                "ci68": [float(q[1, j]), float(q[3, j])]} for j, n in enumerate(names)}


def compare_intervals(post):
    """The three kinds of 95 % interval of each parameter, side by side, with flags.

    Returns
    -------
    list of dict
        Keys ``name``, ``fit_value``, ``stderr``, ``covariance`` (value ± q SE,
        the fit's own 95 % interval: q from Student's t with N − p degrees of
        freedom, or 1.96 when the noise is declared), ``profile``,
        ``profile68``, ``profile_closed``,
        ``posterior`` (2.5–97.5 % percentiles) and ``flags`` (list of str).
        Flags: ``"not identifiable"`` when the profile does not close inside
        the bounds; ``"intervals disagree"`` when a side of the profile or
        posterior interval differs from the covariance half width by more
        than 25 % (non-linearity, or an informative prior); ``"at a bound"``.
    """
    rows = []
    for name in post.names:
        value = post.fit.values.get(name)
        se = post.fit.stderr.get(name)
        pair = post.fit.interval(name)       # the fit's own 95 % interval (t or normal)
        cov = list(pair) if pair is not None and se is not None else None
        prof = post.profiles.parameters.get(name) if post.profiles is not None else None
        p95 = list(prof.intervals[max(prof.intervals)]) if prof is not None else None
        p68 = list(prof.intervals[min(prof.intervals)]) if prof is not None else None
        bayes = post.summary[name]["ci95"]
        flags = []
        if prof is not None and not prof.closed:
            flags.append("not identifiable")
        if cov is not None and se > 0:
            half = (cov[1] - cov[0]) / 2.0
            sides = [(value - bayes[0]), (bayes[1] - value)]
            if p95 is not None:
                sides += [value - p95[0] if p95[0] is not None else math.inf,
                          p95[1] - value if p95[1] is not None else math.inf]
            if any(abs(s - half) > DISAGREEMENT * half for s in sides):
                flags.append("intervals disagree")
        if name in post.fit.at_bounds:
            flags.append("at a bound")
        rows.append({"name": name, "fit_value": value, "stderr": se, "covariance": cov,
                     "profile": p95, "profile68": p68,
                     "profile_closed": prof.closed if prof is not None else None,
                     "posterior": bayes, "flags": flags})
    return rows


def _bands(space: ParameterSpace, samples_u, rng, n_draws=_BAND_DRAWS, n_grid=200):
    """Posterior curve and predictive bands of every run's measured concentrations.

    Traces of spectrometer signal channels are not concentrations and get no
    band here (their fitted signals are in the fit's outputs); a run with
    signal channels only has no bands.
    """
    problem = space.problem
    exp = problem.experiment
    pick = rng.choice(samples_u.shape[0], size=min(n_draws, samples_u.shape[0]), replace=False)
    rows = samples_u[pick]
    grids = [np.unique(np.concatenate([np.linspace(0.0, run.t_max, n_grid),
                                       problem.observation.run_times[r]]))
             for r, run in enumerate(exp.runs)]
    conc, ok, _ = problem.simulate(space.to_values(rows), times=grids)
    sigma_draws = space.to_natural(rows)[:, space.n_model:]
    out = []
    species_index = {s: i for i, s in enumerate(problem.mechanism.species)}
    for r, run in enumerate(exp.runs):
        measured = tuple(s for s in dict.fromkeys(run.species) if s in species_index)
        if not measured:
            continue
        curves = conc[r][ok][:, :, [species_index[s] for s in measured]]   # [n, t, s]
        noisy = curves.copy()
        for j, s in enumerate(measured):
            if space.noise == "declared":
                sd = sigma_at(exp, r, s, grids[r], curves[:, :, j])
            else:
                g = 0 if space.noise == "shared" else space.noise_groups.index(s)
                sd = sigma_draws[ok][:, g][:, None]
            noisy[:, :, j] = curves[:, :, j] + rng.normal(size=curves[:, :, j].shape) * sd
        if curves.shape[0] == 0:
            continue
        lo, med, hi = np.percentile(curves, [2.5, 50.0, 97.5], axis=0)
        plo, phi = np.percentile(noisy, [2.5, 97.5], axis=0)
        out.append(RunBands(run.name, grids[r], measured, med, lo, hi, plo, phi))
    return tuple(out)


# --------------------------------------------------------------- front door

def sample(experiment: Experiment, mechanism: Mechanism, walkers=DEFAULT_WALKERS,
           steps=DEFAULT_STEPS, seed=0, *,
           noise="auto", moves=DEFAULT_MOVES, burn=None, thin=1, checkpoint=None,
           checkpoint_every=CHECKPOINT_EVERY, resume=False, max_time=None, progress=None,
           fit_result=None, starts=DEFAULT_STARTS, profile=True, bands=True):
    """Sample the posterior of a mechanism's parameters given an experiment.

    Parameters
    ----------
    experiment : Experiment
    mechanism : Mechanism
    walkers : int
        Walkers of the ensemble (at least twice the number of sampled
        parameters; emcee's rule).
    steps : int
        Total steps of each walker (a resumed chain continues up to this).
    seed : int
        Seeds the fit's start screen, the walkers' start and the sampler.
    noise : {"auto", "declared", "per-species", "shared"}
        See :mod:`kinfit.estimation.space`.
    moves : {"de", "stretch"}
        emcee's differential-evolution move (``DEMove``, the default: on the
        demo its autocorrelation time is about a third of the stretch move's),
        or emcee's stretch move.
    burn : int, optional
        Steps to discard; by default 3 autocorrelation times.
    thin : int
        Keep every `thin`-th step in `samples` (the chain is kept whole).
    checkpoint : str or os.PathLike, optional
        ``.npz`` file the chain is written to every `checkpoint_every` steps
        and at the end.
    resume : bool
        Continue the chain in `checkpoint` if it exists (same experiment,
        model, walkers, seed, moves and noise).
    max_time : float, optional
        Time budget for sampling, seconds; the chain stops there (and can be
        resumed).
    progress : callable, optional
        Called as ``progress(n_done, n_total, "sampling")`` after each step
        (see :func:`kinfit.estimation.sampler.run_ensemble`).
    fit_result : FitResult, optional
        A fit of the same experiment and model to start from (fitted here
        otherwise, with `starts` starting points). The residual problem is
        rebuilt with the fit's ``problem_settings`` (integrator, spectral
        components), so the chain samples the problem that was fitted.
    profile, bands : bool
        Also compute profile-likelihood intervals and posterior bands.

    Returns
    -------
    Posterior
    """
    for label, v, least in (("walkers", walkers, 2), ("steps", steps, 1), ("thin", thin, 1),
                            ("checkpoint_every", checkpoint_every, 1)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < least:
            raise KinfitError(f"{label} must be a whole number of at least {least}, got {v!r}")
    if burn is not None and (not isinstance(burn, (int, np.integer)) or burn < 0):
        raise KinfitError(f"burn must be a whole number of at least 0, got {burn!r}")
    if max_time is not None and not max_time > 0:
        raise KinfitError(f"max_time must be a positive number of seconds, got {max_time!r}")
    settings = Settings(walkers=int(walkers), steps=int(steps), seed=int(seed), noise=noise,
                        moves=moves, burn=burn, thin=int(thin),
                        checkpoint_every=int(checkpoint_every), max_time=max_time)
    emcee_moves(moves)
    if fit_result is None:
        fit_result = fit(experiment, mechanism, starts=starts, seed=seed)
    problem = fit_result.problem_settings.build(mechanism, experiment)
    space = parameter_space(problem, noise=noise)
    if space.n_dim == 0:
        raise KinfitError("nothing to sample: every parameter is fixed and the noise is "
                          "declared")
    if walkers < 2 * space.n_dim or walkers % 2:
        raise KinfitError(f"walkers must be even and at least twice the {space.n_dim} sampled "
                          f"parameters ({', '.join(space.names)}); try --walkers "
                          f"{max(2 * space.n_dim, 32) + (max(2 * space.n_dim, 32) % 2)}")
    target = LogPosterior(space)
    chain_id = fingerprint(space, settings.walkers, settings.seed, settings.moves)
    meta = {"labels": list(space.labels), "names": list(space.names),
            "settings": settings.to_dict(), "fingerprint": chain_id,
            "model": mechanism.name, "experiment": experiment.name}
    previous = None
    if resume and checkpoint is not None and Path(checkpoint).exists():
        previous, old_meta = load_chain(checkpoint)
        check_resumable(checkpoint, old_meta, chain_id, settings.to_dict(), space.names)
    rng = np.random.default_rng(seed)
    if previous is None:
        start, _ = start_ball(space, fit_result, target, walkers, rng)
    else:
        start = previous.start

    def save(state):
        Path(checkpoint).parent.mkdir(parents=True, exist_ok=True)
        write_chain(checkpoint, state, meta)

    try:
        state, stopped = run_ensemble(
            target, start, steps, seed, moves=moves, resume=previous,
            on_checkpoint=save if checkpoint is not None else None,
            checkpoint_every=checkpoint_every, max_time=max_time, progress=progress)
    except KeyboardInterrupt:
        where_saved = f"; the chain so far is in {checkpoint}: run the same command with " \
                      f"--resume to continue" if checkpoint is not None else ""
        raise KinfitError(f"sampling interrupted{where_saved}") from None
    return _analyse(space, fit_result, target, state, stopped, settings, rng, profile, bands,
                    meta, None if checkpoint is None else str(checkpoint))


def _analyse(space, fit_result, target, state, stopped, settings, rng, profile, bands, meta,
             chain_file):
    chain = state.chain
    if chain.shape[0] == 0:
        raise KinfitError("the time budget ran out before the first step; raise --max-time")
    diag = diagnose(chain, space.names, state.accepted, burn=settings.burn, thin=settings.thin)
    kept_u = chain[diag.burn_in::settings.thin].reshape(-1, space.n_dim)
    samples = space.to_natural(kept_u)
    summary = summarise(samples, space.names)
    with np.errstate(all="ignore"):
        corr = np.atleast_2d(np.corrcoef(samples, rowvar=False)) if samples.shape[0] > 1 \
            else np.full((space.n_dim, space.n_dim), np.nan)
    profiles = profile_intervals(fit_result) if profile and space.n_model else None
    run_bands = _bands(space, kept_u, rng) if bands else ()
    units = dict(fit_result.units)
    for name, role in zip(space.names, space.roles):
        if role == Role.NOISE:
            units[name] = parameter_unit(role, fit_result.experiment.units)
    warnings = list(diag.reasons)
    if stopped == "time budget":
        warnings.insert(0, f"the time budget ran out after {chain.shape[0]} of "
                           f"{settings.steps} steps; run again with --resume to go on")
    if profiles is not None:
        warnings += list(profiles.warnings)
    total = state.n_evaluations
    if target.failed:
        warnings.append(f"{target.failed} of {target.evaluations} parameter sets could not be "
                        f"integrated and were rejected")
    if bands and fit_result.signals is not None:
        warnings.append("posterior bands are drawn for measured concentrations only; the "
                        "spectrometer signal channels have none")
    post = Posterior(
        fit=fit_result, names=space.names, labels=space.labels,
        roles=dict(zip(space.names, space.roles)), units=units,
        priors=dict(zip(space.names, space.priors)), noise=space.noise, samples=samples,
        state=state, chain_meta=meta, chain_file=chain_file, summary=summary, correlation=corr,
        diagnostics=diag, profiles=profiles, bands=run_bands, settings=settings,
        warnings=tuple(warnings), n_evaluations=total, n_failed=target.failed,
        elapsed=state.elapsed, stopped=stopped)
    return replace(post, intervals=tuple(compare_intervals(post)))
