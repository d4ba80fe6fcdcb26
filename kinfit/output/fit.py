"""A fit's summary text and output folder.

:func:`format_fit` words a :class:`~kinfit.estimation.least_squares.FitResult`
for the terminal; :func:`fit_bundle` assembles its folder (figures, fitted
curves, the parameter and point tables, summary, ``result.json``), to which
callers add the temperature and signal files; :func:`write_fit` writes it.

The goodness of fit is named for what it is: χ² only for a weighted fit
(declared noise), otherwise the residual sum of squares with its unit and
σ̂ = √(RSS/(N − p)). Residuals in files and figures are observed − fitted.
"""

from __future__ import annotations

import textwrap

from kinfit.core.formatting import format_interval, format_value, interval_quantile
from kinfit.core.schema import schema_json
from kinfit.core.units import format_power
from kinfit.output.bundle import Bundle, figure_files, write_bundle
from kinfit.output.text import (
    closing_lines,
    csv_text,
    kelvin_celsius,
    text_table,
    wrapped,
)

__all__ = ["format_fit", "statistics_text", "interval_text_of", "curves_csv", "parameters_csv",
           "points_csv", "fit_bundle", "write_fit"]


def format_fit(result, cautions=True):
    """Readable summary of a :class:`~kinfit.estimation.least_squares.FitResult`.

    Shows each rate law with fitted orders and its overall order, the runs
    and their starting conditions, every parameter with its standard error,
    95 % interval and unit, the fit statistics, strong correlations, warnings
    and (by default) the cautions on using the result.
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
    out += [""] + _runs_lines(result)
    out.append("")
    out.append("Parameters")
    rows = []
    for name, value in result.values.items():
        se = result.stderr.get(name)
        vary = result.bounds.get(name, (0, 0, True))[2]
        shown = format_value(value, se) if vary else f"{format_value(value)} (fixed)"
        flag = "  at a bound" if name in result.at_bounds else ""
        rows.append((name, shown, format_interval(result.interval(name), se),
                     result.units.get(name) or "", result.roles.get(name, "") + flag))
    out += text_table(rows, ("name", "value ± standard error", "95 % interval", "unit",
                             "role"))
    out += wrapped(interval_text_of(result), "  ", "  ")
    out.append("")
    out += textwrap.wrap(statistics_text(result), 88, subsequent_indent="     ")
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


def interval_text_of(result):
    """How the 95 % intervals of `result` were formed, in one sentence."""
    dof = result.interval_dof
    q = interval_quantile(0.95, dof)
    quantile = f"{q:.3f} (normal quantile; declared noise)" if dof is None else (
        f"{q:.3f} (Student t, N − p = {dof} degrees of freedom)")
    return (f"95 % interval: value ± {quantile} × standard error, symmetric in each "
            f"parameter itself (in k, not in log k; rate constants are fitted as log10 k "
            f"and their standard errors mapped to k by the delta method).")


def statistics_text(result):
    """The goodness-of-fit sentence: χ² for a weighted fit, else RSS with its unit and σ̂."""
    n, p = result.n_points, result.n_free
    if result.noise_levels:        # --noise per-species: one estimated σ per species
        levels = ", ".join(f"{s} {v:.3g}" for s, v in result.noise_levels.items())
        return (f"Fit: σ of each species estimated: {levels} {result.residual_unit or ''}; χ² = "
                f"{result.chi2:.6g} weighted by them, N = {n}, p = {p}, "
                f"χ²/(N−p) = {result.reduced_chi2:.3g}")
    if result.noise_declared:
        return (f"Fit: χ² = {result.chi2:.6g} (weighted by the declared noise), N = {n}, "
                f"p = {p}, χ²/(N−p) = {result.reduced_chi2:.3g}")
    unit = result.residual_unit
    if unit is None:
        rss_unit, sigma_unit = " (concentration and signal units mixed)", ""
    else:
        rss_unit = f" {format_power(unit, 2)}" if unit else ""
        sigma_unit = f" {unit}" if unit else ""
    return (f"Fit: residual sum of squares RSS = {result.chi2:.6g}{rss_unit}, N = {n}, "
            f"p = {p}; σ̂ = √(RSS/(N−p)) = {result.sigma:.3g}{sigma_unit} (unweighted fit; "
            f"noise estimated from the fit)")


def _runs_lines(result):
    """The runs and their starting conditions, as a text table."""
    exp = result.experiment
    units = exp.units
    species = _initial_species(exp.runs)
    temps = any(r.temperature is not None for r in exp.runs)
    rows = []
    for run in exp.runs:
        cells = [("fitted" if s in run.fitted_initial else f"{run.initial.get(s, 0.0):g}")
                 for s in species]
        rows.append((run.name, *cells,
                     *([kelvin_celsius(run.temperature) if run.temperature is not None
                        else "—"] if temps else []),
                     str(run.n_points), ", ".join(_measured(run))))
    header = ("run", *[f"[{s}]0" for s in species], *(["temperature"] if temps else []),
              "points", "measured")
    return [f"Runs (starting concentrations in {units.concentration})"] + text_table(rows,
                                                                                   header)


def _initial_species(runs):
    species = []
    for run in runs:
        for s in list(run.initial) + list(run.fitted_initial):
            if s not in species:
                species.append(s)
    return species


def _measured(run):
    return list(run.species) + (["spectra"] if run.spectrum is not None else [])


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


def _number(value):
    return "" if value is None else f"{value:.10g}"


def parameters_csv(result):
    """``parameters.csv``: every parameter with its standard error, 95 % interval, unit, role.

    Columns ``name, value, standard error, 95 % low, 95 % high, unit, role,
    fitted``; fixed parameters have empty error and interval cells. Units are
    plain text (``mM^-2 min^-1``). The interval is :meth:`FitResult.interval`
    (see :func:`interval_text_of`).
    """
    rows = []
    for name, value in result.values.items():
        pair = result.interval(name) or (None, None)
        vary = result.bounds.get(name, (0, 0, True))[2]
        rows.append((name, _number(value), _number(result.stderr.get(name)),
                     _number(pair[0]), _number(pair[1]), result.units.get(name) or "",
                     str(result.roles.get(name, "")), "yes" if vary else "no"))
    return csv_text(("name", "value", "standard error", "95 % low", "95 % high", "unit",
                     "role", "fitted"), rows)


def points_csv(result):
    """``points.csv``: every measured point with the fitted value and the residual.

    Columns ``run, time (unit), species, observed, fitted, residual, sigma``
    with the unit in the header when one unit covers every point (else a
    ``unit`` column). The residual is observed − fitted, unweighted; sigma
    is each point's standard deviation in the fit: the declared noise, or σ̂
    (the same for every point) when the noise was estimated. Points of full
    spectra are not listed (see ``spectra.csv`` and ``residual_map.png``).
    """
    exp = result.experiment
    conc = set(result.mechanism.species)
    signal_unit = result.signals.unit if result.signals is not None else ""
    unit = result.residual_unit
    rows, start = [], 0
    for run in exp.runs:
        for trace in run.traces:
            n = trace.times.size
            fitted = result.predicted[start:start + n]
            start += n
            sigma = exp.sigma(trace)
            for i in range(n):
                s = sigma[i] if sigma is not None else result.sigma
                row = [run.name, f"{trace.times[i]:.10g}", trace.species,
                       f"{trace.values[i]:.10g}", f"{fitted[i]:.10g}",
                       f"{trace.values[i] - fitted[i]:.10g}", _number(s)]
                if unit is None:
                    row.append(exp.units.concentration if trace.species in conc
                               else signal_unit)
                rows.append(row)
    suffix = f" ({unit})" if unit else ""
    header = ["run", f"time ({exp.units.time})", "species", f"observed{suffix}",
              f"fitted{suffix}", f"residual{suffix}", f"sigma{suffix}"]
    return csv_text(header + (["unit"] if unit is None else []), rows)


def fit_bundle(result, extra=None, extra_summary=None, provenance=None, basis=None):
    """The files of a fit's output folder, computed but not written.

    Files, in order: ``fit.png``/``fit.svg`` (data and fitted curves),
    ``residuals.png``/``.svg``, the `extra` files, ``provenance.json``
    (when given), ``summary.txt``, ``fitted_curves.csv``, ``parameters.csv``
    (:func:`parameters_csv`), ``points.csv`` (:func:`points_csv`; left out when
    every run is full spectra, whose residuals are in ``residual_map_*.csv``)
    and ``result.json`` (schema ``kinfit.result/1``: :meth:`FitResult.to_dict`,
    and the prediction basis that ``kinfit simulate --fit`` reads).

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
    basis : PredictionBasis, optional
        Written as ``prediction_basis`` (see
        :func:`kinfit.inputs.fit_basis.basis_to_dict`; null when not given).

    Returns
    -------
    Bundle
    """
    from kinfit.figures.fit import plot_residuals, plot_traces
    from kinfit.inputs.fit_basis import basis_to_dict

    files = figure_files({"fit": plot_traces(result), "residuals": plot_residuals(result)})
    files = files | Bundle(extra)
    if provenance is not None:
        files = files | {"provenance.json": schema_json("provenance", provenance)}
    summary = format_fit(result)
    if extra_summary:
        summary += "\n\n" + extra_summary
    files = files | {"summary.txt": summary + "\n", "fitted_curves.csv": curves_csv(result),
                     "parameters.csv": parameters_csv(result)}
    if any(run.traces for run in result.experiment.runs):
        files = files | {"points.csv": points_csv(result)}
    return files | {"result.json": schema_json("result", {
        **result.to_dict(),
        "prediction_basis": None if basis is None else basis_to_dict(basis)})}


def write_fit(out_dir, result, extra_files=None, extra_summary=None, provenance=None):
    """Write a fit's outputs into `out_dir` (the files of :func:`fit_bundle`), with the
    prediction basis in ``result.json`` that ``kinfit simulate --fit`` reads.

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    from kinfit.analysis.prediction import basis_from_fit

    return write_bundle(out_dir, fit_bundle(result, extra_files, extra_summary, provenance,
                                            basis=basis_from_fit(result)))
