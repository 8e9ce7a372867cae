"""The main window: rail of levels, focus bar, settings panel, job area, File menu, drops."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QFileDialog,
    QHBoxLayout,
    QListWidget,
    QMainWindow,
    QMessageBox,
    QStackedWidget,
    QToolBar,
    QVBoxLayout,
    QWidget,
)

import workbench.ui.levels  # noqa: F401 - registers the levels
from workbench.engine.errors import InputError
from workbench.engine.loading import (
    DATA_SUFFIXES,
    MODEL_SUFFIXES,
    PICKLE_SUFFIXES,
    load_data,
    load_model,
    untrusted_types,
)
from workbench.engine.validation import has_errors, validate
from workbench.ui import dialogs
from workbench.ui.context import Context
from workbench.ui.job_area import JobArea
from workbench.ui.levels.base import Level, registered_levels
from workbench.ui.panels import FocusBar, SettingsPanel

RECENT_LIMIT = 10
RECENT_KEY = "recent_files"
_FALLBACK_KEYS = {QKeySequence.StandardKey.Open: "Ctrl+O", QKeySequence.StandardKey.Quit: "Ctrl+Q"}


class MainWindow(QMainWindow):
    def __init__(self, ctx: Context | None = None, *, qsettings: QSettings | None = None,
                 synchronous: bool = False) -> None:
        super().__init__()
        self.ctx = ctx or Context.create(synchronous=synchronous)
        # The window owns the shared objects, so closing it deletes them and every connection
        # to its levels with them (nothing outlives the widgets it would call).
        for shared in (self.ctx.workspace, self.ctx.focus, self.ctx.runner):
            if shared.parent() is None:
                shared.setParent(self)
        self.qsettings = qsettings or QSettings("workbench", "workbench")
        self.setWindowTitle("workbench")
        self.setAcceptDrops(True)
        self.resize(1440, 900)

        self.rail = QListWidget()
        self.rail.setFixedWidth(120)
        self.rail.setObjectName("rail")
        self.rail.setStyleSheet(
            "QListWidget#rail { font-size: 11pt; background: #F3F4F6; border: none; }"
            "QListWidget#rail::item { padding: 9px 6px; }"
            "QListWidget#rail::item:selected { background: #0B3C5D; color: white; }")
        self.stack = QStackedWidget()
        self.levels: dict[str, Level] = {}
        for i, cls in enumerate(registered_levels()):
            level = cls(self.ctx)
            self.levels[cls.name] = level
            self.stack.addWidget(level)
            self.rail.addItem(f"{cls.name}")
            self.rail.item(i).setToolTip(f"{cls.summary} (Alt+{i + 1})" if i < 9 else cls.summary)
        self.rail.setCurrentRow(0)
        self.rail.currentRowChanged.connect(self._rail_clicked)

        central = QWidget()
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.rail)
        row.addWidget(self.stack, 1)
        outer = QVBoxLayout(central)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addLayout(row)
        self.setCentralWidget(central)

        self.focus_bar = FocusBar(self.ctx)
        bar = QToolBar("Focus")
        bar.setObjectName("focus-toolbar")
        bar.setMovable(False)
        bar.addWidget(self.focus_bar)
        self.addToolBar(Qt.ToolBarArea.TopToolBarArea, bar)

        self.settings_panel = SettingsPanel(self.ctx)
        dock = QDockWidget("Settings", self)
        dock.setObjectName("settings-dock")
        dock.setWidget(self.settings_panel)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                         | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
        self.settings_dock = dock

        self.job_area = JobArea(self.ctx.runner)
        jobs = QDockWidget("Work in progress", self)
        jobs.setObjectName("jobs-dock")
        jobs.setWidget(self.job_area)
        jobs.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable)
        self.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, jobs)

        self._build_menus()
        self.ctx.focus.changed.connect(self._focus_changed)
        self.ctx.workspace.changed.connect(self._workspace_changed)
        self.ctx.runner.job_ended.connect(self._job_ended)
        self.statusBar().showMessage("Open a model and a data file, or drop them on the window.")
        self.current_level().refresh()

    # ---- menus and keys -------------------------------------------------------------------------
    def _action(self, menu, text, slot, shortcut=None) -> QAction:
        action = QAction(text, self)
        if isinstance(shortcut, QKeySequence.StandardKey):
            # Some platforms (offscreen, minimal) define no standard keys: fall back to ours.
            keys = QKeySequence.keyBindings(shortcut)
            if not keys and shortcut in _FALLBACK_KEYS:
                keys = [QKeySequence(_FALLBACK_KEYS[shortcut])]
            action.setShortcuts(keys)
        elif shortcut is not None:
            action.setShortcut(QKeySequence(shortcut))
        action.triggered.connect(slot)
        menu.addAction(action)
        return action

    def _build_menus(self) -> None:
        file_menu = self.menuBar().addMenu("&File")
        self._action(file_menu, "Open model (A)…", lambda: self._ask_open("model", "A"),
                     QKeySequence.StandardKey.Open)
        self._action(file_menu, "Open second model (B)…", lambda: self._ask_open("model", "B"),
                     "Ctrl+Shift+O")
        self._action(file_menu, "Open data…", lambda: self._ask_open("data", "data"), "Ctrl+Shift+D")
        self._action(file_menu, "Open reference data…", lambda: self._ask_open("data", "reference"))
        self.recent_menu = file_menu.addMenu("Recent files")
        self._fill_recent()
        file_menu.addSeparator()
        for level in self.levels.values():  # levels may offer File entries (the project file)
            for text, slot in getattr(level, "file_actions", list)():
                self._action(file_menu, text, slot)
        file_menu.addSeparator()
        self._action(file_menu, "Quit", self.close, QKeySequence.StandardKey.Quit)

        go = self.menuBar().addMenu("&Go")
        for i, name in enumerate(self.levels):
            shortcut = f"Alt+{i + 1}" if i < 9 else None
            self._action(go, name, lambda _=False, n=name: self.show_level(n), shortcut)
        go.addSeparator()
        self._action(go, "Back", self.ctx.focus.back, "Alt+Left")
        self._action(go, "Forward", self.ctx.focus.forward, "Alt+Right")
        view = self.menuBar().addMenu("&View")
        view.addAction(self.settings_dock.toggleViewAction())

    # ---- levels ---------------------------------------------------------------------------------
    def current_level(self) -> Level:
        return self.stack.currentWidget()

    def show_level(self, name: str) -> None:
        self.ctx.focus.update(level=name)

    def warm_levels(self) -> None:
        """Write the open models and data for the worker processes, then lay out and paint
        each hidden level once, off screen: one step per event-loop turn.

        A level's first showing polished its widgets and filled the glyph caches while its
        jobs ran: ~45 ms of painting against ~15 ms later (measured on the Case level), enough
        to stall the window past 100 ms on a first visit.
        """
        from workbench.ui.threads import find_thread_libraries

        find_thread_libraries()
        ws, runner = self.ctx.workspace, self.ctx.runner
        # the models and data written once for the worker processes, then the hidden levels
        steps = [lambda obj=obj: runner.share_ahead(obj)
                 for obj in (ws.adapter("A"), ws.adapter("B"), ws.frame, ws.background_frame())]
        steps += [lambda level=level: level.isVisible() or level.grab()
                  for level in self.levels.values() if not level.isVisible()]

        def next_one() -> None:
            if steps:
                steps.pop(0)()
                QTimer.singleShot(1, next_one)  # one step per turn: Qt paints in between

        QTimer.singleShot(1, next_one)

    def _rail_clicked(self, index: int) -> None:
        name = list(self.levels)[index]
        if name != self.ctx.focus.state.level:
            self.show_level(name)

    def _focus_changed(self, new, old) -> None:
        level = self.levels.get(new.level)
        if level is None:
            return
        names = list(self.levels)
        self.rail.blockSignals(True)
        self.rail.setCurrentRow(names.index(new.level))
        self.rail.blockSignals(False)
        self.stack.setCurrentWidget(level)
        level.refresh()

    def _workspace_changed(self, what: str) -> None:
        self._update_title()
        self.current_level().refresh()

    def _job_ended(self, job, outcome: str) -> None:
        if outcome.startswith("failed"):
            self.statusBar().showMessage(f"{job.title}: {outcome}", 10000)

    def _update_title(self) -> None:
        ws = self.ctx.workspace
        parts = [f"{s}: {ws.slot(s).name}" for s in ("A", "B") if ws.slot(s)]
        if ws.data is not None and ws.data.path is not None:
            parts.append(f"data: {ws.data.path.name}")
        self.setWindowTitle("workbench — " + ", ".join(parts) if parts else "workbench")

    # ---- opening files ---------------------------------------------------------------------------
    def _ask_open(self, kind: str, role: str) -> None:
        start = str(self.qsettings.value("last_folder", str(Path.home())))
        if kind == "model":
            pattern = "Models (" + " ".join(f"*{s}" for s in MODEL_SUFFIXES) + ")"
        else:
            pattern = "Data (" + " ".join(f"*{s}" for s in DATA_SUFFIXES) + ")"
        path, _ = QFileDialog.getOpenFileName(self, f"Open {role}", start, pattern)
        if not path:
            return
        self.qsettings.setValue("last_folder", str(Path(path).parent))
        if kind == "model":
            self.open_model(path, role)
        else:
            self.open_data(path, role)

    def _error(self, title: str, exc: Exception | str) -> None:
        text = str(exc)
        self.last_error = text
        self.statusBar().showMessage(text, 15000)
        dialogs.show_message(self, title, text, "Nothing was changed: whatever was open stays open.")

    def open_model(self, path, slot: str = "A", *, trust: bool | None = None) -> bool:
        """Open a model file into slot A or B; asks before any file that could run code."""
        path = Path(path)
        try:
            needs_trust: list[str] | None = None
            if path.suffix.lower() in PICKLE_SUFFIXES:
                if not path.is_file():
                    raise InputError(f"{path}: no such model file")
                needs_trust = []
            elif path.suffix.lower() == ".skops":
                found = untrusted_types(path)
                needs_trust = found if found else None
            if needs_trust is not None and not trust:
                request = dialogs.TrustRequest.for_file(path, needs_trust)
                if not dialogs.ask_trust(self, request):
                    self.statusBar().showMessage(f"{path.name} was not opened.", 10000)
                    return False
            loaded = load_model(path, trust=needs_trust is not None)
            from workbench.engine.adapter import ModelAdapter

            adapter = ModelAdapter(loaded.estimator)
        except InputError as exc:
            self._error("The model could not be opened", exc)
            return False
        except Exception as exc:  # noqa: BLE001 - a strange file must not take the window down
            self._error("The model could not be opened", f"{path}: {type(exc).__name__}: {exc}")
            return False
        ws = self.ctx.workspace
        findings = list(adapter.findings)
        if ws.data is not None:
            findings += validate(adapter, ws.data.frame, target=ws.settings.target,
                                 id_column=ws.data.id_column)
        if has_errors(findings) and not dialogs.ask_open_despite(self, f"Model {path.name} with the open data",
                                                                 findings):
            return False
        ws.set_model(slot, loaded, adapter)
        self._after_model(slot)
        self._remember(path, f"model-{slot}")
        self._report_findings(path.name, [f for f in findings if f.level != "info"],
                              [*loaded.warnings])
        self.statusBar().showMessage(f"Model {slot}: {path.name} ({adapter.model_type}, {adapter.task})", 10000)
        return True

    def _after_model(self, slot: str) -> None:
        ws = self.ctx.workspace
        adapter = ws.adapter(slot)
        if slot == "A" and adapter.task in ("regression", "count") and ws.frame is not None:
            try:
                middle = float(np.median(adapter.response(ws.frame.head(5000))))
                ws.update_settings(cutoff=round(middle, 4))
            except Exception:  # noqa: BLE001 - the Portfolio will show the scoring problem
                pass

    def open_data(self, path, role: str = "data", *, target: str | None = None,
                  id_column: str | None = None) -> bool:
        """Open a data file as the data (scored and explained) or the reference data."""
        path = Path(path)
        ws = self.ctx.workspace
        try:
            data = load_data(path, id_column=id_column)
        except InputError as exc:
            self._error("The data could not be opened", exc)
            return False
        except Exception as exc:  # noqa: BLE001
            self._error("The data could not be opened", f"{path}: {type(exc).__name__}: {exc}")
            return False
        if target is not None and target not in data.frame.columns:
            self._error("The data could not be opened", f"{path}: no target column '{target}'")
            return False
        use_target = target or (ws.settings.target if ws.settings.target in data.frame.columns else None)
        findings = []
        adapter = ws.adapter("A")
        if adapter is not None:
            findings = validate(adapter, data.frame, target=use_target, id_column=id_column)
            if has_errors(findings) and not dialogs.ask_open_despite(self, f"{path.name}", findings):
                return False
        if role == "reference":
            ws.set_reference(data)
        else:
            ws.set_data(data)
            if target is not None:
                ws.update_settings(target=target)
            self.ctx.focus.update(row=None)
        self._remember(path, role)
        self._report_findings(path.name, [f for f in findings if f.level == "warning"], [])
        self.statusBar().showMessage(f"{role}: {path.name}, {len(data.frame):,} rows", 10000)
        return True

    def _report_findings(self, name: str, findings, extra: list[str]) -> None:
        if not findings and not extra:
            return
        text = dialogs.findings_text(findings)
        if extra:
            text = (text + "\n" if text else "") + "\n".join(f"Warning: {w}" for w in extra)
        self.last_findings = text
        dialogs.show_message(self, "Worth knowing", f"{name} opened, with findings:", text,
                             icon=QMessageBox.Icon.Information)

    # ---- recent files -------------------------------------------------------------------------------
    def recent_files(self) -> list[tuple[str, str]]:
        raw = self.qsettings.value(RECENT_KEY, []) or []
        if isinstance(raw, str):
            raw = [raw]
        out = []
        for item in raw:
            role, _, path = str(item).partition("|")
            if path:
                out.append((role, path))
        return out

    def _remember(self, path: Path, role: str) -> None:
        entry = f"{role}|{path.resolve()}"
        items = [f"{r}|{p}" for r, p in self.recent_files() if f"{r}|{p}" != entry]
        self.qsettings.setValue(RECENT_KEY, [entry, *items][:RECENT_LIMIT])
        self._fill_recent()

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.recent_files()
        if not files:
            self.recent_menu.addAction("(none yet)").setEnabled(False)
        for role, path in files:
            action = self.recent_menu.addAction(f"{Path(path).name}  [{role}]")
            action.setToolTip(path)
            action.triggered.connect(lambda _=False, r=role, p=path: self._open_recent(r, p))

    def _open_recent(self, role: str, path: str) -> None:
        if role.startswith("model-"):
            self.open_model(path, role.split("-", 1)[1])
        else:
            self.open_data(path, role)

    # ---- drag and drop ---------------------------------------------------------------------------------
    def dragEnterEvent(self, event) -> None:  # noqa: N802 - Qt's name
        urls = event.mimeData().urls() if event.mimeData().hasUrls() else []
        if any(Path(u.toLocalFile()).suffix.lower() in MODEL_SUFFIXES + DATA_SUFFIXES for u in urls):
            event.acceptProposedAction()

    def dropEvent(self, event) -> None:  # noqa: N802
        for url in event.mimeData().urls():
            self.open_dropped(Path(url.toLocalFile()))
        event.acceptProposedAction()

    def open_dropped(self, path: Path) -> bool:
        """A model goes to A (or B when A is taken), a data file becomes the data."""
        suffix = path.suffix.lower()
        if suffix in MODEL_SUFFIXES:
            slot = "B" if self.ctx.workspace.slot("A") is not None and \
                self.ctx.workspace.slot("B") is None else "A"
            return self.open_model(path, slot)
        if suffix in DATA_SUFFIXES:
            return self.open_data(path, "data")
        self._error("Not a file workbench opens", f"{path.name}: expected a model "
                    f"({', '.join(MODEL_SUFFIXES)}) or data ({', '.join(DATA_SUFFIXES)})")
        return False

    def closeEvent(self, event) -> None:  # noqa: N802
        self.ctx.runner.cancel_all()
        self.ctx.runner.pool.waitForDone(2000)
        super().closeEvent(event)
