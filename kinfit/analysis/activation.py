"""Activation parameters from a global fit, and the two-stage analysis beside it.

A model whose rate constants follow Arrhenius or Eyring (see
:mod:`kinfit.inputs.temperature`) is fitted to all runs at all temperatures at once;
k_ref and the energy (Ea or ΔH‡) are ordinary fitted parameters.
:func:`activation_parameters` turns them into what a chemist reports:

* Ea (kJ/mol) and A (units of k);
* ΔH‡ (kJ/mol), ΔS‡ (J mol^-1 K^-1) and ΔG‡ at 298.15 K (kJ/mol), for a
  standard state of 1 mol/L (solution kinetics, common practice);
* k at each measured temperature;

each with a standard error from the fit's covariance. All of them are linear
in (ln k_ref, E) (:class:`kinfit.numerics.temperature_laws.Linear`), so the delta method
is exact on that scale; A, a exponential of ln A, gets the usual first-order
error A·se(ln A) and an interval exp(ln A ± q se). The law that was not
fitted is reached through the textbook relations at T_ref
(Ea = ΔH‡ + RT, ln A = ln k + Ea/(RT)).

ΔS‡ and ΔG‡ need k in (mol/L)^(1-n) s^-1: :func:`si_factor` converts the
experiment's units with pint (:mod:`kinfit.core.units`), and molal or mass
concentrations give no ΔS‡ or ΔG‡. κ changes only ΔS‡.

Other intervals come from elsewhere and are attached by hooks:
:func:`with_posterior` takes samples of the fitted parameters (a posterior,
or any other draws) and maps them through the same linear forms;
:func:`with_profile` takes profile-likelihood intervals of the fitted
parameters and carries the energy's through to Ea and ΔH‡ (A, ΔS‡ and ΔG‡
combine k_ref and E and would need a profile of their own).

The two-stage analysis beside the global fit is in :mod:`kinfit.analysis.two_stage`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.core.units import conversion_factor, rate_constant_unit
from kinfit.inputs.temperature import ARRHENIUS, ENERGY_UNIT, STANDARD_TEMPERATURE
from kinfit.numerics.temperature_laws import (
    linear_forms,
    ln_rate_form,
    reference_temperature,
)

__all__ = ["Estimate", "RateAt", "Activation", "activation_parameters", "with_posterior",
           "with_profile", "find_estimate", "si_factor", "run_temperatures",
           "interval_quantile", "LABELS", "UNITS"]

LABELS = {"Ea": "Ea", "A": "A", "dH": "ΔH‡", "dS": "ΔS‡",
          "dG": f"ΔG‡({STANDARD_TEMPERATURE:.2f} K)"}
UNITS = {"Ea": ENERGY_UNIT, "dH": ENERGY_UNIT, "dS": "J/(mol K)", "dG": ENERGY_UNIT}


@dataclass(frozen=True)
class Estimate:
    """One activation parameter with its uncertainties.

    Attributes
    ----------
    name : {"Ea", "A", "dH", "dS", "dG"}
    value, stderr : float or None
    unit : str
    interval : (float, float) or None
        From the standard error at the activation's level.
    profile_interval, posterior_interval : (float, float) or None
        Attached by :func:`with_profile` and :func:`with_posterior`.
    fitted : bool
        True for the fitted energy; False for quantities derived from it.
    """

    name: str
    value: float | None
    stderr: float | None
    unit: str
    interval: tuple[float, float] | None = None
    profile_interval: tuple[float, float] | None = None
    posterior_interval: tuple[float, float] | None = None
    fitted: bool = False

    @property
    def label(self):
        return LABELS[self.name]

    def to_dict(self):
        return {"value": self.value, "stderr": self.stderr, "unit": self.unit,
                "interval": _listed(self.interval),
                "profile_interval": _listed(self.profile_interval),
                "posterior_interval": _listed(self.posterior_interval),
                "fitted": self.fitted}


@dataclass(frozen=True)
class RateAt:
    """A rate constant at one temperature.

    Attributes
    ----------
    temperature : float
        Kelvin.
    value, stderr : float
    interval : (float, float) or None
        exp(ln k ± q se(ln k)).
    extrapolated : bool
        True outside the temperature range of the fitted runs.
    posterior_interval : (float, float) or None
    """

    temperature: float
    value: float
    stderr: float | None
    interval: tuple[float, float] | None
    extrapolated: bool = False
    posterior_interval: tuple[float, float] | None = None

    def to_dict(self):
        return {"temperature_K": self.temperature, "value": self.value,
                "stderr": self.stderr, "interval": _listed(self.interval),
                "posterior_interval": _listed(self.posterior_interval),
                "extrapolated": self.extrapolated}


@dataclass(frozen=True)
class Activation:
    """Activation parameters of one temperature-dependent rate constant.

    Attributes
    ----------
    constant : str
        The rate constant (its fitted value is k at `reference`).
    law : {"arrhenius", "eyring"}
        The law fitted.
    energy : str
        Name of the fitted energy parameter.
    reference : float
        T_ref, kelvin.
    kappa : float
        Transmission coefficient used for ΔS‡ and ΔG‡.
    unit : str or None
        Unit of k (and of A).
    estimates : tuple of Estimate
        Ea, A, ΔH‡ and, where the units allow, ΔS‡ and ΔG‡.
    rates : tuple of RateAt
        k at each measured temperature.
    temperature_range : (float, float)
        Lowest and highest run temperature, kelvin.
    center : (float, float)
        Fitted (ln k_ref, E).
    covariance : ndarray [2, 2] or None
        Covariance of (ln k_ref, E) from the fit.
    si_factor : float or None
        k in (mol/L)^(1-n) s^-1 per k in the experiment's units.
    si_unit : str or None
        That unit written out, e.g. ``M^-1 s^-1``.
    level : float
        Coverage of the intervals (0.95).
    quantile : float
        q such that value ± q·stderr is the interval.
    notes : tuple of str
    """

    constant: str
    law: str
    energy: str
    reference: float
    kappa: float
    unit: str | None
    estimates: tuple[Estimate, ...]
    rates: tuple[RateAt, ...]
    temperature_range: tuple[float, float]
    center: tuple[float, float]
    covariance: np.ndarray | None
    si_factor: float | None
    si_unit: str | None
    level: float
    quantile: float
    notes: tuple[str, ...] = ()

    def estimate(self, name):
        """The :class:`Estimate` called `name` ("Ea", "A", "dH", "dS", "dG"), or None."""
        return find_estimate(self.estimates, name)

    def forms(self):
        """The :class:`~kinfit.numerics.temperature_laws.Linear` forms of the estimates."""
        return linear_forms(self.law, self.reference, self.kappa, self.si_factor)

    def rate_at(self, temperature):
        """k at `temperature` (kelvin) with its standard error and extrapolation flag."""
        form = ln_rate_form(self.law, self.reference, float(temperature))
        ln_k = float(form.value(*self.center))
        value = math.exp(ln_k)
        lo, hi = self.temperature_range
        outside = not (lo * (1 - 1e-9) <= temperature <= hi * (1 + 1e-9))
        if self.covariance is None:
            return RateAt(float(temperature), value, None, None, outside)
        se = math.sqrt(max(form.variance(self.covariance), 0.0))
        return RateAt(float(temperature), value, value * se,
                      (math.exp(ln_k - self.quantile * se), math.exp(ln_k + self.quantile * se)),
                      outside)

    def to_dict(self):
        return {
            "rate_constant": self.constant, "law": self.law, "energy_parameter": self.energy,
            "reference_temperature_K": self.reference, "kappa": self.kappa,
            "unit_of_k": self.unit, "level": self.level,
            "temperature_range_K": list(self.temperature_range),
            "standard_state": "1 mol/L",
            "estimates": {e.name: {"label": e.label, **e.to_dict()} for e in self.estimates},
            "rate_constants": [r.to_dict() for r in self.rates],
            "notes": list(self.notes),
        }


def find_estimate(estimates, name):
    """The :class:`Estimate` called `name` in `estimates`, or None."""
    return next((e for e in estimates if e.name == name), None)


def _listed(pair):
    return None if pair is None else [float(pair[0]), float(pair[1])]


# ------------------------------------------------------------ global fit

def run_temperatures(experiment):
    """Distinct run temperatures in kelvin, increasing [n_temperatures].

    Raises
    ------
    KinfitError
        If a run has no temperature.
    """
    temps = []
    for run in experiment.runs:
        if run.temperature is None:
            raise KinfitError(f"{experiment.source}, run {run.name!r}: no temperature; give "
                              f"temperature = ... for every run")
        temps.append(run.temperature)
    return np.unique(np.round(np.asarray(temps, dtype=float), 9))


def si_factor(units, overall_order):
    """k in (mol/L)^(1-n) s^-1 per k in `units`, or None if not convertible.

    Parameters
    ----------
    units : Units
        The experiment's units.
    overall_order : float or None
        n of the rate law.
    """
    if overall_order is None or not math.isfinite(overall_order):
        return None
    try:
        per_time = 1.0 / conversion_factor(units.time, "s")
        if abs(1.0 - overall_order) < 1e-12:
            return per_time
        return conversion_factor(units.concentration, "mol/L") ** (1.0 - overall_order) \
            * per_time
    except Exception:  # pint: not convertible (molal or mass concentrations)
        return None


def interval_quantile(level, dof):
    """q of a two-sided interval at `level`: normal (dof None) or Student's t."""
    from scipy import stats

    p = 0.5 + level / 2.0
    return float(stats.norm.ppf(p) if dof is None else stats.t.ppf(p, dof))


