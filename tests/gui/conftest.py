"""Window tests run offscreen, with their own settings file and a small demo."""

import os
import sys

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")  # before anything imports Qt

import pytest  # noqa: E402

DEMO_ROWS = 300


@pytest.fixture
def qsettings(tmp_path):
    from PySide6.QtCore import QSettings

    return QSettings(str(tmp_path / "workbench-test.ini"), QSettings.Format.IniFormat)


@pytest.fixture(scope="session")
def demo_paths():
    from demo_models.write import ensure_demo

    return ensure_demo()


@pytest.fixture
def window(qtbot, qsettings):
    from workbench.ui.window import MainWindow

    win = MainWindow(qsettings=qsettings, synchronous=True)
    qtbot.addWidget(win)
    win.show()
    return win


@pytest.fixture
def demo_window(window, demo_paths):
    from workbench.ui.app import open_demo

    open_demo(window, demo_paths, rows=DEMO_ROWS)
    return window


@pytest.fixture(autouse=True)
def small_samples(monkeypatch):
    """Smaller engine samples than the window's defaults, so the demo's levels fill quickly."""
    from workbench.ui import results

    monkeypatch.setattr(results, "SAMPLE_ROWS", 150)
    monkeypatch.setattr(results, "EFFECT_ROWS", 200)
    monkeypatch.setattr(results, "IMPORTANCE_ROWS", 400)
    monkeypatch.setattr(results, "H_SAMPLE", 40)
    monkeypatch.setattr(results, "H_SCREEN", 4)


# PySide6 6.12 with pyqtgraph sometimes aborts while the interpreter tears down ("Fatal Python
# error: none_dealloc" during the final garbage collection), after every test has passed and
# been reported. The results are in by then, so leave without the teardown and keep pytest's
# own exit status. Set WORKBENCH_GUI_SOFT_EXIT=1 to see the teardown happen.
def pytest_sessionfinish(session, exitstatus):
    session.config._workbench_exit_status = int(exitstatus)


@pytest.hookimpl(trylast=True)
def pytest_unconfigure(config):
    status = getattr(config, "_workbench_exit_status", None)
    if status is not None and not os.environ.get("WORKBENCH_GUI_SOFT_EXIT"):
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(status)
