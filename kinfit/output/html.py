"""One self-contained HTML report of everything an output folder holds.

:func:`build_report` reads what the commands wrote into a folder — the JSON
files (``result.json``, ``temperature.json``, ``posterior.json``,
``ranking.json``, ``spectra.json``, ``provenance.json``) and the figures
(SVG) — and renders ``report.html`` with jinja2. Figures are embedded as
``data:`` URIs, the style sheet is inline, and nothing refers to the network,
so the file opens anywhere and prints cleanly. Each section appears only when
its data exist, and an interval column only when its analysis was run.

The output folder of a ranking holds the best candidate's fit in ``best/``:
its report shows that fit (rate law, parameters, runs, figures) beside the
ranking, and ``best/`` gets a report of its own.

Units are plain text in the JSON files (``mM^-2 min^-1``) and shown with
superscripts here (``mM⁻² min⁻¹``; :func:`kinfit.core.formatting.superscripts`).

Each JSON file is checked against the schema version this kinfit writes
(:mod:`kinfit.core.schema`): files without a version (written before
versions were recorded) are read, a file of another major version is refused.
"""

from __future__ import annotations

import json
from pathlib import Path

from kinfit.core.errors import KinfitError
from kinfit.core.formatting import CAUTIONS, format_interval, format_value
from kinfit.core.schema import check_schema
from kinfit.estimation.diagnostics import format_rhat
from kinfit.output.bundle import write_bundle
from kinfit.output.report_blocks import (
    Page,
    average_blocks,
    law_blocks,
    nested_blocks,
    winner_blocks,
    written_rate_law,
)
from kinfit.output.report_blocks import figure_block as _figure
from kinfit.output.report_blocks import interval_cell as _interval
from kinfit.output.report_blocks import number as _num
from kinfit.output.report_blocks import table_block as _table
from kinfit.output.report_blocks import text_block as _text
from kinfit.output.report_blocks import unit_html as _unit
from kinfit.output.report_blocks import without_empty_columns as _columns
from kinfit.output.text import kelvin_celsius

__all__ = ["build_report", "SECTION_HEADINGS", "written_rate_law"]

SECTION_HEADINGS = {
    "summary": "Summary",
    "conditions": "Runs and their conditions",
    "parameters": "Parameters",
    "runs": "Runs: data, fitted curves and residuals",
    "residuals": "Residual checks",
    "posterior": "Posterior and convergence",
    "ranking": "Ranking of candidate rate laws",
    "initial_rates": "Initial-rates cross-check",
    "spectra": "Spectra",
    "temperature": "Temperature dependence",
    "warnings": "Warnings",
    "cautions": "Cautions",
    "provenance": "Provenance",
}


# the JSON files the report reads, by schema kind (see kinfit.core.schema.SCHEMAS)
_SOURCES = {"result": "result.json", "temperature": "temperature.json",
            "posterior": "posterior.json", "ranking": "ranking.json", "signals": "spectra.json",
            "provenance": "provenance.json"}
BEST = "best"


def _load(folder, kind):
    path = folder / _SOURCES[kind]
    if not path.is_file():
        return None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise KinfitError(f"{path}: cannot be read as JSON ({exc}); was it written by kinfit?") \
            from None
    return check_schema(data, kind, path)


