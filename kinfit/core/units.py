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
import re
from dataclasses import dataclass

from kinfit.core.errors import KinfitError

__all__ = ["Units", "UnitError", "parse_units", "check_unit", "to_kelvin", "conversion_factor",
           "quantity_in", "split_quantity", "read_quantity", "rate_constant_unit",
           "format_power"]


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
    """The units an experiment is recorded in (strings as the user wrote them).

    `temperature` is ``None`` when the experiment declares none: its runs
    then cannot carry temperatures (a bare number is never taken as kelvin).
    """

    time: str = "s"
    concentration: str = "M"
    temperature: str | None = None

    def rate_constant(self, order):
        """Unit of a rate constant whose rate law has overall order `order`."""
        return rate_constant_unit(self.concentration, self.time, order)


def parse_units(table, where):
    """Build :class:`Units` from an experiment's ``[units]`` table.

    Parameters
    ----------
    table : dict
        Keys ``time``, ``concentration``, ``temperature`` (all optional; time
        and concentration default to s and M, temperature to ``None``: not
        declared).
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
        values[key] = None if raw is None else check_unit(raw, key, f"{where} (units.{key})")
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


# A number as written in a file (optional sign, decimal point and exponent), then the
# unit; read by this expression, never evaluated.
_NUMBER_AND_UNIT = re.compile(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*\Z",
                              re.DOTALL)


def split_quantity(text):
    """The number and the unit of a quantity written as text.

    ``"10 mM"`` -> ``(10.0, "mM")``, ``"2.5e-3mol/L"`` -> ``(0.0025, "mol/L")``,
    ``"7"`` -> ``(7.0, "")``. Spaces around and between the two are ignored.

    Returns
    -------
    (float, str) or None
        ``None`` when the text does not start with a number.
    """
    if not isinstance(text, str):
        return None
    m = _NUMBER_AND_UNIT.match(text)
    if m is None:
        return None
    return float(m.group(1)), m.group(2)


def read_quantity(text, kind, unit, where):
    """A quantity written as text (``"10 mM"``), as a number in `unit`.

    The number is read by a regular expression (:func:`split_quantity`), the
    unit by pint; the unit must be one of `kind` and convertible to `unit`.

    Parameters
    ----------
    text : str
    kind : {"time", "concentration"}
    unit : str
        The unit wanted (the experiment's), already checked.
    where : str
        Location for messages (file, line and field).

    Returns
    -------
    float

    Raises
    ------
    KinfitError
        Naming the text, what is wrong and what was expected: no number, no
        unit, a unit pint cannot read, a unit of another kind, or one that
        cannot be converted to `unit` (a mass concentration to a molar one,
        which needs a molar mass).
    """
    example = f'"10 {unit}"'
    parts = split_quantity(text)
    if parts is None:
        raise KinfitError(f"{where}: cannot read {text!r}; expected a {kind} such as {example}"
                          f" (a number and a unit) or a plain number in {unit}")
    number, written = parts
    if not written:
        raise KinfitError(f"{where}: {text!r} has no unit; write the number without quotes "
                          f"for {unit} ({number:g}) or with its unit ({example})")
    if not math.isfinite(number):
        raise KinfitError(f"{where}: {text!r} is not a finite number")
    try:
        parsed = _parse(written)
    except UnitError:
        raise KinfitError(f"{where}: cannot read the unit {written!r} in {text!r}; expected a "
                          f"{kind} unit such as {_EXAMPLES[kind]}") from None
    if str(parsed.dimensionality) not in _DIMENSIONS[kind]:
        raise KinfitError(f"{where}: {written!r} in {text!r} is not a {kind} unit (it has "
                          f"dimension {parsed.dimensionality}); expected a {kind} such as "
                          f"{example}")
    try:
        factor = conversion_factor(written, unit)
    except UnitError:
        why = ("; a mass and a molar concentration differ by a molar mass kinfit does not "
               "know" if kind == "concentration" else "")
        raise KinfitError(f"{where}: {text!r} cannot be converted to {unit}, the experiment's "
                          f"{kind} unit ({parsed.dimensionality} against "
                          f"{_parse(unit).dimensionality}{why}); give it in {unit}") from None
    value = number * factor
    if not math.isfinite(value):
        raise KinfitError(f"{where}: {text!r} is not a finite number in {unit}")
    return value


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
