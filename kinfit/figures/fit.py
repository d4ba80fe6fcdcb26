"""Figures of a fit: each run's data with the fitted curves, residuals, trajectories.

Runs measured as full spectra are shown at the peak wavelengths of the
resolved spectra, beside any concentration or signal traces. Species the
model has but a run did not measure are drawn dashed; residuals are
observed − fitted. Units carry superscripts (``mM⁻² min⁻¹``).
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from kinfit.figures.style import (
    legend_once,
    panel_grid,
    run_title,
    species_styles,
    unit_text,
)

__all__ = ["plot_traces", "plot_residuals", "plot_trajectory"]


def plot_traces(result, fig=None):
    """Each run's data with the fitted curves, one panel per run.

    Measured species: points (data) and a solid line (fit). Species of the
    model a run did not measure: a dashed line (the fit's prediction), on
    panels whose axis is concentration. One legend for all panels.

    Parameters
    ----------
    result : FitResult
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    exp, mech = result.experiment, result.mechanism
    units = exp.units
    measured = exp.species
    style = species_styles(list(measured) + [s for s in mech.species if s not in measured])
    fig, axes, spare = panel_grid(fig, len(exp.runs))
    signals = getattr(result, "signals", None)
    dashed = []
    for ax, run, curve in zip(axes, exp.runs, result.curves):
        for trace in run.traces:
            color, marker = style[trace.species]
            ax.plot(trace.times, trace.values, linestyle="none", marker=marker, markersize=3.5,
                    color=color, alpha=0.8)
            fitted = (curve[trace.species] if trace.species in curve.species
                      else signals.curve(run.name, trace.species, curve))
            ax.plot(curve.times, fitted, color=color, lw=1.6)
        if run.spectrum is not None and signals is not None and signals.spectra is not None:
            _spectrum_panel(ax, signals.spectra, run)
        kinds = {t.species in curve.species for t in run.traces}
        if kinds == {True} and run.spectrum is None:
            for species in curve.species:
                if species not in run.species:
                    ax.plot(curve.times, curve[species], color=style[species][0], lw=1.2,
                            ls="--")
                    dashed.append(species)
        ax.set_title(run_title(run, units), fontsize=9)
        ax.set_xlabel(f"time ({unit_text(units.time)})")
        ax.set_ylabel(f"concentration ({unit_text(units.concentration)})" if kinds == {True}
                      else "signal" if not run.traces or kinds == {False}
                      else "concentration or signal")
    legend_once(fig, axes, spare, _species_handles(style, measured, dashed, mech))
    fig.suptitle(f"{mech.name}: data (points) and global fit (lines)", fontsize=11)
    return fig


def _species_handles(style, measured, dashed, mech):
    """Legend entries: each measured species (points and line), each species drawn only
    as a prediction (dashed)."""
    handles = [Line2D([], [], color=style[s][0], marker=style[s][1], markersize=4, lw=1.6,
                      label=s) for s in measured]
    held = set(getattr(mech, "held_constant", ()) or ())
    for s in dict.fromkeys(dashed):
        if s not in measured:
            note = "held constant, not measured" if s in held else "not measured"
            handles.append(Line2D([], [], color=style[s][0], lw=1.2, ls="--",
                                  label=f"{s} ({note})"))
    if any(s in measured for s in dashed):
        handles.append(Line2D([], [], color="0.4", lw=1.2, ls="--",
                              label="dashed: not measured in that run"))
    return handles


def _spectrum_panel(ax, spectra, run, scale=None):
    """Full-spectrum data of one run at the peak wavelengths: data and fit, or with a
    `scale` the residuals (data − fit)/scale."""
    from kinfit.figures.wavelengths import choose_wavelengths

    fitted = spectra.fitted[spectra.runs.index(run.name)]
    picks = choose_wavelengths(spectra)
    style = species_styles([f"{w:g}" for w in picks])
    for w in picks:
        col = int(np.argmin(np.abs(spectra.wavelengths - w)))
        label = f"{w:g} {spectra.wavelength_unit}"
        color, marker = style[f"{w:g}"]
        data = run.spectrum.values[:, col]
        if scale is not None:
            ax.plot(run.spectrum.times, (data - fitted[:, col]) / scale, linestyle="none",
                    marker=marker, markersize=3, color=color, label=label)
            continue
        ax.plot(run.spectrum.times, data, linestyle="none", marker=marker, markersize=3,
                color=color, alpha=0.7, label=f"{label} data")
        ax.plot(run.spectrum.times, fitted[:, col], color=color, lw=1.5, label=f"{label} fit")


def plot_residuals(result, fig=None):
    """Residuals (observed − fitted) against time, one panel per run, on one y scale.

    With declared noise the residuals are (observed − fitted)/σ and the band
    marks ±2; otherwise they are in the data's units and the band marks ±2σ̂.

    Returns
    -------
    matplotlib.figure.Figure
    """
    exp = result.experiment
    style = species_styles(exp.species)
    fig, axes, spare = panel_grid(fig, len(exp.runs), height=2.6, sharey=True)
    band = 2.0 if result.noise_declared else 2.0 * (result.sigma or 0.0)
    unit = result.residual_unit
    obs_start = 0
    for ax, run in zip(axes, exp.runs):
        for trace in run.traces:
            n = trace.times.size
            res = -result.residuals[obs_start:obs_start + n]     # observed − fitted
            obs_start += n
            color, marker = style[trace.species]
            ax.plot(trace.times, res, linestyle="none", marker=marker, markersize=3.5,
                    color=color, label=trace.species)
        signals = getattr(result, "signals", None)
        if run.spectrum is not None and signals is not None and signals.spectra is not None:
            declared = exp.signals.spectra.noise
            _spectrum_panel(ax, signals.spectra, run,
                            scale=declared if result.noise_declared else 1.0)
        ax.axhline(0.0, color="0.3", lw=0.8)
        if band:
            ax.axhspan(-band, band, color="0.85", zorder=0)
        ax.set_title(run.name, fontsize=9)
        ax.set_xlabel(f"time ({unit_text(exp.units.time)})")
        ax.set_ylabel("(observed − fitted)/σ" if result.noise_declared
                      else f"observed − fitted ({unit_text(unit)})" if unit
                      else "observed − fitted")
    legend_once(fig, axes, spare)
    fig.suptitle("residuals, observed − fitted (grey band: ±2σ)" if result.noise_declared
                 else "residuals, observed − fitted (grey band: ±2σ̂)", fontsize=11)
    return fig


def plot_trajectory(trajectory, units=None, title=None, fig=None):
    """Simulated concentrations of every species against time.

    Parameters
    ----------
    trajectory : Trajectory
    units : Units, optional
        For the axis labels.
    title : str, optional
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if fig is None:
        fig = Figure(figsize=(6.0, 4.0), layout="constrained")
    ax = fig.subplots()
    style = species_styles(trajectory.species)
    for i, species in enumerate(trajectory.species):
        ax.plot(trajectory.times, trajectory.conc[:, i], color=style[species][0], lw=1.8,
                label=species)
    ax.set_xlabel(f"time ({unit_text(units.time)})" if units else "time")
    ax.set_ylabel(f"concentration ({unit_text(units.concentration)})" if units
                  else "concentration")
    ax.legend(fontsize=8, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return fig
