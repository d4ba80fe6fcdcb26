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
from kinfit.core.formatting import CAUTIONS
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
    expected = ["Summary", "Parameters", "Runs: data, fitted curves and residuals",
                "Residual checks", "Ranking of candidate rate laws", "Initial-rates cross-check",
                "Cautions", "Provenance"]
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
