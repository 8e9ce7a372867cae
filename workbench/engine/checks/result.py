"""What one check says: its status, the evidence behind it and where the window shows it."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

STATUSES = ("pass", "warn", "fail")
_RANK = {"pass": 0, "warn": 1, "fail": 2}


@dataclass(frozen=True)
class CheckResult:
    """The outcome of one audit check.

    ``id``: stable name such as ``monotonicity:age_years`` or ``leakage``; ``status``: one of
    "pass", "warn", "fail"; ``summary``: one line saying why; ``evidence``: numbers and tables
    (tables as lists of row dicts) that back the status; ``parameters``: what the check was run
    with (thresholds, rows sampled, seed); ``level``: the window level that shows the evidence
    and ``focus`` the focus to open it with (e.g. ``{"feature": "age_years"}``); ``plot``:
    optional data for a picture (``kind`` plus arrays).
    """

    id: str
    title: str
    status: str
    summary: str
    evidence: dict
    parameters: dict
    level: str
    focus: dict = field(default_factory=dict)
    plot: dict | None = None
    caution: str | None = None

    def __post_init__(self) -> None:
        if self.status not in STATUSES:
            raise ValueError(f"status must be one of {STATUSES}, not {self.status!r}")

    def as_dict(self) -> dict:
        """Plain JSON-ready data (numpy values become Python numbers, NaN becomes None)."""
        return plain({
            "id": self.id, "title": self.title, "status": self.status, "summary": self.summary,
            "evidence": self.evidence, "parameters": self.parameters, "level": self.level,
            "focus": self.focus, "plot": self.plot, "caution": self.caution,
        })


def worst_status(statuses) -> str:
    """The most severe of some statuses ("pass" when there are none)."""
    return max(statuses, key=_RANK.__getitem__, default="pass")


def at_least(status: str, floor: str) -> bool:
    return _RANK[status] >= _RANK[floor]


def table(frame: pd.DataFrame) -> list[dict]:
    """A frame as a list of row dicts (the form evidence tables take)."""
    return plain(frame.to_dict(orient="records"))


def plain(obj):
    """numpy / pandas values as plain Python, NaN and infinities as None."""
    if isinstance(obj, dict):
        return {str(k): plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return plain(obj.tolist())
    if isinstance(obj, np.generic):
        return plain(obj.item())
    if isinstance(obj, float):
        return obj if np.isfinite(obj) else None
    if obj is pd.NA or obj is pd.NaT:
        return None
    return obj
