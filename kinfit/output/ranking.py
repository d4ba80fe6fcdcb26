"""Rankings in words and files: the ranked table, verdict, nested tests, cross-check.

:func:`format_ranking` words a :class:`~kinfit.analysis.ranking.Comparison`;
:func:`ranking_bundle` gives the files of ``kinfit rank`` (``ranking.json``,
``ranking.txt``, the weights and initial-rates figures and table, and the
best candidate's fit folder in ``best/``); :func:`write_ranking` writes them.
"""

from __future__ import annotations

import math

from kinfit.analysis.criteria import NOTABLE_WEIGHT, SOURCES
from kinfit.core.formatting import CAUTIONS, format_value
from kinfit.core.schema import schema_json
from kinfit.core.units import format_power
from kinfit.output.bundle import Bundle, figure_files, write_bundle
from kinfit.output.fit import fit_bundle
from kinfit.output.text import csv_text, text_table, wrapped

__all__ = ["format_ranking", "format_cross_check", "initial_rates_csv", "ranking_bundle",
           "write_ranking"]


def _number(value, fmt=".2f"):
    return "—" if value is None or not math.isfinite(value) else format(value, fmt)


def _short(text, width=48):
    return text if len(text) <= width else text[:width - 1] + "…"


def format_ranking(comparison, top=10, cautions=True):
    """Readable summary of a :class:`~kinfit.analysis.ranking.Comparison` for the terminal.

    Shows the ranked table (the first `top` rows), the verdict, the nested
    tests that involve the leading candidates, model-averaged parameters, the
    initial-rates cross-check, warnings, the evidence scales' sources and (by
    default) the cautions.
    """
    rows = comparison.candidates
    exp = rows[0].fit.experiment
    crit = {"aicc": "AICc", "aic": "AIC", "bic": "BIC"}[comparison.criterion]
    noise = "declared noise" if comparison.noise_declared else "noise estimated"
    out = [f"Ranking of {len(rows)} candidates fitted to '{exp.name}' "
           f"({comparison.n_points} points, {noise}), sorted by {crit}", ""]
    table = [(str(i), _short(r.label), str(r.n_params), f"{r.chisqr:.6g}",
              _number(r.delta_aicc), f"{r.akaike_weight:.3f}", _number(r.delta_bic),
              f"{r.bic_weight:.3f}", r.evidence_aicc)
             for i, r in enumerate(rows[:top], start=1)]
    out += text_table(table, ("#", "candidate", "p", _fit_column(comparison), "ΔAICc",
                              "weight", "ΔBIC", "BIC weight", "support (ΔAICc)"))
    if len(rows) > top:
        out.append(f"  ... {len(rows) - top} more in ranking.json")
    for t in sorted({r.template for r in rows if r.template}):
        out.append(f"  Rows such as 'm=1' are '{t}' with those orders fixed.")
    out.append("  weight: Akaike weight from AICc; BIC weight: from BIC (each sums to 1).")
    out += ["", "Verdict"]
    for line in comparison.verdict:
        out += wrapped(line)
    out += _nested_lines(comparison)
    out += _average_lines(comparison)
    if comparison.cross_check is not None:
        out += [""] + format_cross_check(comparison.cross_check)
    if comparison.warnings:
        out += ["", "Warnings"]
        for w in comparison.warnings:
            out += wrapped(w)
    out += ["", "Evidence scales"]
    for key in ("aicc", "bic"):
        out += wrapped(SOURCES[key])
    if cautions:
        out += ["", "Caution"] + wrapped(
            "A ranking says which candidates these data support, not that the best is the "
            "true mechanism; a model not among the candidates may be better still. "
            + CAUTIONS, "  ", "  ")
    return "\n".join(out)


def _fit_column(comparison):
    """χ² for weighted fits (declared noise), else the residual sum of squares and its unit."""
    if comparison.noise_declared:
        return "χ²"
    unit = comparison.best.fit.residual_unit
    return f"RSS ({format_power(unit, 2)})" if unit else "RSS"


