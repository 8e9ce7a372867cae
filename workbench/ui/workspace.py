"""What is open in a window: models A and B, the data, the reference data, the settings.

The window changes these only through the methods here, which emit ``changed`` with what
changed ("model", "data", "reference", "settings"), so the levels know to re-render.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd
from PySide6.QtCore import QObject, Signal

from workbench.engine.adapter import ModelAdapter
from workbench.engine.loading import Dataset, LoadedModel
from workbench.engine.validation import coerce_target

MODEL_SLOTS = ("A", "B")


@dataclass(frozen=True)
class Settings:
    """The analyst's settings; every cached result is keyed by the ones it depends on."""

    target: str | None = None
    positive_class: object = None
    cutoff: float = 0.5
    background_size: int = 100
    seed: int = 0


@dataclass(frozen=True)
class ModelSlot:
    loaded: LoadedModel
    adapter: ModelAdapter

    @property
    def name(self) -> str:
        return self.loaded.path.name

    @property
    def sha256(self) -> str:
        return self.loaded.sha256


class Workspace(QObject):
    changed = Signal(str)

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.models: dict[str, ModelSlot] = {}
        self.data: Dataset | None = None
        self.reference: Dataset | None = None
        self.settings = Settings()
        self.generation = 0  # bumped on every change: results computed before are stale
        self._labels: dict[str, pd.Series | None] = {}

    # ---- changes --------------------------------------------------------------------------
    def set_model(self, slot: str, loaded: LoadedModel, adapter: ModelAdapter | None = None) -> ModelSlot:
        adapter = adapter or ModelAdapter(loaded.estimator)
        if self.settings.positive_class is not None and adapter.classes:
            if str(self.settings.positive_class) in {str(c) for c in adapter.classes}:
                adapter = adapter.with_class(self.settings.positive_class)
        self.models[slot] = ModelSlot(loaded, adapter)
        self._touch("model")
        return self.models[slot]

    def set_data(self, data: Dataset) -> None:
        self.data = data
        if self.settings.target and self.settings.target not in data.frame.columns:
            self.settings = replace(self.settings, target=None)
        self._touch("data")

    def set_reference(self, data: Dataset) -> None:
        self.reference = data
        self._touch("reference")

    def update_settings(self, **changes) -> bool:
        new = replace(self.settings, **changes)
        if new == self.settings:
            return False
        class_changed = new.positive_class != self.settings.positive_class
        self.settings = new
        if class_changed and new.positive_class is not None:
            for slot, held in list(self.models.items()):
                if held.adapter.classes and str(new.positive_class) in {str(c) for c in held.adapter.classes}:
                    self.models[slot] = ModelSlot(held.loaded, held.adapter.with_class(new.positive_class))
        self._touch("settings")
        return True

    def _touch(self, what: str) -> None:
        self.generation += 1
        self._labels.clear()
        self.changed.emit(what)

    # ---- reading --------------------------------------------------------------------------
    def slot(self, name: str) -> ModelSlot | None:
        return self.models.get(name)

    def adapter(self, name: str) -> ModelAdapter | None:
        held = self.models.get(name)
        return held.adapter if held else None

    @property
    def frame(self) -> pd.DataFrame | None:
        return None if self.data is None else self.data.frame

    @property
    def n_rows(self) -> int:
        return 0 if self.data is None else len(self.data.frame)

    def labels(self, slot: str = "A") -> pd.Series | None:
        """The target as the model's own class labels, or None when no target is set."""
        target = self.settings.target
        adapter = self.adapter(slot)
        if target is None or self.data is None or target not in self.data.frame.columns:
            return None
        if slot not in self._labels:
            y = self.data.frame[target]
            self._labels[slot] = coerce_target(adapter, y) if adapter is not None else y
        return self._labels[slot]

    def positive_labels(self, slot: str = "A") -> np.ndarray | None:
        """1 where the label is the class of interest, 0 otherwise, NaN where missing."""
        y = self.labels(slot)
        adapter = self.adapter(slot)
        if y is None or adapter is None:
            return None
        if not adapter.classes:
            return pd.to_numeric(y, errors="coerce").to_numpy(dtype=float)
        out = (y == adapter.positive_class).to_numpy(dtype=float)
        out[y.isna().to_numpy()] = np.nan
        return out

    def background_frame(self) -> pd.DataFrame | None:
        """Rows the attributions compare against: the reference data when open, else the data."""
        if self.reference is not None:
            return self.reference.frame
        return self.frame

    def data_key(self) -> tuple:
        ref = self.reference.sha256 if self.reference is not None else None
        return (self.data.sha256 if self.data is not None else None, ref)
