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