def build_report(folder, title=None):
    """Render ``folder/report.html`` from the outputs in `folder`.

    A ranking's folder gets ``best/report.html`` as well (the best
    candidate's fit on its own).

    Parameters
    ----------
    folder : str or os.PathLike
        An output folder of ``kinfit fit``, ``sample``, ``rank`` or ``demo``.
    title : str, optional
        Default: "Kinetics report" (or "Ranking of candidate rate laws") and
        the study's name.

    Returns
    -------
    pathlib.Path
        The report written (``folder/report.html``).

    Raises
    ------
    KinfitError
        If the folder holds no kinfit results.
    """
    import jinja2

    folder = Path(folder)
    if not folder.is_dir():
        raise KinfitError(f"{folder}: no such folder; give the --out folder of a kinfit command")
    data = {kind: _load(folder, kind) for kind in _SOURCES}
    if not any(v is not None for k, v in data.items() if k != "provenance"):
        raise KinfitError(f"{folder}: holds no kinfit results (result.json, posterior.json, "
                          f"ranking.json, ...); run kinfit fit, sample or rank with --out "
                          f"{folder} first")
    figures = folder
    best = folder / BEST
    if data["ranking"] is not None and (best / _SOURCES["result"]).is_file():
        study = data["ranking"].get("experiment") or "kinfit results"
        build_report(best, title=f"Kinetics report: {study} (best-supported candidate of "
                                 f"the ranking)")
        if data["result"] is None:
            for kind in ("result", "temperature", "signals"):
                data[kind] = data[kind] or _load(best, kind)
            figures = best
    page = Page(folder=folder, figures=figures, data=data)
    sections = []
    for key, builder in (("summary", _summary), ("conditions", _conditions),
                         ("parameters", _parameters), ("runs", _runs),
                         ("residuals", _residual_checks), ("posterior", _posterior),
                         ("ranking", _ranking), ("initial_rates", _initial_rates),
                         ("spectra", _spectra), ("temperature", _temperature),
                         ("warnings", _warnings), ("cautions", _cautions),
                         ("provenance", _provenance)):
        blocks = [b for b in builder(page, data) if b is not None]
        if blocks:
            sections.append({"id": key, "heading": SECTION_HEADINGS[key], "blocks": blocks})
    title = title or _title(data, ranked=figures != folder)
    result = data["result"] or {}
    subtitle = " · ".join(x for x in (
        f"model '{result['model']}'" if result.get("model") else "",
        f"written {data['provenance']['created']}" if data["provenance"] else "",
        "kinfit " + data["provenance"]["kinfit"] if data["provenance"] else "") if x)
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(Path(__file__).parent / "templates"),
        autoescape=jinja2.select_autoescape(["html", "j2"]), undefined=jinja2.StrictUndefined)
    html = env.get_template("report.html.j2").render(title=title, subtitle=subtitle,
                                                   sections=sections)
    return write_bundle(folder, {"report.html": html})[0]


def _title(data, ranked=False):
    """The page title, naming the study (the experiment's name); `ranked` for the folder of
    a ranking, whose fit is its best candidate's."""
    study = next((d.get("experiment") for d in (data["result"], data["ranking"],
                                                 data["posterior"]) if d and
                  d.get("experiment")), None) or "kinfit results"
    if data["ranking"] is not None and (ranked or data["result"] is None):
        return f"Ranking of candidate rate laws: {study}"
    return f"Kinetics report: {study}"


# ------------------------------------------------------------------ sections

