"""Every malformed or hostile input of the catalogue gives one clear line and exit code 2.

The cases live as files under tests/data/catalogue/ (written by
tests/data/make_catalogue.py); each has expected.toml with the exit code and
the message (or warning) it must produce. Every error must name the file and
the line or field, show no traceback and leave the output folder untouched.
"""

from __future__ import annotations

import re
import shutil
import sys

import numpy as np
import pytest
from conftest import DATA
from typer.testing import CliRunner

from kinfit.app.cli import app

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

CATALOGUE = DATA / "catalogue"
CASES = sorted(p.name for p in CATALOGUE.iterdir() if p.is_dir())
runner = CliRunner()


def run_case(folder, out):
    # --overwrite: the folder holds an earlier result, which good input replaces and bad
    # input leaves alone
    return runner.invoke(app, ["fit", str(folder / "experiment.toml"), "--model",
                               str(folder / "model.toml"), "--out", str(out), "--starts", "1",
                               "--no-report", "--overwrite"])


def test_catalogue_is_large_enough():
    assert len(CASES) >= 40


@pytest.mark.parametrize("name", CASES)
def test_catalogue_case(tmp_path, name):
    folder = tmp_path / name
    shutil.copytree(CATALOGUE / name, folder)
    expected = tomllib.loads((folder / "expected.toml").read_text(encoding="utf-8"))
    out = tmp_path / "out"
    out.mkdir()
    (out / "result.json").write_text("previous result\n")
    result = run_case(folder, out)
    output = result.output
    assert "Traceback" not in output, output
    assert result.exit_code == expected["exit"], output
    errors = [line for line in output.splitlines() if line.startswith("error:")]
    if expected["exit"] == 2:
        assert len(errors) == 1, output
        assert re.search(expected["message"], errors[0]), errors[0]
        # the message names a file (and usually its line or field)
        assert re.search(r"\.(toml|csv|xlsx)\b|\bunit\b", errors[0]), errors[0]
        assert [p.name for p in out.iterdir()] == ["result.json"]
        assert (out / "result.json").read_text() == "previous result\n"
    else:
        assert not errors, output
        assert (out / "result.json").read_text() != "previous result\n"
    if "warning" in expected:
        warnings = [line for line in output.splitlines() if line.startswith("warning:")]
        assert any(re.search(expected["warning"], w) for w in warnings), output
    assert not (folder / "pwned").exists()


@pytest.mark.parametrize("kind", ["bytes", "text"])
def test_fifty_megabytes_of_garbage(tmp_path, kind):
    folder = tmp_path / "garbage"
    shutil.copytree(CATALOGUE / "empty_data_file", folder)
    rng = np.random.default_rng(50)
    if kind == "bytes":
        blob = rng.integers(0, 256, 50 * 2 ** 20, dtype=np.uint8).tobytes()
    else:
        alphabet = np.frombuffer(b"abcdefghij0123456789,;.- \n\t\"'", dtype=np.uint8)
        blob = alphabet[rng.integers(0, alphabet.size, 50 * 2 ** 20)].tobytes()
    (folder / "traces.csv").write_bytes(blob)
    out = tmp_path / "out"
    result = run_case(folder, out)
    assert result.exit_code == 2, result.output[-2000:]
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1 and "traces.csv" in errors[0] and len(errors[0]) < 400, errors
    assert not out.exists()
