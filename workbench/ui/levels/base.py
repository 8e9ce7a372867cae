"""The level base class and the registry the rail is built from.

Adding a level is registering a class: subclass :class:`Level`, give it ``name`` and ``order``,
decorate it with :func:`register_level` and import its module in ``workbench.ui.levels``.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QVBoxLayout, QWidget

from workbench.ui.context import Context
from workbench.ui.draw_queue import DrawQueue

_REGISTRY: dict[str, type[Level]] = {}


def register_level(cls: type[Level]) -> type[Level]:
    _REGISTRY[cls.name] = cls
    return cls


def registered_levels() -> list[type[Level]]:
    return sorted(_REGISTRY.values(), key=lambda c: c.order)


class Level(QWidget):
    """One view over the focus. Subclasses implement :meth:`render` and :meth:`view_key`."""

    name = ""
    order = 0
    summary = ""

    def __init__(self, ctx: Context, parent=None) -> None:
        super().__init__(parent)
        self.ctx = ctx
        self.setObjectName(f"level-{self.name}")
        self._rendered_key = None
        self.draws = DrawQueue(self, synchronous=ctx.runner.synchronous)

    @property
    def state(self):
        return self.ctx.focus.state

    def view_key(self) -> tuple:
        """What this level depends on; it re-renders only when this changes."""
        s = self.state
        return (self.ctx.workspace.generation, s.model, s.segment, s.row, s.feature, s.pair)

    def relevant(self):
        """For job requests: True while the focus still asks for what was requested."""
        key = self.view_key()
        return lambda: self.view_key() == key

    def refresh(self, force: bool = False) -> None:
        key = self.view_key()
        if not force and key == self._rendered_key:
            return
        self._rendered_key = key
        self.draws.clear()  # draws queued for the view shown before
        self.render()

    def arrival(self, draw):
        """``draw(result)`` run from the level's draw queue: one draw per event-loop turn, and
        only once the level is shown (see :mod:`workbench.ui.draw_queue`)."""
        return lambda *args: self.draws.later(lambda: draw(*args))

    def render(self) -> None:  # pragma: no cover - every level overrides it
        raise NotImplementedError

    # small helpers for the focus links
    def go(self, **changes) -> None:
        self.ctx.focus.update(**changes)


class PlaceholderLevel(Level):
    """A level another part of the program will fill."""

    def __init__(self, ctx: Context, parent=None) -> None:
        super().__init__(ctx, parent)
        layout = QVBoxLayout(self)
        self.note = QLabel(f"<h2>{self.name}</h2><p>{self.summary}</p><p><i>Not available yet.</i></p>")
        self.note.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.note.setWordWrap(True)
        layout.addWidget(self.note)

    def view_key(self) -> tuple:
        return ()

    def render(self) -> None:
        pass


@register_level
class VersionsLevel(PlaceholderLevel):
    name, order = "Versions", 60
    summary = "Champion against challenger: metrics, score agreement scatter, swap table."


@register_level
class ChecksLevel(PlaceholderLevel):
    name, order = "Checks", 70
    summary = "Audit checks with pass / warn / fail and their evidence."


@register_level
class DossierLevel(PlaceholderLevel):
    name, order = "Dossier", 80
    summary = "The sign-off document being assembled, exported as HTML and PDF."
