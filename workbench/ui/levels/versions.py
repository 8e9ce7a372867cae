"""Versions: champion (A) against challenger (B) on the same rows.

Left: the metrics side by side with B - A and its paired bootstrap interval, DeLong's test, the
score agreement figures, the swap table as a 2 x 2 grid (click a cell to list its rows, click a
row to see both models' contribution bars). Right: the score agreement scatter, the ranking
shift, the effect overlay of a chosen feature and the double lift chart; a second tab holds the
chosen row's contribution bars under A and B and their difference.

Every number comes from ``workbench.engine.compare`` run as a job (progress and cancel in the
job area); this module only draws.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QGridLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from workbench.engine.errors import Cancelled
from workbench.ui.levels.base import Level, register_level
from workbench.ui.plotting import (
    CURVE,
    LOWERS,
    MAX_SCATTER_POINTS,
    NEUTRAL,
    RAISES,
    SECOND,
    TitledPlot,
    colour,
    message_item,
    thin_indices,
)
from workbench.ui.pool_tasks import PoolTask, Rows, Shared, engine_call
from workbench.ui.results import values_digest

RESAMPLES = 1000
IMPORTANCE_REPEATS = 3
IMPORTANCE_ROWS = 5000
OVERLAY_ROWS = 2000
LISTED_ROWS = 500  # rows listed for one swap table cell (the largest score moves first)
SHIFT_SHOWN = 15
CASE_BARS = 12
# Swap table colours, from the same colour-blind-safe set as the rest of the window
CELL_COLOURS = {"both_accept": "#BBBBBB", "both_decline": "#555555", "swap_in": "#0072B2",
                "swap_out": "#CC79A7"}
CELL_TITLES = {"both_accept": "both accept", "swap_in": "swap in: A declines, B accepts",
               "swap_out": "swap out: A accepts, B declines", "both_decline": "both decline"}
CAUTION = ("<b>Read with care.</b> The swap table and the contribution bars describe how two "
           "models decide, not the world and not the people behind the rows. Decisions about "
           "people must be reviewed by a person and by compliance under local law. "
           "This is not legal advice.")


METRIC_NAMES = {"auc": "AUC", "gini": "Gini", "ks": "KS", "brier": "Brier score",
                "log_loss": "log loss", "auc_macro": "AUC (macro)", "accuracy": "accuracy",
                "rmse": "RMSE", "mae": "MAE", "r2": "R²", "poisson_deviance": "Poisson deviance",
                "lorenz_gini": "Gini (Lorenz)"}


def _fmt(v) -> str:
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "—"
    if isinstance(v, float | np.floating):
        return f"{v:.4g}"
    return str(v)


@register_level
class VersionsLevel(Level):
    name, order = "Versions", 60
    summary = "Champion against challenger: metrics, score agreement, swap table, ranking shift"

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.comparison = None
        self.rows = np.arange(0)  # data positions of the rows compared
        self.cell: str | None = None
        self.listed: np.ndarray = np.arange(0)
        self.detail_row: int | None = None
        self.case_results: dict[str, object] = {}

        self.heading = QLabel("<b>Versions</b>")
        self.own_cutoff = QCheckBox("own cutoff for B")
        self.cutoff_b = QDoubleSpinBox()
        self.cutoff_b.setDecimals(4)
        self.cutoff_b.setRange(-1e9, 1e9)
        self.cutoff_b.setSingleStep(0.01)
        self.cutoff_b.setKeyboardTracking(False)
        self.cutoff_b.setEnabled(False)
        self.again = QPushButton("Compare again")
        self.again.setToolTip("Run the comparison again (after a cancel, for instance)")
        self.again.clicked.connect(lambda: self.refresh(force=True))
        top = QHBoxLayout()
        top.addWidget(self.heading, 1)
        top.addWidget(self.own_cutoff)
        top.addWidget(self.cutoff_b)
        top.addWidget(self.again)

        # ---- left: metrics, DeLong, agreement, swap grid, rows of a cell
        self.metrics_table = QTableWidget(0, 5)
        self.metrics_table.setHorizontalHeaderLabels(["metric", "A", "B", "B − A", "interval"])
        header = self.metrics_table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setStretchLastSection(True)
        self.metrics_table.verticalHeader().setVisible(False)
        self.metrics_table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.metrics_note = QLabel("")
        self.delong_label = QLabel("")
        self.agreement_label = QLabel("")
        for label in (self.metrics_note, self.delong_label, self.agreement_label):
            label.setWordWrap(True)
            label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.metrics_note.setStyleSheet("color: #555;")
        self.swap_title = QLabel("<b>Swap table</b>")
        self.swap_buttons: dict[str, QPushButton] = {}
        grid = QGridLayout()
        grid.addWidget(QLabel(""), 0, 0)
        self.swap_headers = {key: QLabel() for key in ("B_ok", "B_adverse", "A_ok", "A_adverse")}
        grid.addWidget(self.swap_headers["B_ok"], 0, 1, Qt.AlignmentFlag.AlignCenter)
        grid.addWidget(self.swap_headers["B_adverse"], 0, 2, Qt.AlignmentFlag.AlignCenter)
        grid.addWidget(self.swap_headers["A_ok"], 1, 0)
        grid.addWidget(self.swap_headers["A_adverse"], 2, 0)
        self._name_swap_sides(None)
        for cell, (r, c) in {"both_accept": (1, 1), "swap_out": (1, 2), "swap_in": (2, 1),
                             "both_decline": (2, 2)}.items():
            button = QPushButton("—")
            button.setObjectName(f"swap-{cell}")
            button.setMinimumHeight(54)
            button.setToolTip(f"{CELL_TITLES[cell]}: click to list these rows")
            edge = CELL_COLOURS[cell]
            button.setStyleSheet(f"QPushButton {{ border: 3px solid {edge}; padding: 3px; }}"
                                 f"QPushButton:checked {{ background: {edge}; color: white; }}")
            button.setCheckable(True)
            button.clicked.connect(lambda _=False, k=cell: self.show_cell(k))
            self.swap_buttons[cell] = button
            grid.addWidget(button, r, c)
        self.rows_table = QTableWidget(0, 5)
        self.rows_table.setHorizontalHeaderLabels(["row", "id", "score A", "score B", "label"])
        self.rows_table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.rows_table.verticalHeader().setVisible(False)
        self.rows_table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.rows_table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.rows_table.cellClicked.connect(lambda r, _c: self.open_listed(r))
        self.rows_note = QLabel("Click a cell of the swap table to list its rows; click a row "
                                "to see both models' contribution bars.")
        self.rows_note.setWordWrap(True)
        self.rows_note.setStyleSheet("color: #555;")
        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.addWidget(self.metrics_table, 3)
        ll.addWidget(self.metrics_note)
        ll.addWidget(self.delong_label)
        ll.addWidget(self.agreement_label)
        ll.addWidget(self.swap_title)
        ll.addLayout(grid)
        ll.addWidget(self.rows_note)
        ll.addWidget(self.rows_table, 4)

        # ---- right: the plots, and the chosen case
        self.scatter = TitledPlot("Score agreement scatter", "", "")
        self.shift_plot = TitledPlot("Ranking shift", "", "")
        self.shift_plot.plot.invertY(True)
        self.overlay_plot = TitledPlot("Effect overlay", "", "")
        self.overlay_feature = QComboBox()
        self.overlay_feature.setMinimumContentsLength(16)
        self.overlay_feature.activated.connect(lambda _i: self.request_overlay())
        self.lift_plot = TitledPlot("Double lift chart", "", "")
        overlay_box = QWidget()
        ob = QVBoxLayout(overlay_box)
        ob.setContentsMargins(0, 0, 0, 0)
        pick = QHBoxLayout()
        pick.addWidget(QLabel("Feature"))
        pick.addWidget(self.overlay_feature, 1)
        ob.addLayout(pick)
        ob.addWidget(self.overlay_plot, 1)
        # Two plots per tab, one above the other: four side by side left each about 250 pixels
        # at 1440 x 900, too narrow for the ranking shift's labels and the axes' titles.
        scores_page = self._stacked(self.scatter, self.lift_plot)
        features_page = self._stacked(self.shift_plot, overlay_box)

        self.case_heading = QLabel("No row chosen yet.")
        self.case_heading.setWordWrap(True)
        self.open_case = QPushButton("Open this row in Case")
        self.open_case.setEnabled(False)
        self.open_case.clicked.connect(self._open_in_case)
        self.bars_a = TitledPlot("Contribution bars under A", "", "")
        self.bars_b = TitledPlot("Contribution bars under B", "", "")
        self.bars_diff = TitledPlot("Difference B − A", "", "")
        for p in (self.bars_a, self.bars_b, self.bars_diff):
            p.plot.invertY(True)  # titles of two lines' height keep the linked bars in line
        for p in (self.bars_b, self.bars_diff):
            p.plot.setYLink(self.bars_a.plot)
            p.plot.getAxis("left").setStyle(showValues=False)
            p.plot.getAxis("left").setWidth(8)
        case_page = QWidget()
        cl = QVBoxLayout(case_page)
        head = QHBoxLayout()
        head.addWidget(self.case_heading, 1)
        head.addWidget(self.open_case)
        cl.addLayout(head)
        bars = QSplitter(Qt.Orientation.Horizontal)
        for p in (self.bars_a, self.bars_b, self.bars_diff):
            bars.addWidget(p)
        for i, stretch in enumerate((7, 3, 3)):  # the first carries the feature labels
            bars.setStretchFactor(i, stretch)
        cl.addWidget(bars, 1)
        self.tabs = QTabWidget()
        self.tabs.addTab(scores_page, "Scores and lift")
        self.tabs.addTab(case_page, "Chosen row under A and B")
        self.tabs.addTab(features_page, "Ranking and effects")
        self.tabs.setUsesScrollButtons(True)

        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(self.tabs)
        split.setSizes([430, 1000])
        self.caution = QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("background: #FFF8E1; padding: 4px; border: 1px solid #E0C070;")
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addWidget(split, 1)
        layout.addWidget(self.caution)

        self.own_cutoff.toggled.connect(self._own_cutoff_toggled)
        self.cutoff_b.valueChanged.connect(lambda _v: self.refresh(force=True))
        self.scatter.on_hover(self._hover_scatter)
        self.shift_plot.on_hover(self._hover_shift)
        self.lift_plot.on_hover(self._hover_lift)
        self.overlay_plot.on_hover(self._hover_overlay)
        self.scatter.plot_widget.scene().sigMouseClicked.connect(self._scatter_clicked)
        self.shift_features: list[str] = []
        self.overlay = None
        self.shown_points = np.arange(0)

    @staticmethod
    def _stacked(upper: QWidget, lower: QWidget) -> QWidget:
        page = QSplitter(Qt.Orientation.Vertical)
        page.addWidget(upper)
        page.addWidget(lower)
        page.setChildrenCollapsible(False)
        return page

    def _name_swap_sides(self, task: str | None) -> None:
        """Accept / decline for classifiers; for a price or frequency, just the cutoff's sides."""
        if task in ("regression", "count"):
            ok, adverse = "below cutoff", "at/above cutoff"
        else:
            ok, adverse = "accepts", "declines"
        for model in ("A", "B"):
            self.swap_headers[f"{model}_ok"].setText(f"<b>{model} {ok}</b>")
            self.swap_headers[f"{model}_adverse"].setText(f"<b>{model} {adverse}</b>")

    # ---- what this level depends on ---------------------------------------------------------
    def view_key(self) -> tuple:
        s = self.state
        return (self.ctx.workspace.generation, s.segment, self._cutoffs())

    def _cutoffs(self) -> tuple[float, float]:
        a = float(self.ctx.workspace.settings.cutoff)
        return a, float(self.cutoff_b.value()) if self.own_cutoff.isChecked() else a

    def _own_cutoff_toggled(self, on: bool) -> None:
        self.cutoff_b.setEnabled(on)
        if on:
            self.cutoff_b.blockSignals(True)
            self.cutoff_b.setValue(self.ctx.workspace.settings.cutoff)
            self.cutoff_b.blockSignals(False)
        self.refresh(force=True)

    # ---- rendering --------------------------------------------------------------------------
    def _clear(self, text: str) -> None:
        self.comparison = None
        self.metrics_table.setRowCount(0)
        for label in (self.metrics_note, self.delong_label, self.agreement_label):
            label.setText("")
        for button in self.swap_buttons.values():
            button.setText("—")
            button.setChecked(False)
        self.rows_table.setRowCount(0)
        for p in (self.scatter, self.shift_plot, self.overlay_plot, self.lift_plot):
            message_item(p.plot, text)

    def render(self) -> None:
        ws, s = self.ctx.workspace, self.state
        a, b = ws.slot("A"), ws.slot("B")
        names = f"A: {a.name if a else '(none)'} against B: {b.name if b else '(none)'}"
        self.heading.setText(f"<b>Versions</b> — champion {names}")
        self.cell = None
        self._name_swap_sides(a.adapter.task if a is not None else None)
        if a is None or b is None or ws.frame is None:
            missing = [what for what, held in (("model A", a), ("a second model B", b),
                                               ("a data file", ws.frame)) if held is None]
            self._clear("To compare, open " + " and ".join(missing)
                        + (" (File ▸ Open second model)" if b is None else ""))
            return
        y_all = ws.labels("A")
        if y_all is None:
            self._clear("Choose the target (actual outcome) in the settings to compare the models")
            return
        rows = self.ctx.results.segment_rows(s)
        rows = rows[y_all.iloc[rows].notna().to_numpy()]
        if len(rows) < 2:
            self._clear("Fewer than two rows with a known outcome in this segment")
            return
        self._clear("Comparing the two models…")
        self.rows = rows
        cut_a, cut_b = self._cutoffs()
        seed = ws.settings.seed
        adapter_a, adapter_b = a.adapter, b.adapter
        # A worker process's job: the model, data and labels go once, the rows as positions.
        work = PoolTask(engine_call, ("compare", "compare_versions", Shared(adapter_a),
                                      Shared(adapter_b), Rows(Shared(ws.frame), rows),
                                      Rows(Shared(y_all), rows)),
                        {"cutoff_a": cut_a, "cutoff_b": cut_b, "resamples": RESAMPLES,
                         "seed": seed, "importance_repeats": IMPORTANCE_REPEATS,
                         "importance_rows": IMPORTANCE_ROWS})

        key = ("versions", a.sha256, b.sha256, ws.data_key(), s.segment,
               repr(ws.settings.positive_class), ws.settings.target, cut_a, cut_b, seed,
               RESAMPLES, IMPORTANCE_ROWS, len(rows))
        self._fill_features(adapter_a, adapter_b)  # before the request: it may answer at once
        self.ctx.runner.request(key, "Champion against challenger", work,
                                self.arrival(self._arrived),
                                on_error=self._failed, relevant=self.relevant())

    def _failed(self, exc) -> None:
        if isinstance(exc, Cancelled):
            self._clear("Comparison cancelled: press Compare again to run it")
            return
        self._clear(f"The models could not be compared: {exc}")
        self.metrics_note.setText(str(exc))

    def _arrived(self, comparison) -> None:
        self.comparison = comparison
        self._show_metrics(comparison)
        self._show_swap(comparison)
        # each plot in its own event-loop turn, so that Qt paints between them
        for draw in (self._draw_scatter, self._draw_shift, self._draw_lift):
            self.draws.later(lambda d=draw: d(comparison))
        self.request_overlay()
        if self.state.row is not None and self.state.row in set(self.rows.tolist()):
            self.show_detail(int(self.state.row))

    # ---- metrics and agreement -------------------------------------------------------------------
    def _show_metrics(self, c) -> None:
        names = list(c.difference)
        self.metrics_table.setRowCount(len(names))
        level = 95
        for i, name in enumerate(names):
            iv = c.intervals[name]
            level = int(round(100 * iv.level))
            arrow = "↑" if c.higher_is_better[name] else "↓"
            cells = [f"{METRIC_NAMES.get(name, name)} {arrow}", _fmt(float(c.metrics_a[name])),
                     _fmt(float(c.metrics_b[name])), f"{c.difference[name]:+.4g}",
                     f"{_fmt(iv.low)} to {_fmt(iv.high)}"]
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setToolTip(f"{name}: {'higher' if arrow == '↑' else 'lower'} is better")
                if j:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.metrics_table.setItem(i, j, item)
        self.metrics_table.setHorizontalHeaderLabels(
            ["metric", "A", "B", "B − A", f"{level}% interval"])
        notes = "; ".join(c.notes)
        self.metrics_note.setText(
            f"↑ higher is better, ↓ lower is better. {c.n:,} rows scored by both; interval of "
            f"B − A from a paired bootstrap with {c.resamples} resamples (seed {c.seed}). "
            f"Scores in {c.units}." + (f" Note: {notes}." if notes else ""))
        if c.delong is not None:
            d = c.delong
            self.delong_label.setText(
                f"<b>DeLong test</b> of equal AUC: AUC A {d.auc_a:.4f}, B {d.auc_b:.4f}, "
                f"z = {d.z:.3f}, two-sided p {'&lt; 1e-300' if d.p_value == 0 else f'= {d.p_value:.3g}'} "
                f"({d.positives:,} positives, {d.negatives:,} negatives)")
        else:
            self.delong_label.setText("DeLong test: for binary models only")
        self.agreement_label.setText(
            f"<b>Score agreement:</b> Spearman {c.spearman:.4f}, Kendall {c.kendall:.4f}; "
            f"{100 * c.moved_share:.1f}% of rows moved by more than {c.moved_threshold:g} "
            f"({c.units})")

    def _show_swap(self, c) -> None:
        s = c.swap
        if s is None:
            self.swap_title.setText("<b>Swap table</b> — no cutoff")
            return
        self.swap_title.setText(f"<b>Swap table</b> at A's cutoff {s.cutoff_a:g} and B's cutoff "
                                f"{s.cutoff_b:g} (decline {s.adverse_if} the cutoff)")
        for cell, button in self.swap_buttons.items():
            count = s.counts[cell]
            rate = s.bad_rate[cell]
            bad = "bad rate —" if not np.isfinite(rate) else f"bad rate {100 * rate:.1f}%"
            button.setText(f"{count:,} rows ({100 * count / max(s.n, 1):.1f}%)\n{bad}")
            button.setChecked(False)

    # ---- the rows of one cell ------------------------------------------------------------------------
    def show_cell(self, cell: str) -> None:
        c = self.comparison
        for k, button in self.swap_buttons.items():
            button.setChecked(k == cell)
        if c is None or c.swap is None:
            return
        self.cell = cell
        positions = np.asarray(c.swap.rows[cell])
        moved = np.abs(c.response_b[positions] - c.response_a[positions])
        positions = positions[np.argsort(-moved, kind="stable")][:LISTED_ROWS]
        self.listed = positions
        ws = self.ctx.workspace
        ids = ws.data.ids if ws.data is not None else None
        labels = ws.labels("A")
        self.rows_table.setRowCount(len(positions))
        for i, p in enumerate(positions):
            row = int(self.rows[p])
            cells = [str(row), "" if ids is None else str(ids.iloc[row]),
                     f"{c.response_a[p]:.4g}", f"{c.response_b[p]:.4g}",
                     "" if labels is None else _fmt(labels.iloc[row])]
            for j, text in enumerate(cells):
                self.rows_table.setItem(i, j, QTableWidgetItem(text))
        total = c.swap.counts[cell]
        shown = f"the {len(positions)} with the largest score change of {total:,}" \
            if total > len(positions) else f"all {total:,}"
        self.rows_note.setText(f"{CELL_TITLES[cell]}: {shown} rows. Click a row to see both "
                               "models' contribution bars.")

    def open_listed(self, index: int) -> None:
        if 0 <= index < len(self.listed):
            self.open_row(int(self.rows[self.listed[index]]))

    def open_row(self, row: int) -> None:
        """Move the focus to ``row`` and show its contribution bars under A and B."""
        self.go(row=row)
        self.show_detail(row, switch=True)

    def _open_in_case(self) -> None:
        if self.detail_row is not None:
            self.go(row=self.detail_row, level="Case")

    # ---- the chosen row under both models --------------------------------------------------------------
    def show_detail(self, row: int, *, switch: bool = False) -> None:
        ws = self.ctx.workspace
        self.detail_row = row
        self.case_results = {}
        self.open_case.setEnabled(True)
        if switch:
            self.tabs.setCurrentIndex(1)
        ident = f" ({ws.data.id_column} {ws.data.ids.iloc[row]})" if ws.data.id_column else ""
        text = f"<b>Row {row}</b>{ident}"
        c = self.comparison
        where = np.flatnonzero(self.rows == row) if c is not None else []
        if len(where):
            p = int(where[0])
            text += f": score A {c.response_a[p]:.4g}, score B {c.response_b[p]:.4g} ({c.units})"
            if c.swap is not None:
                cell = next(k for k, v in c.swap.rows.items() if p in set(v.tolist()))
                text += f" — {CELL_TITLES[cell]}"
        self.case_heading.setText(text)
        for p in (self.bars_a, self.bars_b, self.bars_diff):
            message_item(p.plot, "Computing contributions…")
        frame = ws.frame.iloc[[row]]
        digest = values_digest({"row": row})
        for slot in ("A", "B"):
            self.ctx.results.case_attributions(
                slot, frame, digest,
                self.arrival(lambda r, s=slot, at=row: self._case_arrived(s, at, r)),
                lambda e, s=slot: message_item(self._bars(s).plot, f"Contribution bars: {e}"),
                relevant=lambda at=row: self.detail_row == at)

    def _bars(self, slot: str) -> TitledPlot:
        return self.bars_a if slot == "A" else self.bars_b

    def _case_arrived(self, slot: str, row: int, attributions) -> None:
        if row != self.detail_row:
            return
        self.case_results[slot] = attributions
        if len(self.case_results) == 2:
            self._draw_case()

    def _draw_case(self) -> None:
        ws = self.ctx.workspace
        att_a, att_b = self.case_results["A"], self.case_results["B"]
        features = list(dict.fromkeys([*att_a.features, *att_b.features]))

        def spread(att):
            pos = {f: j for j, f in enumerate(att.features)}
            v = np.ravel(att.values)
            return np.array([v[pos[f]] if f in pos else 0.0 for f in features])

        va, vb = spread(att_a), spread(att_b)
        order = np.argsort(-np.maximum(np.abs(va), np.abs(vb)), kind="stable")[:CASE_BARS]
        row = ws.frame.iloc[self.detail_row]
        labels = [f"{features[j]} = {_fmt(row[features[j]]) if features[j] in row.index else ''}"
                  for j in order]
        adapter_a, adapter_b = ws.adapter("A"), ws.adapter("B")
        self.case_features = [features[j] for j in order]
        self.case_values = (va[order], vb[order])
        span = float(np.max(np.abs(np.concatenate([va[order], vb[order]])))) or 1.0
        for titled, values, adapter, slot in ((self.bars_a, va[order], adapter_a, "A"),
                                              (self.bars_b, vb[order], adapter_b, "B")):
            self._draw_bars(titled.plot, values, labels if slot == "A" else None, span)
            titled.set_text(f"Contribution bars under {slot}",
                            adapter.output_units, None)
        self.case_heading.setText(
            self.case_heading.text().split("<br>")[0] + "<br>"
            + "; ".join(f"{slot}: base value {att.base_value:.3g}, output "
                        f"{float(np.ravel(att.output)[0]):.3g} ({att.method})"
                        for slot, att in (("A", att_a), ("B", att_b)))
            + ". The same scale for both; a feature a model does not use counts 0.")
        if adapter_a.output_kind == adapter_b.output_kind:
            diff = vb[order] - va[order]
            self._draw_bars(self.bars_diff.plot, diff, None, float(np.max(np.abs(diff))) or 1.0)
            self.bars_diff.set_text("Difference B − A", adapter_a.output_units, None)
        else:
            message_item(self.bars_diff.plot, "The two models explain different outputs "
                         f"({adapter_a.output_kind} and {adapter_b.output_kind}): no difference")

    def _draw_bars(self, plot, values, labels, span: float) -> None:
        plot.clear()
        n = len(values)
        ys = np.arange(n)
        brushes = [colour(RAISES if v > 0 else LOWERS, 230) for v in values]
        plot.addItem(pg.BarGraphItem(x0=np.minimum(values, 0), width=np.abs(values), y=ys,
                                     height=0.7, brushes=brushes, pens=[pg.mkPen(None)] * n))
        plot.addItem(pg.InfiniteLine(0, angle=90, pen=pg.mkPen(NEUTRAL, width=1)))
        if labels is not None:
            plot.getAxis("left").setTicks([list(zip(ys, labels, strict=True))])
        plot.setYRange(-0.6, n - 0.4, padding=0)
        plot.setXRange(-span * 1.1, span * 1.1, padding=0)

    # ---- score agreement scatter -------------------------------------------------------------------------
    def _draw_scatter(self, c) -> None:
        plot = self.scatter.plot
        plot.clear()
        plot.enableAutoRange()
        n = c.n
        shown = thin_indices(n, MAX_SCATTER_POINTS, self.ctx.workspace.settings.seed)
        self.shown_points = shown
        self.density_counts = None
        if len(shown) < n:  # large data: every row in a density layer, a sample drawn on top
            self._draw_density(plot, c.response_a, c.response_b)
        cell_of = np.full(n, "both_accept", dtype=object)
        if c.swap is not None:
            for cell, rows in c.swap.rows.items():
                cell_of[rows] = cell
        plot.addLegend(offset=(-4, -4), brush=pg.mkBrush(255, 255, 255, 210))
        size = 4 if len(shown) > 5000 else 6
        for cell in ("both_accept", "both_decline", "swap_in", "swap_out"):
            pick = shown[cell_of[shown] == cell]
            if not len(pick):
                continue
            plot.addItem(pg.ScatterPlotItem(
                c.response_a[pick], c.response_b[pick], size=size, pen=None,
                brush=colour(CELL_COLOURS[cell], 150), name=cell.replace("_", " ")))
        lo = float(min(c.response_a.min(), c.response_b.min()))
        hi = float(max(c.response_a.max(), c.response_b.max()))
        plot.addItem(pg.PlotDataItem([lo, hi], [lo, hi], pen=pg.mkPen(NEUTRAL, width=1,
                                                                       style=Qt.PenStyle.DashLine)))
        if c.cutoff_a is not None:
            for value, angle in ((c.cutoff_a, 90), (c.cutoff_b, 0)):
                plot.addItem(pg.InfiniteLine(value, angle=angle, pen=pg.mkPen(
                    "#6A3D9A", width=1.2, style=Qt.PenStyle.DotLine)))
        thinned = "" if len(shown) == n else (
            f"; grey shading: density of all {n:,} rows, points: {len(shown):,} of them (seeded sample)")
        self.scatter.set_text(f"Score agreement scatter: A against B, one point per row, "
                              f"coloured as the swap table cells, cutoffs dotted{thinned}",
                              f"score of A, champion ({c.units})",
                              f"score of B, challenger ({c.units})")

    def _draw_density(self, plot, a: np.ndarray, b: np.ndarray, bins: int = 80) -> None:
        """A 2-D histogram of all rows as grey shading (darker = more rows, on a log scale)."""
        counts, xe, ye = np.histogram2d(a, b, bins=bins)
        self.density_counts = counts
        level = np.log1p(counts) / max(np.log1p(counts.max()), 1e-12)
        rgba = np.zeros(counts.shape + (4,), dtype=np.uint8)
        rgba[..., :3] = 60
        rgba[..., 3] = (level * 200).astype(np.uint8)
        image = pg.ImageItem(rgba)  # image[x bin, y bin], as histogram2d counts them
        image.setRect(float(xe[0]), float(ye[0]), float(xe[-1] - xe[0]), float(ye[-1] - ye[0]))
        image.setZValue(-10)
        plot.addItem(image)

    def _nearest_point(self, x: float, y: float) -> int | None:
        c = self.comparison
        if c is None or not len(self.shown_points):
            return None
        (x0, x1), (y0, y1) = self.scatter.plot.vb.viewRange()
        dx = (c.response_a[self.shown_points] - x) / ((x1 - x0) or 1)
        dy = (c.response_b[self.shown_points] - y) / ((y1 - y0) or 1)
        k = int(np.argmin(dx * dx + dy * dy))
        if dx[k] ** 2 + dy[k] ** 2 > 0.02 ** 2:
            return None
        return int(self.shown_points[k])

    def _hover_scatter(self, x: float, y: float) -> str | None:
        p = self._nearest_point(x, y)
        if p is None:
            return f"score A {x:.4g}, score B {y:.4g}"
        c = self.comparison
        return (f"row {int(self.rows[p])}: score A {c.response_a[p]:.4g}, score B "
                f"{c.response_b[p]:.4g} (click to see both models' contribution bars)")

    def _scatter_clicked(self, event) -> None:
        point = self.scatter.plot.vb.mapSceneToView(event.scenePos())
        p = self._nearest_point(point.x(), point.y())
        if p is not None:
            self.open_row(int(self.rows[p]))

    # ---- ranking shift ----------------------------------------------------------------------------------------
    def _draw_shift(self, c) -> None:
        r = c.ranking
        plot = self.shift_plot.plot
        plot.clear()
        order = r.order[:SHIFT_SHOWN]
        self.shift_features = [r.features[i] for i in order]
        ys = np.arange(len(order))
        ia, ib = r.importance_a[order], r.importance_b[order]
        for k in range(len(order)):
            plot.addItem(pg.PlotDataItem([ia[k], ib[k]], [ys[k], ys[k]],
                                         pen=pg.mkPen("#999999", width=2)))
        plot.addItem(pg.ScatterPlotItem(ia, ys, symbol="o", size=10, brush=colour(CURVE),
                                        pen=pg.mkPen("w")))
        plot.addItem(pg.ScatterPlotItem(ib, ys, symbol="s", size=10, brush=colour(SECOND),
                                        pen=pg.mkPen("w")))
        labels = [f"{r.features[i]}  ({r.rank_a[i]} → {r.rank_b[i]})" for i in order]
        plot.getAxis("left").setTicks([list(zip(ys, labels, strict=True))])
        plot.setYRange(-0.6, len(order) - 0.4, padding=0)
        hi = float(max(np.max(ia, initial=0), np.max(ib, initial=0)))
        lo = float(min(np.min(ia, initial=0), np.min(ib, initial=0)))
        plot.setXRange(lo - 0.05 * (hi - lo or 1), hi + 0.08 * (hi - lo or 1), padding=0)
        change = "drop" if c.higher_is_better.get(r.metric, True) else "rise"
        self.shift_plot.set_text(
            f"Ranking shift: permutation importance under A (dark circles) and B (orange "
            f"squares), largest rank change first (rank A → rank B; {r.repeats} repeats, "
            f"{r.rows_used:,} rows)", f"{change} in {METRIC_NAMES.get(r.metric, r.metric)}", None)

    def _hover_shift(self, x: float, y: float) -> str | None:
        i = int(round(y))
        if self.comparison is None or not 0 <= i < len(self.shift_features):
            return None
        r = self.comparison.ranking
        j = r.features.index(self.shift_features[i])
        unused = [s for s, u in (("A", r.used_a[j]), ("B", r.used_b[j])) if not u]
        extra = f" (not used by {' or '.join(unused)})" if unused else ""
        return (f"{r.features[j]}: importance A {r.importance_a[j]:.4g}, B "
                f"{r.importance_b[j]:.4g}; rank {r.rank_a[j]} → {r.rank_b[j]}{extra}")

    # ---- double lift chart ------------------------------------------------------------------------------------
    def _draw_lift(self, c) -> None:
        plot = self.lift_plot.plot
        d = c.double_lift
        if d is None:
            message_item(plot, "No double lift chart: " + "; ".join(c.notes))
            return
        plot.clear()
        plot.enableAutoRange()
        x = np.arange(1, d.bands + 1)
        plot.addLegend(offset=(8, 8))
        plot.addItem(pg.InfiniteLine(1.0, angle=0, pen=pg.mkPen(NEUTRAL, width=1,
                                                                 style=Qt.PenStyle.DashLine)))
        for values, name, col, symbol in ((d.actual_relative, "actual", "#000000", "o"),
                                          (d.pred_a_relative, "A (champion)", CURVE, "t"),
                                          (d.pred_b_relative, "B (challenger)", SECOND, "s")):
            plot.addItem(pg.PlotDataItem(x, values, pen=pg.mkPen(col, width=2), symbol=symbol,
                                         symbolBrush=colour(col), symbolPen=None, symbolSize=7,
                                         name=name))
        plot.getAxis("bottom").setTicks([[(int(k), str(int(k))) for k in x]])
        self.lift_plot.set_text(
            "Double lift chart: rows sorted by the ratio B / A into bands of equal weight; "
            "average actual and predictions per band, each over its overall average",
            "band of the ratio B / A (1 = B lowest relative to A)",
            "ratio to the overall average (1 = average)")

    def _hover_lift(self, x: float, y: float) -> str | None:
        c = self.comparison
        if c is None or c.double_lift is None:
            return None
        d = c.double_lift
        k = int(round(x)) - 1
        if not 0 <= k < d.bands:
            return None
        return (f"band {k + 1} (ratio B / A {d.ratio_low[k]:.3g} to {d.ratio_high[k]:.3g}): "
                f"actual {d.actual[k]:.4g}, A {d.pred_a[k]:.4g}, B {d.pred_b[k]:.4g} "
                f"({c.units}); weight {d.weight[k]:.4g}")

    # ---- effect overlay ---------------------------------------------------------------------------------------
    def _fill_features(self, adapter_a, adapter_b) -> None:
        features = list(dict.fromkeys([*adapter_a.input_columns, *adapter_b.input_columns]))
        current = self.overlay_feature.currentText() or self.state.feature
        self.overlay_feature.blockSignals(True)
        self.overlay_feature.clear()
        self.overlay_feature.addItems(features)
        if current in features:
            self.overlay_feature.setCurrentText(current)
        self.overlay_feature.blockSignals(False)

    def request_overlay(self) -> None:
        ws, s = self.ctx.workspace, self.state
        feature = self.overlay_feature.currentText()
        a, b = ws.slot("A"), ws.slot("B")
        if not feature or a is None or b is None or ws.frame is None or not len(self.rows):
            return
        message_item(self.overlay_plot.plot, f"Computing both effect curves of {feature}…")
        rows = self.rows
        if len(rows) > OVERLAY_ROWS:
            pick = np.random.default_rng(ws.settings.seed).choice(len(rows), OVERLAY_ROWS,
                                                                  replace=False)
            rows = np.sort(rows[pick])
        work = PoolTask(engine_call, ("compare", "effect_overlay", Shared(a.adapter),
                                      Shared(b.adapter), Rows(Shared(ws.frame), rows), feature),
                        {"grid_size": 20})

        key = ("overlay", a.sha256, b.sha256, ws.data_key(), s.segment,
               repr(ws.settings.positive_class), feature, len(rows), ws.settings.seed)
        wanted = self.relevant()
        self.ctx.runner.request(
            key, f"Effect overlay of {feature}", work, self.arrival(self._overlay_arrived),
            on_error=lambda e: message_item(self.overlay_plot.plot, f"Effect overlay: {e}"),
            relevant=lambda f=feature: wanted() and self.overlay_feature.currentText() == f)

    def _overlay_arrived(self, overlay) -> None:
        self.overlay = overlay
        plot = self.overlay_plot.plot
        plot.clear()
        plot.enableAutoRange()
        numeric = overlay.kind == "numeric"
        x = np.asarray(overlay.grid, dtype=float) if numeric else np.arange(len(overlay.grid))
        plot.addLegend(offset=(8, 8))
        for values, name, col, used in ((overlay.pd_a, "A (champion)", CURVE, overlay.used_a),
                                        (overlay.pd_b, "B (challenger)", SECOND, overlay.used_b)):
            style = Qt.PenStyle.SolidLine if used else Qt.PenStyle.DashLine
            label = name if used else f"{name}: does not use it"
            plot.addItem(pg.PlotDataItem(x, values, pen=pg.mkPen(col, width=2.2, style=style),
                                         symbol="o" if not numeric else None,
                                         symbolBrush=colour(col), name=label))
        axis = plot.getAxis("bottom")
        if numeric:
            axis.setTicks(None)
        else:
            axis.setTicks([[(i, str(v)) for i, v in enumerate(overlay.grid)]])
        self.overlay_plot.set_text(
            f"Effect overlay: partial dependence of {overlay.feature} under A and B "
            f"({overlay.rows_used:,} rows)", overlay.feature, overlay.units)

    def _hover_overlay(self, x: float, y: float) -> str | None:
        o = self.overlay
        if o is None:
            return None
        if o.kind == "numeric":
            k = int(np.argmin(np.abs(np.asarray(o.grid, dtype=float) - x)))
        else:
            k = int(round(x))
            if not 0 <= k < len(o.grid):
                return None
        return (f"{o.feature} = {_fmt(o.grid[k])}: A {o.pd_a[k]:.4g}, B {o.pd_b[k]:.4g}, "
                f"B − A {o.pd_b[k] - o.pd_a[k]:+.4g} ({o.units})")


__all__ = ["VersionsLevel"]