def _average_lines(comparison):
    """Model averages, each with the candidates it used and their renormalised weights."""
    if not comparison.averages:
        return []
    out = ["", "Model-averaged parameters (each over the candidates that estimate it, with "
               "Akaike weights", "renormalised among them; Burnham & Anderson's "
               "unconditional standard error)"]
    out += text_table([(a.name, format_value(a.value, a.stderr), a.unit,
                        f"{a.n_candidates} ({a.weight:.3f})" if a.n_candidates > 1
                        else "1: not averaged") for a in comparison.averages],
                      ("name", "value ± standard error", "unit", "candidates (weight)"))
    for a in comparison.averages:
        shown = [(n, w) for n, w in a.candidates if w >= NOTABLE_WEIGHT]
        used = ", ".join(f"'{_short(_label(comparison, n), 40)}' {w:.3f}" for n, w in shown)
        if len(shown) < len(a.candidates):
            used += f" and {len(a.candidates) - len(shown)} of weight below {NOTABLE_WEIGHT:g}"
        only = _short(_label(comparison, a.candidates[0][0]), 40)
        text = (f"{a.name} over {used}" if a.n_candidates > 1 else
                f"{a.name} is estimated by '{only}' alone, so it is not averaged: the value "
                f"and standard error are that candidate's")
        if a.left_out:
            text += ("; left out, as they fix it or give it another unit: "
                     + ", ".join(f"'{_short(_label(comparison, n), 40)}'" for n in a.left_out))
        out += wrapped(text)
    return out


def _nested_lines(comparison, shown_at_most=8):
    """The nested pairs that say whether a simpler candidate will do: a leading
    candidate against what contains it, and what the best contains."""
    rows = comparison.candidates
    leading = {r.name for r in rows[:3]}
    shown = [t for t in comparison.nested if t.smaller in leading or t.larger == rows[0].name]
    if not shown:
        return []
    out = ["", "Nested pairs (smaller = larger with parameters fixed): F-test and "
               "likelihood ratio"]
    table = [(_short(_label(comparison, t.smaller), 30),
              _short(_label(comparison, t.larger), 30), str(t.extra_params),
              f"{t.f_statistic:.4g}", f"{t.f_pvalue:.3g}", f"{t.lr_statistic:.4g}",
              f"{t.lr_pvalue:.3g}", "yes" if t.on_boundary else "")
             for t in shown[:shown_at_most]]
    out += text_table(table, ("smaller", "larger", "extra", "F", "p (F)", "LR", "p (LR)",
                              "on a bound"))
    if len(shown) > shown_at_most:
        out.append(f"  ... {len(shown) - shown_at_most} more in ranking.json")
    if any(t.on_boundary for t in shown[:shown_at_most]):
        out.append("  on a bound: the smaller model fixes a value on a bound of the "
                   "larger one, so the p-values are conservative (too large)")
    return out


def _label(comparison, name):
    for r in comparison.candidates:
        if r.name == name:
            return r.label
    return name


