"""Effect: one feature's effect curve over ICE lines, its ALE curve, its attribution scatter
coloured by its strongest partner, and its distribution; the focused row marked."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtWidgets import QCheckBox, QGridLayout, QHBoxLayout, QLabel, QPushButton, QVBoxLayout

from workbench.ui.levels.base import Level, register_level
from workbench.ui.plotting import (
    CURVE,
    FOCUS_MARK,
    NEUTRAL,
    SECOND,
    TitledPlot,
    category_ticks,
    colour,
    message_item,
    point_under,
    sequential_map,
    thin_indices,
    value_colours,
)
from workbench.ui.results import values_digest

ICE_PEN = (120, 120, 120, 45)


def _positions(values, levels) -> np.ndarray:
    """x positions of categorical values: the index of each level (NaN when unseen)."""
    lookup = {str(v): i for i, v in enumerate(levels)}
    return np.array([lookup.get(str(v), np.nan) for v in values], dtype=float)


@register_level
class EffectLevel(Level):
    name, order = "Effect", 30
    summary = "One feature: effect curve with ICE lines, ALE, attribution scatter, distribution"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Effect</b>")
        self.centred = QCheckBox("Centre the ICE lines")
        self.example = QPushButton("Show a telling example")
        self.example.setToolTip("The row of the segment sample where this feature's attribution is largest")
        top = QHBoxLayout()
        top.addWidget(self.heading, 1)
        top.addWidget(self.centred)
        top.addWidget(self.example)
        self.curve_plot = TitledPlot("Effect curve", "", "")
        self.ale_plot = TitledPlot("ALE curve", "", "")
        self.scatter_plot = TitledPlot("Attribution scatter", "", "")
        self.dist_plot = TitledPlot("Distribution", "", "rows")
        self.legend = QLabel("")
        self.legend.setWordWrap(True)
        grid = QGridLayout()
        grid.addWidget(self.curve_plot, 0, 0)
        grid.addWidget(self.ale_plot, 0, 1)
        grid.addWidget(self.dist_plot, 1, 0)
        grid.addWidget(self.scatter_plot, 1, 1)
        grid.setRowStretch(0, 3)
        grid.setRowStretch(1, 2)
        self.dist_plot.setMaximumHeight(10_000)
        self.note = QLabel("Click an ICE line or a point to open that row as a Case. Effect curves "
                           "describe the model, not the world.")
        self.note.setStyleSheet("color: #555;")
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addLayout(grid, 1)
        layout.addWidget(self.legend)
        layout.addWidget(self.note)
        self.centred.toggled.connect(lambda _: self._draw_curve())
        self.example.clicked.connect(self.open_telling_example)
        self.dist_plot.plot.setXLink(self.curve_plot.plot)
        self.scatter_plot.plot.setXLink(self.curve_plot.plot)
        self.curve = self.ale = self.sample = self.partner = None
        self.x_span: tuple[float, float] | None = None  # see _fix_x_span
        self.focus_contribution = None
        self.levels: list | None = None
        self.scatter_item = None
        self.ice_lines = np.zeros((0, 0))
        self.ice_rows = np.zeros(0, dtype=int)
        self.curve_plot.plot_widget.scene().sigMouseClicked.connect(self._curve_clicked)
        self.curve_plot.on_hover(self._hover_curve)
        self.scatter_plot.on_hover(self._hover_scatter)
        self.ale_plot.on_hover(self._hover_ale)
        self.dist_plot.on_hover(self._hover_distribution)

    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.segment, s.feature, s.row)

    # ---- rendering ---------------------------------------------------------------------------------
    def render(self) -> None:
        ws, s = self.ctx.workspace, self.state
        adapter = ws.adapter(s.model)
        self.curve = self.ale = self.sample = self.partner = None
        self.associated = None
        self.focus_contribution = None
        self.levels = None
        self.ice_lines = np.zeros((0, 0))
        self.scatter_item = None
        feature = s.feature
        if adapter is not None and feature not in adapter.input_columns:
            feature = None
        if adapter is None or ws.frame is None or feature is None:
            self.heading.setText("<b>Effect</b> — choose a feature (focus bar, a Ranking bar or a "
                                 "contribution bar)")
            for p in (self.curve_plot, self.ale_plot, self.scatter_plot, self.dist_plot):
                message_item(p.plot, "No feature chosen")
            return
        self.feature = feature
        self.categorical = feature in adapter.categorical_columns or not pd.api.types.is_numeric_dtype(ws.frame[feature])
        row = f", row {s.row} marked" if s.row is not None else ""
        self.heading.setText(f"<b>Effect</b> — {feature}, model {s.model}{row}")
        for p in (self.curve_plot, self.ale_plot, self.scatter_plot, self.dist_plot):
            message_item(p.plot, "Computing…")
        self._fix_x_span(feature)
        rel = self.relevant()
        r = self.ctx.results
        # Every arrival is drawn from the draw queue: one plot per event-loop turn.
        later = self.arrival
        r.partial_dependence(s.model, s, feature, later(self._curve_arrived),
                             later(lambda e: (self._failed(self.curve_plot, e),
                                              self._failed(self.dist_plot, e))), rel)
        r.ale(s.model, s, feature, later(self._ale_arrived),
              later(lambda e: self._failed(self.ale_plot, e)), rel)
        r.sample_attributions(s.model, s, later(self._sample_arrived),
                              later(lambda e: self._failed(self.scatter_plot, e)), rel)
        r.associations(s.model, s, later(self._associations_arrived), lambda e: None, rel)
        r.interactions(s.model, s, later(self._partners_arrived),
                       later(lambda e: self._partners_arrived(None)), rel)
        if s.row is not None and s.row < ws.n_rows:
            r.case_attributions(s.model, ws.frame.iloc[[s.row]], values_digest({"row": s.row}),
                                later(self._focus_arrived), None, rel)

    def _fix_x_span(self, feature: str) -> None:
        """The linked plots (curve, distribution, scatter) share one x range, set from the
        segment's values before any result arrives: a range that each arrival re-fitted would
        move all three plots, and repaint them, at every arrival."""
        self.x_span = None
        values = self.ctx.workspace.frame[feature]
        if self.categorical or not pd.api.types.is_numeric_dtype(values):
            return
        rows = self.ctx.results.segment_rows(self.state)
        finite = values.iloc[rows].to_numpy(dtype=float)
        finite = finite[np.isfinite(finite)]
        if finite.size and finite.max() > finite.min():
            self.x_span = (float(finite.min()), float(finite.max()))
            self.curve_plot.plot.setXRange(*self.x_span, padding=0.02)

    def _auto_range(self, plot) -> None:
        """Fit y to the new items; x too, unless the linked plots share a fixed span."""
        plot.enableAutoRange(x=self.x_span is None, y=True)
        if self.x_span is not None:
            plot.setXRange(*self.x_span, padding=0.02)

    def _failed(self, titled, exc) -> None:
        message_item(titled.plot, str(exc))

    # ---- effect curve and distribution ----------------------------------------------------------
    def _curve_arrived(self, sampled) -> None:
        self.curve = sampled
        curve = sampled.result
        if self.categorical:
            self.levels = list(curve.grid)
        self._draw_curve()
        self.draws.later(self._draw_distribution)  # the next plot on the next turn
        if self.sample is not None:
            self.draws.later(self._draw_scatter)

    def _grid_x(self, grid) -> np.ndarray:
        return np.arange(len(grid), dtype=float) if self.categorical else np.asarray(grid, float)

    def _draw_curve(self) -> None:
        if self.curve is None:
            return
        curve, rows = self.curve.result, self.curve.rows
        plot = self.curve_plot.plot
        plot.clear()
        self._auto_range(plot)
        xs = self._grid_x(curve.grid)
        ice = curve.centred() if self.centred.isChecked() else curve.ice
        pd_line = curve.pd - curve.pd[0] if self.centred.isChecked() else curve.pd
        self.ice_rows = rows[np.asarray(curve.ice_rows, dtype=int)]
        focus_row = self.state.row
        # All ICE lines as one item (NaN breaks between lines): hundreds of separate items
        # would each re-run the view's auto-range and stall the window for seconds.
        self.ice_x, self.ice_lines = xs, np.asarray(ice, float)
        n_lines = len(self.ice_lines)
        joined_x = np.tile(np.append(xs, np.nan), n_lines)
        joined_y = np.column_stack([self.ice_lines, np.full(n_lines, np.nan)]).ravel()
        plot.addItem(pg.PlotDataItem(joined_x, joined_y, pen=pg.mkPen(ICE_PEN, width=1),
                                     connect="finite"))
        plot.addItem(pg.PlotDataItem(xs, pd_line, pen=pg.mkPen(CURVE, width=3), symbol="o",
                                     symbolSize=6, symbolBrush=CURVE, name="effect curve"))
        if focus_row is not None and focus_row in set(self.ice_rows.tolist()):
            i = int(np.flatnonzero(self.ice_rows == focus_row)[0])
            plot.addItem(pg.PlotDataItem(xs, ice[i], pen=pg.mkPen(FOCUS_MARK, width=2.5,
                                                                   style=pg.QtCore.Qt.PenStyle.DashLine)))
        self._mark_focus_value(plot)
        self._category_ticks(plot)
        centred = " (centred)" if self.centred.isChecked() else ""
        self.curve_plot.set_text(
            f"Effect curve of {self.feature} over {len(ice)} ICE lines{centred}",
            self.feature, f"{curve.units}" + (" change from the first grid value" if centred else ""))

    def _mark_focus_value(self, plot) -> None:
        s, ws = self.state, self.ctx.workspace
        if s.row is None or s.row >= ws.n_rows:
            return
        value = ws.frame[self.feature].iloc[s.row]
        x = _positions([value], self.levels)[0] if self.categorical and self.levels else (
            float(value) if pd.notna(value) else np.nan)
        if np.isfinite(x):
            plot.addItem(pg.InfiniteLine(x, angle=90, pen=pg.mkPen(FOCUS_MARK, width=1.5,
                                                                   style=pg.QtCore.Qt.PenStyle.DotLine),
                                         label=f"row {s.row}", labelOpts={"position": 0.92}))

    def _category_ticks(self, plot) -> None:
        if self.categorical and self.levels is not None:
            plot.getAxis("bottom").setTicks([category_ticks(self.levels)])
        else:
            plot.getAxis("bottom").setTicks(None)

    def _draw_distribution(self) -> None:
        curve = self.curve.result
        plot = self.dist_plot.plot
        plot.clear()
        self._auto_range(plot)
        counts = np.asarray(curve.counts, float)
        if curve.edges is None:
            xs = np.arange(len(counts))
            plot.addItem(pg.BarGraphItem(x=xs, height=counts, width=0.6, brush=colour(NEUTRAL, 160),
                                         pen=pg.mkPen(None)))
        else:
            edges = np.asarray(curve.edges, float)
            plot.addItem(pg.BarGraphItem(x0=edges[:-1], width=np.diff(edges), height=counts,
                                         brush=colour(NEUTRAL, 160), pen=pg.mkPen("w")))
        self._category_ticks(plot)
        self._mark_focus_value(plot)
        self.dist_plot.set_text(f"Distribution of {self.feature} ({curve.rows_used:,} rows of the segment)",
                                self.feature, "rows")

    # ---- ALE ------------------------------------------------------------------------------------------
    def _ale_arrived(self, sampled) -> None:
        self.ale = sampled.result
        plot = self.ale_plot.plot
        plot.clear()
        plot.enableAutoRange()
        plot.addItem(pg.PlotDataItem(self.ale.edges, self.ale.values, pen=pg.mkPen(SECOND, width=3),
                                     symbol="s", symbolSize=5, symbolBrush=SECOND))
        plot.addItem(pg.InfiniteLine(0, angle=0, pen=pg.mkPen(NEUTRAL, width=1)))
        self._mark_focus_value(plot)
        self.ale_plot.set_text(f"ALE curve of {self.feature}: accumulated local effect, centred "
                               f"({len(self.ale.counts)} bins)",
                               self.feature, f"ALE ({self.ale.units})")

    # ---- attribution scatter ---------------------------------------------------------------------------
    def _associations_arrived(self, result) -> None:
        assoc, _clustering = result
        feats = list(assoc.features)
        if self.feature in feats:
            i = feats.index(self.feature)
            row = np.array(assoc.strength[i], dtype=float)
            row[i] = np.nan
            if np.isfinite(row).any():
                j = int(np.nanargmax(row))
                self.associated = (feats[j], float(row[j]), "association")
        if self.partner is not None and self.partner[2] != "H" and self.sample is not None:
            self.partner = self.associated or self.partner
            self._draw_scatter()

    def _partners_arrived(self, sampled) -> None:
        self.partner = None
        if sampled is not None:
            h = sampled.result
            if self.feature in h.features:
                i = list(h.features).index(self.feature)
                row = np.array(h.h_pairs[i], dtype=float)
                row[i] = np.nan
                if np.isfinite(row).any() and np.nanmax(row) > 1e-6:
                    j = int(np.nanargmax(row))
                    self.partner = (h.features[j], float(row[j]), "H")
        if self.partner is None:
            # No interaction found (an additive model has none): colour by the most associated.
            self.partner = self.associated or ("", float("nan"), "")
        if self.scatter_item is not None and self.scatter_rows is not None:
            self._recolour_scatter()  # the points stay; a full redraw stalls the window
        elif self.sample is not None:
            self._draw_scatter()

    def _recolour_scatter(self) -> None:
        brushes, legend = self._scatter_brushes(self.scatter_rows)
        self.legend.setText(legend)
        self.scatter_item.setBrush(brushes)

    def _sample_arrived(self, sampled) -> None:
        self.sample = sampled
        self._draw_scatter()

    def _focus_arrived(self, attributions) -> None:
        if self.feature in attributions.features:
            j = list(attributions.features).index(self.feature)
            self.focus_contribution = float(attributions.values[0, j])
        if self.scatter_item is not None:
            self._draw_focus_marker()  # only the ring moves: no need to redraw every point

    def _draw_scatter(self) -> None:
        att, rows = self.sample.result, self.sample.rows
        ws = self.ctx.workspace
        plot = self.scatter_plot.plot
        plot.clear()
        self._auto_range(plot)
        j = list(att.features).index(self.feature)
        keep = thin_indices(len(rows), seed=ws.settings.seed)
        rows, contrib = rows[keep], att.values[keep, j]
        values = ws.frame[self.feature].to_numpy()[rows]
        if self.categorical:
            levels = self.levels or sorted(map(str, pd.unique(values)))
            self.levels = self.levels or levels
            jitter = np.random.default_rng(0).uniform(-0.25, 0.25, len(rows))
            xs = _positions(values, levels) + jitter
        else:
            xs = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(float)
        brushes, legend = self._scatter_brushes(rows)
        self.legend.setText(legend)
        self.scatter_rows, self.scatter_x, self.scatter_y = rows, xs, contrib
        item = pg.ScatterPlotItem(xs, contrib, size=6, brush=brushes, pen=pg.mkPen(None),
                                  data=rows.tolist(), hoverable=True)
        item.sigClicked.connect(self._point_clicked)
        plot.addItem(item)
        self.scatter_item = item
        plot.addItem(pg.InfiniteLine(0, angle=0, pen=pg.mkPen(NEUTRAL, width=1)))
        self.focus_marker = None
        self._draw_focus_marker()
        s = self.state
        self._category_ticks(plot)
        adapter = ws.adapter(s.model)
        self.scatter_plot.set_text(
            f"Attribution scatter of {self.feature}: value against its contribution ({len(rows):,} rows)",
            self.feature, f"contribution ({adapter.output_units if adapter else ''})")

    def _scatter_brushes(self, rows: np.ndarray):
        partner = self.partner[0] if self.partner else ""
        if partner:
            return self._partner_colours(partner, rows)
        # one brush for all points: a list of colours makes pyqtgraph build a brush per point
        return pg.mkBrush(colour(CURVE, 170)), ("colour: one colour (the strongest partner is "
                                                "known once the H-statistics are in)")

    def _draw_focus_marker(self) -> None:
        s, ws = self.state, self.ctx.workspace
        plot = self.scatter_plot.plot
        if getattr(self, "focus_marker", None) is not None:
            plot.removeItem(self.focus_marker)
            self.focus_marker = None
        if s.row is None or self.focus_contribution is None:
            return
        v = ws.frame[self.feature].iloc[s.row]
        x = _positions([v], self.levels)[0] if self.categorical else float(v) if pd.notna(v) else np.nan
        if np.isfinite(x):
            self.focus_marker = pg.ScatterPlotItem([x], [self.focus_contribution], size=16,
                                                   brush=pg.mkBrush(None),
                                                   pen=pg.mkPen(FOCUS_MARK, width=2.5))
            plot.addItem(self.focus_marker)

    def _partner_colours(self, partner: str, rows: np.ndarray):
        series = self.ctx.workspace.frame[partner]
        values = series.to_numpy()[rows]
        strength, how = self.partner[1], self.partner[2]
        if how == "H":
            head = f"colour: <b>{partner}</b>, the strongest partner of {self.feature} (H = {strength:.2f})"
        else:
            head = (f"colour: <b>{partner}</b>, the feature most associated with {self.feature} "
                    f"({strength:.2f}; H found no interaction partner)")
        cmap = sequential_map()
        if pd.api.types.is_numeric_dtype(series):
            v = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(float)
            lo, hi = np.nanpercentile(v, [2, 98]) if np.isfinite(v).any() else (0, 1)
            return value_colours(v, cmap), f"{head}; dark blue = low ({lo:.3g}), yellow = high ({hi:.3g}) (cividis)"
        levels = sorted(map(str, pd.unique(series.dropna())))
        codes = np.array([levels.index(str(v)) if str(v) in levels else -1 for v in values], float)
        codes[codes < 0] = np.nan
        scaled = codes / max(len(levels) - 1, 1)
        brushes = value_colours(scaled, cmap)
        table = cmap.getLookupTable(nPts=256, alpha=False)
        keys = []
        for i, level in enumerate(levels):
            r, g, b = table[int(i / max(len(levels) - 1, 1) * 255)]
            keys.append(f"<span style='color: rgb({r},{g},{b}); font-size: 14pt;'>■</span> {level}")
        return brushes, head + ": " + " ".join(keys)

    # ---- hover and clicks ---------------------------------------------------------------------------
    def _hover_curve(self, x, y) -> str | None:
        if self.curve is None:
            return None
        curve = self.curve.result
        xs = self._grid_x(curve.grid)
        i = int(np.argmin(np.abs(xs - x)))
        return f"{self.feature} = {curve.grid[i]}: mean {curve.pd[i]:.4g} ({curve.units})"

    def _hover_distribution(self, x, y) -> str | None:
        if self.curve is None:
            return None
        curve = self.curve.result
        counts = np.asarray(curve.counts)
        if curve.edges is None:
            i = int(round(x))
            return f"{curve.grid[i]}: {counts[i]:,} rows" if 0 <= i < len(counts) else None
        edges = np.asarray(curve.edges, float)
        i = int(np.searchsorted(edges, x) - 1)
        if not 0 <= i < len(counts):
            return None
        return f"{self.feature} {edges[i]:.4g} to {edges[i + 1]:.4g}: {counts[i]:,} rows"

    def _hover_ale(self, x, y) -> str | None:
        if self.ale is None:
            return None
        i = int(np.argmin(np.abs(self.ale.edges - x)))
        return f"{self.feature} = {self.ale.edges[i]:.4g}: ALE {self.ale.values[i]:+.4g}"

    def _hover_scatter(self, x, y) -> str | None:
        point = point_under(self.scatter_item, x, y)
        if point is None:
            return None
        return f"row {point.data()}: contribution {point.pos().y():+.4g} — click to open this Case"

    def ice_row_near(self, x: float, y: float, tolerance: float | None = None) -> int | None:
        """The row whose ICE line passes closest above or below (x, y), within ``tolerance``
        (default 3 % of the visible y range)."""
        if self.ice_lines.size == 0:
            return None
        if tolerance is None:
            (_, _), (y0, y1) = self.curve_plot.plot.vb.viewRange()
            tolerance = 0.03 * abs(y1 - y0)
        at_x = np.array([np.interp(x, self.ice_x, line) for line in self.ice_lines])
        i = int(np.nanargmin(np.abs(at_x - y)))
        return int(self.ice_rows[i]) if abs(at_x[i] - y) <= tolerance else None

    def _curve_clicked(self, event) -> None:
        point = self.curve_plot.plot.vb.mapSceneToView(event.scenePos())
        row = self.ice_row_near(point.x(), point.y())
        if row is not None:
            self.open_case(row)

    def _point_clicked(self, _item, points, _ev=None) -> None:
        if len(points):
            self.open_case(int(points[0].data()))

    def open_case(self, row: int) -> None:
        self.go(row=int(row), level="Case")

    def telling_row(self) -> int | None:
        if self.sample is None:
            return None
        j = list(self.sample.result.features).index(self.feature)
        return int(self.sample.rows[int(np.argmax(np.abs(self.sample.result.values[:, j])))])

    def open_telling_example(self) -> None:
        row = self.telling_row()
        if row is not None:
            self.open_case(row)
