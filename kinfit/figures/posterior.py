"""Figures of a posterior: corner plot, posterior bands of each run, likelihood profiles."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from kinfit.figures.style import (
    PALETTE,
    axis_label,
    panel_grid,
    run_title,
    species_styles,
)

__all__ = ["plot_corner", "plot_bands", "plot_profiles"]


def plot_corner(posterior, fig=None):
    """Corner plot of the posterior (the ``corner`` package).

    One-dimensional histograms on the diagonal with the 2.5, 50 and 97.5 %
    quantiles dashed, pairwise 2-D histograms with 0.5σ–2σ contours below
    it, and the least-squares values marked.

    Parameters
    ----------
    posterior : Posterior
    fig : matplotlib.figure.Figure, optional
        Empty, or holding n_dim × n_dim axes.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import corner

    n = len(posterior.names)
    if fig is None:
        size = max(2.0 * n, 4.0)
        fig = Figure(figsize=(size, size))
    truths = [posterior.fit.values.get(name) for name in posterior.names]
    labels = [axis_label(name, posterior.units.get(name)) for name in posterior.names]
    samples = posterior.samples
    spread = np.ptp(samples, axis=0) if samples.shape[0] else np.zeros(n)
    ranges = [(lo - 1e-12 * max(abs(lo), 1.0), lo + 1e-12 * max(abs(lo), 1.0)) if s == 0
              else 0.999 for lo, s in zip(samples.min(axis=0), spread)]
    corner.corner(samples, fig=fig, labels=labels, truths=truths, truth_color=PALETTE[1],
                  quantiles=[0.025, 0.5, 0.975], show_titles=True, title_fmt=".3g",
                  title_kwargs={"fontsize": 8}, label_kwargs={"fontsize": 9},
                  color=PALETTE[0], range=ranges, plot_datapoints=False, max_n_ticks=3,
                  levels=(1 - np.exp(-0.5), 1 - np.exp(-2.0)))
    fig.text(0.98, 0.98, "posterior\norange: least-squares fit\ndashed: 2.5, 50, 97.5 %",
             ha="right", va="top", fontsize=9)
    return fig


def plot_bands(posterior, fig=None):
    """Each run's data with the posterior median curve and 95 % bands.

    The darker band is the 95 % credible band of the model curve (what the
    parameters' uncertainty allows); the lighter one the 95 %
    posterior-predictive band of a new measurement (curve plus noise).

    Returns
    -------
    matplotlib.figure.Figure
    """
    exp = posterior.fit.experiment
    units = exp.units
    style = species_styles(exp.species)
    bands = {b.run: b for b in posterior.bands}
    fig, axes = panel_grid(fig, len(exp.runs))
    for ax, run in zip(axes, exp.runs):
        band = bands.get(run.name)
        for trace in run.traces:
            color, marker = style[trace.species]
            if band is not None:
                j = band.species.index(trace.species)
                ax.fill_between(band.times, band.predictive_low[:, j], band.predictive_high[:, j],
                                color=color, alpha=0.15, lw=0)
                ax.fill_between(band.times, band.curve_low[:, j], band.curve_high[:, j],
                                color=color, alpha=0.4, lw=0)
                ax.plot(band.times, band.median[:, j], color=color, lw=1.4,
                        label=f"{trace.species} posterior median")
            ax.plot(trace.times, trace.values, linestyle="none", marker=marker, markersize=3.0,
                    color=color, alpha=0.8, label=f"{trace.species} data")
        ax.set_title(run_title(run, units), fontsize=9)
        ax.set_xlabel(f"time ({units.time})")
        ax.set_ylabel(f"concentration ({units.concentration})")
    if len(axes):
        axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle(f"{posterior.fit.mechanism.name}: posterior bands (dark: 95 % of the curve; "
                 f"light: 95 % of a new measurement)", fontsize=10)
    return fig


def plot_profiles(posterior, fig=None):
    """Profile likelihood of each parameter, with the quadratic approximation.

    Each panel shows ΔD = D_profile − D_min against the parameter, the
    thresholds of the 68 and 95 % intervals, and the parabola ((θ − θ̂)/SE)²
    that the covariance interval assumes; where the two part, the model is
    non-linear in that parameter.

    Returns
    -------
    matplotlib.figure.Figure
    """
    profiles = posterior.profiles
    names = list(profiles.parameters) if profiles is not None else []
    fig, axes = panel_grid(fig, max(len(names), 1), width=3.8, height=3.0)
    if not names:
        axes[0].text(0.5, 0.5, "no profile computed", ha="center", va="center",
                     transform=axes[0].transAxes)
        return fig
    for ax, name in zip(axes, names):
        p = profiles.parameters[name]
        ax.plot(p.values, p.delta, marker="o", markersize=3, color=PALETTE[0], lw=1.4,
                label="profile")
        se = posterior.fit.stderr.get(name)
        if se:
            x = np.linspace(p.values.min(), p.values.max(), 200)
            ax.plot(x, ((x - p.best) / se) ** 2, color=PALETTE[1], lw=1.0, ls="--",
                    label="covariance (quadratic)")
        for level, q in profiles.thresholds.items():
            ax.axhline(q, color="0.5", lw=0.8, ls=":")
            ax.text(ax.get_xlim()[0], q, f" {round(100 * level)} %", fontsize=7, va="bottom",
                    color="0.4")
        ax.set_ylim(bottom=-0.2, top=max(1.3 * max(profiles.thresholds.values()),
                                         float(min(p.delta.max(), 12.0)) + 0.5))
        ax.set_xlabel(axis_label(name, posterior.units.get(name)))
        ax.set_ylabel("Δ deviance")
        ax.set_title(name if p.closed else f"{name}: does not close", fontsize=9)
    axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle("profile likelihood", fontsize=11)
    return fig
