"""Temperature dependence of rate constants: Arrhenius and Eyring laws.

A model file may declare that some rate constants depend on temperature::

    [temperature]
    arrhenius = { k = "Ea" }      # k follows Arrhenius with activation energy Ea
    eyring = { k2 = "dH2" }       # k2 follows Eyring with activation enthalpy dH2
    kappa = 1.0                   # Eyring transmission coefficient (default 1)
    reference = 298.15            # K, or "25 degC"; default: centre of the runs' 1/T

The rate constant named in the rate law (``k``) then means its value at the
reference temperature T_ref, and each run gets its own value from its
temperature T:

* Arrhenius: k(T) = k_ref exp[-Ea/R (1/T - 1/T_ref)]
* Eyring:    k(T) = k_ref (T/T_ref) exp[-ΔH‡/R (1/T - 1/T_ref)]

The second is the Eyring equation k = (κ k_B T/h) exp(ΔS‡/R) exp(-ΔH‡/(RT))
written about T_ref, with ΔS‡ = R ln(k_ref h/(κ k_B T_ref)) + ΔH‡/T_ref
(for k in (mol/L)^(1-n) s^-1). Fitting k_ref and an energy instead of A and
Ea (or ΔS‡ and ΔH‡) keeps the two nearly uncorrelated when T_ref is at the
centre of the measured 1/T range (common practice). κ does not change k(T),
only the ΔS‡ reported.

Energies are in kJ/mol. R, k_B and h are CODATA values from
:mod:`scipy.constants`; nothing here is typed by hand.

Everything else a reader needs about the temperature law of a rate
constant -- activation parameters, their standard errors, k at any
temperature -- is linear in (ln k_ref, E) (see :class:`Linear`), so the
delta method is exact on that scale.

This module sits above :mod:`kinfit.mechanism` (which calls
:func:`parse_temperature` while reading a model file) and knows nothing of
mechanisms or fits: :func:`join_temperatures` works on parameter names and
run temperatures.
"""

from __future__ import annotations

import keyword
import math
import re
from dataclasses import dataclass

import numpy as np
from scipy import constants as _constants

from kinfit.core.errors import KinfitError, where
from kinfit.inputs.sources import find_line
from kinfit.core.units import to_kelvin
from kinfit.inputs.parameters import Role

__all__ = ["R", "K_B", "H", "KILO", "STANDARD_TEMPERATURE", "ARRHENIUS", "EYRING",
           "ENERGY_UNIT", "RateLaw",
           "TemperatureSpec", "parse_temperature", "check_roles", "reference_temperature",
           "TemperatureLayout", "join_temperatures", "rate_constant", "Linear",
           "linear_forms", "ln_rate_form"]

R = _constants.R                  # molar gas constant, J mol^-1 K^-1 (CODATA)
K_B = _constants.k                # Boltzmann constant, J K^-1 (CODATA)
H = _constants.h                  # Planck constant, J s (CODATA)
KILO = _constants.kilo            # J per kJ
# 25 °C, the temperature at which ΔG‡ is quoted (common practice)
STANDARD_TEMPERATURE = _constants.zero_Celsius + 25.0

