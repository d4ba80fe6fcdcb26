"""Units of time, concentration and temperature, read with pint.

kinfit computes in the units the experiment declares (no silent conversion),
so fitted rate constants come out in those units. pint is used to check that a
unit string means what its field says (a time, a concentration, a
temperature), to convert temperatures to kelvin and to convert values between
compatible units where files disagree.

This module is the one adapter to pint: nothing else in kinfit imports it.
pint signals a bad unit or an impossible conversion with several exception
types; every function here turns them into :class:`UnitError`, so callers
catch one type and say what was expected.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

from kinfit.core.errors import KinfitError

__all__ = ["Units", "UnitError", "parse_units", "check_unit", "to_kelvin", "conversion_factor",
           "quantity_in", "rate_constant_unit", "format_power"]


class UnitError(ValueError):
    """A unit pint cannot read, or a conversion between incompatible units."""

# What each field may hold, as pint dimensionalities (common practice: molar,
# molal and mass concentrations are all used for kinetic traces).
_DIMENSIONS = {
    "time": ("[time]",),
    "concentration": ("[substance] / [length] ** 3", "[substance] / [mass]",
                      "[mass] / [length] ** 3"),
    "temperature": ("[temperature]",),
}
_EXAMPLES = {
    "time": "s, min, h",
    "concentration": "M, mM, uM, µM, nM, mol/L, mol/dm^3",
    "temperature": "K, degC",
}


@functools.lru_cache(maxsize=1)
def registry():
    """The shared pint registry (built once; building takes a fraction of a second)."""
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


@functools.lru_cache(maxsize=256)
def _parse(text: str):
    ureg = registry()
    try:
        unit = ureg.Unit(text)
    except Exception as exc:  # pint raises several types; all mean "cannot read"
        raise UnitError(str(exc)) from None
    return unit


def check_unit(text, kind, where):
    """Check that `text` is a unit of `kind` and return it stripped.

    Parameters
    ----------
    text : str
        A unit as the user wrote it, e.g. ``"mM"`` or ``"min"``.
    kind : {"time", "concentration", "temperature"}
    where : str
        Location for the error message (file and field).

    Returns
    -------
    str
        The unit text, stripped, as it will be shown in results.
    """
    if not isinstance(text, str) or not text.strip():
        raise KinfitError(f"{where}: expected a {kind} unit such as {_EXAMPLES[kind]}, "
                          f"got {text!r}")
    text = text.strip()
    try:
        unit = _parse(text)
    except UnitError:
        raise KinfitError(f"{where}: cannot read the unit {text!r}; expected a {kind} "
                          f"unit such as {_EXAMPLES[kind]}") from None
    if str(unit.dimensionality) not in _DIMENSIONS[kind]:
        raise KinfitError(f"{where}: {text!r} is not a {kind} unit (it has dimension "
                          f"{unit.dimensionality}); expected e.g. {_EXAMPLES[kind]}")
    return text


@dataclass(frozen=True)
class Units:
    """The units an experiment is recorded in (strings as the user wrote them)."""

    time: str = "s"
    concentration: str = "M"
    temperature: str = "K"

    def rate_constant(self, order):
        """Unit of a rate constant whose rate law has overall order `order`."""
        return rate_constant_unit(self.concentration, self.time, order)


def parse_units(table, where):
    """Build :class:`Units` from an experiment's ``[units]`` table.

    Parameters
    ----------
    table : dict
        Keys ``time``, ``concentration``, ``temperature`` (all optional).
    where : str
        File name for messages.
    """
    if not isinstance(table, dict):
        raise KinfitError(f"{where}: [units] must be a table like "
                          f"'[units]\\ntime = \"s\"\\nconcentration = \"M\"'")
    unknown = set(table) - {"time", "concentration", "temperature"}
    if unknown:
        raise KinfitError(f"{where} ([units]): unknown key(s) {sorted(unknown)}; "
                          f"expected time, concentration, temperature")
    defaults = Units()
    values = {}
    for key in ("time", "concentration", "temperature"):
        raw = table.get(key, getattr(defaults, key))
        values[key] = check_unit(raw, key, f"{where} (units.{key})")
    return Units(**values)


def to_kelvin(value, unit):
    """Convert a temperature `value` in `unit` (e.g. ``"degC"``) to kelvin."""
    ureg = registry()
    try:
        return float(ureg.Quantity(value, _parse(unit)).to("kelvin").magnitude)
    except UnitError:
        raise
    except Exception as exc:  # pint: not a temperature
        raise UnitError(str(exc)) from None


def conversion_factor(from_unit, to_unit):
    """Multiplicative factor taking values in `from_unit` to `to_unit`.

    Only for units without an offset (not temperatures in °C).
    """
    ureg = registry()
    try:
        return float(ureg.Quantity(1.0, _parse(from_unit)).to(_parse(to_unit)).magnitude)
    except UnitError:
        raise
    except Exception as exc:  # pint: dimensions differ (e.g. molar and mass concentrations)
        raise UnitError(str(exc)) from None


def quantity_in(text, unit):
    """The magnitude of a quantity written as text (``"2 mm"``) in `unit` (``"cm"``)."""
    try:
        return float(registry().Quantity(text).to(unit).magnitude)
    except Exception as exc:  # pint raises several types; all mean "not such a quantity"
        raise UnitError(str(exc)) from None


def format_power(symbol, power):
    """``symbol^power`` in plain text: ``M^-1``, ``M^-0.5``; ``""`` for power 0.

    Compound symbols (``mol/L``) are parenthesised; powers are rounded to three
    decimals.
    """
    power = round(float(power), 3)
    if power == 0:
        return ""
    if any(c in symbol for c in "/* ^") :
        symbol = f"({symbol})"
    if power == 1:
        return symbol
    text = f"{power:.3f}".rstrip("0").rstrip(".")
    return f"{symbol}^{text}"


def rate_constant_unit(concentration, time, order):
    """Unit of a rate constant for overall order `order`: conc^(1-n) time^-1.

    IUPAC Gold Book, "rate coefficient"/"order of reaction" (from memory):
    for v = k Π c_i^n_i with overall order n = Σ n_i, k has units
    (concentration)^(1-n) (time)^-1.

    Parameters
    ----------
    concentration, time : str
        Unit symbols as declared by the experiment.
    order : float
        Overall order of the rate law (may be fractional); NaN gives ``None``.
    """
    if order is None or not math.isfinite(order):
        return None
    parts = [format_power(concentration, 1.0 - order), format_power(time, -1.0)]
    return " ".join(p for p in parts if p)
