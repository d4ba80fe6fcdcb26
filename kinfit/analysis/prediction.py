"""Predictions from a fit, with propagated uncertainty and extrapolation flags.

A fit knows the conditions it was measured in: the range of run
temperatures and of each species' starting concentration. A prediction at
other starting concentrations or at another temperature (simulate, and
planning tools built on it) carries:

* the concentrations at the fitted values;
* a band from parameter draws: the fit's covariance (rate constants drawn
  on a log scale, as they were fitted) or, where available, samples of the
  posterior;
* k at the prediction's temperature with its uncertainty;
* a flag for every condition outside the fitted range. Kinetics
  extrapolated beyond the measured conditions must not be trusted for
  scale-up or thermal safety (see ``CAUTIONS`` in :mod:`kinfit.core.formatting`).

All draws are integrated in one call to :meth:`Problem.simulate`, through a
one-run problem at the prediction's conditions (with the fit's T_ref, so
that k_ref and the energies mean what they meant in the fit). The flags come
from the basis's :class:`~kinfit.inputs.fit_basis.FittedRange` (run
temperatures and each species' starting concentrations).

:func:`basis_from_fit` gathers what a prediction needs from a fit, a
:class:`~kinfit.inputs.fit_basis.PredictionBasis`; its file form, written with a
fit and read back by ``kinfit simulate --fit``, lives in
:mod:`kinfit.inputs.fit_basis`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from kinfit.analysis.activation import RateAt, interval_quantile
from kinfit.core.defaults import DEFAULT_DRAWS
from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import Experiment, Run, Trace, initial_name
from kinfit.inputs.fit_basis import FittedRange, PredictionBasis
from kinfit.inputs.parameters import Role
from kinfit.numerics.problem import build_problem
from kinfit.numerics.temperature_laws import ln_rate_form, reference_temperature

if TYPE_CHECKING:
    from kinfit.core.units import Units

__all__ = ["fitted_range", "extrapolation_flags", "basis_from_fit", "Prediction", "predict"]

_TOL = 1e-9


def fitted_range(result):
    """The :class:`~kinfit.inputs.fit_basis.FittedRange` of a fit's runs."""
    exp, mech = result.experiment, result.mechanism
    temps = [r.temperature for r in exp.runs if r.temperature is not None]
    initial = {}
    for species in mech.species:
        values = []
        for run in exp.runs:
            if species in run.fitted_initial:
                values.append(result.values[initial_name(species, run.name)])
            else:
                values.append(run.initial.get(species, 0.0))
        initial[species] = (float(min(values)), float(max(values)))
    return FittedRange(temperature=(float(min(temps)), float(max(temps))) if temps else None,
                       initial=initial)


def _celsius(kelvin):
    from scipy.constants import convert_temperature

    return float(convert_temperature(kelvin, "K", "C"))


def extrapolation_flags(fitted, initial, temperature=None, concentration_unit=""):
    """Messages for every prediction condition outside the fitted range.

    Parameters
    ----------
    fitted : FittedRange
    initial : mapping of str to float
        The prediction's starting concentrations (species not given: zero).
    temperature : float, optional
        Kelvin.
    concentration_unit : str
        For the messages.

    Returns
    -------
    tuple of str
        Empty when every condition is inside the range.
    """
    flags = []
    if temperature is not None and fitted.temperature is not None:
        lo, hi = fitted.temperature
        if not lo * (1 - _TOL) <= temperature <= hi * (1 + _TOL):
            flags.append(f"temperature {temperature:.2f} K ({_celsius(temperature):.1f} °C) is "
                         f"outside the fitted range {lo:.2f}–{hi:.2f} K "
                         f"({_celsius(lo):.1f}–{_celsius(hi):.1f} °C)")
    for species, (lo, hi) in fitted.initial.items():
        value = float(initial.get(species, 0.0))
        if not lo - _TOL * abs(lo) <= value <= hi + _TOL * abs(hi):
            flags.append(f"starting [{species}] = {value:g} {concentration_unit} is outside "
                         f"the fitted range {lo:g}–{hi:g} {concentration_unit}".replace("  ", " "))
    return tuple(flags)


