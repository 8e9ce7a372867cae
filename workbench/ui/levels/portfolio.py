"""Portfolio: every row with its score, decision at the cutoff and label; the segment filter."""

from __future__ import annotations

import numpy as np
import pandas as pd
from PySide6.QtCore import QAbstractTableModel, QModelIndex, Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QListWidget,
    QPushButton,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from workbench.engine.errors import InputError
from workbench.engine.segments import OPERATORS, Condition, describe_segment
from workbench.ui.levels.base import Level, register_level

ROW_ROLE = Qt.ItemDataRole.UserRole + 1
NO_EXPOSURE = "(none: one unit per row)"
# Headline figures in the order shown, with the names the trade uses for them.
METRIC_NAMES = {
    "auc": "AUC", "gini": "Gini", "ks": "KS", "brier": "Brier score", "rmse": "RMSE",
    "mae": "MAE", "r2": "R²", "poisson_deviance": "Poisson deviance",
    "lorenz_gini": "Gini (ordered Lorenz curve)",
}
PORTFOLIO_CAUTION = (
    "<b>Read with care.</b> The decisions here are the model's at the cutoff: they describe the "
    "model, not the people behind the rows. Decisions about people must be reviewed by a person "
    "and by compliance under local law. This is not legal advice.")


def exposure_column(ctx) -> str | None:
    """The column holding each row's exposure (time on risk), as chosen in the Portfolio; until
    the analyst chooses, for a count model the column whose name says exposure."""
    frame = ctx.workspace.frame
    if frame is None:
        return None
    chosen = getattr(ctx, "exposure_column", None)
    if chosen in frame.columns:
        return chosen
    if getattr(ctx, "exposure_declined", False):
        return None
    adapter = ctx.workspace.adapter("A")
    return guess_exposure(frame, adapter.task if adapter is not None else None)


def guess_exposure(frame: pd.DataFrame | None, task: str | None) -> str | None:
    """For a count model: the first numeric column whose name says exposure, else None."""
    if frame is None or task != "count":
        return None
    for col in frame.columns:
        if "exposure" in str(col).lower() and pd.api.types.is_numeric_dtype(frame[col]):
            return str(col)
    return None


def exposure_unit(column: str | None) -> str:
    """'per year' when the exposure column is in years, else 'per unit of exposure'."""
    if column is None:
        return "per row"
    return "per year" if "year" in column.lower() else "per unit of exposure"


def _format(value) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return ""
    if isinstance(value, float | np.floating):
        if float(value).is_integer() and abs(value) < 1e15:
            return f"{int(value):,}" if abs(value) >= 10_000 else str(int(value))
        return f"{value:,.1f}" if abs(value) >= 1000 else f"{value:.4g}"
    return str(value)


