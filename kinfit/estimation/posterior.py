"""Posterior sampling of rate constants, orders and noise with emcee.

:func:`sample` is the front door: it fits (unless given a fit), starts an
ensemble of walkers around the least-squares optimum, runs emcee's
affine-invariant ensemble sampler, checkpoints the chain, diagnoses
convergence (:mod:`kinfit.diagnostics`), profiles the likelihood
(:mod:`kinfit.profile`) and returns a :class:`Posterior` of plain numbers.

What is sampled
---------------
The free parameters on the fitting scale (log10 for rate constants), plus
the noise levels when the noise is not declared; priors and the noise
conventions are described in :mod:`kinfit.space` and :mod:`kinfit.priors`.
The log-probability is vectorised: emcee (``vectorize=True``) hands over all
the walkers it is moving, and their parameter sets are integrated together
through :meth:`Problem.residuals`. Parameter sets outside the prior's
support are not integrated; a set whose integration fails gets ln p = −inf
(rejected).

Starting point
--------------
Walkers start from draws of the fit's Gaussian approximation (its
covariance on the fitting scale, half width), so burn-in is short; noise
levels start at each species' RMS residual.

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

import hashlib
import io
import json
import math
import sys
import time
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from kinfit.core.defaults import (CHECKPOINT_EVERY, DEFAULT_MOVES, DEFAULT_STARTS, DEFAULT_STEPS,
                                  DEFAULT_WALKERS)
from kinfit.core.atomic import write_bytes
from kinfit.estimation.diagnostics import diagnose
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.numerics.problem import FAILED_RESIDUAL, build_problem
from kinfit.estimation.profile import profile_intervals
from kinfit.estimation.space import parameter_space
from kinfit.inputs.parameters import Role

__all__ = ["Posterior", "Settings", "ChainState", "RunBands", "sample", "run_ensemble",
           "load_chain", "write_chain", "summarise", "compare_intervals",
           "CHAIN_FILE", "MOVES"]

CHAIN_FILE = "chain.npz"
MOVES = ("de", "stretch")
Z95 = 1.959963984540054          # scipy.stats.norm.ppf(0.975)
# Intervals "disagree markedly" when one side of the profile or posterior interval
# differs from the covariance interval's half width by more than this fraction
# (kinfit's choice; no standard exists).
DISAGREEMENT = 0.25
_BAND_DRAWS = 200
_FORMAT_VERSION = 1


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
class ChainState:
    """A chain in progress: everything a checkpoint holds.

    Attributes
    ----------
    chain : ndarray [n_done, n_walkers, n_dim]
        Walker positions after each step, on the inference scale.
    log_prob : ndarray [n_done, n_walkers]
    accepted : ndarray [n_walkers] of int
        Accepted proposals of each walker.
    start : ndarray [n_walkers, n_dim]
    start_log_prob : ndarray [n_walkers]
    random_state : tuple
        State of the sampler's ``numpy.random.RandomState`` after the last step.
    elapsed : float
        Wall time spent sampling, seconds (interrupted and resumed runs together).
    n_evaluations : int
        Parameter sets whose log-probability was computed.
    """

    chain: np.ndarray
    log_prob: np.ndarray
    accepted: np.ndarray
    start: np.ndarray
    start_log_prob: np.ndarray
    random_state: tuple
    elapsed: float = 0.0
    n_evaluations: int = 0

    @property
    def n_done(self):
        return self.chain.shape[0]


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
    species: tuple
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
    roles, units : dict of str to str
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

    fit: object
    names: tuple
    labels: tuple
    roles: dict
    units: dict
    priors: dict
    noise: str
    samples: np.ndarray
    state: ChainState
    chain_meta: dict
    chain_file: str | None
    summary: dict
    correlation: np.ndarray
    diagnostics: object
    profiles: object
    bands: tuple
    settings: Settings
    warnings: tuple = ()
    n_evaluations: int = 0
    n_failed: int = 0
    elapsed: float = 0.0
    stopped: str = "completed"
    intervals: tuple = ()

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
            if self.roles[a] != "rate constant":
                continue
            for j, b in enumerate(self.names):
                if self.roles[b] != "order":
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


# --------------------------------------------------------- log-probability

class LogPosterior:
    """Vectorised log posterior over a :class:`~kinfit.space.ParameterSpace`.

    Calling it with rows [n, n_dim] on the inference scale returns [n]:
    log prior + log likelihood, integrating only the rows inside the prior's
    support, all in one :meth:`Problem.residuals` call.
    """

    def __init__(self, space):
        self.space = space
        self.evaluations = 0
        self.failed = 0

    def __call__(self, u):
        u = np.atleast_2d(np.asarray(u, dtype=float))
        out = self.space.log_prior(u)
        inside = np.isfinite(out)
        if inside.any():
            rows = u[inside]
            problem = self.space.problem
            res = problem.residuals(self.space.to_values(rows))
            ok = res[:, 0] != FAILED_RESIDUAL
            if problem.sigma_known and self.space.noise != "declared":
                res = res * problem.observation.sigma      # back to concentration units
            with np.errstate(all="ignore"):
                ll = self.space.log_likelihood(res, rows)
            ll = np.where(ok & np.isfinite(ll), ll, -np.inf)
            out[inside] += ll
            self.evaluations += int(inside.sum())
            self.failed += int((~ok).sum())
        return out


# ------------------------------------------------------------ the sampler

def _moves(name):
    import emcee

    if name == "stretch":
        return None   # emcee's default: the stretch move, a = 2
    if name == "de":
        # Differential evolution alone. emcee's snooker variant (DESnookerMove) is left
        # out: on a Student-t posterior (tests/test_posterior.py) it gave intervals about
        # half as wide as the exact ones, while DEMove and the stretch move were right.
        return emcee.moves.DEMove()
    raise KinfitError(f"moves {name!r} is not known; choose one of {', '.join(MOVES)}")


def _progress_bar(total, initial, enabled):
    if enabled is None:
        enabled = sys.stderr.isatty()
    from tqdm import tqdm

    return tqdm(total=total, initial=initial, disable=not enabled, unit="step",
                desc="sampling", file=sys.stderr, dynamic_ncols=True, leave=False)


def run_ensemble(log_prob, start, n_steps, seed=0, *, moves="de", resume=None,
                 on_checkpoint=None, checkpoint_every=CHECKPOINT_EVERY, max_time=None,
                 progress=None):
    """Run emcee's ensemble sampler with a vectorised log-probability.

    Parameters
    ----------
    log_prob : callable
        rows [n, n_dim] -> [n].
    start : ndarray [n_walkers, n_dim]
        Starting positions (ignored when resuming).
    n_steps : int
        Total steps wanted (including any already done in `resume`).
    seed : int
        Seeds the sampler's random state (ignored when resuming: the saved
        state continues).
    moves : {"de", "stretch"}
        emcee's differential-evolution move, or its stretch move.
    resume : ChainState, optional
        Continue this chain.
    on_checkpoint : callable, optional
        Called with a :class:`ChainState` every `checkpoint_every` steps, at
        the end, and before a KeyboardInterrupt propagates.
    max_time : float, optional
        Stop after this many seconds of sampling (counting the time before a resume).
    progress : bool, optional
        Show a progress bar on stderr; by default only when it is a terminal.

    Returns
    -------
    (ChainState, stopped)
        `stopped` is ``"completed"`` or ``"time budget"``.
    """
    import emcee

    if resume is not None:
        start = resume.start
    start = np.asarray(start, dtype=float)
    n_walkers, n_dim = start.shape
    evaluated = [0]
    counter = _Counting(log_prob, evaluated)
    sampler = emcee.EnsembleSampler(n_walkers, n_dim, counter, vectorize=True,
                                    moves=_moves(moves))
    t0 = time.perf_counter()
    if resume is None:
        start_lp = np.asarray(log_prob(start), dtype=float)
        resume = ChainState(np.empty((0, n_walkers, n_dim)), np.empty((0, n_walkers)),
                            np.zeros(n_walkers, dtype=np.int64), start, start_lp,
                            np.random.RandomState(seed).get_state(), 0.0, n_walkers)
    done = resume.n_done
    chain = np.empty((max(n_steps, done), n_walkers, n_dim))
    lps = np.empty((max(n_steps, done), n_walkers))
    chain[:done], lps[:done] = resume.chain, resume.log_prob
    accepted = np.array(resume.accepted, dtype=np.int64)
    coords = resume.chain[-1] if done else resume.start
    lp = resume.log_prob[-1] if done else resume.start_log_prob
    if not np.isfinite(lp).all():
        raise KinfitError("some walkers start where the posterior is zero (outside the "
                          "bounds or where the equations cannot be integrated)")
    state = emcee.State(coords.copy(), log_prob=lp.copy(), random_state=resume.random_state)
    base_elapsed, base_evals = resume.elapsed, resume.n_evaluations

    def snapshot(i, rs):
        return ChainState(chain[:i].copy(), lps[:i].copy(), accepted.copy(), resume.start,
                          resume.start_log_prob, rs,
                          base_elapsed + time.perf_counter() - t0,
                          base_evals + evaluated[0])

    i, stopped, rs = done, "completed", resume.random_state
    bar = _progress_bar(n_steps, done, progress)
    try:
        for state in sampler.sample(state, iterations=max(n_steps - done, 0), store=False,
                                    skip_initial_state_check=True):
            accepted += np.any(state.coords != coords, axis=1)
            coords = state.coords.copy()
            chain[i], lps[i] = state.coords, state.log_prob
            rs = state.random_state
            i += 1
            bar.update(1)
            if on_checkpoint is not None and i % checkpoint_every == 0 and i < n_steps:
                on_checkpoint(snapshot(i, rs))
            if max_time is not None and base_elapsed + time.perf_counter() - t0 > max_time:
                stopped = "time budget" if i < n_steps else "completed"
                break
    except KeyboardInterrupt:
        if on_checkpoint is not None:
            on_checkpoint(snapshot(i, rs))
        raise
    finally:
        bar.close()
    final = snapshot(i, rs)
    if on_checkpoint is not None:
        on_checkpoint(final)
    return final, stopped


class _Counting:
    """Wraps a vectorised log-probability and counts the rows it evaluates."""

    def __init__(self, fn, counter):
        self.fn, self.counter = fn, counter

    def __call__(self, u):
        self.counter[0] += len(u)
        return self.fn(u)


def start_ball(space, fit_result, target, n_walkers, rng):
    """Starting positions around the fit's optimum [n_walkers, n_dim].

    Draws from N(û, (Σ_u/4)) where Σ_u is the fit's covariance on the
    inference scale (a small box where it is missing); noise levels start
    within ±5 % of each species' RMS residual. Draws outside the support or
    that do not integrate are redrawn, then pulled towards the optimum.
    """
    u_hat = space.from_fit(fit_result)
    m = space.n_model
    sd = np.where(space.log10, 0.01, 0.01 * np.maximum(np.abs(u_hat), 1.0))
    cov = None
    if fit_result.covariance is not None and m:
        names = list(fit_result.free_names)
        idx = [names.index(n) for n in space.names[:m]]
        slope = np.where(space.log10[:m], 10.0 ** u_hat[:m] * math.log(10.0), 1.0)
        cov_u = fit_result.covariance[np.ix_(idx, idx)] / np.outer(slope, slope)
        if np.all(np.isfinite(cov_u)):
            cov = 0.25 * cov_u
    noise_sd = np.full(space.n_dim - m, 0.02)      # in log10: about ±5 %
    points = np.empty((n_walkers, space.n_dim))
    lp = np.full(n_walkers, -np.inf)
    todo = np.arange(n_walkers)
    for attempt in range(6):
        shrink = 0.5 ** attempt
        draw = np.empty((todo.size, space.n_dim))
        if cov is not None:
            draw[:, :m] = rng.multivariate_normal(u_hat[:m], cov * shrink ** 2,
                                                  size=todo.size, method="eigh")
        else:
            draw[:, :m] = u_hat[:m] + rng.normal(size=(todo.size, m)) * sd[:m] * shrink
        draw[:, m:] = u_hat[m:] + rng.normal(size=(todo.size, space.n_dim - m)) * noise_sd
        points[todo] = draw
        lp[todo] = target(draw)
        todo = todo[~np.isfinite(lp[todo])]
        if todo.size == 0:
            return points, lp
    raise KinfitError("could not place the walkers around the best fit: the posterior is "
                      "zero there (the fit sits on a bound, or the equations do not "
                      "integrate nearby); loosen the bounds or check the fit")


# -------------------------------------------------------------- checkpoint

def _fingerprint(space, settings):
    """Hash of everything a chain depends on except its length and analysis options."""
    problem = space.problem
    obs = problem.observation
    h = hashlib.sha256()
    for arr in (obs.values, obs.sigma if obs.sigma is not None else np.zeros(0),
                obs.time_index, obs.species_index, *obs.run_times, space.lower, space.upper,
                space.base, space.log10.astype(float)):
        h.update(np.ascontiguousarray(arr, dtype=float).tobytes())
    h.update(json.dumps([space.labels, [p.to_dict() for p in space.priors], space.noise,
                         problem.system.stoichiometry.tolist(),
                         [str(d[1]) for d in problem.mechanism.directions],
                         settings.walkers, settings.seed, settings.moves],
                        default=str).encode())
    return h.hexdigest()


def write_chain(path, state, meta):
    """Write a chain (a checkpoint or the final chain) atomically as compressed ``.npz``.

    Parameters
    ----------
    path : str or os.PathLike
    state : ChainState
    meta : dict
        JSON-able description: labels, names, settings, fingerprint, ...
    """
    name, keys, pos, has_gauss, cached = state.random_state
    buffer = io.BytesIO()
    np.savez_compressed(
        buffer, chain=state.chain, log_prob=state.log_prob, accepted=state.accepted,
        start=state.start, start_log_prob=state.start_log_prob,
        rng_keys=np.asarray(keys, dtype=np.uint32),
        rng_numbers=np.array([pos, has_gauss, cached], dtype=float),
        meta=np.array(json.dumps({**meta, "format": _FORMAT_VERSION, "rng": name,
                                  "elapsed": state.elapsed,
                                  "n_evaluations": state.n_evaluations,
                                  "n_done": state.n_done})))
    write_bytes(path, buffer.getvalue())


def load_chain(path):
    """Read a chain written by :func:`write_chain`.

    Returns
    -------
    (ChainState, meta dict)

    Raises
    ------
    KinfitError
        If the file is missing, not a kinfit chain, or damaged.
    """
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(str(data["meta"]))
            pos, has_gauss, cached = data["rng_numbers"].tolist()
            state = ChainState(
                chain=data["chain"], log_prob=data["log_prob"], accepted=data["accepted"],
                start=data["start"], start_log_prob=data["start_log_prob"],
                random_state=(meta.get("rng", "MT19937"), data["rng_keys"], int(pos),
                              int(has_gauss), float(cached)),
                elapsed=float(meta.get("elapsed", 0.0)),
                n_evaluations=int(meta.get("n_evaluations", 0)))
    except FileNotFoundError:
        raise KinfitError(f"{path}: no such chain file") from None
    except (OSError, KeyError, ValueError, EOFError) as exc:
        raise KinfitError(f"{path}: not a kinfit chain file or damaged ({exc}); remove it and "
                          f"start again without --resume") from None
    if meta.get("format") != _FORMAT_VERSION:
        raise KinfitError(f"{path}: written by another version of kinfit's chain format")
    return state, meta


def _check_resumable(path, meta, fingerprint, settings):
    if meta.get("fingerprint") == fingerprint:
        return
    old = meta.get("settings", {})
    changed = [f"{k} {old.get(k)!r} -> {getattr(settings, k)!r}"
               for k in ("walkers", "seed", "moves", "noise") if old.get(k) != getattr(settings, k)]
    what = "; ".join(changed) if changed else "the model, the data, bounds or priors differ"
    raise KinfitError(f"{path}: this chain was made with different settings ({what}); "
                      f"resume with the same experiment, model and options, or start a new "
                      f"chain in another --out folder")


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
        Keys ``name``, ``fit_value``, ``stderr``, ``covariance`` (value ±
        1.96 SE), ``profile``, ``profile68``, ``profile_closed``,
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
        cov = [value - Z95 * se, value + Z95 * se] if se is not None and value is not None \
            else None
        prof = post.profiles.parameters.get(name) if post.profiles is not None else None
        p95 = list(prof.intervals[max(prof.intervals)]) if prof is not None else None
        p68 = list(prof.intervals[min(prof.intervals)]) if prof is not None else None
        bayes = post.summary[name]["ci95"]
        flags = []
        if prof is not None and not prof.closed:
            flags.append("not identifiable")
        if cov is not None and se > 0:
            half = Z95 * se
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


def _bands(space, samples_u, rng, n_draws=_BAND_DRAWS, n_grid=200):
    """Posterior curve and predictive bands of every run."""
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
        measured = tuple(dict.fromkeys(run.species))
        curves = conc[r][ok][:, :, [species_index[s] for s in measured]]   # [n, t, s]
        noisy = curves.copy()
        for j, s in enumerate(measured):
            if space.noise == "declared":
                sd = exp.noise[s].sigma(curves[:, :, j])
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

def sample(experiment, mechanism, walkers=DEFAULT_WALKERS, steps=DEFAULT_STEPS, seed=0, *,
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
        See :mod:`kinfit.space`.
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
    progress : bool or None
        Progress bar on stderr (None: only on a terminal).
    fit_result : FitResult, optional
        A fit of the same experiment and model to start from (fitted here
        otherwise, with `starts` starting points).
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
    _moves(moves)
    if fit_result is None:
        fit_result = fit(experiment, mechanism, starts=starts, seed=seed)
    problem = build_problem(mechanism, experiment)
    space = parameter_space(problem, noise=noise)
    if space.n_dim == 0:
        raise KinfitError("nothing to sample: every parameter is fixed and the noise is "
                          "declared")
    if walkers < 2 * space.n_dim or walkers % 2:
        raise KinfitError(f"walkers must be even and at least twice the {space.n_dim} sampled "
                          f"parameters ({', '.join(space.names)}); try --walkers "
                          f"{max(2 * space.n_dim, 32) + (max(2 * space.n_dim, 32) % 2)}")
    target = LogPosterior(space)
    fingerprint = _fingerprint(space, settings)
    meta = {"labels": list(space.labels), "names": list(space.names),
            "settings": settings.to_dict(), "fingerprint": fingerprint,
            "model": mechanism.name, "experiment": experiment.name}
    previous = None
    if resume and checkpoint is not None and Path(checkpoint).exists():
        previous, old_meta = load_chain(checkpoint)
        _check_resumable(checkpoint, old_meta, fingerprint, settings)
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
    conc_unit = fit_result.experiment.units.concentration
    for name, role in zip(space.names, space.roles):
        if role == Role.NOISE:
            units[name] = conc_unit
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
    post = Posterior(
        fit=fit_result, names=space.names, labels=space.labels,
        roles=dict(zip(space.names, space.roles)), units=units,
        priors=dict(zip(space.names, space.priors)), noise=space.noise, samples=samples,
        state=state, chain_meta=meta, chain_file=chain_file, summary=summary, correlation=corr,
        diagnostics=diag, profiles=profiles, bands=run_bands, settings=settings,
        warnings=tuple(warnings), n_evaluations=total, n_failed=target.failed,
        elapsed=state.elapsed, stopped=stopped)
    return replace(post, intervals=tuple(compare_intervals(post)))
