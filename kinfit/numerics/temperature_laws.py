"""Arithmetic of the temperature laws: k(T), T_ref and activation parameters.

A model's ``[temperature]`` table (declared in :mod:`kinfit.inputs.temperature`)
says which rate constants follow Arrhenius or Eyring about a reference
temperature T_ref:

* Arrhenius: k(T) = k_ref exp[-Ea/R (1/T - 1/T_ref)]
* Eyring:    k(T) = k_ref (T/T_ref) exp[-ΔH‡/R (1/T - 1/T_ref)]

This module owns the numbers: :func:`rate_constant`, the default T_ref
(:func:`reference_temperature`), the layout of the laws against an
experiment's runs (:func:`join_temperatures`, :class:`TemperatureLayout`,
used by the residual problem), and the activation parameters as linear forms.

In the residual problem
-----------------------
The rate constant in the rate law is k_ref and the energy (Ea or ΔH‡,
kJ/mol) is an ordinary parameter, so the fit, its covariance and the sampler
cover both with no special case (k_ref on the log scale like every rate
constant, the energy on its own). :meth:`Problem.rate_arrays` gives each run
the rate constants of its temperature group (:meth:`TemperatureLayout.group_values`),
the only place per-run rate constants are made, and
:meth:`Problem.log_rate_derivatives` adds, per group,

    ∂ln k/∂E = −(1/R) (1/T − 1/T_ref)        (:meth:`TemperatureLayout.energy_slopes`)

the same for Eyring, whose extra factor T/T_ref does not depend on E; so the
exact Jacobian covers the energies (tested against finite differences).

Everything else a reader needs about the temperature law of a rate
constant -- Ea, ln A, ΔH‡, ΔS‡, ΔG‡ at 298.15 K, ln k at any temperature --
is linear in (ln k_ref, E) (:class:`Linear`, :func:`linear_forms`), so the
delta method is exact on that scale and posterior samples map through the
same forms (:func:`kinfit.analysis.activation.with_posterior`). The law not
fitted is reached through Ea = ΔH‡ + RT at T_ref.

It knows nothing of mechanisms or fits: :func:`join_temperatures` works on
parameter names and run temperatures. Energies are in kJ/mol; R, k_B and h
come from :mod:`kinfit.inputs.temperature` (CODATA through scipy.constants).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.temperature import (
    ARRHENIUS,
    EYRING,
    K_B,
    KILO,
    STANDARD_TEMPERATURE,
    H,
    R,
)

__all__ = ["reference_temperature", "TemperatureLayout", "join_temperatures", "rate_constant",
           "Linear", "linear_forms", "ln_rate_form"]


# ------------------------------------------------------ joining with runs

def reference_temperature(spec, temperatures):
    """T_ref: the declared one, else the centre of the runs' 1/T range.

    Parameters
    ----------
    spec : TemperatureSpec
    temperatures : sequence of float, kelvin

    Returns
    -------
    float
        2 / (1/T_min + 1/T_max) when not declared.
    """
    if spec.reference is not None:
        return spec.reference
    inverse = 1.0 / np.asarray(temperatures, dtype=float)
    return float(2.0 / (inverse.min() + inverse.max()))


@dataclass(frozen=True)
class TemperatureLayout:
    """Where each run's rate constants come from, for a parameter layout.

    Attributes
    ----------
    reference : float
        T_ref, kelvin.
    temperatures : ndarray [n_groups]
        Distinct run temperatures, kelvin, increasing.
    run_group : tuple of int
        For each run, its index into `temperatures`.
    columns : tuple of (int, int, bool)
        For each temperature-dependent rate constant: its column, its energy
        parameter's column and whether the law is Eyring.
    """

    reference: float
    temperatures: np.ndarray
    run_group: tuple
    columns: tuple

    def group_values(self, values):
        """Model parameter rows with each rate constant set to k(T) of each group.

        Parameters
        ----------
        values : ndarray [n_sets, n_model]
            k_ref in the rate constants' columns.

        Returns
        -------
        list of ndarray [n_sets, n_model], one per temperature group
        """
        rows = []
        for temperature in self.temperatures:
            row = values.copy()
            for k_col, e_col, eyring in self.columns:
                row[:, k_col] = rate_constant(values[:, k_col], values[:, e_col], temperature,
                                              self.reference, EYRING if eyring else ARRHENIUS)
            rows.append(row)
        return rows

    def energy_slopes(self):
        """∂ln k/∂E of each temperature-dependent rate constant, per temperature group.

        Returns
        -------
        list of list of (int, int, float)
            For each group: (rate constant column, energy column,
            -KILO/R (1/T - 1/T_ref)) -- the same for Arrhenius and Eyring,
            whose extra factor T/T_ref does not depend on E.
        """
        return [[(k_col, e_col, -KILO / R * (1.0 / t - 1.0 / self.reference))
                 for k_col, e_col, _ in self.columns] for t in self.temperatures]


def join_temperatures(spec, names, temperatures, varies, source="<experiment>", runs=()):
    """Lay out a model's temperature laws against the runs of an experiment.

    Parameters
    ----------
    spec : TemperatureSpec
    names : sequence of str
        The model's parameter names, in column order.
    temperatures : sequence of float or None
        Each run's temperature in kelvin.
    varies : mapping of str to bool
        Whether each parameter is fitted.
    source : str
        The experiment file, for messages.
    runs : sequence of str
        Run names, for messages.

    Returns
    -------
    TemperatureLayout

    Raises
    ------
    KinfitError
        If a run has no temperature, or a fitted energy has runs at fewer
        than two temperatures to be fitted from.
    """
    for i, t in enumerate(temperatures):
        if t is None:
            run = runs[i] if i < len(runs) else f"run {i + 1}"
            raise KinfitError(f"{source}, run {run!r}: the model's rate constants depend on "
                              f"temperature, so every run needs a temperature (give "
                              f"temperature = ... in the run, or once at the top of the file)")
    distinct = np.unique(np.round(np.asarray(temperatures, dtype=float), 9))
    for law in spec.laws:
        if varies.get(law.energy, False) and distinct.size < 2:
            raise KinfitError(f"{source}: all runs are at {distinct[0]:.2f} K, so the "
                              f"{law.role} {law.energy} cannot be fitted; add runs at other "
                              f"temperatures (four or more spread over the range of interest "
                              f"is common practice) or fix it with vary = false")
    names = list(names)
    columns = tuple((names.index(law.constant), names.index(law.energy), law.law == EYRING)
                    for law in spec.laws)
    groups = tuple(int(np.argmin(np.abs(distinct - t))) for t in temperatures)
    return TemperatureLayout(reference=reference_temperature(spec, distinct),
                             temperatures=distinct, run_group=groups, columns=columns)


# -------------------------------------------------------------- arithmetic

def rate_constant(k_ref, energy, temperature, reference, law=ARRHENIUS):
    """k at `temperature` from k_ref at `reference` and an energy in kJ/mol.

    Parameters
    ----------
    k_ref : float or ndarray [n]
    energy : float or ndarray [n]
        Ea (Arrhenius) or ΔH‡ (Eyring), kJ/mol.
    temperature, reference : float or ndarray, kelvin
    law : {"arrhenius", "eyring"}

    Returns
    -------
    float or ndarray
        Arrhenius: k_ref exp[-Ea/R (1/T - 1/T_ref)];
        Eyring: k_ref (T/T_ref) exp[-ΔH‡/R (1/T - 1/T_ref)].
    """
    temperature = np.asarray(temperature, dtype=float)
    exponent = -np.asarray(energy, dtype=float) * KILO / R * (1.0 / temperature - 1.0 / reference)
    k = np.asarray(k_ref, dtype=float) * np.exp(exponent)
    if law == EYRING:
        k = k * (temperature / reference)
    return k


@dataclass(frozen=True)
class Linear:
    """A quantity q = c0 + c_lnk ln k_ref + c_energy E (E in kJ/mol).

    Every activation parameter and every ln k(T) of a temperature law has
    this form, so its variance is exactly gᵀ Σ g with g = (c_lnk, c_energy)
    and Σ the covariance of (ln k_ref, E).
    """

    c0: float
    c_lnk: float
    c_energy: float

    def value(self, ln_k_ref, energy):
        """q for one or many (ln k_ref, E) pairs (arrays broadcast)."""
        return self.c0 + self.c_lnk * np.asarray(ln_k_ref) + self.c_energy * np.asarray(energy)

    def variance(self, covariance):
        """gᵀ Σ g for Σ [2, 2], the covariance of (ln k_ref, E)."""
        g = np.array([self.c_lnk, self.c_energy])
        return float(g @ np.asarray(covariance, dtype=float) @ g)


def linear_forms(law, reference, kappa=1.0, si_factor=None,
                 at=STANDARD_TEMPERATURE):
    """The activation parameters of a temperature law as :class:`Linear` forms.

    Parameters
    ----------
    law : {"arrhenius", "eyring"}
        Which law was fitted: E is then Ea or ΔH‡.
    reference : float
        T_ref, kelvin.
    kappa : float
        Transmission coefficient κ of the Eyring equation.
    si_factor : float or None
        k in (mol/L)^(1-n) s^-1 divided by k in the experiment's units;
        ``None`` when the units cannot be converted (then no ΔS‡ or ΔG‡).
    at : float
        Temperature of ΔG‡, kelvin (default 298.15 K).

    Returns
    -------
    dict of str to Linear
        ``Ea`` and ``dH`` (kJ/mol), ``lnA`` (ln of A in k's units), and with
        `si_factor`, ``dS`` (J mol^-1 K^-1) and ``dG`` (kJ/mol at `at`).

    Notes
    -----
    For the law not fitted, the textbook relations at T_ref link the two
    (Atkins' Physical Chemistry, activated-complex theory; from memory):
    Ea = ΔH‡ + RT for a reaction in solution, which is exact for the
    Eyring form, and ln A = ln k + Ea/(RT). With the Eyring equation at
    T_ref, ΔS‡ = R ln(k h/(κ k_B T)) + ΔH‡/T, so that
    A = (e k_B T/h) exp(ΔS‡/R) for a first-order rate constant.
    """
    rt = R * reference / KILO                       # kJ/mol
    if law == ARRHENIUS:
        ea = Linear(0.0, 0.0, 1.0)
        dh = Linear(-rt, 0.0, 1.0)
    elif law == EYRING:
        dh = Linear(0.0, 0.0, 1.0)
        ea = Linear(rt, 0.0, 1.0)
    else:
        raise KinfitError(f"unknown temperature law {law!r}")
    forms = {"Ea": ea, "dH": dh,
             "lnA": Linear(ea.c0 / rt, 1.0, ea.c_energy / rt)}
    if si_factor is not None:
        # ΔS‡ = R ln(f k_ref h/(κ k_B T_ref)) + ΔH‡ KILO / T_ref
        base = R * math.log(si_factor * H / (kappa * K_B * reference))
        ds = Linear(base + dh.c0 * KILO / reference, R, dh.c_energy * KILO / reference)
        forms["dS"] = ds
        forms["dG"] = Linear(dh.c0 - at * ds.c0 / KILO, -at * ds.c_lnk / KILO,
                             dh.c_energy - at * ds.c_energy / KILO)
    return forms


def ln_rate_form(law, reference, temperature):
    """ln k(T) as a :class:`Linear` form of (ln k_ref, E)."""
    slope = -KILO / R * (1.0 / temperature - 1.0 / reference)
    c0 = math.log(temperature / reference) if law == EYRING else 0.0
    return Linear(c0, 1.0, slope)