def _pair_covariance(result, constant, energy):
    """Covariance of (ln k_ref, E) from the fit's natural-scale covariance."""
    if result.covariance is None:
        return None
    names = list(result.free_names)
    scale = {constant: 1.0 / result.values[constant], energy: 1.0}
    out = np.zeros((2, 2))
    for i, a in enumerate((constant, energy)):
        for j, b in enumerate((constant, energy)):
            if a in names and b in names:
                out[i, j] = result.covariance[names.index(a), names.index(b)] * scale[a] * scale[b]
    return out


def _estimates(forms, center, covariance, quantile, fitted_name):
    out = []
    for name in ("Ea", "A", "dH", "dS", "dG"):
        form = forms.get("lnA" if name == "A" else name)
        if form is None:
            continue
        value = float(form.value(*center))
        se = None if covariance is None else math.sqrt(max(form.variance(covariance), 0.0))
        interval = None if se is None else (value - quantile * se, value + quantile * se)
        if name == "A":
            a = math.exp(value)
            out.append(Estimate("A", a, None if se is None else a * se, "",
                                None if se is None else (math.exp(interval[0]),
                                                         math.exp(interval[1]))))
        else:
            out.append(Estimate(name, value, se, UNITS[name], interval,
                                fitted=name == fitted_name))
    return out


