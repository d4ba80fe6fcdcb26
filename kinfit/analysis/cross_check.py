"""The initial-rates method set beside the best one-step time-course fit.

A ranking ends with a check by an independent route: the orders and k that
the initial-rates method (:mod:`kinfit.analysis.initial_rates`) finds in the
same runs, compared with the orders and k of the best candidate that has a
single irreversible step (:func:`check_against_initial_rates`). The fitted
orders carry the fit's standard errors (:func:`fitted_orders`); a difference
of more than ``AGREEMENT_Z`` combined standard errors is a warning.

The check is only as good as the initial rates. When in some run even the
fewest points that give an initial rate with a standard error already reach
beyond the conversion window (sparse early sampling: the first reading after
t = 0 may already lie past it), those rates are biased by an amount the
method cannot estimate, and a difference from the fit says nothing about the
fit. The check then reports **cannot check**, with the runs and conversions
as the reason, instead of agreement or disagreement; the numbers are still
shown.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from kinfit.analysis.initial_rates import (
    AGREEMENT_Z,
    check_orders,
    initial_rates,
    rate_constant_at,
)

if TYPE_CHECKING:
    from kinfit.analysis.initial_rates import InitialRates, OrderCheck

__all__ = ["CrossCheck", "fitted_orders", "check_against_initial_rates"]


@dataclass(frozen=True)
class CrossCheck:
    """The initial-rates method beside one time-course fit.

    Attributes
    ----------
    candidate : str
        The ranked candidate compared (the best with one irreversible step).
    initial_rates : InitialRates
    orders : tuple of OrderCheck
    rate_constant : dict or None
        k from the initial rates with the orders fixed at the fitted ones,
        beside the fitted k: keys ``name``, ``unit``, ``initial_rates``,
        ``initial_rates_stderr``, ``time_course``, ``time_course_stderr``,
        ``z`` (on ln k), ``agrees`` (None when it cannot be checked).
    warnings : tuple of str
    cannot_check : str or None
        Why agreement cannot be judged (initial rates from beyond the
        conversion window); then every ``agrees`` is None.
    """

    candidate: str
    initial_rates: InitialRates
    orders: tuple[OrderCheck, ...]
    rate_constant: dict | None
    warnings: tuple[str, ...] = ()
    cannot_check: str | None = None

    @property
    def status(self):
        """The verdict: "cannot check", "disagree" (a comparison differs), or "agree"
        otherwise."""
        if self.cannot_check:
            return "cannot check"
        agrees = [c.agrees for c in self.orders] + [
            (self.rate_constant or {}).get("agrees")]
        return "disagree" if any(a is False for a in agrees) else "agree"

    def to_dict(self):
        """Plain-Python form (the ``initial_rates`` part of ``ranking.json``)."""
        out = self.initial_rates.to_dict()
        out["compared_with"] = self.candidate
        out["orders"] = [vars(c).copy() for c in self.orders]
        out["rate_constant"] = self.rate_constant
        out["agreement_limit_z"] = AGREEMENT_Z
        out["status"] = self.status
        out["cannot_check"] = self.cannot_check
        out["warnings"] = list(self.warnings)
        return out


def fitted_orders(result):
    """Order of each species in a one-step fit, with its standard error.

    Parameters
    ----------
    result : FitResult
        Of a mechanism whose first step gives the rate law.

    Returns
    -------
    dict of str to (float, float or None)
        Species -> (order, standard error); the error is 0 for an order the
        model fixes and ``None`` when the fit has no covariance.
    """
    law = result.mechanism.directions[0][1]
    free = list(result.free_names)
    out = {}
    for species, affine in law.orders:
        value = affine.value(result.values)
        grad = np.zeros(len(free))
        for pname, coef in affine.coef:
            if pname in free:
                grad[free.index(pname)] = coef
        if not grad.any():
            out[species] = (value, 0.0)
        elif result.covariance is None:
            out[species] = (value, None)
        else:
            out[species] = (value, float(math.sqrt(max(grad @ result.covariance @ grad, 0.0))))
    return out


def check_against_initial_rates(rows, experiment, max_conversion):
    """The initial-rates method beside the best one-step candidate.

    Parameters
    ----------
    rows : sequence of Ranked
        Ranked candidates, best first.
    experiment : Experiment
    max_conversion : float
        Window of the initial-rates method.

    Returns
    -------
    CrossCheck or str
        The check, or why it was skipped.
    """
    if len({run.temperature for run in experiment.runs}) > 1:
        return ("the runs are at several temperatures, so the initial-rates cross-check "
                "(one rate constant for all runs) was skipped")
    for row in rows:
        mech = row.fit.mechanism
        if len(mech.steps) == 1 and not mech.steps[0].reaction.reversible:
            break
    else:
        return ("no candidate has a single irreversible step, so the initial-rates "
                "cross-check was skipped")
    result = initial_rates(experiment, mech, max_conversion=max_conversion)
    cannot = _beyond_window(result)
    warnings, orders, k_check = [], (), None
    fitted = fitted_orders(row.fit)
    if result.regression is not None:
        orders = check_orders(result.regression, fitted)
        if cannot:
            orders = tuple(replace(c, agrees=None) for c in orders)
        for c in orders:
            if c.agrees is False:
                warnings.append(
                    f"the initial-rates order in {c.species} ({c.initial_rates:.3g} ± "
                    f"{c.initial_rates_stderr:.2g}) differs from the time-course fit's "
                    f"({c.time_course:.3g}) by {abs(c.z):.1f} combined standard errors")
    law = mech.directions[0][1]
    k_name = law.constant
    fit_k, fit_se = row.fit.values[k_name] * law.factor, row.fit.stderr.get(k_name)
    # with a temperature law the fitted k is k at the reference temperature
    at = None if getattr(mech, "temperature", None) is not None else rate_constant_at(
        result, {s: m for s, (m, _) in fitted.items()})
    if at is not None and fit_k > 0:
        k_ir, k_ir_se = at
        ln_se_fit = (fit_se * law.factor / fit_k) if fit_se is not None else 0.0
        ln_se_ir = k_ir_se / k_ir if k_ir_se is not None else None
        z = agrees = None
        if ln_se_ir is not None and math.hypot(ln_se_ir, ln_se_fit) > 0:
            z = (math.log(k_ir) - math.log(fit_k)) / math.hypot(ln_se_ir, ln_se_fit)
            agrees = None if cannot else abs(z) <= AGREEMENT_Z
        k_check = {"name": k_name if law.factor == 1 else f"{law.factor:g}·{k_name}",
                   "unit": row.fit.units.get(k_name), "initial_rates": k_ir,
                   "initial_rates_stderr": k_ir_se, "time_course": fit_k,
                   "time_course_stderr": fit_se * law.factor if fit_se is not None else None,
                   "z": z, "agrees": agrees}
        if agrees is False:
            warnings.append(f"k from the initial rates at the fitted orders ({k_ir:.3g}) "
                            f"differs from the time-course fit's ({fit_k:.3g}) by "
                            f"{abs(z):.1f} combined standard errors (on ln k)")
    if warnings:
        warnings.append("initial rates from sparse early points are biased; the time-course "
                        "fit uses every point, but a disagreement can also mean the rate law "
                        "changes during the reaction (product inhibition, catalyst decay)")
    if cannot:
        warnings.append(f"the initial-rates cross-check cannot check the fit: {cannot}")
    return CrossCheck(row.name, result, orders, k_check, tuple(warnings), cannot)


def _beyond_window(result):
    """Why the initial rates cannot test the fit, or None: runs whose rate comes from
    points beyond the conversion window."""
    beyond = [r for r in result.rates if r.rate is not None and r.conversion is not None
              and r.conversion > result.max_conversion]
    if not beyond:
        return None
    low, high = (100 * min(r.conversion for r in beyond),
                 100 * max(r.conversion for r in beyond))
    span = f"{low:.0f} %" if round(low) == round(high) else f"{low:.0f}–{high:.0f} %"
    return (f"the initial rates of run(s) {', '.join(r.run for r in beyond)} come from "
            f"points reaching {span} conversion, beyond the "
            f"{100 * result.max_conversion:.0f} % window, and are biased by an amount the "
            f"method cannot estimate, so a difference from the fit would not mean the fit "
            f"is wrong; sample more densely near t = 0 to make the check")
