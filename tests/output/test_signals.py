"""Spectrometer-signal summaries and files."""

from __future__ import annotations

import json

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


def test_signal_summary_and_files():
    from conftest import DEMO

    from kinfit.output.signals import format_components, format_signals, signals_bundle

    folder = DEMO / "spectra"
    mech = load_mechanism(folder / "dye_formation.toml")
    result = fit(load_experiment(folder / "spectra.toml"), mech, starts=1)
    text = format_signals(result, [400.0])
    assert "spectra of precursor, intermediate, dye resolved at 71 wavelengths" in text
    assert "significant components: 3" in text and "the fit used the leading 3" in text
    first = format_components(result.signals.components).splitlines()[0]
    assert "  " + first in text
    files = signals_bundle(result)
    assert set(files) >= {"spectra.csv", "spectra.png", "spectra.svg", "components.png",
                          "residual_map.png", "residual_map_r1.csv", "wavelength_traces.png"}
    rows = files["spectra.csv"].splitlines()
    assert len(rows) == 72
    assert json.loads(json.dumps(result.to_dict()))["signals"]["reduced"] is True
    # residual maps are observed − fitted, like every residual kinfit writes
    import io

    import numpy as np

    run = result.experiment.run("r1")
    spectra = result.signals.spectra
    table = np.loadtxt(io.StringIO(files["residual_map_r1.csv"]), delimiter=",", skiprows=1)
    expected = run.spectrum.values - spectra.fitted[spectra.runs.index("r1")]
    np.testing.assert_allclose(table[:, 1:], expected, rtol=1e-5, atol=1e-9)   # 6 digits
