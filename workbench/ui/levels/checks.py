"""Checks: the audit checks of model A with pass / warn / fail, their evidence, and a link to the
level that shows it.

The analyst declares the expected direction of each numeric feature and, optionally, a group
column for the adverse impact ratio; "Run checks" runs ``workbench.engine.checks.run_checks``
as a job (progress and cancel in the job area). Status is shown as a word and a shape in a
colour from a colour-blind-safe set (● pass, ▲ warn, ■ fail), so it never rests on colour
alone. The results, expectations and an audit entry go into the window's project
(:func:`project_of`), which the Dossier level prints.
"""

from __future__ import annotations

import html

from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from workbench.engine.cache import cache_key
from workbench.engine.checks import DIRECTIONS
from workbench.session.audit import record
from workbench.session.project import Project
from workbench.ui.context import project_of
from workbench.ui.levels.base import Level, register_level
from workbench.ui.pool_tasks import PoolTask, Shared, engine_call

STATUS_MARKS = {"pass": ("●", "#009E73", "pass"), "warn": ("▲", "#B07A00", "warn"),
                "fail": ("■", "#D55E00", "fail")}
NO_GROUP = "(no group)"
FOCUS_FIELDS = ("feature", "row", "pair")


def sync_project(project: Project, workspace) -> Project:
    """Record the open files and the settings of ``workspace`` in ``project``."""
    for slot, role in (("A", "model_a"), ("B", "model_b")):
        held = workspace.slot(slot)
        if held is not None:
            project.set_input(role, held.loaded.path, sha256=held.loaded.sha256,
                              trust=bool(held.loaded.trusted_types) or held.loaded.format != "skops")
    for data, role in ((workspace.data, "data"), (workspace.reference, "reference")):
        if data is not None and data.path is not None:
            project.set_input(role, data.path, sha256=data.sha256)
    s = workspace.settings
    project.settings.update(target=s.target, positive_class=s.positive_class, cutoff=s.cutoff,
                            background_size=s.background_size, seed=s.seed,
                            id_column=None if workspace.data is None else workspace.data.id_column)
    return project


def status_item(status: str) -> QTableWidgetItem:
    shape, colour, word = STATUS_MARKS[status]
    item = QTableWidgetItem(f"{shape} {word.upper()}")
    item.setForeground(QBrush(QColor(colour)))
    item.setData(Qt.ItemDataRole.UserRole, status)
    return item


def evidence_html(check: dict) -> str:
    """The evidence of one check as escaped HTML (every value passes through html.escape)."""
    e = html.escape
    shape, colour, word = STATUS_MARKS[check["status"]]
    parts = [f"<h3>{e(check['title'])}</h3>",
             f"<p><span style='color:{colour}'>{shape}</span> <b>{e(word.upper())}</b>: "
             f"{e(check['summary'])}</p>"]
    if check.get("caution"):
        parts.append(f"<p><i>{e(check['caution'])}</i></p>")
    scalars, tables = [], []
    for key, value in (check.get("evidence") or {}).items():
        if isinstance(value, list) and value and isinstance(value[0], dict):
            tables.append((key, value))
        else:
            scalars.append((key, value))
    if scalars:
        parts.append("<table border='1' cellspacing='0' cellpadding='3'>")
        parts += [f"<tr><th align='left'>{e(str(k))}</th><td>{e(_fmt(v))}</td></tr>"
                  for k, v in scalars]
        parts.append("</table>")
    for key, rows in tables:
        columns = list(dict.fromkeys(c for r in rows for c in r))
        parts.append(f"<p><b>{e(str(key))}</b></p><table border='1' cellspacing='0' cellpadding='3'>")
        parts.append("<tr>" + "".join(f"<th>{e(str(c))}</th>" for c in columns) + "</tr>")
        for r in rows[:60]:
            parts.append("<tr>" + "".join(f"<td>{e(_fmt(r.get(c)))}</td>" for c in columns) + "</tr>")
        parts.append("</table>")
    params = check.get("parameters") or {}
    if params:
        parts.append("<p class='muted'>Parameters: " + e(", ".join(f"{k}={_fmt(v)}" for k, v in params.items()))
                     + "</p>")
    return "".join(parts)


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:.4g}"
    if value is None:
        return "—"
    return str(value)

BEFORE_THE_FIRST_RUN = (
    "<p style='color:#555'>Set the expected direction of each numeric feature (and a group "
    "column for the adverse impact ratio), then press <b>Run checks</b>. Each check is listed "
    "with pass, warn or fail; choose one to read its evidence here.</p>")


