"""Temperature dependence of rate constants as declared in a model file.

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

This module owns the declarations: the constants, the names of the two laws,
:class:`RateLaw`, :class:`TemperatureSpec`, and the reading and checking of
the ``[temperature]`` table (called by :mod:`kinfit.inputs.mechanism` while
it reads a model file). The arithmetic of the laws -- k(T), T_ref, the
layout against an experiment's runs and the activation parameters as linear
forms -- is in :mod:`kinfit.numerics.temperature_laws`.
"""

from __future__ import annotations

import keyword
import math
import re
from dataclasses import dataclass

from scipy import constants as _constants

from kinfit.core.errors import KinfitError, where
from kinfit.core.units import split_quantity, to_kelvin
from kinfit.inputs.parameters import Role
from kinfit.inputs.sources import find_line

__all__ = ["R", "K_B", "H", "KILO", "STANDARD_TEMPERATURE", "PLAUSIBLE_KELVIN", "ARRHENIUS",
           "EYRING", "ENERGY_UNIT", "RateLaw", "TemperatureSpec", "parse_temperature",
           "check_roles", "reference_warning"]

R = _constants.R                  # molar gas constant, J mol^-1 K^-1 (CODATA)
K_B = _constants.k                # Boltzmann constant, J K^-1 (CODATA)
H = _constants.h                  # Planck constant, J s (CODATA)
KILO = _constants.kilo            # J per kJ
# 25 °C, the temperature at which ΔG‡ is quoted (common practice)
STANDARD_TEMPERATURE = _constants.zero_Celsius + 25.0

# Run temperatures outside this range (kelvin) are unusual for reactions in solution and
# more often a unit slip (°C read as K) than a real condition: kinfit warns (common practice).
PLAUSIBLE_KELVIN = (150.0, 700.0)

ARRHENIUS = "arrhenius"
EYRING = "eyring"
ENERGY_UNIT = "kJ/mol"
_ROLE_OF_LAW = {ARRHENIUS: Role.ACTIVATION_ENERGY, EYRING: Role.ACTIVATION_ENTHALPY}
_KEYS = {ARRHENIUS, EYRING, "kappa", "reference"}
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")


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
        parts = split_quantity(value)
        if parts is None:
            raise KinfitError(f"{loc}: expected {expected}, got {value!r}")
        number, unit = parts
        try:
            kelvin = to_kelvin(number, unit or "K")
        except Exception:  # pint raises several types; all mean "not a temperature"
            raise KinfitError(f"{loc}: cannot read {value!r} as a temperature; expected "
                              f"{expected}") from None
    else:
        raise KinfitError(f"{loc}: expected {expected}, got {value!r}")
    if not math.isfinite(kelvin) or kelvin <= 0:
        raise KinfitError(f"{loc}: the reference temperature must be above absolute zero "
                          f"(got {kelvin:g} K)")
    return kelvin


def reference_warning(spec, temperatures, source="<model>"):
    """A warning when the declared T_ref lies outside the runs' temperatures.

    k_ref is then an extrapolation: its standard error and its correlation
    with the energy grow with the distance from the runs (the point of T_ref
    at the centre of 1/T), and a slip such as runs written in °C but read in
    another unit shows here first.

    Parameters
    ----------
    spec : TemperatureSpec
    temperatures : sequence of float or None
        The runs' temperatures in kelvin (``None`` entries are skipped).
    source : str
        The model file, for the message.

    Returns
    -------
    str or None
        ``None`` when T_ref is not declared, inside the range, or there are
        no run temperatures.
    """
    known = [float(t) for t in temperatures if t is not None]
    if spec is None or spec.reference is None or not known:
        return None
    low, high, ref = min(known), max(known), spec.reference
    if low * (1 - 1e-9) <= ref <= high * (1 + 1e-9):
        return None
    celsius = _constants.zero_Celsius
    return (f"{source}: the reference temperature {ref:.2f} K ({ref - celsius:.1f} °C) lies "
            f"outside the runs' temperatures {low:.2f}–{high:.2f} K ({low - celsius:.1f}–"
            f"{high - celsius:.1f} °C), so k at the reference is an extrapolation; check "
            f"[units] temperature of the experiment, or leave reference out to use the "
            f"centre of the runs' range")


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
