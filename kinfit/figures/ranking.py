"""Figures of a ranking: support for each candidate, and the initial-rates cross-check."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from kinfit.figures.style import PALETTE, panel_grid, plain_log_axes, unit_text

__all__ = ["plot_weights", "plot_initial_rates"]


def plot_weights(comparison, top=15, fig=None):
    """Support for each candidate: Akaike (AICc) and BIC weights as bars.

    Parameters
    ----------
    comparison : Comparison
    top : int
        Candidates shown, best at the top.
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    rows = comparison.candidates[:top]
    if fig is None:
        fig = Figure(figsize=(7.5, 1.2 + 0.38 * len(rows)), layout="constrained")
    ax = fig.subplots()
    y = np.arange(len(rows))[::-1]
    height = 0.38
    labels = [r.label if len(r.label) <= 45 else r.label[:44] + "…" for r in rows]
    ax.barh(y + height / 2, [r.akaike_weight for r in rows], height, color=PALETTE[0],
            label="Akaike weight (AICc)")
    ax.barh(y - height / 2, [r.bic_weight for r in rows], height, color=PALETTE[1],
            label="BIC weight")
    ax.set_yticks(y, labels, fontsize=8)
    ax.set_xlim(0.0, 1.0)
    ax.set_xlabel("weight (sums to 1 over all candidates)")
    ax.legend(fontsize=8, frameon=False, loc="lower right")
    more = len(comparison.candidates) - len(rows)
    ax.set_title("Support for each candidate" + (f" (top {len(rows)}; {more} more)"
                                                 if more > 0 else ""), fontsize=10)
    return fig


def plot_initial_rates(check, fig=None):
    """Initial rates against starting concentrations on log-log axes.

    One panel per species whose order the regression estimated. Because the
    runs may vary several concentrations at once, each rate is adjusted to
    the other species' geometric-mean starting concentrations c̄ with the
    regression's orders, r0 Π_(o≠s) (c̄_o/c_o)^m_o, so that the panel shows
    the dependence on one species alone (a component-plus-residual plot).
    The solid line has the initial-rates order as slope; the dashed line the
    time-course fit's order, through the same centre.

    Parameters
    ----------
    check : CrossCheck
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    ir = check.initial_rates
    reg = ir.regression
    units = check.initial_rates.rate_unit
    if reg is None:
        if fig is None:
            fig = Figure(figsize=(6.0, 2.5), layout="constrained")
        ax = fig.subplots()
        ax.axis("off")
        ax.text(0.02, 0.9, "No order regression:\n" + "\n".join(ir.notes[:6]), va="top",
                fontsize=8, wrap=True)
        return fig
    fig, axes, _ = panel_grid(fig, len(reg.species), width=4.0, height=3.4)
    centre = reg.log_conc.mean(axis=0)
    fitted = {c.species: c for c in check.orders}
    orders = np.array([reg.orders[s] for s in reg.species])
    for i, (ax, s) in enumerate(zip(axes, reg.species)):
        others = np.arange(len(reg.species)) != i
        adjusted = reg.log_rate + (centre[others] - reg.log_conc[:, others]) @ orders[others]
        x = reg.log_conc[:, i]
        err = reg.log_rate_stderr
        yerr = None if err is None else [np.exp(adjusted) * (1 - np.exp(-err)),
                                         np.exp(adjusted) * (np.exp(err) - 1)]
        ax.errorbar(np.exp(x), np.exp(adjusted), yerr=yerr, fmt="o", color=PALETTE[0],
                    ms=4, capsize=2, label="runs")
        grid = np.linspace(x.min(), x.max(), 50) if np.ptp(x) > 0 else x
        line = reg.log_k + centre[others] @ orders[others] + reg.orders[s] * grid
        se = reg.stderr[s]
        ax.plot(np.exp(grid), np.exp(line), color=PALETTE[0], lw=1.5,
                label=f"initial rates: {reg.orders[s]:.3g}" + (f" ± {se:.2g}" if se else ""))
        if s in fitted:
            mid_x, mid_y = x.mean(), adjusted.mean()
            slope = fitted[s].time_course
            ax.plot(np.exp(grid), np.exp(mid_y + slope * (grid - mid_x)), color=PALETTE[1],
                    lw=1.5, ls="--", label=f"time course: {slope:.3g}")
        plain_log_axes(ax, np.unique(np.round(np.exp(x), 12)))
        ax.set_xlabel(f"[{s}]₀ ({unit_text(ir.concentration_unit)})")
        ax.set_ylabel(f"adjusted initial rate ({unit_text(units)})")
        ax.set_title(f"order in {s}", fontsize=9)
        ax.legend(fontsize=7, frameon=False)
    fig.suptitle(f"Initial rates ({ir.reaction})", fontsize=11)
    return fig
