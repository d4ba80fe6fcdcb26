"""A fit's summary text and output folder.

:func:`format_fit` words a :class:`~kinfit.estimation.least_squares.FitResult`
for the terminal; :func:`fit_bundle` assembles its folder (figures, fitted
curves, summary, ``result.json``), to which callers add the temperature and
signal files; :func:`write_fit` writes it.
"""

from __future__ import annotations

import textwrap

from kinfit.core.formatting import format_value
from kinfit.core.schema import schema_json
from kinfit.output.bundle import Bundle, figure_files, write_bundle
from kinfit.output.text import closing_lines, csv_text, text_table, wrapped

__all__ = ["format_fit", "curves_csv", "fit_bundle", "write_fit"]


def format_fit(result, cautions=True):
    """Readable summary of a :class:`~kinfit.estimation.least_squares.FitResult`.

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
    out += text_table(rows, ("name", "value ± standard error", "unit", "role"))
    out.append("")
    out.append(_statistics_line(result))
    out.append(f"     AIC = {result.aic:.6g}, AICc = {result.aicc:.6g}, BIC = {result.bic:.6g}")
    out.append(f"     {result.starts_at_best} of {result.starts} starting point(s) reached the "
               f"best fit; {'converged' if result.success else 'NOT converged'}; "
               f"{result.n_integrations} integrations")
    out += textwrap.wrap(f"integrators: {result.method}", 88, initial_indent="     ",
                         subsequent_indent="       ")
    strong = _strong_correlations(result)
    if strong:
        out.append(f"     strong correlations: {', '.join(strong)}")
    out += _residual_check_lines(result)
    return "\n".join(out + closing_lines(result.warnings, cautions))


def _residual_check_lines(result):
    """The residual checks' heading, tests and rule, and each trace not called fine."""
    if not result.residual_checks:
        return []
    summary = result.residual_check_summary
    out = ["", f"Residual checks: {summary['heading']}"]
    out += wrapped(f"{summary['tests']}; {summary['rule']}", "  ", "  ")
    for c in result.residual_checks:
        if c.misfit or not c.judged:
            out += wrapped(f"{c.run} {c.species}: {c.verdict}")
    return out


def _statistics_line(result):
    exp, mech = result.experiment, result.mechanism
    noise_unit = exp.units.concentration
    if result.signals is not None:
        noise_unit = "(concentration or signal units)" if any(
            t.species in mech.species for r in exp.runs for t in r.traces) else (
            result.signals.unit or "(signal units)")
    noise = ("declared noise" if result.noise_declared
             else f"noise estimated from the fit: σ = {result.sigma:.3g} {noise_unit}")
    return (f"Fit: χ² = {result.chi2:.6g}, N = {result.n_points}, p = {result.n_free}, "
            f"χ²/(N−p) = {result.reduced_chi2:.3g} ({noise})")


def _strong_correlations(result, limit=0.9):
    """Pairs of fitted parameters correlated at |ρ| >= limit, as text."""
    if result.correlation is None:
        return []
    names = result.free_names
    return [f"{names[i]}–{names[j]} {result.correlation[i, j]:+.3f}"
            for i in range(len(names)) for j in range(i + 1, len(names))
            if abs(result.correlation[i, j]) >= limit]


def curves_csv(result):
    """``fitted_curves.csv``: run, time and every species on the fine time grid."""
    rows = [(run.name, f"{t:.10g}", *[f"{v:.10g}" for v in row])
            for run, curve in zip(result.experiment.runs, result.curves)
            for t, row in zip(curve.times, curve.conc)]
    return csv_text(("run", "time", *result.mechanism.species), rows)


def fit_bundle(result, extra=None, extra_summary=None, provenance=None):
    """The files of a fit's output folder, computed but not written.

    Files, in order: ``fit.png``/``fit.svg`` (data and fitted curves),
    ``residuals.png``/``.svg``, the `extra` files, ``provenance.json``
    (when given), ``summary.txt``, ``fitted_curves.csv`` and ``result.json``
    (schema ``kinfit.result/1``: :meth:`FitResult.to_dict`).

    Parameters
    ----------
    result : FitResult
    extra : Bundle or mapping of str to bytes or str, optional
        More files beside them, e.g. from
        :func:`kinfit.output.temperature.temperature_bundle`.
    extra_summary : str, optional
        Text appended to ``summary.txt``.
    provenance : dict, optional
        See :func:`kinfit.output.provenance.collect`.

    Returns
    -------
    Bundle
    """
    from kinfit.figures.fit import plot_residuals, plot_traces

    files = figure_files({"fit": plot_traces(result), "residuals": plot_residuals(result)})
    files = files | Bundle(extra)
    if provenance is not None:
        files = files | {"provenance.json": schema_json("provenance", provenance)}
    summary = format_fit(result)
    if extra_summary:
        summary += "\n\n" + extra_summary
    return files | {"summary.txt": summary + "\n", "fitted_curves.csv": curves_csv(result),
                    "result.json": schema_json("result", result.to_dict())}


def write_fit(out_dir, result, extra_files=None, extra_summary=None, provenance=None):
    """Write a fit's outputs into `out_dir` (the files of :func:`fit_bundle`).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    return write_bundle(out_dir, fit_bundle(result, extra_files, extra_summary, provenance))
