"""Seeded synthetic signal data shared by the signal tests: single-wavelength
absorbance of A -> B, a dead-time case, and diode-array spectra of A -> B -> C.

Every case is generated here from textbook closed forms with a fixed seed; the
scenarios and band shapes are invented.
"""

from __future__ import annotations

import numpy as np
from conftest import write

from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text

# ------------------------------------------- single wavelength, A -> B

def closed_form_ab(t, a0, k):
    """[A] and [B] of A -> B, first order: A0 e^{-kt}, A0 (1 - e^{-kt}) (textbook)."""
    a = a0 * np.exp(-k * t)
    return a, a0 - a


AB_RUNS = {"r1": 1.0, "r2": 2.0, "r3": 0.5}              # [A]0, mM
AB_TRUTH = dict(k=0.05, eps_a=0.9, eps_b=0.25, offset=0.02, drift={"r1": 1e-4, "r2": -2e-4,
                                                                     "r3": 5e-5})


def ab_signal_case(folder, seed=3, extra=""):
    """Seeded single-wavelength absorbance of A -> B in three runs (synthetic)."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 80, 41)
    runs = []
    for name, a0 in AB_RUNS.items():
        a, b = closed_form_ab(t, a0, AB_TRUTH["k"])
        y = (AB_TRUTH["offset"] + AB_TRUTH["drift"][name] * t + AB_TRUTH["eps_a"] * a
             + AB_TRUTH["eps_b"] * b + rng.normal(0, 0.004, t.size))
        write(folder, f"{name}.csv", "time,A300\n" + "\n".join(
            f"{ti:g},{yi:.6f}" for ti, yi in zip(t, y)) + "\n")
        runs.append(f'[[runs]]\nname = "{name}"\nfile = "{name}.csv"\ninitial = {{ A = {a0} }}\n')
    write(folder, "e.toml", f"""
        [units]
        time = "s"
        concentration = "mM"
        [signals]
        offset = "shared"
        drift = "per run"
        [signals.channels]
        A300 = {{ A = "unknown", B = "unknown" }}
        {extra}
    """ + "\n".join(runs))
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.02\n')
    return load_experiment(folder / "e.toml"), mech


# ------------------------------------------------------- dead time, start

def dead_time_case(files, epsilon):
    """A -> P seen by the absorbance of A; the instrument clock starts t0 = 0.8 s
    after mixing and records from -2 s (closed form A0 e^{-k (t + t0)},
    textbook first-order law; seeded noise)."""
    rng = np.random.default_rng(21)
    t = np.arange(-2.0, 30.0, 0.5)
    conc = np.exp(-0.1 * (np.clip(t, 0, None) + 0.8))
    y = 0.5 * np.where(t >= 0, conc, 1.0) + 0.01 + rng.normal(0, 0.002, t.size)
    files("r1.csv", "Time (s);A350\n" + "\n".join(
        f"{ti:g};{yi:.5f}".replace(".", ",") for ti, yi in zip(t, y)))
    files("e.toml", f"""
        [signals]
        [signals.channels]
        A350 = {{ A = {epsilon} }}
        [[runs]]
        name = "r1"
        file = "r1.csv"
        start = 0
        initial = {{ A = 1.0 }}
        time_offset = {{ value = 0.2, vary = true, min = 0, max = 3 }}
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.05\n')
    return load_experiment(files.folder / "e.toml"), mech


# ----------------------------------------------------------- full spectra

WAVELENGTHS = np.linspace(300.0, 600.0, 61)


def band(centre, width, height):
    return height * np.exp(-0.5 * ((WAVELENGTHS - centre) / width) ** 2)


SPECTRA = {  # overlapping bands (invented), absorptivity per mM per cm
    "A": band(350, 40, 1.2) + band(480, 30, 0.3),
    "B": band(420, 50, 0.9),
    "C": band(470, 45, 0.7) + band(330, 30, 0.2),
}


def closed_form_abc(t, a0, k1, k2):
    """A -> B -> C first order (textbook consecutive-reaction solution, k1 ≠ k2)."""
    a = a0 * np.exp(-k1 * t)
    b = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return np.column_stack([a, b, a0 - a - b])


def spectra_case(folder, species=("A", "B", "C"), seed=5, components='"auto"', noise=0.003,
                 truth=(0.08, 0.02)):
    """Seeded synthetic diode-array runs of A -> B -> C (or A -> B), offsets none."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 150, 50)
    eps = np.array([SPECTRA[s] for s in species])
    runs = []
    for r, a0 in enumerate((1.0, 1.5, 0.7)):
        if len(species) == 3:
            conc = closed_form_abc(t, a0, *truth)
        else:
            conc = np.column_stack(closed_form_ab(t, a0, truth[0]))
        y = conc @ eps + rng.normal(0, noise, (t.size, WAVELENGTHS.size))
        lines = ["time," + ",".join(f"{w:g}" for w in WAVELENGTHS)]
        lines += [f"{ti:g}," + ",".join(f"{v:.6f}" for v in row) for ti, row in zip(t, y)]
        write(folder, f"s{r}.csv", "\n".join(lines) + "\n")
        runs.append(f'[[runs]]\nname = "s{r}"\nspectrum = "s{r}.csv"\ninitial = {{ A = {a0} }}\n')
    listed = ", ".join(f'"{s}"' for s in species)
    write(folder, "e.toml", f"""
        [units]
        time = "s"
        concentration = "mM"
        [signals]
        offset = "none"
        [signals.spectra]
        absorbers = [{listed}]
        components = {components}
        noise = {noise}
    """ + "\n".join(runs))
    if len(species) == 3:
        text = ('[[steps]]\nreaction = "A -> B"\nrate = "k1 * [A]"\n[[steps]]\n'
                'reaction = "B -> C"\nrate = "k2 * [B]"\n[parameters]\nk1 = 0.05\nk2 = 0.01\n')
    else:
        text = '[[steps]]\nreaction = "A -> B"\nrate = "k1 * [A]"\n[parameters]\nk1 = 0.05\n'
    return load_experiment(folder / "e.toml"), mechanism_from_text(text)