class PortfolioModel(QAbstractTableModel):
    """A lazy table over numpy columns: cells are formatted only when the view asks."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.headers: list[str] = []
        self.arrays: list[np.ndarray] = []
        self.tips: dict[str, str] = {}
        self.rows = np.arange(0)

    def set_columns(self, headers: list[str], arrays: list[np.ndarray],
                    tips: dict[str, str] | None = None) -> None:
        self.beginResetModel()
        self.headers, self.arrays, self.tips = headers, arrays, tips or {}
        self.endResetModel()

    def set_rows(self, rows: np.ndarray) -> None:
        self.beginResetModel()
        self.rows = np.asarray(rows, dtype=np.int64)
        self.endResetModel()

    def rowCount(self, parent=None) -> int:  # noqa: N802 - Qt's name
        return 0 if parent is not None and parent.isValid() else len(self.rows)

    def columnCount(self, parent=None) -> int:  # noqa: N802
        return 0 if parent is not None and parent.isValid() else len(self.headers)

    def data(self, index: QModelIndex, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        position = int(self.rows[index.row()])
        if role == Qt.ItemDataRole.DisplayRole:
            return _format(self.arrays[index.column()][position])
        if role == ROW_ROLE:
            return position
        if role == Qt.ItemDataRole.TextAlignmentRole:
            v = self.arrays[index.column()][position]
            if isinstance(v, int | float | np.number):
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return None

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self.headers[section] if section < len(self.headers) else None
        if role == Qt.ItemDataRole.ToolTipRole and orientation == Qt.Orientation.Horizontal:
            return self.tips.get(self.headers[section]) if section < len(self.headers) else None
        return None

    def sort(self, column: int, order=Qt.SortOrder.AscendingOrder) -> None:
        """Sort by reordering row positions (numpy), not by moving data."""
        if not 0 <= column < len(self.arrays) or len(self.rows) == 0:
            return
        values = self.arrays[column][self.rows]
        if values.dtype.kind in "fiub":
            key = values.astype(float)
            nan = np.isnan(key)
            order_idx = np.argsort(np.where(nan, np.inf, key), kind="stable")
        else:
            ranks = pd.Series(values).rank(method="first", na_option="bottom").to_numpy()
            order_idx = np.argsort(ranks, kind="stable")
        if order == Qt.SortOrder.DescendingOrder:
            order_idx = order_idx[::-1]
        self.layoutAboutToBeChanged.emit()
        self.rows = self.rows[order_idx]
        self.layoutChanged.emit()

    def position(self, table_row: int) -> int:
        return int(self.rows[table_row])


class SegmentEditor(QWidget):
    """Column conditions, ANDed: column, operator, value; add, remove, clear."""

    segment_changed = Signal(tuple)

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.column = QComboBox()
        self.column.setMinimumContentsLength(16)
        self.op = QComboBox()
        self.op.addItems(list(OPERATORS))
        self.value = QLineEdit()
        self.value.setPlaceholderText("value")
        self.add = QPushButton("Add condition")
        self.conditions = QListWidget()
        self.conditions.setFlow(QListWidget.Flow.LeftToRight)
        self.conditions.setFixedHeight(30)
        self.conditions.setSpacing(2)
        self.remove = QPushButton("Remove selected")
        self.clear = QPushButton("All rows")
        self.error = QLabel("")
        self.error.setStyleSheet("color: #B00020;")
        top = QHBoxLayout()
        top.addWidget(QLabel("Segment:"))
        for w in (self.column, self.op, self.value, self.add):
            top.addWidget(w)
        top.addStretch(1)
        bottom = QHBoxLayout()
        bottom.addWidget(QLabel("ANDed:"))
        bottom.addWidget(self.conditions, 1)
        bottom.addWidget(self.remove)
        bottom.addWidget(self.clear)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addLayout(top)
        layout.addLayout(bottom)
        layout.addWidget(self.error)
        self._current: tuple[Condition, ...] = ()
        self.add.clicked.connect(self._add)
        self.value.returnPressed.connect(self._add)
        self.remove.clicked.connect(self._remove)
        self.clear.clicked.connect(lambda: self.segment_changed.emit(()))

    def set_columns(self, columns: list[str]) -> None:
        if [self.column.itemText(i) for i in range(self.column.count())] != columns:
            self.column.clear()
            self.column.addItems(columns)

    def show_segment(self, conditions: tuple[Condition, ...]) -> None:
        self._current = tuple(conditions)
        self.conditions.clear()
        for c in conditions:
            self.conditions.addItem(c.describe())

    def add_condition(self, column: str, op: str, value: str) -> None:
        self.segment_changed.emit((*self._current, Condition(column, op, value)))

    def _add(self) -> None:
        if not self.column.currentText() or not self.value.text().strip():
            self.error.setText("Choose a column and type a value.")
            return
        self.add_condition(self.column.currentText(), self.op.currentText(), self.value.text().strip())
        self.value.clear()

    def _remove(self) -> None:
        picked = {i.row() for i in self.conditions.selectedIndexes()}
        if picked:
            self.segment_changed.emit(tuple(c for i, c in enumerate(self._current) if i not in picked))


@register_level
class PortfolioLevel(Level):
    name, order = "Portfolio", 10
    summary = "All rows with score, decision at the cutoff and label"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Portfolio</b>")
        self.segment = SegmentEditor()
        self.summary_label = QLabel("")
        self.summary_label.setWordWrap(True)
        self.summary_label.setTextFormat(Qt.TextFormat.RichText)
        self.summary_label.setContentsMargins(0, 0, 16, 0)
        self.summary_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.model = PortfolioModel(self)
        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.setSortingEnabled(True)
        self.table.setSelectionBehavior(QTableView.SelectionBehavior.SelectRows)
        self.table.setEditTriggers(QTableView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.table.horizontalHeader().setDefaultSectionSize(110)
        # Column widths from the first 50 rows: Qt's default of 1000 asks the model for 23,000
        # cells and froze the window for 0.9 s each time scores arrived.
        self.table.horizontalHeader().setResizeContentsPrecision(50)
        self.table.verticalHeader().setVisible(False)
        self.table.verticalHeader().setDefaultSectionSize(22)
        self.table.sortByColumn(0, Qt.SortOrder.AscendingOrder)
        self.hint = QLabel("Double-click a row to open it as a Case.")
        self.hint.setStyleSheet("color: #555;")
        self.exposure = QComboBox()
        self.exposure.setMinimumContentsLength(18)
        self.exposure.setToolTip("Count models: the column holding each row's time on risk; "
                                 "frequencies, Poisson deviance and Gini are weighted by it")
        self.exposure_row = QWidget()
        exposure_layout = QHBoxLayout(self.exposure_row)
        exposure_layout.setContentsMargins(0, 0, 0, 0)
        exposure_layout.addWidget(QLabel("Exposure (time on risk):"))
        exposure_layout.addWidget(self.exposure)
        exposure_layout.addStretch(1)
        self.caution = QLabel(PORTFOLIO_CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("background: #FFF8E1; padding: 6px; border: 1px solid #E0C070;")
        layout = QVBoxLayout(self)
        layout.addWidget(self.heading)
        layout.addWidget(self.segment)
        layout.addWidget(self.exposure_row)
        layout.addWidget(self.summary_label)
        layout.addWidget(self.table, 1)
        layout.addWidget(self.hint)
        layout.addWidget(self.caution)
        self.exposure.activated.connect(self._exposure_chosen)
        self.table.doubleClicked.connect(self._open_case)
        self.segment.segment_changed.connect(lambda seg: self.go(segment=seg))
        self._scores: tuple[np.ndarray, np.ndarray] | None = None

    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.segment)

    # ---- rendering ------------------------------------------------------------------------------
    def render(self) -> None:
        ws, state = self.ctx.workspace, self.state
        frame = ws.frame
        self._scores = None
        if frame is None:
            self.heading.setText("<b>Portfolio</b> — open a data file (File ▸ Open data)")
            self.model.set_columns([], [])
            self.model.set_rows(np.arange(0))
            self.summary_label.setText("")
            return
        self.segment.set_columns([str(c) for c in frame.columns])
        self._show_exposure_choice()
        self.segment.show_segment(state.segment)
        self.segment.error.setText("")
        try:
            rows = self.ctx.results.segment_rows(state)
        except InputError as exc:
            self.segment.error.setText(str(exc))
            rows = np.arange(len(frame))
        self._rows = rows
        self._fill(frame, None)
        self.model.set_rows(rows)
        self._summarise()
        self.ctx.results.scores(state.model, self.arrival(self._scored), self._score_failed,
                                self.relevant())

    def _show_exposure_choice(self) -> None:
        """The exposure picker, for count models only; the first time, a guessed column."""
        ws = self.ctx.workspace
        adapter = ws.adapter(self.state.model)
        task = adapter.task if adapter is not None else None
        self.exposure_row.setVisible(task == "count")
        self.caution.setVisible(task in ("binary", "multiclass"))
        if task != "count":
            return
        frame = ws.frame
        numeric = [str(c) for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c])
                   and c != ws.settings.target]
        self.exposure.blockSignals(True)
        self.exposure.clear()
        self.exposure.addItems([NO_EXPOSURE, *numeric])
        self.exposure.setCurrentText(exposure_column(self.ctx) or NO_EXPOSURE)
        self.exposure.blockSignals(False)

    def _exposure_chosen(self, index: int) -> None:
        text = self.exposure.itemText(index)
        self.ctx.exposure_column = None if text == NO_EXPOSURE else text
        self.ctx.exposure_declined = text == NO_EXPOSURE
        if self._scores is not None:
            self._fill(self.ctx.workspace.frame, self._scores)
            self.model.set_rows(self._rows)
        self._summarise()

    def _scored(self, result) -> None:
        self._scores = result
        sort_col = self.table.horizontalHeader().sortIndicatorSection()
        sort_order = self.table.horizontalHeader().sortIndicatorOrder()
        self._fill(self.ctx.workspace.frame, result)
        self.model.set_rows(self._rows)
        if 0 <= sort_col < self.model.columnCount():
            self.model.sort(sort_col, sort_order)
        self.table.resizeColumnsToContents()
        self._summarise()

    def _score_failed(self, exc) -> None:
        self.summary_label.setText(f"Scores: {exc}")
        self._summarise()

    def _fill(self, frame: pd.DataFrame, scores) -> None:
        ws = self.ctx.workspace
        slot = ws.slot(self.state.model)
        target = ws.settings.target
        id_col = ws.data.id_column if ws.data is not None else None
        headers, arrays = ["row"], [np.arange(len(frame))]
        tips = {"row": "position in the data file, from 0"}
        if id_col:
            headers.append(id_col)
            arrays.append(frame[id_col].to_numpy())
        if slot is not None and scores is not None:
            output, response = scores
            cutoff = ws.settings.cutoff
            m = self.state.model
            if slot.adapter.task == "count":
                # A frequency model: its output is a rate, and a cutoff only marks a band.
                unit = exposure_unit(exposure_column(self.ctx))
                score_name, side_name = f"frequency {m}", "vs cutoff"
                tips[score_name] = f"model {m}: predicted claims {unit}"
            else:
                score_name, side_name = f"score {m}", "decision"
                tips[score_name] = f"model {m}: {slot.adapter.response_units}"
            headers.append(score_name)
            arrays.append(response)
            tips[side_name] = f"at or above / below the cutoff {cutoff:g}"
            headers.append(side_name)
            arrays.append(np.where(response >= cutoff, "at/above cutoff", "below cutoff").astype(object))
        if target:
            headers.append(f"label ({target})")
            arrays.append(frame[target].to_numpy())
        for col in frame.columns:
            if col in (id_col, target):
                continue
            headers.append(str(col))
            arrays.append(frame[col].to_numpy())
        self.model.set_columns(headers, arrays, tips)

    def _summarise(self) -> None:
        ws = self.ctx.workspace
        rows = self._rows
        slot = ws.slot(self.state.model)
        parts = [f"<b>{len(rows):,}</b> of {ws.n_rows:,} rows — {describe_segment(self.state.segment)}"]
        name = f"model {self.state.model}" + (f" ({slot.name})" if slot else " (none open)")
        self.heading.setText(f"<b>Portfolio</b> — {name}")
        self.metrics = None
        if self._scores is not None and len(rows):
            response = self._scores[1][rows]
            cutoff = ws.settings.cutoff
            if slot is not None and slot.adapter.task == "count":
                parts.extend(self._count_summary(rows, response))
            else:
                parts.append(f"mean score {np.mean(response):.4g}")
                parts.extend(self._metrics(rows, response))
            parts.append(f"{np.mean(response >= cutoff):.1%} of rows at or above the cutoff {cutoff:g}")
        # Wrapped, with room left at the right edge; the tooltip lists the figures one a line.
        self.summary_label.setText(" · ".join(parts))
        self.summary_label.setToolTip("<br>".join(parts))

    def _exposure_values(self, rows: np.ndarray) -> np.ndarray | None:
        column = exposure_column(self.ctx)
        if column is None:
            return None
        return pd.to_numeric(self.ctx.workspace.frame[column], errors="coerce").to_numpy(float)[rows]

    def _count_summary(self, rows: np.ndarray, rate: np.ndarray) -> list[str]:
        """A frequency model's figures: exposure, claims, actual and predicted frequency, the
        Poisson deviance and the ordered-Lorenz Gini, all weighted by exposure when it is set."""
        ws = self.ctx.workspace
        column = exposure_column(self.ctx)
        unit = exposure_unit(column)
        e = self._exposure_values(rows)
        weights = np.ones_like(rate) if e is None else e
        usable = np.isfinite(weights) & (weights > 0)
        out = []
        if e is not None:
            out.append(f"exposure {np.sum(weights[usable]):,.1f} ({column})")
            predicted = np.sum(rate[usable] * weights[usable]) / np.sum(weights[usable])
            out.append(f"predicted frequency {predicted:.4g} {unit} (exposure-weighted)")
        else:
            out.append(f"mean predicted claims {np.mean(rate):.4g} per row (no exposure chosen)")
        y = ws.positive_labels(self.state.model)
        if y is None:
            return out
        y = y[rows]
        known = ~np.isnan(y) & usable
        if known.sum() < 2:
            return out
        if e is not None:
            out.append(f"actual frequency {np.sum(y[known]) / np.sum(e[known]):.4g} {unit} "
                       f"({np.sum(y[known]):,.0f} claims)")
        else:
            out.append(f"actual mean {np.mean(y[known]):.4g} claims per row")
        try:
            from workbench.engine.metrics import metrics_for_task

            m = metrics_for_task("count", y[known], rate[known],
                                 exposure=None if e is None else e[known])
        except InputError as exc:
            return [*out, f"metrics: {exc}"]
        self.metrics = m
        weighted = " (exposure-weighted)" if e is not None else ""
        out.append(f"Poisson deviance {m['poisson_deviance']:.4g}{weighted}")
        out.append(f"Gini (ordered Lorenz curve{', by exposure' if e is not None else ''}) "
                   f"{m['lorenz_gini']:.3f}")
        if known.sum() < len(rows):
            out.append(f"{len(rows) - int(known.sum()):,} rows left out (no label or exposure ≤ 0)")
        return out

    def _metrics(self, rows: np.ndarray, response: np.ndarray) -> list[str]:
        ws = self.ctx.workspace
        adapter = ws.adapter(self.state.model)
        y = ws.positive_labels(self.state.model)
        if y is None or adapter is None or adapter.task == "multiclass":
            return []
        y = y[rows]
        known = ~np.isnan(y)
        if known.sum() < 2:
            return []
        out = [f"actual rate {np.mean(y[known]):.4g}" if adapter.classes else f"actual mean {np.mean(y[known]):.4g}"]
        try:
            from workbench.engine.metrics import metrics_for_task

            m = metrics_for_task(adapter.task, y[known], response[known], cutoff=ws.settings.cutoff)
        except InputError as exc:
            return [*out, f"metrics: {exc}"]
        except Exception as exc:  # noqa: BLE001 - a metric failing must not break the table
            return [*out, f"metrics unavailable ({type(exc).__name__})"]
        for name, label in METRIC_NAMES.items():
            if name in m and m[name] is not None:
                out.append(f"{label} {m[name]:.3f}")
        self.metrics = m
        return out

    # ---- links ---------------------------------------------------------------------------------
    def _open_case(self, index: QModelIndex) -> None:
        self.open_table_row(index.row())

    def open_table_row(self, table_row: int) -> None:
        self.go(row=self.model.position(table_row), level="Case")
