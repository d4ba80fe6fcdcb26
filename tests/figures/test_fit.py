"""Figures of a fit, checked through the returned Figure, not pixels."""

from __future__ import annotations

import numpy as np
from conftest import MODELS

from kinfit.core.units import Units
from kinfit.figures.fit import plot_residuals, plot_traces, plot_trajectory
from kinfit.inputs.mechanism import load_mechanism
from kinfit.numerics.integrate import simulate


def test_plot_traces(result):
    fig = plot_traces(result)
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert len(axes) == 2                          # two runs side by side, no empty slot
    assert axes[0].get_xlabel() == "time (min)"
    assert axes[0].get_ylabel() == "concentration (mM)"
    assert axes[0].get_title().startswith("a: A 1 mM")
    assert len(axes[0].lines) == 4                 # run a measured A and P: data + fit each
    # run b measured A only: P, which the model predicts, is drawn dashed
    data, fit_line, predicted = axes[1].lines
    assert data.get_linestyle() == "None" and fit_line.get_linestyle() == "-"
    assert predicted.get_linestyle() == "--"
    np.testing.assert_allclose(predicted.get_ydata(), result.curves[1]["P"])
    # one legend for the figure, none on the panels
    assert [ax.get_legend() for ax in axes] == [None, None] and len(fig.legends) == 1
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert labels == ["A", "P", "dashed: not measured in that run"]


def test_plot_residuals_are_observed_minus_fitted(result):
    fig = plot_residuals(result)
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert axes[0].get_ylabel() == "observed − fitted (mM)"
    first = axes[0].lines[0]
    np.testing.assert_array_equal(first.get_xdata(), [0, 5, 10, 20])
    # residual = observed − fitted, the model value at each point from the fit
    observed = result.experiment.runs[0].traces[0].values
    np.testing.assert_allclose(first.get_ydata(), observed - result.predicted[:4])
    assert axes[0].get_shared_y_axes().joined(axes[0], axes[1])    # one scale for all runs
    assert "observed − fitted" in fig.get_suptitle()


def test_plot_trajectory_draws_every_species():
    mech = load_mechanism(MODELS / "consecutive.toml")
    traj = simulate(mech, {"A": 1.0}, times=np.linspace(0, 50, 51))
    fig = plot_trajectory(traj, Units("s", "M"), "consecutive")
    ax = fig.axes[0]
    assert [line.get_label() for line in ax.lines] == ["A", "B", "C"]
    assert ax.get_xlabel() == "time (s)" and ax.get_title() == "consecutive"
