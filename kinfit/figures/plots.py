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
import textwrap

import numpy as np
from matplotlib.figure import Figure

__all__ = ["plot_traces", "plot_residuals", "plot_trajectory", "plot_arrhenius",
           "plot_eyring", "plot_prediction", "plot_weights", "plot_initial_rates", "plot_corner",
           "plot_bands", "plot_profiles", "plot_spectra", "plot_wavelength_traces",
           "plot_residual_map", "plot_components", "PALETTE"]

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
    signals = getattr(result, "signals", None)
    for ax, run, curve in zip(axes, exp.runs, result.curves):
        for trace in run.traces:
            color, marker = style[trace.species]
            ax.plot(trace.times, trace.values, linestyle="none", marker=marker, markersize=3.5,
                    color=color, alpha=0.8, label=f"{trace.species} data")
            fitted = (curve[trace.species] if trace.species in curve.species
                      else signals.curve(run.name, trace.species, curve))
            ax.plot(curve.times, fitted, color=color, lw=1.6, label=f"{trace.species} fit")
        if run.spectrum is not None and signals is not None and signals.spectra is not None:
            _spectrum_panel(ax, signals.spectra, run)
        ax.set_title(_initial_text(run, units), fontsize=9)
        ax.set_xlabel(f"time ({units.time})")
        measured = {t.species in curve.species for t in run.traces}
        ax.set_ylabel(f"concentration ({units.concentration})" if measured == {True} else
                      "signal" if not run.traces or measured == {False}
                      else "concentration or signal")
    _legend(axes)
    fig.suptitle(f"{mech.name}: data and global fit", fontsize=11)
    return fig


def _legend(axes):
    """A legend on the first panel that has labelled lines."""
    for ax in axes:
        if ax.get_legend_handles_labels()[0]:
            ax.legend(fontsize=7, frameon=False)
            return


def _spectrum_panel(ax, spectra, run, scale=None):
    """Full-spectrum data of one run at the peak wavelengths: data and fit, or with a
    `scale` the residuals (fit − data)/scale."""
    from kinfit.figures.wavelengths import choose_wavelengths

    fitted = spectra.fitted[spectra.runs.index(run.name)]
    picks = choose_wavelengths(spectra)
    style = _style([f"{w:g}" for w in picks])
    for w in picks:
        col = int(np.argmin(np.abs(spectra.wavelengths - w)))
        label = f"{w:g} {spectra.wavelength_unit}"
        color, marker = style[f"{w:g}"]
        data = run.spectrum.values[:, col]
        if scale is not None:
            ax.plot(run.spectrum.times, (fitted[:, col] - data) / scale, linestyle="none",
                    marker=marker, markersize=3, color=color, label=label)
            continue
        ax.plot(run.spectrum.times, data, linestyle="none", marker=marker, markersize=3,
                color=color, alpha=0.7, label=f"{label} data")
        ax.plot(run.spectrum.times, fitted[:, col], color=color, lw=1.5, label=f"{label} fit")


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
        signals = getattr(result, "signals", None)
        if run.spectrum is not None and signals is not None and signals.spectra is not None:
            declared = exp.signals.spectra.noise
            _spectrum_panel(ax, signals.spectra, run,
                            scale=declared if result.noise_declared else 1.0)
        ax.axhline(0.0, color="0.3", lw=0.8)
        if band:
            ax.axhspan(-band, band, color="0.85", zorder=0)
        ax.set_title(run.name, fontsize=9)
        ax.set_xlabel(f"time ({exp.units.time})")
        ax.set_ylabel("(fit − data)/σ" if result.noise_declared
                      else f"fit − data ({exp.units.concentration})")
    _legend(axes)
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


# ------------------------------------------------------------ temperature

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
                f"converted to (mol/L)^(1-n) s^-1", ha="center", va="center",
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
    unit = act.unit or "k's unit"
    ax.set_ylabel(f"ln(k/T), k in {act.si_unit or '(mol/L)^(1-n) s^-1'}, T in K" if eyring
                  else f"ln(k / ({unit}))")
    ax.set_title(f"{act.constant}: {'Eyring' if eyring else 'Arrhenius'} plot", fontsize=10)
    ax.legend(fontsize=7, frameon=False, loc="best")
    return True


