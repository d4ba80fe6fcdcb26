"""Mechanisms: species, steps, power-law rate laws and their parameters.

A model file (TOML) lists steps. Each step has a reaction in ordinary
notation and a rate law; the rate law is parsed by
:mod:`kinfit.inputs.expressions` (never evaluated as code). This module reads
and checks the file into a :class:`Mechanism`, a frozen specification, and
formats rate laws for reports.

The rate equations the specification stands for -- the stoichiometry matrix,
r_j = factor_j k_j Π_s max([s], 0)^e_js for each direction of each step and
d[X]/dt = Σ_j ν_Xj r_j -- are built from it by
:func:`kinfit.numerics.rate_system.compile_mechanism`.
"""

from __future__ import annotations

import keyword
import math
import warnings
from dataclasses import dataclass, replace
from pathlib import Path

from kinfit.core.errors import KinfitError, KinfitWarning, where
from kinfit.inputs.expressions import (
    PARAMETER_NAME,
    SPECIES_NAME,
    ParseError,
    PowerLaw,
    Reaction,
    parse_reaction,
    to_power_law,
)
from kinfit.inputs.parameters import Parameter, Role
from kinfit.inputs.priors import parse_prior
from kinfit.inputs.sources import find_line, load_toml
from kinfit.inputs.temperature import TemperatureSpec, check_roles, parse_temperature

__all__ = ["Parameter", "Step", "Mechanism", "load_mechanism", "mechanism_from_text",
           "format_rate_law", "with_fixed", "with_start"]


_MODEL_KEYS = {"name", "description", "held_constant", "steps", "parameters", "temperature"}
_STEP_KEYS = {"reaction", "rate", "reverse_rate", "label"}
_PARAMETER_KEYS = {"value", "min", "max", "vary", "prior"}


@dataclass(frozen=True)
class Step:
    """One step of a mechanism.

    Attributes
    ----------
    reaction : Reaction
    forward : PowerLaw
        Rate law of the forward direction.
    reverse : PowerLaw or None
        Rate law of the reverse direction for a reversible step.
    label : str
        Short name used in messages and reports ("step 2" unless given).
    line : int or None
        Line of the step in its file.
    """

    reaction: Reaction
    forward: PowerLaw
    reverse: PowerLaw | None
    label: str
    line: int | None = None


@dataclass(frozen=True)
class Mechanism:
    """A parsed reaction mechanism: the specification of its rate equations.

    Attributes
    ----------
    name : str
    species : tuple of str
        All species, in order of first appearance; the order of the columns of
        every concentration array.
    held_constant : tuple of str
        Species kept at their initial concentration.
    steps : tuple of Step
    parameters : dict of str to Parameter
        In file order.
    source : str
        File the mechanism came from (``"<text>"`` if none).
    temperature : TemperatureSpec or None
        Rate constants that depend on temperature (see
        :mod:`kinfit.inputs.temperature`).

    The arrays of the rate equations are not part of the specification:
    :func:`kinfit.numerics.rate_system.compile_mechanism` builds them.
    """

    name: str
    species: tuple[str, ...]
    held_constant: tuple[str, ...]
    steps: tuple[Step, ...]
    parameters: dict[str, Parameter]
    source: str = "<text>"
    description: str = ""
    temperature: TemperatureSpec | None = None

    @property
    def parameter_names(self):
        return tuple(self.parameters)

    @property
    def n_species(self):
        return len(self.species)

    @property
    def directions(self):
        """Each direction of each step: a reversible step has two.

        Returns
        -------
        tuple of (step index, PowerLaw, sign)
            Forward directions have sign +1.0, reverse ones -1.0; the order
            of the direction axis of the rate equations.
        """
        out = []
        for i, step in enumerate(self.steps):
            out.append((i, step.forward, 1.0))
            if step.reverse is not None:
                out.append((i, step.reverse, -1.0))
        return tuple(out)

    @property
    def rate_constants(self):
        return tuple(n for n, p in self.parameters.items() if p.role == Role.RATE_CONSTANT)

    @property
    def orders(self):
        return tuple(n for n, p in self.parameters.items() if p.role == Role.ORDER)

    def values(self, overrides=None):
        """Parameter values as a dict: starting values updated by `overrides`."""
        out = {n: p.value for n, p in self.parameters.items()}
        for name, value in (overrides or {}).items():
            if name not in out:
                raise KinfitError(f"{self.source}: no parameter named {name!r}; the model "
                                  f"has {', '.join(out) or 'none'}")
            out[name] = float(value)
        return out

    def overall_orders(self, values):
        """Overall order (sum of orders) of each rate constant's rate law.

        Returns
        -------
        dict of str to float or None
            ``None`` where one rate constant appears in rate laws of different
            overall order (its unit is then not defined).
        """
        out = {}
        for _, law, _ in self.directions:
            order = law.overall_order(values)
            previous = out.get(law.constant, order)
            out[law.constant] = order if previous is not None and math.isclose(
                previous, order, abs_tol=1e-9) else None
        return out


