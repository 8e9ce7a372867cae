"""Dossier: the sign-off document being assembled from the window's project.

Sections to include (checkboxes), the analyst's notes, the sign-off fields, and buttons to
export HTML or PDF (``workbench.report.dossier.write_dossier`` run as a job) and to save or
open the project file (``workbench.session.project``). Opening a project whose input files
changed asks to re-link each changed file or to stop; nothing changed is used silently.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import (
    QCheckBox,
    QFileDialog,
    QFormLayout,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMessageBox,
    QPlainTextEdit,
    QPushButton,
    QVBoxLayout,
)

from workbench.engine.errors import InputError
from workbench.report.dossier import SECTIONS, DossierInputs, write_dossier
from workbench.session.project import (
    InputsChanged,
    autosave,
    open_project,
    recovery_candidate,
    save_project,
)
from workbench.ui.levels.base import Level, register_level
from workbench.ui.levels.checks import project_of, sync_project

AUTOSAVE_SECONDS = 120  # a crash loses at most this much typing (recovered on opening)
SIGNOFF_FIELDS = (("name", "Name"), ("role", "Role"), ("date", "Date"),
                  ("decision", "Decision"), ("conditions", "Conditions"))


def ask_relink(parent, change) -> Path | None:
    """Ask for the file to use instead of a changed input; None means stop (tests patch it)."""
    answer = QMessageBox.question(
        parent, "An input file changed", change.describe() + "\n\nRe-link it to a file you choose?",
        QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No,
        QMessageBox.StandardButton.No)
    if answer != QMessageBox.StandardButton.Yes:
        return None
    path, _ = QFileDialog.getOpenFileName(parent, f"Re-link {change.role}", change.path)
    return Path(path) if path else None


@register_level
class DossierLevel(Level):
    name, order = "Dossier", 80
    summary = "The sign-off document being assembled, exported as HTML and PDF."

    def __init__(self, ctx, parent=None) -> None:
        super().__init__(ctx, parent)
        self.heading = QLabel("<b>Dossier</b> — the sign-off document")
        self.status = QLabel("")
        self.status.setWordWrap(True)
        box = QGroupBox("Sections")
        grid = QGridLayout(box)
        self.section_boxes: dict[str, QCheckBox] = {}
        for i, (key, title) in enumerate(SECTIONS):
            check = QCheckBox(title)
            check.setChecked(True)
            self.section_boxes[key] = check
            grid.addWidget(check, i % 6, i // 6)
        self.notes = QPlainTextEdit()
        self.notes.setPlaceholderText("The analyst's notes (a blank line starts a new paragraph)")
        self.fields: dict[str, QLineEdit] = {}
        form_box = QGroupBox("Sign-off")
        form = QFormLayout(form_box)
        for key, label in SIGNOFF_FIELDS:
            self.fields[key] = QLineEdit()
            form.addRow(label, self.fields[key])
        self.cases_label = QLabel("")
        self.add_case = QPushButton("Add the focused row")
        self.add_case.setToolTip("Put the row in focus among the dossier's chosen cases")
        self.clear_cases = QPushButton("Clear")
        self.add_case.clicked.connect(self.add_focused_case)
        self.clear_cases.clicked.connect(self._clear_cases)
        cases = QHBoxLayout()
        cases.addWidget(self.cases_label, 1)
        cases.addWidget(self.add_case)
        cases.addWidget(self.clear_cases)
        self.export_html = QPushButton("Export HTML…")
        self.export_pdf = QPushButton("Export PDF…")
        self.save_button = QPushButton("Save project…")
        self.open_button = QPushButton("Open project…")
        self.export_html.clicked.connect(lambda: self._ask_export(".html"))
        self.export_pdf.clicked.connect(lambda: self._ask_export(".pdf"))
        self.save_button.clicked.connect(self._ask_save)
        self.open_button.clicked.connect(self._ask_open)
        buttons = QHBoxLayout()
        for b in (self.export_html, self.export_pdf):
            buttons.addWidget(b)
        buttons.addStretch(1)
        for b in (self.open_button, self.save_button):
            buttons.addWidget(b)
        layout = QVBoxLayout(self)
        layout.addWidget(self.heading)
        layout.addWidget(box)
        layout.addWidget(QLabel("Notes"))
        layout.addWidget(self.notes, 1)
        layout.addWidget(form_box)
        layout.addLayout(cases)
        layout.addLayout(buttons)
        layout.addWidget(self.status)
        self.last_export: Path | None = None
        self.autosave_timer = QTimer(self)
        self.autosave_timer.setInterval(AUTOSAVE_SECONDS * 1000)
        self.autosave_timer.timeout.connect(self.autosave_now)
        self.autosave_timer.start()

    def file_actions(self) -> list[tuple[str, object]]:
        """Entries a shell may add to its File menu."""
        return [("Open project…", self._ask_open), ("Save project…", self._ask_save)]

    # ---- state ----------------------------------------------------------------------------
    def view_key(self) -> tuple:
        return (self.ctx.workspace.generation, id(project_of(self.ctx)))

    def render(self) -> None:
        project = project_of(self.ctx)
        self.notes.setPlainText(project.notes)
        for key, edit in self.fields.items():
            edit.setText(str(project.signoff.get(key) or ""))
        chosen = set(project.sections or self.section_boxes)
        for key, check in self.section_boxes.items():
            check.setChecked(key in chosen)
        self._show_cases()
        ready = self.ctx.workspace.adapter("A") is not None and self.ctx.workspace.data is not None
        self.export_html.setEnabled(ready)
        self.export_pdf.setEnabled(ready)
        if not ready:
            self.status.setText("Open model A and a data file to build the dossier.")

    def _show_cases(self) -> None:
        rows = project_of(self.ctx).cases
        self.cases_label.setText("Chosen cases: " + (", ".join(f"row {r}" for r in rows)
                                                     if rows else "none"))

    def add_focused_case(self) -> None:
        row = self.state.row
        cases = project_of(self.ctx).cases
        if row is not None and row not in cases:
            cases.append(int(row))
        self._show_cases()

    def _clear_cases(self) -> None:
        project_of(self.ctx).cases.clear()
        self._show_cases()

    def collect(self):
        """Copy what the analyst typed into the project and return it."""
        project = sync_project(project_of(self.ctx), self.ctx.workspace)
        project.notes = self.notes.toPlainText()
        project.signoff = {k: e.text() for k, e in self.fields.items()}
        project.sections = [k for k, c in self.section_boxes.items() if c.isChecked()]
        return project

    def _inputs(self) -> DossierInputs:
        ws = self.ctx.workspace
        a, b = ws.slot("A"), ws.slot("B")
        data = ws.data
        target = ws.settings.target if ws.settings.target in data.frame.columns else None
        if target != data.target:
            from dataclasses import replace

            data = replace(data, target=target)
        return DossierInputs(a.loaded, a.adapter, data, ws.reference,
                             None if b is None else b.loaded, None if b is None else b.adapter)

    # ---- export ---------------------------------------------------------------------------
    def _ask_export(self, suffix: str) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Export the dossier", f"dossier{suffix}",
                                              f"Dossier (*{suffix})")
        if path:
            self.export(Path(path))

    def export(self, path: Path) -> None:
        project = self.collect()
        if not project.sections:
            self.status.setText("Choose at least one section.")
            return
        inputs = self._inputs()
        sections = list(project.sections)

        def work(progress, cancel):
            return write_dossier(project, path, sections=sections, inputs=inputs,
                                 progress=progress, cancel=cancel)

        def done(out):
            self.last_export = out
            self.status.setText(f"Dossier written to {out}")

        self.status.setText("Building the dossier…")
        self.ctx.runner.request(("dossier", str(path), id(project), len(project.audit)),
                                "Dossier", work, done,
                                on_error=lambda exc: self.status.setText(f"The dossier failed: {exc}"))

    # ---- project file ----------------------------------------------------------------------
    def _ask_save(self) -> None:
        project = project_of(self.ctx)
        start = str(project.path or "project.wbench")
        path, _ = QFileDialog.getSaveFileName(self, "Save project", start, "Project (*.wbench)")
        if path:
            self.save(Path(path))

    def save(self, path: Path | None = None) -> Path | None:
        try:
            out = save_project(self.collect(), path)
        except InputError as exc:
            self.status.setText(str(exc))
            return None
        self.status.setText(f"Project saved to {out}")
        return out

    def autosave_now(self) -> Path | None:
        """Write the side copy of a project that has a file (nothing before the first save)."""
        project = project_of(self.ctx)
        if project.path is None:
            return None
        try:
            return autosave(self.collect())
        except (OSError, InputError) as exc:
            self.status.setText(f"Autosave failed: {exc}")
            return None

    def _ask_open(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open project", "", "Project (*.wbench)")
        if path:
            self.open(Path(path))

    def open(self, path: Path) -> bool:
        """Open a project: offer a newer autosave, re-link changed inputs or stop."""
        recover = False
        if recovery_candidate(path) is not None:
            recover = QMessageBox.question(
                self, "Recover unsaved work?", "An automatic copy newer than this project was "
                "found (the program may have stopped before it was saved). Use it?") == \
                QMessageBox.StandardButton.Yes
        try:
            project = open_project(path, recover=recover)
        except InputsChanged as exc:
            project = exc.project
            for change in exc.changes:
                new = ask_relink(self, change)
                if new is None:
                    self.status.setText(f"Stopped: {change.describe()}")
                    return False
                project.relink(change.role, new)
        except InputError as exc:
            self.status.setText(str(exc))
            return False
        if not self._load_inputs(project):
            return False
        self.ctx.project = project
        self.refresh(force=True)
        self.status.setText(f"Project {Path(path).name} opened")
        return True

    def _load_inputs(self, project) -> bool:
        from workbench.engine.adapter import ModelAdapter
        from workbench.engine.loading import load_data, load_model

        ws = self.ctx.workspace
        s = project.settings
        try:
            for role, slot in (("model_a", "A"), ("model_b", "B")):
                p = project.input_path(role)
                if p is not None:
                    loaded = load_model(p, trust=bool(project.inputs[role].get("trust")))
                    ws.set_model(slot, loaded, ModelAdapter(loaded.estimator))
            if project.input_path("data") is not None:
                ws.set_data(load_data(project.input_path("data"), id_column=s.get("id_column")))
            if project.input_path("reference") is not None:
                ws.set_reference(load_data(project.input_path("reference")))
            changes = {k: s[k] for k in ("target", "positive_class", "cutoff", "background_size",
                                         "seed") if s.get(k) is not None}
            ws.update_settings(**changes)
        except InputError as exc:
            self.status.setText(str(exc))
            return False
        return True
