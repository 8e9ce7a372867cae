"""Which model-space columns each raw input column of a pipeline becomes.

Attributions are reported per raw column; tree and linear attributions are computed in model
space and summed back over the parts of each raw column, so the map must be exact. We read it
from the fitted transformers (``output_indices_`` of a ColumnTransformer, the categories of an
encoder) and refuse, with a reason, any step whose outputs cannot be traced to its inputs.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from sklearn.compose import ColumnTransformer
from sklearn.impute import SimpleImputer
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import (
    FunctionTransformer,
    MaxAbsScaler,
    MinMaxScaler,
    Normalizer,
    OneHotEncoder,
    OrdinalEncoder,
    PowerTransformer,
    QuantileTransformer,
    RobustScaler,
    StandardScaler,
    TargetEncoder,
)

# Transformers whose i-th output depends only on the i-th input.
_ONE_TO_ONE = (
    StandardScaler,
    MinMaxScaler,
    MaxAbsScaler,
    RobustScaler,
    OrdinalEncoder,
    PowerTransformer,
    QuantileTransformer,
)


class UnmappableStep(Exception):
    """A pipeline step whose outputs cannot be traced to its raw inputs."""


@dataclass(frozen=True)
class ColumnMap:
    """Raw input columns, model-space columns and, per model column, the raw column it comes from."""

    input_columns: list[str]
    model_columns: list[str]
    source: np.ndarray  # (n_model_columns,) index into input_columns
    categorical: list[str] = field(default_factory=list)
    categories: dict[str, list] = field(default_factory=dict)
    unknown_allowed: dict[str, bool] = field(default_factory=dict)

    def as_dict(self) -> dict[str, list[str]]:
        out: dict[str, list[str]] = {c: [] for c in self.input_columns}
        for j, src in enumerate(self.source):
            out[self.input_columns[int(src)]].append(self.model_columns[j])
        return out

    def aggregation_matrix(self) -> np.ndarray:
        """(n_model_columns, n_input_columns) 0/1 matrix: model-space values @ M = raw values."""
        m = np.zeros((len(self.model_columns), len(self.input_columns)))
        m[np.arange(len(self.source)), self.source] = 1.0
        return m


def _sources(step, n_in: int, names_in: list[str], info: dict) -> list[int]:
    """For each output of a fitted ``step``, the index of the input it comes from."""
    if step is None or step == "passthrough":
        return list(range(n_in))
    if step == "drop":
        return []
    if isinstance(step, Pipeline):
        src = list(range(n_in))
        names = list(names_in)
        for _, sub in step.steps:
            if sub is None or sub == "passthrough":
                continue
            inner = _sources(sub, len(src), names, info)
            src = [src[i] for i in inner]
            names = _names_out(sub, names)
        return src
    if isinstance(step, ColumnTransformer):
        return _column_transformer_sources(step, names_in, info)
    if isinstance(step, OneHotEncoder):
        _note_categories(step, names_in, info, unknown=step.handle_unknown != "error")
        counts = getattr(step, "_n_features_outs", None)
        if counts is None:
            counts = [len(c) for c in step.categories_]
        return [i for i, k in enumerate(counts) for _ in range(int(k))]
    if isinstance(step, OrdinalEncoder):
        _note_categories(step, names_in, info, unknown=step.handle_unknown != "error")
        return list(range(n_in))
    if isinstance(step, TargetEncoder):
        _note_categories(step, names_in, info, unknown=True)
        per = 1 if getattr(step, "target_type_", "binary") != "multiclass" else len(step.classes_)
        return [i for i in range(n_in) for _ in range(per)]
    if isinstance(step, SimpleImputer):
        if step.add_indicator:
            raise UnmappableStep("SimpleImputer with add_indicator")
        # columns that were all missing at fit time are dropped by the imputer
        stats = getattr(step, "statistics_", None)
        if stats is not None and not getattr(step, "keep_empty_features", False):
            keep = [i for i, s in enumerate(stats) if not _is_nan(s)]
            return keep
        return list(range(n_in))
    if isinstance(step, _ONE_TO_ONE):
        return list(range(n_in))
    if isinstance(step, Normalizer):
        raise UnmappableStep("Normalizer mixes all columns of a row")
    if isinstance(step, FunctionTransformer):
        if step.feature_names_out == "one-to-one" or step.func is None:
            return list(range(n_in))
        raise UnmappableStep("FunctionTransformer without one-to-one feature names")
    # A step that keeps its input names one for one is positional too.
    try:
        out = list(step.get_feature_names_out(names_in))
    except Exception as exc:  # noqa: BLE001 - any failure means we cannot trace it
        raise UnmappableStep(f"{type(step).__name__} does not name its outputs") from exc
    if out == list(names_in):
        return list(range(n_in))
    raise UnmappableStep(f"{type(step).__name__} combines input columns")


def _is_nan(v) -> bool:
    try:
        return bool(np.isnan(v))
    except TypeError:
        return False


def _names_out(step, names_in: list[str]) -> list[str]:
    if step is None or step == "passthrough":
        return list(names_in)
    try:
        return [str(n) for n in step.get_feature_names_out(names_in)]
    except Exception:  # noqa: BLE001
        return [f"{type(step).__name__.lower()}{i}" for i in range(len(names_in))]


def _note_categories(enc, names_in: list[str], info: dict, *, unknown: bool) -> None:
    for name, cats in zip(names_in, enc.categories_, strict=False):
        info.setdefault("categorical", []).append(name)
        info.setdefault("categories", {})[name] = [c for c in cats.tolist() if not _is_nan(c)]
        info.setdefault("unknown", {})[name] = unknown


def _column_transformer_sources(ct: ColumnTransformer, names_in: list[str], info: dict) -> list[int]:
    n_out = sum(s.stop - s.start for s in ct.output_indices_.values())
    src: list[int | None] = [None] * n_out
    lookup = {n: i for i, n in enumerate(names_in)}
    for name, trans, cols in ct.transformers_:
        sl = ct.output_indices_.get(name, slice(0, 0))
        if sl.stop - sl.start == 0:
            continue
        idx = _resolve_columns(cols, names_in, lookup)
        sub_names = [names_in[i] for i in idx]
        inner = _sources(trans, len(idx), sub_names, info)
        if len(inner) != sl.stop - sl.start:
            raise UnmappableStep(f"transformer '{name}' gives {sl.stop - sl.start} columns, traced {len(inner)}")
        for k, j in enumerate(range(sl.start, sl.stop)):
            src[j] = idx[inner[k]]
    if any(s is None for s in src):
        raise UnmappableStep("ColumnTransformer output not traced")
    return [int(s) for s in src]


def _resolve_columns(cols, names_in: list[str], lookup: dict[str, int]) -> list[int]:
    if callable(cols):
        raise UnmappableStep("column selector is a callable")
    arr = np.atleast_1d(np.asarray(cols))
    if arr.dtype == bool:
        return [int(i) for i in np.flatnonzero(arr)]
    if np.issubdtype(arr.dtype, np.integer):
        return [int(i) % len(names_in) for i in arr]
    return [lookup[str(c)] for c in arr]


def build_column_map(preprocessor, input_columns: list[str]) -> ColumnMap:
    """Trace a fitted preprocessor (or None) from raw ``input_columns`` to model space.

    Raises :class:`UnmappableStep` with the reason when a step cannot be traced.
    """
    info: dict = {}
    if preprocessor is None:
        return ColumnMap(list(input_columns), list(input_columns), np.arange(len(input_columns)))
    src = _sources(preprocessor, len(input_columns), list(input_columns), info)
    model_columns = _names_out(preprocessor, list(input_columns))
    if len(model_columns) != len(src):
        model_columns = [f"m{j}" for j in range(len(src))]
    return ColumnMap(
        list(input_columns),
        model_columns,
        np.asarray(src, dtype=int),
        categorical=list(dict.fromkeys(info.get("categorical", []))),
        categories=info.get("categories", {}),
        unknown_allowed=info.get("unknown", {}),
    )