def _summary(page, data):
    result = data["result"]
    if not result:
        return []
    units = result.get("units", {})
    stats = result.get("statistics", {})
    ranking = data["ranking"]
    intro = (f"Model '{result['model']}' fitted to all runs of '{result['experiment']}' at "
             f"once ({stats.get('n_data')} points, {stats.get('n_params')} fitted "
             f"parameters); the fit {'converged' if result.get('success') else 'did NOT converge'}.")
    if ranking and page.figures != page.folder:
        intro = (f"The best-supported of {len(ranking.get('candidates', []))} candidate rate "
                 f"laws (see the ranking below), {intro[0].lower()}{intro[1:]}")
    blocks = [_text("text", intro)] + law_blocks(result)
    rows = []
    for name, p in result.get("parameters", {}).items():
        if p.get("role") == "rate constant":
            rows.append([name, format_value(p["value"], p.get("stderr")),
                         format_interval(p.get("ci95"), p.get("stderr")), _unit(p.get("unit"))])
    if rows:
        header, rows = _columns(["rate constant", "value ± standard error",
                                 "95 % interval (covariance)", "unit"], rows,
                                {"95 % interval (covariance)"})
        blocks.append(_table(header, rows))
    for act in (data["temperature"] or {}).get("activation", []):
        k_rows = [[f"{r['temperature_K']:.2f}", _num(r["value"]), _num(r.get("stderr"), 2),
                   _unit(act.get("unit_of_k")), "yes" if r.get("extrapolated") else ""]
                  for r in act.get("rate_constants", [])]
        if k_rows:
            blocks.append(_text("heading", f"{act['rate_constant']} at each temperature"))
            blocks.append(_table(*_columns(["T (K)", "k", "standard error", "unit",
                                            "extrapolated"], k_rows, {"extrapolated"})))
    blocks.append(_text("text", f"Concentrations in {_unit(units.get('concentration'))}, "
                                f"times in {_unit(units.get('time'))}. Rates follow the IUPAC "
                                f"rate of reaction, d[X]/dt = ν_X × rate."))
    return blocks


def _conditions(page, data):
    """The runs and their starting conditions (result.json ``runs``)."""
    result = data["result"] or {}
    runs = result.get("runs")
    if not runs:
        return []
    conc = _unit((result.get("units") or {}).get("concentration"))
    params = result.get("parameters", {})
    species = []
    for run in runs:
        for s in list(run.get("initial", {})) + list(run.get("fitted_initial", {})):
            if s not in species:
                species.append(s)
    temps = any(run.get("temperature_K") is not None for run in runs)
    rows = []
    for run in runs:
        cells = []
        for s in species:
            name = (run.get("fitted_initial") or {}).get(s)
            if name is not None and name in params:
                cells.append(f"{format_value(params[name]['value'], params[name].get('stderr'))}"
                             f" (fitted)")
            else:
                cells.append(f"{run.get('initial', {}).get(s, 0.0):g}")
        temp = ([kelvin_celsius(run["temperature_K"]) if run.get("temperature_K") is not None
                 else "–"] if temps else [])
        rows.append([run["name"], *cells, *temp, run.get("n_points"),
                     ", ".join(run.get("measured", []))])
    header = ["run", *[f"[{s}]₀ ({conc})" for s in species],
              *(["temperature"] if temps else []), "points", "measured"]
    return [_table(header, rows)]


def _parameters(page, data):
    result = data["result"]
    if not result:
        return []
    post = (data["posterior"] or {}).get("parameters", {})
    rows = []
    for name, p in result.get("parameters", {}).items():
        se = p.get("stderr")
        prof = ((post.get(name) or {}).get("profile") or {}).get("ci95")
        rows.append([name, _num(p["value"]), _num(se, 2), _interval(p.get("ci95"), se),
                     _interval(prof, se), _interval((post.get(name) or {}).get("ci95"), se),
                     _unit(p.get("unit")), ("fixed" if not p.get("vary") else "") +
                     (" at a bound" if p.get("at_bound") else "")])
    intervals = {"95 % (covariance)", "95 % (profile)", "95 % (posterior)", "note"}
    header, rows = _columns(["parameter", "estimate", "standard error", "95 % (covariance)",
                             "95 % (profile)", "95 % (posterior)", "unit", "note"], rows,
                            intervals)
    blocks = [_table(header, rows)]
    stats = result.get("statistics", {})
    if "95 % (covariance)" in header:
        how = stats.get("ci95_distribution")
        quantile = stats.get("ci95_quantile")
        blocks.append(_text("text", "95 % (covariance): estimate ± q × standard error"
                            + (f", q = {quantile:.3f} ({how})" if quantile else "")
                            + "; symmetric in each parameter itself (in k, not in log k: rate "
                              "constants are fitted as log10 k and their standard errors "
                              "mapped to k by the delta method)."))
    blocks.append(_statistics_table(stats))
    corr = result.get("correlation")
    if corr:
        names = corr["names"]
        blocks.append(_text("heading", "Correlation matrix"))
        blocks.append(_table([""] + names, [[a] + [f"{v:+.3f}" if v is not None else "–"
                                                   for v in row]
                                            for a, row in zip(names, corr["matrix"])]))
    return blocks


