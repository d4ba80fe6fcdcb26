"""Spectrometer signals in words and files: absorptivities, resolved spectra, the SVD.

:func:`format_signals` words the signal part of a fit (linear unknowns,
resolved spectra at chosen wavelengths, components); :func:`signals_bundle`
gives the files it adds to the fit's folder (``spectra.json``, and for full
spectra ``spectra.csv``, the spectrum figures and one residual map per run).
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

from kinfit.core.formatting import format_value
from kinfit.core.schema import schema_json
from kinfit.output.bundle import Bundle, figure_files
from kinfit.output.text import csv_text, text_table

__all__ = ["format_components", "format_signals", "spectra_csv", "matrix_csv",
           "signals_bundle"]


def format_components(components, n_absorbers=None):
    """Text summary of the SVD of stacked spectra (a ``Components``)."""
    s = components.singular_values
    shown = ", ".join(f"{v:.4g}" for v in s[:8]) + (", ..." if s.size > 8 else "")
    out = [f"SVD of the spectra ({s.size} singular values): {shown}",
           f"  threshold {components.threshold:.4g} ({components.criterion}; noise "
           f"σ = {components.noise:.3g}{'' if components.noise_declared else ', estimated'})",
           f"  significant components: {components.n_significant}"
           + (f" (the model has {n_absorbers} absorbing species; a baseline that differs "
              f"between runs adds components)" if n_absorbers is not None else "")]
    if components.n_used is not None:
        out.append(f"  the fit used the leading {components.n_used} component(s); they leave out "
                   f"{100 * components.left_out:.3g} % of the data's sum of squares, noise "
                   f"alone would leave out {100 * components.noise_share:.3g} %")
    return "\n".join(out)


def format_signals(result, wavelengths=None):
    """Text summary of the signal part of a fit: linear unknowns, spectra, SVD.

    Parameters
    ----------
    result : FitResult
        With ``result.signals`` set.
    wavelengths : sequence of float, optional
        Wavelengths at which to quote the resolved spectra.
    """
    sig = result.signals
    out = ["Signals (Beer–Lambert: signal = offset + drift·t + ℓ Σ ε_X [X]; absorptivities, "
           "offsets and",
           "drifts solved by linear least squares in every evaluation; standard errors from "
           "the full Jacobian)"]
    if sig.coefficients:
        out += _coefficient_lines(sig.coefficients)
    spectra = sig.spectra
    if spectra is not None:
        out += _spectra_lines(spectra, wavelengths)
    if sig.components is not None:
        n_abs = len(spectra.species) if spectra is not None else None
        out += ["  " + line for line in format_components(sig.components, n_abs).split("\n")]
    return "\n".join(out)


def _coefficient_lines(coefficients):
    rows = []
    for c in coefficients:
        shown = "0 (held at the bound)" if c.at_bound else format_value(c.value, c.stderr)
        rows.append((c.name, shown, c.unit, c.kind))
    out = text_table(rows, ("name", "value ± standard error", "unit", "kind"))
    strong = [f"{c.name}–{name} {r:+.3f}" for c in coefficients
              for name, r in c.correlation.items() if abs(r) >= 0.9]
    if strong:
        more = f" and {len(strong) - 6} more (result.json)" if len(strong) > 6 else ""
        out += textwrap.wrap(f"strong correlations with kinetic parameters: "
                             f"{', '.join(strong[:6])}{more}", 88, initial_indent="  ",
                             subsequent_indent="    ", break_on_hyphens=False)
    return out


def _spectra_lines(spectra, wavelengths):
    from kinfit.figures.wavelengths import choose_wavelengths

    wl = spectra.wavelengths
    out = [f"  spectra of {', '.join(spectra.species)} resolved at {wl.size} "
           f"wavelengths, {wl[0]:g}–{wl[-1]:g} {spectra.wavelength_unit} "
           f"({spectra.unit}); see spectra.csv"]
    rows = []
    for w in choose_wavelengths(spectra, wavelengths):
        col = int(np.argmin(np.abs(wl - w)))
        rows.append((f"{w:g}", *[format_value(spectra.values[i, col], spectra.stderr[i, col])
                                 for i in range(len(spectra.species))]))
    out += ["  " + line for line in text_table(rows, (f"λ ({spectra.wavelength_unit})",
                                                      *spectra.species))]
    if spectra.sigma is None:
        fit_text = (f"χ² = {spectra.residual_sum:.6g} over {spectra.n_points} readings "
                    f"(weighted by the declared noise; χ²/N = "
                    f"{spectra.residual_sum / spectra.n_points:.3g})")
    else:
        fit_text = (f"residual sum of squares = {spectra.residual_sum:.6g} over "
                    f"{spectra.n_points} readings (unweighted), σ̂ = {spectra.sigma:.3g}")
    out.append(f"  full data at the fitted values: {fit_text}")
    return out


def spectra_csv(spectra):
    """``spectra.csv``: wavelength, each species' ε and its standard error, baselines."""
    header = [f"wavelength_{spectra.wavelength_unit}"]
    columns = [spectra.wavelengths]
    for i, s in enumerate(spectra.species):
        header += [s, f"{s}_stderr"]
        columns += [spectra.values[i], spectra.stderr[i]]
    for name, values in spectra.baselines.items():
        header.append(f"baseline {name}")
        columns.append(values)
    rows = [["" if not math.isfinite(v) else f"{v:.8g}" for v in row]
            for row in np.column_stack(columns)]
    return csv_text(header, rows)


