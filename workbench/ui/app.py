"""Start the Qt application: an empty window, the demo, or files named on the command line."""

from __future__ import annotations

import os
import sys
from pathlib import Path

DEMO_CUTOFF = 0.20  # the demo lender refers applications with a default probability of 20 % or more
DEMO_FEATURE = "debt_to_income"
DEMO_PAIR = ("debt_to_income", "employment_type")


def application():
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("workbench")
    app.setOrganizationName("workbench")
    return app


def open_demo(window, paths: dict | None = None, *, rows: int | None = None) -> None:
    """Champion as model A, challenger as model B, on the current period; reference = the fit period.

    ``rows`` keeps only the first rows of both periods (tests use a small demo).
    """
    from demo_models.lending import LENDING_ID, LENDING_TARGET
    from demo_models.write import ensure_demo
    from workbench.engine.loading import dataset_from_frame, load_data

    paths = paths or ensure_demo()
    ws = window.ctx.workspace
    ws.update_settings(target=LENDING_TARGET, cutoff=DEMO_CUTOFF)
    current = load_data(paths["lending_current"], target=LENDING_TARGET, id_column=LENDING_ID)
    reference = load_data(paths["lending_reference"], target=LENDING_TARGET, id_column=LENDING_ID)
    if rows is not None:
        current = _head(current, rows, dataset_from_frame)
        reference = _head(reference, rows, dataset_from_frame)
    ws.set_data(current)
    ws.set_reference(reference)
    # We built these files ourselves, so their skops types are trusted without asking.
    window.open_model(paths["lending_champion"], "A", trust=True)
    window.open_model(paths["lending_challenger"], "B", trust=True)
    _demo_wording(window)
    window.ctx.focus.reset()
    window.ctx.focus.update(feature=DEMO_FEATURE, pair=DEMO_PAIR, row=_riskiest_row(window))
    window.ctx.focus.reset(window.ctx.focus.state)


def _demo_wording(window) -> None:
    """Reason statements in the demo's own words (display names and units of the scenario)."""
    from demo_models.lending import LENDING_DISPLAY
    from workbench.engine.reasons import ReasonTemplates
    from workbench.ui.context import project_of

    templates = ReasonTemplates.from_display(LENDING_DISPLAY, outcome="the estimated default risk")
    project_of(window.ctx).reason_templates = templates.to_dict()


def _head(data, rows, from_frame):
    small = from_frame(data.frame.head(rows).reset_index(drop=True), target=data.target,
                       id_column=data.id_column)
    return small


def _riskiest_row(window) -> int:
    """A telling first case: the highest score of model A (the model's own output, no explanation)."""
    ws = window.ctx.workspace
    adapter = ws.adapter("A")
    if adapter is None or ws.frame is None:
        return 0
    import numpy as np

    return int(np.argmax(adapter.score(ws.frame)))


def open_files(window, *, model: Path | None = None, data: Path | None = None,
               target: str | None = None, model_b: Path | None = None,
               trust: bool = False) -> None:
    """What ``workbench open`` does: data first (so the model is checked against it), then the
    models; with a model and data open, a first case, feature and pair are focused so that every
    level has something to show."""
    if data is not None:
        window.open_data(data, "data", target=target)
    if model is not None:
        window.open_model(model, "A", trust=trust or None)
    if model_b is not None:
        window.open_model(model_b, "B", trust=trust or None)
    adapter = window.ctx.workspace.adapter("A")
    if adapter is None or window.ctx.workspace.frame is None:
        return
    import pandas as pd

    frame = window.ctx.workspace.frame
    # Numeric inputs first: their effect curves and pair maps say the most at a first look.
    columns = sorted(adapter.input_columns, key=lambda c: not (
        c in frame.columns and pd.api.types.is_numeric_dtype(frame[c])))
    focus = window.ctx.focus
    try:
        row = _riskiest_row(window)
    except Exception:  # noqa: BLE001 - data the model cannot score: the Portfolio says why
        row = None
    focus.update(row=row, feature=columns[0] if columns else None,
                 pair=tuple(columns[:2]) if len(columns) >= 2 else None)
    focus.reset(focus.state)


def snapshot(window, directory: Path, *, timeout_s: float = 300.0,
             every_tab: bool = False) -> list[Path]:
    """Visit every level, wait for its jobs, and save a PNG of the window for each.

    ``every_tab``: levels with tabs (``level.tabs``) also get one PNG per further tab,
    ``<i>_<level>_<tab>.png``, so that what the first tab hides can be looked at too.
    """
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    out = []

    def settle():
        for _ in range(2):
            window.ctx.runner.wait_idle(timeout_s)
            application().processEvents()

    for i, name in enumerate(window.levels, start=1):
        window.show_level(name)
        settle()
        path = directory / f"{i}_{name.lower()}.png"
        window.grab().save(str(path))
        out.append(path)
        tabs = getattr(window.levels[name], "tabs", None)
        if every_tab and tabs is not None:
            for k in range(1, tabs.count()):
                tabs.setCurrentIndex(k)
                settle()
                extra = directory / f"{i}_{name.lower()}_{k + 1}.png"
                window.grab().save(str(extra))
                out.append(extra)
            tabs.setCurrentIndex(0)
    return out


def run_app(*, demo: bool = False, snapshot_dir: Path | None = None, model: Path | None = None,
            model_b: Path | None = None, data: Path | None = None, target: str | None = None,
            trust: bool = False) -> int:
    app = application()
    from workbench.ui import dialogs
    from workbench.ui.window import MainWindow

    dialogs.set_unattended(snapshot_dir is not None)  # no dialog waits for an answer
    window = MainWindow()
    window.show()
    # The worker processes start and import the engine while the files open, so the first
    # visit to a level does not wait for them (nor does the window do that work itself).
    window.ctx.runner.warm_up()
    if demo:
        window.statusBar().showMessage("Preparing the demo (built once, then cached)…")
        app.processEvents()
        open_demo(window)
    else:
        open_files(window, model=model, data=data, target=target, model_b=model_b, trust=trust)
    window.warm_levels()
    if snapshot_dir is not None:
        missing = _not_opened(window, model=model, model_b=model_b, data=data)
        if missing:
            print(f"workbench: not saving snapshots: {missing} did not open (see above)",
                  file=sys.stderr)
            _leave(window, 2)
        for path in snapshot(window, snapshot_dir):
            print(path)
        _leave(window, 0)
    return app.exec()


def _not_opened(window, *, model, model_b, data) -> str:
    """The files asked for that are not open (refused, unreadable), as one phrase."""
    ws = window.ctx.workspace
    wanted = [(model, ws.adapter("A")), (model_b, ws.adapter("B")), (data, ws.frame)]
    return ", ".join(Path(p).name for p, opened in wanted if p is not None and opened is None)


def _leave(window, code: int) -> None:
    window.close()
    # Worker processes, if the runner has them, would outlive os._exit holding our stdout.
    shutdown = getattr(window.ctx.runner, "shutdown", None)
    if shutdown is not None:
        shutdown(wait=True)  # ended, so their semaphores are released, not reported as leaked
    import gc

    gc.collect()
    sys.stdout.flush()
    sys.stderr.flush()
    # Skip interpreter teardown: PySide6 with pyqtgraph can crash while finalising.
    os._exit(code)