def basis_from_fit(result):
    """The :class:`~kinfit.inputs.fit_basis.PredictionBasis` of a fit (model parameters only)."""
    mech = result.mechanism
    names = [n for n in result.free_names if n in mech.parameters]
    cov = None
    if result.covariance is not None:
        idx = [result.free_names.index(n) for n in names]
        cov = result.covariance[np.ix_(idx, idx)]
    reference = None
    if mech.temperature is not None:
        temps = [r.temperature for r in result.experiment.runs]
        reference = reference_temperature(mech.temperature, temps)
    return PredictionBasis(mechanism=mech,
                           values={n: result.values[n] for n in mech.parameters},
                           free_names=tuple(names), covariance=cov, reference=reference,
                           fitted=fitted_range(result), units=result.experiment.units,
                           source=str(result.experiment.source))


@dataclass(frozen=True)
class Prediction:
    """Predicted concentrations with an uncertainty band and flags.

    Attributes
    ----------
    times : ndarray [n_times]
    species : tuple of str
    conc : ndarray [n_times, n_species]
        At the fitted values.
    lower, upper : ndarray [n_times, n_species] or None
        Equal-tailed band at `level` over the draws.
    temperature : float or None
        Kelvin.
    initial : dict of str to float
    rates : tuple of (str, RateAt)
        Each temperature-dependent rate constant at `temperature`.
    uncertainty : {"covariance", "samples", "none"}
    draws, failed : int
        Parameter sets drawn, and those that could not be integrated.
    level : float
    flags : tuple of str
        Conditions outside the fitted range.
    units : Units
    fitted_temperature : (float, float) or None
        The fit's temperature range, kelvin.
    range_known : bool
        False when the basis carries no fitted range (a prediction from a
        model file alone), so extrapolation could not be checked.
    """

    times: np.ndarray
    species: tuple[str, ...]
    conc: np.ndarray
    lower: np.ndarray | None
    upper: np.ndarray | None
    temperature: float | None
    initial: dict[str, float]
    rates: tuple[tuple[str, RateAt], ...]
    uncertainty: str
    draws: int
    failed: int
    level: float
    flags: tuple[str, ...]
    units: Units
    fitted_temperature: tuple[float, float] | None = None
    range_known: bool = True

    @property
    def extrapolated(self):
        return bool(self.flags)

    def to_dict(self):
        return {
            "temperature_K": self.temperature, "initial": dict(self.initial),
            "units": {"time": self.units.time, "concentration": self.units.concentration},
            "extrapolated": self.extrapolated, "flags": list(self.flags),
            "range_checked": self.range_known,
            "fitted_temperature_range_K": None if self.fitted_temperature is None else
            list(self.fitted_temperature),
            "uncertainty": self.uncertainty, "level": self.level, "draws": self.draws,
            "failed_draws": self.failed,
            "rate_constants": {name: rate.to_dict() for name, rate in self.rates},
            "final": {s: {"value": float(self.conc[-1, i]),
                          "lower": None if self.lower is None else float(self.lower[-1, i]),
                          "upper": None if self.upper is None else float(self.upper[-1, i])}
                      for i, s in enumerate(self.species)},
        }


