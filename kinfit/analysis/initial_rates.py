"""The initial-rates method, as a cross-check on the time-course fit.

From the same data the global fit uses, this module does what a chemist
would do by hand with tangents at t = 0:

1. **Each run's initial rate**, from the slope at t = 0 of a low-degree
   polynomial fitted to the extent of reaction over an early window (see
   :mod:`kinfit.analysis.initial_slopes`).

2. **Orders by multiple regression.** ln r0 = ln k + Σ_s m_s ln[s]0 is fitted
   over the runs by weighted least squares (weights 1/se(ln r0)²), so runs
   need not vary one concentration at a time. Standard errors are multiplied
   by max(1, χ²/dof) of the regression, so scatter between runs beyond the
   per-run errors widens them, while a few runs that happen to agree closely
   do not shrink them (see
   :func:`~kinfit.analysis.initial_slopes.linear_least_squares`).

3. **Agreement.** :func:`check_orders` compares each order with the
   time-course fit's and flags a difference larger than
   :data:`AGREEMENT_Z` combined standard errors.

The initial-rates method needs the starting concentrations to be known, a
trace sampled densely near t = 0, and runs that vary each concentration
independently; kinfit says which of these fails instead of guessing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from kinfit.analysis.initial_slopes import (
    DEFAULT_DEGREE,
    InitialRate,
    linear_least_squares,
    run_initial_rate,
)
from kinfit.core.defaults import DEFAULT_MAX_CONVERSION
from kinfit.core.errors import KinfitError
from kinfit.inputs.expressions import ParseError, parse_reaction

__all__ = ["OrderRegression", "OrderCheck", "InitialRates", "regress_orders", "initial_rates",
           "check_orders", "rate_constant_at", "AGREEMENT_Z"]

# Two combined standard errors: about the 95 % level for a normal estimate
# (common practice).
AGREEMENT_Z = 2.0


@dataclass(frozen=True)
class OrderRegression:
    """ln r0 = ln k + Σ m_s ln[s]0 fitted over the runs.

    Attributes
    ----------
    species : tuple of str
        Species whose orders were estimated (those varied between runs).
    orders, stderr : dict of str to float
        Order of each species and its standard error (``None`` if no
        standard error could be computed).
    log_k, log_k_stderr : float
        ln k and its standard error.
    k, k_stderr : float
        k = exp(ln k) and its standard error by the delta method (k · se(ln k)).
    overall_order : float
        Σ m_s over the species estimated (species not varied are absorbed
        into k).
    runs : tuple of str
        Runs used, in the order of the rows below.
    log_conc : ndarray [n_runs, n_species]
    log_rate : ndarray [n_runs]
    log_rate_stderr : ndarray [n_runs] or None
        se(ln r0) of each run; ``None`` for an unweighted regression.
    covariance : ndarray [n_species + 1, n_species + 1]
        Of (ln k, m_1, ..., m_n).
    dof : int
        Runs minus estimated coefficients.
    weighted : bool
        Whether per-run weights were used.
    scale_factor : float
        What (XᵀWX)⁻¹ was multiplied by: the residual variance for an
        unweighted regression, max(1, χ²_w/dof) for a weighted one.
    """

    species: tuple[str, ...]
    orders: dict[str, float]
    stderr: dict[str, float | None]
    log_k: float
    log_k_stderr: float | None
    k: float
    k_stderr: float | None
    overall_order: float
    runs: tuple[str, ...]
    log_conc: np.ndarray = field(repr=False)
    log_rate: np.ndarray = field(repr=False)
    log_rate_stderr: np.ndarray | None = field(repr=False)
    covariance: np.ndarray | None = field(repr=False)
    dof: int = 0
    weighted: bool = False
    scale_factor: float = 1.0


@dataclass(frozen=True)
class OrderCheck:
    """One order from the initial rates beside the time-course fit's.

    Attributes
    ----------
    species : str
    initial_rates, initial_rates_stderr : float, float or None
    time_course, time_course_stderr : float, float or None
        Order of the species in the compared fit (standard error 0 for an
        order the model fixes).
    z : float or None
        Difference in combined standard errors.
    agrees : bool or None
        ``|z| <= AGREEMENT_Z``; ``None`` when no standard error is available.
    """

    species: str
    initial_rates: float
    initial_rates_stderr: float | None
    time_course: float
    time_course_stderr: float | None
    z: float | None
    agrees: bool | None


@dataclass(frozen=True)
class InitialRates:
    """Result of the initial-rates method on an experiment.

    Attributes
    ----------
    reaction : str
        The reaction whose rate is estimated.
    rates : tuple of InitialRate
        One per run, in the experiment's order.
    regression : OrderRegression or None
        ``None`` when the runs do not allow one (see `notes`).
    notes : tuple of str
    max_conversion : float
    degree : int
    rate_unit : str
        Concentration per time, e.g. ``mM min^-1``.
    k_unit : str or None
        Unit of the regression's k.
    concentration_unit : str
    """

    reaction: str
    rates: tuple[InitialRate, ...]
    regression: OrderRegression | None
    notes: tuple[str, ...]
    max_conversion: float
    degree: int
    rate_unit: str = ""
    k_unit: str | None = None
    concentration_unit: str = ""

    def to_dict(self):
        """Plain-Python form (the ``initial_rates`` part of ``ranking.json``)."""
        reg = self.regression
        return {
            "reaction": self.reaction,
            "method": {"polynomial_degree": self.degree,
                       "max_conversion": self.max_conversion},
            "rate_unit": self.rate_unit,
            "concentration_unit": self.concentration_unit,
            "runs": [{"run": r.run, "rate": r.rate, "stderr": r.stderr, "conc0": r.conc0,
                      "traces": [{"species": t.species, "rate": t.rate, "stderr": t.stderr,
                                  "n_points": t.n_points, "t_end": t.t_end,
                                  "conversion": t.conversion, "degree": t.degree}
                                 for t in r.traces],
                      "conversion": r.conversion, "note": r.note} for r in self.rates],
            "regression": None if reg is None else {
                "species": list(reg.species),
                "orders": reg.orders,
                "orders_stderr": reg.stderr,
                "k": reg.k,
                "k_stderr": reg.k_stderr,
                "k_unit": self.k_unit,
                "ln_k": reg.log_k,
                "ln_k_stderr": reg.log_k_stderr,
                "overall_order": reg.overall_order,
                "runs": list(reg.runs),
                "dof": reg.dof,
                "weighted": reg.weighted,
                "covariance_scale_factor": reg.scale_factor,
            },
            "notes": list(self.notes),
        }


# --------------------------------------------------------------- regression

def regress_orders(conc0, rates, stderr=None, species=None, runs=None):
    """Orders and k from initial rates: ln r0 = ln k + Σ_s m_s ln[s]0.

    Parameters
    ----------
    conc0 : array_like [n_runs, n_species]
        Positive starting concentrations of the species whose orders are
        wanted.
    rates : array_like [n_runs]
        Positive initial rates.
    stderr : array_like [n_runs], optional
        Standard errors of the rates; gives weights 1/se(ln r0)² with
        se(ln r0) = se/r0. Unweighted when ``None``.
    species, runs : sequence of str, optional
        Names for the columns and rows.

    Returns
    -------
    OrderRegression

    Raises
    ------
    KinfitError
        For non-positive values, too few runs, or concentrations that are
        not varied independently.
    """
    conc0 = np.atleast_2d(np.asarray(conc0, dtype=float))
    rates = np.asarray(rates, dtype=float)
    n_runs, n_species = conc0.shape
    species = tuple(species or (f"x{i + 1}" for i in range(n_species)))
    runs = tuple(runs or (f"run {i + 1}" for i in range(n_runs)))
    if rates.shape != (n_runs,):
        raise KinfitError(f"expected {n_runs} initial rates, one per run, got {rates.size}")
    if np.any(~np.isfinite(conc0)) or np.any(conc0 <= 0):
        raise KinfitError("every starting concentration in the regression must be positive")
    if np.any(~np.isfinite(rates)) or np.any(rates <= 0):
        raise KinfitError("every initial rate in the regression must be positive")
    if n_runs < n_species + 1:
        raise KinfitError(f"{n_runs} runs cannot give {n_species} order(s) and k; at least "
                          f"{n_species + 1} runs are needed")
    log_conc, log_rate = np.log(conc0), np.log(rates)
    design = np.column_stack([np.ones(n_runs), log_conc])
    if np.linalg.matrix_rank(design) < n_species + 1:
        raise KinfitError(f"the runs do not vary the starting concentrations of "
                          f"{', '.join(species)} independently, so their orders cannot be "
                          f"separated; add runs that change one of them at a time")
    log_se = weights = None
    if stderr is not None:
        stderr = np.asarray(stderr, dtype=float)
        if np.all(np.isfinite(stderr)) and np.all(stderr > 0):
            log_se = stderr / rates
            weights = 1.0 / log_se ** 2
    dof = n_runs - n_species - 1
    beta, cov, factor = linear_least_squares(design, log_rate, weights,
                                             scale="residual" if weights is None else
                                             "at least one")
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None)) if cov is not None else [None] * len(beta)
    orders = {s: float(b) for s, b in zip(species, beta[1:])}
    order_se = {s: (float(e) if e is not None else None) for s, e in zip(species, se[1:])}
    log_k, log_k_se = float(beta[0]), (float(se[0]) if se[0] is not None else None)
    k = math.exp(log_k)
    return OrderRegression(
        species=species, orders=orders, stderr=order_se, log_k=log_k, log_k_stderr=log_k_se,
        k=k, k_stderr=k * log_k_se if log_k_se is not None else None,
        overall_order=float(np.sum(beta[1:])), runs=runs, log_conc=log_conc,
        log_rate=log_rate, log_rate_stderr=log_se, covariance=cov, dof=dof,
        weighted=weights is not None, scale_factor=factor)


# ------------------------------------------------------------ whole method

def _reaction(reaction):
    """(text, stoichiometry, held-constant species) from a mechanism or reaction text."""
    if isinstance(reaction, str):
        try:
            parsed = parse_reaction(reaction)
        except ParseError as exc:
            raise KinfitError(f"reaction {reaction!r}: {exc}") from None
        return reaction, parsed.net(), ()
    steps = reaction.steps
    if len(steps) != 1 or steps[0].reaction.reversible:
        raise KinfitError(f"the initial-rates method needs one irreversible step; the model "
                          f"'{reaction.name}' has {len(steps)} step(s)"
                          + (" and a reversible one" if any(s.reaction.reversible
                                                            for s in steps) else ""))
    return steps[0].reaction.text, steps[0].reaction.net(), tuple(reaction.held_constant)


def initial_rates(experiment, reaction, max_conversion=DEFAULT_MAX_CONVERSION,
                  degree=DEFAULT_DEGREE):
    """The initial-rates method on every run of `experiment`.

    Parameters
    ----------
    experiment : Experiment
    reaction : Mechanism or str
        A mechanism with one irreversible step, or the reaction as text
        (``"A + B -> P"``); it gives the stoichiometric numbers that turn a
        measured d[X]/dt into the rate of reaction.
    max_conversion : float
        End of each run's window, as a fraction of the limiting reactant.
    degree : int
        Degree of the polynomial fitted to each window.

    Returns
    -------
    InitialRates
        Per-run rates always; the regression when the runs allow one,
        otherwise ``regression`` is ``None`` and `notes` says why.
    """
    if not 0 < max_conversion <= 1:
        raise KinfitError(f"max_conversion must lie in (0, 1], got {max_conversion!r}")
    if not isinstance(degree, int) or degree < 1:
        raise KinfitError(f"degree must be a whole number of at least 1, got {degree!r}")
    text, stoich, held = _reaction(reaction)
    sigma_of = experiment.sigma if experiment.sigma_known else None
    rates = tuple(run_initial_rate(run, stoich, sigma_of, max_conversion, degree, held)
                  for run in experiment.runs)
    units = experiment.units
    rate_unit = f"{units.concentration} {units.time}^-1"
    notes = [f"run {r.run}: {r.note}" for r in rates if r.note]
    beyond = [r for r in rates if r.conversion is not None and r.conversion > max_conversion]
    if beyond:
        low = min(r.conversion for r in beyond)
        high = max(r.conversion for r in beyond)
        span = f"{100 * low:.0f} %" if round(100 * low) == round(100 * high) else \
            f"{100 * low:.0f}–{100 * high:.0f} %"
        notes.append(f"in run(s) {', '.join(r.run for r in beyond)} the fewest points that "
                     f"give a standard error ({degree + 2}) already reach {span} conversion, "
                     f"beyond the {100 * max_conversion:.0f} % window; those initial rates "
                     f"may be biased: sample more densely near t = 0")
    usable = [r for r in rates if r.rate is not None and r.rate > 0]
    for r in rates:
        if r.rate is not None and r.rate <= 0:
            notes.append(f"run {r.run}: the initial rate estimate {r.rate:.3g} is not positive "
                         f"and is left out of the regression")
    regression, k_unit = None, None
    species = _varied_species(usable, notes)
    if species:
        conc = [[r.conc0[s] for s in species] for r in usable]
        errors = None if any(r.stderr is None for r in usable) else [r.stderr for r in usable]
        try:
            regression = regress_orders(conc, [r.rate for r in usable], errors, species,
                                        [r.run for r in usable])
        except KinfitError as exc:
            notes.append(f"no order regression: {exc}")
        else:
            k_unit = units.rate_constant(regression.overall_order)
            if regression.dof == 0:
                notes.append("as many runs as unknowns: the regression fits the rates exactly, "
                             "so its standard errors come from the per-run errors alone")
    return InitialRates(reaction=text, rates=rates, regression=regression, notes=tuple(notes),
                        max_conversion=max_conversion, degree=degree, rate_unit=rate_unit,
                        k_unit=k_unit, concentration_unit=units.concentration)


def _varied_species(rates, notes):
    """Species with a positive starting concentration in every run, varied between runs."""
    if not rates:
        notes.append("no run gave a usable initial rate")
        return ()
    names = []
    for r in rates:
        for s in r.conc0:
            if s not in names:
                names.append(s)
    species = []
    for s in names:
        values = np.array([r.conc0.get(s, 0.0) for r in rates])
        if np.any(values <= 0):
            if np.any(values > 0):
                notes.append(f"[{s}]0 is zero in some runs; its order is not estimated")
            continue
        if np.ptp(np.log(values)) < 1e-9:
            notes.append(f"[{s}]0 = {values[0]:g} in every run, so its order is not estimated "
                         f"(its effect is part of k)")
            continue
        species.append(s)
    if not species:
        notes.append("no starting concentration varies between runs")
    return tuple(species)


def check_orders(regression, time_course, z_limit=AGREEMENT_Z):
    """Compare the initial-rates orders with a time-course fit's.

    Parameters
    ----------
    regression : OrderRegression
    time_course : mapping of str to (float, float or None)
        Order and standard error of each species in the fitted rate law
        (order 0 for a species the rate law does not contain).
    z_limit : float

    Returns
    -------
    tuple of OrderCheck
        One per species of the regression.
    """
    out = []
    for s in regression.species:
        m, se = regression.orders[s], regression.stderr[s]
        fit_m, fit_se = time_course.get(s, (0.0, 0.0))
        z = agrees = None
        if se is not None and fit_se is not None:
            combined = math.hypot(se, fit_se)
            if combined > 0:
                z = (m - fit_m) / combined
                agrees = abs(z) <= z_limit
        out.append(OrderCheck(s, m, se, fit_m, fit_se, z, agrees))
    return tuple(out)


def rate_constant_at(result, orders):
    """k from the initial rates with the orders fixed at given values.

    ln k = ln r0 − Σ_s m_s ln[s]0 for each run, averaged over the runs with
    weights 1/se(ln r0)² (errors scaled as in the order regression). Used to
    set the initial rates' k beside a time-course fit's k in the same unit.

    Parameters
    ----------
    result : InitialRates
    orders : mapping of str to float
        Order of every species in the rate law.

    Returns
    -------
    (k, stderr) or None
        ``None`` when no run has a positive rate and every needed starting
        concentration; `stderr` is ``None`` from a single unweighted run.
    """
    needed = {s: m for s, m in orders.items() if m != 0}
    usable = [r for r in result.rates if r.rate is not None and r.rate > 0
              and all(r.conc0.get(s, 0.0) > 0 for s in needed)]
    if not usable:
        return None
    ln_k = np.array([math.log(r.rate) - sum(m * math.log(r.conc0[s]) for s, m in needed.items())
                     for r in usable])
    weighted = all(r.stderr is not None and r.stderr > 0 for r in usable)
    weights = np.array([(r.rate / r.stderr) ** 2 for r in usable]) if weighted else None
    beta, cov, _ = linear_least_squares(np.ones((ln_k.size, 1)), ln_k, weights,
                                        scale="at least one" if weighted else "residual")
    k = math.exp(float(beta[0]))
    return k, (k * math.sqrt(float(cov[0, 0])) if cov is not None else None)
