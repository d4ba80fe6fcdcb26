"""Residual checks: do the residuals of a fit look like noise, run by run?

A model that misses a systematic feature of the data leaves residuals that
stay on one side of zero for long stretches. Two standard checks, per trace
(one species in one run):

* the Wald–Wolfowitz runs test on the signs of the residuals (few runs means
  long stretches of one sign). z = (R − E[R]) / sd(R) with
  E[R] = 2 n₊ n₋ / n + 1 and Var R = 2 n₊ n₋ (2 n₊ n₋ − n) / (n² (n − 1))
  (Wald & Wolfowitz, Ann. Math. Stat. 11, 1940); the one-sided p-value of too
  few runs is reported;
* the lag-1 autocorrelation of the residuals in time order.

Verdicts are plain words; a check with fewer than 8 residuals of each sign
says so rather than guess.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["TraceCheck", "runs_test", "check_residuals", "MISFIT_P"]

MISFIT_P = 0.01     # one-sided p below which a trace is called systematically misfitted


@dataclass(frozen=True)
class TraceCheck:
    """Residual checks of one trace.

    Attributes
    ----------
    run, species : str
    n : int
        Number of residuals.
    runs : int
        Number of runs of one sign.
    z : float or None
        Runs-test statistic (negative: fewer runs than chance).
    p_few_runs : float or None
        One-sided p-value of so few runs.
    autocorrelation : float or None
        Lag-1 autocorrelation.
    verdict : str
    """

    run: str
    species: str
    n: int
    runs: int
    z: float | None
    p_few_runs: float | None
    autocorrelation: float | None
    verdict: str

    @property
    def misfit(self):
        return self.p_few_runs is not None and self.p_few_runs < MISFIT_P

    def to_dict(self):
        return {"run": self.run, "species": self.species, "n": self.n, "runs": self.runs,
                "z": self.z, "p_few_runs": self.p_few_runs,
                "autocorrelation": self.autocorrelation, "misfit": self.misfit,
                "verdict": self.verdict}


def runs_test(residuals):
    """Wald–Wolfowitz runs test on the signs of `residuals` [n] (zeros dropped).

    Returns
    -------
    runs : int
    z : float or None
        None when either sign is missing.
    p_few_runs : float or None
        P(Z <= z) under the null hypothesis of random signs.
    """
    signs = np.sign(np.asarray(residuals, dtype=float))
    signs = signs[signs != 0]
    if signs.size == 0:
        return 0, None, None
    runs = int(1 + np.count_nonzero(signs[1:] != signs[:-1]))
    n_pos = int(np.count_nonzero(signs > 0))
    n_neg = signs.size - n_pos
    n = signs.size
    if n_pos == 0 or n_neg == 0 or n < 3:
        return runs, None, None
    mean = 2.0 * n_pos * n_neg / n + 1.0
    var = 2.0 * n_pos * n_neg * (2.0 * n_pos * n_neg - n) / (n * n * (n - 1.0))
    if var <= 0:
        return runs, None, None
    z = (runs - mean) / math.sqrt(var)
    return runs, z, 0.5 * math.erfc(-z / math.sqrt(2.0))


def _lag1(res):
    res = res - res.mean()
    denom = float(res @ res)
    return float(res[1:] @ res[:-1]) / denom if denom > 0 and res.size > 2 else None


def check_residuals(experiment, residuals):
    """Runs test and lag-1 autocorrelation of every trace of a fit.

    Parameters
    ----------
    experiment : Experiment
        The runs, in the order of the residual vector.
    residuals : ndarray [n_points]
        The fit's residuals, trace by trace.

    Returns
    -------
    list of TraceCheck
    """
    out = []
    start = 0
    for run in experiment.runs:
        for trace in run.traces:
            n = trace.times.size
            res = np.asarray(residuals[start:start + n], dtype=float)
            start += n
            runs, z, p = runs_test(res)
            signs = np.sign(res)
            few = min(np.count_nonzero(signs > 0), np.count_nonzero(signs < 0)) < 8
            if z is None or few:
                verdict = "too few residuals of each sign to judge"
            elif p < MISFIT_P:
                verdict = (f"residuals stay on one side of zero in long stretches "
                           f"({runs} runs, p = {p:.2g}): the model misses a systematic feature")
            else:
                verdict = "no sign of systematic misfit"
            out.append(TraceCheck(run.name, trace.species, n, runs,
                                  None if z is None else float(z),
                                  None if p is None else float(p), _lag1(res), verdict))
    return out
