"""The initial-rates method, as a cross-check on the time-course fit.

From the same data the global fit uses, this module does what a chemist
would do by hand with tangents at t = 0:

1. **Each run's initial rate.** For every measured species X that the
   reaction uses or forms (stoichiometric number ν_X ≠ 0), the extent of
   reaction ξ = ([X] − [X]0)/ν_X is computed over the first part of the
   trace: the leading points up to a conversion of the limiting reactant of
   `max_conversion` (20 % by default, common practice for initial rates),
   extended to at least degree + 2 points so that the slope has a standard
   error. A polynomial of low degree (2 by default) is fitted by least
   squares to ln(1 − ξ/ξ_max), the log of the fraction of the limiting
   reactant left, and its slope at t = 0 gives the initial rate of reaction
   r0 = dξ/dt (IUPAC rate of reaction). The log makes a first-order decay a
   straight line and takes most of the curvature out of orders up to about
   2, and the quadratic term absorbs what is left, so the estimate is far
   less biased than a straight tangent when the early points are sparse
   (Taylor expansion; common practice). Standard errors use the declared
   noise when there is one, and the scatter about the polynomial otherwise.
   Several measured species of one run are combined by inverse-variance
   weighting.

2. **Orders by multiple regression.** ln r0 = ln k + Σ_s m_s ln[s]0 is fitted
   over the runs by weighted least squares (weights 1/se(ln r0)²), so runs
   need not vary one concentration at a time. Standard errors are multiplied
   by max(1, χ²/dof) of the regression, so scatter between runs beyond the
   per-run errors widens them, while a few runs that happen to agree closely
   do not shrink them (see :func:`_least_squares`).

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

from kinfit.core.defaults import DEFAULT_MAX_CONVERSION
from kinfit.core.errors import KinfitError
from kinfit.inputs.expressions import ParseError, parse_reaction

__all__ = ["TraceSlope", "InitialRate", "OrderRegression", "OrderCheck", "InitialRates",
           "initial_slope", "run_initial_rate", "regress_orders", "initial_rates",
           "check_orders", "rate_constant_at", "polynomial_fit", "DEFAULT_DEGREE", "AGREEMENT_Z"]

DEFAULT_DEGREE = 2
# Two combined standard errors: about the 95 % level for a normal estimate
# (common practice).
AGREEMENT_Z = 2.0


@dataclass(frozen=True)
class TraceSlope:
    """Initial rate from one trace of one run.

    Attributes
    ----------
    species : str
    rate : float
        r0 = (1/ν) d[X]/dt at t = 0, in concentration per time.
    stderr : float
    n_points : int
        Points in the window.
    t_end : float
        Last time in the window.
    conversion : float or None
        Conversion of the limiting reactant at the end of the window, from
        the measured values (``None`` when the capacity is unknown).
    degree : int
        Degree of the polynomial fitted.
    """

    species: str
    rate: float
    stderr: float
    n_points: int
    t_end: float
    conversion: float | None
    degree: int


@dataclass(frozen=True)
class InitialRate:
    """Initial rate of one run, combined over its usable traces.

    Attributes
    ----------
    run : str
    rate, stderr : float or None
        ``None`` when no trace of the run could be used (see `note`).
    conc0 : dict of str to float
        Known starting concentrations of the run.
    traces : tuple of TraceSlope
    note : str
        Why the run was not used, or what to keep in mind ("" if nothing).
    conversion : float or None
        Largest conversion of the limiting reactant reached in the windows
        used (``None`` when unknown).
    """

    run: str
    rate: float | None
    stderr: float | None
    conc0: dict
    traces: tuple = ()
    note: str = ""
    conversion: float | None = None


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

    species: tuple
    orders: dict
    stderr: dict
    log_k: float
    log_k_stderr: float | None
    k: float
    k_stderr: float | None
    overall_order: float
    runs: tuple
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
    rates: tuple
    regression: OrderRegression | None
    notes: tuple
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


# ------------------------------------------------------------ least squares

def _least_squares(design, y, weights=None, scale="residual"):
    """Weighted linear least squares with its covariance.

    Parameters
    ----------
    design : ndarray [n, p]
    y : ndarray [n]
    weights : ndarray [n], optional
        1/σ² of each point (ordinary least squares when ``None``).
    scale : {"residual", "none", "at least one"}
        How the covariance (XᵀWX)⁻¹ is scaled: by the reduced weighted
        residual sum of squares s² = RSS_w/(n − p) (statsmodels' OLS and WLS
        default), not at all (the weights are trusted), or by max(1, s²), the
        "scale factor" convention of the Particle Data Group's Review of
        Particle Physics (from memory): errors are widened when the scatter
        exceeds the stated errors and never narrowed by a small-sample
        chance of little scatter.

    Returns
    -------
    beta : ndarray [p]
    cov : ndarray [p, p] or None
        ``None`` when n = p and the covariance would have to be scaled by s².
    factor : float
        The factor the covariance was scaled by (NaN when `cov` is None).
    """
    n, p = design.shape
    root = np.ones(n) if weights is None else np.sqrt(weights)
    a = design * root[:, None]
    b = y * root
    if np.linalg.matrix_rank(a) < p:
        raise KinfitError("the regression is singular: its columns are not independent")
    beta, *_ = np.linalg.lstsq(a, b, rcond=None)
    cov = np.linalg.inv(a.T @ a)
    dof = n - p
    if scale == "none":
        return beta, cov, 1.0
    resid = b - a @ beta
    s2 = float(resid @ resid) / dof if dof > 0 else math.nan
    if scale == "residual":
        return (beta, None, math.nan) if dof <= 0 else (beta, cov * s2, s2)
    factor = max(1.0, s2) if dof > 0 else 1.0
    return beta, cov * factor, factor


def polynomial_fit(times, values, degree=DEFAULT_DEGREE, sigma=None):
    """Least-squares polynomial in t with the covariance of its coefficients.

    Parameters
    ----------
    times, values : array_like [n]
    degree : int
    sigma : array_like [n], optional
        Declared standard deviations: weighted fit, covariance not rescaled.
        Without them, ordinary least squares with σ² estimated from the
        residuals (n − degree − 1 degrees of freedom).

    Returns
    -------
    coef : ndarray [degree + 1]
        c_0, c_1, ... of c_0 + c_1 t + c_2 t² + ... (so c_1 is the slope at t = 0).
    cov : ndarray [degree + 1, degree + 1]

    Raises
    ------
    KinfitError
        With fewer than degree + 2 points.
    """
    t = np.asarray(times, dtype=float)
    y = np.asarray(values, dtype=float)
    if t.size < degree + 2:
        raise KinfitError(f"a degree-{degree} polynomial with a standard error needs at least "
                          f"{degree + 2} points, got {t.size}")
    span = float(np.max(np.abs(t))) or 1.0      # fit in t/span for conditioning
    design = np.vander(t / span, degree + 1, increasing=True)
    weights = None if sigma is None else 1.0 / np.asarray(sigma, dtype=float) ** 2
    beta, cov, _ = _least_squares(design, y, weights,
                                  scale="residual" if sigma is None else "none")
    back = span ** -np.arange(degree + 1.0)
    return beta * back, cov * np.outer(back, back)


def initial_slope(times, values, degree=DEFAULT_DEGREE, sigma=None):
    """Slope at t = 0 of a polynomial fitted to a trace, with its standard error.

    Parameters
    ----------
    times, values, degree, sigma : see :func:`polynomial_fit`

    Returns
    -------
    slope, stderr : float
        d(value)/dt at t = 0.
    """
    coef, cov = polynomial_fit(times, values, degree, sigma)
    return float(coef[1]), float(math.sqrt(max(cov[1, 1], 0.0)))


# ------------------------------------------------------------------ per run

def _known_initial(run, species):
    """Known starting concentration of `species` in `run` (a fitted one: its start)."""
    if species in run.initial:
        return run.initial[species]
    if species in run.fitted_initial:
        return run.fitted_initial[species].value
    return 0.0


def _window_rate(times, extent, sigma, capacity, degree):
    """Initial rate dξ/dt at t = 0 and its standard error from one window.

    With the capacity ξ_max of the limiting reactant known, the polynomial is
    fitted to ln(1 − ξ/ξ_max), the log of the fraction of that reactant left:
    exactly linear for a rate first order in it, and much less curved than ξ
    itself for orders up to about 2, so the slope at t = 0 is less biased by
    a window that reaches well into the reaction. Then
    dξ/dt(0) = −ξ_max exp(c_0) c_1 (standard error by the delta method).
    Otherwise the polynomial is fitted to ξ itself.
    """
    if capacity:
        left = 1.0 - extent / capacity
        if np.all(left > 0):
            weights = None if sigma is None else sigma / (capacity * left)
            coef, cov = polynomial_fit(times, np.log(left), degree, weights)
            scale = -capacity * math.exp(coef[0])
            rate = scale * coef[1]
            grad = np.array([rate, scale])
            return float(rate), float(math.sqrt(max(grad @ cov[:2, :2] @ grad, 0.0)))
    return initial_slope(times, extent, degree, sigma)


def run_initial_rate(run, stoichiometry, sigma_of=None, max_conversion=DEFAULT_MAX_CONVERSION,
                     degree=DEFAULT_DEGREE, held_constant=()):
    """Initial rate of one run from its measured traces.

    Parameters
    ----------
    run : Run
    stoichiometry : mapping of str to float
        Net stoichiometric number ν of each species in the reaction
        (negative for reactants).
    sigma_of : callable, optional
        ``sigma_of(trace) -> ndarray [n]`` or ``None`` (declared noise).
    max_conversion : float
        Window: leading points up to this conversion of the limiting reactant.
    degree : int
    held_constant : sequence of str
        Species whose traces say nothing about the rate.

    Returns
    -------
    InitialRate
    """
    conc0 = {s: float(v) for s, v in run.initial.items()}
    reactants = {s: -nu for s, nu in stoichiometry.items() if nu < 0 and s not in held_constant}
    starts = {s: _known_initial(run, s) for s in reactants}
    empty = [s for s, c in starts.items() if c <= 0]
    if empty:
        return InitialRate(run.name, None, None, conc0,
                           note=f"starts without {', '.join(empty)}, so the reaction cannot run")
    capacity = min((c / reactants[s] for s, c in starts.items()), default=None)

    slopes, skipped = [], []
    for trace in run.traces:
        nu = stoichiometry.get(trace.species, 0.0)
        if nu == 0 or trace.species in held_constant:
            continue
        sigma = sigma_of(trace) if sigma_of else None
        extent = (trace.values - _known_initial(run, trace.species)) / nu
        if capacity:
            conversion = extent / capacity
        else:
            change = extent[-1] - extent[0]
            conversion = (extent - extent[0]) / change if change else np.zeros_like(extent)
        within = conversion <= max_conversion
        lead = int(np.argmin(within)) if not within.all() else within.size
        deg = degree if trace.times.size >= degree + 2 else 1
        if trace.times.size < deg + 2:
            skipped.append(f"{trace.species} has only {trace.times.size} points")
            continue
        n = min(max(lead, deg + 2), trace.times.size)
        rate, se = _window_rate(trace.times[:n], extent[:n], None if sigma is None else
                                sigma[:n] / abs(nu), capacity, deg)
        reached = float(np.max(conversion[:n])) if capacity else None
        slopes.append(TraceSlope(trace.species, rate, se, n, float(trace.times[n - 1]),
                                 reached, deg))
    if not slopes:
        why = "; ".join(skipped) or "no measured species takes part in the reaction"
        return InitialRate(run.name, None, None, conc0, note=why)

    rates = np.array([s.rate for s in slopes])
    errors = np.array([s.stderr for s in slopes])
    if np.all(errors > 0) and np.all(np.isfinite(errors)):
        w = 1.0 / errors ** 2
        rate, se = float(np.sum(w * rates) / np.sum(w)), float(1.0 / math.sqrt(np.sum(w)))
    else:
        rate, se = float(np.mean(rates)), None
    note = ("the run declares a time offset; its initial rate refers to the data clock's "
            "t = 0" if run.time_offset is not None else "")
    reached = [s.conversion for s in slopes if s.conversion is not None]
    return InitialRate(run.name, rate, se, conc0, tuple(slopes), note,
                       max(reached) if reached else None)


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
    beta, cov, factor = _least_squares(design, log_rate, weights,
                                       scale="residual" if weights is None else "at least one")
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
    sigma_of = experiment.sigma if experiment.noise is not None else None
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
    beta, cov, _ = _least_squares(np.ones((ln_k.size, 1)), ln_k, weights,
                                  scale="at least one" if weighted else "residual")
    k = math.exp(float(beta[0]))
    return k, (k * math.sqrt(float(cov[0, 0])) if cov is not None else None)
