"""The look shared by every kinfit figure: colours, markers, panel grids, labels.

Colours are the Okabe–Ito palette, which readers with the common forms of
colour-blindness can tell apart (Okabe & Ito, "Color Universal Design",
2008); species are also told apart by marker shape. Panels are laid out in a
grid of at most three columns, without empty slots (a short last row leaves
room for the legend), on a :class:`matplotlib.figure.Figure` (no pyplot
global state). Units are shown with superscripts (:func:`unit_text`).
"""

from __future__ import annotations

import math

from matplotlib.figure import Figure

from kinfit.core.formatting import superscripts

__all__ = ["PALETTE", "MARKERS", "species_styles", "grid_shape", "panel_grid", "run_title",
           "legend_once", "unit_text", "plain_log_axes", "axis_label", "decade",
           "plain_ticks"]

PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")


def species_styles(names):
    """Colour and marker of each name, in order: {name: (colour, marker)}."""
    return {s: (PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)])
            for i, s in enumerate(names)}


def grid_shape(n):
    """(rows, columns) of `n` panels: a row of up to three, 2 × 2 for four, else rows of three."""
    cols = n if n <= 3 else 2 if n == 4 else 3
    return math.ceil(n / max(cols, 1)), max(cols, 1)


def panel_grid(fig, n, width=4.2, height=3.2, sharey=False):
    """`n` panels laid out without empty slots (see :func:`grid_shape`).

    When the last row is not full, the cells left in it become one spare
    area (axes switched off) that :func:`legend_once` fills with the legend.

    Parameters
    ----------
    fig : matplotlib.figure.Figure or None
        Drawn into when given; otherwise a new figure sized for the grid.
    n : int
    width, height : float
        Inches per panel.
    sharey : bool
        All panels share the first one's y axis.

    Returns
    -------
    (Figure, list of Axes [n], Axes or None)
        The figure, the panels and the spare area.
    """
    rows, cols = grid_shape(n)
    if fig is None:
        fig = Figure(figsize=(width * cols, height * rows), layout="constrained")
    grid = fig.add_gridspec(rows, cols)
    axes = []
    for i in range(n):
        share = axes[0] if sharey and axes else None
        axes.append(fig.add_subplot(grid[i // cols, i % cols], sharey=share))
    spare = None
    if n % cols:
        spare = fig.add_subplot(grid[rows - 1, n % cols:])
        spare.axis("off")
    return fig, axes, spare


def legend_once(fig, axes, spare=None, handles=()):
    """One legend for all panels: in the spare area, else below the panels.

    Entries are `handles` (proxy artists with labels) followed by every
    labelled artist of the panels, each label once. A single panel keeps its
    legend inside.
    """
    entries = {h.get_label(): h for h in handles}
    for ax in axes:
        for handle, label in zip(*ax.get_legend_handles_labels()):
            entries.setdefault(label, handle)
    if not entries:
        return None
    labels, artists = list(entries), list(entries.values())
    if spare is not None:
        return spare.legend(artists, labels, loc="center", frameon=False, fontsize=8,
                            ncol=1 if len(labels) <= 8 else 2)
    if len(axes) == 1:
        return axes[0].legend(artists, labels, fontsize=7, frameon=False)
    engine = fig.get_layout_engine()
    outside = engine is not None and type(engine).__name__ == "ConstrainedLayoutEngine"
    return fig.legend(artists, labels, loc="outside lower center" if outside else
                      "lower center", frameon=False, fontsize=8, ncol=min(len(labels), 6))


def run_title(run, units):
    """A panel title naming a run and its starting concentrations."""
    parts = [f"{s} {v:g}" for s, v in run.initial.items() if v]
    parts += [f"{s} fitted" for s in run.fitted_initial]
    text = ", ".join(parts)
    return f"{run.name}: {text} {unit_text(units.concentration)}" if text else run.name


def unit_text(unit):
    """A unit as figures show it, with superscripts: ``mM^-2 min^-1`` -> ``mM⁻² min⁻¹``."""
    return superscripts(unit)


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


def axis_label(name, unit, scale=0):
    """``'k (s⁻¹)'``, the bare name without a unit; with `scale` e,
    ``'k (10⁻⁴ s⁻¹)'``: the axis shows the value divided by 10^e."""
    parts = ([superscripts(f"10^{scale}")] if scale else []) + ([unit_text(unit)] if unit
                                                                 else [])
    return f"{name} ({' '.join(parts)})" if parts else name


def decade(values):
    """The power of ten e to divide `values` by when their largest magnitude is below
    0.001 or from 10000 up (1 ≤ |value| / 10^e < 10); else 0, as for all zeros."""
    import numpy as np

    finite = np.abs(np.asarray(values, dtype=float))
    finite = finite[np.isfinite(finite) & (finite > 0)]
    if finite.size == 0:
        return 0
    e = math.floor(math.log10(float(np.max(finite))))
    return e if e <= -3 or e >= 4 else 0


def plain_ticks(ax, axis="both"):
    """Tick labels as plain numbers with as many digits as the spacing needs (no offset,
    no ×10ⁿ on the axis: put a power of ten in the label with :func:`axis_label`)."""
    from matplotlib import ticker

    for which in ("x", "y") if axis == "both" else (axis,):
        formatter = ticker.ScalarFormatter(useOffset=False)
        formatter.set_scientific(False)
        getattr(ax, f"{which}axis").set_major_formatter(formatter)
