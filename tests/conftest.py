"""Shared fixtures: small input files written into a temporary folder."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest
from hypothesis import HealthCheck, settings

# Property-based fuzzing: a quick profile for every test run, a long one
# (10,000 examples per target) on request:
#     python -m pytest tests/system/test_fuzz.py --hypothesis-profile=long
settings.register_profile("default", max_examples=100, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow,
                                                 HealthCheck.function_scoped_fixture])
settings.register_profile("long", max_examples=10_000, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow,
                                                 HealthCheck.function_scoped_fixture,
                                                 HealthCheck.data_too_large])
settings.load_profile("default")

ROOT = Path(__file__).resolve().parent.parent
TEMPLATES = ROOT / "kinfit" / "app" / "templates"   # models and demo studies ship in the package
DEMO = TEMPLATES / "demo"
MODELS = TEMPLATES / "models"
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


# ------------------------------------------------------- temperature studies
#
# Seeded synthetic runs at four temperatures, made from closed-form integrated
# rate laws (physical-chemistry textbooks) and rate constants computed here
# from the Arrhenius and Eyring equations with CODATA constants
# (scipy.constants), never from kinfit's own integrator or temperature code.

STUDY_TEMPERATURES = (288.15, 298.15, 308.15, 318.15)      # K


def make_arrhenius_study(folder, seed=20261207):
    """A -> P, free order m (shared), k_ref and Ea known; units M and s.

    Truth: m = 1, Ea = 60 kJ/mol, k_ref = 0.02 s^-1 at the centre of the
    runs' 1/T range. Data: [A] = [A]0 exp(-k t) (first order, closed form).
    """
    import numpy as np
    from scipy.constants import R

    truth = {"k": 0.02, "m": 1.0, "Ea": 60.0}
    inverse = 1.0 / np.array(STUDY_TEMPERATURES)
    reference = 2.0 / (inverse.min() + inverse.max())
    rng = np.random.default_rng(seed)
    rows, runs = ["run,time,species,value"], []
    for T in STUDY_TEMPERATURES:
        k = truth["k"] * np.exp(-truth["Ea"] * 1e3 / R * (1.0 / T - 1.0 / reference))
        for j, a0 in enumerate((1.0, 0.5)):
            name = f"T{T:.0f}_{j}"
            t = np.linspace(0.0, 3.0 / k, 20)
            y = a0 * np.exp(-k * t) + rng.normal(0.0, 0.005, t.size)
            rows += [f"{name},{ti:.6g},A,{yi:.6f}" for ti, yi in zip(t, y)]
            runs.append(f'[[runs]]\nname = "{name}"\ntemperature = {T}\n'
                        f'initial = {{ A = {a0} }}\n')
    (folder / "traces.csv").write_text("\n".join(rows) + "\n")
    (folder / "experiment.toml").write_text(
        '[units]\ntime = "s"\nconcentration = "M"\ntemperature = "K"\n[data]\nfile = "traces.csv"\n'
        '[noise]\ndefault = { absolute = 0.005 }\n' + "\n".join(runs))
    (folder / "model.toml").write_text(
        '# A -> P, free order, Arrhenius\n[[steps]]\nreaction = "A -> P"\n'
        'rate = "k * [A]^m"\n[parameters]\nk = { value = 0.01, min = 0 }\n'
        'm = { value = 1.2, min = 0, max = 3 }\nEa = { value = 45 }\n'
        '[temperature]\narrhenius = { k = "Ea" }\n')
    return truth, reference


def _eyring_study(folder):
    """A + B -> P with [A]0 = [B]0, rate k[A][B], Eyring; units mM and min.

    Truth: ΔH‡ = 50 kJ/mol, ΔS‡ = -100 J/(mol K), κ = 1, standard state
    1 mol/L: k = (k_B T/h) exp(ΔS‡/R) exp(-ΔH‡/RT) in M^-1 s^-1 (Eyring
    equation), converted to mM^-1 min^-1 (× 60 / 1000). Data:
    [A] = [A]0 / (1 + k [A]0 t) (second order, equal starting
    concentrations, closed form).
    """
    import numpy as np
    from scipy.constants import R, h
    from scipy.constants import k as k_B

    truth = {"dH": 50.0, "dS": -100.0}
    rng = np.random.default_rng(20261208)
    rows, runs = ["run,time,species,value"], []
    for T in STUDY_TEMPERATURES:
        k_si = k_B * T / h * np.exp(truth["dS"] / R) * np.exp(-truth["dH"] * 1e3 / (R * T))
        k = k_si * 60.0 / 1000.0
        for j, a0 in enumerate((10.0, 20.0)):
            name = f"T{T:.0f}_{j}"
            t = np.linspace(0.0, 4.0 / (k * a0), 20)
            y = a0 / (1.0 + k * a0 * t) + rng.normal(0.0, 0.05, t.size)
            rows += [f"{name},{ti:.6g},A,{yi:.5f}" for ti, yi in zip(t, y)]
            runs.append(f'[[runs]]\nname = "{name}"\ntemperature = {T}\n'
                        f'initial = {{ A = {a0}, B = {a0} }}\n')
    (folder / "traces.csv").write_text("\n".join(rows) + "\n")
    (folder / "experiment.toml").write_text(
        '[units]\ntime = "min"\nconcentration = "mM"\ntemperature = "K"\n[data]\nfile = "traces.csv"\n'
        '[noise]\ndefault = { absolute = 0.05 }\n' + "\n".join(runs))
    (folder / "model.toml").write_text(
        '# A + B -> P, second order, Eyring\n[[steps]]\nreaction = "A + B -> P"\n'
        'rate = "k * [A] * [B]"\n[parameters]\nk = { value = 0.001, min = 0 }\n'
        'dH = { value = 70 }\n[temperature]\neyring = { k = "dH" }\n')
    return truth


@pytest.fixture(scope="session")
def arrhenius_study(tmp_path_factory):
    """The Arrhenius study fitted globally (and its two-stage analysis)."""
    from kinfit.analysis.two_stage import two_stage
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    folder = tmp_path_factory.mktemp("arrhenius")
    truth, reference = make_arrhenius_study(folder)
    exp = load_experiment(folder / "experiment.toml")
    mech = load_mechanism(folder / "model.toml")
    result = fit(exp, mech, starts=1)
    return {"folder": folder, "experiment": exp, "mechanism": mech, "result": result,
            "truth": truth, "reference": reference,
            "two_stage": two_stage(exp, mech, result, orders="free", starts=1)}


@pytest.fixture(scope="session")
def eyring_study(tmp_path_factory):
    """The Eyring study fitted globally."""
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    folder = tmp_path_factory.mktemp("eyring")
    truth = _eyring_study(folder)
    exp = load_experiment(folder / "experiment.toml")
    mech = load_mechanism(folder / "model.toml")
    return {"folder": folder, "experiment": exp, "mechanism": mech, "truth": truth,
            "result": fit(exp, mech, starts=1)}


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

    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.numerics.integrate import simulate

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

    from kinfit.analysis.ranking import rank

    folder = tmp_path_factory.mktemp("ranking")
    exp, mech = synthetic_power_law(folder, seed=21, times=np.linspace(0, 100, 11),
                                    starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0),
                                            "r3": (1.0, 2.0)})
    comparison = rank(exp, mech, {"m": [1, 2], "n": [1, 2]}, starts=2, workers=1)
    return comparison, exp, mech


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
    from kinfit.estimation.posterior import sample
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    paths = write_line_problem(tmp_path_factory.mktemp("line"))
    post = sample(load_experiment(paths["experiment"]), load_mechanism(paths["model"]),
                  walkers=16, steps=1500, seed=11, starts=1)
    return post, paths
