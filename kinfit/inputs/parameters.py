"""Model parameters and the roles they play.

A :class:`Parameter` is a declaration read from a model or experiment file:
a starting value, bounds, whether it is fitted, its role and its prior. The
:class:`Role` decides how a parameter is fitted (rate constants on a log scale,
orders on their own scale, ...) and which unit it carries; its values are the
plain words written to ``result.json``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from kinfit.inputs.priors import Prior

__all__ = ["Role", "Parameter"]


class Role(str, Enum):
    """What a parameter is; the value is the word used in files and reports."""

    RATE_CONSTANT = "rate constant"
    ORDER = "order"
    INITIAL = "initial concentration"
    TIME_OFFSET = "time offset"
    NOISE = "noise level"
    ACTIVATION_ENERGY = "activation energy"
    ACTIVATION_ENTHALPY = "activation enthalpy"

    def __str__(self):                 # f-strings and str() give the plain word
        return self.value


@dataclass(frozen=True)
class Parameter:
    """A model parameter with its starting value, bounds and role.

    Attributes
    ----------
    name : str
    value : float
        Starting value for a fit (or the fixed value when ``vary`` is false).
    min, max : float
        Bounds (``-inf``/``inf`` when open).
    vary : bool
    role : Role
        A rate constant (a prefactor of a rate law; fitted on a log scale,
        never negative), an order (an exponent), an initial concentration, a
        time offset, a noise level or a temperature-law parameter.
    prior : Prior or None
        A prior from the model file for posterior sampling; ``None`` for
        kinfit's default (see :mod:`kinfit.estimation.space`).
    """

    name: str
    value: float
    min: float = -math.inf
    max: float = math.inf
    vary: bool = True
    role: Role = Role.RATE_CONSTANT
    prior: Prior | None = None
