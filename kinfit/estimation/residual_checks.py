"""Residual checks: do the residuals of a fit look like noise, trace by trace?

A model that misses a systematic feature of the data leaves residuals that
stay on one side of zero for long stretches, and neighbours that resemble
each other. Two tests, per trace (one species in one run), both one-sided
against that alternative:

* **Runs test, exact** (Wald & Wolfowitz, Ann. Math. Stat. 11 (1940) 147;
  Swed & Eisenhart, Ann. Math. Stat. 14 (1943) 66). Zeros dropped, n₊
  positive and n₋ negative residuals, n = n₊ + n₋. Given n₊ and n₋, every
  arrangement of the signs is equally likely under the null hypothesis, and
  the number of runs R has the distribution (counting the arrangements)

      P(R = 2k)     = 2 C(n₊−1, k−1) C(n₋−1, k−1) / C(n, n₊)
      P(R = 2k + 1) = [C(n₊−1, k) C(n₋−1, k−1) + C(n₊−1, k−1) C(n₋−1, k)] / C(n, n₊)

  with mean 2 n₊ n₋ / n + 1. The p-value of so few runs is P(R ≤ r),
  summed exactly in integers. The normal approximation z (Wald–Wolfowitz
  variance 2 n₊ n₋ (2 n₊ n₋ − n) / (n² (n − 1))) is kept for information;
  it is poor below about 10 of each sign, which is why the exact sum decides.
* **Lag-1 autocorrelation** r₁ = Σ (eₜ − ē)(eₜ₊₁ − ē) / Σ (eₜ − ē)² in
  time order, tested with the Ljung–Box statistic at lag 1,
  Q = n (n + 2) r₁² / (n − 1) ~ χ²(1) (Ljung & Box, Biometrika 65 (1978)
  297): the one-sided p-value of so large a positive r₁ is P(Z ≥ √Q) for
  r₁ > 0 (half the χ² tail), and 1 − that for r₁ ≤ 0.

The rule, stated in every report (:data:`RULE`): a trace shows **systematic
misfit** when either test gives p < 0.01. A trace in which neither test finds
misfit is **too short to judge** only when the exact runs test could not have
reached p < 0.01 at all with its n₊ and n₋, that is when even the fewest
possible runs (two) have P(R = 2) = 2 / C(n, n₊) ≥ 0.01 (5 and 5 residuals
can reach it, 4 and 5 cannot); otherwise it is **judged** and shows no sign of
misfit. A trace lopsided in sign (2 positive of 19) cannot be judged by the
runs test, but a strong lag-1 autocorrelation still calls it misfitted.
The two tests look at the same alternative, so their joint false-alarm rate
on pure noise is at most 2 % per trace; the Ljung–Box test is conservative on
short traces (it ignores that E r₁ = −1/n: on 19 independent normal values it
falls below 0.01 in about 0.4 % of draws, by simulation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["TraceCheck", "runs_test", "runs_distribution", "lag1_test", "check_residuals",
           "summarize_checks", "MISFIT_P", "RULE", "TESTS"]

MISFIT_P = 0.01     # one-sided p below which a trace is called systematically misfitted

TESTS = ("exact runs test on the residuals' signs (Wald–Wolfowitz) and lag-1 "
         "autocorrelation (Ljung–Box, one-sided)")
RULE = (f"systematic misfit where either test gives p < {MISFIT_P:g}; too short to judge "
        f"where neither does and the runs test could not reach p < {MISFIT_P:g} with the "
        f"trace's numbers of positive and negative residuals (2 / C(n, n₊) ≥ {MISFIT_P:g})")


@dataclass(frozen=True)
class TraceCheck:
    """Residual checks of one trace.

    Attributes
    ----------
    run, species : str
    n : int
        Number of residuals.
    n_positive, n_negative : int
        Residuals of each sign (zeros are in neither).
    runs : int
        Number of runs of one sign.
    expected_runs : float or None
        2 n₊ n₋ / n + 1; None when a sign is missing.
    z : float or None
        Normal approximation of the runs test (negative: fewer runs than
        chance); for information only.
    p_few_runs : float or None
        Exact one-sided p-value of so few runs, P(R ≤ runs).
    autocorrelation : float or None
        Lag-1 autocorrelation.
    p_autocorrelation : float or None
        One-sided p-value of so large a lag-1 autocorrelation (Ljung–Box).
    judged : bool
        Whether the exact runs test could reach p < :data:`MISFIT_P`, or a
        test found misfit.
    verdict : str
    """

    run: str
    species: str
    n: int
    n_positive: int
    n_negative: int
    runs: int
    expected_runs: float | None
    z: float | None
    p_few_runs: float | None
    autocorrelation: float | None
    p_autocorrelation: float | None
    judged: bool
    verdict: str

    @property
    def misfit(self):
        return any(p is not None and p < MISFIT_P
                   for p in (self.p_few_runs, self.p_autocorrelation))

    def to_dict(self):
        return {"run": self.run, "species": self.species, "n": self.n,
                "n_positive": self.n_positive, "n_negative": self.n_negative,
                "runs": self.runs, "expected_runs": self.expected_runs, "z": self.z,
                "p_few_runs": self.p_few_runs, "autocorrelation": self.autocorrelation,
                "p_autocorrelation": self.p_autocorrelation, "judged": self.judged,
                "misfit": self.misfit, "verdict": self.verdict}


def _arrangements(r, n_pos, n_neg):
    """Number of sign arrangements of n₊ and n₋ with exactly r runs (an integer)."""
    k = r // 2
    if r % 2 == 0:
        return 2 * math.comb(n_pos - 1, k - 1) * math.comb(n_neg - 1, k - 1)
    return (math.comb(n_pos - 1, k) * math.comb(n_neg - 1, k - 1)
            + math.comb(n_pos - 1, k - 1) * math.comb(n_neg - 1, k))


def runs_distribution(n_pos, n_neg):
    """Exact distribution of the number of runs given n₊ and n₋ (see the module notes).

    Parameters
    ----------
    n_pos, n_neg : int
        Both at least 1.

    Returns
    -------
    dict of int to float
        P(R = r) for every possible r (2 to 2 min(n₊, n₋) + 1, at most n).
    """
    total = math.comb(n_pos + n_neg, n_pos)
    ways = {r: _arrangements(r, n_pos, n_neg) for r in range(2, n_pos + n_neg + 1)}
    return {r: w / total for r, w in ways.items() if w}


def _few_runs_p(runs, n_pos, n_neg):
    """P(R ≤ runs), summed in integers before the one division."""
    ways = sum(_arrangements(r, n_pos, n_neg) for r in range(2, runs + 1))
    return ways / math.comb(n_pos + n_neg, n_pos)


def runs_test(residuals):
    """Wald–Wolfowitz runs test on the signs of `residuals` [n] (zeros dropped).

    Returns
    -------
    runs : int
    z : float or None
        Normal approximation; None when either sign is missing.
    p_few_runs : float or None
        Exact P(R ≤ runs) under random signs; None when either sign is missing.
    """
    signs = np.sign(np.asarray(residuals, dtype=float))
    signs = signs[signs != 0]
    if signs.size == 0:
        return 0, None, None
    runs = int(1 + np.count_nonzero(signs[1:] != signs[:-1]))
    n_pos = int(np.count_nonzero(signs > 0))
    n_neg = signs.size - n_pos
    n = signs.size
    if n_pos == 0 or n_neg == 0:
        return runs, None, None
    p = _few_runs_p(runs, n_pos, n_neg)
    mean = 2.0 * n_pos * n_neg / n + 1.0
    var = 2.0 * n_pos * n_neg * (2.0 * n_pos * n_neg - n) / (n * n * (n - 1.0))
    z = (runs - mean) / math.sqrt(var) if var > 0 else None
    return runs, z, p


def lag1_test(residuals):
    """Lag-1 autocorrelation of `residuals` [n] and its one-sided Ljung–Box p-value.

    Returns
    -------
    r1 : float or None
        None for fewer than 3 residuals or no spread.
    p : float or None
        P of so large a positive r₁ under independence (see the module notes).
    """
    res = np.asarray(residuals, dtype=float)
    if res.size < 3:
        return None, None
    res = res - res.mean()
    denom = float(res @ res)
    if denom <= 0:
        return None, None
    n = res.size
    r1 = float(res[1:] @ res[:-1]) / denom
    root_q = abs(r1) * math.sqrt(n * (n + 2.0) / (n - 1.0))
    upper = 0.5 * math.erfc(root_q / math.sqrt(2.0))
    return r1, upper if r1 > 0 else 1.0 - upper


def _verdict(judged, n_pos, n_neg, runs, expected, p_runs, r1, p_r1):
    found = []
    if p_runs is not None and p_runs < MISFIT_P:
        found.append(f"long stretches of one sign ({runs} runs, {expected:.1f} expected, "
                     f"p = {p_runs:.2g})")
    if p_r1 is not None and p_r1 < MISFIT_P:
        found.append(f"neighbouring residuals alike (lag-1 autocorrelation {r1:.2f}, "
                     f"p = {p_r1:.2g})")
    if found:
        return "systematic misfit: " + "; ".join(found) + "; the model misses a feature"
    if not judged:
        if n_pos + n_neg == 0:
            return "too short to judge: no residual differs from zero"
        if n_pos == 0 or n_neg == 0:
            side = "above" if n_pos else "below"
            return (f"not judged by the runs test: all {n_pos + n_neg} nonzero residuals lie "
                    f"{side} zero (look at this trace: the fit may miss it as a whole)")
        least = 2 / math.comb(n_pos + n_neg, n_pos)
        return (f"too short to judge: with {n_pos} positive and {n_neg} negative residuals, "
                f"even 2 runs have p = {least:.2g} ≥ {MISFIT_P:g}")
    return "no sign of systematic misfit"


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
            n_pos, n_neg = int(np.count_nonzero(res > 0)), int(np.count_nonzero(res < 0))
            expected = 2.0 * n_pos * n_neg / (n_pos + n_neg) + 1.0 if n_pos and n_neg else None
            r1, p_r1 = lag1_test(res)
            judged = bool(n_pos and n_neg and 2 / math.comb(n_pos + n_neg, n_pos) < MISFIT_P) \
                or (p_r1 is not None and p_r1 < MISFIT_P)
            out.append(TraceCheck(
                run.name, trace.species, n, n_pos, n_neg, runs, expected,
                None if z is None else float(z), None if p is None else float(p), r1, p_r1,
                judged, _verdict(judged, n_pos, n_neg, runs, expected, p, r1, p_r1)))
    return out


def summarize_checks(checks):
    """What was and was not judged, in one heading, with the tests and the rule.

    Parameters
    ----------
    checks : sequence of TraceCheck

    Returns
    -------
    dict
        ``heading`` (e.g. "8 traces judged, 0 show systematic misfit; 1 too
        short to judge"; a trace whose residuals all have one sign is counted
        apart, as it is not short), ``n_traces``, ``n_judged``, ``n_misfit``,
        ``n_not_judged``, ``tests`` (:data:`TESTS`) and ``rule`` (:data:`RULE`).
    """
    judged = sum(1 for c in checks if c.judged)
    misfit = sum(1 for c in checks if c.misfit)
    one_sided = sum(1 for c in checks if not c.judged
                    and (c.n_positive == 0) != (c.n_negative == 0))
    short = len(checks) - judged - one_sided
    heading = (f"{judged} trace{'' if judged == 1 else 's'} judged, {misfit} "
               f"show{'s' if misfit == 1 else ''} systematic misfit")
    if short:
        heading += f"; {short} too short to judge"
    if one_sided:
        heading += (f"; {one_sided} not judged, every residual on one side of zero "
                    f"(look at {'it' if one_sided == 1 else 'them'})")
    return {"heading": heading, "n_traces": len(checks), "n_judged": judged,
            "n_misfit": misfit, "n_not_judged": len(checks) - judged, "tests": TESTS,
            "rule": RULE}
