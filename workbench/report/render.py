"""Turning report context into self-contained HTML and PDF.

HTML comes from jinja2 templates in ``resources/templates`` with autoescaping on, so any text a
user typed (names, notes, column names) is escaped. Pictures are embedded as data URIs. PDF is
printed through Qt's text engine (QTextDocument + QPdfWriter), which needs no browser; the data
URI pictures are handed to it as document resources.
"""

from __future__ import annotations

import base64
import os
import re
from pathlib import Path

from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

from workbench import __version__

TEMPLATES = Path(__file__).resolve().parents[2] / "resources" / "templates"
_DATA_URI = re.compile(r'src="(data:image/(png|jpeg);base64,([A-Za-z0-9+/=]+))"')

CAUTIONS = (
    "Explanations describe the model, not the world: they say how this model uses its inputs, "
    "not what causes the outcome.",
    "Fairness ratios are screening indicators, not legal findings.",
    "Reason statements and decisions about people must be reviewed by compliance under the law "
    "that applies locally; nothing here is legal advice.",
)


def environment() -> Environment:
    env = Environment(
        loader=FileSystemLoader(str(TEMPLATES)),
        autoescape=select_autoescape(["html", "j2", "html.j2"], default_for_string=True, default=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["num"] = _format_number
    env.filters["sha"] = lambda s: (s or "")[:16]
    env.globals["version"] = __version__
    env.globals["cautions"] = CAUTIONS
    return env


def _format_number(value, digits: int = 4) -> str:
    if value is None:
        return "—"
    try:
        f = float(value)
    except (TypeError, ValueError):
        return str(value)
    if f != f:
        return "—"
    if abs(f) >= 1e5 or (abs(f) < 1e-3 and f != 0):
        return f"{f:.{digits}g}"
    return f"{f:,.{digits}g}" if abs(f) >= 1000 else f"{f:.{digits}g}"


def render_html(template: str, **context) -> str:
    return environment().get_template(template).render(**context)


def png_data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def write_html(html: str, path: str | Path) -> Path:
    path = Path(path)
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(html, encoding="utf-8")
    os.replace(tmp, path)
    return path


def _ensure_gui_app():
    """Qt's text engine needs an application object; headless runs use the offscreen platform.

    A full QApplication (not a bare QGuiApplication), so that widgets made later in the same
    process still work.
    """
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        if not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY"):
            os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        app = QApplication([])
    return app


def write_pdf(html: str, path: str | Path, *, title: str = "workbench report") -> Path:
    """Print HTML to an A4 PDF through Qt."""
    _ensure_gui_app()
    from PySide6.QtCore import QByteArray, QMarginsF, QSizeF, QUrl
    from PySide6.QtGui import QImage, QPageLayout, QPageSize, QPdfWriter, QTextDocument

    path = Path(path)
    doc = QTextDocument()
    doc.setMetaInformation(QTextDocument.MetaInformation.DocumentTitle, title)
    body = html
    for i, (uri, _kind, payload) in enumerate(_DATA_URI.findall(html)):
        name = f"img{i}.png"
        image = QImage.fromData(QByteArray(base64.b64decode(payload)))
        doc.addResource(QTextDocument.ResourceType.ImageResource, QUrl(name), image)
        body = body.replace(uri, name, 1)
    doc.setHtml(body)
    tmp = path.with_name(path.name + ".part")
    writer = QPdfWriter(str(tmp))
    writer.setTitle(title)
    writer.setCreator(f"workbench {__version__}")
    writer.setPageSize(QPageSize(QPageSize.PageSizeId.A4))
    writer.setPageMargins(QMarginsF(15, 15, 15, 15), QPageLayout.Unit.Millimeter)
    writer.setResolution(96)
    layout = writer.pageLayout()
    rect = layout.paintRectPixels(writer.resolution())
    doc.setPageSize(QSizeF(rect.width(), rect.height()))
    doc.print_(writer)
    del writer  # flushes and closes the file
    os.replace(tmp, path)
    return path


def write_report(html: str, path: str | Path, *, title: str) -> Path:
    """Write HTML or PDF by the file's suffix."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".html", ".htm"):
        return write_html(html, path)
    if suffix == ".pdf":
        return write_pdf(html, path, title=title)
    from workbench.engine.errors import InputError

    raise InputError(f"{path}: unknown report kind '{suffix or '(none)'}'; use .html or .pdf")
