"""Ranking figures: weights and initial rates."""

from __future__ import annotations

import pytest

from kinfit.figures.ranking import plot_initial_rates, plot_weights


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
    assert axes[1].get_xlabel() == "[B]₀ (M)"
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
