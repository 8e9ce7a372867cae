"""The focus bar (model, segment, row, feature, pair; back and forward) and the settings panel."""

from __future__ import annotations

from PySide6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QPushButton,
    QSpinBox,
    QWidget,
)

from workbench.engine.segments import describe_segment
from workbench.ui.context import Context

NO_TARGET = "(no target)"


class FocusBar(QWidget):
    def __init__(self, ctx: Context, parent=None) -> None:
        super().__init__(parent)
        self.ctx = ctx
        self.back = QPushButton("◀ Back")
        self.back.setToolTip("Back through the focus history (Alt+Left)")
        self.forward = QPushButton("Forward ▶")
        self.forward.setToolTip("Forward through the focus history (Alt+Right)")
        self.model = QComboBox()
        self.model.setMinimumContentsLength(22)
        self.segment = QLabel()
        self.row = QLabel()
        self.feature = QComboBox()
        self.feature.setMinimumContentsLength(18)
        self.pair = QLabel()
        layout = QHBoxLayout(self)
        layout.setContentsMargins(4, 2, 4, 2)
        layout.addWidget(self.back)
        layout.addWidget(self.forward)
        for text, widget in (("Model", self.model), ("Segment", self.segment), ("Row", self.row),
                             ("Feature", self.feature), ("Pair", self.pair)):
            layout.addWidget(QLabel(f"<b>{text}</b>"))
            layout.addWidget(widget)
        layout.addStretch(1)
        self.back.clicked.connect(ctx.focus.back)
        self.forward.clicked.connect(ctx.focus.forward)
        self.model.activated.connect(self._model_chosen)
        self.feature.activated.connect(self._feature_chosen)
        ctx.focus.changed.connect(lambda *_: self.show_focus())
        ctx.workspace.changed.connect(lambda *_: self.show_focus())
        self.show_focus()

    def show_focus(self) -> None:
        ws, s = self.ctx.workspace, self.ctx.focus.state
        self.back.setEnabled(self.ctx.focus.can_go_back())
        self.forward.setEnabled(self.ctx.focus.can_go_forward())
        self.model.blockSignals(True)
        self.model.clear()
        for slot in ("A", "B"):
            held = ws.slot(slot)
            self.model.addItem(f"{slot}: {held.name}" if held else f"{slot}: (none)", slot)
        self.model.setCurrentIndex(0 if s.model == "A" else 1)
        self.model.blockSignals(False)
        text = describe_segment(s.segment)
        self.segment.setText(text if len(text) < 48 else text[:45] + "…")
        self.segment.setToolTip(text)
        self.row.setText("—" if s.row is None else str(s.row))
        adapter = ws.adapter(s.model)
        features = list(adapter.input_columns) if adapter else []
        self.feature.blockSignals(True)
        self.feature.clear()
        self.feature.addItems(["—", *features])
        self.feature.setCurrentText(s.feature if s.feature in features else "—")
        self.feature.blockSignals(False)
        self.pair.setText("—" if s.pair is None else f"{s.pair[0]} × {s.pair[1]}")

    def _model_chosen(self, index: int) -> None:
        self.ctx.focus.update(model=self.model.itemData(index))

    def _feature_chosen(self, index: int) -> None:
        text = self.feature.itemText(index)
        if text != "—":
            self.ctx.focus.update(feature=text)


class SettingsPanel(QWidget):
    """Target, class of interest, cutoff, background size and seed."""

    def __init__(self, ctx: Context, parent=None) -> None:
        super().__init__(parent)
        self.ctx = ctx
        self.target = QComboBox()
        self.positive = QComboBox()
        self.cutoff = QDoubleSpinBox()
        self.cutoff.setDecimals(4)
        self.cutoff.setRange(-1e9, 1e9)
        self.cutoff.setSingleStep(0.01)
        self.cutoff.setKeyboardTracking(False)
        self.background = QSpinBox()
        self.background.setRange(10, 5000)
        self.background.setSingleStep(50)
        self.background.setKeyboardTracking(False)
        self.seed = QSpinBox()
        self.seed.setRange(0, 2**31 - 1)
        self.seed.setKeyboardTracking(False)
        form = QFormLayout(self)
        # Labels above their fields: a narrow dock leaves the levels' plots room at 1440 x 900.
        form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.WrapAllRows)
        for combo in (self.target, self.positive):
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.setMinimumContentsLength(14)
        form.addRow("Target (actual outcome)", self.target)
        form.addRow("Class of interest", self.positive)
        form.addRow("Cutoff (score scale)", self.cutoff)
        form.addRow("Background rows", self.background)
        form.addRow("Seed", self.seed)
        note = QLabel("Attributions compare each case with a background sample of the reference "
                      "data (or of the data when no reference is open).")
        note.setWordWrap(True)
        note.setStyleSheet("color: #555;")
        form.addRow(note)
        self.target.activated.connect(self._target_chosen)
        self.positive.activated.connect(self._class_chosen)
        self.cutoff.valueChanged.connect(lambda v: ctx.workspace.update_settings(cutoff=float(v)))
        self.background.valueChanged.connect(
            lambda v: ctx.workspace.update_settings(background_size=int(v)))
        self.seed.valueChanged.connect(lambda v: ctx.workspace.update_settings(seed=int(v)))
        ctx.workspace.changed.connect(lambda *_: self.show_settings())
        self.show_settings()

    def show_settings(self) -> None:
        ws = self.ctx.workspace
        s = ws.settings
        for w in (self.target, self.positive, self.cutoff, self.background, self.seed):
            w.blockSignals(True)
        self.target.clear()
        self.target.addItem(NO_TARGET)
        if ws.frame is not None:
            self.target.addItems([str(c) for c in ws.frame.columns])
        self.target.setCurrentText(s.target or NO_TARGET)
        self.positive.clear()
        adapter = ws.adapter("A")
        if adapter is not None and adapter.classes:
            self.positive.addItems([str(c) for c in adapter.classes])
            self.positive.setCurrentText(str(adapter.positive_class))
            self.positive.setEnabled(True)
        else:
            self.positive.addItem(f"(none: a {adapter.task} model)" if adapter else "(no model)")
            self.positive.setEnabled(False)
        self.cutoff.setValue(s.cutoff)
        self.background.setValue(s.background_size)
        self.seed.setValue(s.seed)
        for w in (self.target, self.positive, self.cutoff, self.background, self.seed):
            w.blockSignals(False)

    def _target_chosen(self, index: int) -> None:
        text = self.target.itemText(index)
        self.ctx.workspace.update_settings(target=None if text == NO_TARGET else text)

    def _class_chosen(self, index: int) -> None:
        adapter = self.ctx.workspace.adapter("A")
        if adapter is not None and adapter.classes:
            self.ctx.workspace.update_settings(positive_class=adapter.classes[index])
