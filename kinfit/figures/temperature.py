"""Figures of temperature dependence: Arrhenius and Eyring plots, and predictions.

The global fit's law is drawn with its band inside the fitted temperature
range and dotted outside it, beside the two-stage per-temperature rate
constants; predictions outside the fitted range are labelled EXTRAPOLATED.
"""

from __future__ import annotations

import textwrap

import numpy as np
from matplotlib.figure import Figure

from kinfit.figures.fit import plot_trajectory
from kinfit.figures.style import PALETTE, panel_grid, unit_text

__all__ = ["plot_arrhenius", "plot_eyring", "plot_prediction"]


def _temperature_grid(act, predicted):
    lo, hi = act.temperature_range
    temps = [lo, hi] + [r.temperature for r in predicted or ()]
    inv = 1.0 / np.array(temps)
    pad = 0.05 * (inv.max() - inv.min() or inv.max())
    return 1.0 / np.linspace(inv.max() + pad, inv.min() - pad, 200)


def _activation_panel(ax, act, stage, predicted, eyring):
    """One Arrhenius (ln k) or Eyring (ln k/T) panel; returns False if not drawable."""
    from kinfit.numerics.temperature_laws import ln_rate_form

    if eyring and act.si_factor is None:
        ax.text(0.5, 0.5, f"no Eyring plot for {act.constant}:\nits unit cannot be "
                f"converted to (mol/L)¹⁻ⁿ s⁻¹", ha="center", va="center",
                transform=ax.transAxes, fontsize=8)
        return False
    shift = (lambda t: np.log(act.si_factor / t)) if eyring else (lambda t: 0.0 * t)
    grid = _temperature_grid(act, predicted)
    x = 1000.0 / grid
    ln_k = np.array([ln_rate_form(act.law, act.reference, t).value(*act.center)
                     for t in grid]) + shift(grid)
    lo, hi = act.temperature_range
    inside = (grid >= lo * (1 - 1e-9)) & (grid <= hi * (1 + 1e-9))
    if act.covariance is not None:
        se = np.sqrt([max(ln_rate_form(act.law, act.reference, t).variance(act.covariance), 0)
                      for t in grid])
        ax.fill_between(x, ln_k - act.quantile * se, ln_k + act.quantile * se,
                        color=PALETTE[0], alpha=0.2, lw=0,
                        label=f"global fit, {100 * act.level:g} % band")
    ax.plot(np.where(inside, x, np.nan), np.where(inside, ln_k, np.nan), color=PALETTE[0],
            lw=1.8, label=f"global fit ({act.law.capitalize()} law)")
    ax.plot(np.where(inside, np.nan, x), np.where(inside, np.nan, ln_k), color=PALETTE[0],
            lw=1.2, ls=":", label="outside the fitted range")
    ax.axvspan(1000.0 / hi, 1000.0 / lo, color="0.92", zorder=0, label="fitted range")
    if stage is not None:
        line = stage.eyring if eyring else stage.arrhenius
        y = np.log(stage.k) + shift(stage.temperatures)
        ax.errorbar(1000.0 / stage.temperatures, y, yerr=stage.k_stderr / stage.k,
                    fmt="o", color=PALETTE[1], ms=4, capsize=3,
                    label="k at each temperature (±1 s.e.)")
        if line is not None:
            xs = 1000.0 / stage.temperatures
            xs = np.array([xs.min(), xs.max()])
            ax.plot(xs, line.intercept + line.slope * xs / 1000.0, color=PALETTE[1], lw=1.2,
                    ls="--", label="two-stage line")
    for rate in predicted or ():
        y = np.log(rate.value) + shift(rate.temperature)
        err = None if rate.stderr is None else rate.stderr / rate.value
        label = "prediction (EXTRAPOLATED)" if rate.extrapolated else "prediction"
        ax.errorbar([1000.0 / rate.temperature], [y], yerr=err, fmt="D", mfc="none",
                    color=PALETTE[3] if rate.extrapolated else PALETTE[2], ms=6, capsize=3,
                    label=label)
    ax.set_xlabel("1000 / T (1/K)")
    unit = unit_text(act.unit) or "k's unit"
    ax.set_ylabel(f"ln(k/T), k in {unit_text(act.si_unit) or '(mol/L)¹⁻ⁿ s⁻¹'}, T in K"
                  if eyring else f"ln(k / ({unit}))")
    ax.set_title(f"{act.constant}: {'Eyring' if eyring else 'Arrhenius'} plot", fontsize=10)
    ax.legend(fontsize=7, frameon=False, loc="best")
    return True


def _activation_figure(activations, two_stage, predicted, fig, eyring):
    fig, axes, _ = panel_grid(fig, len(activations), width=5.0, height=3.8)
    for ax, act in zip(axes, activations):
        stage = None
        if two_stage is not None:
            stage = next((law for law in two_stage.laws if law.constant == act.constant),
                         None)
        preds = [r for name, r in (predicted or ()) if name == act.constant]
        _activation_panel(ax, act, stage, preds, eyring)
    return fig


def plot_arrhenius(activations, two_stage=None, predicted=None, fig=None):
    """Arrhenius plot: ln k against 1/T, one panel per rate constant.

    Parameters
    ----------
    activations : sequence of Activation
        The global fit's temperature laws (line and its band).
    two_stage : TwoStage, optional
        Per-temperature k with ±1 standard error bars, and its straight line.
    predicted : sequence of (str, RateAt), optional
        Predicted rate constants to mark; extrapolated ones are labelled so.
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    return _activation_figure(activations, two_stage, predicted, fig, eyring=False)


def plot_eyring(activations, two_stage=None, predicted=None, fig=None):
    """Eyring plot: ln(k/T) against 1/T, k in (mol/L)^(1-n) s^-1.

    Same parameters as :func:`plot_arrhenius`.

    Returns
    -------
    matplotlib.figure.Figure
    """
    return _activation_figure(activations, two_stage, predicted, fig, eyring=True)


def plot_prediction(prediction, title=None, fig=None):
    """Predicted concentrations with their band; extrapolations are flagged on the figure.

    Parameters
    ----------
    prediction : Prediction
    title : str, optional
    fig : matplotlib.figure.Figure, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if fig is None:
        fig = Figure(figsize=(6.5, 4.5), layout="constrained")
    fig = plot_trajectory(prediction, prediction.units, fig=fig)   # same times/conc/species
    ax = fig.axes[0]
    if prediction.lower is not None:
        for line, lower, upper in zip(ax.lines, prediction.lower.T, prediction.upper.T):
            ax.fill_between(prediction.times, lower, upper, color=line.get_color(), alpha=0.2,
                            lw=0)
    parts = [title] if title else []
    if prediction.temperature is not None:
        parts.append(f"{prediction.temperature:.2f} K")
    if prediction.lower is not None:
        parts.append(f"{100 * prediction.level:g} % band from {prediction.uncertainty}")
    lines = textwrap.wrap(", ".join(parts), 80)
    if prediction.extrapolated:
        flags = [textwrap.fill(flag, 80) for flag in prediction.flags]
        lines = ["EXTRAPOLATED: outside the fitted range"] + flags + lines
    ax.set_title("\n".join(lines), fontsize=8,
                 color="#B00000" if prediction.extrapolated else "black")
    return fig
