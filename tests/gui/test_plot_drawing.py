"""How plots are drawn: the grid behind the data, titles that keep their height, and the
Effect level's linked plots sharing one x span fixed before any result arrives."""

import numpy as np
import pyqtgraph as pg

from workbench.ui.plotting import BackGrid, TitledPlot, _tick_values


def test_grid_is_ours_behind_the_items_at_the_axis_ticks(qtbot):
    titled = TitledPlot("A title", "x", "y")
    qtbot.addWidget(titled)
    titled.resize(500, 300)
    titled.show()
    titled.plot.addItem(pg.PlotDataItem([0, 10], [0, 1]))
    titled.plot.setXRange(0, 10, padding=0)
    titled.plot.setYRange(0, 1, padding=0)
    qtbot.wait(10)
    bottom, left = titled.plot.getAxis("bottom"), titled.plot.getAxis("left")
    assert bottom.grid is False and left.grid is False  # pyqtgraph's own grid is off
    assert isinstance(titled.grid, BackGrid) and titled.grid.zValue() < 0
    width = titled.plot.vb.rect().width()
    major = _tick_values(bottom, 0, 10, width, 0)
    expected = [v for v in bottom.tickValues(0, 10, width)[0][1] if 0 <= v <= 10]
    assert major == expected and len(major) >= 3
    bottom.setTicks([[(1, "one"), (4, "four"), (12, "off the view")]])
    assert _tick_values(bottom, 0, 10, width, 0) == [1, 4]  # fixed ticks, inside the view
    assert _tick_values(bottom, 0, 10, width, 1) == []


def test_title_height_does_not_change_when_the_title_wraps(qtbot):
    titled = TitledPlot("Short", "x", "y")
    qtbot.addWidget(titled)
    titled.resize(220, 300)
    titled.show()
    before = titled.title_label.height()
    titled.set_text("A much longer title that has to wrap onto a second line in this width")
    qtbot.wait(10)
    assert titled.title_label.height() == before
    assert titled.title_label.toolTip().startswith("A much longer title")


def test_effect_linked_plots_share_the_segments_span(demo_window):
    win = demo_window
    win.ctx.focus.update(level="Effect", feature="debt_to_income")
    assert win.ctx.runner.wait_idle(300)
    effect = win.levels["Effect"]
    values = win.ctx.workspace.frame["debt_to_income"].to_numpy(float)
    low, high = np.nanmin(values), np.nanmax(values)
    assert effect.x_span == (low, high)
    pad = 0.02 * (high - low)
    for titled in (effect.curve_plot, effect.dist_plot, effect.scatter_plot):
        x0, x1 = titled.plot.vb.viewRange()[0]
        assert abs(x0 - (low - pad)) < 1e-6 * (high - low) and abs(x1 - (high + pad)) < 1e-6 * (high - low)
    # the curve's grid (5th to 95th percentile) lies inside the span, not at its edges
    grid = np.asarray(effect.curve.result.grid, float)
    assert low <= grid.min() and grid.max() <= high and (grid.min() > low or grid.max() < high)
    win.ctx.focus.update(feature="employment_type")  # categorical: the plots fit themselves
    assert win.ctx.runner.wait_idle(300)
    assert effect.x_span is None


def test_progress_strip_shows_whole_percentages_clamped(qtbot):
    from workbench.ui.job_area import ProgressStrip

    strip = ProgressStrip()
    qtbot.addWidget(strip)
    assert strip.text() == "0%"
    strip.set_fraction(0.426)
    assert strip.percent == 43 and strip.text() == "43%"
    strip.set_fraction(1.7)
    assert strip.text() == "100%"
    strip.set_fraction(-0.2)
    assert strip.text() == "0%"
