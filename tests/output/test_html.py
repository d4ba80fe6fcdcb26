"""The self-contained HTML report: structure, no network, opens in a real browser."""

from __future__ import annotations

import hashlib
import json
import re
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from conftest import ROOT
from typer.testing import CliRunner

from kinfit.app.cli import app
from kinfit.core.errors import KinfitError
from kinfit.core.formatting import CAUTIONS, format_interval, format_value
from kinfit.output.html import build_report

ARTIFACTS = ROOT / "tests" / "artifacts"


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "demo"
    result = CliRunner().invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out


def parse(html):
    # A strict XML parser: any unbalanced tag or bad entity fails.
    return ET.fromstring(html.replace("<!DOCTYPE html>", "", 1))


def test_report_is_well_formed_and_self_contained(demo_folder):
    html = (demo_folder / "report.html").read_text(encoding="utf-8")
    root = parse(html)
    ns = {"h": "http://www.w3.org/1999/xhtml"}
    headings = [h.text for h in root.iterfind(".//h:h2", ns)]
    expected = ["Summary", "Runs and their conditions", "Parameters",
                "Runs: data, fitted curves and residuals", "Residual checks",
                "Ranking of candidate rate laws", "Initial-rates cross-check", "Cautions",
                "Provenance"]
    assert [h for h in headings if h in expected] == expected
    assert set(headings) - set(expected) <= {"Warnings"}
    # no external resource of any kind: every src is a data: URI, every href an anchor
    for el in root.iter():
        for attr in ("src", "href"):
            value = el.get(attr)
            if value is not None:
                assert value.startswith(("data:", "#")), value
    assert not re.search(r"(?i)\b(https?:|ftp:)//", html.replace(
        'xmlns="http://www.w3.org/1999/xhtml"', ""))
    assert "calorimetry" in html and "process-safety review" in html


def test_provenance_hashes_match_the_inputs(demo_folder):
    prov = json.loads((demo_folder / "provenance.json").read_text())
    assert set(prov["inputs"]) == {"experiment", "model", "data: traces.csv"}
    html = (demo_folder / "report.html").read_text(encoding="utf-8")
    for entry in prov["inputs"].values():
        digest = hashlib.sha256(Path(entry["file"]).read_bytes()).hexdigest()
        assert entry["sha256"] == digest and digest in html


def test_sections_follow_the_data(tmp_path, demo_folder):
    folder = tmp_path / "copy"
    shutil.copytree(demo_folder, folder)
    (folder / "residuals.svg").unlink()
    (folder / "residuals.png").unlink()
    html = build_report(folder).read_text(encoding="utf-8")
    assert "residuals of each run" not in html.lower()
    with pytest.raises(KinfitError, match="holds no kinfit results"):
        build_report(tmp_path)
    with pytest.raises(KinfitError, match="no such folder"):
        build_report(tmp_path / "nope")


def test_report_command(demo_folder):
    result = CliRunner().invoke(app, ["report", str(demo_folder)])
    assert result.exit_code == 0 and "report.html" in result.output


def _browser():
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    driver = shutil.which("chromedriver")
    if not (chromium and driver):
        pytest.skip("headless Chromium is not installed (Debian packages chromium and "
                    "chromium-driver; .ci/run installs them)")
    webdriver = pytest.importorskip("selenium.webdriver")
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-quic",
                 "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--window-size=1200,1800"):
        options.add_argument(flag)
    options.binary_location = chromium
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    return webdriver.Chrome(service=Service(driver), options=options)


def test_report_opens_in_headless_chromium(demo_folder):
    browser = _browser()
    try:
        browser.get((demo_folder / "report.html").as_uri())
        headings = [h.text for h in browser.find_elements("css selector", "h2")]
        assert "Summary" in headings and "Provenance" in headings
        images = browser.execute_script(
            "return Array.from(document.images).map(i => [i.complete, i.naturalWidth])")
        assert images and all(done and width > 0 for done, width in images)
        errors = [e for e in browser.get_log("browser") if e["level"] in ("SEVERE", "ERROR")]
        assert errors == []
        requests = [json.loads(e["message"])["message"] for e in browser.get_log("performance")]
        urls = {m["params"]["request"]["url"] for m in requests
                if m["method"] == "Network.requestWillBeSent"}
        assert all(u.startswith(("file:", "data:")) for u in urls), urls
        ARTIFACTS.mkdir(exist_ok=True)
        assert browser.save_screenshot(str(ARTIFACTS / "report.png"))
    finally:
        browser.quit()


