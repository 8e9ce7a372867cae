"""Dialogs: the trust question before a model file can run code, findings, errors.

The questions are module functions so that tests can answer them (monkeypatch ``ask_trust``).
Error messages open window-modal without blocking, so the window keeps working behind them.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QLabel,
    QMessageBox,
    QPlainTextEdit,
    QVBoxLayout,
)

from workbench.engine.loading import PICKLE_SUFFIXES, sha256_file

PICKLE_RISK = (
    "A {kind} file is a Python pickle: opening it runs whatever code the person who wrote it "
    "put inside, with your permissions — it can read, change or send your files. Open it only "
    "if you know where it came from and trust that source. Saving models with skops avoids this."
)
SKOPS_RISK = (
    "This skops file holds types that skops does not trust by default. Loading them can run "
    "code from those types. Open it only if you trust where the file came from."
)


@dataclass(frozen=True)
class TrustRequest:
    path: Path
    size: int
    sha256: str
    risk: str
    untrusted: tuple[str, ...] = ()

    @classmethod
    def for_file(cls, path: Path, untrusted: list[str] | None = None) -> TrustRequest:
        path = Path(path)
        if path.suffix.lower() in PICKLE_SUFFIXES:
            risk = PICKLE_RISK.format(kind=path.suffix.lower())
        else:
            risk = SKOPS_RISK
        return cls(path, path.stat().st_size, sha256_file(path), risk, tuple(untrusted or ()))


class TrustDialog(QDialog):
    """File, size, SHA-256 and the risk; 'Open it' only on explicit consent (default: No)."""

    def __init__(self, request: TrustRequest, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Open a file that can run code?")
        self.request = request
        text = (f"<p><b>{request.path.name}</b></p>"
                f"<p>Folder: {request.path.parent}<br>Size: {request.size:,} bytes<br>"
                f"SHA-256: <tt>{request.sha256}</tt></p><p>{request.risk}</p>")
        label = QLabel(text)
        label.setWordWrap(True)
        label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout = QVBoxLayout(self)
        layout.addWidget(label)
        if request.untrusted:
            layout.addWidget(QLabel("Types it holds that skops does not trust by default:"))
            types = QPlainTextEdit("\n".join(request.untrusted))
            types.setReadOnly(True)
            types.setMaximumHeight(110)
            layout.addWidget(types)
        buttons = QDialogButtonBox()
        self.open_button = buttons.addButton("I trust this file: open it", QDialogButtonBox.ButtonRole.AcceptRole)
        self.refuse_button = buttons.addButton("Do not open", QDialogButtonBox.ButtonRole.RejectRole)
        self.refuse_button.setDefault(True)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.resize(560, 320)


# Unattended (``--snapshot``): nobody is there to answer, so nothing waits on a dialog; the
# question is refused and said on stderr, and messages go there too.
_unattended = False


def set_unattended(on: bool) -> None:
    global _unattended
    _unattended = bool(on)


def _say(text: str) -> None:
    print(text, file=sys.stderr, flush=True)


def ask_trust(parent, request: TrustRequest) -> bool:
    """True only when the user said they trust the file."""
    if _unattended:
        listed = f" ({', '.join(request.untrusted)})" if request.untrusted else ""
        _say(f"{request.path.name} was not opened: it needs trust{listed}. Pass --trust only if "
             "you trust where the file came from.")
        return False
    return TrustDialog(request, parent).exec() == QDialog.DialogCode.Accepted


def findings_text(findings) -> str:
    marks = {"error": "Problem", "warning": "Warning", "info": "Note"}
    return "\n".join(f"{marks.get(f.level, f.level)}: {f.message}" for f in findings)


def ask_open_despite(parent, what: str, findings) -> bool:
    """Errors found: ask whether to open anyway (default: keep what was open)."""
    if _unattended:
        _say(f"{what} was not opened, it has problems the model cannot work around:\n"
             + findings_text(findings))
        return False
    box = QMessageBox(QMessageBox.Icon.Warning, "Problems found",
                      f"{what} has problems the model cannot work around:", parent=parent)
    box.setInformativeText(findings_text(findings))
    keep = box.addButton("Keep what was open", QMessageBox.ButtonRole.RejectRole)
    box.addButton("Open anyway", QMessageBox.ButtonRole.AcceptRole)
    box.setDefaultButton(keep)
    box.exec()
    return box.clickedButton() is not keep


def show_message(parent, title: str, text: str, details: str = "", *,
                 icon=QMessageBox.Icon.Warning) -> QMessageBox:
    """A non-blocking message; the window stays usable and whatever was open stays open."""
    if _unattended:
        _say(f"{title}: {text}" + (f"\n{details}" if details else ""))
    box = QMessageBox(icon, title, text, QMessageBox.StandardButton.Ok, parent)
    box.setObjectName("message")
    if details:
        box.setInformativeText(details)
    box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    box.open()
    return box
