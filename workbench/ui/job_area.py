"""The job area: one progress bar and cancel button per running job.

The area keeps one height whatever the number of jobs (rows scroll past ``ROWS_SHOWN``) and
long titles are cut, not widened: a job starting or ending used to grow or shrink the dock,
which resized every plot in the window and repainted them all at once (a 100 ms stall).
"""

from __future__ import annotations

from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QSizePolicy,
    QVBoxLayout,
    QWidget,
)

from workbench.ui.jobs import Job, JobRunner

ROWS_SHOWN = 2
ROW_HEIGHT = 28


class JobRow(QWidget):
    def __init__(self, job: Job, runner: JobRunner, parent=None) -> None:
        super().__init__(parent)
        self.job = job
        self.title = QLabel(job.title)
        self.title.setToolTip(job.title)
        # Ignored: a longer message never asks the dock for more room
        self.title.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.bar = QProgressBar()
        self.bar.setRange(0, 1000)
        self.bar.setTextVisible(True)
        self.bar.setFormat("%p%")
        self.cancel = QPushButton("Cancel")
        self.cancel.clicked.connect(lambda: (runner.cancel(job), self.cancel.setEnabled(False),
                                             self.cancel.setText("Cancelling…")))
        self.setFixedHeight(ROW_HEIGHT)
        layout = QHBoxLayout(self)
        layout.setContentsMargins(4, 0, 4, 0)
        layout.addWidget(self.title, 2)
        layout.addWidget(self.bar, 3)
        layout.addWidget(self.cancel)

    def show_progress(self) -> None:
        self.bar.setValue(int(self.job.fraction * 1000))
        if self.job.message:
            self.title.setText(f"{self.job.title} — {self.job.message}")


class JobArea(QWidget):
    def __init__(self, runner: JobRunner, parent=None) -> None:
        super().__init__(parent)
        self.runner = runner
        self.rows: dict[int, JobRow] = {}
        self.last = QLabel("No work running.")
        self.last.setStyleSheet("color: #555;")
        self.last.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        inner = QWidget()
        self.layout_ = QVBoxLayout(inner)
        self.layout_.setContentsMargins(0, 0, 0, 0)
        self.layout_.setSpacing(2)
        self.layout_.addStretch(1)
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setWidget(inner)
        self.scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        self.scroll.setFixedHeight(ROWS_SHOWN * (ROW_HEIGHT + 2) + 4)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(2, 2, 2, 2)
        outer.addWidget(self.scroll)
        outer.addWidget(self.last)
        self.setFixedHeight(self.sizeHint().height())  # the dock no taller than its rows
        runner.job_started.connect(self._started)
        runner.job_progressed.connect(self._progressed)
        runner.job_ended.connect(self._ended)

    def _started(self, job: Job) -> None:
        row = JobRow(job, self.runner)
        self.rows[job.id] = row
        self.layout_.insertWidget(0, row)

    def _progressed(self, job: Job) -> None:
        if job.id in self.rows:
            self.rows[job.id].show_progress()

    def _ended(self, job: Job, outcome: str) -> None:
        row = self.rows.pop(job.id, None)
        if row is not None:
            row.setParent(None)
            row.deleteLater()
        self.last.setText(f"Last: {job.title} — {outcome}")