def activation_parameters(result, level=0.95):
    """Activation parameters of every temperature-dependent rate constant of a fit.

    Parameters
    ----------
    result : FitResult
        A global fit of a model with a ``[temperature]`` table.
    level : float
        Coverage of the intervals; value ± q·se with q from the normal
        distribution (declared noise) or Student's t with N - p degrees of
        freedom (noise estimated).

    Returns
    -------
    tuple of Activation
        One per temperature-dependent rate constant, in the model's order.

    Raises
    ------
    KinfitError
        If the model has no temperature dependence.
    """
    mech, exp = result.mechanism, result.experiment
    spec = mech.temperature
    if spec is None:
        raise KinfitError(f"{mech.source}: the model declares no temperature dependence; add "
                          f"a [temperature] table, like arrhenius = {{ k = \"Ea\" }}")
    if not 0 < level < 1:
        raise KinfitError(f"level must be between 0 and 1, got {level!r}")
    temps = run_temperatures(exp)
    reference = reference_temperature(spec, temps)
    quantile = interval_quantile(level, None if result.noise_declared else
                         max(result.n_points - result.n_free, 1))
    out = []
    for law in spec.laws:
        order = result.overall_orders.get(law.constant)
        factor = si_factor(exp.units, order)
        notes = []
        if factor is None:
            notes.append(f"ΔS‡ and ΔG‡ need k in (mol/L)^(1-n) s^-1; {law.constant} is in "
                         f"{result.units.get(law.constant)}, which cannot be converted, so "
                         f"they are not given")
        if law.law == ARRHENIUS:
            notes.append("ΔH‡, ΔS‡ and ΔG‡ come from the Arrhenius fit through Ea = ΔH‡ + RT "
                         "at T_ref")
        else:
            notes.append("Ea and A come from the Eyring fit through Ea = ΔH‡ + RT at T_ref")
        covariance = _pair_covariance(result, law.constant, law.energy)
        if covariance is None:
            notes.append("the fit gave no covariance, so no standard errors")
        center = (math.log(result.values[law.constant]), result.values[law.energy])
        forms = linear_forms(law.law, reference, spec.kappa, factor)
        activation = Activation(
            constant=law.constant, law=law.law, energy=law.energy, reference=reference,
            kappa=spec.kappa, unit=result.units.get(law.constant), estimates=(),
            rates=(), temperature_range=(float(temps[0]), float(temps[-1])), center=center,
            covariance=covariance, si_factor=factor,
            si_unit=None if factor is None else rate_constant_unit("M", "s", order),
            level=level, quantile=quantile,
            notes=tuple(notes))
        estimates = _estimates(forms, center, covariance, quantile,
                               "Ea" if law.law == ARRHENIUS else "dH")
        estimates = [replace(e, unit=activation.unit or "") if e.name == "A" else e
                     for e in estimates]
        rates = tuple(activation.rate_at(t) for t in temps)
        out.append(replace(activation, estimates=tuple(estimates), rates=rates))
    return tuple(out)


