"""The rule for existing output folders, and the templates shipped in the package."""

from __future__ import annotations

import pytest
from conftest import TEMPLATES

from kinfit.app.folders import (
    check_out,
    copy_templates,
    earlier_results,
    remove_stale,
    template_files,
)
from kinfit.core.errors import KinfitError


def test_a_new_or_empty_folder_or_one_without_results_is_fine(tmp_path):
    check_out(tmp_path / "new")
    check_out(tmp_path)
    (tmp_path / "traces.csv").write_text("run,time,species,value\n")   # the user's own
    (tmp_path / "notes").mkdir()
    (tmp_path / "notes" / "result.json").write_text("{}")    # not a folder kinfit writes
    check_out(tmp_path)
    assert earlier_results(tmp_path) == []


def test_earlier_results_are_found_in_the_folders_kinfit_writes(tmp_path):
    for name in ("fit.png", "best/result.json", "ranking/best/fit.svg",
                 "spectrometer/spectra/residual_map_r1.csv", "inputs/traces.csv"):
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text("x")
    found = [p.relative_to(tmp_path).as_posix() for p in earlier_results(tmp_path)]
    assert found == ["fit.png", "best/result.json", "ranking/best/fit.svg",
                     "spectrometer/spectra/residual_map_r1.csv"]
    with pytest.raises(KinfitError, match=r"already holds results of an earlier run "
                                          r"\(fit\.png and 3 more\); add --overwrite"):
        check_out(tmp_path)
    check_out(tmp_path, overwrite=True)
    check_out(tmp_path, resume=True)


def test_a_file_is_not_a_folder(tmp_path):
    (tmp_path / "out").write_text("x")
    with pytest.raises(KinfitError, match="exists and is not a folder"):
        check_out(tmp_path / "out", overwrite=True)
    with pytest.raises(KinfitError, match="exists and is not a folder"):
        copy_templates(tmp_path / "out")


def test_stale_results_go_and_everything_else_stays(tmp_path):
    for name in ("result.json", "posterior.json", "corner.svg", "notes.txt", "best/fit.png"):
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text("old")
    removed = remove_stale(tmp_path, [tmp_path / "result.json"])
    assert sorted(p.name for p in removed) == ["corner.svg", "fit.png", "posterior.json"]
    assert sorted(p.name for p in tmp_path.rglob("*") if p.is_file()) == ["notes.txt",
                                                                           "result.json"]


def test_templates_are_the_package_folder_without_caches(tmp_path):
    names = template_files()
    assert "models/first_order.toml" in names and "demo/spectra/spectra_r3.csv" in names
    assert not any("__pycache__" in n or n.endswith(".pyc") for n in names)
    on_disk = sorted(p.relative_to(TEMPLATES).as_posix() for p in TEMPLATES.rglob("*")
                     if p.is_file() and "__pycache__" not in p.parts)
    assert names == on_disk
    written = copy_templates(tmp_path / "t")
    assert len(written) == len(names)
    with pytest.raises(KinfitError, match=r"experiment\.toml and \d+ more already there"):
        copy_templates(tmp_path / "t")