def test_report_reads_files_without_a_schema_and_refuses_an_unknown_one(tmp_path, demo_folder):
    # files written before versions were recorded have no "schema" key: still read
    folder = tmp_path / "old"
    shutil.copytree(demo_folder, folder)
    for path in folder.glob("*.json"):
        data = json.loads(path.read_text(encoding="utf-8"))
        assert next(iter(data)) == "schema"
        del data["schema"]
        path.write_text(json.dumps(data), encoding="utf-8")
    html = build_report(folder).read_text(encoding="utf-8")
    assert "Ranking of candidate rate laws" in html and "Provenance" in html
    # a later major version is refused in one line, and the old report is left alone
    before = (folder / "report.html").read_bytes()
    data = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    (folder / "result.json").write_text(json.dumps({"schema": "kinfit.result/2", **data}))
    result = CliRunner().invoke(app, ["report", str(folder)])
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert result.exit_code == 2 and len(errors) == 1, result.output
    assert "schema 'kinfit.result/2' is not one this kinfit reads" in errors[0]
    assert (folder / "report.html").read_bytes() == before


def test_report_shows_the_temperature_caution_whole(tmp_path, arrhenius_study):
    from kinfit.analysis.activation import activation_parameters
    from kinfit.output.fit import write_fit
    from kinfit.output.temperature import temperature_bundle, temperature_cautions

    result = arrhenius_study["result"]
    acts = activation_parameters(result)
    write_fit(tmp_path, result, extra_files=temperature_bundle(acts))
    root = parse(build_report(tmp_path).read_text(encoding="utf-8"))
    ns = {"h": "http://www.w3.org/1999/xhtml"}
    cautions = [div.text for div in root.iterfind(".//h:div[@class='caution']", ns)]
    assert cautions == [CAUTIONS, temperature_cautions(acts[0].temperature_range)]


NS = {"h": "http://www.w3.org/1999/xhtml"}


def _tables(root):
    """Each table of a page as (header, rows) of cell texts."""
    out = []
    for table in root.iterfind(".//h:table", NS):
        header = [th.text for th in table.iterfind(".//h:th", NS)]
        rows = [[td.text for td in tr.iterfind("h:td", NS)]
                for tr in table.iterfind(".//h:tbody/h:tr", NS)]
        out.append((header, rows))
    return out


def test_report_names_the_study_lists_the_runs_and_shows_units_with_superscripts(demo_folder):
    html = (demo_folder / "report.html").read_text(encoding="utf-8")
    root = parse(html)
    assert root.find(".//h:title", NS).text == "Kinetics report: thiol-acrylate cure, 25 degC"
    tables = _tables(root)
    runs = next(rows for header, rows in tables if header[0] == "run" and "points" in header)
    header = next(h for h, rows in tables if rows is runs)
    assert header == ["run", "[thiol]₀ (mM)", "[acrylate]₀ (mM)", "[amine]₀ (mM)",
                      "temperature", "points", "measured"]
    assert [r[0] for r in runs] == ["r1", "r2", "r3", "r4", "r5", "r6"]
    assert runs[1][1:4] == ["100", "60", "5"] and runs[1][5:] == ["50", "thiol, adduct"]
    assert runs[0][4] == "298.15 K (25.0 °C)"
    # units: superscripts on the page, plain text in the JSON beside it
    assert "mM⁻¹·⁵ min⁻¹" in html and "^-" not in html
    assert json.loads((demo_folder / "result.json").read_text())["parameters"]["k"]["unit"] \
        == "mM^-1.5 min^-1"


def test_interval_columns_only_for_analyses_that_were_run(demo_folder, tmp_path):
    # no posterior in this folder: no profile or posterior column of "–"
    root = parse((demo_folder / "report.html").read_text(encoding="utf-8"))
    header, rows = next(t for t in _tables(root) if t[0][0] == "parameter")
    assert header == ["parameter", "estimate", "standard error", "95 % (covariance)", "unit"]
    data = json.loads((demo_folder / "result.json").read_text())
    k = data["parameters"]["k"]
    assert rows[0][3] == format_interval(k["ci95"], k["stderr"])      # "1.369e-04 – 1.609e-04"
    assert rows[0][3] == f"{k['ci95'][0]:.3e} – {k['ci95'][1]:.3e}"
    # the weighted fit says χ²
    stats = next(t for t in _tables(root) if t[0][:2] == ["N", "p"])
    assert stats[0][2] == "χ² (weighted)"