def _statistics_table(stats):
    """χ² for a weighted fit; otherwise the residual sum of squares with its unit and σ̂."""
    weighted = stats.get("weighted", stats.get("noise") == "declared")
    first = [stats.get("n_data"), stats.get("n_params")]
    last = [_num(stats.get("aic"), 6), _num(stats.get("aicc"), 6), _num(stats.get("bic"), 6)]
    if weighted:
        return _table(["N", "p", "χ² (weighted)", "χ²/(N−p)", "noise", "AIC", "AICc", "BIC"],
                      [first + [_num(stats.get("chisqr"), 6),
                                _num(stats.get("reduced_chisqr"), 3),
                                "declared (weighted fit)"] + last])
    rss_unit = stats.get("residual_sum_of_squares_unit")
    sigma_unit = stats.get("sigma_unit")
    return _table(["N", "p", "residual sum of squares" + (f" ({_unit(rss_unit)})" if rss_unit
                                                           else ""),
                   "σ̂" + (f" ({_unit(sigma_unit)})" if sigma_unit else ""), "noise", "AIC",
                   "AICc", "BIC"],
                  [first + [_num(stats.get("chisqr"), 6), _num(stats.get("sigma"), 3),
                            "estimated from the fit (unweighted)"] + last])


def _runs(page, data):
    if not data["result"]:
        return []
    folder = page.figures
    return [_figure(page.folder, "bands", "Each run's data with the posterior's curves and 95 % "
                                          "bands for a new measurement.")
            or _figure(folder, "fit", "Each run's data (points) with the global fit (lines); "
                                      "species a run did not measure dashed."),
            _figure(folder, "residuals", "Residuals (observed − fitted) of each run; the grey "
                                         "band marks ±2σ.")]


def _residual_checks(folder, data):
    result = data["result"] or {}
    checks = result.get("residual_checks")
    if not checks:
        return []
    rows = [[c["run"], c["species"], c["n"],
             f"{c.get('n_positive', '–')}/{c.get('n_negative', '–')}", c["runs"], _num(c.get("expected_runs"), 3),
             _num(c.get("p_few_runs"), 2), _num(c.get("autocorrelation"), 2),
             _num(c.get("p_autocorrelation"), 2), c["verdict"]]
            for c in checks]
    summary = result.get("residual_check_summary")
    misfit = any(c.get("misfit") for c in checks)
    if summary:
        blocks = [_text("warning" if misfit else "text", summary["heading"] + "."),
                  _text("text", f"Tests: {summary['tests']}. Rule: {summary['rule']}.")]
    else:       # a result.json written before the summary was recorded
        blocks = [_text("warning" if misfit else "text",
                        f"{sum(bool(c.get('misfit')) for c in checks)} of {len(checks)} "
                        f"traces show systematic misfit (runs test, p < 0.01).")]
    return blocks + [_table(["run", "species", "N", "+/−", "runs", "expected runs",
                             "p (few runs, exact)", "lag-1 autocorr.", "p (lag-1)",
                             "verdict"], rows)]


def _rhat(x):
    """R-hat with the digits that show why it passes or fails (see format_rhat)."""
    return "–" if x is None else format_rhat(float(x))


