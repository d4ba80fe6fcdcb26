"""Figures are checked through the returned Figure, not pixels."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MODELS

from kinfit.core.units import Units
from kinfit.estimation.least_squares import fit
from kinfit.figures.fit import plot_residuals, plot_traces, plot_trajectory
from kinfit.figures.posterior import plot_bands, plot_corner, plot_profiles
from kinfit.figures.ranking import plot_initial_rates, plot_weights
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.integrate import simulate


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("p")
    (folder / "e.toml").write_text('[units]\ntime = "min"\nconcentration = "mM"\n'
                                   '[[runs]]\nname = "a"\nfile = "a.csv"\ninitial = { A = 1 }\n'
                                   '[[runs]]\nname = "b"\nfile = "b.csv"\ninitial = { A = 2 }\n')
    (folder / "a.csv").write_text("time,A,P\n0,1,0\n5,0.61,0.39\n10,0.37,0.63\n20,0.14,0.86\n")
    (folder / "b.csv").write_text("time,A\n0,2\n5,1.2\n10,0.74\n")
    return fit(load_experiment(folder / "e.toml"), load_mechanism(MODELS / "first_order.toml"),
               starts=1)


def test_plot_traces(result):
    fig = plot_traces(result)
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert len(axes) == 2
    assert axes[0].get_xlabel() == "time (min)"
    assert axes[0].get_ylabel() == "concentration (mM)"
    assert axes[0].get_title().startswith("a: A 1 mM")
    assert len(axes[0].lines) == 4 and len(axes[1].lines) == 2   # data + fit per species


def test_plot_residuals(result):
    fig = plot_residuals(result)
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert axes[0].get_ylabel() == "fit − data (mM)"
    xdata = axes[0].lines[0].get_xdata()
    np.testing.assert_array_equal(xdata, [0, 5, 10, 20])


def test_plot_trajectory_draws_every_species():
    mech = load_mechanism(MODELS / "consecutive.toml")
    traj = simulate(mech, {"A": 1.0}, times=np.linspace(0, 50, 51))
    fig = plot_trajectory(traj, Units("s", "M"), "consecutive")
    ax = fig.axes[0]
    assert [line.get_label() for line in ax.lines] == ["A", "B", "C"]
    assert ax.get_xlabel() == "time (s)" and ax.get_title() == "consecutive"


def test_layers_below_figures_do_not_import_matplotlib():
    # Only kinfit.figures may import matplotlib (house rule): every module of
    # the layers below it is imported and matplotlib must still be absent.
    import subprocess
    import sys

    code = ("import sys, pkgutil, importlib, kinfit\n"
            "for layer in ('core', 'inputs', 'numerics', 'estimation', 'analysis'):\n"
            "    pkg = importlib.import_module('kinfit.' + layer)\n"
            "    for info in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + '.'):\n"
            "        importlib.import_module(info.name)\n"
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# ------------------------------------------------------------ temperature

def test_arrhenius_and_eyring_plots(arrhenius_study):
    from kinfit.analysis.activation import activation_parameters
    from kinfit.figures.temperature import plot_arrhenius, plot_eyring

    acts = activation_parameters(arrhenius_study["result"])
    stage = arrhenius_study["two_stage"]
    predicted = [("k", acts[0].rate_at(340.0))]
    unit = acts[0].unit                     # s^-1 times M to a tiny fitted power
    assert unit.endswith("s^-1") and acts[0].si_unit == unit
    for plot, ylabel in ((plot_arrhenius, f"ln(k / ({unit}))"),
                         (plot_eyring, f"ln(k/T), k in {unit}, T in K")):
        fig = plot(acts, stage, predicted)
        ax = fig.axes[0]
        assert ax.get_xlabel() == "1000 / T (1/K)" and ax.get_ylabel() == ylabel
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert "k at each temperature (±1 s.e.)" in labels and "two-stage line" in labels
        assert "prediction (EXTRAPOLATED)" in labels
        assert any(label.startswith("global fit, 95 % band") for label in labels)
        # the per-temperature points sit at 1000/T of the four temperatures
        points = [c for c in ax.containers if len(c.lines[0].get_xdata()) == 4]
        np.testing.assert_allclose(sorted(points[0].lines[0].get_xdata()),
                                   sorted(1000.0 / stage.law("k").temperatures))


def test_prediction_plot_flags_extrapolation(arrhenius_study):
    from kinfit.analysis.prediction import basis_from_fit, predict
    from kinfit.figures.temperature import plot_prediction

    basis = basis_from_fit(arrhenius_study["result"])
    pred = predict(basis, {"A": 0.8}, np.linspace(0, 100, 21), 333.15, draws=20)
    title = plot_prediction(pred, "decay").axes[0].get_title()
    assert title.startswith("EXTRAPOLATED") and "333.15 K" in title
    inside = predict(basis, {"A": 0.8}, np.linspace(0, 100, 21), 300.0, draws=20)
    ax = plot_prediction(inside, "decay").axes[0]
    assert not ax.get_title().startswith("EXTRAPOLATED")
    assert [line.get_label() for line in ax.lines] == ["A", "P"]
    assert len(ax.collections) == 2                                  # one band per species


def test_plot_weights(small_ranking):
    comparison, _, _ = small_ranking
    fig = plot_weights(comparison)
    ax = fig.axes[0]
    assert len(ax.patches) == 2 * len(comparison.candidates)          # AICc and BIC bars
    top = max(ax.get_yticklabels(), key=lambda t: t.get_position()[1])
    assert top.get_text() == comparison.best.label == "m=1, n=2"     # best at the top
    assert ax.get_xlim() == (0.0, 1.0)
    widths = sorted(p.get_width() for p in ax.patches)
    assert widths[-1] == pytest.approx(max(comparison.best.akaike_weight,
                                           comparison.best.bic_weight))


def test_plot_initial_rates(small_ranking):
    comparison, _, _ = small_ranking
    fig = plot_initial_rates(comparison.cross_check)
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title() for ax in axes] == ["order in A", "order in B"]
    assert axes[0].get_xscale() == "log" and axes[0].get_yscale() == "log"
    assert axes[1].get_xlabel() == "[B]0 (M)"
    assert [line.get_label() for line in axes[0].lines if not line.get_label().startswith("_")
            ][1].startswith("time course: 1")


def test_plot_initial_rates_without_a_regression(small_ranking):
    from dataclasses import replace

    comparison, _, _ = small_ranking
    check = comparison.cross_check
    empty = replace(check, initial_rates=replace(check.initial_rates, regression=None,
                                                 notes=("no run gave a usable initial rate",)))
    fig = plot_initial_rates(empty)
    assert "no run gave a usable initial rate" in fig.axes[0].texts[0].get_text()


def test_plot_corner(line_posterior):
    post, _ = line_posterior
    fig = plot_corner(post)
    assert len(fig.axes) == 4                      # 2 parameters: 2 × 2 panels
    assert fig.axes[2].get_xlabel() == "k (M s^-1)"
    assert fig.axes[3].get_xlabel() == "A0_r1 (M)"


def test_plot_bands(line_posterior):
    post, _ = line_posterior
    fig = plot_bands(post)
    ax = [a for a in fig.axes if a.get_visible()][0]
    assert len(ax.collections) == 2                # curve band and predictive band
    assert [line.get_label() for line in ax.lines] == ["A posterior median", "A data"]
    assert ax.get_xlabel() == "time (s)"


def test_plot_profiles(line_posterior):
    post, _ = line_posterior
    fig = plot_profiles(post)
    axes = [a for a in fig.axes if a.get_visible()]
    assert [a.get_title() for a in axes] == ["k", "A0_r1"]
    assert axes[0].get_ylabel() == "Δ deviance"
    assert len(axes[0].lines) == 2 + 2             # profile, parabola, two thresholds


# ---------------------------------------------------------------- spectra

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
    assert ax.get_xlabel() == "wavelength (nm)" and "mM^-1 cm^-1" in ax.get_ylabel()
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
    assert fitted.get_label() == "A510 fit"
    # the drawn curve is offset + ℓ Σ ε [X] on the fine grid (Beer–Lambert, by hand)
    curve = result.curves[0]
    model = result.signals.channel_models[("r1", "A510")]
    by_hand = model.offset + model.path * sum(
        eps * curve[s] for s, eps in model.epsilon.items())
    np.testing.assert_allclose(fitted.get_ydata(), by_hand)