def test_an_unweighted_report_names_the_residual_sum_of_squares(tmp_path):
    from conftest import MODELS

    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.output.fit import write_fit

    (tmp_path / "e.toml").write_text('name = "decay study"\n[units]\ntime = "min"\n'
                                     'concentration = "mM"\n[[runs]]\nname = "a"\n'
                                     'file = "a.csv"\ninitial = { A = 1 }\n')
    (tmp_path / "a.csv").write_text("time,A\n0,1\n5,0.61\n10,0.37\n20,0.14\n")
    result = fit(load_experiment(tmp_path / "e.toml"),
                 load_mechanism(MODELS / "first_order.toml"), starts=1)
    write_fit(tmp_path / "out", result)
    root = parse(build_report(tmp_path / "out").read_text(encoding="utf-8"))
    header, rows = next(t for t in _tables(root) if t[0][:2] == ["N", "p"])
    assert header[2:4] == ["residual sum of squares (mM²)", "σ̂ (mM)"]
    assert "χ²" not in "".join(header)
    assert root.find(".//h:title", NS).text == "Kinetics report: decay study"


@pytest.fixture(scope="module")
def ranking_folder(tmp_path_factory, small_ranking):
    from kinfit.output.ranking import write_ranking

    comparison, _, _ = small_ranking
    out = tmp_path_factory.mktemp("ranked") / "out"
    write_ranking(out, comparison)
    build_report(out)
    return out, comparison


def test_ranking_report_names_the_winner_and_carries_its_fit(ranking_folder):
    out, comparison = ranking_folder
    html = (out / "report.html").read_text(encoding="utf-8")
    root = parse(html)
    assert root.find(".//h:title", NS).text == f"Ranking of candidate rate laws: " \
                                                 f"{comparison.best.fit.experiment.name}"
    # the winner (orders m = 1, n = 2 fixed) written out, with k ± its interval and unit
    laws = [span.text for span in root.iterfind(".//h:span[@class='law']", NS)]
    assert "A + B -> P:  rate = k [A] [B]²" in laws
    fit = comparison.best.fit
    k, se = fit.values["k"], fit.stderr["k"]
    lo, hi = fit.interval("k")
    assert f"k = {format_value(k, se)} M⁻² s⁻¹ (95 % interval {format_interval((lo, hi), se)})" \
        in html
    headings = [h.text for h in root.iterfind(".//h:h3", NS)]
    assert any(h.startswith(f"Best supported: {comparison.best.name} (Akaike weight")
               for h in headings) and comparison.best.label == "m=1, n=2"
    assert "Nested pairs: F-test and likelihood ratio" in headings
    assert "Model-averaged parameters" in headings
    # the winner's parameter table, runs and fit figures (from best/)
    headers = [h for h, _ in _tables(root)]
    assert ["parameter", "value ± standard error", "95 % interval (covariance)", "unit", "role",
            "note"] in headers
    assert any(h[:2] == ["smaller", "larger"] for h in headers)
    assert any(h[0] == "run" and "points" in h for h in headers)
    captions = [c.text for c in root.iterfind(".//h:figcaption", NS)]
    assert any(c.startswith("Each run's data (points) with the global fit") for c in captions)
    # best/ has its own report, titled for the study
    best = parse((out / "best" / "report.html").read_text(encoding="utf-8"))
    assert "best-supported candidate" in best.find(".//h:title", NS).text
    assert {h.text for h in best.iterfind(".//h:h2", NS)} >= {"Summary", "Parameters"}


def test_each_warning_appears_once(tmp_path, demo_folder):
    folder = tmp_path / "copy"
    shutil.copytree(demo_folder, folder)
    text = "the same warning from two results"
    for name in ("result.json", "ranking.json"):
        data = json.loads((folder / name).read_text(encoding="utf-8"))
        data["warnings"] = [text, text]
        (folder / name).write_text(json.dumps(data), encoding="utf-8")
    html = build_report(folder).read_text(encoding="utf-8")
    assert html.count(text) == 1


def test_residual_checks_say_what_was_and_was_not_judged(demo_folder):
    # The heading counts judged, misfitted and unjudged traces from result.json's summary;
    # the tests and the rule are named; the table carries both p-values.
    summary = json.loads((demo_folder / "result.json").read_text())["residual_check_summary"]
    html = (demo_folder / "report.html").read_text(encoding="utf-8")
    section = html[html.index('id="residuals"'):html.index('id="ranking"')]
    assert summary["heading"] in section and "traces judged" in summary["heading"]
    assert "exact runs test" in section and "Ljung–Box" in section
    assert "too short to judge where neither does and the runs test could not reach" in \
        section
    assert "p (few runs, exact)" in section and "p (lag-1)" in section