def format_cross_check(check):
    """Lines describing the initial-rates cross-check."""
    ir = check.initial_rates
    out = [f"Initial-rates cross-check ({ir.reaction}; slope at t = 0 of a degree-{ir.degree} "
           f"polynomial over the first {100 * ir.max_conversion:.0f} % conversion)"]
    species = _species_of(ir.rates)
    rows = []
    for r in ir.rates:
        rate = format_value(r.rate, r.stderr) if r.rate is not None else "—"
        points = ", ".join(f"{t.species} {t.n_points}" for t in r.traces)
        rows.append((r.run, *[f"{r.conc0.get(s, 0):g}" for s in species], rate, points))
    out += text_table(rows, ("run", *[f"[{s}]0" for s in species],
                             f"r0 ({ir.rate_unit})", "points used"))
    reg = ir.regression
    if reg is not None:
        out += ["", f"  Orders, beside the time-course fit of '{check.candidate}'"]
        order_rows = []
        for c in check.orders:
            diff = "—" if c.z is None else f"{abs(c.z):.1f} se " + _verdict_word(c.agrees)
            fitted = format_value(c.time_course, c.time_course_stderr or None) + (
                " (fixed)" if c.time_course_stderr == 0 else "")
            order_rows.append((c.species, format_value(c.initial_rates, c.initial_rates_stderr),
                               fitted, diff))
        out += text_table(order_rows, ("species", "initial rates", "time course", "difference"))
        out.append(f"  k from the regression: {format_value(reg.k, reg.k_stderr)} "
                   f"{ir.k_unit or ''} (its orders, {reg.dof} degree(s) of freedom)")
        k = check.rate_constant
        if k is not None:
            diff = "" if k["z"] is None else f"; {abs(k['z']):.1f} se on ln k " + \
                _verdict_word(k["agrees"])
            out.append(f"  {k['name']} at the fitted orders: initial rates "
                       f"{format_value(k['initial_rates'], k['initial_rates_stderr'])}, time "
                       f"course {format_value(k['time_course'], k['time_course_stderr'])} "
                       f"{k['unit'] or ''}{diff}")
    for note in ir.notes:
        out += wrapped(note, "  note: ")
    if check.cannot_check:
        out += wrapped("verdict: CANNOT CHECK, not a disagreement: the initial rates come "
                       "from beyond the conversion window (note above), biased by an amount "
                       "the method cannot estimate", "  ", "    ")
    return out


def _verdict_word(agrees):
    """(agree), (DISAGREE), or (cannot check) when no verdict is possible."""
    return {True: "(agree)", False: "(DISAGREE)"}.get(agrees, "(cannot check)")


def _species_of(rates):
    species = []
    for r in rates:
        for s in r.conc0:
            if s not in species:
                species.append(s)
    return species


def initial_rates_csv(check):
    """``initial_rates.csv``: each run's starting concentrations, initial rate and note."""
    ir = check.initial_rates
    species = _species_of(ir.rates)
    rows = [(r.run, *[f"{r.conc0.get(s, 0):.10g}" for s in species],
             "" if r.rate is None else f"{r.rate:.10g}",
             "" if r.stderr is None else f"{r.stderr:.10g}", r.note)
            for r in ir.rates]
    return csv_text(("run", *[f"{s}0" for s in species], "rate", "stderr", "note"), rows)


def ranking_bundle(comparison, top=10, provenance=None, best=None):
    """The files of a ranking's output folder, computed but not written.

    Files, in order: the best candidate's fit folder under ``best/``,
    ``provenance.json`` (when given), ``weights.png``/``.svg``, with the
    initial-rates cross-check ``initial_rates.png``/``.svg`` and
    ``initial_rates.csv``, ``ranking.txt`` and ``ranking.json`` (schema
    ``kinfit.ranking/1``: :meth:`Comparison.to_dict`).

    Parameters
    ----------
    comparison : Comparison
    top : int
        Candidates shown in ``ranking.txt``.
    provenance : dict, optional
        See :func:`kinfit.output.provenance.collect`; written here and in ``best/``.
    best : Bundle, optional
        The best candidate's fit folder, as the fit command assembles it;
        by default :func:`~kinfit.output.fit.fit_bundle` of its fit.

    Returns
    -------
    Bundle
    """
    from kinfit.figures.ranking import plot_initial_rates, plot_weights

    if best is None:
        best = fit_bundle(comparison.best.fit, provenance=provenance)
    files = Bundle(best).within("best")
    if provenance is not None:
        files = files | {"provenance.json": schema_json("provenance", provenance)}
    figures = {"weights": plot_weights(comparison)}
    check = comparison.cross_check
    if check is not None:
        figures["initial_rates"] = plot_initial_rates(check)
    files = files | figure_files(figures) | {"ranking.txt": format_ranking(comparison, top)
                                             + "\n"}
    if check is not None:
        files = files | {"initial_rates.csv": initial_rates_csv(check)}
    return files | {"ranking.json": schema_json("ranking", comparison.to_dict())}


def write_ranking(out_dir, comparison, top=10, provenance=None):
    """Write a ranking's outputs into `out_dir` (the files of :func:`ranking_bundle`).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    return write_bundle(out_dir, ranking_bundle(comparison, top, provenance))
