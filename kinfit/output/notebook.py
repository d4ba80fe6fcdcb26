"""Notebook display: tidy HTML tables of results.

Results define no ``_repr_html_``: the package root registers these functions
with IPython's HTML formatter by type name when kinfit is imported inside
IPython, so that estimation and analysis never import output.
"""

from __future__ import annotations

from html import escape

from kinfit.core.formatting import format_interval, format_value, superscripts
from kinfit.core.units import format_power

__all__ = ["fit_html", "posterior_html", "ranking_html"]


def _html_table(header, rows, caption=None):
    head = "".join(f"<th>{escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{escape(str(c))}</td>" for c in row) + "</tr>"
                   for row in rows)
    cap = f"<caption>{escape(caption)}</caption>" if caption else ""
    return f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def fit_html(result):
    """A fit as tidy HTML tables (what a notebook shows for a FitResult).

    The goodness of fit is χ² for a weighted fit (declared noise), else the
    residual sum of squares with its unit and σ̂; units carry superscripts.
    """
    laws = [[r["reaction"] + (" (reverse)" if r["direction"] == "reverse" else ""),
             superscripts(r["rate"]), f"{r['overall_order']:.3g}"] for r in result.rate_laws()]
    params = [[name, format_value(value, result.stderr.get(name)),
               format_interval(result.interval(name), result.stderr.get(name)),
               superscripts(result.units.get(name)), result.roles.get(name, "")]
              for name, value in result.values.items()]
    tail = [f"{result.aic:.6g}", f"{result.aicc:.6g}", f"{result.bic:.6g}",
            "yes" if result.success else "NO"]
    if result.noise_declared:
        header = ["N", "p", "χ² (weighted)", "χ²/(N−p)"]
        middle = [f"{result.chi2:.6g}", f"{result.reduced_chi2:.3g}"]
    else:
        unit = result.residual_unit
        header = ["N", "p", "residual sum of squares" + (
            f" ({superscripts(format_power(unit, 2))})" if unit else ""),
                  "σ̂" + (f" ({superscripts(unit)})" if unit else "")]
        middle = [f"{result.chi2:.6g}", f"{result.sigma:.3g}"]
    parts = [_html_table(["reaction", "rate", "overall order"], laws,
                         f"{result.mechanism.name} fitted to {result.experiment.name}"),
             _html_table(["parameter", "value ± standard error", "95 % interval", "unit",
                          "role"], params),
             _html_table(header + ["AIC", "AICc", "BIC", "converged"],
                         [[result.n_points, result.n_free, *middle, *tail]])]
    parts += [f"<p>⚠ {escape(w)}</p>" for w in result.warnings]
    return "\n".join(parts)


def posterior_html(post):
    """A posterior as an HTML table of medians and intervals."""
    summary = post.to_dict()
    rows = [[name, f"{p['median']:.5g}", f"{p['sd']:.3g}",
             f"[{p['ci95'][0]:.5g}, {p['ci95'][1]:.5g}]", superscripts(p.get("unit"))]
            for name, p in summary["parameters"].items()]
    state = "converged" if summary["diagnostics"]["converged"] else "NOT converged"
    return _html_table(["parameter", "median", "sd", "95 % interval", "unit"], rows,
                       f"posterior ({state})")


def ranking_html(comparison, top=10):
    """A ranking as an HTML table of criteria and weights."""
    rows = [[r.label, r.n_params, f"{r.chisqr:.6g}", f"{r.delta_aicc:.3g}",
             f"{r.akaike_weight:.3f}", f"{r.bic_weight:.3f}"]
            for r in comparison.candidates[:top]]
    unit = comparison.best.fit.residual_unit
    fit = "χ² (weighted)" if comparison.noise_declared else "residual sum of squares" + (
        f" ({superscripts(format_power(unit, 2))})" if unit else "")
    return _html_table(["candidate", "p", fit, "ΔAICc", "Akaike weight", "BIC weight"], rows,
                       "ranking of candidate rate laws")