def with_fixed(mechanism, values, name=None):
    """A copy of `mechanism` with the named parameters fixed at the given values.

    Used to build candidates such as "the free-order model with m fixed at 1".
    Fixing a parameter changes its value and ``vary`` flag, not the structure,
    so the copy shares the original's compiled rate system.

    Parameters
    ----------
    mechanism : Mechanism
    values : mapping of str to float
        Parameter name -> fixed value; each value must lie within the
        parameter's bounds.
    name : str, optional
        Name of the new mechanism (default: the same name).

    Returns
    -------
    Mechanism

    Raises
    ------
    KinfitError
        For an unknown parameter name or a value outside the bounds.
    """
    params = dict(mechanism.parameters)
    for pname, value in values.items():
        p = _parameter(mechanism, pname)
        value = float(value)
        if not math.isfinite(value) or not p.min <= value <= p.max:
            raise KinfitError(f"{mechanism.source}: cannot fix {pname} at {value:g}; the model "
                              f"allows {pname} from {p.min:g} to {p.max:g}")
        params[pname] = replace(p, value=value, vary=False)
    return replace(mechanism, parameters=params, name=name or mechanism.name)


def with_start(mechanism, values):
    """A copy of `mechanism` whose fitted parameters start from `values`.

    Values are clipped into each parameter's bounds (and kept positive for a
    fitted rate constant, which is fitted on a log scale); fixed parameters
    and names not in `values` are left as they are.

    Parameters
    ----------
    mechanism : Mechanism
    values : mapping of str to float

    Returns
    -------
    Mechanism
    """
    params = dict(mechanism.parameters)
    for pname, value in values.items():
        p = _parameter(mechanism, pname)
        if not p.vary or not math.isfinite(value):
            continue
        value = min(max(float(value), p.min), p.max)
        if p.role == Role.RATE_CONSTANT and value <= 0:
            value = p.value
        params[pname] = replace(p, value=value)
    return replace(mechanism, parameters=params)


def _parameter(mechanism, pname):
    if pname not in mechanism.parameters:
        raise KinfitError(f"{mechanism.source}: no parameter named {pname!r}; the model has "
                          f"{', '.join(mechanism.parameters) or 'none'}")
    return mechanism.parameters[pname]


def format_rate_law(law, values=None, digits=3):
    """Text of a rate law: ``k [A]^m [B]``, or with fitted orders ``k [A]^1.021 [B]``.

    Orders that are parameters are shown with `digits` decimals when `values`
    are given, so that a fitted order of 1.004 never reads as a fixed 1.
    """
    parts = [] if law.factor == 1.0 else [f"{law.factor:g}"]
    parts.append(law.constant)
    for species, order in law.orders:
        if order.is_number:
            exponent = order.text()
        elif values is not None:
            exponent = f"{order.value(values):.{digits}f}"
        else:
            exponent = order.text()
            exponent = f"({exponent})" if " " in exponent else exponent
        parts.append(f"[{species}]" if exponent == "1" else f"[{species}]^{exponent}")
    return " ".join(parts)


# ------------------------------------------------------------------- loading

def load_mechanism(path):
    """Read a model file (TOML) into a :class:`Mechanism`.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Mechanism

    Raises
    ------
    KinfitError
        With the file, the line or field, and what was expected.
    """
    table, text = load_toml(path, "model file")
    return _build(table, text, str(path), default_name=Path(path).stem)


def mechanism_from_text(text, source="<text>"):
    """Build a :class:`Mechanism` from model-file text (handy in notebooks and tests)."""
    from kinfit.inputs.sources import tomllib

    try:
        table = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise KinfitError(f"{source}: not valid TOML: {exc}") from None
    return _build(table, text, source, default_name="model")


