"""The look shared by every kinfit figure: colours, markers, panel grids, labels.

Colours are the Okabe–Ito palette, which readers with the common forms of
colour-blindness can tell apart (Okabe & Ito, "Color Universal Design",
2008); species are also told apart by marker shape. Panels are laid out in a
grid of at most three columns on a :class:`matplotlib.figure.Figure` (no
pyplot global state).
"""

from __future__ import annotations

import math

from matplotlib.figure import Figure

__all__ = ["PALETTE", "MARKERS", "species_styles", "panel_grid", "run_title",
           "legend_on_first", "plain_log_axes", "axis_label"]

PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")


def species_styles(names):
    """Colour and marker of each name, in order: {name: (colour, marker)}."""
    return {s: (PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)])
            for i, s in enumerate(names)}


def panel_grid(fig, n, width=4.2, height=3.2):
    """`n` panels in rows of at most three; unused grid cells are hidden.

    Parameters
    ----------
    fig : matplotlib.figure.Figure or None
        Drawn into when given; otherwise a new figure sized for the grid.
    n : int
    width, height : float
        Inches per panel.

    Returns
    -------
    (Figure, array of Axes [n])
    """
    cols = min(3, n)
    rows = math.ceil(n / cols)
    if fig is None:
        fig = Figure(figsize=(width * cols, height * rows), layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False).ravel()
    for ax in axes[n:]:
        ax.set_visible(False)
    return fig, axes[:n]


def run_title(run, units):
    """A panel title naming a run and its starting concentrations."""
    parts = [f"{s} {v:g}" for s, v in run.initial.items() if v]
    parts += [f"{s} fitted" for s in run.fitted_initial]
    text = ", ".join(parts)
    return f"{run.name}: {text} {units.concentration}" if text else run.name


def legend_on_first(axes):
    """A legend on the first panel that has labelled lines."""
    for ax in axes:
        if ax.get_legend_handles_labels()[0]:
            ax.legend(fontsize=7, frameon=False)
            return


def plain_log_axes(ax, xticks):
    """Log-log axes with plain numbers: x ticks at the given values, y at 1, 2, 5 × 10^n."""
    from matplotlib import ticker

    ax.set_xscale("log")
    ax.set_yscale("log")
    plain = ticker.FuncFormatter(lambda v, _: f"{v:g}")
    ax.xaxis.set_major_locator(ticker.FixedLocator(xticks))
    ax.yaxis.set_major_locator(ticker.LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_formatter(plain)
        axis.set_minor_formatter(ticker.NullFormatter())


def axis_label(name, unit):
    """``'k (s^-1)'``, or the bare name without a unit."""
    return f"{name} ({unit})" if unit else name