def _posterior(page, data):
    post = data["posterior"]
    if not post:
        return []
    diag = post.get("diagnostics", {})
    blocks = []
    converged = diag.get("converged")
    advice = diag.get("advice") or "run more steps"
    reasons = "; ".join(diag.get("reasons") or [])
    blocks.append(_text("text" if converged else "warning",
                        "The chains converged." if converged else
                        f"The chains have NOT converged ({reasons}): "
                        f"{advice if isinstance(advice, str) else '; '.join(advice)}"))
    rows = [[name, _num(p.get("median")), _num(p.get("mean")), _num(p.get("sd"), 2),
             _interval(p.get("ci68"), p.get("sd")), _interval(p.get("ci95"), p.get("sd")),
             _unit(p.get("unit"))]
            for name, p in post.get("parameters", {}).items()]
    blocks.append(_table(["parameter", "median", "mean", "sd", "68 %", "95 %", "unit"], rows))
    per = [[name, _num((diag.get("autocorr_time") or {}).get(name), 3),
            _num((diag.get("ess") or {}).get(name), 4), _rhat((diag.get("rhat") or {}).get(name))]
           for name in post.get("parameters", {})]
    if per:
        blocks.append(_table(["parameter", "autocorrelation time", "effective samples",
                              "split R-hat"], per))
    summary = [[k.replace("_", " "), _num(v, 4) if isinstance(v, (int, float)) else str(v)]
               for k, v in diag.items()
               if not isinstance(v, (dict, list)) and k not in ("advice",)]
    if summary:
        blocks.append(_table(["diagnostic", "value"], summary))
    corr = post.get("rate_constant_order_correlations")
    if corr:
        blocks.append(_text("text", "Correlation between rate constants and orders in the "
                                    "posterior: " + _correlations_text(corr)))
    blocks.append(_figure(page.folder, "corner", "Posterior of the parameters (corner plot)."))
    blocks.append(_figure(page.folder, "profiles", "Profile likelihood of each parameter."))
    return blocks


def _correlations_text(corr):
    if isinstance(corr, dict):
        return "; ".join(f"{k} {v:+.2f}" if isinstance(v, (int, float)) else f"{k} {v}"
                         for k, v in corr.items())
    if isinstance(corr, list):
        return "; ".join(f"{c.get('rate_constant')}–{c.get('order')} "
                         f"{c.get('posterior', float('nan')):+.2f}" if isinstance(c, dict)
                         else str(c) for c in corr)
    return str(corr)


def _ranking(page, data):
    ranking = data["ranking"]
    if not ranking:
        return []
    candidates = ranking.get("candidates", [])
    blocks = winner_blocks(ranking)
    rows = [[c["name"], ", ".join(f"{k}={v:g}" for k, v in (c.get("fixed") or {}).items()),
             c["n_params"], _num(c.get("aicc"), 6), _num(c.get("delta_aicc"), 3),
             _num(c.get("akaike_weight"), 3), _num(c.get("bic_weight"), 3)]
            for c in candidates]
    blocks.append(_table(*_columns(["candidate", "fixed", "p", "AICc", "ΔAICc",
                                    "Akaike weight", "BIC weight"], rows, {"fixed"})))
    for verdict in ranking.get("verdicts", []) or []:
        blocks.append(_text("text", verdict if isinstance(verdict, str) else str(verdict)))
    blocks.append(_figure(page.folder, "weights", "Akaike weights of the candidates."))
    blocks += nested_blocks(ranking) + average_blocks(ranking)
    return blocks


def _initial_rates(page, data):
    ranking = data["ranking"] or {}
    cross = ranking.get("initial_rates")
    if not cross:
        return []
    blocks = [_figure(page.folder, "initial_rates", "Initial rates against initial "
                                                     "concentrations (log-log) with the "
                                                     "regression.")]
    for w in cross.get("warnings", []) or []:
        blocks.append(page.warning(w))
    return blocks


