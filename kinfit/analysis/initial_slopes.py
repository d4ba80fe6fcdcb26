"""Each run's initial rate: the slope at t = 0 of a polynomial fitted over an early window.

The first step of the initial-rates method (:mod:`kinfit.analysis.initial_rates`),
done as a chemist would by hand with tangents at t = 0, on the same data the
global fit uses.

For every measured species X that the reaction uses or forms (stoichiometric
number ν_X ≠ 0), the extent of reaction ξ = ([X] − [X]0)/ν_X is computed over
the first part of the trace: the leading points up to a conversion of the
limiting reactant of `max_conversion` (20 % by default, common practice for
initial rates), extended to at least degree + 2 points so that the slope has a
standard error. A polynomial of low degree (2 by default) is fitted by least
squares to ln(1 − ξ/ξ_max), the log of the fraction of the limiting reactant
left, and its slope at t = 0 gives the initial rate of reaction r0 = dξ/dt
(IUPAC rate of reaction). The log makes a first-order decay a straight line
and takes most of the curvature out of orders up to about 2, and the
quadratic term absorbs what is left, so the estimate is far less biased than
a straight tangent when the early points are sparse (Taylor expansion; common
practice). Standard errors use the declared noise when there is one, and the
scatter about the polynomial otherwise. Several measured species of one run
are combined by inverse-variance weighting.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.core.defaults import DEFAULT_MAX_CONVERSION
from kinfit.core.errors import KinfitError

__all__ = ["TraceSlope", "InitialRate", "linear_least_squares", "polynomial_fit",
           "initial_slope", "run_initial_rate", "DEFAULT_DEGREE"]

DEFAULT_DEGREE = 2


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
    conc0: dict[str, float]
    traces: tuple[TraceSlope, ...] = ()
    note: str = ""
    conversion: float | None = None


# ------------------------------------------------------------ least squares

def linear_least_squares(design, y, weights=None, scale="residual"):
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
    beta, cov, _ = linear_least_squares(design, y, weights,
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
