"""Similar rows: the rows of the data nearest one case, with their predictions and labels.

Nearness is Gower's (1971) distance over the chosen columns (see :mod:`workbench.engine.gower`),
so numeric and categorical inputs count alike and missing values are skipped pairwise.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError
from workbench.engine.gower import nearest
from workbench.engine.reasons import CREDIT_SIDES, CutoffSides


@dataclass(frozen=True)
class SimilarRow:
    """One neighbour: its position in the data, Gower distance, prediction and label (or None)."""

    row: int
    distance: float
    prediction: float | None
    label: object

    def as_dict(self) -> dict:
        return {"row": self.row, "distance": self.distance, "prediction": self.prediction,
                "label": self.label}


def _plain(value):
    if isinstance(value, np.generic):
        value = value.item()
    if value is pd.NA or (isinstance(value, float) and np.isnan(value)):
        return None
    return value


def similar_rows(data_frame: pd.DataFrame, row_position: int, *, k: int = 5,
                 columns: Sequence[str] | None = None, scores=None, labels=None,
                 categorical: Sequence[str] | None = None) -> list[SimilarRow]:
    """The ``k`` rows nearest the row at ``row_position`` (itself excluded), nearest first.

    ``columns``: the columns compared (default: all; pass the model's input columns).
    ``scores`` / ``labels``: per-row predictions and actual outcomes (aligned with the frame by
    position) to report beside each neighbour. ``categorical``: columns compared as labels
    even when numeric (default: text, category and boolean columns).
    """
    n = len(data_frame)
    if isinstance(row_position, bool) or not isinstance(row_position, int | np.integer):
        raise InputError(f"the row must be a row number, not {row_position!r}")
    if not 0 <= int(row_position) < n:
        raise InputError(f"row {row_position} is outside the data ({n} rows; rows are numbered 0 to {n - 1})")
    if n < 2:
        raise InputError("similar rows need at least two rows of data")
    columns = list(data_frame.columns if columns is None else columns)
    absent = [c for c in columns if c not in data_frame.columns]
    if absent:
        raise InputError(f"the data lacks column(s): {', '.join(absent)}")
    for name, values in (("scores", scores), ("labels", labels)):
        if values is not None and len(values) != n:
            raise InputError(f"{name} hold {len(values)} values for {n} rows")
    found = nearest(data_frame[columns], int(row_position), int(k), exclude_self=True,
                    categorical=categorical)
    score_arr = None if scores is None else np.asarray(scores, dtype=float)
    label_arr = None if labels is None else (labels.to_numpy() if isinstance(labels, pd.Series)
                                             else np.asarray(labels, dtype=object))
    out = []
    for pos, d in zip(found.positions, found.distances, strict=True):
        out.append(SimilarRow(
            int(pos), float(d),
            None if score_arr is None else _plain(score_arr[pos]),
            None if label_arr is None else _plain(label_arr[pos])))
    return out


def similar_summary(rows: Sequence[SimilarRow], *, cutoff: float | None = None,
                    adverse_if: str = "above", sides: CutoffSides = CREDIT_SIDES) -> str:
    """One sentence: how many neighbours the model puts on the side of the cutoff reasons are
    stated for (``sides.stated``), and their labels."""
    if not rows:
        return "No similar rows."
    parts = [f"{len(rows)} most similar rows (Gower distance {rows[0].distance:.3g} to "
             f"{rows[-1].distance:.3g})"]
    preds = [r.prediction for r in rows if r.prediction is not None]
    if cutoff is not None and preds:
        adverse = sum((p >= cutoff) if adverse_if == "above" else (p < cutoff) for p in preds)
        parts.append(f"{adverse} of {len(preds)} on {sides.stated} (cutoff {cutoff:g})")
    labels = [r.label for r in rows if r.label is not None]
    if labels:
        counts = pd.Series(labels).astype(str).value_counts()
        parts.append("labels: " + ", ".join(f"{v} × {c}" for v, c in counts.items()))
    return "; ".join(parts) + "."


__all__ = ["SimilarRow", "similar_rows", "similar_summary"]
