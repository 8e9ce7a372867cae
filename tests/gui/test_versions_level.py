"""The Versions level on the small demo: what its widgets show (offscreen, synchronous jobs)."""

import numpy as np
import pyqtgraph as pg
import pytest
from PySide6.QtCore import Qt


@pytest.fixture
def versions(demo_window, monkeypatch):
    from workbench.ui.levels import versions as module

    monkeypatch.setattr(module, "RESAMPLES", 100)
    monkeypatch.setattr(module, "OVERLAY_ROWS", 150)
    demo_window.show_level("Versions")
    assert demo_window.ctx.runner.wait_idle(300)
    return demo_window, demo_window.levels["Versions"]


def _count(button) -> int:
    return int(button.text().split(" rows")[0].replace(",", ""))


def test_metrics_delong_and_swap_grid(versions):
    window, level = versions
    c = level.comparison
    assert c is not None and c.n == 300 and c.resamples == 100
    table = level.metrics_table
    assert table.rowCount() == 5
    assert [table.item(i, 0).text().split(" ")[0] for i in range(5)] == \
        ["AUC", "Gini", "KS", "Brier", "log"]
    assert table.item(0, 1).text() == f"{c.metrics_a['auc']:.4g}"
    assert table.item(0, 2).text() == f"{c.metrics_b['auc']:.4g}"
    assert table.item(0, 3).text() == f"{c.difference['auc']:+.4g}"
    assert "95% interval" in table.horizontalHeaderItem(4).text()
    assert f"z = {c.delong.z:.3f}" in level.delong_label.text()
    assert "Spearman" in level.agreement_label.text()
    counts = {k: _count(b) for k, b in level.swap_buttons.items()}
    assert counts == c.swap.counts and sum(counts.values()) == 300
    assert c.swap.cutoff_a == pytest.approx(0.20) and c.swap.cutoff_b == pytest.approx(0.20)
    assert "compliance under local law" in level.caution.text()


def test_plots_have_titles_units_and_content(versions):
    window, level = versions
    c = level.comparison
    assert level.scatter.title.startswith("Score agreement scatter")
    assert "probability of 1" in level.scatter.axis_label("bottom")
    assert "challenger" in level.scatter.axis_label("left")
    points = sum(len(i.data) for i in level.scatter.plot.items
                 if isinstance(i, pg.ScatterPlotItem))
    assert points == 300
    # the leak column only the challenger uses shows in the ranking shift with importance 0 in A
    r = c.ranking
    leak = r.features.index("collections_contacts_6m")
    assert not r.used_a[leak] and r.importance_a[leak] == 0
    assert level.shift_features[0] == r.features[r.order[0]]
    ticks = level.shift_plot.plot.getAxis("left")._tickLevels[0]
    assert ticks[0][1].startswith(level.shift_features[0])
    assert "Double lift chart" in level.lift_plot.title
    curves = [i for i in level.lift_plot.plot.items if isinstance(i, pg.PlotDataItem)]
    assert len(curves) == 3 and all(len(cv.xData) == 10 for cv in curves)
    assert level.overlay is not None and level.overlay.feature == "debt_to_income"
    overlay_curves = [i for i in level.overlay_plot.plot.items if isinstance(i, pg.PlotDataItem)]
    assert len(overlay_curves) == 2
    assert level.overlay_plot.axis_label("left") == "probability of 1"


def test_cell_lists_rows_and_row_opens_both_contribution_bars(versions, qtbot):
    window, level = versions
    c = level.comparison
    cell = max(("swap_in", "swap_out"), key=lambda k: c.swap.counts[k])
    qtbot.mouseClick(level.swap_buttons[cell], Qt.MouseButton.LeftButton)
    assert level.swap_buttons[cell].isChecked()
    assert level.rows_table.rowCount() == c.swap.counts[cell]
    listed = {int(level.rows_table.item(i, 0).text()) for i in range(level.rows_table.rowCount())}
    assert listed == set(level.rows[c.swap.rows[cell]].tolist())
    first = int(level.rows_table.item(0, 0).text())
    level.rows_table.cellClicked.emit(0, 0)
    assert window.ctx.runner.wait_idle(300)
    assert window.ctx.focus.state.row == first
    assert level.tabs.currentIndex() == 1
    assert f"Row {first}" in level.case_heading.text()
    assert "under A" in level.bars_a.title and "under B" in level.bars_b.title
    for titled in (level.bars_a, level.bars_b, level.bars_diff):
        bars = [i for i in titled.plot.items if isinstance(i, pg.BarGraphItem)]
        assert len(bars) == 1
    va, vb = level.case_values
    diff = [i for i in level.bars_diff.plot.items if isinstance(i, pg.BarGraphItem)][0]
    np.testing.assert_allclose(diff.opts["width"], np.abs(vb - va), atol=1e-12)
    np.testing.assert_allclose(diff.opts["x0"], np.minimum(vb - va, 0), atol=1e-12)
    level.open_case.click()
    assert window.ctx.focus.state.level == "Case" and window.ctx.focus.state.row == first


def test_own_cutoff_for_b_recomputes_the_swap_table(versions):
    window, level = versions
    level.own_cutoff.setChecked(True)
    level.cutoff_b.setValue(0.5)
    assert window.ctx.runner.wait_idle(300)
    c = level.comparison
    assert c.swap.cutoff_b == pytest.approx(0.5) and c.swap.cutoff_a == pytest.approx(0.2)
    assert "B's cutoff 0.5" in level.swap_title.text()
    assert {k: _count(b) for k, b in level.swap_buttons.items()} == c.swap.counts


def test_cancelled_comparison_says_so_and_runs_again(versions):
    from workbench.engine.errors import Cancelled

    window, level = versions
    level._failed(Cancelled("resampling rows"))
    assert level.comparison is None and level.metrics_table.rowCount() == 0
    level.again.click()
    assert window.ctx.runner.wait_idle(300)
    assert level.comparison is not None and level.metrics_table.rowCount() == 5


def test_scatter_is_thinned_above_its_point_limit(versions, monkeypatch):
    """Above the point limit a seeded sample is drawn as points and every row goes into a 2-D
    histogram drawn as shading (numpy.histogram2d counts all 300 rows)."""
    from workbench.ui.levels import versions as module

    window, level = versions
    monkeypatch.setattr(module, "MAX_SCATTER_POINTS", 120)
    level._draw_scatter(level.comparison)
    points = sum(len(i.data) for i in level.scatter.plot.items
                 if isinstance(i, pg.ScatterPlotItem))
    assert points == 120
    assert "density of all 300 rows, points: 120 of them (seeded sample)" in level.scatter.title
    assert level.density_counts is not None and level.density_counts.sum() == 300
    assert any(isinstance(i, pg.ImageItem) for i in level.scatter.plot.items)

