"""Simulations and predictions in words and files.

:func:`format_prediction` words a :class:`~kinfit.analysis.prediction.Prediction`,
its extrapolation flags first; :func:`prediction_bundle` and
:func:`simulation_bundle` give the files of ``kinfit simulate``
(``simulation.csv``, ``simulation.png``/``.svg`` and, for a prediction,
``prediction.json``).
"""

from __future__ import annotations

import numpy as np

from kinfit.core.formatting import CAUTIONS, format_value
from kinfit.core.schema import schema_json
from kinfit.output.bundle import Bundle, figure_files
from kinfit.output.temperature import temperature_cautions
from kinfit.output.text import csv_text, interval_text, kelvin_celsius, wrapped

__all__ = ["format_prediction", "prediction_bundle", "simulation_bundle"]


def format_prediction(prediction, title=None):
    """Text summary of a :class:`~kinfit.analysis.prediction.Prediction`, flags first."""
    units = prediction.units
    out = []
    if prediction.extrapolated:
        out.append("EXTRAPOLATED: this prediction lies outside the conditions the fit was "
                   "measured in:")
        out += [f"  - {flag}" for flag in prediction.flags]
        out.append("")
    if not prediction.range_known:
        out.append("Not checked for extrapolation: no fitted range is known (predict from a "
                   "fit with --fit to check it).")
        out.append("")
    head = title or "Prediction"
    if prediction.temperature is not None:
        head += f" at {kelvin_celsius(prediction.temperature)}"
    out.append(head)
    for name, rate in prediction.rates:
        line = f"  {name}({rate.temperature:.2f} K) = {format_value(rate.value, rate.stderr)}"
        if rate.interval is not None:
            line += f", {100 * prediction.level:g} % interval {interval_text(rate.interval)}"
        out.append(line)
    t = prediction.times[-1]
    out.append(f"  at t = {t:g} {units.time}:")
    for i, s in enumerate(prediction.species):
        line = f"    [{s}] = {prediction.conc[-1, i]:.4g} {units.concentration}"
        if prediction.lower is not None:
            line += (f"  ({100 * prediction.level:g} % band {prediction.lower[-1, i]:.4g} – "
                     f"{prediction.upper[-1, i]:.4g})")
        out.append(line)
    if prediction.lower is not None:
        out.append(f"  band from {prediction.draws} parameter draws ({prediction.uncertainty})"
                   + (f"; {prediction.failed} could not be integrated" if prediction.failed
                      else ""))
    else:
        out.append("  no uncertainty: predict from a fit (--fit) to get a band")
    if prediction.temperature is not None:
        out += ["", "Caution (temperature)"] + wrapped(
            temperature_cautions(prediction.fitted_temperature), "  ", "  ")
    return "\n".join(out)


def _number_rows(columns):
    return [[f"{v:.10g}" for v in row] for row in np.column_stack(columns)]


def prediction_bundle(prediction, title=None):
    """The files of a prediction: ``simulation.csv``, ``simulation.png``/``.svg``,
    ``prediction.json``.

    ``simulation.csv`` has a time column, one column per species and, with a
    band, ``<species>_lower`` and ``<species>_upper``, each header with its
    unit (``time (min)``, ``A (mM)``). ``prediction.json``
    (schema ``kinfit.prediction/1``) holds :meth:`Prediction.to_dict` (with
    ``extrapolated`` and ``flags``) and the cautions.

    Returns
    -------
    Bundle
    """
    from kinfit.figures.temperature import plot_prediction

    time, conc = _unit_labels(prediction.units)
    header = [f"time{time}", *[f"{s}{conc}" for s in prediction.species]]
    columns = [prediction.times] + [prediction.conc[:, i] for i in range(len(prediction.species))]
    if prediction.lower is not None:
        for i, s in enumerate(prediction.species):
            header += [f"{s}_lower{conc}", f"{s}_upper{conc}"]
            columns += [prediction.lower[:, i], prediction.upper[:, i]]
    data = prediction.to_dict()
    data["cautions"] = (temperature_cautions(prediction.fitted_temperature)
                        if prediction.temperature is not None else CAUTIONS)
    return (Bundle({"simulation.csv": csv_text(header, _number_rows(columns))})
            | figure_files({"simulation": plot_prediction(prediction, title)})
            | {"prediction.json": schema_json("prediction", data)})


def _unit_labels(units):
    """`` (min)`` and `` (mM)`` for CSV headers; empty without units."""
    if units is None:
        return "", ""
    return f" ({units.time})", f" ({units.concentration})"


def simulation_bundle(trajectory, units=None, title=None):
    """The files of a plain simulation: ``simulation.csv`` (headers with the units, as
    for a prediction) and ``simulation.png``/``.svg``.

    Returns
    -------
    Bundle
    """
    from kinfit.figures.fit import plot_trajectory

    conc = np.asarray(trajectory.conc)
    columns = [trajectory.times] + [conc[:, i] for i in range(conc.shape[1])]
    time, unit = _unit_labels(units)
    header = [f"time{time}", *[f"{s}{unit}" for s in trajectory.species]]
    return (Bundle({"simulation.csv": csv_text(header, _number_rows(columns))})
            | figure_files({"simulation": plot_trajectory(trajectory, units, title)}))
