"""Shared plot parts: our colours, a titled plot with units, hover read-outs, PNG/SVG export.

Colours: contributions that raise the score are vermillion, those that lower it bluish green
(a colour-blind-safe pair); feature values use cividis, signed association a colour-blind-safe
blue-to-yellow diverging map. No pink-red to blue gradient anywhere.
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import pyqtgraph as pg
import pyqtgraph.exporters
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QAction, QColor, QFontMetrics, QPainter, QPen
from PySide6.QtWidgets import QFileDialog, QGraphicsObject, QLabel, QVBoxLayout, QWidget

RAISES = "#D55E00"  # vermillion: pushes the score up
LOWERS = "#009E73"  # bluish green: pushes the score down
NEUTRAL = "#7A7A7A"
FOCUS_MARK = "#000000"
CURVE = "#0B3C5D"  # effect curves: dark blue-grey, apart from the raise/lower pair
SECOND = "#E69F00"  # a second curve (ALE), orange from the same colour-blind-safe set
MAX_SCATTER_POINTS = 20_000
GRID_MAJOR = "#DCDCDC"  # opaque light greys behind the data (see BackGrid)
GRID_MINOR = "#F0F0F0"

pg.setConfigOptions(background="w", foreground="k", antialias=True)


@functools.cache
def sequential_map() -> pg.ColorMap:
    return pg.colormap.get("cividis")


@functools.cache
def diverging_map() -> pg.ColorMap:
    return pg.colormap.get("CET-CBD1")


def colour(hex_text: str, alpha: int = 255) -> QColor:
    c = QColor(hex_text)
    c.setAlpha(alpha)
    return c


class BackGrid(QGraphicsObject):
    """Grid lines at the axes' ticks, opaque light grey, drawn behind the plotted items.

    pyqtgraph's own grid is drawn by the axes over the data in translucent lines; blending
    them took about 6 ms per axis at every repaint of a plot (against 0.2 ms without), enough
    to freeze the window when several plots repaint at once.
    """

    def __init__(self, plot: pg.PlotItem) -> None:
        super().__init__()
        self.plot = plot
        view = plot.vb
        self.setParentItem(view)
        self.setZValue(-1e5)  # above the view's background (-1e6), below the items
        self._rect = QRectF(view.rect())
        self._ticks_for: tuple | None = None
        self._ticks: list = []
        view.sigRangeChanged.connect(lambda *_: self.update())
        view.sigResized.connect(self._resized)

    def _resized(self, *_) -> None:
        self.prepareGeometryChange()
        self._rect = QRectF(self.plot.vb.rect())

    def boundingRect(self) -> QRectF:  # noqa: N802 - Qt's name
        return self._rect

    def paint(self, painter: QPainter, *_args) -> None:
        view = self.plot.vb
        (x0, x1), (y0, y1) = view.viewRange()
        rect = self._rect
        # the tick values change with the range only, and cost ~0.5 ms per axis to work out
        bottom, left = self.plot.getAxis("bottom"), self.plot.getAxis("left")
        key = (x0, x1, y0, y1, rect.width(), rect.height(), bottom._tickLevels, left._tickLevels,
               bottom.isVisible(), left.isVisible())
        if key != self._ticks_for:
            self._ticks_for = key
            self._ticks = [(_tick_values(bottom, x0, x1, rect.width(), lv),
                            _tick_values(left, y0, y1, rect.height(), lv)) for lv in (0, 1)]
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, False)
        for level, colour_text in ((1, GRID_MINOR), (0, GRID_MAJOR)):  # major lines on top
            painter.setPen(QPen(QColor(colour_text), 0))
            xs, ys = self._ticks[level]
            for x in xs:
                px = view.mapFromView(QPointF(x, y0)).x()
                painter.drawLine(QPointF(px, rect.top()), QPointF(px, rect.bottom()))
            for y in ys:
                py = view.mapFromView(QPointF(x0, y)).y()
                painter.drawLine(QPointF(rect.left(), py), QPointF(rect.right(), py))


def _tick_values(axis, low: float, high: float, pixels: float, level: int) -> list[float]:
    """The axis's tick values of one level (0 major, 1 minor): fixed ticks when set."""
    if not axis.isVisible() or pixels <= 0 or not high > low:
        return []
    if axis._tickLevels is not None:  # ticks fixed by setTicks (category names)
        levels = [[v for v, _text in ticks] for ticks in axis._tickLevels]
    else:
        levels = [list(values) for _spacing, values in axis.tickValues(low, high, pixels)]
    return [v for v in levels[level] if low <= v <= high] if level < len(levels) else []


