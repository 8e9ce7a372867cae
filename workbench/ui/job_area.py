"""The job area: one progress bar and cancel button per running job.

The area keeps one height whatever the number of jobs (rows scroll past ``ROWS_SHOWN``) and
long titles are cut, not widened: a job starting or ending used to grow or shrink the dock,
which resized every plot in the window and repainted them all at once (a 100 ms stall).
Progress is drawn by :class:`ProgressStrip`, not ``QProgressBar``: the latter repaints at once,
inside ``setValue``, and took the window's pending repaints with it (28 ms in one call, measured).
"""

from __future__ import annotations

from PySide6.QtCore import QRectF, QSize, Qt
from PySide6.QtGui import QColor, QPainter
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QPushButton,
    QScrollArea,
    QSizePolicy,
    QVBoxLayout,
    QWidget,
)

from workbench.ui.jobs import Job, JobRunner

ROWS_SHOWN = 2
ROW_HEIGHT = 28
TRACK, FILL = QColor("#E4E7EB"), QColor("#5B8DB8")


class ProgressStrip(QWidget):
    """A job's share done, as a filled strip with its percentage; redrawn (asynchronously) only
    when the whole percentage shown changes."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.percent = 0
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)

    def sizeHint(self) -> QSize:  # noqa: N802 - Qt's name
        return QSize(120, self.fontMetrics().height() + 6)

    def set_fraction(self, fraction: float) -> None:
        percent = int(round(100 * min(max(float(fraction), 0.0), 1.0)))
        if percent != self.percent:
            self.percent = percent
            self.update()

    def text(self) -> str:
        return f"{self.percent}%"

    def paintEvent(self, _event) -> None:  # noqa: N802 - Qt's name
        painter = QPainter(self)
        rect = QRectF(self.rect()).adjusted(0.5, 0.5, -0.5, -0.5)
        painter.fillRect(rect, TRACK)
        painter.fillRect(QRectF(rect.left(), rect.top(), rect.width() * self.percent / 100,
                                rect.height()), FILL)
        painter.setPen(QColor("#111111"))
        painter.drawText(rect, Qt.AlignmentFlag.AlignCenter, self.text())


class JobRow(QWidget):
    def __init__(self, job: Job, runner: JobRunner, parent=None) -> None:
        super().__init__(parent)
        self.job = job
        self.title = QLabel(job.title)
        self.title.setToolTip(job.title)
        # Ignored: a longer message never asks the dock for more room
        self.title.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.bar = ProgressStrip()
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
        self.bar.set_fraction(self.job.fraction)
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