def matrix_csv(times, wavelengths, values):
    """A time × wavelength table (time down, wavelength across), as the input files."""
    rows = [[f"{t:.10g}", *[f"{v:.6g}" for v in row]] for t, row in zip(times, values)]
    return csv_text(["time", *[f"{w:g}" for w in wavelengths]], rows)


def _file_safe(name):
    return "".join(c if c.isalnum() or c in "-_" else "_" for c in name)


def signals_bundle(result, wavelengths=None):
    """The files the signal part of a fit adds to its folder, computed but not written.

    Files, in order: ``spectra.json`` (schema ``kinfit.signals/1``:
    :meth:`SignalFit.to_dict` without the warnings, which ``result.json``
    holds; read by the HTML report). With full spectra also ``spectra.csv``,
    ``spectra.png``/``.svg``, ``wavelength_traces.png``/``.svg`` (data and
    fit at chosen wavelengths), ``residual_map.png``/``.svg`` and
    ``residual_map_<run>.csv`` (observed − fitted, time down and wavelength
    across, as the input files); with an SVD ``components.png``/``.svg``.

    Parameters
    ----------
    result : FitResult
        With ``result.signals`` set.
    wavelengths : sequence of float, optional
        Wavelengths to show fitted against measured traces at (default: the
        peak of each resolved spectrum).

    Returns
    -------
    Bundle
    """
    from kinfit.figures.spectra import (
        plot_components,
        plot_residual_map,
        plot_spectra,
        plot_wavelength_traces,
    )
    from kinfit.figures.wavelengths import choose_wavelengths

    sig = result.signals
    data = sig.to_dict()
    data.pop("warnings")          # already in result.json, with the fit's other warnings
    files = Bundle({"spectra.json": schema_json("signals", data)})
    spectra = sig.spectra
    if spectra is not None:
        picks = choose_wavelengths(spectra, wavelengths)
        files = files | {"spectra.csv": spectra_csv(spectra)} | figure_files({
            "spectra": plot_spectra(spectra),
            "wavelength_traces": plot_wavelength_traces(result, picks),
            "residual_map": plot_residual_map(result)})
        for run in result.experiment.runs:
            if run.name in spectra.runs:
                fitted = spectra.fitted[spectra.runs.index(run.name)]
                files = files | {f"residual_map_{_file_safe(run.name)}.csv": matrix_csv(
                    run.spectrum.times, spectra.wavelengths, run.spectrum.values - fitted)}
    if sig.components is not None:
        n_abs = len(spectra.species) if spectra is not None else None
        files = files | figure_files({"components": plot_components(sig.components, n_abs)})
    return files
