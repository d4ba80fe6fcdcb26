"""Posterior figures: corner, bands and profiles."""

from __future__ import annotations

from kinfit.figures.posterior import plot_bands, plot_corner, plot_profiles


def test_plot_corner(line_posterior):
    post, _ = line_posterior
    fig = plot_corner(post)
    assert len(fig.axes) == 4                      # 2 parameters: 2 × 2 panels
    assert fig.axes[2].get_xlabel() == "k (M s^-1)"
    assert fig.axes[3].get_xlabel() == "A_0_r1 (M)"


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
    assert [a.get_title() for a in axes] == ["k", "A_0_r1"]
    assert axes[0].get_ylabel() == "Δ deviance"
    assert len(axes[0].lines) == 2 + 2             # profile, parabola, two thresholds