def _problem(basis, initial, temperature, times):
    """A one-run problem at the prediction's conditions."""
    mech = basis.mechanism
    unknown = [s for s in initial if s not in mech.species]
    if unknown:
        raise KinfitError(f"the model '{mech.name}' has no species {unknown[0]!r}; its "
                          f"species are {', '.join(mech.species)}")
    for s, v in initial.items():
        if not math.isfinite(v) or v < 0:
            raise KinfitError(f"starting [{s}] must be a non-negative number, got {v!r}")
    if mech.temperature is None:
        if temperature is not None:
            raise KinfitError(f"{mech.source}: the model's rate constants do not depend on "
                              f"temperature, so a temperature cannot be applied; add a "
                              f"[temperature] table to the model")
    else:
        if temperature is None:
            raise KinfitError(f"{mech.source}: the model's rate constants depend on "
                              f"temperature; give the temperature to predict at")
        if not math.isfinite(temperature) or temperature <= 0:
            raise KinfitError(f"the temperature must be above absolute zero, got "
                              f"{temperature!r} K")
        reference = basis.reference if basis.reference is not None else \
            mech.temperature.reference
        if reference is None:
            raise KinfitError(f"{mech.source}: the rate constants are given at a reference "
                              f"temperature, but none is known; add reference = ... to the "
                              f"model's [temperature] table or predict from a fit")
        # nothing is fitted here, so a single temperature is no obstacle
        mech = replace(mech, temperature=replace(mech.temperature, reference=reference),
                       parameters={n: replace(p, vary=False)
                                   for n, p in mech.parameters.items()})
    times = np.asarray(times, dtype=float)
    if times.ndim != 1 or times.size < 2 or not np.isfinite(times).all() or \
            (times < 0).any() or (np.diff(times) <= 0).any():
        raise KinfitError("times must be an increasing list of at least two non-negative "
                          "numbers")
    trace = Trace(mech.species[0], times, np.zeros(times.size), np.arange(times.size))
    run = Run(name="prediction", traces=(trace,), initial=dict(initial),
              temperature=temperature)
    exp = Experiment(name="prediction", runs=(run,), units=basis.units, source="prediction")
    return build_problem(mech, exp)


def _draws(basis, problem, samples, names, n_draws, seed):
    """Parameter rows [n_draws, n_params] and how they were made."""
    base = problem.values_array(basis.values)[0]
    rng = np.random.default_rng(seed)
    index = {n: i for i, n in enumerate(problem.names)}
    if samples is not None:
        samples = np.atleast_2d(np.asarray(samples, dtype=float))
        names = list(names or ())
        if samples.shape[1] != len(names):
            raise KinfitError(f"samples have {samples.shape[1]} columns but {len(names)} "
                              f"names")
        pick = rng.choice(samples.shape[0], size=min(n_draws, samples.shape[0]), replace=False)
        rows = np.repeat(base[None], pick.size, axis=0)
        for j, n in enumerate(names):
            if n in index:
                rows[:, index[n]] = samples[pick, j]
        return rows, "samples"
    if basis.covariance is None or not basis.free_names or n_draws == 0:
        return np.empty((0, base.size)), "none"
    free = [index[n] for n in basis.free_names]
    roles = [problem.parameters[i].role for i in free]
    log = np.array([r == Role.RATE_CONSTANT for r in roles])
    center = np.where(log, np.log(np.maximum(base[free], 1e-300)), base[free])
    slope = np.where(log, 1.0 / np.maximum(base[free], 1e-300), 1.0)
    cov = basis.covariance * np.outer(slope, slope)
    u = rng.multivariate_normal(center, cov, size=n_draws, method="eigh")
    rows = np.repeat(base[None], n_draws, axis=0)
    rows[:, free] = np.where(log, np.exp(u), u)
    lo = np.array([problem.parameters[i].min for i in free])
    hi = np.array([problem.parameters[i].max for i in free])
    rows[:, free] = np.clip(rows[:, free], lo, hi)
    return rows, "covariance"


