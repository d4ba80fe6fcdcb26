"""The ensemble sampler: the log posterior, emcee's moves, the walkers' start.

:func:`run_ensemble` runs emcee's affine-invariant ensemble sampler with a
vectorised log-probability (``vectorize=True``): emcee hands over all the
walkers it is moving, and :class:`LogPosterior` integrates their parameter
sets together through :meth:`Problem.residuals`. Parameter sets outside the
prior's support are not integrated; a set whose integration fails gets
ln p = −inf (rejected). emcee's generator is driven step by step
(``store=False``: kinfit keeps the arrays and counts acceptances itself).
Evaluations are counted; progress is reported
through a callback, so that no user interface is imported here.

Moves
-----
emcee's ``DEMove`` (differential evolution) by default, the stretch move on
request. On the demo its autocorrelation time was about a third of the
stretch move's (``tests/benchmarks/bench_sample.py --steps 800 --moves de
stretch``: largest τ 12 against 34 steps, smallest ESS 1,700 against 280, at
the same evaluations per second, when measured). emcee's ``DESnookerMove``
is not used: on a Student-t posterior it gave intervals about half as wide
as the exact ones.

Starting point
--------------
:func:`start_ball` draws the walkers from the fit's Gaussian approximation
(its covariance on the fitting scale, half width), so burn-in is short;
noise levels start at each species' RMS residual.

Checkpoints
-----------
Every ``checkpoint_every`` steps, at the end, and before an interruption
(Ctrl-C, or SIGTERM turned into one) propagates, the chain so far is handed
to a callback as a :class:`~kinfit.estimation.chains.ChainState`; resuming
from one continues the random state exactly.
"""

from __future__ import annotations

import time
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.defaults import CHECKPOINT_EVERY
from kinfit.core.errors import KinfitError
from kinfit.estimation.chains import ChainState
from kinfit.numerics.problem import FAILED_RESIDUAL

if TYPE_CHECKING:
    from kinfit.estimation.fit_result import FitResult
    from kinfit.estimation.space import ParameterSpace

__all__ = ["LogPosterior", "run_ensemble", "start_ball", "emcee_moves", "MOVES"]

MOVES = ("de", "stretch")


class LogPosterior:
    """Vectorised log posterior over a :class:`~kinfit.estimation.space.ParameterSpace`.

    Calling it with rows [n, n_dim] on the inference scale returns [n]:
    log prior + log likelihood, integrating only the rows inside the prior's
    support, all in one :meth:`Problem.residuals` call.
    """

    def __init__(self, space: ParameterSpace):
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


def emcee_moves(name):
    """emcee's move object for a name in :data:`MOVES` (``None``: emcee's default).

    Raises
    ------
    KinfitError
        For an unknown name.
    """
    import emcee

    if name == "stretch":
        return None   # emcee's default: the stretch move, a = 2
    if name == "de":
        # Differential evolution alone. emcee's snooker variant (DESnookerMove) is left
        # out: on a Student-t posterior (tests/estimation/test_posterior.py) it gave intervals about
        # half as wide as the exact ones, while DEMove and the stretch move were right.
        return emcee.moves.DEMove()
    raise KinfitError(f"moves {name!r} is not known; choose one of {', '.join(MOVES)}")


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
    progress : callable, optional
        Called as ``progress(n_done, n_total, "sampling")`` after each step
        (the protocol of :func:`kinfit.analysis.ranking.fit_candidates`); a
        user interface may drive a progress bar with it.

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
                                    moves=emcee_moves(moves))
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
    try:
        for state in sampler.sample(state, iterations=max(n_steps - done, 0), store=False,
                                    skip_initial_state_check=True):
            accepted += np.any(state.coords != coords, axis=1)
            coords = state.coords.copy()
            chain[i], lps[i] = state.coords, state.log_prob
            rs = state.random_state
            i += 1
            if progress is not None:
                progress(i, n_steps, "sampling")
            if on_checkpoint is not None and i % checkpoint_every == 0 and i < n_steps:
                on_checkpoint(snapshot(i, rs))
            if max_time is not None and base_elapsed + time.perf_counter() - t0 > max_time:
                stopped = "time budget" if i < n_steps else "completed"
                break
    except KeyboardInterrupt:
        if on_checkpoint is not None:
            on_checkpoint(snapshot(i, rs))
        raise
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


def start_ball(space: ParameterSpace, fit_result: FitResult, target, n_walkers, rng):
    """Starting positions around the fit's optimum [n_walkers, n_dim].

    Draws from N(û, (Σ_u/4)) where Σ_u is the fit's covariance on the
    inference scale (a small box where it is missing); noise levels start
    within ±5 % of each species' RMS residual. Draws outside the support or
    that do not integrate are redrawn, then pulled towards the optimum.
    """
    u_hat = space.from_fit(fit_result)
    m = space.n_model
    sd = np.where(space.scale.logarithmic, 0.01, 0.01 * np.maximum(np.abs(u_hat), 1.0))
    cov = None
    if fit_result.covariance is not None and m:
        names = list(fit_result.free_names)
        idx = [names.index(n) for n in space.names[:m]]
        cov_u = space.scale.covariance_from_natural(fit_result.covariance[np.ix_(idx, idx)],
                                                    u_hat)
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
