"""Regenerate the invented multi-temperature example in this folder (seed fixed).

Invented scenario, made up for kinfit: the process group of an imaginary
flavour house, Wrenfield Aromatics, hydrolyses an ester intermediate with
hydroxide in water/ethanol before a larger batch is planned:

    ester + hydroxide -> carboxylate + alcohol

They ran it at 15, 25, 35 and 45 °C, two starting hydroxide levels at each,
and followed the ester by HPLC. Which rate law and which activation
parameters do the data support?

The traces are simulated with kinfit from the true values in TRUTH
(Arrhenius rate constant, orders 1 and 1) and Gaussian noise of
σ = sqrt(0.2² + (0.01 y)²) mM, and written with the model, the experiment
file and the truth beside them. Run from anywhere:

    python demo/temperature/make_data.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from kinfit.core.units import to_kelvin
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.integrate import simulate
from kinfit.numerics.temperature_laws import rate_constant, reference_temperature

SEED = 20261207
FOLDER = Path(__file__).resolve().parent
TEMPERATURES_C = (15.0, 25.0, 35.0, 45.0)
RUNS = ({"ester": 20.0, "hydroxide": 30.0}, {"ester": 30.0, "hydroxide": 60.0})  # mM
# k_ref is k at the centre of the runs' 1/T range (about 29.3 °C); mM^-1 min^-1
TRUTH = {"k": 2.6e-3, "m": 1.0, "n": 1.0, "Ea": 55.0}
N_TIMES = 16
NOISE_ABSOLUTE, NOISE_RELATIVE = 0.2, 0.01   # mM, fraction

MODEL_TEXT = '''\
# Invented example: ester hydrolysis by hydroxide, free orders, Arrhenius rate constant.
# k is the rate constant at the reference temperature (by default the centre of the
# runs' 1/T range); Ea is its activation energy in kJ/mol.
name = "ester + hydroxide -> carboxylate + alcohol, Arrhenius"

[[steps]]
reaction = "ester + hydroxide -> carboxylate + alcohol"
rate = "k * [ester]^m * [hydroxide]^n"

[parameters]
k = { value = 1e-3, min = 0 }
m = { value = 1, min = 0, max = 3 }
n = { value = 1, min = 0, max = 3 }
Ea = { value = 40, min = 0, max = 250 }

[temperature]
arrhenius = { k = "Ea" }
'''


def run_name(temperature, index):
    return f"T{temperature:g}_{'ab'[index]}"


def experiment_text():
    lines = [
        "# Wrenfield Aromatics (invented): ester hydrolysis at four temperatures,",
        "# two hydroxide levels each, ester by HPLC. Data: traces.csv (long layout).",
        'name = "ester hydrolysis, 15-45 degC"',
        "",
        "[units]",
        'time = "min"',
        'concentration = "mM"',
        'temperature = "degC"',
        "",
        "[data]",
        'file = "traces.csv"',
        "",
        "[noise]",
        f"default = {{ absolute = {NOISE_ABSOLUTE}, relative = {NOISE_RELATIVE} }}",
    ]
    for temperature in TEMPERATURES_C:
        for i, start in enumerate(RUNS):
            initial = ", ".join(f"{s} = {v:g}" for s, v in start.items())
            lines += ["", "[[runs]]", f'name = "{run_name(temperature, i)}"',
                      f"temperature = {temperature:g}", f"initial = {{ {initial} }}"]
    return "\n".join(lines) + "\n"


def traces_csv():
    mech = mechanism_from_text(MODEL_TEXT, "example model")
    kelvin = [to_kelvin(t, "degC") for t in TEMPERATURES_C]
    reference = reference_temperature(mech.temperature, kelvin)
    rng = np.random.default_rng(SEED)
    rows = ["run,time,species,value"]
    for temperature, t_k in zip(TEMPERATURES_C, kelvin):
        k_t = float(rate_constant(TRUTH["k"], TRUTH["Ea"], t_k, reference))
        for i, start in enumerate(RUNS):
            # sample until about 90 % of the limiting reagent has reacted
            t_max = 2.5 / (k_t * start["hydroxide"])
            times = np.round(np.linspace(0.0, t_max, N_TIMES), 2)
            traj = simulate(mech, start, {**TRUTH, "k": k_t}, times)
            true = traj["ester"]
            sigma = np.sqrt(NOISE_ABSOLUTE ** 2 + (NOISE_RELATIVE * true) ** 2)
            noisy = true + rng.normal(0.0, sigma)
            rows += [f"{run_name(temperature, i)},{t:g},ester,{y:.3f}"
                     for t, y in zip(times, noisy)]
    return "\n".join(rows) + "\n"


def main():
    truth = ["# True values used to simulate traces.csv (seed "
             f"{SEED}); k in mM^-1 min^-1 at the reference temperature, Ea in kJ/mol.",
             "[parameters]"] + [f"{k} = {v!r}" for k, v in TRUTH.items()]
    files = {"ester_hydrolysis.toml": MODEL_TEXT, "experiment.toml": experiment_text(),
             "traces.csv": traces_csv(), "truth.toml": "\n".join(truth) + "\n"}
    for name, text in files.items():
        (FOLDER / name).write_text(text, encoding="utf-8")
    print(f"wrote {', '.join(files)} in {FOLDER.name}/")


if __name__ == "__main__":
    main()