class TitledPlot(QWidget):
    """A pyqtgraph plot with a title, labelled axes, a hover line under it and export actions."""

    def __init__(self, title: str, x_label: str = "", y_label: str = "", parent=None) -> None:
        super().__init__(parent)
        self.plot_widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.plot_widget.getPlotItem()
        # The title is a wrapping QLabel: pyqtgraph's own title would force the plot's minimum
        # width to the title's length and clip the plot in narrow panes. Exports add it back.
        self.title_label = QLabel("")
        self.title_label.setWordWrap(True)
        self.title_label.setObjectName("plot-title")
        self.title_label.setStyleSheet("font-weight: bold; padding: 2px 6px;")
        # Room for two lines whatever the title: a title that wraps when its result arrives
        # would otherwise resize every plot beside it, and they would all repaint at once.
        bold = self.title_label.font()
        bold.setBold(True)
        self.title_label.setFixedHeight(2 * QFontMetrics(bold).lineSpacing() + 6)
        self.title_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        self.hover = QLabel(" ")
        self.hover.setObjectName("hover")
        self.hover.setStyleSheet("color: #333; padding-left: 6px;")
        self.hover.setMinimumWidth(10)
        self.hover.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(0)
        layout.addWidget(self.title_label)
        layout.addWidget(self.plot_widget, 1)
        layout.addWidget(self.hover)
        self.grid = BackGrid(self.plot)
        for side in ("left", "bottom"):
            self.plot.getAxis(side).enableAutoSIPrefix(False)  # units stay as labelled
        self.set_text(title, x_label, y_label)
        self._hover_fn = None
        self._proxy = pg.SignalProxy(self.plot_widget.scene().sigMouseMoved, rateLimit=30,
                                     slot=self._moved)
        self._add_export_actions()

    def set_text(self, title: str, x_label: str | None = None, y_label: str | None = None,
                 tip: str | None = None) -> None:
        """The title (two lines' room; ``tip``, or the title in full, as its tooltip)."""
        self.title, self.tip = title, tip or title
        self.title_label.setText(title)
        self.title_label.setToolTip(self.tip)
        if x_label is not None:
            self.plot.setLabel("bottom", x_label)
        if y_label is not None:
            self.plot.setLabel("left", y_label)

    def axis_label(self, which: str) -> str:
        return self.plot.getAxis(which).labelText

    # ---- hover -----------------------------------------------------------------------------------
    def on_hover(self, fn) -> None:
        """``fn(x, y) -> str | None`` in data coordinates, shown under the plot."""
        self._hover_fn = fn

    def _moved(self, event) -> None:
        pos = event[0]
        if self._hover_fn is None or not self.plot.sceneBoundingRect().contains(pos):
            return
        point = self.plot.vb.mapSceneToView(pos)
        text = self._hover_fn(point.x(), point.y())
        self.hover.setText(text or " ")

    def view_to_scene(self, x: float, y: float) -> QPointF:
        return self.plot.vb.mapViewToScene(QPointF(x, y))

    # ---- export ---------------------------------------------------------------------------------
    def _add_export_actions(self) -> None:
        menu = self.plot.vb.menu
        menu.addSeparator()
        for kind in ("PNG", "SVG"):
            action = QAction(f"Save this plot as {kind}…", menu)
            action.triggered.connect(lambda _=False, k=kind: self._ask_export(k))
            menu.addAction(action)

    def _ask_export(self, kind: str) -> None:
        stem = "".join(ch if ch.isalnum() else "_" for ch in self.title)[:60] or "plot"
        path, _ = QFileDialog.getSaveFileName(self, f"Save plot as {kind}", f"{stem}.{kind.lower()}",
                                              f"{kind} (*.{kind.lower()})")
        if path:
            self.export(path)

    def export(self, path: str | Path) -> Path:
        path = Path(path)
        self.plot.setTitle(self.title, size="9pt")
        try:
            self._export(path)
        finally:
            self.plot.setTitle(None)
        return path

    def _export(self, path: Path) -> None:
        if path.suffix.lower() == ".svg":
            try:
                pg.exporters.SVGExporter(self.plot).export(str(path))
            except ValueError:
                # pyqtgraph 0.14's SVG path rewriting fails on some Qt 6 path strings;
                # draw the same scene region through Qt's own SVG generator instead.
                self._export_svg_qt(path)
            return
        else:
            exporter = pg.exporters.ImageExporter(self.plot)
            exporter.parameters()["width"] = max(int(self.plot.sceneBoundingRect().width()) * 2, 400)
        exporter.export(str(path))


    def _export_svg_qt(self, path: Path) -> None:
        from PySide6.QtCore import QRectF, QSize
        from PySide6.QtGui import QPainter
        from PySide6.QtSvg import QSvgGenerator

        rect = self.plot.sceneBoundingRect()
        generator = QSvgGenerator()
        generator.setFileName(str(path))
        generator.setSize(QSize(int(rect.width()), int(rect.height())))
        generator.setViewBox(QRectF(0, 0, rect.width(), rect.height()))
        generator.setTitle(self.title)
        painter = QPainter(generator)
        try:
            self.plot_widget.scene().render(painter, QRectF(0, 0, rect.width(), rect.height()), rect)
        finally:
            painter.end()


