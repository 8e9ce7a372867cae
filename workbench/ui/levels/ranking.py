"""Ranking: every feature's permutation importance (with its spread over repeats) beside its mean
absolute attribution, and the importance of blocks of associated features permuted together."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtWidgets import QHBoxLayout, QLabel, QVBoxLayout, QWidget

from workbench.ui.levels.base import Level, register_level
from workbench.ui.levels.portfolio import exposure_column
from workbench.ui.plotting import CURVE, SECOND, TitledPlot, colour, message_item

# The metrics' names as the trade writes them (the engine keeps short keys).
METRIC_LABELS = {"auc": "AUC", "log_loss": "log loss", "brier": "Brier score", "rmse": "RMSE",
                 "mae": "MAE", "poisson_deviance": "Poisson deviance"}


MAX_BARS = 20  # features drawn per panel: more labels than this collide at 1440 x 900
BLOCK_NAMES = 3  # features named in a block's label; the rest are counted (all in the hover)


def metric_label(name: str) -> str:
    return METRIC_LABELS.get(name, name.replace("_", " "))


def _horizontal_bars(plot, values, labels, brush, errors=None) -> None:
    plot.clear()
    plot.enableAutoRange()
    n = len(values)
    ys = np.arange(n)
    values = np.nan_to_num(np.asarray(values, float))
    plot.addItem(pg.BarGraphItem(x0=np.minimum(values, 0), width=np.abs(values), y=ys, height=0.66,
                                 brush=brush, pen=pg.mkPen(None)))
    if errors is not None:
        plot.addItem(pg.ErrorBarItem(x=values, y=ys, left=np.asarray(errors), right=np.asarray(errors),
                                     beam=0.25, pen=pg.mkPen("#222", width=1.2)))
    plot.getAxis("left").setTicks([list(zip(ys, labels, strict=True))])
    plot.setYRange(-0.6, n - 0.4, padding=0)
    hi = float(np.nanmax(values + (np.asarray(errors) if errors is not None else 0))) if n else 1.0
    lo = float(np.nanmin(np.minimum(values, 0))) if n else 0.0
    plot.setXRange(lo - 0.02 * (hi - lo or 1), hi * 1.08 if hi > 0 else 1.0, padding=0)


def _top_note(n: int) -> str:
    return f"; the top {MAX_BARS} of {n} shown" if n > MAX_BARS else ""


def _block_label(features) -> str:
    features = list(features)
    if len(features) <= BLOCK_NAMES:
        return " + ".join(features)
    return " + ".join(features[:BLOCK_NAMES]) + f" + {len(features) - BLOCK_NAMES} more"


@register_level
class RankingLevel(Level):
    name, order = "Ranking", 40
    summary = "Every feature: permutation importance, mean absolute attribution, grouped importance"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Ranking</b>")
        self.importance_plot = TitledPlot("Permutation importance", "", "")
        self.attribution_plot = TitledPlot("Mean absolute attribution", "", "")
        self.group_plot = TitledPlot("Blocks of associated features permuted together", "", "")
        for p in (self.importance_plot, self.attribution_plot, self.group_plot):
            p.plot.invertY(True)
        plots = QHBoxLayout()
        plots.addWidget(self.importance_plot, 1)
        plots.addWidget(self.attribution_plot, 1)
        self.note = QLabel("Click a bar to open that feature's Effect. Error bars: ± one standard "
                           "deviation over the permutation repeats.")
        self.note.setStyleSheet("color: #555;")
        self.note.setWordWrap(True)
        layout = QVBoxLayout(self)
        layout.addWidget(self.heading)
        top = QWidget()
        top.setLayout(plots)
        layout.addWidget(top, 3)
        layout.addWidget(self.group_plot, 1)
        layout.addWidget(self.note)
        self.order: list[str] = []
        self.attribution_order: list[str] = []
        self.importance = None
        self.attributions = None
        self.groups: list[list[str]] = []
        for p in (self.importance_plot, self.attribution_plot):
            p.plot_widget.scene().sigMouseClicked.connect(lambda ev, p=p: self._clicked(p, ev))
        self.importance_plot.on_hover(lambda x, y: self._hover(self.order, y))
        self.attribution_plot.on_hover(lambda x, y: self._hover(self.attribution_order, y))
        self.group_plot.on_hover(self._hover_group)

    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.segment, exposure_column(self.ctx))

    def render(self) -> None:
        ws, s = self.ctx.workspace, self.state
        self.importance = self.attributions = None
        self.order, self.attribution_order, self.groups = [], [], []
        slot = ws.slot(s.model)
        self.heading.setText(f"<b>Ranking</b> — model {s.model}" + (f" ({slot.name})" if slot else "")
                             + f", {len(self.ctx.results.segment_rows(s)) if ws.frame is not None else 0:,} rows in the segment")
        for p, text in ((self.importance_plot, "Computing permutation importance…"),
                        (self.attribution_plot, "Computing attributions…"),
                        (self.group_plot, "Computing feature association…")):
            message_item(p.plot, text)
        relevant = self.relevant()
        later = self.arrival  # drawn from the draw queue, one panel per event-loop turn
        self.ctx.results.sample_attributions(
            s.model, s, later(self._attributions_arrived),
            later(lambda e: self._failed(self.attribution_plot, e)), relevant)
        self.ctx.results.associations(s.model, s, self._associations_arrived,
                                      self._associations_failed, relevant)

    # ---- arrivals -------------------------------------------------------------------------------
    def _failed(self, titled: TitledPlot, exc) -> None:
        message_item(titled.plot, str(exc))

    def _associations_arrived(self, result) -> None:
        _assoc, clustering = result
        self.groups = [list(b) for b in clustering.blocks]
        self._request_importance(self.groups,
                                 lambda e: (self._failed(self.importance_plot, e),
                                            self._failed(self.group_plot, e)))

    def _associations_failed(self, exc) -> None:
        self._failed(self.group_plot, exc)
        self._request_importance([], lambda e: self._failed(self.importance_plot, e))

    def _request_importance(self, groups, on_error) -> None:
        """A frequency model with an exposure chosen in the Portfolio: the deviance of observed
        frequencies weighted by that exposure, as its summary figures are."""
        adapter = self.ctx.workspace.adapter(self.state.model)
        column = exposure_column(self.ctx)
        weighted = adapter is not None and adapter.task == "count" and column is not None
        self.ctx.results.importance(self.state.model, self.state, groups,
                                    self.arrival(self._importance_arrived),
                                    self.arrival(on_error), self.relevant(),
                                    exposure=column if weighted else None)

    def _importance_arrived(self, sampled) -> None:
        self.importance = sampled.result
        self._draw_importance()
        self.draws.later(lambda: self._draw_groups(self.importance))  # next turn: Qt paints

    def _attributions_arrived(self, sampled) -> None:
        self.attributions = sampled.result
        self._draw_attributions()

    # ---- drawing ------------------------------------------------------------------------------
    # Each panel sorted by its own figure, largest first, with its own feature labels; each
    # drawn on its own (one panel per turn of the event loop).
    def _draw_importance(self) -> None:
        imp = self.importance
        if imp is not None:
            features = list(imp.features)
            ranked = np.argsort(-np.nan_to_num(imp.mean, nan=-np.inf), kind="stable")
            self.order = [features[i] for i in ranked]
            means, spreads = np.asarray(imp.mean)[ranked], np.asarray(imp.spread)[ranked]
            shown = slice(0, MAX_BARS)
            _horizontal_bars(self.importance_plot.plot, means[shown], self.order[shown],
                             colour(CURVE, 220), spreads[shown])
            change = "drop" if imp.greater_is_better else "rise"
            metric = metric_label(imp.metric)
            weighted = ", weighted by exposure" if getattr(imp, "exposure", False) else ""
            self.importance_plot.set_text(
                f"Permutation importance: {change} in {metric} when a feature is shuffled "
                f"({imp.repeats} repeats, {imp.rows_used:,} rows{weighted}"
                f"{_top_note(len(self.order))})",
                f"{change} in {metric} (baseline {imp.baseline:.4g})",
                "feature (most important first)")

    def _draw_attributions(self) -> None:
        adapter = self.ctx.workspace.adapter(self.state.model)
        att = self.attributions
        if att is not None:
            mean_abs = np.abs(np.asarray(att.values, float)).mean(axis=0)
            ranked = np.argsort(-mean_abs, kind="stable")
            self.attribution_order = [att.features[i] for i in ranked]
            _horizontal_bars(self.attribution_plot.plot, mean_abs[ranked][:MAX_BARS],
                             self.attribution_order[:MAX_BARS], colour(SECOND, 220))
            units = adapter.output_units if adapter else ""
            self.attribution_plot.set_text(
                f"Mean absolute attribution: average size of a feature's contribution "
                f"({att.method}, {att.n_rows:,} rows{_top_note(len(self.attribution_order))})",
                f"mean |contribution| ({units})", "feature (largest first)")

    def _draw_groups(self, imp) -> None:
        groups = list(getattr(imp, "groups", []) or [])
        if not groups:
            message_item(self.group_plot.plot, "No blocks of associated features (association ≥ 0.5)"
                         if self.groups == [] else "No grouped importance in this result")
            self.group_labels = []
            self._fit_group_plot(1)
            return
        labels = [_block_label(g.features) for g in groups]
        self.group_labels = [" + ".join(g.features) for g in groups]
        self._fit_group_plot(len(groups))
        self.group_values = [(g.mean, g.spread) for g in groups]
        _horizontal_bars(self.group_plot.plot, [g.mean for g in groups], labels, colour(CURVE, 160),
                         [g.spread for g in groups])
        change = "drop" if imp.greater_is_better else "rise"
        self.group_plot.set_text("Blocks of associated features permuted together "
                                 "(their shared importance, which single permutations split)",
                                 f"{change} in {metric_label(imp.metric)} "
                                 f"(baseline {imp.baseline:.4g})", "block")

    def _fit_group_plot(self, bars: int) -> None:
        """As tall as its bars need, so the feature panels above keep the height for labels."""
        self.group_plot.setMaximumHeight(110 + 42 * min(bars, 6))

    # ---- hover and clicks -------------------------------------------------------------------------
    @staticmethod
    def _index(order: list[str], y: float) -> int | None:
        i = int(round(y))
        return i if 0 <= i < len(order) else None

    def _hover(self, order: list[str], y: float) -> str | None:
        i = self._index(order, y)
        if i is None:
            return None
        f = order[i]
        parts = [f]
        if self.importance is not None and f in list(self.importance.features):
            j = list(self.importance.features).index(f)
            parts.append(f"importance {self.importance.mean[j]:.4g} ± {self.importance.spread[j]:.2g} "
                         f"(rank {self.order.index(f) + 1})")
        if self.attributions is not None and f in self.attributions.features:
            j = list(self.attributions.features).index(f)
            parts.append(f"mean |attribution| {np.abs(self.attributions.values[:, j]).mean():.4g} "
                         f"(rank {self.attribution_order.index(f) + 1})")
        return " · ".join(parts)

    def _hover_group(self, x: float, y: float) -> str | None:
        labels = getattr(self, "group_labels", [])
        i = int(round(y))
        if not 0 <= i < len(labels):
            return None
        mean, spread = self.group_values[i]
        return f"{labels[i]}: {mean:.4g} ± {spread:.2g}"

    def _clicked(self, titled: TitledPlot, event) -> None:
        point = titled.plot.vb.mapSceneToView(event.scenePos())
        self.click_bar_at(point.y(), panel="attribution" if titled is self.attribution_plot
                          else "importance")

    def click_bar_at(self, y: float, panel: str = "importance") -> None:
        order = self.attribution_order if panel == "attribution" else self.order
        i = self._index(order, y)
        if i is not None:
            self.open_effect(order[i])

    def open_effect(self, feature: str) -> None:
        self.go(feature=feature, level="Effect")
