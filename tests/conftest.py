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


def synthetic_power_law(folder, seed, truth=(0.02, 1.0, 2.0), relative=0.01,
                        absolute=1e-4, times=None, starts=None):
    """Seeded synthetic A + B -> P data, rate k [A]^m [B]^n, [A] and [P] measured.

    Each point gets Gaussian noise of σ = sqrt(absolute² + (relative·y)²), which
    the experiment file declares. Runs vary [A]0 and [B]0 (not one at a time).

    Returns
    -------
    (Experiment, Mechanism)
        The mechanism is models/power_law_two.toml (free orders m, n in 0..3).
    """
    import numpy as np

    from kinfit.data import load_experiment
    from kinfit.mechanism import load_mechanism
    from kinfit.simulate import simulate

    k, m, n = truth
    folder = Path(folder)
    mech = load_mechanism(MODELS / "power_law_two.toml")
    write(folder, "model.toml", (MODELS / "power_law_two.toml").read_text(encoding="utf-8"))
    rng = np.random.default_rng(seed)
    times = np.linspace(0, 100, 21) if times is None else np.asarray(times, dtype=float)
    starts = starts or {"r1": (1.0, 1.0), "r2": (2.0, 1.0), "r3": (1.0, 2.0),
                        "r4": (0.5, 1.5)}
    rows, runs = [], []
    for name, (a0, b0) in starts.items():
        traj = simulate(mech, {"A": a0, "B": b0}, {"k": k, "m": m, "n": n}, times)
        for species in ("A", "P"):
            true = traj[species]
            sigma = np.sqrt(absolute ** 2 + (relative * true) ** 2)
            y = true + rng.normal(0.0, sigma)
            rows += [f"{name},{t:.6g},{species},{v:.8g}" for t, v in zip(times, y)]
        runs.append(f'[[runs]]\nname = "{name}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    write(folder, "traces.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(folder, "e.toml", '[data]\nfile = "traces.csv"\n[noise]\n'
                            f'default = {{ absolute = {absolute}, relative = {relative} }}\n'
                            + "\n".join(runs))
    return load_experiment(folder / "e.toml"), mech


@pytest.fixture(scope="session")
def small_ranking(tmp_path_factory):
    """A ranked order search on small synthetic data (true orders m = 1, n = 2).

    Returns
    -------
    (Comparison, Experiment, Mechanism)
    """
    import numpy as np

    from kinfit.compare import rank

    folder = tmp_path_factory.mktemp("ranking")
    exp, mech = synthetic_power_law(folder, seed=21, times=np.linspace(0, 100, 11),
                                    starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0),
                                            "r3": (1.0, 2.0)})
    comparison = rank(exp, mech, {"m": [1, 2], "n": [1, 2]}, starts=2, workers=1)
    return comparison, exp, mech
