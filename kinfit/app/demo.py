"""The bundled demo: an invented study, its synthetic data and the whole pipeline.

The scenario is made up for kinfit. A coatings team at an imaginary company,
Larkspur Resins, cures a clear-coat by the amine-catalysed addition of a
thiol to an acrylate::

    thiol + acrylate -> adduct        (amine catalyst, not consumed)

Before scaling up the mixing step they want the rate law. They ran the
reaction six times at 25 °C, varying the starting thiol, acrylate and amine,
and followed thiol and adduct by in-line HPLC every 5 minutes for 2 hours.

The data are simulated from the true parameters in :data:`TRUTH` with
Gaussian noise of σ = sqrt(0.3² + (0.015 y)²) mM (seed :data:`SEED`), and
written by :func:`write_inputs`. ``templates/demo/make_demo_data.py`` calls it
to refresh the copy shipped in the package (copied out by ``kinfit
templates``); ``kinfit demo`` calls it to make a fresh copy in its output
folder, then fits and reports.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from kinfit.output.bundle import Bundle, write_bundle
from kinfit.output.text import csv_text

__all__ = ["SCENARIO", "SEED", "TRUTH", "RUNS", "MODEL_TEXT", "EXPERIMENT_TEXT", "INPUT_FILES",
           "input_files", "write_inputs", "compare_with_truth"]

SCENARIO = (
    "Invented demo study: a coatings team at an imaginary company, Larkspur Resins, cures a "
    "clear-coat by the amine-catalysed addition of a thiol to an acrylate "
    "(thiol + acrylate -> adduct). They ran it six times at 25 degC with different starting "
    "thiol, acrylate and amine, and followed thiol and adduct by in-line HPLC every 5 min "
    "for 2 h. Which rate law do the data support?"
)
SEED = 20261201
TRUTH = {"k": 1.5e-4, "m_thiol": 1.0, "m_acrylate": 1.0, "m_amine": 0.5}
RUNS = {  # starting concentrations, mM
    "r1": {"thiol": 50.0, "acrylate": 60.0, "amine": 5.0},
    "r2": {"thiol": 100.0, "acrylate": 60.0, "amine": 5.0},
    "r3": {"thiol": 50.0, "acrylate": 120.0, "amine": 5.0},
    "r4": {"thiol": 50.0, "acrylate": 60.0, "amine": 10.0},
    "r5": {"thiol": 50.0, "acrylate": 60.0, "amine": 20.0},
    "r6": {"thiol": 80.0, "acrylate": 90.0, "amine": 2.5},
}
TIMES = np.arange(0.0, 121.0, 5.0)          # min
OBSERVED = ("thiol", "adduct")
NOISE_ABSOLUTE, NOISE_RELATIVE = 0.3, 0.015  # mM, fraction

MODEL_TEXT = '''\
# Amine-catalysed thiol-acrylate addition with free orders (kinfit demo).
# The amine is a catalyst: it appears in the rate law but is not consumed,
# so it is declared held constant at its starting concentration.
name = "thiol + acrylate -> adduct, free orders"
description = "Power-law rate with free orders in thiol, acrylate and the amine catalyst."
held_constant = ["amine"]

[[steps]]
reaction = "thiol + acrylate -> adduct"
rate = "k * [thiol]^m_thiol * [acrylate]^m_acrylate * [amine]^m_amine"

[parameters]
k = { value = 1e-3, min = 0 }
m_thiol = { value = 1, min = 0, max = 3 }
m_acrylate = { value = 1, min = 0, max = 3 }
m_amine = { value = 1, min = 0, max = 3 }
'''


def _experiment_text():
    lines = [
        "# Larkspur Resins (invented): thiol-acrylate cure, six runs at 25 degC,",
        "# thiol and adduct by in-line HPLC every 5 min. Data: traces.csv (long layout).",
        'name = "thiol-acrylate cure, 25 degC"',
        "",
        "[units]",
        'time = "min"',
        'concentration = "mM"',
        'temperature = "degC"',
        "",
        "[data]",
        'file = "traces.csv"',
        "",
        "# HPLC calibration: about 0.3 mM absolute and 1.5 % relative",
        "[noise]",
        f"default = {{ absolute = {NOISE_ABSOLUTE}, relative = {NOISE_RELATIVE} }}",
    ]
    for name, start in RUNS.items():
        initial = ", ".join(f"{s} = {v:g}" for s, v in start.items())
        lines += ["", "[[runs]]", f'name = "{name}"', "temperature = 25",
                  f"initial = {{ {initial} }}"]
    return "\n".join(lines) + "\n"


EXPERIMENT_TEXT = _experiment_text()


def _traces_csv():
    from kinfit.inputs.mechanism import mechanism_from_text
    from kinfit.numerics.integrate import simulate

    mech = mechanism_from_text(MODEL_TEXT, "demo model")
    rng = np.random.default_rng(SEED)
    rows = []
    for name, start in RUNS.items():
        traj = simulate(mech, start, TRUTH, TIMES)
        for species in OBSERVED:
            true = traj[species]
            sigma = np.sqrt(NOISE_ABSOLUTE ** 2 + (NOISE_RELATIVE * true) ** 2)
            noisy = true + rng.normal(0.0, sigma)
            rows += [(name, f"{t:g}", species, f"{y:.3f}") for t, y in zip(TIMES, noisy)]
    return csv_text(("run", "time", "species", "value"), rows)


INPUT_FILES = {"model": "thiol_addition.toml", "experiment": "experiment.toml",
               "data": "traces.csv", "truth": "truth.toml"}


def input_files():
    """The demo's model, experiment, data and truth files, by the names of :data:`INPUT_FILES`.

    Returns
    -------
    Bundle
    """
    truth = "\n".join(["# True parameters used to simulate traces.csv (seed "
                       f"{SEED}); units mM and min.", "[parameters]"]
                      + [f"{k} = {v!r}" for k, v in TRUTH.items()]) + "\n"
    texts = {"model": MODEL_TEXT, "experiment": EXPERIMENT_TEXT, "data": _traces_csv(),
             "truth": truth}
    return Bundle({INPUT_FILES[key]: text for key, text in texts.items()})


def write_inputs(folder):
    """Write the demo's model, experiment, data and truth files into `folder`.

    Returns
    -------
    dict of str to pathlib.Path
        Keys ``model``, ``experiment``, ``data``, ``truth``.
    """
    write_bundle(folder, input_files())
    return {key: Path(folder) / name for key, name in INPUT_FILES.items()}


def compare_with_truth(result):
    """Rows (name, true, fitted, stderr, z) comparing a fit with :data:`TRUTH`."""
    rows = []
    for name, true in TRUTH.items():
        value, se = result.values[name], result.stderr.get(name)
        z = (value - true) / se if se else float("nan")
        rows.append((name, true, value, se, z))
    return rows
