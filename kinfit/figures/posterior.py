"""Figures of a posterior: corner plot, posterior bands of each run, likelihood profiles.

A parameter whose values are very small or large (a rate constant of 1.5e-4)
is shown scaled by a power of ten named in its axis label, ``k (10⁻⁴ mM⁻¹·⁵
min⁻¹)``, so that tick labels stay short and carry the digits that tell them
apart.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from kinfit.core.formatting import format_interval, format_value
from kinfit.figures.style import (
    PALETTE,
    axis_label,
    decade,
    legend_once,
    panel_grid,
    plain_ticks,
    run_title,
    species_styles,
    unit_text,
)

__all__ = ["plot_corner", "plot_bands", "plot_profiles"]


def plot_corner(posterior, fig=None):
    """Corner plot of the posterior (the ``corner`` package).

    One-dimensional histograms on the diagonal with the 2.5, 50 and 97.5 %
    quantiles dashed, pairwise 2-D histograms with 0.5σ–2σ contours below
    it, and the least-squares values marked. Each diagonal panel is titled
    with the median and the 95 % posterior interval, rounded to the
    posterior sd's second digit; tick labels are plain numbers with the
    digits their spacing needs (no offset).

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
        size = max(2.2 * n, 4.0)
        fig = Figure(figsize=(size, size))
    samples = np.asarray(posterior.samples, dtype=float)
    scales = [decade(samples[:, i]) for i in range(n)]
    factor = np.array([10.0 ** -e for e in scales])
    scaled = samples * factor
    truths = [None if posterior.fit.values.get(name) is None
              else posterior.fit.values[name] * f for name, f in zip(posterior.names, factor)]
    labels = [axis_label(name, posterior.units.get(name), e)
              for name, e in zip(posterior.names, scales)]
    spread = np.ptp(scaled, axis=0) if scaled.shape[0] else np.zeros(n)
    ranges = [(lo - 1e-12 * max(abs(lo), 1.0), lo + 1e-12 * max(abs(lo), 1.0)) if s == 0
              else 0.999 for lo, s in zip(scaled.min(axis=0), spread)]
    corner.corner(scaled, fig=fig, labels=labels, truths=truths, truth_color=PALETTE[1],
                  quantiles=[0.025, 0.5, 0.975], show_titles=False,
                  label_kwargs={"fontsize": 9}, labelpad=0.08, color=PALETTE[0],
                  range=ranges, plot_datapoints=False, max_n_ticks=3,
                  levels=(1 - np.exp(-0.5), 1 - np.exp(-2.0)))
    axes = np.array(fig.axes).reshape(n, n)
    for i, name in enumerate(posterior.names):
        column = samples[:, i]
        if column.size:
            lo, mid, hi = np.percentile(column, [2.5, 50, 97.5])
            sd = float(np.std(column))
            unit = unit_text(posterior.units.get(name))
            axes[i, i].set_title(f"{name} = {format_value(mid, sd or None)}\n95 %: "
                                 f"{format_interval((lo, hi), sd or None)} {unit}".rstrip(),
                                 fontsize=8)
        if i == n - 1:
            for j in range(n):
                plain_ticks(axes[i, j], "x")    # the bottom row carries the x tick labels
        if i > 0:
            plain_ticks(axes[i, 0], "y")        # the first column the y tick labels
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
    fig, axes, spare = panel_grid(fig, len(exp.runs))
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
        ax.set_xlabel(f"time ({unit_text(units.time)})")
        ax.set_ylabel(f"concentration ({unit_text(units.concentration)})")
    legend_once(fig, axes, spare)
    fig.suptitle(f"{posterior.fit.mechanism.name}: posterior bands (dark: 95 % of the curve; "
                 f"light: 95 % of a new measurement)", fontsize=10)
    return fig


def plot_profiles(posterior, fig=None):
    """Profile likelihood of each parameter, with the quadratic approximation.

    Each panel shows ΔD = D_profile − D_min against the parameter (points
    where it was computed, joined by a monotone cubic through them), the
    thresholds of the 68 and 95 % intervals (named on the right-hand axis),
    and the parabola ((θ − θ̂)/SE)² that the covariance interval assumes;
    where the two part, the model is non-linear in that parameter.

    Returns
    -------
    matplotlib.figure.Figure
    """
    profiles = posterior.profiles
    names = list(profiles.parameters) if profiles is not None else []
    fig, axes, spare = panel_grid(fig, max(len(names), 1), width=3.8, height=3.0)
    if not names:
        axes[0].text(0.5, 0.5, "no profile computed", ha="center", va="center",
                     transform=axes[0].transAxes)
        return fig
    levels = sorted(profiles.thresholds.items())
    for ax, name in zip(axes, names):
        p = profiles.parameters[name]
        e = decade(p.values)
        f = 10.0 ** -e
        x, y = _smooth(np.asarray(p.values, dtype=float) * f, np.asarray(p.delta, dtype=float))
        ax.plot(x, y, color=PALETTE[0], lw=1.4, label="profile")
        ax.plot(np.asarray(p.values) * f, p.delta, linestyle="none", marker="o", markersize=3,
                color=PALETTE[0], label="profile: computed points")
        se = posterior.fit.stderr.get(name)
        if se:
            grid = np.linspace(np.min(p.values), np.max(p.values), 200)
            ax.plot(grid * f, ((grid - p.best) / se) ** 2, color=PALETTE[1], lw=1.0, ls="--",
                    label="covariance (quadratic)")
        for _, q in levels:
            ax.axhline(q, color="0.5", lw=0.8, ls=":")
        ax.set_ylim(bottom=-0.2, top=max(1.3 * max(profiles.thresholds.values()),
                                         float(min(np.max(p.delta), 12.0)) + 0.5))
        right = ax.secondary_yaxis("right")
        right.set_yticks([q for _, q in levels],
                         labels=[f"{round(100 * level)} %" for level, _ in levels])
        right.tick_params(labelsize=7, colors="0.4", length=0)
        plain_ticks(ax, "x")
        ax.set_xlabel(axis_label(name, posterior.units.get(name), e))
        ax.set_ylabel("Δ deviance")
        ax.set_title(name if p.closed else f"{name}: does not close", fontsize=9)
    legend_once(fig, axes, spare)
    fig.suptitle("profile likelihood", fontsize=11)
    return fig


def _smooth(x, y, n=200):
    """A smooth curve through the computed points of a profile: a monotone (shape-keeping)
    cubic, scipy.interpolate.PchipInterpolator; straight lines with fewer than 3 points."""
    order = np.argsort(x)
    x, y = x[order], y[order]
    keep = np.concatenate([[True], np.diff(x) > 0]) & np.isfinite(y)
    x, y = x[keep], y[keep]
    if x.size < 3:
        return x, y
    from scipy.interpolate import PchipInterpolator

    grid = np.linspace(x[0], x[-1], n)
    return grid, PchipInterpolator(x, y)(grid)