def _activation_figure(activations, two_stage, predicted, fig, eyring):
    fig, axes = _grid(fig, len(activations), width=5.0, height=3.8)
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
    fig, axes = _grid(fig, len(reg.species), width=4.0, height=3.4)
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
        _plain_log_axes(ax, np.unique(np.round(np.exp(x), 12)))
        ax.set_xlabel(f"[{s}]0 ({ir.concentration_unit})")
        ax.set_ylabel(f"adjusted initial rate ({units})")
        ax.set_title(f"order in {s}", fontsize=9)
        ax.legend(fontsize=7, frameon=False)
    fig.suptitle(f"Initial rates ({ir.reaction})", fontsize=11)
    return fig


def _plain_log_axes(ax, xticks):
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


def _label(name, unit):
    return f"{name} ({unit})" if unit else name


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
    labels = [_label(name, posterior.units.get(name)) for name in posterior.names]
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
    style = _style(exp.species)
    bands = {b.run: b for b in posterior.bands}
    fig, axes = _grid(fig, len(exp.runs))
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
        ax.set_title(_initial_text(run, units), fontsize=9)
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
    fig, axes = _grid(fig, max(len(names), 1), width=3.8, height=3.0)
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
        ax.set_xlabel(_label(name, posterior.units.get(name)))
        ax.set_ylabel("Δ deviance")
        ax.set_title(name if p.closed else f"{name}: does not close", fontsize=9)
    axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle("profile likelihood", fontsize=11)
    return fig


# ---------------------------------------------------------------- spectra

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
    style = _style(spectra.species)
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
    ax.set_ylabel(f"absorptivity ({spectra.unit})" if spectra.unit else "absorptivity")
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
    fig, axes = _grid(fig, len(runs))
    labels = [f"{w:g} {spectra.wavelength_unit}" for w in wavelengths]
    style = _style(labels)
    columns = [int(np.argmin(np.abs(spectra.wavelengths - w))) for w in wavelengths]
    for ax, run in zip(axes, runs):
        fitted = spectra.fitted[spectra.runs.index(run.name)]
        data = run.spectrum
        for label, col in zip(labels, columns):
            color, marker = style[label]
            ax.plot(data.times, data.values[:, col], linestyle="none", marker=marker,
                    markersize=3, color=color, alpha=0.7, label=f"{label} data")
            ax.plot(data.times, fitted[:, col], color=color, lw=1.5, label=f"{label} fit")
        ax.set_title(_initial_text(run, result.experiment.units), fontsize=9)
        ax.set_xlabel(f"time ({result.experiment.units.time})")
        ax.set_ylabel("signal")
    if len(axes):
        axes[0].legend(fontsize=7, frameon=False)
    fig.suptitle("full spectra at chosen wavelengths: data and global fit", fontsize=11)
    return fig


def plot_residual_map(result, fig=None):
    """Residuals (fit − data) of full-spectrum data as time × wavelength maps, per run.

    Returns
    -------
    matplotlib.figure.Figure
    """
    spectra = result.signals.spectra
    runs = [r for r in result.experiment.runs if r.name in spectra.runs]
    maps = [spectra.fitted[spectra.runs.index(r.name)] - r.spectrum.values for r in runs]
    limit = max(float(np.max(np.abs(m))) for m in maps) or 1.0
    fig, axes = _grid(fig, len(runs))
    wl = spectra.wavelengths
    image = None
    for ax, run, res in zip(axes, runs, maps):
        times = run.spectrum.times
        image = ax.pcolormesh(wl, times, res, cmap="RdBu_r", vmin=-limit, vmax=limit,
                              shading="nearest")
        ax.set_title(run.name, fontsize=9)
        ax.set_xlabel(f"wavelength ({spectra.wavelength_unit})")
        ax.set_ylabel(f"time ({result.experiment.units.time})")
    if image is not None:
        fig.colorbar(image, ax=list(axes), label="fit − data", shrink=0.8)
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