def _build(table, text, source, default_name):
    unknown = set(table) - _MODEL_KEYS
    if unknown:
        name = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, name))}: unknown key {name!r}; a "
                          f"model file has {', '.join(sorted(_MODEL_KEYS))}")
    name = table.get("name", default_name)
    if not isinstance(name, str):
        raise KinfitError(f"{where(source, find_line(text, 'name'), 'name')}: expected text")
    description = table.get("description", "")
    if not isinstance(description, str):
        raise KinfitError(f"{where(source, find_line(text, 'description'))}: description "
                          f"must be text")

    held = table.get("held_constant", [])
    if not isinstance(held, list) or not all(isinstance(h, str) for h in held):
        raise KinfitError(f"{where(source, find_line(text, 'held_constant'), 'held_constant')}"
                          f": expected a list of species names, like held_constant = [\"cat\"]")
    for h in held:
        if not SPECIES_NAME.match(h):
            raise KinfitError(f"{where(source, find_line(text, 'held_constant'))}: {h!r} is "
                              f"not a species name (letters, digits and _, starting with a "
                              f"letter)")

    raw_steps = table.get("steps")
    if not isinstance(raw_steps, list) or not raw_steps:
        raise KinfitError(f"{source}: the model has no steps; add at least one\n"
                          f"  [[steps]]\n  reaction = \"A -> P\"\n  rate = \"k * [A]\"")
    steps = tuple(_parse_step(i, raw, text, source) for i, raw in enumerate(raw_steps))

    species = []
    for step in steps:
        for s in step.reaction.species:
            if s not in species:
                species.append(s)
    for h in held:
        if h not in species:
            species.append(h)
    for step in steps:
        for law, key in ((step.forward, "rate"), (step.reverse, "reverse_rate")):
            if law is None:
                continue
            for s, _ in law.orders:
                if s not in species:
                    line = find_line(text, key, "steps", steps.index(step))
                    raise KinfitError(
                        f"{where(source, line, f'{step.label}.{key}')}: [{s}] is in the rate "
                        f"law but in no reaction; if it is a catalyst, acid, inhibitor or "
                        f"other species whose concentration stays constant, declare it: "
                        f"held_constant = [\"{s}\"]")

    temperature = None
    if "temperature" in table:
        temperature = parse_temperature(table["temperature"], text, source)
    parameters = _parse_parameters(table.get("parameters", {}), steps, text, source,
                                   temperature)
    return Mechanism(name=name, species=tuple(species), held_constant=tuple(held),
                     steps=steps, parameters=parameters, source=source,
                     description=description, temperature=temperature)


def _parse_step(index, raw, text, source):
    label = f"steps[{index + 1}]"
    line = find_line(text, None, "steps", index)
    if not isinstance(raw, dict):
        raise KinfitError(f"{where(source, line, label)}: expected a table with reaction and "
                          f"rate")
    unknown = set(raw) - _STEP_KEYS
    if unknown:
        key = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, key, 'steps', index), label)}: "
                          f"unknown key {key!r}; a step has {', '.join(sorted(_STEP_KEYS))}")

    def fail(key, message):
        raise KinfitError(f"{where(source, find_line(text, key, 'steps', index) or line, f'{label}.{key}')}"
                          f": {message}")

    if "reaction" not in raw:
        fail("reaction", "missing; expected e.g. reaction = \"A + B -> P\"")
    if not isinstance(raw["reaction"], str):
        fail("reaction", "expected text like \"A + B -> P\"")
    try:
        reaction = parse_reaction(raw["reaction"])
    except ParseError as exc:
        fail("reaction", f"{exc} in {_clip(raw['reaction'])}")
    label = raw.get("label", label)
    if not isinstance(label, str):
        fail("label", "expected text")

    def law(key):
        value = raw.get(key)
        if not isinstance(value, str):
            fail(key, "expected a rate law as text, like \"k * [A]^m * [B]\"")
        try:
            return to_power_law(value)
        except ParseError as exc:
            fail(key, f"{exc}; got {_clip(value)}")

    if "rate" not in raw:
        fail("rate", "missing; every step needs a rate law, like rate = \"k * [A]\"")
    forward = law("rate")
    reverse = None
    if reaction.reversible:
        if "reverse_rate" not in raw:
            fail("reverse_rate", f"the step {raw['reaction']!r} is reversible, so it needs "
                                 f"reverse_rate = \"...\" (the rate law of the back reaction)")
        reverse = law("reverse_rate")
    elif "reverse_rate" in raw:
        fail("reverse_rate", "only a reversible step (written with <=>) has a reverse rate")
    return Step(reaction, forward, reverse, label, line)


def _clip(text, limit=80):
    """Quote `text` for a message, shortened to `limit` characters."""
    text = repr(text)
    return text if len(text) <= limit else text[:limit - 5] + "…" + text[-4:]


