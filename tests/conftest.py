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


# A straight-line problem for the uncertainty checks: zero-order loss of A,
# [A] = A0 - k t, with A0 fitted, so the posterior and profile of (k, A0) can be
# compared with ordinary least squares (statsmodels). The rate constant gets a
# uniform prior (flat in k, as OLS assumes) from the model file.
LINE_MODEL = """
    # zero-order loss of A: [A] = A0 - k t while A lasts
    name = "zero order"
    [[steps]]
    reaction = "A -> P"
    rate = "k"
    [parameters]
    k = { value = 0.04, min = 0, max = 1, prior = { kind = "uniform" } }
"""

LINE_EXPERIMENT = """
    name = "straight line"
    [units]
    time = "s"
    concentration = "M"
    [data]
    file = "traces.csv"
    {noise}
    [[runs]]
    name = "r1"
    initial = {{ A = {{ value = 1.0, vary = true, min = 0, max = 5 }} }}
"""

LINE_SIGMA = 0.01
LINE_TRUTH = {"k": 0.05, "A0": 1.0}


def line_data(seed=3, n=11):
    """Times [n] and noisy [A] [n] of the straight-line problem (seeded)."""
    import numpy as np

    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 10.0, n)
    y = LINE_TRUTH["A0"] - LINE_TRUTH["k"] * t + rng.normal(0.0, LINE_SIGMA, n)
    return t, y


def write_line_problem(folder, declared=True, seed=3, n=11):
    """Write the straight-line model, experiment and data (`n` points) into `folder`."""
    t, y = line_data(seed, n)
    noise = f"[noise]\ndefault = {{ absolute = {LINE_SIGMA} }}" if declared else ""
    model = write(folder, "line_model.toml", LINE_MODEL)
    exp = write(folder, "line_experiment.toml", LINE_EXPERIMENT.format(noise=noise))
    rows = "\n".join(f"r1,{ti:.6g},A,{yi:.10g}" for ti, yi in zip(t, y))
    write(folder, "traces.csv", "run,time,species,value\n" + rows + "\n")
    return {"model": model, "experiment": exp, "folder": Path(folder), "t": t, "y": y}


@pytest.fixture(scope="session")
def line_posterior(tmp_path_factory):
    """A short posterior of the straight-line problem (declared noise), shared by tests."""
    from kinfit.data import load_experiment
    from kinfit.mechanism import load_mechanism
    from kinfit.posterior import sample

    paths = write_line_problem(tmp_path_factory.mktemp("line"))
    post = sample(load_experiment(paths["experiment"]), load_mechanism(paths["model"]),
                  walkers=16, steps=1500, seed=11, starts=1, progress=False)
    return post, paths
