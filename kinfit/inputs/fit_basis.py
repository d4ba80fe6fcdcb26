"""The prediction basis saved with a fit: its writer and its reader side by side.

A :class:`PredictionBasis` is what a prediction needs from a fit: the model,
its parameters at the fitted values, the covariance of those fitted, the
reference temperature of the temperature laws, the conditions the runs
covered (:class:`FittedRange`) and the units. ``kinfit fit`` writes it into
``result.json`` (and, for a temperature-dependent model, ``temperature.json``)
as ``prediction_basis`` (:func:`basis_to_dict`) so that ``kinfit simulate
--fit`` can predict without refitting, in the fit's units and with its
covariance (:func:`load_basis`). Built from a fit by
:func:`kinfit.analysis.prediction.basis_from_fit`.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.core.schema import check_schema
from kinfit.core.units import Units
from kinfit.inputs.sources import decode

if TYPE_CHECKING:
    from kinfit.inputs.mechanism import Mechanism

__all__ = ["FittedRange", "PredictionBasis", "basis_to_dict", "load_basis"]


@dataclass(frozen=True)
class FittedRange:
    """The conditions a fit's runs covered.

    Attributes
    ----------
    temperature : (float, float) or None
        Lowest and highest run temperature, kelvin; None when the runs have
        no temperature.
    initial : dict of str to (float, float)
        Lowest and highest starting concentration of each species over the
        runs (fitted starting values included), experiment's units.
    """

    temperature: tuple[float, float] | None
    initial: dict[str, tuple[float, float]]

    def to_dict(self):
        return {"temperature_K": None if self.temperature is None else
                list(self.temperature),
                "initial": {s: list(v) for s, v in self.initial.items()}}


@dataclass(frozen=True)
class PredictionBasis:
    """What a prediction needs from a fit.

    Attributes
    ----------
    mechanism : Mechanism
    values : dict of str to float
        The model's parameters at the fitted values.
    free_names : tuple of str
        Model parameters that were fitted (order of `covariance`).
    covariance : ndarray [n_free, n_free] or None
        Natural-scale covariance of those parameters.
    reference : float or None
        T_ref of the temperature laws, kelvin.
    fitted : FittedRange
    units : Units
    source : str
        Where the basis came from (for messages).
    """

    mechanism: Mechanism
    values: dict[str, float]
    free_names: tuple[str, ...]
    covariance: np.ndarray | None
    reference: float | None
    fitted: FittedRange
    units: Units
    source: str = "<fit>"


def basis_to_dict(basis):
    """The basis as plain Python (the ``prediction_basis`` entry of result.json and
    temperature.json).

    Keys: ``model``, ``parameters`` (name to value), ``free`` (names),
    ``covariance`` (list of rows, natural scale, or null),
    ``reference_temperature_K``, ``fitted_range`` (``temperature_K`` as
    [low, high], ``initial`` as species to [low, high]) and ``units``.
    """
    return {
        "model": basis.mechanism.name,
        "parameters": dict(basis.values),
        "free": list(basis.free_names),
        "covariance": None if basis.covariance is None else basis.covariance.tolist(),
        "reference_temperature_K": basis.reference,
        "fitted_range": basis.fitted.to_dict(),
        "units": {"time": basis.units.time, "concentration": basis.units.concentration,
                  "temperature": basis.units.temperature},
    }


def _kind(data, path):
    """Which of kinfit's files `data` is: ``result`` or ``temperature`` (a file written
    before schema tags were recorded passes as either)."""
    tag = data.get("schema") if isinstance(data, dict) else None
    if tag is None:
        return "result"
    for kind in ("result", "temperature"):
        if str(tag).split("/")[0] == f"kinfit.{kind}":
            return kind
    raise KinfitError(f"--fit {path}: holds {tag!r}, not a fit; give the result.json (or "
                      f"temperature.json) written by kinfit fit")


def load_basis(path, mechanism):
    """Read the prediction basis saved with a fit (``result.json`` or ``temperature.json``).

    Parameters
    ----------
    path : str or os.PathLike
    mechanism : Mechanism
        The model that was fitted; its parameters must match the file's.

    Returns
    -------
    PredictionBasis

    Raises
    ------
    KinfitError
        If the file is missing, not JSON, lacks a field or belongs to
        another model.
    """
    path = Path(path)
    if not path.is_file():
        raise KinfitError(f"--fit {path}: file not found; give the result.json written by "
                          f"kinfit fit")
    try:
        data = json.loads(decode(path.read_bytes(), str(path)))
        data = check_schema(data, _kind(data, path), f"--fit {path}")
        raw = data.get("prediction_basis") if isinstance(data, dict) else None
        if raw is None:
            raise KinfitError(f"--fit {path}: holds no prediction basis (written by an "
                              f"earlier kinfit, or without one); fit again with kinfit fit "
                              f"and give its result.json")
        values = {str(k): float(v) for k, v in raw["parameters"].items()}
        free = tuple(str(n) for n in raw["free"])
        cov = None if raw["covariance"] is None else np.asarray(raw["covariance"], dtype=float)
        reference = raw["reference_temperature_K"]
        reference = None if reference is None else float(reference)
        rng = raw["fitted_range"]
        temps = rng["temperature_K"]
        fitted = FittedRange(
            temperature=None if temps is None else (float(temps[0]), float(temps[1])),
            initial={str(s): (float(v[0]), float(v[1])) for s, v in rng["initial"].items()})
        units = Units(**{k: None if raw["units"][k] is None else str(raw["units"][k])
                         for k in ("time", "concentration", "temperature")})
    except KinfitError:
        raise
    except json.JSONDecodeError as exc:
        raise KinfitError(f"{path}, line {exc.lineno}: not valid JSON: {exc.msg}") from None
    except (KeyError, TypeError, ValueError, IndexError, AttributeError) as exc:
        raise KinfitError(f"{path}: not a prediction basis written by kinfit fit (missing or "
                          f"malformed field {exc})") from None
    if set(values) != set(mechanism.parameters):
        raise KinfitError(f"{path}: its parameters ({', '.join(sorted(values))}) are not the "
                          f"model's ({', '.join(sorted(mechanism.parameters))}); was it "
                          f"written for {mechanism.source}?")
    if not set(free) <= set(values) or (cov is not None and cov.shape != (len(free),) * 2):
        raise KinfitError(f"{path}: the covariance does not match the list of fitted "
                          f"parameters")
    return PredictionBasis(mechanism=mechanism, values=values, free_names=free,
                           covariance=cov, reference=reference, fitted=fitted, units=units,
                           source=str(path))
