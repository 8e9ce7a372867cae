"""Gower distance of every row of a frame to one record, for finding similar rows.

Gower (1971), "A general coefficient of similarity and some of its properties", Biometrics
27:857-871: per column, numeric |x - y| / range and categorical 0 (same) / 1 (different); the
distance is the mean over the columns where both values are present (1 - Gower's similarity).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError


def _record(frame: pd.DataFrame, row) -> pd.Series:
    if isinstance(row, pd.Series):
        return row
    if isinstance(row, Mapping):
        return pd.Series(row)
    if isinstance(row, int | np.integer):
        if not -len(frame) <= int(row) < len(frame):
            raise InputError(f"row {row} is outside the data ({len(frame)} rows)")
        return frame.iloc[int(row)]
    raise InputError("row must be a row position, a dict of values or a pandas Series")


def _is_categorical(series: pd.Series) -> bool:
    return not pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)


def gower_distances(frame: pd.DataFrame, row, *, ranges: Mapping[str, float] | None = None,
                    categorical: Sequence[str] | None = None) -> np.ndarray:
    """Distance (n,) in [0, 1] of each row of ``frame`` to ``row``.

    ``row``: a position in ``frame`` or a record (dict / Series) with the same columns.
    ``ranges``: range per numeric column (default: max - min in ``frame``, ignoring missing);
    a column of zero range counts 0 when the values are equal and 1 otherwise; values outside
    the range can give terms above 1 (not clipped, as in Gower's definition).
    ``categorical``: columns compared as labels (default: text, category, boolean columns).
    Rows sharing no present column with ``row`` get NaN.
    """
    if frame.shape[1] == 0:
        raise InputError("no columns to compare")
    target = _record(frame, row)
    absent = [c for c in frame.columns if c not in target.index]
    if absent:
        raise InputError(f"the record lacks columns: {', '.join(map(str, absent))}")
    forced = set(categorical or ())
    cat = [c for c in frame.columns if c in forced or _is_categorical(frame[c])]
    num = [c for c in frame.columns if c not in cat]
    n = len(frame)
    total = np.zeros(n)
    present = np.zeros(n)
    if num:
        X = frame[num].apply(pd.to_numeric, errors="coerce").to_numpy(dtype=float)
        x0 = pd.to_numeric(target[num], errors="coerce").to_numpy(dtype=float)
        if ranges is None:
            span = np.nanmax(X, axis=0, initial=-np.inf) - np.nanmin(X, axis=0, initial=np.inf)
        else:
            span = np.array([ranges.get(c, np.nan) for c in num], dtype=float)
            fallback = np.nanmax(X, axis=0) - np.nanmin(X, axis=0)
            span = np.where(np.isnan(span), fallback, span)
        diff = np.abs(X - x0)
        with np.errstate(invalid="ignore", divide="ignore"):
            terms = np.where(span > 0, diff / span, (diff > 0).astype(float))
        ok = np.isfinite(X) & np.isfinite(x0)
        total += np.where(ok, terms, 0.0).sum(axis=1)
        present += ok.sum(axis=1)
    for c in cat:
        value = target[c]
        col = frame[c]
        ok = col.notna().to_numpy() & (not pd.isna(value))
        differ = (col.astype(object).to_numpy() != value) if ok.any() else np.zeros(n, bool)
        total += np.where(ok, differ, 0.0)
        present += ok
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(present > 0, total / present, np.nan)


@dataclass(frozen=True)
class Neighbours:
    """The ``k`` rows nearest to a record: positions (k,), index labels (k,), distances (k,)."""

    positions: np.ndarray
    labels: list
    distances: np.ndarray


def nearest(frame: pd.DataFrame, row, k: int = 5, *, exclude_self: bool = True,
            ranges: Mapping[str, float] | None = None,
            categorical: Sequence[str] | None = None) -> Neighbours:
    """The ``k`` rows of smallest Gower distance (ties by position; NaN distances never chosen).

    When ``row`` is a position and ``exclude_self`` is true the row itself is left out.
    """
    if int(k) < 1:
        raise InputError("k must be at least 1")
    d = gower_distances(frame, row, ranges=ranges, categorical=categorical)
    candidates = np.flatnonzero(np.isfinite(d))
    if exclude_self and isinstance(row, int | np.integer):
        candidates = candidates[candidates != int(row) % len(frame)]
    order = candidates[np.argsort(d[candidates], kind="stable")][: int(k)]
    return Neighbours(order, list(frame.index[order]), d[order])
