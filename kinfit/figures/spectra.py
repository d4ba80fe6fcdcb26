"""Figures of spectrometer data: resolved spectra, traces at chosen wavelengths,
residual maps and the singular values of the spectra."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from kinfit.figures.style import (
    PALETTE,
    legend_once,
    panel_grid,
    run_title,
    species_styles,
    unit_text,
)

__all__ = ["plot_spectra", "plot_wavelength_traces", "plot_residual_map", "plot_components"]


def plot_spectra(spectra, fig=None):
    """Resolved species spectra with ±2 standard-error bands.

    Parameters
    ----------
    spectra : ResolvedSpectra
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if fig is None:
        fig = Figure(figsize=(6.5, 4.2), layout="constrained")
    ax = fig.subplots()
    style = species_styles(spectra.species)
    wl = spectra.wavelengths
    for i, species in enumerate(spectra.species):
        color = style[species][0]
        ax.plot(wl, spectra.values[i], color=color, lw=1.8, label=species)
        se = spectra.stderr[i]
        if np.isfinite(se).any():
            ax.fill_between(wl, spectra.values[i] - 2 * se, spectra.values[i] + 2 * se,
                            color=color, alpha=0.2, lw=0)
    ax.axhline(0.0, color="0.5", lw=0.6)
    ax.set_xlabel(f"wavelength ({spectra.wavelength_unit})")
    ax.set_ylabel(f"absorptivity ({unit_text(spectra.unit)})" if spectra.unit
                  else "absorptivity")
    ax.set_title("resolved spectra (bands: ±2 standard errors)", fontsize=10)
    ax.legend(fontsize=8, frameon=False)
    return fig


def plot_wavelength_traces(result, wavelengths, fig=None):
    """Measured and fitted full-spectrum data at chosen wavelengths, one panel per run.

    Parameters
    ----------
    result : FitResult
        With resolved spectra.
    wavelengths : sequence of float
        Wavelengths to show (those of the data).
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    spectra = result.signals.spectra
    runs = [r for r in result.experiment.runs if r.name in spectra.runs]
    fig, axes, spare = panel_grid(fig, len(runs))
    labels = [f"{w:g} {spectra.wavelength_unit}" for w in wavelengths]
    style = species_styles(labels)
    columns = [int(np.argmin(np.abs(spectra.wavelengths - w))) for w in wavelengths]
    for ax, run in zip(axes, runs):
        fitted = spectra.fitted[spectra.runs.index(run.name)]
        data = run.spectrum
        for label, col in zip(labels, columns):
            color, marker = style[label]
            ax.plot(data.times, data.values[:, col], linestyle="none", marker=marker,
                    markersize=3, color=color, alpha=0.7, label=f"{label} data")
            ax.plot(data.times, fitted[:, col], color=color, lw=1.5, label=f"{label} fit")
        ax.set_title(run_title(run, result.experiment.units), fontsize=9)
        ax.set_xlabel(f"time ({unit_text(result.experiment.units.time)})")
        ax.set_ylabel("signal")
    legend_once(fig, axes, spare)
    fig.suptitle("full spectra at chosen wavelengths: data and global fit", fontsize=11)
    return fig


def plot_residual_map(result, fig=None):
    """Residuals (observed − fitted) of full-spectrum data as time × wavelength maps, per run.

    Returns
    -------
    matplotlib.figure.Figure
    """
    spectra = result.signals.spectra
    runs = [r for r in result.experiment.runs if r.name in spectra.runs]
    maps = [r.spectrum.values - spectra.fitted[spectra.runs.index(r.name)] for r in runs]
    limit = max(float(np.max(np.abs(m))) for m in maps) or 1.0
    fig, axes, _ = panel_grid(fig, len(runs))
    wl = spectra.wavelengths
    image = None
    for ax, run, res in zip(axes, runs, maps):
        times = run.spectrum.times
        image = ax.pcolormesh(wl, times, res, cmap="RdBu_r", vmin=-limit, vmax=limit,
                              shading="nearest")
        ax.set_title(run.name, fontsize=9)
        ax.set_xlabel(f"wavelength ({spectra.wavelength_unit})")
        ax.set_ylabel(f"time ({unit_text(result.experiment.units.time)})")
    if image is not None:
        fig.colorbar(image, ax=list(axes), label="observed − fitted", shrink=0.8)
    fig.suptitle("residual map: structure here means the model misses something", fontsize=11)
    return fig


def plot_components(components, n_absorbers=None, fig=None):
    """Singular values of the stacked spectra with the significance threshold.

    Parameters
    ----------
    components : Components
    n_absorbers : int, optional
        Absorbing species of the model, marked for comparison.
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if fig is None:
        fig = Figure(figsize=(6.0, 4.0), layout="constrained")
    ax = fig.subplots()
    s = components.singular_values[:min(30, components.singular_values.size)]
    index = np.arange(1, s.size + 1)
    significant = s > components.threshold
    ax.semilogy(index[significant], s[significant], "o", color=PALETTE[0],
                label=f"significant ({components.n_significant})")
    ax.semilogy(index[~significant], s[~significant], "o", mfc="none", color="0.4",
                label="noise")
    ax.axhline(components.threshold, color=PALETTE[1], ls="--", lw=1.2, label="threshold")
    if components.n_used is not None:
        ax.axvline(components.n_used + 0.5, color=PALETTE[2], lw=1.0,
                   label=f"fitted: first {components.n_used}")
    if n_absorbers is not None:
        ax.axvline(n_absorbers + 0.5, color=PALETTE[3], ls=":", lw=1.2,
                   label=f"model: {n_absorbers} absorbing species")
    ax.set_xlabel("component")
    ax.set_ylabel("singular value")
    ax.set_title("SVD of the spectra", fontsize=10)
    ax.legend(fontsize=8, frameon=False)
    return fig
