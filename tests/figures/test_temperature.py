"""Arrhenius, Eyring and prediction figures."""

from __future__ import annotations

import numpy as np

from kinfit.core.formatting import superscripts


def test_arrhenius_and_eyring_plots(arrhenius_study):
    from kinfit.analysis.activation import activation_parameters
    from kinfit.figures.temperature import plot_arrhenius, plot_eyring

    acts = activation_parameters(arrhenius_study["result"])
    stage = arrhenius_study["two_stage"]
    predicted = [("k", acts[0].rate_at(340.0))]
    unit = acts[0].unit                     # s^-1 times M to a tiny fitted power
    assert unit.endswith("s^-1") and acts[0].si_unit == unit
    shown = superscripts(unit)              # figures write powers as superscripts
    assert shown.endswith("s⁻¹") and "^" not in shown
    for plot, ylabel in ((plot_arrhenius, f"ln(k / ({shown}))"),
                         (plot_eyring, f"ln(k/T), k in {shown}, T in K")):
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
