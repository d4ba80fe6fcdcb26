"""Shared fixtures: small input files written into a temporary folder."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo"
MODELS = ROOT / "models"
DATA = Path(__file__).resolve().parent / "data"


def write(folder, name, text):
    """Write dedented `text` to folder/name and return the path."""
    path = Path(folder) / name
    path.write_text(textwrap.dedent(text).lstrip("\n"), encoding="utf-8")
    return path


@pytest.fixture
def files(tmp_path):
    """A function writing named files into a fresh temporary folder."""
    def _write(name, text):
        return write(tmp_path, name, text)
    _write.folder = tmp_path
    return _write


FIRST_ORDER_MODEL = """
    name = "first order"
    [[steps]]
    reaction = "A -> P"
    rate = "k * [A]"
    [parameters]
    k = { value = 0.05, min = 0 }
"""

SMALL_EXPERIMENT = """
    name = "small"
    [units]
    time = "s"
    concentration = "M"
    [data]
    file = "traces.csv"
    [[runs]]
    name = "r1"
    initial = { A = 1.0 }
"""

SMALL_TRACES = """
    run,time,species,value
    r1,0,A,1.0
    r1,10,A,0.6
    r1,20,A,0.37
    r1,30,A,0.22
"""


@pytest.fixture
def small(files):
    """Paths of a small valid first-order model and experiment."""
    model = files("model.toml", FIRST_ORDER_MODEL)
    experiment = files("experiment.toml", SMALL_EXPERIMENT)
    files("traces.csv", SMALL_TRACES)
    return {"model": model, "experiment": experiment, "folder": files.folder}
