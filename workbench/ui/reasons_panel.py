"""Why this decision: reason statements, their stability, nearest flips and similar rows of one case.

A self-contained widget for the Case level. It computes nothing itself: every number comes
from ``workbench.engine.reasons``, ``explanation_stability``, ``flips`` and ``similar``; the
longer ones (nearest flip, stability, similar rows over the whole data) run as jobs on the
window's :class:`~workbench.ui.jobs.JobRunner` when one is given (as picklable
:class:`~workbench.ui.pool_tasks.PoolTask` jobs, so they run in a worker process and leave the
window's thread alone), in the calling thread otherwise. Clicking a flip option emits :attr:`ReasonsPanel.trial_requested` with its values;
clicking a similar row emits :attr:`ReasonsPanel.row_requested` with its position.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QListWidget,
    QListWidgetItem,
    QPushButton,
    QScrollArea,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from workbench.engine.errors import InputError
from workbench.engine.flips import score_text
from workbench.engine.reasons import CutoffSides, ReasonTemplates, reason_statements
from workbench.engine.similar import similar_summary
from workbench.report.render import CAUTIONS
from workbench.ui.pool_tasks import PoolTask, Shared, engine_call, similar_rows_of

NOTE = "color: #555;"
FLAG = "background: #FFF3E0; padding: 4px; border: 1px solid #E0A060;"
CAUTION = "background: #FFF8E1; padding: 6px; border: 1px solid #E0C070;"


@dataclass
class CaseInputs:
    """What the panel needs to know about the case it shows."""

    adapter: object
    values_row: pd.DataFrame
    attributions: object
    data: pd.DataFrame
    cutoff: float
    row: int | None = None
    adverse_if: str = "above"
    background: pd.DataFrame | None = None
    background_size: int = 100
    seed: int = 0
    templates: ReasonTemplates = field(default_factory=ReasonTemplates)
    not_allowed: tuple[str, ...] = ()
    labels: object = None
    key: tuple = ()
    model_name: str = ""
    model_sha256: str = ""
    data_name: str = ""
    data_sha256: str = ""
    id_label: str | None = None
    id_value: object = None
    response: float | None = None  # the case's score when already known (saves a model call)


def _table(headers: list[str], stretch: int | None = None) -> QTableWidget:
    """A read-only table; column ``stretch`` takes the free width and wraps its text."""
    table = QTableWidget(0, len(headers))
    table.setHorizontalHeaderLabels(headers)
    table.verticalHeader().setVisible(False)
    table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    table.setWordWrap(True)
    table.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    header = table.horizontalHeader()
    header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    if stretch is None:
        header.setStretchLastSection(True)
    else:
        header.setSectionResizeMode(stretch, QHeaderView.ResizeMode.Stretch)
    header.sectionResized.connect(lambda *_: _fit(table))
    return table


def _fit(table: QTableWidget, least_rows: int = 1) -> None:
    """Rows sized to their wrapped text, the table as tall as its rows (no inner scrolling)."""
    table.resizeRowsToContents()
    height = table.horizontalHeader().height() + 2 * table.frameWidth() + 2
    rows = table.rowCount()
    height += sum(table.rowHeight(i) for i in range(rows))
    if rows < least_rows:
        height += (least_rows - rows) * table.verticalHeader().defaultSectionSize()
    table.setFixedHeight(height)


def _cell(text) -> QTableWidgetItem:
    item = QTableWidgetItem(str(text))
    item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
    return item


def _label(text: str = "", style: str = "") -> QLabel:
    label = QLabel(text)
    label.setWordWrap(True)
    label.setTextFormat(Qt.TextFormat.PlainText)  # user text (display names) is never markup
    label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    if style:
        label.setStyleSheet(style)
    return label


class WordingDialog(QDialog):
    """Edit how reason statements name each feature: display name, unit, number format, sentence."""

    COLUMNS = ("feature", "display name", "unit", "number format", "own sentence (optional)")

    def __init__(self, features, templates: ReasonTemplates, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Wording of the reason statements")
        self.features = list(features)
        self.outcome = QLineEdit(templates.outcome or "")
        self.outcome.setPlaceholderText("e.g. the estimated default risk (empty: named from the model)")
        self.table = QTableWidget(len(self.features), len(self.COLUMNS))
        self.table.setHorizontalHeaderLabels(list(self.COLUMNS))
        self.table.verticalHeader().setVisible(False)
        self.table.horizontalHeader().setStretchLastSection(True)
        for i, f in enumerate(self.features):
            w = templates.wording(f)
            self.table.setItem(i, 0, _cell(f))
            for j, text in enumerate((w.display_name, w.unit, w.number_format, w.sentence or ""), 1):
                self.table.setItem(i, j, QTableWidgetItem(text))
        self.problem = _label(style="color: #B00020;")
        hint = _label("Sentences may use {name}, {value}, {unit}, {value_with_unit}, {direction}, "
                      "{outcome}, {rank}, {rank_phrase} and {contribution}. Number formats are "
                      "Python formats such as {:.0%} or {:,.0f}.", NOTE)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self._accept)
        buttons.rejected.connect(self.reject)
        form = QFormLayout()
        form.addRow("The score is named", self.outcome)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        layout.addWidget(self.table, 1)
        layout.addWidget(hint)
        layout.addWidget(self.problem)
        layout.addWidget(buttons)
        self.resize(820, 480)

    def as_dict(self) -> dict:
        features = {}
        for i, f in enumerate(self.features):
            cells = [self.table.item(i, j).text().strip() if self.table.item(i, j) else ""
                     for j in range(1, len(self.COLUMNS))]
            features[f] = dict(zip(("display_name", "unit", "number_format", "sentence"), cells,
                                   strict=True))
        return {"outcome": self.outcome.text().strip(), "features": features}

    def result_templates(self) -> ReasonTemplates:
        """The edited wording (InputError when a sentence or format does not work)."""
        return ReasonTemplates.from_dict(self.as_dict())

    def _accept(self) -> None:
        try:
            self.result_templates()
        except InputError as exc:
            self.problem.setText(str(exc))
            return
        self.accept()


class ReasonsPanel(QWidget):
    """Reason statements (with stability marks), nearest flips and similar rows of one case."""

    trial_requested = Signal(dict)  # feature -> value of a flip option, to load as trial values
    row_requested = Signal(int)  # a similar row's position in the data
    templates_changed = Signal(object)  # the analyst edited the wording (a ReasonTemplates)
    not_allowed_changed = Signal(tuple)  # the features the analyst marked not allowed

    def __init__(self, runner=None, parent=None) -> None:
        super().__init__(parent)
        self.runner = runner
        self.case: CaseInputs | None = None
        self.reasons = None
        self.stability = None
        self.flips = None
        self.similar: list = []

        self.message = _label()
        self.reason_table = _table(["rank", "reason statement", "stable"], stretch=1)
        self.flag_label = _label(style=FLAG)
        self.flag_label.hide()
        self.stability_button = QPushButton("Check stability")
        self.stability_button.setToolTip("Re-explain the case with other background samples and mark "
                                         "reasons whose rank changes")
        self.sheet_button = QPushButton("Case sheet…")
        self.sheet_button.setToolTip("Write this case's explanation as HTML or PDF")
        self.sheet_status = _label(style=NOTE)
        self.wording_button = QPushButton("Wording…")
        self.wording_button.setToolTip("Display names, units and sentences of the reason statements")
        self.templates: ReasonTemplates | None = None  # the analyst's wording, kept across cases
        self.not_allowed: tuple[str, ...] | None = None  # the analyst's marks, kept across cases
        self.not_allowed_list = QListWidget()
        self.not_allowed_list.setMaximumHeight(90)
        self.not_allowed_list.setToolTip("Features never stated as reasons and never changed by a "
                                         "flip (protected attributes and the like); flagged to you "
                                         "when they move the score materially")
        self.stability_note = _label(style=NOTE)

        self.actionable = QListWidget()
        self.actionable.setMaximumHeight(110)
        self.actionable.setToolTip("Tick the features the applicant could change")
        self.max_changes = QSpinBox()
        self.max_changes.setRange(1, 3)
        self.max_changes.setValue(3)
        self.max_changes.setPrefix("at most ")
        self.max_changes.setSuffix(" changes")
        self.flip_button = QPushButton("Find the nearest flip")
        self.flip_message = _label(style=NOTE)
        self.flip_table = _table(["option", "changes", "new score", "distance"], stretch=1)
        self.flip_note = _label("Click an option to load it as trial values.", NOTE)

        self.similar_message = _label(style=NOTE)
        self.similar_table = _table(["row", "Gower distance", "score", "label"], stretch=3)
        self.similar_note = _label("Click a row to open it as the case.", NOTE)
        self.cautions = _label(" ".join(CAUTIONS), CAUTION)

        flip_controls = QHBoxLayout()
        flip_controls.addWidget(self.max_changes)
        flip_controls.addWidget(self.flip_button, 1)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        reason_buttons = QHBoxLayout()
        reason_buttons.addWidget(self.stability_button, 1)
        reason_buttons.addWidget(self.wording_button)
        reason_buttons.addWidget(self.sheet_button)
        for widget in (QLabel("<b>Reason statements</b>"), self.message, self.reason_table,
                       self.flag_label):
            layout.addWidget(widget)
        layout.addLayout(reason_buttons)
        for widget in (self.stability_note, QLabel("Never stated as reasons (not allowed):"),
                       self.not_allowed_list,
                       QLabel("<b>Nearest flip</b> — actionable features:"), self.actionable):
            layout.addWidget(widget)
        layout.addLayout(flip_controls)
        for widget in (self.flip_message, self.flip_table, self.flip_note,
                       QLabel("<b>Similar rows</b>"), self.similar_message, self.similar_table,
                       self.similar_note, self.sheet_status, self.cautions):
            layout.addWidget(widget)

        self.flip_button.clicked.connect(self.find_flips)
        self.stability_button.clicked.connect(self.check_stability)
        self.wording_button.clicked.connect(self.edit_wording)
        self.sheet_button.clicked.connect(self._ask_sheet_path)
        self.not_allowed_list.itemChanged.connect(self._not_allowed_edited)
        self.flip_table.cellClicked.connect(self._flip_clicked)
        self.similar_table.cellClicked.connect(self._similar_clicked)
        self.clear("No case chosen.")

    # ---- showing a case ------------------------------------------------------------------------
    def clear(self, message: str) -> None:
        self.case, self.reasons, self.stability, self.flips, self.similar = None, None, None, None, []
        self.message.setText(message)
        for table in (self.reason_table, self.flip_table, self.similar_table):
            table.setRowCount(0)
            _fit(table)
        self.flag_label.hide()
        self.flip_message.setText("")
        self.stability_note.setText("")
        self.similar_message.setText("")

    def set_case(self, case: CaseInputs, *, actionable=None) -> None:
        """Show the reasons of ``case`` now; similar rows follow (a job over the whole data)."""
        previous = self._ticked() if self.case is not None else None
        if self.templates is not None:
            case.templates = self.templates
        if self.not_allowed is not None:
            case.not_allowed = self.not_allowed
        self.case, self.stability, self.flips, self.similar = case, None, None, []
        self._fill_not_allowed()
        self._state_reasons()
        self._fill_actionable(actionable if actionable is not None else previous)
        self.flip_table.setRowCount(0)
        self.flip_message.setText("Tick the actionable features and press the button.")
        self.stability_note.setText("")
        self._request_similar()

    def _fill_not_allowed(self) -> None:
        case = self.case
        self.not_allowed_list.blockSignals(True)
        self.not_allowed_list.clear()
        for f in case.adapter.input_columns:
            item = QListWidgetItem(case.templates.wording(f).display_name)
            item.setData(Qt.ItemDataRole.UserRole, f)
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Checked if f in case.not_allowed
                               else Qt.CheckState.Unchecked)
            self.not_allowed_list.addItem(item)
        self.not_allowed_list.blockSignals(False)

    def set_not_allowed(self, features) -> None:
        """Mark these features not allowed from now on (restating the current case's reasons)."""
        self.not_allowed = tuple(dict.fromkeys(map(str, features)))
        if self.case is not None:
            ticked = [f for f in self._ticked() if f not in self.not_allowed]
            self.case.not_allowed = self.not_allowed
            self._fill_not_allowed()
            self._state_reasons()
            self._fill_actionable(ticked)
            self.stability = None

    def _not_allowed_edited(self, _item) -> None:
        marked = tuple(self.not_allowed_list.item(i).data(Qt.ItemDataRole.UserRole)
                       for i in range(self.not_allowed_list.count())
                       if self.not_allowed_list.item(i).checkState() == Qt.CheckState.Checked)
        self.set_not_allowed(marked)
        self.not_allowed_changed.emit(marked)

    def set_templates(self, templates: ReasonTemplates) -> None:
        """Use this wording from now on (restating the current case's reasons)."""
        self.templates = templates
        if self.case is not None:
            self.case.templates = templates
            self._state_reasons()

    def edit_wording(self) -> None:
        if self.case is None:
            return
        dialog = WordingDialog(self.case.adapter.input_columns, self.case.templates, self)
        if dialog.exec() == QDialog.DialogCode.Accepted:
            templates = dialog.result_templates()
            self.set_templates(templates)
            self.templates_changed.emit(templates)

    def _state_reasons(self) -> None:
        case = self.case
        try:
            self.reasons = reason_statements(
                case.attributions, case.values_row, adapter=case.adapter, cutoff=case.cutoff,
                adverse_if=case.adverse_if, templates=case.templates, not_allowed=case.not_allowed,
                on_request=True, response=case.response, sides=self.sides())
        except InputError as exc:
            self.reasons = None
            self.message.setText(str(exc))
        self._show_reasons()

    def _show_reasons(self) -> None:
        result, table = self.reasons, self.reason_table
        table.setRowCount(0)
        self.flag_label.hide()
        if result is None:
            return
        text = result.message
        if not result.adverse and result.reasons:
            text += f" Shown for information: no reasons are due on {self.sides().other}."
        self.message.setText(text)
        unstable = set(self.stability.unstable) if self.stability is not None else set()
        table.setRowCount(len(result.reasons))
        for i, reason in enumerate(result.reasons):
            table.setItem(i, 0, _cell(reason.rank))
            table.setItem(i, 1, _cell(reason.text))
            mark = "—" if self.stability is None else ("not stable" if reason.feature in unstable else "yes")
            table.setItem(i, 2, _cell(mark))
        _fit(table)
        if result.flagged_not_allowed:
            self.flag_label.setText("For the analyst, not for the applicant: "
                                    + " ".join(f.text for f in result.flagged_not_allowed))
            self.flag_label.show()

    def sides(self) -> CutoffSides:
        """This case's cutoff sides in plain words (see :meth:`CutoffSides.plain`)."""
        case = self.case
        if case is None:
            return CutoffSides("the cutoff's upper side", "the cutoff's lower side")
        return CutoffSides.plain(case.adapter, case.adverse_if, getattr(case.labels, "name", None))

    def _fill_actionable(self, ticked) -> None:
        case = self.case
        ticked = set(ticked or ())
        self.actionable.clear()
        for f in case.adapter.input_columns:
            item = QListWidgetItem(case.templates.wording(f).display_name)
            item.setData(Qt.ItemDataRole.UserRole, f)
            blocked = f in case.not_allowed
            flags = item.flags() | Qt.ItemFlag.ItemIsUserCheckable
            if blocked:
                flags &= ~Qt.ItemFlag.ItemIsEnabled
                item.setToolTip("marked not allowed: a flip never changes it")
            item.setFlags(flags)
            item.setCheckState(Qt.CheckState.Checked if f in ticked and not blocked
                               else Qt.CheckState.Unchecked)
            self.actionable.addItem(item)

    def _ticked(self) -> list[str]:
        return [self.actionable.item(i).data(Qt.ItemDataRole.UserRole)
                for i in range(self.actionable.count())
                if self.actionable.item(i).checkState() == Qt.CheckState.Checked]

    def set_actionable(self, features) -> None:
        if self.case is not None:
            self._fill_actionable(features)

    # ---- jobs ----------------------------------------------------------------------------------
    def _run(self, key, title, fn, on_done) -> None:
        def failed(exc):
            on_done(exc)

        if self.runner is None:
            try:
                result = fn(None, None)
            except Exception as exc:  # noqa: BLE001 - shown to the analyst in the panel
                result = exc
            on_done(result)
            return
        case = self.case
        self.runner.request(key, title, fn, on_done, on_error=failed,
                            relevant=lambda: self.case is case)

    def find_flips(self) -> None:
        case = self.case
        if case is None:
            return
        actionable = self._ticked()
        if not actionable:
            self.flip_message.setText("Tick at least one feature the applicant could change.")
            return
        max_changes = self.max_changes.value()
        self.flip_message.setText("Searching the nearest flip…")

        work = PoolTask(engine_call, ("flips", "nearest_flips", Shared(case.adapter),
                                      case.values_row, Shared(case.data)),
                        {"cutoff": case.cutoff, "adverse_if": case.adverse_if,
                         "actionable": actionable, "immutable": case.not_allowed,
                         "max_changes": max_changes, "seed": case.seed})

        key = ("nearest flip", case.key, tuple(actionable), max_changes, case.cutoff, case.adverse_if)
        self._run(key, "Nearest flip of one case", work, self._show_flips)

    def _show_flips(self, result) -> None:
        table = self.flip_table
        table.setRowCount(0)
        if isinstance(result, BaseException):
            self.flips = None
            self.flip_message.setText(str(result) or type(result).__name__)
            return
        self.flips = result
        self.flip_message.setText(result.message)
        wording = self.case.templates.wording if self.case is not None else None
        table.setRowCount(len(result.options))
        for i, option in enumerate(result.options):
            moves = "; ".join(f"{wording(f).display_name if wording else f}: {a} → {b}"
                              for f, a, b in option.changes)
            for j, text in enumerate((i + 1, moves, score_text(option.new_response, result.cutoff),
                                      f"{option.distance:.3g}")):
                table.setItem(i, j, _cell(text))
        _fit(table)

    def _flip_clicked(self, row: int, _column: int) -> None:
        if self.flips is not None and 0 <= row < len(self.flips.options):
            self.trial_requested.emit(self.flips.options[row].trial_values())

    def check_stability(self) -> None:
        case = self.case
        if case is None or self.reasons is None:
            return
        pool = case.background if case.background is not None else case.data
        self.stability_note.setText("Re-explaining the case with other background samples…")

        work = PoolTask(engine_call, ("explanation_stability", "reason_stability",
                                      Shared(case.adapter), case.values_row, Shared(pool)),
                        {"background_size": min(case.background_size, len(pool) - 1),
                         "seed": case.seed, "k": self.reasons.k, "adverse_if": case.adverse_if,
                         "not_allowed": case.not_allowed})

        self._run(("reason stability", case.key, case.background_size, case.seed),
                  "Reason stability of one case", work, self._show_stability)

    def _show_stability(self, result) -> None:
        if isinstance(result, BaseException):
            self.stability = None
            self.stability_note.setText(str(result) or type(result).__name__)
            return
        self.stability = result
        unstable = ", ".join(result.unstable) or "none"
        self.stability_note.setText(
            f"{result.resamples} other background samples of {result.background_size} rows: "
            f"reasons whose rank changed in more than {result.threshold:.0%} of them are marked "
            f"not stable (common practice, no source). Not stable: {unstable}.")
        self._show_reasons()

    def _ask_sheet_path(self) -> None:
        if self.case is None:
            return
        path, _ = QFileDialog.getSaveFileName(self, "Write the case sheet",
                                              f"case-sheet-row-{self.case.row}.pdf",
                                              "PDF (*.pdf);;HTML (*.html)")
        if path:
            self.write_sheet(path)

    def write_sheet(self, path) -> str | None:
        """Write the case sheet of what the panel shows (flip and stability only if computed)."""
        case = self.case
        if case is None or self.reasons is None:
            return None
        from workbench.report.case_sheet import case_sheet_context, write_case_sheet

        label = None
        if case.labels is not None and case.row is not None and not self._trial_values():
            label = case.labels.iloc[case.row]
        try:
            context = case_sheet_context(
                adapter=case.adapter, values_row=case.values_row, attributions=case.attributions,
                cutoff=case.cutoff, adverse_if=case.adverse_if, reasons=self.reasons,
                stability=self.stability, flips=self.flips,
                similar=self.similar if self.similar else None,
                similar_summary=self.similar_message.text() or None, templates=case.templates,
                model_name=case.model_name, model_sha256=case.model_sha256,
                data_name=case.data_name, data_sha256=case.data_sha256,
                data_rows=len(case.data), row=case.row if case.row is not None else 0,
                id_label=case.id_label, id_value=case.id_value, label=label,
                background_source="the reference data" if case.background is not None else "")
            written = str(write_case_sheet(path, context))
        except (InputError, OSError) as exc:
            self.sheet_status.setText(f"The case sheet was not written: {exc}")
            return None
        self.sheet_status.setText(f"Case sheet written: {written}")
        return written

    def _trial_values(self) -> bool:
        """True when the values shown differ from the row in the data (trial values)."""
        case = self.case
        if case.row is None:
            return True
        original = case.data.iloc[[case.row]][list(case.values_row.columns)].reset_index(drop=True)
        shown = case.values_row.reset_index(drop=True)
        return not original.astype(object).equals(shown.astype(object))

    def _request_similar(self) -> None:
        case = self.case
        self.similar_table.setRowCount(0)
        if case.row is None:
            self.similar_message.setText("")
            return
        self.similar_message.setText("Finding similar rows…")

        labels = Shared(case.labels) if case.labels is not None else None
        work = PoolTask(similar_rows_of, (Shared(case.adapter), Shared(case.data), int(case.row),
                                          labels))

        # Similar rows are those of the row in the data, whatever its trial values: one job per
        # row, not one per edit (case.key ends with the trial values' digest).
        self._run(("similar rows", case.key[:-1], case.row), "Similar rows of one case", work,
                  self._show_similar)

    def _show_similar(self, result) -> None:
        table = self.similar_table
        table.setRowCount(0)
        if isinstance(result, BaseException):
            self.similar = []
            self.similar_message.setText(str(result) or type(result).__name__)
            return
        self.similar = list(result)
        case = self.case
        self.similar_message.setText(similar_summary(
            self.similar, cutoff=case.cutoff if case else None,
            adverse_if=case.adverse_if if case else "above", sides=self.sides()))
        table.setRowCount(len(self.similar))
        for i, s in enumerate(self.similar):
            pred = "—" if s.prediction is None else f"{s.prediction:.4g}"
            label = "—" if s.label is None else s.label
            for j, text in enumerate((s.row, f"{s.distance:.3g}", pred, label)):
                table.setItem(i, j, _cell(text))
        _fit(table)

    def _similar_clicked(self, row: int, _column: int) -> None:
        if 0 <= row < len(self.similar):
            self.row_requested.emit(int(self.similar[row].row))


def scrolled(panel: QWidget) -> QScrollArea:
    """The panel in a scroll area, for a narrow pane beside the contribution bars."""
    area = QScrollArea()
    area.setWidgetResizable(True)
    area.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    area.setWidget(panel)
    area.setMinimumWidth(300)
    return area


def show_for_case_level(panel: ReasonsPanel, level, attributions) -> None:
    """Fill ``panel`` from the Case level's workspace, focus and trial values."""
    ws, state = level.ctx.workspace, level.state
    adapter = ws.adapter(state.model)
    if adapter is None or ws.frame is None or state.row is None:
        panel.clear("No case chosen.")
        return
    settings, slot = ws.settings, ws.slot(state.model)
    values = level.trial_frame()[list(adapter.input_columns)]
    digest = getattr(level, "_digest", "")
    panel.set_case(CaseInputs(
        adapter=adapter, values_row=values, attributions=attributions, data=ws.frame,
        cutoff=float(settings.cutoff), row=int(state.row), background=ws.background_frame(),
        background_size=int(settings.background_size), seed=int(settings.seed),
        labels=ws.labels(state.model),
        key=(ws.generation, state.model, int(state.row), digest),
        model_name=slot.name, model_sha256=slot.sha256,
        data_name=ws.data.path.name if ws.data.path else "", data_sha256=ws.data.sha256,
        id_label=ws.data.id_column,
        id_value=ws.frame[ws.data.id_column].iloc[state.row] if ws.data.id_column else None,
        response=getattr(level, "trial_score", None)))


def load_trial_values(table: QTableWidget, values: dict, *, value_column: int = 2) -> None:
    """Put ``values`` into a feature table's trial-value cells (combo boxes or text cells)."""
    for i in range(table.rowCount()):
        name = table.item(i, 0)
        if name is None or name.text() not in values:
            continue
        value = values[name.text()]
        widget = table.cellWidget(i, value_column)
        if widget is not None and hasattr(widget, "setCurrentText"):
            widget.setCurrentText(str(value))
        elif table.item(i, value_column) is not None:
            table.item(i, value_column).setText(f"{value:.6g}" if isinstance(value, float) else str(value))


__all__ = ["CaseInputs", "ReasonsPanel", "load_trial_values", "scrolled", "show_for_case_level"]
