"""Text summaries and output folders.

``format_*`` functions return text; ``write_*`` functions write files, each
atomically (see :mod:`kinfit.atomic`), after everything to be written has
been computed, so that a failure leaves no half-written output.
"""

from __future__ import annotations

import io
import math
import textwrap
from pathlib import Path

import numpy as np

from .atomic import write_bytes, write_json, write_text
from .errors import KinfitError

__all__ = ["CAUTIONS", "format_value", "format_fit", "write_fit", "write_simulation",
           "figure_bytes", "format_posterior", "write_posterior"]

CAUTIONS = (
    "A rate law and its rate constants hold only over the conditions they were measured "
    "in (concentrations, temperature, solvent, mixing); do not extrapolate them far outside. "
    "Kinetics measured at bench scale must not alone decide the thermal safety of a "
    "scaled-up process (heat release, cooling failure, thermal runaway): defer to reaction "
    "calorimetry, a process-safety review, local codes and licensed professional practice."
)


def format_value(value, stderr=None, digits=4):
    """A value with its standard error, rounded to the error's second digit.

    >>> format_value(1.4887e-4, 6.11e-6)
    '1.489e-04 ± 6.1e-06'
    >>> format_value(1.00374, 0.00567)
    '1.0037 ± 0.0057'
    """
    if value is None or not math.isfinite(value):
        return str(value)
    use_exp = value != 0 and (abs(value) < 1e-3 or abs(value) >= 1e5)
    if stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return f"{value:.{digits}g}" if not use_exp else f"{value:.{digits - 1}e}"
    err_exp = math.floor(math.log10(stderr))
    if use_exp:
        val_exp = math.floor(math.log10(abs(value)))
        decimals = max(0, val_exp - err_exp + 1)
        return f"{value:.{decimals}e} ± {stderr:.1e}"
    decimals = max(0, 1 - err_exp)
    if abs(stderr) >= 1e5 or abs(stderr) < 1e-3:
        return f"{value:.{decimals}f} ± {stderr:.1e}"
    return f"{value:.{decimals}f} ± {stderr:.{decimals}f}"


