"""Option values of the command line turned into what the library takes.

Each function checks one kind of option text and raises
:class:`~kinfit.core.errors.KinfitError` naming the option and what was
expected; the units of ``kinfit simulate`` follow one rule: from the fit it
starts from, or given, never assumed.
"""

from __future__ import annotations

from kinfit.core.errors import KinfitError

__all__ = ["pairs", "parse_components", "numbers", "simulation_units", "check_same_units"]


def pairs(items, what):
    """``NAME=NUMBER`` items (of option `what`) as a dict of str to float."""
    out = {}
    for item in items or []:
        name, sep, value = item.partition("=")
        try:
            if not sep:
                raise ValueError
            out[name.strip()] = float(value)
        except ValueError:
            raise KinfitError(f"{what} {item!r}: expected NAME=NUMBER, like A=0.1") from None
    return out


def parse_components(text):
    """--components: None, "auto", "all" or a whole number."""
    if text is None or text in ("auto", "all"):
        return text
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise KinfitError(f"--components {text}: expected auto, all or a whole number of at "
                          f"least 1")
    return value


def numbers(text, option):
    """A comma-separated list of numbers, or None."""
    if not text:
        return None
    try:
        return [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise KinfitError(f"{option} {text}: expected numbers separated by commas, like "
                          f"420,560") from None


def simulation_units(time_unit, concentration_unit, fit_file):
    """The units of a simulation from the model's values: both must be given (with --fit
    they come from the fit, and None is returned)."""
    from kinfit.core.units import Units, check_unit

    if fit_file is not None:
        return None
    missing = [option for option, value in (("--time-unit", time_unit),
                                            ("--concentration-unit", concentration_unit))
               if value is None]
    if missing:
        raise KinfitError(f"give {' and '.join(missing)}: the model file's values carry no "
                          f"units (e.g. --time-unit s --concentration-unit M), or start "
                          f"from a fit with --fit result.json, whose units are used")
    return Units(check_unit(time_unit, "time", "--time-unit"),
                 check_unit(concentration_unit, "concentration", "--concentration-unit"))


def check_same_units(fitted, time_unit, concentration_unit, fit_file):
    """With --fit, a unit given as well must be the fit's (kinfit does not convert them)."""
    from kinfit.core.units import UnitError, check_unit, conversion_factor

    for option, given, kind, unit in (("--time-unit", time_unit, "time", fitted.time),
                                      ("--concentration-unit", concentration_unit,
                                       "concentration", fitted.concentration)):
        if given is None:
            continue
        try:
            factor = conversion_factor(check_unit(given, kind, option), unit)
        except UnitError:        # e.g. molar against molal
            factor = None
        if factor is None or abs(factor - 1.0) > 1e-12:
            raise KinfitError(f"{option} {given}: the fit in {fit_file} is in {unit}; give "
                              f"--until and --initial in {unit} and leave {option} out")
