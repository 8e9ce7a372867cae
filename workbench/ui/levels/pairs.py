"""Pairs: pair matrices (interaction strength H, SHAP interaction strength, feature association)
reordered by hierarchical clustering into blocks, the tree at the side, blocks outlined; a cell
opens the pair map (2D partial dependence) and the pair scatter."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import QRectF
from PySide6.QtWidgets import (
    QComboBox,
    QGraphicsRectItem,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QVBoxLayout,
)

from workbench.ui.levels.base import Level, register_level
from workbench.ui.plotting import (
    TitledPlot,
    category_ticks,
    diverging_map,
    message_item,
    point_under,
    sequential_map,
    thin_indices,
    value_colours,
)

KINDS = {
    "h": "Interaction strength (Friedman's H)",
    "h_strength": "Interaction strength in output units (unnormalised H)",
    "shap": "SHAP interaction strength (tree models)",
    "association": "Feature association (signed)",
}

SCALE_LABELS = {
    "h": "Friedman's H of the pair (0: no interaction)",
    "h_strength": "rms of the pair's interaction part ({units})",
    "shap": "mean |SHAP interaction value| ({units})",
    "association": "association: −1 opposite, 0 none, +1 together",
}
NOT_COMPUTED = "#D9D9D9"


@register_level
class PairsLevel(Level):
    name, order = "Pairs", 50
    summary = "Pair matrices ordered into blocks; a cell opens the pair map"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Pairs</b>")
        self.kind = QComboBox()
        for key, text in KINDS.items():
            self.kind.addItem(text, key)
        top = QHBoxLayout()
        top.addWidget(self.heading, 1)
        top.addWidget(QLabel("Matrix:"))
        top.addWidget(self.kind)
        self.matrix_plot = TitledPlot("Pair matrix", "", "")
        self.map_plot = TitledPlot("Pair map", "", "")
        self.pair_scatter = TitledPlot("Pair scatter", "", "")
        self.matrix_plot.plot.invertY(True)
        self.matrix_plot.grid.hide()
        self.matrix_plot.plot.setAspectLocked(True)
        grid = QGridLayout()
        grid.addWidget(self.matrix_plot, 0, 0, 2, 1)
        grid.addWidget(self.map_plot, 0, 1)
        grid.addWidget(self.pair_scatter, 1, 1)
        # The matrix is as wide as it is tall (square cells), so it gets the larger share.
        grid.setColumnStretch(0, 5)
        grid.setColumnStretch(1, 3)
        self.note = QLabel("Hover a cell for its value; click it to open the pair map and pair "
                           "scatter. Grey: not computed. Outlined: blocks of associated features "
                           "(association ≥ 0.5); at the right, the clustering tree of the "
                           "association (dashed: the block cut).")
        self.note.setWordWrap(True)
        self.note.setStyleSheet("color: #555;")
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addLayout(grid, 1)
        layout.addWidget(self.note)
        self.kind.currentIndexChanged.connect(lambda _: self._draw_matrix())
        self.matrix_plot.plot_widget.scene().sigMouseClicked.connect(self._clicked)
        self.matrix_plot.on_hover(self._hover)
        self.map_plot.on_hover(self._hover_map)
        self.pair_scatter.on_hover(self._hover_scatter)
        self.scatter_item = None
        self.colorbar = None
        self._reset()

    def _reset(self) -> None:
        self.assoc = self.clustering = self.h = self.shap = None
        self.order: list[str] = []
        self.shown: np.ndarray | None = None
        self.errors: dict[str, str] = {}
        self.pair_map = None
        self.sample = None
        self.scatter_item = None

    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.segment, s.pair)

    def render(self) -> None:
        ws, s = self.ctx.workspace, self.state
        previous = (self.assoc, self.clustering, self.h, self.shap, self._matrix_key) \
            if getattr(self, "_matrix_key", None) == (ws.generation, s.model, s.segment) else None
        self._reset()
        self._matrix_key = (ws.generation, s.model, s.segment)
        if previous is not None:  # only the pair moved: keep the matrices
            self.assoc, self.clustering, self.h, self.shap, _ = previous
        slot = ws.slot(s.model)
        self.heading.setText(f"<b>Pairs</b> — model {s.model}" + (f" ({slot.name})" if slot else ""))
        rel = self.relevant()
        r = self.ctx.results
        later = self.arrival  # drawn from the draw queue, one plot per event-loop turn
        if previous is None:
            message_item(self.matrix_plot.plot, "Computing…")
            r.associations(s.model, s, later(self._assoc_arrived),
                           later(lambda e: self._failed("association", e)), rel)
            r.interactions(s.model, s, later(self._h_arrived),
                           later(lambda e: self._failed("h", e)), rel)
            r.shap_interactions(s.model, s, later(self._shap_arrived),
                                later(lambda e: self._failed("shap", e)), rel)
        else:
            self._draw_matrix()
        if s.pair is None:
            message_item(self.map_plot.plot, "Click a cell of the matrix")
            message_item(self.pair_scatter.plot, "")
            return
        message_item(self.map_plot.plot, "Computing the pair map…")
        message_item(self.pair_scatter.plot, "Computing attributions…")
        r.pair_map(s.model, s, s.pair, later(self._map_arrived),
                   later(lambda e: message_item(self.map_plot.plot, str(e))), rel)
        r.sample_attributions(s.model, s, later(self._sample_arrived),
                              later(lambda e: message_item(self.pair_scatter.plot, str(e))), rel)

    # ---- arrivals --------------------------------------------------------------------------------------
    def _failed(self, kind: str, exc) -> None:
        self.errors[kind] = str(exc)
        self._draw_matrix()

    def _assoc_arrived(self, result) -> None:
        self.assoc, self.clustering = result
        self._draw_matrix()

    def _h_arrived(self, sampled) -> None:
        self.h = sampled.result
        self._draw_matrix()

    def _shap_arrived(self, sampled) -> None:
        self.shap = sampled.result
        self._draw_matrix()

    # ---- the matrix ----------------------------------------------------------------------------------
    def current_kind(self) -> str:
        return self.kind.currentData()

    def _matrix_for(self, kind: str):
        """(matrix in clustering order, signed?, units) or None while it is not there."""
        if self.clustering is None:
            return None
        order = list(self.clustering.order)
        if kind == "association":
            feats, m, signed = list(self.assoc.features), np.asarray(self.assoc.matrix, float), True
        elif kind == "h" and self.h is not None:
            feats, m, signed = list(self.h.features), np.asarray(self.h.h_pairs, float), False
        elif kind == "h_strength" and self.h is not None:
            feats, m, signed = list(self.h.features), np.asarray(self.h.pair_strength, float), False
        elif kind == "shap" and self.shap is not None:
            feats = list(self.shap.features)
            m, signed = np.asarray(getattr(self.shap, "strength", getattr(self.shap, "matrix", None)), float), False
        else:
            return None
        pos = [feats.index(f) if f in feats else -1 for f in order]
        out = np.full((len(order), len(order)), np.nan)
        for a, i in enumerate(pos):
            for b, j in enumerate(pos):
                if i >= 0 and j >= 0:
                    out[a, b] = m[i, j]
        return out, signed

    def _draw_matrix(self) -> None:
        plot = self.matrix_plot.plot
        kind = self.current_kind()
        got = self._matrix_for(kind)
        if got is None:
            source = "h" if kind == "h_strength" else kind  # both come from the H job
            text = self.errors.get(source) or self.errors.get("association") or "Computing…"
            message_item(plot, text)
            self.shown = None
            self.matrix_plot.set_text(KINDS[kind], "", "")
            return
        matrix, signed = got
        self.order = list(self.clustering.order)
        self.shown = matrix
        plot.clear()
        plot.enableAutoRange()
        p = len(self.order)
        cmap = diverging_map() if signed else sequential_map()
        # Strengths: the scale reaches at least 0.1, so numerical noise (an additive model's
        # H of 1e-9) shows as the nothing it is.
        top = float(np.nanmax(matrix)) if np.isfinite(matrix).any() else 1.0
        levels = (-1.0, 1.0) if signed else (0.0, max(top, 0.1))
        clipped = kind == "h" and top > 1.0
        if clipped:
            # H above 1 comes from a pair whose joint effect is tiny next to its parts (ratio of
            # two small numbers); a scale reaching it would darken every meaningful cell.
            levels = (0.0, 1.0)
        shown = np.where(np.isfinite(matrix), matrix, np.nan)
        if not signed:
            np.fill_diagonal(shown, np.nan)
        # Grey under the image: cells left out (the diagonal, pairs not screened for H) read
        # as "not computed" rather than as a pale value.
        backdrop = QGraphicsRectItem(QRectF(-0.5, -0.5, p, p))
        backdrop.setBrush(pg.mkBrush(NOT_COMPUTED))
        backdrop.setPen(pg.mkPen(None))
        backdrop.setZValue(-1)
        plot.addItem(backdrop)
        image = pg.ImageItem(shown.T, axisOrder="col-major")
        image.setLookupTable(cmap.getLookupTable(nPts=256))
        image.setLevels(levels)
        image.setRect(QRectF(-0.5, -0.5, p, p))
        plot.addItem(image)
        self.image = image
        # Names on the left, numbers along the bottom (long names would collide there).
        plot.getAxis("left").setTicks([[(i, f"{f}  {i + 1}") for i, f in enumerate(self.order)]])
        # Every number while they fit; with many features every 2nd or 5th (hover says all).
        every = 1 if p <= 16 else 2 if p <= 30 else 5
        plot.getAxis("bottom").setTicks([[(i, str(i + 1)) for i in range(p) if (i + 1) % every == 0
                                          or i == 0]])
        self._draw_tree(plot, p)
        for block in self.clustering.blocks:
            idx = [self.order.index(f) for f in block]
            lo, hi = min(idx), max(idx)
            rect = QGraphicsRectItem(QRectF(lo - 0.5, lo - 0.5, hi - lo + 1, hi - lo + 1))
            rect.setPen(pg.mkPen("#000", width=2.5))
            plot.addItem(rect)
        s = self.state
        if s.pair is not None and all(f in self.order for f in s.pair):
            i, j = self.order.index(s.pair[0]), self.order.index(s.pair[1])
            for a, b in ((i, j), (j, i)):
                mark = QGraphicsRectItem(QRectF(b - 0.5, a - 0.5, 1, 1))
                mark.setPen(pg.mkPen("#D55E00", width=2))
                plot.addItem(mark)
        # one call: with the aspect locked, the view then widens whichever range is short
        # (two calls kept the last and cut the other, hiding the first columns)
        plot.setRange(xRange=(-0.5, p - 0.5 + self.tree_width(p) + 0.4), yRange=(-0.5, p - 0.5),
                      padding=0.01)
        if self.colorbar is not None:
            plot.layout.removeItem(self.colorbar)
            self.colorbar.setParentItem(None)
            self.matrix_plot.plot_widget.scene().removeItem(self.colorbar)
        # Under the matrix, not beside it: the matrix is short of width, not of height.
        self.colorbar = pg.ColorBarItem(values=levels, colorMap=cmap, interactive=False, width=12,
                                        orientation="horizontal", label=self._scale_label(kind))
        # Values as they are (0.05, not "50 (x0.001)"): pyqtgraph scales an unlabelled axis
        # below 1 even with the prefix switched off, unless no range allows it.
        self.colorbar.axis.setSIPrefixEnableRanges(())
        self.colorbar.axis.enableAutoSIPrefix(False)
        self.colorbar.setImageItem(image, insert_in=plot)
        scale = "signed: −1 … +1, diverging scale" if signed else "strength, sequential scale"
        short = extra = ""
        if kind in ("h", "h_strength") and self.h is not None:
            short = f" among the {len(self.h.screened)} strongest ({self.h.sample} rows)"
            extra = f"; pairs computed among the {len(self.h.screened)} strongest features"
            if clipped:
                extra += f"; H above 1 (up to {top:.3g}, tiny joint effects) at the top colour"
                short += "; H above 1 at the top colour"
        self.matrix_plot.set_text(f"{KINDS[kind]}{short}", "", "",
                                  tip=f"{KINDS[kind]}: {scale}{extra}; grey: not computed.")

    def _scale_label(self, kind: str) -> str:
        adapter = self.ctx.workspace.adapter(self.state.model)
        return SCALE_LABELS[kind].format(units=adapter.output_units if adapter else "model output")

    @staticmethod
    def tree_width(p: int) -> float:
        return min(max(p * 0.22, 1.5), 3.0)

    def _draw_tree(self, plot, p: int) -> None:
        """The clustering tree to the right of the matrix, its leaves level with the rows."""
        c = self.clustering
        x0, width = p - 0.5 + 0.3, self.tree_width(p)
        pen = pg.mkPen("#333", width=1.3)
        for xs, ds in zip(np.asarray(c.icoord), np.asarray(c.dcoord), strict=True):
            plot.addItem(pg.PlotDataItem(x0 + np.asarray(ds) * width, (np.asarray(xs) - 5.0) / 10.0,
                                         pen=pen))
        cut = x0 + (1 - c.threshold) * width
        plot.addItem(pg.PlotDataItem([cut, cut], [-0.5, p - 0.5],
                                     pen=pg.mkPen("#888", style=pg.QtCore.Qt.PenStyle.DashLine)))

    # ---- hover and clicks ------------------------------------------------------------------------------
    def _cell(self, x: float, y: float) -> tuple[int, int] | None:
        if self.shown is None:
            return None
        i, j = int(round(y)), int(round(x))
        p = len(self.order)
        return (i, j) if 0 <= i < p and 0 <= j < p else None

    def _hover(self, x, y) -> str | None:
        cell = self._cell(x, y)
        if cell is None:
            return None
        i, j = cell
        v = self.shown[i, j]
        text = "not computed" if not np.isfinite(v) else f"{v:+.3f}" if self.current_kind() == "association" else f"{v:.3f}"
        kind = ""
        if self.current_kind() == "association" and self.assoc is not None:
            a, b = list(self.assoc.features).index(self.order[i]), list(self.assoc.features).index(self.order[j])
            kind = f" ({self.assoc.kind[a, b]})"
        return f"{self.order[i]} × {self.order[j]}: {text}{kind}"

    def _clicked(self, event) -> None:
        point = self.matrix_plot.plot.vb.mapSceneToView(event.scenePos())
        self.click_cell(point.x(), point.y())

    def click_cell(self, x: float, y: float) -> None:
        cell = self._cell(x, y)
        if cell is not None and cell[0] != cell[1]:
            self.go(pair=(self.order[cell[0]], self.order[cell[1]]))

    # ---- pair map and pair scatter --------------------------------------------------------------------
    def _axis_positions(self, grid, kind: str) -> tuple[np.ndarray, list | None]:
        if kind == "categorical":
            return np.arange(len(grid), dtype=float), category_ticks(grid)
        return np.asarray(grid, float), None

    def _map_arrived(self, sampled) -> None:
        pm = sampled.result
        self.pair_map = pm
        plot = self.map_plot.plot
        plot.clear()
        plot.enableAutoRange()
        ga, ta = self._axis_positions(pm.grid_a, pm.kind_a)
        gb, tb = self._axis_positions(pm.grid_b, pm.kind_b)
        # cells centred on grid values: edges halfway between neighbours
        def edges(g):
            if len(g) == 1:
                return np.array([g[0] - 0.5, g[0] + 0.5])
            mid = (g[1:] + g[:-1]) / 2
            return np.concatenate([[g[0] - (mid[0] - g[0])], mid, [g[-1] + (g[-1] - mid[-1])]])

        ea, eb = edges(ga), edges(gb)
        mesh = pg.PColorMeshItem(*np.meshgrid(ea, eb, indexing="ij"), np.asarray(pm.values, float),
                                 colorMap=sequential_map())
        plot.addItem(mesh)
        plot.getAxis("bottom").setTicks([ta] if ta else None)
        plot.getAxis("left").setTicks([tb] if tb else None)
        plot.setXRange(ea[0], ea[-1], padding=0)
        plot.setYRange(eb[0], eb[-1], padding=0)
        self.map_axes = (ga, gb)
        self.map_plot.set_text(f"Pair map: mean {pm.units} ({pm.rows_used} rows; dark low, "
                               "yellow high)", pm.a, pm.b,
                               tip=f"Mean {pm.units} over {pm.a} and {pm.b}, {pm.rows_used} rows.")

    def _hover_map(self, x, y) -> str | None:
        if self.pair_map is None:
            return None
        ga, gb = self.map_axes
        i, j = int(np.argmin(np.abs(ga - x))), int(np.argmin(np.abs(gb - y)))
        pm = self.pair_map
        return f"{pm.a} = {pm.grid_a[i]}, {pm.b} = {pm.grid_b[j]}: {pm.values[i, j]:.4g} ({pm.units})"

    def _sample_arrived(self, sampled) -> None:
        self.sample = sampled
        a, b = self.state.pair
        att, rows = sampled.result, sampled.rows
        feats = list(att.features)
        if a not in feats or b not in feats:
            message_item(self.pair_scatter.plot, "These features are not inputs of this model")
            return
        keep = thin_indices(len(rows), seed=self.ctx.workspace.settings.seed)
        rows = rows[keep]
        joint = att.values[keep, feats.index(a)] + att.values[keep, feats.index(b)]
        frame = self.ctx.workspace.frame
        xa, ta = self._scatter_axis(frame[a], rows, 0)
        xb, tb = self._scatter_axis(frame[b], rows, 1)
        plot = self.pair_scatter.plot
        plot.clear()
        plot.enableAutoRange()
        lim = float(np.nanmax(np.abs(joint))) or 1.0
        brushes = value_colours(joint, diverging_map(), limits=(-lim, lim))
        # A faint outline keeps points near zero (pale in the middle of the map) visible.
        item = pg.ScatterPlotItem(xa, xb, size=7, brush=brushes, pen=pg.mkPen(0, 0, 0, 70),
                                  data=rows.tolist())
        item.sigClicked.connect(lambda _i, pts, _e=None: len(pts) and self.go(row=int(pts[0].data()),
                                                                             level="Case"))
        plot.addItem(item)
        self.scatter_item, self.scatter_joint = item, dict(zip(rows.tolist(), joint.tolist(), strict=True))
        plot.getAxis("bottom").setTicks([ta] if ta else None)
        plot.getAxis("left").setTicks([tb] if tb else None)
        units = self.ctx.workspace.adapter(self.state.model).output_units
        self.pair_scatter.set_text(f"Pair scatter: joint attribution (blue lowers, yellow "
                                   f"raises; ±{lim:.2g} {units})", a, b,
                                   tip=f"Each row coloured by the joint attribution of {a} and "
                                       f"{b}.")

    def _hover_scatter(self, x, y) -> str | None:
        point = point_under(self.scatter_item, x, y)
        if point is None:
            return None
        row = int(point.data())
        return f"row {row}: joint attribution {self.scatter_joint[row]:+.4g} — click to open this Case"

    def _scatter_axis(self, series: pd.Series, rows: np.ndarray, seed: int):
        values = series.to_numpy()[rows]
        if pd.api.types.is_numeric_dtype(series):
            return pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(float), None
        levels = sorted(map(str, pd.unique(series.dropna())))
        pos = np.array([levels.index(str(v)) if str(v) in levels else np.nan for v in values], float)
        pos = pos + np.random.default_rng(seed).uniform(-0.25, 0.25, len(pos))
        return pos, category_ticks(levels)