def _parse_parameters(raw, steps, text, source, temperature=None):
    if not isinstance(raw, dict):
        raise KinfitError(f"{where(source, find_line(text, None, 'parameters'))}: "
                          f"[parameters] must be a table")
    roles, used_in = {}, {}
    for step in steps:
        for key, law in (("rate", step.forward), ("reverse_rate", step.reverse)):
            if law is None:
                continue
            uses = [(law.constant, Role.RATE_CONSTANT)] + [
                (p, Role.ORDER) for p in law.order_parameters]
            for pname, role in uses:
                if pname in roles and roles[pname] != role:
                    raise KinfitError(
                        f"{where(source, find_line(text, key, 'steps', steps.index(step)))}: "
                        f"{pname} is used both as a rate constant and as an order; use two "
                        f"parameters")
                roles[pname] = role
                used_in.setdefault(pname, (step, key))

    for pname, (step, key) in used_in.items():
        if pname not in raw:
            line = find_line(text, key, "steps", steps.index(step))
            raise KinfitError(f"{where(source, line, f'{step.label}.{key}')}: {pname} is used "
                              f"in the rate law but not defined; add it under [parameters], "
                              f"e.g. {pname} = {{ value = 1.0, min = 0 }}")

    if temperature is not None:
        check_roles(temperature, roles, raw, text, source)
        roles.update(temperature.energy_roles)

    parameters = {}
    for pname, spec in raw.items():
        line = find_line(text, pname, "parameters")
        loc = where(source, line, f"parameters.{pname}")
        if not PARAMETER_NAME.match(pname) or keyword.iskeyword(pname):
            raise KinfitError(f"{loc}: {pname!r} is not a usable parameter name (letters, "
                              f"digits and _, starting with a letter; not a Python keyword)")
        if pname.startswith("log10_"):
            raise KinfitError(f"{loc}: names starting with 'log10_' are kept for kinfit's own "
                              f"log-scale parameters; rename {pname}")
        if pname not in roles:
            warnings.warn(f"{loc}: {pname} is defined but not used by any rate law",
                          KinfitWarning, stacklevel=3)
        parameters[pname] = _parse_parameter(pname, spec, roles.get(pname, "unused"), loc)
    return parameters


def _number(value, loc, key):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise KinfitError(f"{loc}: {key} must be a number, got {value!r}")
    value = float(value)
    if math.isnan(value):
        raise KinfitError(f"{loc}: {key} must be a number, got nan")
    return value


def _parse_parameter(name, spec, role, loc):
    if not isinstance(spec, dict):
        spec = {"value": spec}
    unknown = set(spec) - _PARAMETER_KEYS
    if unknown:
        raise KinfitError(f"{loc}: unknown key {sorted(unknown)[0]!r}; a parameter has "
                          f"{', '.join(sorted(_PARAMETER_KEYS))}")
    if "value" not in spec:
        raise KinfitError(f"{loc}: missing value, e.g. {name} = {{ value = 1.0 }}")
    value = _number(spec["value"], loc, "value")
    default_min = 0.0 if role == Role.RATE_CONSTANT else -math.inf
    lo = _number(spec.get("min", default_min), loc, "min")
    hi = _number(spec.get("max", math.inf), loc, "max")
    vary = spec.get("vary", True)
    if not isinstance(vary, bool):
        raise KinfitError(f"{loc}: vary must be true or false, got {vary!r}")
    if not math.isfinite(value):
        raise KinfitError(f"{loc}: value must be a finite number, got {value!r}")
    if lo > hi:
        raise KinfitError(f"{loc}: min ({lo:g}) is larger than max ({hi:g})")
    if role == Role.RATE_CONSTANT:
        if lo < 0:
            raise KinfitError(f"{loc}: {name} is a rate constant and cannot be negative; "
                              f"use min = 0 or a positive min")
        lo = max(lo, 0.0)
        if vary and value <= 0:
            raise KinfitError(f"{loc}: {name} is a rate constant fitted on a log scale; give "
                              f"a positive starting value (or vary = false to fix it at "
                              f"{value:g})")
        if vary and hi <= 0:
            raise KinfitError(f"{loc}: max of the rate constant {name} must be positive")
    if value < lo or value > hi:
        raise KinfitError(f"{loc}: the value {value:g} is outside its bounds "
                          f"[{lo:g}, {hi:g}]")
    if role == Role.ORDER and abs(value) > 20:
        raise KinfitError(f"{loc}: the order {name} = {value:g} is beyond ±20; is it a "
                          f"typing error?")
    prior = parse_prior(spec["prior"], loc) if "prior" in spec else None
    return Parameter(name, value, lo, hi, vary, role, prior)