def _spectra(page, data):
    spectra = data["signals"]
    if not spectra:
        return []
    folder = page.figures
    blocks = []
    coefficients = spectra.get("coefficients") or {}
    if coefficients:
        rows = [[name, _num(c.get("value")), _num(c.get("stderr"), 2), _unit(c.get("unit")),
                 c.get("kind", "")] for name, c in coefficients.items()]
        blocks.append(_text("text", "Absorptivities, offsets and drifts solved by linear "
                                         "least squares in every evaluation (variable "
                                         "projection); standard errors from the full "
                                         "Jacobian."))
        blocks.append(_table(["coefficient", "value", "standard error", "unit", "kind"], rows))
    components = spectra.get("components")
    if components:
        used = components.get("n_used")
        blocks.append(_text("text", f"SVD of the spectra: {components['n_significant']} "
                                         f"significant component(s)"
                            + (f"; the fit used the leading {used}" if used else "")))
    return blocks + [
        _figure(folder, "spectra", "Resolved spectrum of each species."),
        _figure(folder, "wavelength_traces", "Fitted against measured at chosen wavelengths."),
        _figure(folder, "residual_map", "Residuals (observed − fitted) over time and "
                                        "wavelength."),
        _figure(folder, "components", "Singular values of the spectra and the threshold.")]


def _temperature(page, data):
    temp = data["temperature"]
    if not temp:
        return []
    blocks = []
    for act in temp.get("activation", []):
        rows = [[e.get("label", name), _num(e.get("value")), _num(e.get("stderr"), 2),
                 _interval(e.get("interval"), e.get("stderr")),
                 _interval(e.get("profile_interval"), e.get("stderr")),
                 _interval(e.get("posterior_interval"), e.get("stderr")),
                 _unit(e.get("unit"))]
                for name, e in act.get("estimates", {}).items()]
        blocks.append(_text("heading", f"{act['rate_constant']}: {act['law'].capitalize()} "
                                       f"law, T_ref = {act['reference_temperature_K']:.2f} K"))
        blocks.append(_table(*_columns(["quantity", "estimate", "standard error",
                                        "95 % (covariance)", "95 % (profile)",
                                        "95 % (posterior)", "unit"], rows,
                                       {"95 % (covariance)", "95 % (profile)",
                                        "95 % (posterior)"})))
    blocks.append(_figure(page.figures, "arrhenius", "Arrhenius plot: ln k against 1/T, "
                                                     "per-temperature fits and the global "
                                                     "fit."))
    blocks.append(_figure(page.figures, "eyring", "Eyring plot: ln(k/T) against 1/T."))
    for w in temp.get("order_warnings", []) or []:
        blocks.append(page.warning(w))
    return blocks


def _warnings(page, data):
    """Every warning of the results, each once (those shown in a section above are not
    repeated)."""
    return [page.warning(w) for source in ("result", "posterior", "ranking", "signals")
            for w in (data[source] or {}).get("warnings", []) or []]


def _cautions(page, data):
    extra = (data["temperature"] or {}).get("cautions") or []
    texts = [CAUTIONS] + ([extra] if isinstance(extra, str) else list(extra))
    seen = []
    for t in texts:
        if t not in seen:
            seen.append(t)
    return [_text("caution", t) for t in seen]


def _provenance(page, data):
    prov = data["provenance"]
    if not prov:
        return []
    rows = [["kinfit", prov.get("kinfit")], ["Python", prov.get("python")],
            ["platform", prov.get("platform")], ["command", " ".join(prov.get("command", []))],
            ["seed", prov.get("seed")], ["created (UTC)", prov.get("created")]]
    rows += [[k, v] for k, v in (prov.get("settings") or {}).items()]
    libs = ", ".join(f"{k} {v}" for k, v in (prov.get("libraries") or {}).items() if v)
    files = [[role, f["file"], f["sha256"], f["bytes"]]
             for role, f in (prov.get("inputs") or {}).items()]
    return [_table(["item", "value"], [[a, "–" if b is None else str(b)] for a, b in rows],
                   numeric=False),
            _text("text", f"Libraries: {libs}."),
            _table(["input", "file", "SHA-256", "bytes"], files, numeric=False)]
