"""The two-stage analysis: k at each temperature, then straight lines.

The classic way to temperature dependence, kept beside the global fit (see
:mod:`kinfit.analysis.activation`) for comparison: the model is fitted separately to
the runs of each temperature, giving k(T) with a standard error, and then

* ln k is fitted against 1/T (Arrhenius): slope -Ea/R, intercept ln A;
* ln(k/T) against 1/T (Eyring), with k in (mol/L)^(1-n) s^-1:
  slope -ΔH‡/R, intercept ln(κ k_B/h) + ΔS‡/R;

by weighted least squares with weights 1/se(ln k)², se(ln k) = se(k)/k.
The lines' uncertainties come from the per-temperature standard errors,
enlarged by χ²/(n - 2) when the points scatter more than those errors allow
(then with Student's t and n - 2 degrees of freedom, n temperatures); they
are never shrunk below what the per-temperature errors give, which four
points could otherwise easily do by chance (:meth:`LineFit.uncertainty`).
:class:`LineFit` also keeps the scatter-scaled covariance, which is what
scipy's ``linregress`` and statsmodels' WLS report (tested against both).
Why the orders are the global fit's by default (``orders="global"``): if
an order changed with temperature, k would carry different units at
different temperatures and its temperature dependence would not be one
Arrhenius quantity. Fitting each temperature with its own orders
(``orders="free"``, the classic two-stage method) regresses ln k across rate
constants whose units differ wherever the fitted orders differ, and it
ignores that the runs share their orders, so its intervals are wider and its
Ea can move far from the global fit's. With free orders the analysis therefore states the unit of
k at each temperature when they differ (a note of each rate constant), and
:func:`order_differences` reports any order that differs from the shared one
by more than 3 combined standard errors.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from kinfit.analysis.activation import (
    UNITS,
    Estimate,
    find_estimate,
    interval_quantile,
    run_temperatures,
    si_factor,
)
from kinfit.core.defaults import DEFAULT_TWO_STAGE
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.parameters import Role
from kinfit.inputs.temperature import ENERGY_UNIT, K_B, KILO, STANDARD_TEMPERATURE, H, R
from kinfit.numerics.temperature_laws import rate_constant, reference_temperature

__all__ = ["LineFit", "weighted_line", "TemperatureGroup", "TwoStageLaw", "TwoStage",
           "two_stage", "order_differences", "ORDERS"]

ORDERS = ("free", "global")


# -------------------------------------------------------- straight lines

@dataclass(frozen=True)
class LineFit:
    """Weighted least-squares straight line y = intercept + slope x.

    Attributes
    ----------
    slope, intercept : float
    slope_stderr, intercept_stderr : float or None
        Scaled by the scatter about the line, s² = Σ w r² / (n - 2), as
        statsmodels' WLS and scipy's linregress do; None when n = 2.
    covariance : ndarray [2, 2] or None
        Of (slope, intercept), scaled likewise.
    covariance_weights : ndarray [2, 2]
        Of (slope, intercept) from the weights alone, (Xᵀ W X)⁻¹: the
        uncertainty if the given σ are exact.
    n, dof : int
    chi2 : float
        Σ w r² (weights 1 when no σ was given).
    rvalue : float
        (Weighted) correlation coefficient.
    weighted : bool
    """

    slope: float
    intercept: float
    slope_stderr: float | None
    intercept_stderr: float | None
    covariance: np.ndarray | None
    covariance_weights: np.ndarray
    n: int
    dof: int
    chi2: float
    rvalue: float
    weighted: bool

    @property
    def reduced_chi2(self):
        return self.chi2 / self.dof if self.dof > 0 else math.nan

    def uncertainty(self, level=0.95):
        """Covariance of (slope, intercept) and the two-stage analysis's interval quantile.

        The weights' covariance (Xᵀ W X)⁻¹ is enlarged by χ²/(n - 2) when the
        points scatter more than their σ allow, never shrunk (the scale factor
        of weighted averages, common practice); the quantile is then
        Student's t with n - 2 degrees of freedom, else the normal one.

        Returns
        -------
        covariance : ndarray [2, 2]
        q : float
        """
        if self.dof > 0 and self.reduced_chi2 > 1.0:
            return self.covariance_weights * self.reduced_chi2, interval_quantile(level, self.dof)
        return self.covariance_weights, interval_quantile(level, None)

    def to_dict(self):
        return {"slope": self.slope, "intercept": self.intercept,
                "slope_stderr": self.slope_stderr, "intercept_stderr": self.intercept_stderr,
                "n_points": self.n, "reduced_chisqr": self.reduced_chi2,
                "rvalue": self.rvalue, "weighted": self.weighted}


def weighted_line(x, y, sigma=None):
    """Fit a straight line by (weighted) least squares.

    Parameters
    ----------
    x, y : array_like [n]
    sigma : array_like [n], optional
        Standard deviation of each y; weights 1/σ². Without it every point
        has weight 1 (ordinary least squares).

    Returns
    -------
    LineFit

    Raises
    ------
    KinfitError
        For fewer than two points, x all equal, or a non-positive σ.
    """
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    n = x.size
    if n < 2 or y.size != n:
        raise KinfitError(f"a straight line needs at least two points (got {n})")
    if np.ptp(x) == 0:
        raise KinfitError("a straight line needs points at different x (temperatures)")
    weighted = sigma is not None
    if sigma is not None:
        sigma = np.asarray(sigma, dtype=float)
        if sigma.shape != (n,) or not np.all(np.isfinite(sigma)) or np.any(sigma <= 0):
            raise KinfitError("every point of the line needs a positive, finite uncertainty")
    w = np.ones(n) if sigma is None else 1.0 / sigma ** 2
    design = np.column_stack([x, np.ones(n)])
    normal = design.T @ (w[:, None] * design)
    cov_w = np.linalg.inv(normal)
    slope, intercept = cov_w @ (design.T @ (w * y))
    res = y - (intercept + slope * x)
    chi2 = float(np.sum(w * res ** 2))
    dof = n - 2
    cov = cov_w * (chi2 / dof) if dof > 0 else None
    xm, ym = np.average(x, weights=w), np.average(y, weights=w)
    sxy = np.sum(w * (x - xm) * (y - ym))
    syy = np.sum(w * (y - ym) ** 2)
    r = float(sxy / math.sqrt(np.sum(w * (x - xm) ** 2) * syy)) if syy > 0 else 1.0
    return LineFit(
        slope=float(slope), intercept=float(intercept),
        slope_stderr=None if cov is None else math.sqrt(cov[0, 0]),
        intercept_stderr=None if cov is None else math.sqrt(cov[1, 1]),
        covariance=cov, covariance_weights=cov_w, n=n, dof=dof, chi2=chi2, rvalue=r,
        weighted=weighted)


# --------------------------------------------------------- two-stage

@dataclass(frozen=True)
class TemperatureGroup:
    """Stage one at one temperature.

    Attributes
    ----------
    temperature : float
        Kelvin.
    runs : tuple of str
    values, stderr : dict of str to float (or None)
        The group's fitted rate constants and orders.
    success : bool
    warnings : tuple of str
    units : dict of str to str or None
        Unit of each rate constant at this temperature, from the group's
        own overall order (with free orders it differs between groups
        whose orders differ).
    """

    temperature: float
    runs: tuple[str, ...]
    values: dict[str, float]
    stderr: dict[str, float | None]
    success: bool
    warnings: tuple[str, ...] = ()
    units: dict[str, str | None] = field(default_factory=dict)


@dataclass(frozen=True)
class TwoStageLaw:
    """Stage two for one rate constant: the Arrhenius and Eyring lines.

    Attributes
    ----------
    constant : str
    temperatures : ndarray [n]
        Kelvin, of the groups used.
    k, k_stderr : ndarray [n]
        Stage-one rate constants (experiment's units).
    arrhenius : LineFit
        ln k against 1/T, weights 1/se(ln k)².
    eyring : LineFit or None
        ln(k/T) against 1/T, with k in (mol/L)^(1-n) s^-1 (None when the
        units cannot be converted).
    estimates : tuple of Estimate
        Ea, A, ΔH‡, ΔS‡, ΔG‡(298.15 K) from the lines.
    notes : tuple of str
    """

    constant: str
    temperatures: np.ndarray
    k: np.ndarray
    k_stderr: np.ndarray
    arrhenius: LineFit
    eyring: LineFit | None
    estimates: tuple[Estimate, ...]
    notes: tuple[str, ...] = ()

    def estimate(self, name):
        """The :class:`~kinfit.analysis.activation.Estimate` called `name`, or None."""
        return find_estimate(self.estimates, name)

    def to_dict(self):
        return {
            "rate_constant": self.constant,
            "points": [{"temperature_K": float(t), "k": float(k), "stderr": float(s)}
                       for t, k, s in zip(self.temperatures, self.k, self.k_stderr)],
            "arrhenius_line": self.arrhenius.to_dict(),
            "eyring_line": None if self.eyring is None else self.eyring.to_dict(),
            "estimates": {e.name: {"label": e.label, **e.to_dict()} for e in self.estimates},
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class TwoStage:
    """The two-stage analysis: per-temperature fits, then straight lines.

    Attributes
    ----------
    orders : {"free", "global"}
        Whether stage one fitted the orders at each temperature or fixed
        them at the global fit's values.
    groups : tuple of TemperatureGroup
    laws : tuple of TwoStageLaw
        One per temperature-dependent rate constant.
    level : float
    order_warnings : tuple of str
        Orders fitted at one temperature that disagree with the global fit's
        (see :func:`order_differences`); empty without a global fit.
    """

    orders: str
    groups: tuple[TemperatureGroup, ...]
    laws: tuple[TwoStageLaw, ...]
    level: float
    order_warnings: tuple[str, ...] = ()

    def law(self, constant):
        for law in self.laws:
            if law.constant == constant:
                return law
        raise KinfitError(f"no two-stage result for {constant!r}")

    def to_dict(self):
        return {
            "orders": self.orders, "level": self.level,
            "groups": [{"temperature_K": g.temperature, "runs": list(g.runs),
                        "values": g.values, "stderr": g.stderr, "units": g.units,
                        "success": g.success, "warnings": list(g.warnings)}
                       for g in self.groups],
            "rate_constants": [law.to_dict() for law in self.laws],
        }


def _stage_mechanism(mech, result, orders):
    """The model without its temperature law, energies fixed, orders as asked."""
    params = {}
    for name, p in mech.parameters.items():
        if name in mech.temperature.energy_roles:
            p = replace(p, vary=False)
        elif orders == "global" and p.role == Role.ORDER and result is not None:
            p = replace(p, value=result.values[name], vary=False)
        elif result is not None and name in result.values and p.role == Role.ORDER:
            p = replace(p, value=result.values[name])
        params[name] = p
    return replace(mech, parameters=params, temperature=None)


def two_stage(experiment, mechanism, result=None, orders=DEFAULT_TWO_STAGE, starts=4, seed=0,
              level=0.95):
    """Fit k at each temperature, then Arrhenius and Eyring straight lines.

    Parameters
    ----------
    experiment : Experiment
        Runs at two or more temperatures.
    mechanism : Mechanism
        With a ``[temperature]`` table.
    result : FitResult, optional
        The global fit: its k(T) start each group's fit, and its orders are
        used when `orders` is "global" (fitted here, with `starts` and
        `seed`, when not given then).
    orders : {"global", "free"}
        "global" (the default, :data:`~kinfit.core.defaults.DEFAULT_TWO_STAGE`):
        orders fixed at the global fit's values, so only rate constants (and
        any per-run parameters) are fitted at each temperature and every k
        has the same unit. "free": each temperature's runs get their own
        orders (shared by the runs of that temperature) -- the classic
        two-stage method, and a check on whether the orders really stay the
        same; k then has a different unit at each temperature where the
        orders differ, which the notes state.
    starts, seed : int
        Passed to :func:`kinfit.estimation.least_squares.fit` for each group.
    level : float
        Coverage of the intervals (see :meth:`LineFit.uncertainty`).

    Returns
    -------
    TwoStage
    """
    if orders not in ORDERS:
        raise KinfitError(f"two-stage orders must be one of {', '.join(ORDERS)}, "
                          f"got {orders!r}")
    spec = mechanism.temperature
    if spec is None:
        raise KinfitError(f"{mechanism.source}: the model declares no temperature dependence")
    temps = run_temperatures(experiment)
    if temps.size < 2:
        raise KinfitError(f"{experiment.source}: the two-stage analysis needs runs at two or "
                          f"more temperatures (four or more is common practice)")
    if orders == "global" and result is None:
        result = fit(experiment, mechanism, starts=starts, seed=seed)
    stage_mech = _stage_mechanism(mechanism, result, orders)
    groups = []
    for t in temps:
        runs = tuple(r for r in experiment.runs if abs(r.temperature - t) < 1e-6)
        sub = replace(experiment, runs=runs)
        start = dict(stage_mech.parameters)
        if result is not None:
            ref = reference_temperature(spec, temps)
            for law in spec.laws:
                k_t = float(rate_constant(result.values[law.constant],
                                          result.values[law.energy], t, ref, law.law))
                p = start[law.constant]
                start[law.constant] = replace(p, value=float(np.clip(k_t, max(p.min, 1e-300),
                                                                     p.max)))
        group_mech = replace(stage_mech, parameters=start)
        try:
            fitted = fit(sub, group_mech, starts=starts, seed=seed)
        except KinfitError as exc:
            raise KinfitError(f"two-stage analysis at {t:.2f} K: {exc}") from None
        keep = [n for n in mechanism.parameters if n not in spec.energy_roles]
        groups.append(TemperatureGroup(
            temperature=float(t), runs=tuple(r.name for r in runs),
            values={n: fitted.values[n] for n in keep},
            stderr={n: fitted.stderr.get(n) for n in keep},
            success=fitted.success, warnings=fitted.warnings,
            units={law.constant: fitted.units.get(law.constant) for law in spec.laws}))
    laws = tuple(_stage_two(groups, law, spec.kappa, experiment, mechanism, result, level)
                 for law in spec.laws)
    analysis = TwoStage(orders=orders, groups=tuple(groups), laws=laws, level=level)
    if result is None:
        return analysis
    return replace(analysis, order_warnings=tuple(order_differences(analysis, result)))


def _stage_two(groups, law, kappa, experiment, mechanism, result, level):
    notes = []
    used = [g for g in groups if g.stderr.get(law.constant)]
    skipped = [g for g in groups if g not in used]
    if skipped:
        notes.append(f"no standard error for {law.constant} at "
                     f"{', '.join(f'{g.temperature:.2f} K' for g in skipped)}; left out of "
                     f"the lines")
    if len(used) < 2:
        raise KinfitError(f"the two-stage analysis got a usable {law.constant} at fewer than "
                          f"two temperatures; see the warnings of the per-temperature fits")
    units = {g.units.get(law.constant) for g in used}
    if len(units) > 1:
        notes.append(f"the orders fitted at each temperature differ, so {law.constant} has a "
                     f"different unit at each ("
                     + ", ".join(f"{g.units.get(law.constant)} at {g.temperature:.2f} K"
                                 for g in used)
                     + f"); ln {law.constant} across them is not one Arrhenius quantity, so "
                       f"these lines mean something only where the orders agree within "
                       f"error; --two-stage global keeps the global fit's orders")
    temps = np.array([g.temperature for g in used])
    k = np.array([g.values[law.constant] for g in used])
    se = np.array([g.stderr[law.constant] for g in used])
    x, sigma = 1.0 / temps, se / k
    arrhenius = weighted_line(x, np.log(k), sigma)
    values = result.values if result is not None else mechanism.values()
    order = mechanism.overall_orders(values).get(law.constant)
    factor = si_factor(experiment.units, order)
    eyring = None if factor is None else weighted_line(x, np.log(factor * k / temps), sigma)
    if arrhenius.dof == 0:
        notes.append("two temperatures only: the lines' uncertainties come from the "
                     "per-temperature standard errors alone")
    elif arrhenius.reduced_chi2 > 1.0:
        notes.append(f"the points scatter about the Arrhenius line more than their standard "
                     f"errors allow (χ²/(n−2) = {arrhenius.reduced_chi2:.3g}); the lines' "
                     f"uncertainties are enlarged accordingly")

    def estimate(name, value, grad, line, unit):
        cov, q = line.uncertainty(level)
        se = math.sqrt(max(float(np.asarray(grad) @ cov @ np.asarray(grad)), 0.0))
        return Estimate(name, float(value), se, unit, (value - q * se, value + q * se))

    estimates = [estimate("Ea", -arrhenius.slope * R / KILO, (-R / KILO, 0.0), arrhenius,
                          ENERGY_UNIT)]
    ln_a = estimate("A", arrhenius.intercept, (0.0, 1.0), arrhenius, "")
    a = math.exp(ln_a.value)
    unit = experiment.units.rate_constant(order)
    estimates.append(Estimate("A", a, a * ln_a.stderr, unit or "",
                              (math.exp(ln_a.interval[0]), math.exp(ln_a.interval[1]))))
    if eyring is not None:
        ln_kappa = math.log(kappa * K_B / H)
        t0 = STANDARD_TEMPERATURE
        estimates.append(estimate("dH", -eyring.slope * R / KILO, (-R / KILO, 0.0), eyring,
                                  ENERGY_UNIT))
        estimates.append(estimate("dS", R * (eyring.intercept - ln_kappa), (0.0, R), eyring,
                                  UNITS["dS"]))
        estimates.append(estimate(
            "dG", (-eyring.slope * R - t0 * R * (eyring.intercept - ln_kappa)) / KILO,
            (-R / KILO, -t0 * R / KILO), eyring, ENERGY_UNIT))
    else:
        notes.append("no Eyring line: the rate constant's unit cannot be converted to "
                     "(mol/L)^(1-n) s^-1")
    return TwoStageLaw(constant=law.constant, temperatures=temps, k=k, k_stderr=se,
                       arrhenius=arrhenius, eyring=eyring, estimates=tuple(estimates),
                       notes=tuple(notes))


def order_differences(analysis, result, threshold=3.0):
    """Orders fitted at one temperature that disagree with the global fit's.

    Parameters
    ----------
    analysis : TwoStage
        With orders "free".
    result : FitResult
        The global fit (orders shared by all temperatures).
    threshold : float
        Differences beyond this many combined standard errors,
        sqrt(se_T² + se_global²), are reported (common practice: 3).

    Returns
    -------
    tuple of str
        One message per disagreeing order and temperature; empty when the
        data agree with orders shared across temperatures.
    """
    if analysis.orders != "free":
        return ()
    out = []
    for name in result.mechanism.orders:
        se_global = result.stderr.get(name)
        for group in analysis.groups:
            se = group.stderr.get(name)
            if se is None or se_global is None:
                continue
            z = (group.values[name] - result.values[name]) / math.hypot(se, se_global)
            if abs(z) > threshold:
                out.append(f"{name} = {group.values[name]:.3g} ± {se:.2g} at "
                           f"{group.temperature:.2f} K differs from the shared "
                           f"{result.values[name]:.3g} ± {se_global:.2g} by {abs(z):.1f} "
                           f"combined standard errors: the orders may change with "
                           f"temperature, and then k has different units at different "
                           f"temperatures and is not one Arrhenius quantity (neither the "
                           f"global fit nor the two-stage lines hold)")
    return tuple(out)
