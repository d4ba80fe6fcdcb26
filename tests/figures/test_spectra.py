"""Spectrometer figures."""

from __future__ import annotations

import numpy as np
import pytest

from kinfit.estimation.least_squares import fit
from kinfit.figures.fit import plot_residuals, plot_traces
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


@pytest.fixture(scope="module")
def spectra_fits():
    from conftest import DEMO

    folder = DEMO / "spectra"
    mech = load_mechanism(folder / "dye_formation.toml")
    return (fit(load_experiment(folder / "spectra.toml"), mech, starts=1),
            fit(load_experiment(folder / "absorbance.toml"), mech, starts=1))


def test_spectrum_figures(spectra_fits):
    from kinfit.figures.spectra import (
        plot_components,
        plot_residual_map,
        plot_spectra,
        plot_wavelength_traces,
    )

    result = spectra_fits[0]
    spectra = result.signals.spectra
    fig = plot_spectra(spectra)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "wavelength (nm)" and "mM⁻¹ cm⁻¹" in ax.get_ylabel()
    assert [line.get_label() for line in ax.lines[:3]] == ["precursor", "intermediate", "dye"]
    fig = plot_wavelength_traces(result, [420.0, 564.0])
    axes = [a for a in fig.axes if a.get_visible()]
    assert len(axes) == 3 and len(axes[0].lines) == 4              # data + fit per wavelength
    fig = plot_residual_map(result)
    assert len([a for a in fig.axes if a.get_visible()]) == 3 + 1   # maps and a colour bar
    fig = plot_components(result.signals.components, 3)
    assert fig.axes[0].get_yscale() == "log"
    # the ordinary figures show spectrum runs at their peak wavelengths
    axes = [a for a in plot_traces(result).axes if a.get_visible()]
    assert axes[0].get_ylabel() == "signal" and len(axes[0].lines) == 6
    axes = [a for a in plot_residuals(result).axes if a.get_visible()]
    assert len(axes[0].lines) >= 3


def test_signal_channel_traces(spectra_fits):
    result = spectra_fits[1]
    axes = [a for a in plot_traces(result).axes if a.get_visible()]
    assert len(axes) == 4 and axes[0].get_ylabel() == "signal"
    data, fitted = axes[0].lines[:2]
    assert data.get_linestyle() == "None" and fitted.get_linestyle() == "-"
    assert [t.get_text() for t in plot_traces(result).legends[0].get_texts()] == ["A510"]
    # the drawn curve is offset + ℓ Σ ε [X] on the fine grid (Beer–Lambert, by hand)
    curve = result.curves[0]
    model = result.signals.channel_models[("r1", "A510")]
    by_hand = model.offset + model.path * sum(
        eps * curve[s] for s, eps in model.epsilon.items())
    np.testing.assert_allclose(fitted.get_ydata(), by_hand)