def _rates(basis, temperature, rows, names, level, how):
    """Each temperature-dependent k at `temperature`: delta method and draws."""
    spec = basis.mechanism.temperature
    if spec is None or temperature is None:
        return ()
    q = interval_quantile(level, None)
    free = list(basis.free_names)
    out = []
    lo, hi = basis.fitted.temperature or (temperature, temperature)
    outside = not lo * (1 - _TOL) <= temperature <= hi * (1 + _TOL)
    for law in spec.laws:
        form = ln_rate_form(law.law, basis.reference, temperature)
        k_ref, energy = basis.values[law.constant], basis.values[law.energy]
        ln_k = float(form.value(math.log(k_ref), energy))
        se = interval = None
        if basis.covariance is not None:
            g = np.zeros(len(free))
            if law.constant in free:
                g[free.index(law.constant)] = form.c_lnk / k_ref
            if law.energy in free:
                g[free.index(law.energy)] = form.c_energy
            se = math.sqrt(max(float(g @ basis.covariance @ g), 0.0))
            interval = (math.exp(ln_k - q * se), math.exp(ln_k + q * se))
        posterior = None
        if how == "samples" and rows.shape[0]:
            draws = np.exp(form.value(np.log(rows[:, names.index(law.constant)]),
                                      rows[:, names.index(law.energy)]))
            tail = 50.0 * (1.0 - level)
            posterior = tuple(float(v) for v in np.percentile(draws, [tail, 100.0 - tail]))
        value = math.exp(ln_k)
        out.append((law.constant, RateAt(float(temperature), value,
                                         None if se is None else value * se, interval,
                                         outside, posterior)))
    return tuple(out)


def predict(basis, initial, times, temperature=None, samples=None, names=None,
            draws=DEFAULT_DRAWS, seed=0, level=0.95):
    """Predict concentrations at new conditions, with uncertainty and flags.

    Parameters
    ----------
    basis : PredictionBasis
        From :func:`basis_from_fit` or :func:`kinfit.inputs.fit_basis.load_basis`.
    initial : mapping of str to float
        Starting concentrations (experiment's units); species not given
        start at zero.
    times : array_like [n_times]
        Increasing, non-negative times.
    temperature : float, optional
        Kelvin; required when the model's rate constants depend on it.
    samples : ndarray [n_samples, n_names], optional
        Posterior (or other) draws of the parameters, natural scale; used
        instead of the covariance when given.
    names : sequence of str, optional
        Parameter of each column of `samples`.
    draws : int
        Number of parameter sets for the band (0: no band).
    seed : int
        Seed of the draws.
    level : float
        Coverage of the band and intervals.

    Returns
    -------
    Prediction
    """
    if not 0 < level < 1:
        raise KinfitError(f"level must be between 0 and 1, got {level!r}")
    if not isinstance(draws, int) or draws < 0:
        raise KinfitError(f"draws must be a whole number of at least 0, got {draws!r}")
    initial = {str(s): float(v) for s, v in initial.items()}
    problem = _problem(basis, initial, temperature, times)
    rows, how = _draws(basis, problem, samples, names, draws, seed)
    base = problem.values_array(basis.values)
    conc, ok, info = problem.simulate(np.vstack([base, rows]))
    if not ok[0]:
        raise KinfitError(f"the rate equations could not be integrated at the fitted values "
                          f"for these conditions: {info.message}")
    conc = conc[0]
    lower = upper = None
    good = ok[1:]
    if rows.shape[0] and good.any():
        tail = 50.0 * (1.0 - level)
        lower, upper = np.percentile(conc[1:][good], [tail, 100.0 - tail], axis=0)
    flags = extrapolation_flags(basis.fitted, initial, temperature, basis.units.concentration)
    rates = _rates(basis, temperature, rows, list(problem.names), level, how)
    return Prediction(times=np.asarray(times, dtype=float), species=basis.mechanism.species,
                      conc=conc[0], lower=lower, upper=upper, temperature=temperature,
                      initial=initial, rates=rates, uncertainty=how, draws=int(rows.shape[0]),
                      failed=int((~good).sum()), level=level, flags=flags, units=basis.units,
                      fitted_temperature=basis.fitted.temperature,
                      range_known=bool(basis.fitted.initial))
