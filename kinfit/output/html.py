"""One self-contained HTML report of everything an output folder holds.

:func:`build_report` reads what the commands wrote into a folder — the JSON
files (``result.json``, ``temperature.json``, ``posterior.json``,
``ranking.json``, ``spectra.json``, ``provenance.json``) and the figures
(SVG) — and renders ``report.html`` with jinja2. Figures are embedded as
``data:`` URIs, the style sheet is inline, and nothing refers to the network,
so the file opens anywhere and prints cleanly. Each section appears only when
its data exist.

Each JSON file is checked against the schema version this kinfit writes
(:mod:`kinfit.core.schema`): files without a version (written before
versions were recorded) are read, a file of another major version is refused.
"""

from __future__ import annotations

import base64
import json
import math
from pathlib import Path

from kinfit.core.errors import KinfitError
from kinfit.core.formatting import CAUTIONS
from kinfit.core.schema import check_schema
from kinfit.output.bundle import write_bundle

__all__ = ["build_report", "SECTION_HEADINGS"]

SECTION_HEADINGS = {
    "summary": "Summary",
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


def _figure(folder, stem, caption, alt=None):
    """A figure block from stem.svg (or stem.png), or None if neither exists."""
    for suffix, mime in ((".svg", "image/svg+xml"), (".png", "image/png")):
        path = folder / f"{stem}{suffix}"
        if path.is_file():
            data = base64.b64encode(path.read_bytes()).decode("ascii")
            return {"kind": "figure", "src": f"data:{mime};base64,{data}", "caption": caption,
                    "alt": alt or caption}
    return None


def _num(x, digits=4):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "–"
    if isinstance(x, (int,)) and not isinstance(x, bool):
        return str(x)
    return f"{x:.{digits}g}"


def _interval(pair, digits=4):
    if not pair or pair[0] is None or pair[1] is None:
        return "–"
    return f"[{_num(pair[0], digits)}, {_num(pair[1], digits)}]"


def _text(kind, text, **extra):
    return {"kind": kind, "text": text, **extra}


def _table(header, rows, numeric=True):
    return {"kind": "table", "header": header, "rows": rows, "numeric": numeric}


def build_report(folder, title=None):
    """Render ``folder/report.html`` from the outputs in `folder`.

    Parameters
    ----------
    folder : str or os.PathLike
        An output folder of ``kinfit fit``, ``sample``, ``rank`` or ``demo``.
    title : str, optional

    Returns
    -------
    pathlib.Path
        The report written.

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
    sections = []
    for key, builder in (("summary", _summary), ("parameters", _parameters),
                         ("runs", _runs), ("residuals", _residual_checks),
                         ("posterior", _posterior), ("ranking", _ranking),
                         ("initial_rates", _initial_rates), ("spectra", _spectra),
                         ("temperature", _temperature), ("warnings", _warnings),
                         ("cautions", _cautions), ("provenance", _provenance)):
        blocks = [b for b in builder(folder, data) if b is not None]
        if blocks:
            sections.append({"id": key, "heading": SECTION_HEADINGS[key], "blocks": blocks})
    result = data["result"] or {}
    title = title or f"Kinetics report: {result.get('model') or 'kinfit results'}"
    subtitle = " · ".join(x for x in (
        f"experiment {result['experiment']}" if result.get("experiment") else "",
        f"written {data['provenance']['created']}" if data["provenance"] else "",
        "kinfit " + data["provenance"]["kinfit"] if data["provenance"] else "") if x)
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(Path(__file__).parent / "templates"),
        autoescape=jinja2.select_autoescape(["html", "j2"]), undefined=jinja2.StrictUndefined)
    html = env.get_template("report.html.j2").render(title=title, subtitle=subtitle,
                                                   sections=sections)
    return write_bundle(folder, {"report.html": html})[0]


# ------------------------------------------------------------------ sections

def _summary(folder, data):
    result = data["result"]
    if not result:
        return []
    units = result.get("units", {})
    stats = result.get("statistics", {})
    blocks = [_text("text", f"Model '{result['model']}' fitted to all runs of "
                            f"'{result['experiment']}' at once ({stats.get('n_data')} points, "
                            f"{stats.get('n_params')} fitted parameters); the fit "
                            f"{'converged' if result.get('success') else 'did NOT converge'}.")]
    for law in result.get("rate_laws", []):
        direction = " (reverse)" if law.get("direction") == "reverse" else ""
        blocks.append(_text("law", f"{law['reaction']}{direction}:  rate = {law['rate']}",
                            note=f"overall order {law['overall_order']:.3g}"))
    rows = []
    for name, p in result.get("parameters", {}).items():
        if p.get("role") == "rate constant":
            rows.append([name, _num(p["value"]), _num(p.get("stderr"), 2), p.get("unit") or ""])
    if rows:
        blocks.append(_table(["rate constant", "value", "standard error", "unit"], rows))
    for act in (data["temperature"] or {}).get("activation", []):
        k_rows = [[f"{r['temperature_K']:.2f}", _num(r["value"]), _num(r.get("stderr"), 2),
                   act.get("unit_of_k") or "", "yes" if r.get("extrapolated") else ""]
                  for r in act.get("rate_constants", [])]
        if k_rows:
            blocks.append(_text("heading", f"{act['rate_constant']} at each temperature"))
            blocks.append(_table(["T (K)", "k", "standard error", "unit", "extrapolated"],
                                 k_rows))
    blocks.append(_text("text", f"Concentrations in {units.get('concentration')}, times in "
                                f"{units.get('time')}. Rates follow the IUPAC rate of reaction, "
                                f"d[X]/dt = ν_X × rate."))
    return blocks


def _parameters(folder, data):
    result = data["result"]
    if not result:
        return []
    post = (data["posterior"] or {}).get("parameters", {})
    rows = []
    for name, p in result.get("parameters", {}).items():
        se = p.get("stderr")
        cov = [p["value"] - 1.96 * se, p["value"] + 1.96 * se] if se is not None else None
        prof = ((post.get(name) or {}).get("profile") or {}).get("ci95")
        rows.append([name, _num(p["value"]), _num(se, 2), _interval(cov),
                     _interval(prof), _interval((post.get(name) or {}).get("ci95")),
                     p.get("unit") or "", ("fixed" if not p.get("vary") else "") +
                     (" at a bound" if p.get("at_bound") else "")])
    blocks = [_table(["parameter", "estimate", "standard error", "95 % (covariance)",
                      "95 % (profile)", "95 % (posterior)", "unit", "note"], rows)]
    stats = result.get("statistics", {})
    blocks.append(_table(["N", "p", "χ²", "χ²/(N−p)", "noise", "AIC", "AICc", "BIC"], [[
        stats.get("n_data"), stats.get("n_params"), _num(stats.get("chisqr"), 6),
        _num(stats.get("reduced_chisqr"), 3), stats.get("noise"), _num(stats.get("aic"), 6),
        _num(stats.get("aicc"), 6), _num(stats.get("bic"), 6)]]))
    corr = result.get("correlation")
    if corr:
        names = corr["names"]
        blocks.append(_text("heading", "Correlation matrix"))
        blocks.append(_table([""] + names, [[a] + [f"{v:+.3f}" if v is not None else "–"
                                                   for v in row]
                                            for a, row in zip(names, corr["matrix"])]))
    return blocks


def _runs(folder, data):
    if not data["result"]:
        return []
    return [_figure(folder, "bands", "Each run's data with the posterior's curves and 95 % "
                                     "bands for a new measurement.")
            or _figure(folder, "fit", "Each run's data (points) with the global fit (lines)."),
            _figure(folder, "residuals", "Residuals of each run; the grey band marks ±2σ.")]


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


def _posterior(folder, data):
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
             _interval(p.get("ci68")), _interval(p.get("ci95"))]
            for name, p in post.get("parameters", {}).items()]
    blocks.append(_table(["parameter", "median", "mean", "sd", "68 %", "95 %"], rows))
    per = [[name, _num((diag.get("autocorr_time") or {}).get(name), 3),
            _num((diag.get("ess") or {}).get(name), 4), _num((diag.get("rhat") or {}).get(name), 4)]
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
    blocks.append(_figure(folder, "corner", "Posterior of the parameters (corner plot)."))
    blocks.append(_figure(folder, "profiles", "Profile likelihood of each parameter."))
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


def _ranking(folder, data):
    ranking = data["ranking"]
    if not ranking:
        return []
    rows = [[c["name"], ", ".join(f"{k}={v:g}" for k, v in (c.get("fixed") or {}).items()),
             c["n_params"], _num(c.get("aicc"), 6), _num(c.get("delta_aicc"), 3),
             _num(c.get("akaike_weight"), 3), _num(c.get("bic_weight"), 3)]
            for c in ranking.get("candidates", [])]
    blocks = [_table(["candidate", "fixed", "p", "AICc", "ΔAICc", "Akaike weight",
                      "BIC weight"], rows)]
    for verdict in ranking.get("verdicts", []) or []:
        blocks.append(_text("text", verdict if isinstance(verdict, str) else str(verdict)))
    blocks.append(_figure(folder, "weights", "Akaike weights of the candidates."))
    return blocks


def _initial_rates(folder, data):
    ranking = data["ranking"] or {}
    cross = ranking.get("initial_rates")
    if not cross:
        return []
    blocks = [_figure(folder, "initial_rates", "Initial rates against initial concentrations "
                                                "(log-log) with the regression.")]
    for w in cross.get("warnings", []) or []:
        blocks.append(_text("warning", w))
    return blocks


def _spectra(folder, data):
    spectra = data["signals"]
    if not spectra:
        return []
    blocks = []
    coefficients = spectra.get("coefficients") or {}
    if coefficients:
        rows = [[name, _num(c.get("value")), _num(c.get("stderr"), 2), c.get("unit", ""),
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
        _figure(folder, "residual_map", "Residuals over time and wavelength."),
        _figure(folder, "components", "Singular values of the spectra and the threshold.")]


def _temperature(folder, data):
    temp = data["temperature"]
    if not temp:
        return []
    blocks = []
    for act in temp.get("activation", []):
        rows = [[e.get("label", name), _num(e.get("value")), _num(e.get("stderr"), 2),
                 _interval(e.get("interval")), _interval(e.get("profile_interval")),
                 _interval(e.get("posterior_interval")), e.get("unit", "")]
                for name, e in act.get("estimates", {}).items()]
        blocks.append(_text("heading", f"{act['rate_constant']}: {act['law'].capitalize()} "
                                       f"law, T_ref = {act['reference_temperature_K']:.2f} K"))
        blocks.append(_table(["quantity", "estimate", "standard error", "95 % (covariance)",
                              "95 % (profile)", "95 % (posterior)", "unit"], rows))
    blocks.append(_figure(folder, "arrhenius", "Arrhenius plot: ln k against 1/T, "
                                               "per-temperature fits and the global fit."))
    blocks.append(_figure(folder, "eyring", "Eyring plot: ln(k/T) against 1/T."))
    for w in temp.get("order_warnings", []) or []:
        blocks.append(_text("warning", w))
    return blocks


def _warnings(folder, data):
    out = []
    for source in ("result", "posterior", "ranking", "signals"):
        for w in (data[source] or {}).get("warnings", []) or []:
            out.append(_text("warning", w))
    return out


def _cautions(folder, data):
    extra = (data["temperature"] or {}).get("cautions") or []
    texts = [CAUTIONS] + ([extra] if isinstance(extra, str) else list(extra))
    seen = []
    for t in texts:
        if t not in seen:
            seen.append(t)
    return [_text("caution", t) for t in seen]


def _provenance(folder, data):
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
