"""Start the Qt application (placeholder window until the levels land)."""

from __future__ import annotations

import sys


def run_app(*, demo: bool = False) -> int:
    from PySide6.QtWidgets import QApplication, QLabel, QMainWindow

    app = QApplication.instance() or QApplication(sys.argv)
    win = QMainWindow()
    win.setWindowTitle("workbench")
    win.setCentralWidget(QLabel("workbench"))
    win.resize(1280, 800)
    win.show()
    return app.exec()
