"""Checking a data set against the model that will score it.

Each finding has a level: ``error`` (the data cannot be used as it is), ``warning`` (it can, but
results may mislead) or ``info``. Messages name the column, an example and how many rows.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.adapter import Finding, ModelAdapter
from workbench.engine.loading import numeric_problem

_PROBE_ROWS = 5


def validate(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    *,
    target: str | None = None,
    id_column: str | None = None,
) -> list[Finding]:
    """All findings for ``frame`` scored by ``adapter`` (errors first)."""
    out: list[Finding] = []
    needed = adapter.input_columns
    if not adapter.named_columns:
        present = [c for c in frame.columns if c not in (target, id_column)]
        if len(present) != len(needed):
            out.append(Finding("error", f"the model takes {len(needed)} unnamed columns; the data has {len(present)} besides target and ID"))
        return out
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        out.append(Finding("error", f"missing column(s) the model needs: {', '.join(missing)}"))
    extra = [c for c in frame.columns if c not in needed and c not in (target, id_column)]
    if extra:
        shown = ", ".join(extra[:10]) + (" ..." if len(extra) > 10 else "")
        out.append(Finding("info", f"{len(extra)} column(s) the model does not use are ignored: {shown}"))
    present = [c for c in needed if c in frame.columns]
    categorical = set(adapter.categorical_columns)
    for col in present:
        if col in categorical:
            continue
        problem = numeric_problem(frame[col])
        if problem is not None:
            count, example = problem
            out.append(
                Finding("error", f"column '{col}' should hold numbers but has text in {count} row(s), for example {example!r}", col)
            )
    if adapter.column_map is not None:
        out.extend(_unseen_categories(adapter, frame, present))
    if not missing:
        out.extend(_missing_values(adapter, frame, present))
    if target is not None and target in frame.columns:
        out.extend(_target_findings(adapter, frame[target]))
    order = {"error": 0, "warning": 1, "info": 2}
    return sorted(out, key=lambda f: order[f.level])


def _unseen_categories(adapter: ModelAdapter, frame: pd.DataFrame, present: list[str]) -> list[Finding]:
    out = []
    for col, cats in adapter.column_map.categories.items():
        if col not in present:
            continue
        values = frame[col].dropna()
        unseen = ~values.astype(str).isin({str(c) for c in cats})
        count = int(unseen.sum())
        if count:
            examples = ", ".join(repr(v) for v in values[unseen].unique()[:3])
            allowed = adapter.column_map.unknown_allowed.get(col, True)
            level = "warning" if allowed else "error"
            tail = "the model treats them as unknown" if allowed else "the model cannot score them"
            out.append(Finding(level, f"column '{col}' has {count} row(s) with categories not seen in training ({examples}); {tail}", col))
    return out


def _missing_values(adapter: ModelAdapter, frame: pd.DataFrame, present: list[str]) -> list[Finding]:
    """Missing values: probe the model with a few rows where that column is missing."""
    out = []
    counts = frame[present].isna().sum()
    cols = [c for c in present if counts[c] > 0]
    if not cols:
        return out
    sample = frame.head(_PROBE_ROWS).copy()
    for col in cols:
        probe = sample.copy()
        probe[col] = np.nan if col not in adapter.categorical_columns else None
        try:
            adapter.score(probe)
            out.append(Finding("info", f"column '{col}' has {int(counts[col])} missing value(s); the model accepts them", col))
        except Exception as exc:  # noqa: BLE001 - any failure means the model cannot take them
            reason = str(exc).splitlines()[0][:120] if str(exc) else type(exc).__name__
            out.append(Finding("error", f"column '{col}' has {int(counts[col])} missing value(s) and the model cannot take them ({reason})", col))
    return out


def _target_findings(adapter: ModelAdapter, y: pd.Series) -> list[Finding]:
    out = []
    n_missing = int(y.isna().sum())
    if n_missing:
        out.append(Finding("warning", f"target '{y.name}' is missing in {n_missing} row(s); they are left out of metrics"))
    values = y.dropna()
    if adapter.classes:
        seen = pd.unique(values)
        classes_str = {str(c) for c in adapter.classes}
        strange = [v for v in seen if v not in adapter.classes and str(v) not in classes_str and not _same_number(v, adapter.classes)]
        if strange:
            shown = ", ".join(repr(v) for v in strange[:5])
            out.append(Finding("error", f"target '{y.name}' has values the model does not know as classes: {shown} (model classes: {adapter.classes})"))
        elif len(seen) < 2:
            out.append(Finding("error", f"target '{y.name}' has only one class ({seen[0]!r} if any); AUC and other metrics need both"))
    else:
        problem = numeric_problem(values)
        if problem is not None:
            out.append(Finding("error", f"target '{y.name}' should hold numbers but has text in {problem[0]} row(s), for example {problem[1]!r}"))
        elif adapter.task == "count" and (pd.to_numeric(values) < 0).any():
            out.append(Finding("error", f"target '{y.name}' has negative values; a count model needs counts of zero or more"))
    return out


def _same_number(v, classes) -> bool:
    try:
        fv = float(v)
    except (TypeError, ValueError):
        return False
    return any(isinstance(c, int | float | np.number) and float(c) == fv for c in classes)


def has_errors(findings: list[Finding]) -> bool:
    return any(f.level == "error" for f in findings)


def coerce_target(adapter: ModelAdapter, y: pd.Series) -> pd.Series:
    """Target values expressed as the model's own class labels (e.g. '1' -> 1)."""
    if not adapter.classes:
        return pd.to_numeric(y, errors="coerce")
    lookup = {str(c): c for c in adapter.classes}
    return y.map(lambda v: v if v in adapter.classes else lookup.get(str(v), lookup.get(_num_text(v), v)))


def _num_text(v) -> str:
    try:
        f = float(v)
        return str(int(f)) if f.is_integer() else str(f)
    except (TypeError, ValueError):
        return str(v)


def target_array(adapter: ModelAdapter, y, n: int) -> np.ndarray:
    """Target values in the form the metrics take: 0/1 for the class of interest (binary), the
    class labels in their natural type (multiclass; sklearn cannot type object labels), or
    numbers (regression, counts). Raises InputError for a wrong length, missing values or
    labels that are not the model's classes."""
    from workbench.engine.errors import InputError

    series = y.reset_index(drop=True) if isinstance(y, pd.Series) else pd.Series(np.asarray(y))
    if len(series) != n:
        raise InputError(f"{len(series)} target values for {n} rows")
    series = coerce_target(adapter, series)
    missing = int(series.isna().sum())
    if missing:
        raise InputError(f"the target is missing in {missing} row(s); drop them or fill them first")
    if adapter.classes:
        unknown = ~series.isin(adapter.classes)
        if unknown.any():
            raise InputError(
                f"the target holds value(s) that are not classes of the model "
                f"{adapter.classes}, for example {series[unknown].iloc[0]!r}"
            )
        if adapter.task == "binary":
            return (series == adapter.positive_class).to_numpy(dtype=int)
        return np.asarray(series.tolist())
    return series.to_numpy(dtype=float)
