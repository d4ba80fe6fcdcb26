"""Figures: measured traces with fitted curves, residuals, simulated trajectories.

The only module that imports matplotlib. Figures are built with
:class:`matplotlib.figure.Figure` (no pyplot global state), take results
(never a fitter), accept an optional ``fig=`` to draw into, and return the
figure. Colours are the Okabe–Ito palette, which readers with the common
forms of colour-blindness can tell apart (Okabe & Ito, "Color Universal
Design", 2008); species are also told apart by marker shape.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.figure import Figure

__all__ = ["plot_traces", "plot_residuals", "plot_trajectory", "PALETTE"]

PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")


def _style(species_list):
    return {s: (PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)])
            for i, s in enumerate(species_list)}


def _grid(fig, n, width=4.2, height=3.2):
    cols = min(3, n)
    rows = math.ceil(n / cols)
    if fig is None:
        fig = Figure(figsize=(width * cols, height * rows), layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False).ravel()
    for ax in axes[n:]:
        ax.set_visible(False)
    return fig, axes[:n]


def _initial_text(run, units):
    parts = [f"{s} {v:g}" for s, v in run.initial.items() if v]
    parts += [f"{s} fitted" for s in run.fitted_initial]
    text = ", ".join(parts)
    return f"{run.name}: {text} {units.concentration}" if text else run.name


def plot_traces(result, fig=None):
    """Each run's data with the fitted curves, one panel per run.

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
    style = _style(list(measured) + [s for s in mech.species if s not in measured])
    fig, axes = _grid(fig, len(exp.runs))
    for ax, run, curve in zip(axes, exp.runs, result.curves):
        for trace in run.traces:
            color, marker = style[trace.species]
            ax.plot(trace.times, trace.values, linestyle="none", marker=marker, markersize=3.5,
                    color=color, alpha=0.8, label=f"{trace.species} data")
            ax.plot(curve.times, curve[trace.species], color=color, lw=1.6,
                    label=f"{trace.species} fit")
        ax.set_title(_initial_text(run, units), fontsize=9)
        ax.set_xlabel(f"time ({units.time})")
        ax.set_ylabel(f"concentration ({units.concentration})")
    if len(axes):
        axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle(f"{mech.name}: data and global fit", fontsize=11)
    return fig


def plot_residuals(result, fig=None):
    """Residuals against time, one panel per run.

    With declared noise the residuals are (f - y)/σ and the band marks ±2;
    otherwise they are in concentration units and the band marks ±2σ̂.

    Returns
    -------
    matplotlib.figure.Figure
    """
    exp = result.experiment
    style = _style(exp.species)
    fig, axes = _grid(fig, len(exp.runs), height=2.6)
    band = 2.0 if result.noise_declared else 2.0 * (result.sigma or 0.0)
    obs_start = 0
    for ax, run in zip(axes, exp.runs):
        for trace in run.traces:
            n = trace.times.size
            res = result.residuals[obs_start:obs_start + n]
            obs_start += n
            color, marker = style[trace.species]
            ax.plot(trace.times, res, linestyle="none", marker=marker, markersize=3.5,
                    color=color, label=trace.species)
        ax.axhline(0.0, color="0.3", lw=0.8)
        if band:
            ax.axhspan(-band, band, color="0.85", zorder=0)
        ax.set_title(run.name, fontsize=9)
        ax.set_xlabel(f"time ({exp.units.time})")
        ax.set_ylabel("(fit − data)/σ" if result.noise_declared
                      else f"fit − data ({exp.units.concentration})")
    if len(axes):
        axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle("residuals (grey band: ±2σ)", fontsize=11)
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
    style = _style(trajectory.species)
    for i, species in enumerate(trajectory.species):
        ax.plot(trajectory.times, trajectory.conc[:, i], color=style[species][0], lw=1.8,
                label=species)
    ax.set_xlabel(f"time ({units.time})" if units else "time")
    ax.set_ylabel(f"concentration ({units.concentration})" if units else "concentration")
    ax.legend(fontsize=8, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return fig