def with_posterior(activations, samples, names, level=None):
    """Attach equal-tailed intervals computed from parameter samples.

    Parameters
    ----------
    activations : sequence of Activation
    samples : ndarray [n_samples, n_names]
        Draws of the fitted parameters on their natural scale (rate
        constants as k, not log k), e.g. a posterior chain after burn-in.
    names : sequence of str
        The parameter of each column; parameters not listed keep their
        fitted value.
    level : float, optional
        Coverage (default: each activation's level).

    Returns
    -------
    tuple of Activation
        With ``posterior_interval`` filled for every estimate and rate.
    """
    samples = np.atleast_2d(np.asarray(samples, dtype=float))
    names = list(names)
    if samples.shape[1] != len(names):
        raise KinfitError(f"samples have {samples.shape[1]} columns but {len(names)} names")
    out = []
    for act in activations:
        lvl = act.level if level is None else level
        tail = 100.0 * (1.0 - lvl) / 2.0

        def column(name, fallback):
            return samples[:, names.index(name)] if name in names else \
                np.full(samples.shape[0], fallback)

        k = column(act.constant, math.exp(act.center[0]))
        if np.any(k <= 0):
            raise KinfitError(f"samples of the rate constant {act.constant} must be positive")
        ln_k, energy = np.log(k), column(act.energy, act.center[1])

        def interval(values):
            lo, hi = np.percentile(values, [tail, 100.0 - tail])
            return float(lo), float(hi)

        forms = act.forms()
        estimates = []
        for e in act.estimates:
            values = forms["lnA" if e.name == "A" else e.name].value(ln_k, energy)
            estimates.append(replace(e, posterior_interval=interval(
                np.exp(values) if e.name == "A" else values)))
        rates = [replace(r, posterior_interval=interval(np.exp(
            ln_rate_form(act.law, act.reference, r.temperature).value(ln_k, energy))))
            for r in act.rates]
        out.append(replace(act, estimates=tuple(estimates), rates=tuple(rates)))
    return tuple(out)


def with_profile(activations, intervals):
    """Attach profile-likelihood intervals computed for the fitted parameters.

    Parameters
    ----------
    activations : sequence of Activation
    intervals : mapping of str to (float, float)
        Profile interval of each fitted parameter, natural scale.

    Returns
    -------
    tuple of Activation
        Estimates that depend on the energy parameter alone (Ea and ΔH‡,
        which differ by RT_ref) get the energy's interval carried through;
        A, ΔS‡ and ΔG‡ combine k_ref and E and need a profile of their own,
        so they are left as they are.
    """
    out = []
    for act in activations:
        if act.energy not in intervals:
            out.append(act)
            continue
        lo, hi = intervals[act.energy]
        forms = act.forms()
        estimates = []
        for e in act.estimates:
            form = forms.get("lnA" if e.name == "A" else e.name)
            if form is not None and form.c_lnk == 0.0 and e.name != "A":
                ends = sorted((float(form.value(0.0, lo)), float(form.value(0.0, hi))))
                e = replace(e, profile_interval=tuple(ends))
            estimates.append(e)
        out.append(replace(act, estimates=tuple(estimates)))
    return tuple(out)
