"""Building a signal model (kinfit.numerics.signal_build): declarations
checked against the model, and the fit on the leading singular vectors
against the fit on every wavelength."""

from __future__ import annotations

import math

import numpy as np
import pytest
from signal_cases import spectra_case

from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.problem import build_problem

# ------------------------------------------------------- reduced spectra

def test_reduced_fit_matches_the_full_fit(tmp_path):
    # Fitting the leading singular vectors changes the rate constants by a
    # small fraction of their standard errors; the reduction's left-out share
    # of the data matches what noise alone would leave (common practice).
    exp, mech = spectra_case(tmp_path)
    reduced = fit(exp, mech, starts=1)
    full = fit(exp, mech, starts=1, components="all")
    assert full.signals.components.n_used is None and not full.signals.reduced
    assert full.n_points == 3 * 50 * 61
    for name in ("k1", "k2"):
        assert abs(reduced.values[name] - full.values[name]) < 0.05 * full.stderr[name]
        assert reduced.stderr[name] == pytest.approx(full.stderr[name], rel=0.05)
    comps = reduced.signals.components
    assert comps.left_out == pytest.approx(comps.noise_share, rel=0.1)
    np.testing.assert_allclose(reduced.signals.spectra.values, full.signals.spectra.values,
                               atol=1e-3)


# ------------------------------------------------------------- bad input

@pytest.mark.parametrize("extra, message", [
    ('[signals.channels]\nA300 = { Z = "unknown" }\n', r"signals\.channels\.A300.*no species 'Z'"),
    ('[signals.channels]\nA = { A = "unknown" }\n', r"'A' is a species of the model"),
    ('[signals.channels]\nA300 = { A = "unknown" }\nA999 = { A = "unknown" }\n',
     r"no run measured the channel 'A999'"),
])
def test_signal_declarations_are_checked_against_the_model(files, extra, message):
    t = np.linspace(0, 10, 6)
    files("r1.csv", "time,A300\n" + "\n".join(f"{ti:g},{0.5 * math.exp(-ti / 5):.4f}"
                                              for ti in t))
    files("e.toml", '[signals]\n' + extra + '[[runs]]\nname = "r1"\nfile = "r1.csv"\n'
          'initial = { A = 1 }\n')
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.1\n')
    with pytest.raises(KinfitError, match=message):
        fit(load_experiment(files.folder / "e.toml"), mech, starts=1)


def test_one_estimated_noise_cannot_span_signals_and_concentrations(files):
    files("r1.csv", "time,A300,B\n0,0.5,0\n5,0.3,0.4\n10,0.2,0.6\n")
    files("e.toml", '[signals]\n[signals.channels]\nA300 = { A = "unknown" }\n'
          '[[runs]]\nname = "r1"\nfile = "r1.csv"\ninitial = { A = 1 }\n')
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.1\n')
    with pytest.raises(KinfitError, match="different units"):
        build_problem(mech, load_experiment(files.folder / "e.toml"))


def test_spectra_on_different_wavelengths_are_refused(tmp_path):
    exp, mech = spectra_case(tmp_path)
    text = (tmp_path / "s1.csv").read_text().split("\n")
    text[0] = text[0].replace("300,", "301,", 1)
    (tmp_path / "s1.csv").write_text("\n".join(text))
    with pytest.raises(KinfitError, match=r"s1\.csv: the wavelengths differ"):
        build_problem(mech, load_experiment(tmp_path / "e.toml"))
