"""The demo's spectrometer part: an invented dye synthesis followed by absorbance.

The scenario is made up for kinfit. The colour lab of an imaginary company,
Quillmere Dyes, makes a violet dye in two steps: a pale precursor picks up a
coupling reagent, used in large excess, to give an orange intermediate, which
closes a ring to the dye::

    precursor + reagent -> intermediate      rate = k1 [precursor] [reagent]
    intermediate -> dye                      rate = k2 [intermediate]

They followed it in a 1 cm cell after rapid mixing, at four reagent levels,
in two ways:

* absorbance at 510 nm, exported by the spectrometer's software as text with
  a few metadata lines, semicolons, decimal commas and times in ms, recorded
  from 2 s before mixing; the precursor's absorptivity at 510 nm was measured
  on its own, the intermediate's and the dye's are unknown, each run has its
  own blank (offset) and mixing dead time;
* full spectra (diode array, 380–660 nm) in three of the runs.

The data are simulated from :data:`TRUTH` with Gaussian noise (σ =
:data:`NOISE` absorbance units, seed :data:`SEED`) and written by
:func:`write_inputs`; ``templates/demo/spectra/make_data.py`` refreshes
the copy shipped in the package and ``kinfit demo`` writes a fresh copy, fits both
experiments and compares them with the truth.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from kinfit.output.bundle import Bundle, write_bundle
from kinfit.output.text import csv_text

__all__ = ["SCENARIO", "SEED", "TRUTH", "MODEL_TEXT", "input_files", "write_inputs",
           "compare_with_truth", "true_spectra", "WAVELENGTHS"]

SCENARIO = (
    "Spectrometer part (invented): the colour lab of an imaginary company, Quillmere Dyes, "
    "makes a violet dye from a pale precursor through an orange intermediate "
    "(precursor + reagent -> intermediate -> dye), the reagent in large excess at four "
    "levels. They followed it by absorbance at 510 nm (instrument exports) and by full "
    "spectra from a diode array. The absorptivities of the intermediate and the dye are "
    "unknown. Which rate constants, and which spectra?"
)
SEED = 20261215
TRUTH = {"k1": 0.02, "k2": 0.05}                  # mM^-1 s^-1, s^-1
DEAD_TIME = {"r1": 1.2, "r2": 0.9, "r3": 1.5, "r4": 1.1}   # s, mixing
BLANK = {"r1": 0.012, "r2": -0.004, "r3": 0.020, "r4": 0.007}
REAGENT = {"r1": 5.0, "r2": 10.0, "r3": 20.0, "r4": 40.0}   # mM
PRECURSOR = 0.05                                  # mM
SPECTRA_RUNS = ("r1", "r2", "r3")
NOISE = 0.002                                     # absorbance units
WAVELENGTHS = np.arange(380.0, 661.0, 4.0)        # nm
CHANNEL = 510.0
TIMES_MS = np.arange(-2000, 120001, 500)           # the exports' clock
SPECTRA_TIMES = np.concatenate([np.arange(0.0, 20.0, 1.0), np.arange(20.0, 121.0, 4.0)])

MODEL_TEXT = '''\
# Invented demo: a two-step dye synthesis, the coupling reagent in large excess
# (kinfit demo, spectrometer part). Concentrations in mM, times in s.
name = "precursor + reagent -> intermediate -> dye"

[[steps]]
reaction = "precursor + reagent -> intermediate"
rate = "k1 * [precursor] * [reagent]"

[[steps]]
reaction = "intermediate -> dye"
rate = "k2 * [intermediate]"

[parameters]
k1 = { value = 0.005, min = 0 }
k2 = { value = 0.01, min = 0 }
'''


def _band(centre, width, height):
    return height * np.exp(-0.5 * ((WAVELENGTHS - centre) / width) ** 2)


def true_spectra():
    """Absorptivities (mM^-1 cm^-1) of precursor, intermediate and dye [3, n_wavelengths]."""
    return np.array([
        _band(400.0, 35.0, 9.0) + _band(470.0, 30.0, 1.5),      # pale yellow precursor
        _band(485.0, 40.0, 7.0),                               # orange intermediate
        _band(565.0, 38.0, 11.0) + _band(420.0, 30.0, 2.0),     # violet dye
    ])


def _epsilon_at(wavelength):
    return np.array([np.interp(wavelength, WAVELENGTHS, row) for row in true_spectra()])


def _head(comments, name, offset):
    """The opening lines of a demo experiment file, up to its [signals] table."""
    return [f"# {line}" for line in comments] + [
        f'name = "{name}"', "", "[units]", 'time = "s"', 'concentration = "mM"', "",
        "[signals]", "path_length = 1.0          # cm", f"offset = {offset}", ""]


def _absorbance_experiment():
    eps = _epsilon_at(CHANNEL)
    lines = _head([
        "Quillmere Dyes (invented): dye synthesis followed at 510 nm in a 1 cm cell.",
        "Each run's export starts 2 s before mixing; readings before the start are",
        "left out and the mixing dead time is fitted. The precursor's absorptivity",
        "at 510 nm was measured on the pure compound."],
        "dye synthesis, absorbance at 510 nm",
        '"per run"         # each run has its own blank') + [
        "[signals.channels]",
        f'A510 = {{ precursor = {eps[0]:.4f}, intermediate = "unknown", dye = "unknown" }}',
        "",
        "[noise]",
        f"A510 = {{ absolute = {NOISE} }}",
    ]
    for name, reagent in REAGENT.items():
        lines += ["", "[[runs]]", f'name = "{name}"', f'file = "absorbance_{name}.txt"',
                  "start = 0", f"initial = {{ precursor = {PRECURSOR}, reagent = {reagent:g} }}",
                  "time_offset = { value = 0.5, vary = true, min = 0, max = 5 }"]
    return "\n".join(lines) + "\n"


def _spectra_experiment():
    lines = _head(["Quillmere Dyes (invented): diode-array spectra of three runs, "
                   "blank-subtracted."], "dye synthesis, full spectra",
                  '"none"            # the instrument subtracted each blank') + [
        "[signals.spectra]",
        'absorbers = ["precursor", "intermediate", "dye"]',
        'components = "auto"        # fit the significant singular vectors',
        f"noise = {NOISE}",
        'wavelength_unit = "nm"',
    ]
    for name in SPECTRA_RUNS:
        lines += ["", "[[runs]]", f'name = "{name}"', f'spectrum = "spectra_{name}.csv"',
                  f"initial = {{ precursor = {PRECURSOR}, reagent = {REAGENT[name]:g} }}"]
    return "\n".join(lines) + "\n"


def _simulate(times, name):
    from kinfit.inputs.mechanism import mechanism_from_text
    from kinfit.numerics.integrate import simulate

    mech = mechanism_from_text(MODEL_TEXT, "demo model")
    traj = simulate(mech, {"precursor": PRECURSOR, "reagent": REAGENT[name]}, TRUTH, times)
    return np.column_stack([traj["precursor"], traj["intermediate"], traj["dye"]])


def _export(name, rng):
    """One run's absorbance as the instrument's software writes it."""
    eps = _epsilon_at(CHANNEL)
    model_time = TIMES_MS / 1000.0 + DEAD_TIME[name]
    started = model_time >= 0
    conc = np.zeros((TIMES_MS.size, 3))
    conc[started] = _simulate(model_time[started], name)
    conc[~started, 0] = PRECURSOR          # not yet mixed: a stand-in reading, left out
    y = BLANK[name] + conc @ eps + rng.normal(0.0, NOISE, TIMES_MS.size)
    lines = ["Instrument;UV-Vis (invented model)", f"Sample;dye synthesis {name}",
             "Wavelength (nm);510", "", "Time (ms);A510;"]
    lines += [f"{t:d};{v:.5f};".replace(".", ",") for t, v in zip(TIMES_MS, y)]
    return "\n".join(lines) + "\n"


def _spectra_csv(name, rng):
    conc = _simulate(SPECTRA_TIMES, name)
    y = conc @ true_spectra() + rng.normal(0.0, NOISE, (SPECTRA_TIMES.size, WAVELENGTHS.size))
    return csv_text(["time", *[f"{w:g}" for w in WAVELENGTHS]],
                    [[f"{t:g}", *[f"{v:.5f}" for v in row]] for t, row in zip(SPECTRA_TIMES, y)])


def input_files():
    """The spectrometer part's model, experiments, data and truth files.

    Returns
    -------
    dict of str to (str, str)
        Key (``model``, ``absorbance``, ``spectra``, ``truth`` and one per
        data file: ``absorbance_r1`` ..., ``spectra_r1`` ...) to file name
        and text.
    """
    rng = np.random.default_rng(SEED)
    texts = {"model": ("dye_formation.toml", MODEL_TEXT),
             "absorbance": ("absorbance.toml", _absorbance_experiment()),
             "spectra": ("spectra.toml", _spectra_experiment())}
    for name in REAGENT:
        texts[f"absorbance_{name}"] = (f"absorbance_{name}.txt", _export(name, rng))
    for name in SPECTRA_RUNS:
        texts[f"spectra_{name}"] = (f"spectra_{name}.csv", _spectra_csv(name, rng))
    eps = _epsilon_at(CHANNEL)
    truth = ["# True values used to simulate the spectrometer data (seed "
             f"{SEED}); mM, s, cm.", "[parameters]"]
    truth += [f"{k} = {v!r}" for k, v in TRUTH.items()]
    truth += ["", "[absorptivity_510nm]  # mM^-1 cm^-1"]
    truth += [f"{s} = {v:.4f}" for s, v in zip(("precursor", "intermediate", "dye"), eps)]
    truth += ["", "[dead_time_s]"] + [f"{k} = {v!r}" for k, v in DEAD_TIME.items()]
    truth += ["", "[blank]"] + [f"{k} = {v!r}" for k, v in BLANK.items()]
    texts["truth"] = ("truth.toml", "\n".join(truth) + "\n")
    return texts


def write_inputs(folder):
    """Write the spectrometer part's model, experiments, data and truth into `folder`.

    Returns
    -------
    dict of str to pathlib.Path
        The keys of :func:`input_files`.
    """
    texts = input_files()
    write_bundle(folder, Bundle(dict(texts.values())))
    return {key: Path(folder) / name for key, (name, _) in texts.items()}


def compare_with_truth(absorbance=None, spectra=None):
    """Rows (what, true, fitted, stderr, z) comparing the fits with the truth.

    Parameters
    ----------
    absorbance, spectra : FitResult, optional
        Fits of ``absorbance.toml`` and ``spectra.toml``.
    """
    rows = []
    eps = _epsilon_at(CHANNEL)
    if absorbance is not None:
        for name, true in TRUTH.items():
            rows.append(_row(f"{name} (510 nm)", true, absorbance.values[name],
                             absorbance.stderr.get(name)))
        for species, true in zip(("intermediate", "dye"), eps[1:]):
            c = absorbance.signals.coefficient(f"eps_{species}_A510")
            rows.append(_row(f"ε {species} 510 nm", true, c.value, c.stderr))
        for run, true in DEAD_TIME.items():
            name = f"t0_{run}"
            rows.append(_row(f"{name} (s)", true, absorbance.values[name],
                             absorbance.stderr.get(name)))
    if spectra is not None:
        for name, true in TRUTH.items():
            rows.append(_row(f"{name} (spectra)", true, spectra.values[name],
                             spectra.stderr.get(name)))
    return rows


def _row(label, true, value, stderr):
    z = (value - true) / stderr if stderr else float("nan")
    return (label, float(true), float(value), stderr, float(z))