@register_level
class ChecksLevel(Level):
    name, order = "Checks", 70
    summary = "Audit checks with pass / warn / fail and their evidence."

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Checks</b>")
        self.note = QLabel("")
        self.note.setWordWrap(True)
        self.run_button = QPushButton("Run checks")
        self.run_button.clicked.connect(self.run_checks)
        self.group = QComboBox()
        self.group.setToolTip("Column of group labels for the adverse impact ratio (need not be "
                              "a model input); uses the cutoff in the settings")
        self.directions = QTableWidget(0, 2)
        self.directions.setHorizontalHeaderLabels(["Feature", "Expected"])
        # Feature names in full (they are what the analyst reads); the direction box after them.
        self.directions.horizontalHeader().setSectionResizeMode(
            0, QHeaderView.ResizeMode.ResizeToContents)
        self.directions.horizontalHeader().setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.directions.verticalHeader().setVisible(False)
        self.table = QTableWidget(0, 3)
        self.table.setHorizontalHeaderLabels(["Status", "Check", "Finding"])
        self.table.horizontalHeader().setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().setVisible(False)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.itemSelectionChanged.connect(self._selected)
        self.evidence = QTextBrowser()
        self.evidence.setObjectName("check-evidence")
        self.link = QPushButton("Show the evidence")
        self.link.setEnabled(False)
        self.link.clicked.connect(self.follow_link)

        controls = QHBoxLayout()
        controls.addWidget(QLabel("Group"))
        controls.addWidget(self.group)
        controls.addStretch(1)
        controls.addWidget(self.run_button)
        left = QWidget()
        lv = QVBoxLayout(left)
        lv.setContentsMargins(0, 0, 0, 0)
        lv.addWidget(QLabel("Expected directions"))
        lv.addWidget(self.directions, 1)
        middle = QWidget()
        mv = QVBoxLayout(middle)
        mv.setContentsMargins(0, 0, 0, 0)
        mv.addWidget(self.table, 1)
        right = QWidget()
        rv = QVBoxLayout(right)
        rv.setContentsMargins(0, 0, 0, 0)
        rv.addWidget(self.evidence, 1)
        rv.addWidget(self.link)
        split = QSplitter()
        for w in (left, middle, right):
            split.addWidget(w)
        split.setSizes([330, 520, 390])
        layout = QVBoxLayout(self)
        layout.addWidget(self.heading)
        layout.addLayout(controls)
        layout.addWidget(self.note)
        layout.addWidget(split, 1)
        self.results: list[dict] = []
        self._features: tuple = ()

    # ---- state --------------------------------------------------------------------------------
    def view_key(self) -> tuple:
        return (self.ctx.workspace.generation,)

    def render(self) -> None:
        ws = self.ctx.workspace
        adapter = ws.adapter("A")
        if adapter is None or ws.frame is None:
            self.note.setText("Open model A and a data file to run the checks.")
            self.run_button.setEnabled(False)
            self._fill_directions(None)
            return
        self.run_button.setEnabled(True)
        self._fill_directions(adapter)
        self._fill_groups(ws.frame, adapter)
        bits = []
        if ws.settings.target is None:
            bits.append("no target chosen: leakage and calibration are left out")
        if ws.reference is None:
            bits.append("no reference data: stability is left out")
        self.note.setText("; ".join(bits))
        stored = project_of(self.ctx).checks
        if stored and not self.results:
            self.show_results(stored)
        if not self.results:
            self.evidence.setHtml(BEFORE_THE_FIRST_RUN)

    def _fill_directions(self, adapter) -> None:
        numeric = () if adapter is None else tuple(
            c for c in adapter.input_columns if c not in adapter.categorical_columns
            and self.ctx.workspace.frame is not None and c in self.ctx.workspace.frame.columns
            and self.ctx.workspace.frame[c].dtype.kind in "biuf")
        if numeric == self._features:
            return
        self._features = numeric
        saved = project_of(self.ctx).expectations
        self.directions.setRowCount(len(numeric))
        for i, f in enumerate(numeric):
            item = QTableWidgetItem(f)
            item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
            self.directions.setItem(i, 0, item)
            box = QComboBox()
            box.addItems(DIRECTIONS)
            box.setCurrentText(saved.get(f, "none"))
            self.directions.setCellWidget(i, 1, box)

    def _fill_groups(self, frame, adapter) -> None:
        current = self.group.currentText()
        choices = [NO_GROUP] + [str(c) for c in frame.columns
                                if frame[c].dtype.kind not in "f" and frame[c].nunique() <= 20]
        self.group.blockSignals(True)
        self.group.clear()
        self.group.addItems(choices)
        self.group.setCurrentText(current if current in choices else NO_GROUP)
        self.group.blockSignals(False)

    def expectations(self) -> dict[str, str]:
        out = {}
        for i in range(self.directions.rowCount()):
            direction = self.directions.cellWidget(i, 1).currentText()
            if direction != "none":
                out[self.directions.item(i, 0).text()] = direction
        return out

    def set_expectation(self, feature: str, direction: str) -> None:
        for i in range(self.directions.rowCount()):
            if self.directions.item(i, 0).text() == feature:
                self.directions.cellWidget(i, 1).setCurrentText(direction)
                return
        raise KeyError(feature)

    # ---- running ------------------------------------------------------------------------------
    def run_checks(self) -> None:
        ws = self.ctx.workspace
        adapter = ws.adapter("A")
        if adapter is None or ws.frame is None:
            return
        expectations = self.expectations()
        group = None if self.group.currentText() in ("", NO_GROUP) else self.group.currentText()
        s = ws.settings
        frame = ws.frame
        target = s.target if s.target in frame.columns else None
        reference = None if ws.reference is None else ws.reference.frame
        ids = ws.data.ids
        params = {"expectations": expectations, "group": group, "cutoff": s.cutoff,
                  "seed": s.seed, "target": target, "reference": reference is not None}

        # A worker process's job (in a thread it held Python's lock and froze the window).
        work = PoolTask(engine_call, ("checks", "run_checks", Shared(adapter), Shared(frame),
                                      target),
                        {"reference": Shared(reference) if reference is not None else None,
                         "expectations": expectations, "group": group,
                         "cutoff": s.cutoff if group else None, "seed": s.seed,
                         "background_size": s.background_size,
                         "ids": Shared(ids) if ids is not None else None})

        def done(results):
            project = sync_project(project_of(self.ctx), ws)
            project.expectations = dict(expectations)
            project.settings["group"] = group
            project.checks = [r.as_dict() for r in results]
            project.results["checks"] = cache_key(ws.slot("A").sha256, ws.data.sha256, None,
                                                  "run_checks", params)
            record(project, "audit checks", params)
            self.show_results(project.checks)

        key = ("checks", ws.slot("A").sha256, ws.data_key(), repr(s.positive_class), target,
               tuple(sorted(expectations.items())), group, s.cutoff, s.seed, s.background_size)
        self.note.setText("Running the checks…")
        self.ctx.runner.request(key, "Audit checks (model A)", work, self.arrival(done),
                                on_error=lambda exc: self.note.setText(f"The checks failed: {exc}"),
                                relevant=self.relevant())

    def show_results(self, results: list[dict]) -> None:
        self.results = list(results)
        self.table.setRowCount(len(self.results))
        for i, check in enumerate(self.results):
            self.table.setItem(i, 0, status_item(check["status"]))
            self.table.setItem(i, 1, QTableWidgetItem(check["id"]))
            self.table.setItem(i, 2, QTableWidgetItem(check["summary"]))
        counts = {s: sum(c["status"] == s for c in self.results) for s in STATUS_MARKS}
        self.note.setText(f"{counts['pass']} passed, {counts['warn']} warned, "
                          f"{counts['fail']} failed")
        if self.results:
            self.table.selectRow(0)

    def _selected(self) -> None:
        rows = self.table.selectionModel().selectedRows() if self.table.selectionModel() else []
        if not rows:
            self.link.setEnabled(False)
            return
        check = self.results[rows[0].row()]
        self.evidence.setHtml(evidence_html(check))
        self.link.setText(f"Show in {check['level']}")
        self.link.setEnabled(True)

    def selected_check(self) -> dict | None:
        rows = self.table.selectionModel().selectedRows()
        return self.results[rows[0].row()] if rows else None

    def follow_link(self) -> None:
        check = self.selected_check()
        if check is None:
            return
        changes = {k: v for k, v in (check.get("focus") or {}).items() if k in FOCUS_FIELDS}
        if "row" in changes and (self.ctx.workspace.n_rows <= int(changes["row"])):
            changes.pop("row")
        self.go(level=check["level"], **changes)
