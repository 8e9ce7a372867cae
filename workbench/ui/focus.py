"""The focus: which model, segment, row, feature and pair every level shows, with history.

The state is a plain frozen dataclass, so it can be compared, stored and restored; the
:class:`Focus` QObject only adds the ``changed`` signal and back / forward through history.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from PySide6.QtCore import QObject, Signal

from workbench.engine.segments import Condition

HISTORY_LIMIT = 200


@dataclass(frozen=True)
class FocusState:
    """What the analyst is looking at. ``row`` is a position in the open data (0-based)."""

    level: str = "Portfolio"
    model: str = "A"
    segment: tuple[Condition, ...] = field(default_factory=tuple)
    row: int | None = None
    feature: str | None = None
    pair: tuple[str, str] | None = None


class Focus(QObject):
    """The one focus object of a window; every level re-renders from it."""

    changed = Signal(object, object)  # new FocusState, old FocusState

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._state = FocusState()
        self._back: list[FocusState] = []
        self._forward: list[FocusState] = []

    @property
    def state(self) -> FocusState:
        return self._state

    def update(self, **changes) -> bool:
        """Move the focus (one history step); returns False when nothing changed."""
        new = replace(self._state, **changes)
        if new == self._state:
            return False
        self._back.append(self._state)
        del self._back[:-HISTORY_LIMIT]
        self._forward.clear()
        self._set(new)
        return True

    def reset(self, state: FocusState | None = None) -> None:
        """Start afresh (new files opened): no history to go back into."""
        self._back.clear()
        self._forward.clear()
        self._set(state or FocusState())

    def can_go_back(self) -> bool:
        return bool(self._back)

    def can_go_forward(self) -> bool:
        return bool(self._forward)

    def back(self) -> bool:
        if not self._back:
            return False
        self._forward.append(self._state)
        self._set(self._back.pop())
        return True

    def forward(self) -> bool:
        if not self._forward:
            return False
        self._back.append(self._state)
        self._set(self._forward.pop())
        return True

    def _set(self, new: FocusState) -> None:
        old, self._state = self._state, new
        self.changed.emit(new, old)
