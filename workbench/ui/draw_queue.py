"""Drawing after results, spread over the event loop and only while the level is shown.

A result arriving redraws a plot (items built, ranges and axes worked out) and Qt then paints
it; two or three arriving together, each redrawing two plots, froze the window for well over
100 ms. A :class:`DrawQueue` runs one draw per turn of the event loop, so Qt paints between
them and the window answers meanwhile; draws for a level that is not shown wait until it is
(a hidden level is not drawn at all until then). ``synchronous`` runners (tests, snapshots)
draw at once.
"""

from __future__ import annotations

import weakref
from collections import deque
from collections.abc import Callable

from PySide6.QtCore import QEvent, QObject, QTimer
from PySide6.QtWidgets import QWidget

GAP_MS = 1  # a timer, not 0: Qt's posted paint requests are handled before it fires

_queues: weakref.WeakSet = weakref.WeakSet()


class DrawQueue(QObject):
    """Draw callables for one widget, run one per event-loop turn while it is visible."""

    def __init__(self, widget: QWidget, *, synchronous: bool = False) -> None:
        super().__init__(widget)
        self.widget = widget
        self.synchronous = synchronous
        self._items: deque[Callable[[], None]] = deque()
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(GAP_MS)
        self._timer.timeout.connect(self._run_one)
        widget.installEventFilter(self)  # shown again: the waiting draws run
        _queues.add(self)

    def eventFilter(self, watched, event) -> bool:  # noqa: N802 - Qt's name
        if watched is self.widget and event.type() == QEvent.Type.Show:
            self.resume()
        return False

    def later(self, draw: Callable[[], None]) -> None:
        if self.synchronous:
            draw()
            return
        self._items.append(draw)
        self.resume()

    def clear(self) -> None:
        """Forget the draws not run yet (the level is rendering something else)."""
        self._items.clear()

    def resume(self) -> None:
        if self._items and self.widget.isVisible() and not self._timer.isActive():
            self._timer.start()

    @property
    def waiting(self) -> bool:
        """Draws still to run now (draws of a hidden widget wait for it to be shown)."""
        return bool(self._items) and self.widget.isVisible()

    def _run_one(self) -> None:
        if not self._items or not self.widget.isVisible():
            return
        self._items.popleft()()
        self.resume()


def draws_waiting() -> bool:
    """True while any shown widget has draws to run (``JobRunner.wait_idle`` waits for them)."""
    return any(q.waiting for q in list(_queues))
