"""Notebook display: HTML tables, figures and their registration."""

from __future__ import annotations


def test_notebook_tables_and_figures(result):
    # a notebook shows tidy HTML tables for results, and kinfit.figures returns the plots
    import xml.etree.ElementTree as ET

    import kinfit
    from kinfit.output.notebook import fit_html

    html = fit_html(result)
    root = ET.fromstring(f"<div>{html}</div>")        # well-formed markup
    assert len(root.findall("table")) == 3 and "s⁻¹" in html and "s^-1" not in html
    # four points, noise not declared: the residual sum of squares with its unit, not χ²
    header = [th.text for th in root.findall("table")[2].iter("th")]
    assert header[2] == "residual sum of squares (M²)" and header[3] == "σ̂ (M)"
    assert "χ²" not in html
    figs = kinfit.make_figures(result)
    assert set(figs) == {"fit", "residuals"} and figs["fit"].axes


def test_notebook_tables_of_posteriors_and_rankings(line_posterior, small_ranking):
    import xml.etree.ElementTree as ET

    import kinfit

    line_posterior, small_ranking = line_posterior[0], small_ranking[0]
    from kinfit.output.notebook import posterior_html, ranking_html

    for obj, show in ((line_posterior, posterior_html), (small_ranking, ranking_html)):
        html = show(obj)
        ET.fromstring(f"<div>{html}</div>")
        assert "<table>" in html
    assert {"corner", "bands", "fit", "residuals"} <= set(kinfit.make_figures(line_posterior))
    assert {"weights", "fit"} <= set(kinfit.make_figures(small_ranking))


def test_the_root_registers_notebook_display_by_type_name(result):
    # IPython's formatter API (common practice: display_formatter.formatters["text/html"]
    # .for_type_by_name); a stand-in shell records what kinfit registers.
    import kinfit

    registered = {}

    class Formatter:
        def for_type_by_name(self, module, name, func):
            registered[(module, name)] = func

    class Shell:
        display_formatter = type("D", (), {"formatters": {"text/html": Formatter()}})()

    assert kinfit.register_notebook_display(Shell())
    show = registered[(type(result).__module__, type(result).__name__)]
    assert "<table>" in show(result)
    assert {("kinfit.estimation.posterior", "Posterior"),
            ("kinfit.analysis.ranking", "Comparison")} <= set(registered)
