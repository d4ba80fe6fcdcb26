"""Notebook display: tidy HTML tables of results.

Results define no ``_repr_html_``: the package root registers these functions
with IPython's HTML formatter by type name when kinfit is imported inside
IPython, so that estimation and analysis never import output.
"""

from __future__ import annotations

from html import escape

from kinfit.core.formatting import format_value

__all__ = ["fit_html", "posterior_html", "ranking_html"]


def _html_table(header, rows, caption=None):
    head = "".join(f"<th>{escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{escape(str(c))}</td>" for c in row) + "</tr>"
                   for row in rows)
    cap = f"<caption>{escape(caption)}</caption>" if caption else ""
    return f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def fit_html(result):
    """A fit as tidy HTML tables (what a notebook shows for a FitResult)."""
    laws = [[r["reaction"] + (" (reverse)" if r["direction"] == "reverse" else ""),
             r["rate"], f"{r['overall_order']:.3g}"] for r in result.rate_laws()]
    params = [[name, format_value(value, result.stderr.get(name)),
               result.units.get(name) or "", result.roles.get(name, "")]
              for name, value in result.values.items()]
    stats = [[result.n_points, result.n_free, f"{result.chi2:.6g}",
              f"{result.reduced_chi2:.3g}", f"{result.aic:.6g}", f"{result.aicc:.6g}",
              f"{result.bic:.6g}", "yes" if result.success else "NO"]]
    parts = [_html_table(["reaction", "rate", "overall order"], laws,
                         f"{result.mechanism.name} fitted to {result.experiment.name}"),
             _html_table(["parameter", "value ± standard error", "unit", "role"], params),
             _html_table(["N", "p", "χ²", "χ²/(N−p)", "AIC", "AICc", "BIC", "converged"],
                         stats)]
    parts += [f"<p>⚠ {w}</p>" for w in result.warnings]
    return "\n".join(parts)


def posterior_html(post):
    """A posterior as an HTML table of medians and intervals."""
    summary = post.to_dict()
    rows = [[name, f"{p['median']:.5g}", f"{p['sd']:.3g}",
             f"[{p['ci95'][0]:.5g}, {p['ci95'][1]:.5g}]", p.get("unit") or ""]
            for name, p in summary["parameters"].items()]
    state = "converged" if summary["diagnostics"]["converged"] else "NOT converged"
    return _html_table(["parameter", "median", "sd", "95 % interval", "unit"], rows,
                       f"posterior ({state})")


def ranking_html(comparison, top=10):
    """A ranking as an HTML table of criteria and weights."""
    rows = [[r.label, r.n_params, f"{r.chisqr:.6g}", f"{r.delta_aicc:.3g}",
             f"{r.akaike_weight:.3f}", f"{r.bic_weight:.3f}"]
            for r in comparison.candidates[:top]]
    return _html_table(["candidate", "p", "χ²", "ΔAICc", "Akaike weight", "BIC weight"], rows,
                       "ranking of candidate rate laws")
