"""The shared look: panel grids without empty slots, one legend, units, tick labels."""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from kinfit.figures.style import (
    axis_label,
    decade,
    grid_shape,
    legend_once,
    panel_grid,
    plain_ticks,
    unit_text,
)


@pytest.mark.parametrize("n", range(1, 14))
def test_panel_grid_leaves_no_empty_slot(n):
    _, axes, spare = panel_grid(None, n)
    rows, cols = grid_shape(n)
    assert len(axes) == n and cols <= 3
    cells = [ax.get_subplotspec() for ax in axes + ([spare] if spare is not None else [])]
    covered = sum(len(spec.rowspan) * len(spec.colspan) for spec in cells)
    assert covered == rows * cols                      # every cell is a panel or the legend
    assert (spare is None) == (n % cols == 0)
    assert all(ax.get_visible() for ax in axes)


def test_legend_goes_once_into_the_spare_cells():
    fig, axes, spare = panel_grid(None, 5)
    for i, ax in enumerate(axes):
        ax.plot([0, 1], [0, i], label="A")
        ax.plot([0, 1], [i, 0], label="B" if i % 2 else "C")
    legend = legend_once(fig, axes, spare)
    assert legend is spare.get_legend()
    assert [t.get_text() for t in legend.get_texts()] == ["A", "C", "B"]
    assert all(ax.get_legend() is None for ax in axes) and not fig.legends
    fig, axes, spare = panel_grid(None, 4)             # 2 × 2: below the panels
    for ax in axes:
        ax.plot([0, 1], [0, 1], label="A")
    legend_once(fig, axes, spare)
    assert spare is None and len(fig.legends) == 1


def test_units_are_shown_with_superscripts():
    assert unit_text("mM^-2 min^-1") == "mM⁻² min⁻¹"
    assert axis_label("k", "mM^-1.5 min^-1") == "k (mM⁻¹·⁵ min⁻¹)"
    assert axis_label("k", "M s^-1", -4) == "k (10⁻⁴ M s⁻¹)"
    assert axis_label("m", "") == "m"


def test_decade_keeps_ordinary_numbers_unscaled():
    assert decade([1.37e-4, 1.61e-4]) == -4
    assert decade([0.49, 0.51]) == 0 and decade([298.1, 310.2]) == 0
    assert decade([0.045, 0.052]) == 0 and decade([9.9e-4]) == -4 and decade([9999.0]) == 0
    assert decade([2.5e5]) == 5 and decade([0.0]) == 0


def test_plain_ticks_carry_the_digits_that_tell_them_apart():
    # a narrow range far from zero: matplotlib's default moves the digits that differ
    # into an offset (+1e3) beside the axis; plain ticks keep them in each label
    fig = Figure()
    FigureCanvasAgg(fig)
    ax = fig.subplots()
    ax.plot(np.linspace(1000.001, 1000.004, 5), np.arange(5))
    fig.canvas.draw()
    assert ax.xaxis.get_offset_text().get_text() != ""       # the default: an offset
    plain_ticks(ax, "x")
    fig.canvas.draw()
    labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    assert ax.xaxis.get_offset_text().get_text() == ""
    assert len(set(labels)) == len(labels) >= 3
    assert all(label.startswith("1000.00") for label in labels)
