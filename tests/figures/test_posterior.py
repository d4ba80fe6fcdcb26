"""Posterior figures: corner, bands and profiles."""

from __future__ import annotations

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg

from kinfit.figures.posterior import plot_bands, plot_corner, plot_profiles


def test_plot_corner(line_posterior):
    post, _ = line_posterior
    fig = plot_corner(post)
    assert len(fig.axes) == 4                      # 2 parameters: 2 × 2 panels
    assert fig.axes[2].get_xlabel() == "k (M s⁻¹)"
    assert fig.axes[3].get_xlabel() == "A_0_r1 (M)"
    # each diagonal panel is titled with the median and the 95 % posterior interval
    k = post.samples[:, post.names.index("k")]
    title = fig.axes[0].get_title()
    assert title.startswith("k = ") and "95 %: " in title
    lo, hi = (float(v) for v in title.split("95 %: ")[1].split(" M")[0].split(" – "))
    sd = np.std(k)
    assert abs(lo - np.percentile(k, 2.5)) < sd / 10 and abs(hi - np.percentile(k, 97.5)) < sd / 10


def test_corner_ticks_tell_apart(line_posterior):
    post, _ = line_posterior
    fig = plot_corner(post)
    FigureCanvasAgg(fig)
    fig.canvas.draw()
    for ax in fig.axes[2:]:                        # the bottom row carries the x labels
        labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
        assert len(labels) >= 2 and len(set(labels)) == len(labels), labels
        assert ax.xaxis.get_offset_text().get_text() == ""


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
    axes = [a for a in fig.axes if a.get_visible() and a.get_title()]
    assert [a.get_title() for a in axes] == ["k", "A_0_r1"]
    ax = axes[0]
    assert ax.get_ylabel() == "Δ deviance"
    curve, points = ax.lines[:2]
    # a smooth curve through the computed points (it passes through each of them)
    profile = post.profiles.parameters["k"]
    assert len(curve.get_xdata()) == 200 and len(points.get_xdata()) == len(profile.values)
    np.testing.assert_allclose(np.interp(points.get_xdata(), curve.get_xdata(),
                                         curve.get_ydata()), points.get_ydata(), atol=0.05)
    # the 68 and 95 % thresholds are named on the right-hand axis, not over the curve
    assert not ax.texts
    right = [c for c in ax.child_axes]
    assert [t.get_text() for t in right[0].get_yticklabels()] == ["68 %", "95 %"]
    assert len(fig.legends) == 1                   # once, below the two panels