ARRHENIUS = "arrhenius"
EYRING = "eyring"
ENERGY_UNIT = "kJ/mol"
_ROLE_OF_LAW = {ARRHENIUS: Role.ACTIVATION_ENERGY, EYRING: Role.ACTIVATION_ENTHALPY}
_KEYS = {ARRHENIUS, EYRING, "kappa", "reference"}
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")
_QUANTITY = re.compile(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*\Z")


@dataclass(frozen=True)
class RateLaw:
    """How one rate constant depends on temperature.

    Attributes
    ----------
    constant : str
        The rate constant of the rate laws; its value is k at T_ref.
    law : {"arrhenius", "eyring"}
    energy : str
        Name of the parameter holding Ea (Arrhenius) or ΔH‡ (Eyring), kJ/mol.
    """

    constant: str
    law: str
    energy: str

    @property
    def role(self):
        return _ROLE_OF_LAW[self.law]


@dataclass(frozen=True)
class TemperatureSpec:
    """The ``[temperature]`` table of a model file.

    Attributes
    ----------
    laws : tuple of RateLaw
    kappa : float
        Eyring transmission coefficient κ.
    reference : float or None
        T_ref in kelvin, or ``None`` for the centre of the runs' 1/T range.
    """

    laws: tuple
    kappa: float = 1.0
    reference: float | None = None

    def law_of(self, constant):
        """The :class:`RateLaw` of `constant`, or ``None``."""
        for law in self.laws:
            if law.constant == constant:
                return law
        return None

    @property
    def energy_roles(self):
        """Role of each energy parameter: dict of name to role."""
        return {law.energy: law.role for law in self.laws}


# ------------------------------------------------------------------ parsing

def parse_temperature(raw, text, source):
    """Read the ``[temperature]`` table of a model file.

    Parameters
    ----------
    raw : object
        The table as read from TOML.
    text : str
        The file's text (for line numbers).
    source : str
        The file name.

    Returns
    -------
    TemperatureSpec

    Raises
    ------
    KinfitError
        With the file, the line and what was expected.
    """
    loc = where(source, find_line(text, None, "temperature"), "temperature")
    example = 'arrhenius = { k = "Ea" }'
    if not isinstance(raw, dict):
        raise KinfitError(f"{loc}: [temperature] must be a table, like [temperature] then "
                          f"{example}")
    unknown = set(raw) - _KEYS
    if unknown:
        key = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, key, 'temperature'), f'temperature.{key}')}"
                          f": unknown key {key!r}; [temperature] has {', '.join(sorted(_KEYS))}")
    laws, seen = [], set()
    for law in (ARRHENIUS, EYRING):
        table = raw.get(law, {})
        kloc = where(source, find_line(text, law, "temperature"), f"temperature.{law}")
        energy = "activation energy" if law == ARRHENIUS else "activation enthalpy"
        if not isinstance(table, dict):
            raise KinfitError(f"{kloc}: expected a table of rate constant = \"name of its "
                              f"{energy} parameter\", like {law} = {{ k = \"E\" }}")
        for constant, parameter in table.items():
            for name in (constant, parameter):
                if not isinstance(name, str) or not _NAME.match(name) or keyword.iskeyword(name):
                    raise KinfitError(f"{kloc}: {name!r} is not a parameter name (letters, "
                                      f"digits and _, starting with a letter); expected "
                                      f"{law} = {{ k = \"E\" }}")
            if constant == parameter:
                raise KinfitError(f"{kloc}: {constant} cannot be its own {energy}; name a "
                                  f"separate parameter, like {constant} = \"E_{constant}\"")
            for name in (constant, parameter):
                if name in seen:
                    raise KinfitError(f"{kloc}: {name} appears twice in [temperature]; each "
                                      f"rate constant has one law and its own energy "
                                      f"parameter")
                seen.add(name)
            laws.append(RateLaw(constant, law, parameter))
    if not laws:
        raise KinfitError(f"{loc}: no rate constant is made temperature-dependent; add "
                          f"{example} (or eyring = {{ k = \"dH\" }})")

    kappa = raw.get("kappa", 1.0)
    kloc = where(source, find_line(text, "kappa", "temperature"), "temperature.kappa")
    if isinstance(kappa, bool) or not isinstance(kappa, (int, float)) or \
            not math.isfinite(kappa) or kappa <= 0:
        raise KinfitError(f"{kloc}: the transmission coefficient must be a positive number "
                          f"(usually 1), got {kappa!r}")
    reference = raw.get("reference")
    if reference is not None:
        reference = _parse_reference(reference, where(
            source, find_line(text, "reference", "temperature"), "temperature.reference"))
    return TemperatureSpec(laws=tuple(laws), kappa=float(kappa), reference=reference)


def _parse_reference(value, loc):
    expected = "a temperature in kelvin (298.15) or with a unit (\"25 degC\")"
    if isinstance(value, bool):
        raise KinfitError(f"{loc}: expected {expected}, got {value!r}")
    if isinstance(value, (int, float)):
        kelvin = float(value)
    elif isinstance(value, str):
        m = _QUANTITY.match(value)
        if m is None:
            raise KinfitError(f"{loc}: expected {expected}, got {value!r}")
        unit = m.group(2) or "K"
        try:
            kelvin = to_kelvin(float(m.group(1)), unit)
        except Exception:  # pint raises several types; all mean "not a temperature"
            raise KinfitError(f"{loc}: cannot read {value!r} as a temperature; expected "
                              f"{expected}") from None
    else:
        raise KinfitError(f"{loc}: expected {expected}, got {value!r}")
    if not math.isfinite(kelvin) or kelvin <= 0:
        raise KinfitError(f"{loc}: the reference temperature must be above absolute zero "
                          f"(got {kelvin:g} K)")
    return kelvin


def check_roles(spec, roles, defined, text, source):
    """Check the declared laws against the rate laws and [parameters].

    Parameters
    ----------
    spec : TemperatureSpec
    roles : dict of str to str
        Role of each parameter used in a rate law ("rate constant", "order").
    defined : collection of str
        Parameters defined under [parameters].
    text, source : str
        For messages.
    """
    for law in spec.laws:
        loc = where(source, find_line(text, law.law, "temperature"), f"temperature.{law.law}")
        if roles.get(law.constant) != "rate constant":
            used = roles.get(law.constant)
            raise KinfitError(f"{loc}: {law.constant} is "
                              + (f"an {used}" if used else "not in any rate law")
                              + "; only a rate constant of a rate law can follow "
                              + ("Arrhenius" if law.law == ARRHENIUS else "Eyring"))
        if law.energy in roles:
            raise KinfitError(f"{loc}: {law.energy} is used in a rate law; the "
                              f"{law.role} of {law.constant} must be a parameter of its own")
        if law.energy not in defined:
            raise KinfitError(f"{loc}: the {law.role} {law.energy} is not defined; add it "
                              f"under [parameters] in kJ/mol, e.g. {law.energy} = "
                              f"{{ value = 60 }}")


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