def _table(rows, header):
    widths = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    lines = ["  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths)).rstrip()]
    for r in rows:
        lines.append("  " + "  ".join(str(c).ljust(w) for c, w in zip(r, widths)).rstrip())
    return lines


def format_fit(result, cautions=True):
    """Readable summary of a :class:`~kinfit.fit.FitResult` for the terminal.

    Shows each rate law with fitted orders and its overall order, every
    parameter with its standard error and unit, the fit statistics, strong
    correlations, warnings and (by default) the cautions on using the result.
    """
    exp, mech = result.experiment, result.mechanism
    out = [f"Global fit of {len(exp.runs)} runs ({result.n_points} points) to "
           f"'{mech.name}'",
           f"  experiment: {exp.source}", f"  model:      {mech.source}", ""]
    out.append("Rate law (IUPAC rate of reaction: d[X]/dt = ν_X × rate)")
    for row in result.rate_laws():
        direction = " (reverse)" if row["direction"] == "reverse" else ""
        out.append(f"  {row['reaction']}{direction}")
        order = row["overall_order"]
        out.append(f"    rate = {row['rate']}    overall order {order:.3g}")
    out.append("")
    out.append("Parameters")
    rows = []
    for name, value in result.values.items():
        se = result.stderr.get(name)
        vary = result.bounds.get(name, (0, 0, True))[2]
        shown = format_value(value, se) if vary else f"{format_value(value)} (fixed)"
        flag = "  at a bound" if name in result.at_bounds else ""
        rows.append((name, shown, result.units.get(name) or "", result.roles.get(name, "")
                     + flag))
    out += _table(rows, ("name", "value ± standard error", "unit", "role"))
    out.append("")
    noise = ("declared noise" if result.noise_declared
             else f"noise estimated from the fit: σ = {result.sigma:.3g} "
                  f"{exp.units.concentration}")
    out.append(f"Fit: χ² = {result.chi2:.6g}, N = {result.n_points}, p = {result.n_free}, "
               f"χ²/(N−p) = {result.reduced_chi2:.3g} ({noise})")
    out.append(f"     AIC = {result.aic:.6g}, AICc = {result.aicc:.6g}, BIC = {result.bic:.6g}")
    out.append(f"     {result.starts_at_best} of {result.starts} starting point(s) reached the "
               f"best fit; {result.n_integrations} integrations ({result.method}); "
               f"{'converged' if result.success else 'NOT converged'}")
    if result.correlation is not None:
        strong = []
        names = result.free_names
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                c = result.correlation[i, j]
                if abs(c) >= 0.9:
                    strong.append(f"{names[i]}–{names[j]} {c:+.3f}")
        if strong:
            out.append(f"     strong correlations: {', '.join(strong)}")
    return "\n".join(out + _warnings_and_cautions(result.warnings, cautions))


def _warnings_and_cautions(warnings, cautions):
    """The closing lines of a summary: its warnings and (optionally) the cautions."""
    out = []
    if warnings:
        out += ["", "Warnings"]
        for w in warnings:
            out += textwrap.wrap(w, 88, initial_indent="  - ", subsequent_indent="    ",
                                 break_on_hyphens=False)
    if cautions:
        out += ["", "Caution"] + textwrap.wrap(CAUTIONS, 88, initial_indent="  ",
                                               subsequent_indent="  ",
                                               break_on_hyphens=False)
    return out


def figure_bytes(fig, fmt="png", dpi=150):
    """Render a matplotlib figure to bytes in memory."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, dpi=dpi)
    return buffer.getvalue()


def _curves_csv(result):
    lines = ["run,time," + ",".join(result.mechanism.species)]
    for run, curve in zip(result.experiment.runs, result.curves):
        for t, row in zip(curve.times, curve.conc):
            lines.append(f"{run.name},{t:.10g}," + ",".join(f"{v:.10g}" for v in row))
    return "\n".join(lines) + "\n"


def _prepare(out_dir):
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise KinfitError(f"--out {out_dir}: exists and is not a folder")
    return out_dir


def write_fit(out_dir, result):
    """Write a fit's outputs into `out_dir`.

    Files: ``result.json`` (see :meth:`FitResult.to_dict`), ``summary.txt``,
    ``fit.png``/``fit.svg`` (data and fitted curves), ``residuals.png``/
    ``residuals.svg`` and ``fitted_curves.csv``.

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    from .plots import plot_residuals, plot_traces

    out_dir = _prepare(out_dir)
    figures = {"fit": plot_traces(result), "residuals": plot_residuals(result)}
    payload = {f"{name}.{fmt}": figure_bytes(fig, fmt)
               for name, fig in figures.items() for fmt in ("png", "svg")}
    summary = format_fit(result)
    curves = _curves_csv(result)
    data = result.to_dict()
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for name, blob in payload.items():
        write_bytes(out_dir / name, blob)
        written.append(out_dir / name)
    write_text(out_dir / "summary.txt", summary + "\n")
    write_text(out_dir / "fitted_curves.csv", curves)
    write_json(out_dir / "result.json", data)
    return written + [out_dir / "summary.txt", out_dir / "fitted_curves.csv",
                      out_dir / "result.json"]


def write_simulation(out_dir, trajectory, units=None, title=None):
    """Write ``simulation.csv`` and ``simulation.png`` for a trajectory.

    Returns
    -------
    list of pathlib.Path
    """
    from .plots import plot_trajectory

    out_dir = _prepare(out_dir)
    png = figure_bytes(plot_trajectory(trajectory, units, title))
    lines = ["time," + ",".join(trajectory.species)]
    for t, row in zip(trajectory.times, np.asarray(trajectory.conc)):
        lines.append(f"{t:.10g}," + ",".join(f"{v:.10g}" for v in row))
    out_dir.mkdir(parents=True, exist_ok=True)
    write_text(out_dir / "simulation.csv", "\n".join(lines) + "\n")
    write_bytes(out_dir / "simulation.png", png)
    return [out_dir / "simulation.csv", out_dir / "simulation.png"]


# ----------------------------------------------------------------- posterior

def _interval(pair, digits=4):
    if pair is None:
        return "—"
    ends = ["open" if v is None else f"{v:.{digits}g}" for v in pair]
    return f"[{ends[0]}, {ends[1]}]"


def format_posterior(post, cautions=True):
    """Readable summary of a :class:`~kinfit.posterior.Posterior` for the terminal.

    States whether the chain converged (and what to do if not), shows every
    parameter's posterior beside its three kinds of 95 % interval
    (covariance, profile likelihood, posterior) with flags, the convergence
    figures, the correlation of each rate constant with each order, the
    priors and the cautions.
    """
    from .posterior import compare_intervals

    fit, diag, settings = post.fit, post.diagnostics, post.settings
    exp, mech = fit.experiment, fit.mechanism
    out = [f"Posterior of '{mech.name}' given {len(exp.runs)} runs ({fit.n_points} points)",
           f"  emcee, {settings.walkers} walkers × {diag.n_steps} steps ({settings.moves} "
           f"moves, seed {settings.seed}); noise: {post.noise}; "
           f"{post.n_evaluations} evaluations in {post.elapsed:.1f} s", ""]
    if diag.converged:
        out.append(f"CONVERGED: chain after burn-in = {diag.tau_multiple:.0f} autocorrelation "
                   f"times (50 wanted), largest R-hat {max(diag.rhat.values()):.3f} "
                   f"(≤ 1.01 wanted)")
    else:
        out.append("NOT CONVERGED — do not report these numbers yet:")
        for reason in diag.reasons:
            out += textwrap.wrap(reason, 88, initial_indent="  - ", subsequent_indent="    ")
        out += textwrap.wrap(diag.advice, 88, initial_indent="  ", subsequent_indent="  ")
    out += ["", "Parameters: posterior median ± sd, and 95 % intervals of three kinds",
            "  (covariance = fit ± 1.96 SE; profile likelihood; posterior 2.5–97.5 %)"]
    rows = []
    for row in compare_intervals(post):
        name = row["name"]
        s = post.summary[name]
        rows.append((name, post.units.get(name) or "", format_value(s["median"], s["sd"]),
                     _interval(row["covariance"]), _interval(row["profile"]),
                     _interval(row["posterior"]), ", ".join(row["flags"])))
    out += _table(rows, ("name", "unit", "posterior", "covariance 95 %", "profile 95 %",
                         "posterior 95 %", "flags"))
    flagged = [r for r in rows if r[-1]]
    if flagged:
        out.append("  flags: 'intervals disagree' = the model is non-linear in this parameter "
                   "here (or the prior matters):")
        out.append("  prefer the profile or posterior interval to ± SE; 'not identifiable' = "
                   "the data cannot pin it down.")
    out += ["", "Convergence (after burn-in)"]
    out.append("  autocorrelation time τ (steps): " + ", ".join(
        f"{n} {t:.1f}" for n, t in diag.autocorr_time.items()))
    out.append("  effective sample size: " + ", ".join(
        f"{n} {e:.0f}" for n, e in diag.ess.items()))
    out.append("  R-hat: " + ", ".join(f"{n} {r:.3f}" for n, r in diag.rhat.items()))
    out.append(f"  acceptance fraction {diag.acceptance_fraction:.2f} (walkers "
               f"{diag.acceptance_range[0]:.2f}–{diag.acceptance_range[1]:.2f}); burn-in "
               f"{diag.burn_in} steps discarded; thin {diag.thin}; {post.samples.shape[0]} "
               f"samples kept")
    pairs = post.rate_order_correlations()
    if pairs:
        out += ["", "Correlation of rate constants with orders (posterior; fit covariance)"]
        for a, b, rho, rho_fit in pairs:
            fit_text = f"{rho_fit:+.3f}" if rho_fit is not None else "—"
            strength = "strong" if abs(rho) >= 0.9 else "moderate" if abs(rho) >= 0.5 else "weak"
            out.append(f"  {a}–{b}: {rho:+.3f} ({fit_text}), {strength}")
    out += ["", "Priors"]
    for name in post.names:
        prior = post.priors[name]
        src = " (from the model file)" if prior.source == "model file" else ""
        out.append(f"  {name}: {prior.describe(post.units.get(name) or '')}{src}")
    return "\n".join(out + _warnings_and_cautions(post.warnings, cautions))


def write_posterior(out_dir, post):
    """Write a posterior's outputs into `out_dir`.

    Files: ``posterior.json`` (see :meth:`Posterior.to_dict`),
    ``posterior_summary.txt``, ``corner.png``, ``bands.png`` (each run's data
    with posterior bands), ``profiles.png``, and ``chain.npz`` (the whole
    chain; left as it is when the sampler already wrote it there).

    Returns
    -------
    list of pathlib.Path
    """
    from .plots import plot_bands, plot_corner, plot_profiles
    from .posterior import CHAIN_FILE, write_chain

    out_dir = _prepare(out_dir)
    figures = {"corner.png": plot_corner(post), "bands.png": plot_bands(post),
               "profiles.png": plot_profiles(post)}
    payload = {name: figure_bytes(fig) for name, fig in figures.items()}
    summary = format_posterior(post)
    data = post.to_dict()
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    chain_path = out_dir / CHAIN_FILE
    if post.chain_file is None or Path(post.chain_file).resolve() != chain_path.resolve():
        write_chain(chain_path, post.state, post.chain_meta)
    written.append(chain_path)
    for name, blob in payload.items():
        write_bytes(out_dir / name, blob)
        written.append(out_dir / name)
    write_text(out_dir / "posterior_summary.txt", summary + "\n")
    write_json(out_dir / "posterior.json", data)
    return written + [out_dir / "posterior_summary.txt", out_dir / "posterior.json"]
