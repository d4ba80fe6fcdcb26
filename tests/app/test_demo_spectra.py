"""The demo's spectrometer part: committed inputs match the seeded generator, and
the fits recover the truth the data were made from."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import DEMO

from kinfit.app import demo_spectra
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.instrument import read_table
from kinfit.inputs.mechanism import load_mechanism

SPECTRA_DEMO = DEMO / "spectra"


def test_committed_files_match_the_generator(tmp_path):
    paths = demo_spectra.write_inputs(tmp_path)
    for key, path in paths.items():
        kept = SPECTRA_DEMO / path.name
        if path.suffix == ".toml":
            assert path.read_text() == kept.read_text(), key
            continue
        fresh, old = read_table(path), read_table(kept)
        assert fresh.names == old.names and fresh.n_rows == old.n_rows
        # values are printed to 1e-5; allow one unit in the last place for
        # integrator differences between library versions
        for c in range(len(fresh.names)):
            np.testing.assert_allclose(fresh.numbers(c)[0], old.numbers(c)[0], atol=1.1e-5)


def test_the_exports_look_like_instrument_output():
    text = (SPECTRA_DEMO / "absorbance_r1.txt").read_text()
    assert text.startswith("Instrument;") and "Time (ms);A510;" in text and "0,0" in text
    exp = load_experiment(SPECTRA_DEMO / "absorbance.toml")
    run = exp.runs[0]
    assert run.traces[0].times[0] == 0.0 and run.traces[0].times[1] == 0.5   # ms -> s
    assert run.start == 0.0 and run.n_points == 241                        # -2 s ... 0 left out


@pytest.fixture(scope="module")
def demo_fits():
    mech = load_mechanism(SPECTRA_DEMO / "dye_formation.toml")
    absorbance = fit(load_experiment(SPECTRA_DEMO / "absorbance.toml"), mech, starts=2)
    spectra = fit(load_experiment(SPECTRA_DEMO / "spectra.toml"), mech, starts=2)
    return absorbance, spectra


def test_demo_recovers_the_truth(demo_fits):
    # the seeded generator's truth (demo/spectra/truth.toml), within 3 standard errors
    rows = demo_spectra.compare_with_truth(*demo_fits)
    assert len(rows) == 2 + 2 + 4 + 2
    for name, true, value, se, z in rows:
        assert abs(z) < 3, (name, true, value, se)


def test_demo_spectra_are_resolved(demo_fits):
    spectra = demo_fits[1].signals.spectra
    truth = demo_spectra.true_spectra()
    z = (spectra.values - truth) / spectra.stderr
    assert np.mean(np.abs(z) < 3) > 0.97
    assert demo_fits[1].signals.components.n_significant == 3