def category_ticks(levels) -> list[tuple[int, str]]:
    """Ticks for categories at 0, 1, ...: a label of several words goes on two lines, so that
    neighbouring labels ("metro north", "metro south") do not run into each other."""
    out = []
    for i, value in enumerate(levels):
        text = str(value)
        words = text.split(" ")
        if len(levels) > 3 and len(words) > 1 and len(text) > 8:
            half = (len(words) + 1) // 2
            text = " ".join(words[:half]) + "\n" + " ".join(words[half:])
        out.append((i, text))
    return out


def thin_indices(n: int, limit: int = MAX_SCATTER_POINTS, seed: int = 0) -> np.ndarray:
    """All points up to ``limit``, else a seeded subset of ``limit`` of them."""
    if n <= limit:
        return np.arange(n)
    return np.sort(np.random.default_rng(seed).choice(n, size=limit, replace=False))


def value_colours(values: np.ndarray, cmap: pg.ColorMap | None = None,
                  limits: tuple[float, float] | None = None) -> list:
    """Brushes for numeric values on a map (default sequential; missing values grey).

    Without ``limits`` the 2nd to 98th percentiles span the map, so outliers do not wash it out.
    """
    cmap = cmap or sequential_map()
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    if limits is not None:
        lo, hi = limits
    else:
        lo, hi = (np.nanpercentile(v[finite], [2, 98]) if finite.any() else (0.0, 1.0))
    scaled = np.clip((v - lo) / (hi - lo if hi > lo else 1.0), 0, 1)
    # One shared brush per colour step: pyqtgraph draws spots far faster when brushes repeat.
    brushes = _palette(cmap)
    steps = np.clip((np.nan_to_num(scaled) * 255).astype(int), 0, 255)
    grey = pg.mkBrush(NEUTRAL)
    return [brushes[k] if ok else grey for k, ok in zip(steps, finite, strict=True)]


_PALETTES: dict[object, list] = {}


def _palette(cmap: pg.ColorMap) -> list:
    key = getattr(cmap, "name", None) or id(cmap)
    if key not in _PALETTES:
        table = cmap.getLookupTable(nPts=256, alpha=False)
        _PALETTES[key] = [pg.mkBrush(int(r), int(g), int(b), 200) for r, g, b in table]
    return _PALETTES[key]


def message_item(plot: pg.PlotItem, text: str) -> pg.TextItem:
    """A centred grey note inside an empty plot ("not available yet", "computing")."""
    plot.clear()
    item = pg.TextItem(text, color="#555", anchor=(0.5, 0.5))
    plot.addItem(item)
    plot.setXRange(0, 1, padding=0)
    plot.setYRange(0, 1, padding=0)
    item.setPos(0.5, 0.5)
    return item


def point_under(item, x: float, y: float):
    """The first spot of a scatter item under (x, y), or None (no item, or nothing there)."""
    if item is None:
        return None
    points = item.pointsAt(QPointF(x, y))
    return points[0] if len(points) else None
