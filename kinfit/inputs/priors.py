"""Prior distributions of parameters for posterior sampling.

kinfit chooses a default prior for every parameter from its role (see
:mod:`kinfit.estimation.space`); a model file may replace it for one parameter, for a
value known from earlier work::

    [parameters]
    k = { value = 1e-3, min = 0, prior = { kind = "log-normal", median = 2e-3, factor = 1.5 } }
    m = { value = 1, min = 0, max = 3, prior = { kind = "normal", mean = 1.0, sd = 0.1 } }

Kinds (densities on the parameter's natural scale x, always cut to its bounds)

``uniform``
    p(x) ∝ 1 between the bounds (flat; improper on a side whose bound is open).
``log-uniform``
    p(x) ∝ 1/x between the bounds, i.e. flat in log x; for positive values.
``normal``
    p(x) ∝ exp(−(x − mean)²/(2 sd²)).
``log-normal``
    ln x is normal with median `median` and standard deviation ln(`factor`):
    one standard deviation is "×/÷ factor" (factor 1.2 ≈ ±20 %).

A parameter sampled on log10 x (rate constants, noise levels) carries the
change-of-variables term: the density of u = log10 x is p(x)·x·ln 10.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.core.errors import KinfitError

__all__ = ["Prior", "parse_prior", "KINDS"]

KINDS = ("uniform", "log-uniform", "normal", "log-normal")
_FIELDS = {"uniform": (), "log-uniform": (), "normal": ("mean", "sd"),
           "log-normal": ("median", "factor")}
_LOG_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)


@dataclass(frozen=True)
class Prior:
    """A prior density on a parameter's natural scale, cut to [lower, upper].

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    a, b : float
        ``normal``: mean and sd; ``log-normal``: median and factor; unused
        (0) for the uniform kinds.
    lower, upper : float
        Support; ``-inf``/``inf`` when open.
    source : str
        ``"default"`` or ``"model file"``.
    """

    kind: str
    a: float = 0.0
    b: float = 0.0
    lower: float = -math.inf
    upper: float = math.inf
    source: str = "default"

    def within(self, lower, upper, source=None):
        """The same prior cut to the bounds [lower, upper]."""
        return Prior(self.kind, self.a, self.b, lower, upper,
                     self.source if source is None else source)

    def log_density(self, x):
        """Log prior density at natural-scale values (unnormalised constant dropped).

        Parameters
        ----------
        x : ndarray [n]

        Returns
        -------
        ndarray [n]
            ``-inf`` outside [lower, upper] and where the density is zero.
        """
        x = np.asarray(x, dtype=float)
        inside = (x >= self.lower) & (x <= self.upper)
        with np.errstate(divide="ignore", invalid="ignore"):
            if self.kind == "uniform":
                out = np.zeros_like(x)
            elif self.kind == "log-uniform":
                out = np.where(x > 0, -np.log(x), -np.inf)
            elif self.kind == "normal":
                out = -0.5 * ((x - self.a) / self.b) ** 2 - math.log(self.b) - _LOG_SQRT_2PI
            else:  # log-normal
                s = math.log(self.b)
                z = (np.log(x) - math.log(self.a)) / s
                out = np.where(x > 0, -0.5 * z ** 2 - np.log(x) - math.log(s) - _LOG_SQRT_2PI,
                               -np.inf)
        return np.where(inside, out, -np.inf)

    def describe(self, unit=""):
        """Plain words, e.g. ``normal(mean 1, sd 0.1)`` or ``log-uniform on [1e-06, inf)``."""
        unit = f" {unit}" if unit else ""
        if self.kind == "normal":
            text = f"normal(mean {self.a:g}{unit}, sd {self.b:g}{unit})"
        elif self.kind == "log-normal":
            text = f"log-normal(median {self.a:g}{unit}, ×/÷ {self.b:g})"
        else:
            text = self.kind
        lo = "(-inf" if not math.isfinite(self.lower) else f"[{self.lower:g}"
        hi = "inf)" if not math.isfinite(self.upper) else f"{self.upper:g}]"
        return f"{text} on {lo}, {hi}"

    def to_dict(self):
        out = {"kind": self.kind, "source": self.source,
               "lower": self.lower if math.isfinite(self.lower) else None,
               "upper": self.upper if math.isfinite(self.upper) else None}
        for name, value in zip(_FIELDS[self.kind], (self.a, self.b)):
            out[name] = value
        return out


def parse_prior(spec, loc):
    """Read a ``prior = { kind = ..., ... }`` table from a model file.

    Parameters
    ----------
    spec : object
        The TOML value.
    loc : str
        Where it is (file, line, field), for messages.

    Returns
    -------
    Prior
        With open bounds; the parameter's bounds are applied later.

    Raises
    ------
    KinfitError
        For an unknown kind, a missing or extra field, or a non-positive
        sd, median or factor ≤ 1.
    """
    example = 'prior = { kind = "normal", mean = 1.0, sd = 0.1 }'
    if not isinstance(spec, dict):
        raise KinfitError(f"{loc}: prior must be a table, like {example}")
    kind = spec.get("kind")
    if kind not in _FIELDS:
        raise KinfitError(f"{loc}: prior kind {kind!r} is not known; choose one of "
                          f"{', '.join(repr(k) for k in KINDS)}, like {example}")
    need = _FIELDS[kind]
    extra = set(spec) - set(need) - {"kind"}
    if extra:
        raise KinfitError(f"{loc}: a {kind} prior has "
                          f"{', '.join(need) if need else 'no fields besides kind'}, "
                          f"not {sorted(extra)[0]!r} (bounds come from min and max)")
    values = []
    for name in need:
        if name not in spec:
            raise KinfitError(f"{loc}: a {kind} prior needs {' and '.join(need)}; "
                              f"{name} is missing")
        v = spec[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise KinfitError(f"{loc}: prior {name} must be a finite number, got {v!r}")
        values.append(float(v))
    if kind == "normal" and values[1] <= 0:
        raise KinfitError(f"{loc}: prior sd must be positive, got {values[1]:g}")
    if kind == "log-normal":
        if values[0] <= 0:
            raise KinfitError(f"{loc}: prior median must be positive, got {values[0]:g}")
        if values[1] <= 1:
            raise KinfitError(f"{loc}: prior factor must be above 1 (1.2 means one standard "
                              f"deviation is ×/÷ 1.2), got {values[1]:g}")
    return Prior(kind, *values, source="model file")
