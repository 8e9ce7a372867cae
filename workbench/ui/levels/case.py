"""Case: one row's values (editable as trial values), its score and decision, contribution bars.

The contribution bars are drawn our own way: horizontal bars sorted by size (vermillion raises
the score, bluish green lowers it) and beside them the running total from the base value to
this case's output, with the cutoff marked on the same scale.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor, QFontMetrics
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSpinBox,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from workbench.engine.reasons import ReasonTemplates, side_phrases
from workbench.ui.context import project_of
from workbench.ui.levels.base import Level, register_level
from workbench.ui.plotting import LOWERS, NEUTRAL, RAISES, TitledPlot, colour, message_item
from workbench.ui.reasons_panel import (
    ReasonsPanel,
    load_trial_values,
    scrolled,
    show_for_case_level,
)
from workbench.ui.results import values_digest
from workbench.ui.threads import single_threaded

TOP_BARS = 12
LABEL_CHARS = 26
REASONS_WIDTH = 310
CASE_CAUTION = (
    "<b>Read with care.</b> Contribution bars describe how this model arrived at its score for "
    "these values: they describe the model, not the world, and not the person behind the row. "
    "Decisions about people must be reviewed by a person and by compliance under local law. "
    "This is not legal advice."
)


def _shown(value) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return "(missing)"
    if isinstance(value, float | np.floating):
        return f"{value:.6g}"
    return str(value)


def contribution_order(values: np.ndarray, top: int = TOP_BARS) -> tuple[np.ndarray, float, int]:
    """Indices of the ``top`` largest |values| (largest first), the sum and count of the rest."""
    order = np.argsort(-np.abs(values), kind="stable")
    kept, rest = order[:top], order[top:]
    return kept, float(values[rest].sum()) if len(rest) else 0.0, len(rest)


@register_level
class CaseLevel(Level):
    name, order = "Case", 20
    summary = "One row: trial values, score, decision, contribution bars"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Case</b>")
        self.row_box = QSpinBox()
        self.row_box.setRange(0, 0)
        self.row_box.setPrefix("row ")
        self.row_box.setKeyboardTracking(False)
        self.reset = QPushButton("Back to the values in the data")
        top = QHBoxLayout()
        top.addWidget(self.heading, 1)
        top.addWidget(self.row_box)
        top.addWidget(self.reset)

        self.table = QTableWidget(0, 3)
        self.table.setHorizontalHeaderLabels(["feature", "value in data", "trial value"])
        # The name column as wide as the longest name; the two value columns share the rest.
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        for column in (1, 2):
            header.setSectionResizeMode(column, QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().setVisible(False)
        self.table_note = QLabel("Edit the trial values: the case is re-scored and re-explained.")
        self.table_note.setWordWrap(True)
        self.table_note.setStyleSheet("color: #555;")
        left = QWidget()
        self.table_pane = left
        left_layout = QVBoxLayout(left)
        left_layout.setContentsMargins(0, 0, 0, 0)
        left_layout.addWidget(self.table, 1)
        left_layout.addWidget(self.table_note)

        self.score_label = QLabel("")
        self.score_label.setWordWrap(True)
        self.score_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.bars = TitledPlot("Contribution bars", "contribution", "")
        self.running = TitledPlot("Running total from the base value", "", "")
        self.bars.plot.invertY(True)
        self.running.plot.invertY(True)
        self.running.plot.setYLink(self.bars.plot)
        self.running.plot.getAxis("left").setStyle(showValues=False)
        self.running.plot.getAxis("left").setWidth(8)
        plots = QWidget()
        plots_layout = QHBoxLayout(plots)
        plots_layout.setContentsMargins(0, 0, 0, 0)
        # the bars' labels take much of their width: the running total gets what is left
        plots_layout.addWidget(self.bars, 3)
        plots_layout.addWidget(self.running, 1)
        self.running.setMinimumWidth(140)
        self.bar_note = QLabel("Click a bar to see that feature's Effect, with this case marked.")
        self.bar_note.setStyleSheet("color: #555;")
        self.caution = QLabel(CASE_CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("background: #FFF8E1; padding: 6px; border: 1px solid #E0C070;")
        right = QWidget()
        right_layout = QVBoxLayout(right)
        right_layout.setContentsMargins(0, 0, 0, 0)
        right_layout.addWidget(self.score_label)
        right_layout.addWidget(plots, 1)
        right_layout.addWidget(self.bar_note)
        right_layout.addWidget(self.caution)

        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(right)
        self.reasons_panel = ReasonsPanel(ctx.runner)  # reason statements, nearest flip, similar rows
        self.reasons_panel.trial_requested.connect(lambda values: load_trial_values(self.table, values))
        self.reasons_panel.row_requested.connect(lambda row: self.go(row=int(row)))
        # the analyst's wording and not-allowed marks are kept in the project file
        self.reasons_panel.templates_changed.connect(self._keep_templates)
        self.reasons_panel.not_allowed_changed.connect(self._keep_not_allowed)
        self._applied_project = None
        split.addWidget(scrolled(self.reasons_panel))
        split.setSizes([330, 900, 380])
        self.split = split
        self._shared_width = False
        split.setStretchFactor(1, 1)  # a wider window widens the bars first
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addWidget(split, 1)

        self.row_box.valueChanged.connect(self._row_typed)
        self.reset.clicked.connect(self.reset_trial)
        self.table.itemChanged.connect(self._item_edited)
        self.bars.plot_widget.scene().sigMouseClicked.connect(
            lambda ev: self._plot_clicked(self.bars, ev))
        self.running.plot_widget.scene().sigMouseClicked.connect(
            lambda ev: self._plot_clicked(self.running, ev))
        self.bars.on_hover(self._hover_bar)
        self.running.on_hover(self._hover_running)

        self.trial: dict[str, object] = {}
        self.bar_features: list[str] = []
        self.bar_values: np.ndarray = np.zeros(0)
        self.contributions = None
        self.trial_score: float | None = None
        self.data_score: float | None = None
        self._filling = False
        self._trial_cache: tuple | None = None
        self._bar_items: dict = {}  # drawn once per plot, then updated (an edit redraws nothing)
        self._running_items: dict = {}

    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.row)

    # ---- rendering --------------------------------------------------------------------------------
    def _keep_templates(self, templates) -> None:
        project_of(self.ctx).reason_templates = templates.to_dict()

    def _keep_not_allowed(self, features) -> None:
        project_of(self.ctx).settings["not_allowed"] = list(features)

    def _apply_project_wording(self) -> None:
        """Take wording and not-allowed marks from a project opened or made since last time."""
        project = getattr(self.ctx, "project", None)
        if project is None or project is self._applied_project:
            return
        self._applied_project = project
        if project.reason_templates:
            self.reasons_panel.set_templates(ReasonTemplates.from_dict(project.reason_templates))
        if project.settings.get("not_allowed"):
            self.reasons_panel.set_not_allowed(project.settings["not_allowed"])

    def render(self) -> None:
        self._apply_project_wording()
        ws, state = self.ctx.workspace, self.state
        self.trial = {}
        self.contributions = None
        adapter = ws.adapter(state.model)
        self.row_box.blockSignals(True)
        self.row_box.setRange(0, max(ws.n_rows - 1, 0))
        if state.row is not None:
            self.row_box.setValue(state.row)
        self.row_box.blockSignals(False)
        if ws.frame is None or adapter is None or state.row is None or state.row >= ws.n_rows:
            what = ("open a model and a data file" if ws.frame is None or adapter is None
                    else "double-click a row in the Portfolio, or choose a row number")
            self.heading.setText(f"<b>Case</b> — {what}")
            self.table.setRowCount(0)
            self.score_label.setText("")
            message_item(self.bars.plot, "No case chosen")
            self.running.plot.clear()
            return
        ident = ""
        if ws.data.id_column:
            ident = f" ({ws.data.id_column} {ws.frame[ws.data.id_column].iloc[state.row]})"
        slot = ws.slot(state.model)
        self.heading.setText(f"<b>Case</b> — row {state.row}{ident}, model {state.model} ({slot.name})")
        self._fill_table(adapter)
        self.data_score = None
        # scored on the next turn of the event loop: the level is painted first, and the
        # window does not hold the switch, the table and a model call in one go
        self.score_label.setText("Scoring…")
        self.draws.later(self.rescore)

    def _original(self) -> pd.DataFrame:
        return self.ctx.workspace.frame.iloc[[self.state.row]]

    def _fill_table(self, adapter) -> None:
        self._filling = True
        original = self._original()
        columns = list(adapter.input_columns)
        cats = set(adapter.categorical_columns)
        cmap = adapter.column_map
        self.table.setRowCount(len(columns))
        for i, col in enumerate(columns):
            value = original[col].iloc[0]
            name = QTableWidgetItem(col)
            name.setFlags(name.flags() & ~Qt.ItemFlag.ItemIsEditable)
            name.setToolTip(col)
            shown = QTableWidgetItem(_shown(value))
            shown.setFlags(shown.flags() & ~Qt.ItemFlag.ItemIsEditable)
            shown.setToolTip(f"{col} in the data: {_shown(value)}")
            self.table.setItem(i, 0, name)
            self.table.setItem(i, 1, shown)
            is_text = col in cats or not pd.api.types.is_numeric_dtype(original[col])
            if is_text:
                known = list(cmap.categories.get(col, [])) if cmap is not None else []
                if not known:
                    known = sorted(map(str, self.ctx.workspace.frame[col].dropna().unique()[:60]))
                combo = QComboBox()
                combo.addItems([str(k) for k in known])
                if str(value) not in [str(k) for k in known]:
                    combo.addItem(str(value))
                combo.setCurrentText(str(value))
                combo.currentTextChanged.connect(lambda text, c=col: self.set_trial(c, text))
                self.table.setItem(i, 2, QTableWidgetItem(""))
                self.table.setCellWidget(i, 2, combo)
            else:
                self.table.removeCellWidget(i, 2)
                self.table.setItem(i, 2, QTableWidgetItem("" if pd.isna(value) else _shown(value)))
        self._filling = False
        self._fit_table_pane()

    def _fit_table_pane(self) -> None:
        """The values pane at least as wide as the names plus two short value columns."""
        self.table.resizeColumnToContents(0)
        names = self.table.columnWidth(0)
        metrics = QFontMetrics(self.table.font())
        value_room = max(metrics.horizontalAdvance("0.000000"), metrics.horizontalAdvance("trial value")) + 12
        self.table_pane.setMinimumWidth(min(names + 2 * value_room + 20, 480))
        self._share_width()

    def _share_width(self) -> None:
        """Once, when the panes first have a width: the values and reasons panes as narrow as
        they fit, the rest to the contribution bars (their labels take much of it)."""
        total = sum(self.split.sizes())
        if self._shared_width or total <= 0 or not self.isVisible():
            return  # a hidden level's splitter has no final width yet
        self._shared_width = True
        left = self.table_pane.minimumWidth()
        right = REASONS_WIDTH
        self.split.setSizes([left, max(total - left - right, 200), right])

    def _item_edited(self, item: QTableWidgetItem) -> None:
        if self._filling or item.column() != 2:
            return
        col = self.table.item(item.row(), 0).text()
        text = item.text().strip()
        try:
            value = np.nan if text == "" else float(text)
        except ValueError:
            item.setBackground(QBrush(QColor("#F8D7DA")))
            self.table_note.setText(f"'{text}' is not a number: {col} keeps its last value.")
            return
        item.setBackground(QBrush())
        self.set_trial(col, value)

    def set_trial(self, column: str, value) -> None:
        """Give one feature a trial value and re-score (the values in the data stay as they are)."""
        original = self._original()[column].iloc[0]
        same = (pd.isna(original) and pd.isna(value)) if not isinstance(value, str) else str(original) == value
        if not same and not isinstance(value, str):
            try:
                same = float(original) == float(value)
            except (TypeError, ValueError):
                same = False
        if same:
            self.trial.pop(column, None)
        else:
            self.trial[column] = value
        self._mark_edited()
        self.rescore()

    def reset_trial(self) -> None:
        if self.state.row is None or self.ctx.workspace.frame is None:
            return
        self.trial = {}
        adapter = self.ctx.workspace.adapter(self.state.model)
        if adapter is not None:
            self._fill_table(adapter)
        self.rescore()

    def _mark_edited(self) -> None:
        for i in range(self.table.rowCount()):
            col = self.table.item(i, 0).text()
            font = self.table.item(i, 0).font()
            font.setBold(col in self.trial)
            self.table.item(i, 0).setFont(font)

    def trial_frame(self) -> pd.DataFrame:
        """The row with its trial values (kept until they change: read it, do not modify it)."""
        key = (self.ctx.workspace.generation, self.state.row,
               repr(sorted((k, repr(v)) for k, v in self.trial.items())))
        if self._trial_cache is not None and self._trial_cache[0] == key:
            return self._trial_cache[1]
        frame = self._trial_frame()
        self._trial_cache = (key, frame)
        return frame

    def _trial_frame(self) -> pd.DataFrame:
        frame = self._original().copy()
        for col, value in self.trial.items():
            if isinstance(value, str):
                frame[col] = pd.Series([value], index=frame.index, dtype=frame[col].dtype
                                       if not pd.api.types.is_numeric_dtype(frame[col]) else object)
            else:
                frame[col] = frame[col].astype(float)
                frame.loc[frame.index[0], col] = value
        return frame

    # ---- score and contributions -------------------------------------------------------------
    def rescore(self) -> None:
        ws, state = self.ctx.workspace, self.state
        adapter = ws.adapter(state.model)
        frame = self.trial_frame()
        try:
            with single_threaded():
                # one row through a pipeline costs ~25 ms of the window's time: without trial
                # values the row's score in the data is the one just computed
                if self.data_score is None and self.trial:
                    self.data_score = float(adapter.response(self._original())[0])
                output = float(adapter.score(frame)[0])
                self.trial_score = float(adapter.response_from_output(np.array([output]))[0]) \
                    if adapter.output_kind != "raw score" else float(adapter.response(frame)[0])
                if self.data_score is None:
                    self.data_score = self.trial_score
        except Exception as exc:  # noqa: BLE001 - the model refusing trial values is the user's to see
            self.trial_score = None
            self.score_label.setText(f"The model could not score these values: {exc}")
            return
        self.trial_output = output
        self._show_score(adapter, output)
        digest = values_digest({"row": state.row, **{k: v for k, v in self.trial.items()}})
        self._digest = digest
        if self.contributions is None:
            message_item(self.bars.plot, "Computing contributions…")
            self.running.plot.clear()
        else:  # an edit: the bars of the last values stay until the new ones arrive
            self.bars.title_label.setText("Contribution bars: updating for the trial values…")
        key = self.view_key()
        self.ctx.results.case_attributions(
            state.model, frame, digest, self.arrival(self._show_contributions),
            self._contributions_failed,
            relevant=lambda: self.view_key() == key and self._digest == digest)

    def _show_score(self, adapter, output: float) -> None:
        ws = self.ctx.workspace
        cutoff = ws.settings.cutoff
        decision = "at or above the cutoff" if self.trial_score >= cutoff else "below the cutoff"
        lines = [f"<b>Score:</b> {self.trial_score:.4g} ({adapter.response_units})"]
        if self.trial:
            lines[0] += (f" with trial values — in the data: {self.data_score:.4g} "
                         f"({len(self.trial)} value(s) changed)")
        lines.append(f"Explained output: {output:.4g} ({adapter.output_units})")
        high, low = side_phrases(adapter, "above", ws.settings.target)
        side = high if self.trial_score >= cutoff else low
        lines.append(f"At the cutoff {cutoff:g}: <b>{decision}</b> (the side of {side})")
        y = ws.labels(self.state.model)
        if y is not None:
            lines.append(f"Label in the data ({ws.settings.target}): {_shown(y.iloc[self.state.row])}")
        self.score_label.setText("<br>".join(lines))

    def _contributions_failed(self, exc) -> None:
        message_item(self.bars.plot, f"Contribution bars: {exc}")
        self.running.plot.clear()

    def _show_contributions(self, attributions) -> None:
        self.contributions = attributions
        adapter = self.ctx.workspace.adapter(self.state.model)
        values = np.asarray(attributions.values, dtype=float).reshape(-1)
        features = list(attributions.features)
        base = float(np.ravel(attributions.base_value)[0])
        kept, rest_sum, rest_n = contribution_order(values)
        frame = self.trial_frame()
        labels = [f"{features[j]} = {_shown(frame[features[j]].iloc[0])}" for j in kept]
        bar_values = values[kept]
        self.bar_features = [features[j] for j in kept]
        if rest_n:
            labels.append(f"{rest_n} other features")
            bar_values = np.append(bar_values, rest_sum)
            self.bar_features.append("")
        self.bar_values = bar_values
        self.bar_labels = labels
        self._draw_bars(labels, bar_values, adapter)
        self._draw_running(labels, bar_values, base, adapter)
        show_for_case_level(self.reasons_panel, self, attributions)

    @staticmethod
    def _items(plot, held: dict, build) -> dict:
        """The plot's items, built and added again only when the plot was cleared meanwhile."""
        if not held or any(item not in plot.items for item in held.values()):
            plot.clear()
            held.clear()
            held.update(build())
            for item in held.values():
                plot.addItem(item)
        return held

    def _draw_bars(self, labels, values, adapter) -> None:
        plot = self.bars.plot
        n = len(values)
        ys = np.arange(n)
        brushes = [colour(RAISES if v > 0 else LOWERS, 235 if f else 130)
                   for v, f in zip(values, self.bar_features, strict=True)]
        items = self._items(plot, self._bar_items, lambda: {
            "bars": pg.BarGraphItem(x0=[0], width=[0], y=[0], height=0.7),
            "zero": pg.InfiniteLine(0, angle=90, pen=pg.mkPen(NEUTRAL, width=1))})
        items["bars"].setOpts(x0=np.minimum(values, 0), width=np.abs(values), y=ys, height=0.7,
                              brushes=brushes, pens=[pg.mkPen(None)] * n)
        # Feature labels: shortened to fit, and the axis told how wide they are (a squeezed pane
        # would otherwise hide them); the full text is in the hover line.
        labels = [t if len(t) <= LABEL_CHARS else t[: LABEL_CHARS - 1] + "…" for t in labels]
        axis = plot.getAxis("left")
        axis.setTicks([list(zip(ys, labels, strict=True))])
        metrics = QFontMetrics(axis.font() if hasattr(axis, "font") else self.font())
        axis.setWidth(max(metrics.horizontalAdvance(t) for t in labels) + 14)
        plot.setYRange(-0.6, n - 0.4, padding=0)
        span = float(np.max(np.abs(values))) if n else 1.0
        plot.setXRange(-span * 1.1, span * 1.1, padding=0)
        residual = getattr(self.contributions, "residual", None)
        extra = tip = ""
        if residual is not None and np.size(residual):
            r = float(np.ravel(residual)[0])
            extra = f"; residual {r:.0e}"
            tip = (f" The additivity residual, {r:.1e}, is the output less the base value and "
                   "the contributions: near 0, the bars add up to the score.")
        method = getattr(self.contributions, "method", "")
        # a short title: the bars take a quarter of the level's width beside the running total
        self.bars.set_text(f"Contribution bars ({method}{extra})", adapter.output_units, None,
                           tip=f"What moved this case's score, by the {method} method.{tip}")
        self.bars.title_text = self.bars.title

    @staticmethod
    def _mark_line(k: int, text: str, col: str, style) -> pg.InfiniteLine:
        return pg.InfiniteLine(0, angle=90, pen=pg.mkPen(col, width=1.5, style=style), label=text,
                               labelOpts={"position": 0.03 + 0.06 * k, "color": col,
                                          "fill": (255, 255, 255, 220)})

    def _draw_running(self, labels, values, base, adapter) -> None:
        plot = self.running.plot
        n = len(values)
        totals = base + np.cumsum(values)
        xs = np.concatenate([[base], totals])
        ys = np.concatenate([[-0.5], np.arange(n)])
        styles = pg.QtCore.Qt.PenStyle
        items = self._items(plot, self._running_items, lambda: {
            "path": pg.PlotDataItem(pen=pg.mkPen("#444", width=1.5)),
            "totals": pg.ScatterPlotItem(size=9, pen=pg.mkPen("w")),
            "base": self._mark_line(0, "base value", NEUTRAL, styles.DashLine),
            "case": self._mark_line(1, "this case", "#000", styles.SolidLine),
            "cutoff": self._mark_line(2, "cutoff", "#6A3D9A", styles.DotLine)})
        items["path"].setData(xs, ys)
        items["totals"].setData(totals, np.arange(n),
                                brush=[colour(RAISES if v > 0 else LOWERS) for v in values])
        cutoff_output = float(adapter.output_from_response(self.ctx.workspace.settings.cutoff)) \
            if adapter.output_kind != "raw score" else None
        marks = [(base, "base"), (self.trial_output, "case")]
        has_cutoff = cutoff_output is not None and bool(np.isfinite(cutoff_output))
        if has_cutoff:
            marks.append((cutoff_output, "cutoff"))
        for x, name in marks:
            items[name].setValue(x)
        items["cutoff"].setVisible(has_cutoff)
        lo = min(xs.min(), *(m[0] for m in marks))
        hi = max(xs.max(), *(m[0] for m in marks))
        pad = (hi - lo) * 0.08 or 0.5
        plot.setXRange(lo - pad, hi + pad, padding=0)
        self.running.set_text("Running total to this case", adapter.output_units, None,
                              tip="From the base value, each contribution added in the bars' "
                                  "order, to this case's output; the cutoff is marked.")
        self.cutoff_output = cutoff_output

    # ---- hover and clicks -------------------------------------------------------------------------
    def _index_at(self, y: float) -> int | None:
        i = int(round(y))
        return i if 0 <= i < len(self.bar_values) else None

    def _hover_bar(self, x: float, y: float) -> str | None:
        i = self._index_at(y)
        if i is None:
            return None
        name = self.bar_labels[i] if self.bar_features[i] else "the other features together"
        direction = "raises" if self.bar_values[i] > 0 else "lowers"
        return f"{name}: {self.bar_values[i]:+.4g} ({direction} the score)"

    def _hover_running(self, x: float, y: float) -> str | None:
        i = self._index_at(y)
        if i is None or self.contributions is None:
            return None
        base = float(np.ravel(self.contributions.base_value)[0])
        return f"after {self.bar_features[i] or 'the other features'}: {base + self.bar_values[: i + 1].sum():.4g}"

    def _plot_clicked(self, titled: TitledPlot, event) -> None:
        point = titled.plot.vb.mapSceneToView(event.scenePos())
        self.click_bar_at(point.y())

    def click_bar_at(self, y: float) -> None:
        i = self._index_at(y)
        if i is not None and self.bar_features[i]:
            self.open_effect(self.bar_features[i])

    def open_effect(self, feature: str) -> None:
        self.go(feature=feature, level="Effect")

    def showEvent(self, event) -> None:  # noqa: N802 - Qt's name
        super().showEvent(event)
        if self.table.rowCount():
            self._share_width()

    def _row_typed(self, row: int) -> None:
        if self.ctx.workspace.frame is not None and row != self.state.row:
            self.go(row=int(row))
