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
           "figure_bytes"]

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
               f"best fit; {'converged' if result.success else 'NOT converged'}; "
               f"{result.n_integrations} integrations")
    out += textwrap.wrap(f"integrators: {result.method}", 88, initial_indent="     ",
                         subsequent_indent="       ")
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
    if result.warnings:
        out += ["", "Warnings"]
        for w in result.warnings:
            out += textwrap.wrap(w, 88, initial_indent="  - ", subsequent_indent="    ",
                                 break_on_hyphens=False)
    if cautions:
        out += ["", "Caution"] + textwrap.wrap(CAUTIONS, 88, initial_indent="  ",
                                               subsequent_indent="  ",
                                               break_on_hyphens=False)
    return "\n".join(out)


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
