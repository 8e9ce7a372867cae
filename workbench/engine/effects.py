"""How the model's output moves with one feature: partial dependence, ICE, pair maps and ALE.

- Partial dependence (PD) and individual conditional expectation (ICE): every row is scored with
  the feature set to each grid value; the ICE line of a row is its scores along the grid and the
  PD curve is their mean (Friedman 2001, Ann. Statist. 29(5), section 8.2, numbering from
  memory; Goldstein et al. 2015, J. Comput. Graph. Statist. 24(1) for ICE and centred ICE).
  This is the "brute" method of sklearn.inspection.partial_dependence.
- Pair map: the two-feature partial dependence on a grid of both features.
- Accumulated local effects (ALE), first order, numeric features, quantile bins (Apley and Zhu
  2020, J. R. Statist. Soc. B 82(4), the uncentred and centred estimators; section and
  equation numbers cited from memory: section 2.2, eqs. 15 and 16).

All model calls are batched: many modified copies of the rows are stacked into one frame and
scored once per chunk (:func:`stacked_frame`).

Numeric grids: the unique values of the feature when it has at most ``grid_size`` of them;
otherwise the quantiles at ``grid_size`` equally spaced probabilities from 5 % to 95 %
(duplicates dropped). This differs from scikit-learn's default, which spaces the grid evenly
between the 5th and 95th percentiles: quantile spacing puts the points where the rows are, which
suits skewed columns such as income or claim amounts. Categorical grids: the observed levels.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import InputError
from workbench.engine.jobs import chunk_slices, rng, step

CHUNK_ROWS = 200_000  # rows per stacked frame: big enough to batch well, small enough for memory
GRID_PERCENTILES = (0.05, 0.95)
SCALES = ("output", "response")
HISTOGRAM_BINS = 30


# ----------------------------------------------------------------------------- shared helpers
def model_frame(adapter: ModelAdapter, frame: pd.DataFrame) -> pd.DataFrame:
    """The model's raw input columns, in order, with a fresh 0..n-1 index."""
    if not isinstance(frame, pd.DataFrame):
        frame = pd.DataFrame(np.asarray(frame), columns=adapter.input_columns)
    if adapter.named_columns:
        x = adapter.prepare(frame)
    else:
        if frame.shape[1] != len(adapter.input_columns):
            raise InputError(
                f"the model takes {len(adapter.input_columns)} unnamed columns; "
                f"the data has {frame.shape[1]}"
            )
        x = frame.set_axis(adapter.input_columns, axis=1)
    if len(x) == 0:
        raise InputError("the data has no rows")
    return x.reset_index(drop=True)


def scorer(adapter: ModelAdapter, scale: str):
    """The model call for a scale: ``output`` (explained output) or ``response`` (business)."""
    if scale == "output":
        return adapter.score
    if scale == "response":
        return adapter.response
    raise InputError(f"scale must be one of {', '.join(SCALES)}, not {scale!r}")


def scale_units(adapter: ModelAdapter, scale: str) -> str:
    return adapter.output_units if scale == "output" else adapter.response_units


def values_like(series: pd.Series, values) -> pd.api.extensions.ExtensionArray | np.ndarray:
    """``values`` as a column of the kind of ``series`` (numbers as float, levels keep dtype)."""
    dtype = series.dtype
    if pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype):
        arr = np.asarray(values, dtype=float)
        if pd.api.types.is_integer_dtype(dtype) and np.all(arr == np.round(arr)):
            return pd.array(arr.astype(np.int64), dtype=dtype)  # codes stay integers
        return arr
    return pd.array(np.asarray(values, dtype=object), dtype=dtype)


def stacked_frame(
    x: pd.DataFrame,
    base_index: np.ndarray,
    *,
    column_index: dict | None = None,
    column_values: dict | None = None,
) -> pd.DataFrame:
    """Many modified copies of ``x`` as one frame.

    Row r of the result takes every column from row ``base_index[r]`` of ``x``, except the columns
    in ``column_index`` (taken from row ``column_index[c][r]``) and in ``column_values`` (set to
    ``column_values[c][r]``). Column dtypes are kept (categories, text), so pipelines see the
    same kinds of columns as in the data.
    """
    column_index = column_index or {}
    column_values = column_values or {}
    cols = {}
    for c in x.columns:
        if c in column_values:
            cols[c] = values_like(x[c], column_values[c])
        else:
            cols[c] = x[c].array.take(column_index.get(c, base_index))
    return pd.DataFrame(cols, copy=False)


def is_categorical_feature(adapter: ModelAdapter, x: pd.DataFrame, feature: str) -> bool:
    s = x[feature]
    return (
        feature in adapter.categorical_columns
        or not pd.api.types.is_numeric_dtype(s.dtype)
        or pd.api.types.is_bool_dtype(s.dtype)
    )


def check_feature(adapter: ModelAdapter, x: pd.DataFrame, feature: str) -> None:
    if feature not in x.columns:
        shown = ", ".join(map(str, x.columns[:12])) + (" ..." if x.shape[1] > 12 else "")
        raise InputError(f"'{feature}' is not an input column of the model (columns are: {shown})")


def observed_levels(series: pd.Series) -> np.ndarray:
    """The levels present in a column (category order for categoricals, else sorted)."""
    present = series.dropna()
    if isinstance(series.dtype, pd.CategoricalDtype):
        used = set(present.unique().tolist())
        levels = [c for c in series.cat.categories if c in used]
    else:
        levels = list(pd.unique(present))
        try:
            levels = sorted(levels)
        except TypeError:
            levels = sorted(levels, key=str)
    return np.asarray(levels, dtype=object)


def feature_grid(
    series: pd.Series,
    *,
    categorical: bool,
    grid_size: int = 20,
    percentiles: tuple[float, float] = GRID_PERCENTILES,
) -> np.ndarray:
    """Grid values of a feature (see the module docstring for the rule)."""
    if categorical:
        levels = observed_levels(series)
        if levels.size == 0:
            raise InputError(f"column '{series.name}' has no values")
        return levels
    if int(grid_size) < 2:
        raise InputError(f"the grid needs at least 2 points, not {grid_size}")
    v = pd.to_numeric(series, errors="coerce").to_numpy(dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        raise InputError(f"column '{series.name}' has no numeric values")
    unique = np.unique(v)
    if unique.size <= grid_size:
        return unique
    lo, hi = percentiles
    return np.unique(np.quantile(v, np.linspace(lo, hi, int(grid_size))))


def _grid_values(adapter, x, feature, grid, grid_size):
    categorical = is_categorical_feature(adapter, x, feature)
    if grid is None:
        return categorical, feature_grid(x[feature], categorical=categorical, grid_size=grid_size)
    values = np.asarray(list(grid), dtype=object if categorical else float)
    if values.ndim != 1 or values.size == 0:
        raise InputError(f"the grid for '{feature}' must be a non-empty list of values")
    dtype = x[feature].dtype
    if isinstance(dtype, pd.CategoricalDtype):
        unknown = [v for v in values if v not in set(dtype.categories)]
        if unknown:
            raise InputError(f"grid value(s) {unknown[:3]} are not categories of '{feature}'")
    return categorical, values


def _sample_positions(n: int, size: int | None, generator: np.random.Generator) -> np.ndarray:
    if size is None or size >= n:
        return np.arange(n)
    if int(size) < 1:
        raise InputError(f"the number of rows must be at least 1, not {size}")
    return np.sort(generator.choice(n, size=int(size), replace=False))


def _grid_scores(
    score,
    x: pd.DataFrame,
    settings: dict[str, np.ndarray],
    n_points: int,
    progress,
    cancel,
    label: str,
) -> np.ndarray:
    """Scores (n_points, n) of every row of ``x`` at each of ``n_points`` settings of columns."""
    n = len(x)
    out = np.empty((n_points, n))
    per_chunk = max(1, CHUNK_ROWS // n)
    for sl in chunk_slices(n_points, per_chunk):
        step(
            progress, cancel, sl.start / n_points, f"{label}: {sl.start} of {n_points} grid points"
        )
        k = sl.stop - sl.start
        values = {c: np.repeat(np.asarray(v)[sl], n) for c, v in settings.items()}
        frame = stacked_frame(x, np.tile(np.arange(n), k), column_values=values)
        out[sl] = np.asarray(score(frame), dtype=float).reshape(k, n)
    step(progress, cancel, 1.0, f"{label}: done")
    return out


def centred(ice: np.ndarray) -> np.ndarray:
    """Centred ICE: each line minus its value at the first grid point (Goldstein et al. 2015)."""
    ice = np.asarray(ice, dtype=float)
    return ice - ice[..., :1]


# ----------------------------------------------------------------------------- effect curve
@dataclass(frozen=True)
class EffectCurve:
    """Partial dependence and ICE lines of one feature.

    ``grid`` (g,): grid values (floats, or the levels as objects for a categorical feature);
    ``pd`` (g,): mean score over all ``rows_used`` rows at each grid value; ``ice`` (r, g): the
    lines of the rows at positions ``ice_rows`` (r,) of the frame; ``counts``: the feature's
    distribution, histogram counts over ``edges`` (numeric) or rows per grid level (categorical,
    ``edges`` None); ``scale`` "output" or "response" in ``units``.
    """

    feature: str
    kind: str
    grid: np.ndarray
    pd: np.ndarray
    ice: np.ndarray
    ice_rows: np.ndarray
    counts: np.ndarray
    edges: np.ndarray | None
    scale: str
    units: str
    grid_size: int
    rows_used: int
    seed: int

    def centred(self) -> np.ndarray:
        """Centred ICE lines (r, g): each minus its value at the first grid point."""
        return centred(self.ice)


def _distribution(series: pd.Series, categorical: bool, grid: np.ndarray):
    if categorical:
        counts = series.astype(object).value_counts()
        return np.asarray([int(counts.get(level, 0)) for level in grid]), None
    v = pd.to_numeric(series, errors="coerce").to_numpy(dtype=float)
    v = v[np.isfinite(v)]
    counts, edges = np.histogram(v, bins=min(HISTOGRAM_BINS, max(np.unique(v).size, 1)))
    return counts, edges


def partial_dependence(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    feature: str,
    *,
    grid_size: int = 20,
    grid: Sequence | None = None,
    ice_rows: int | None = 200,
    seed: int = 0,
    scale: str = "output",
    progress=None,
    cancel=None,
) -> EffectCurve:
    """Partial dependence with ICE lines of ``feature`` on every row of ``frame``.

    ``grid`` overrides the grid (values for numeric features, levels for categorical ones).
    ``ice_rows`` ICE lines are kept, from rows drawn with ``seed`` (None keeps every row).
    ``scale="output"`` averages the explained output (log-odds, log of the mean...);
    ``scale="response"`` the business scale (probability, predicted mean).
    """
    score = scorer(adapter, scale)
    x = model_frame(adapter, frame)
    check_feature(adapter, x, feature)
    categorical, values = _grid_values(adapter, x, feature, grid, grid_size)
    scores = _grid_scores(
        score,
        x,
        {feature: values},
        values.size,
        progress,
        cancel,
        f"partial dependence of {feature}",
    )
    rows = _sample_positions(len(x), ice_rows, rng(seed))
    counts, edges = _distribution(x[feature], categorical, values)
    return EffectCurve(
        feature,
        "categorical" if categorical else "numeric",
        values,
        scores.mean(axis=1),
        scores[:, rows].T.copy(),
        rows,
        counts,
        edges,
        scale,
        scale_units(adapter, scale),
        int(grid_size),
        len(x),
        int(seed),
    )


# ----------------------------------------------------------------------------- pair map
@dataclass(frozen=True)
class PairMap:
    """Two-feature partial dependence: ``values`` (ga, gb) at ``grid_a`` (ga,) x ``grid_b`` (gb,),
    averaged over ``rows_used`` rows drawn with ``seed``."""

    a: str
    b: str
    kind_a: str
    kind_b: str
    grid_a: np.ndarray
    grid_b: np.ndarray
    values: np.ndarray
    scale: str
    units: str
    grid_size: int
    rows_used: int
    seed: int


def pair_dependence(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    a: str,
    b: str,
    *,
    grid_size: int = 12,
    grid_a: Sequence | None = None,
    grid_b: Sequence | None = None,
    rows: int | None = 500,
    seed: int = 0,
    scale: str = "output",
    progress=None,
    cancel=None,
) -> PairMap:
    """Partial dependence of the pair (``a``, ``b``) on a sample of ``rows`` rows."""
    score = scorer(adapter, scale)
    x = model_frame(adapter, frame)
    check_feature(adapter, x, a)
    check_feature(adapter, x, b)
    if a == b:
        raise InputError(f"a pair needs two different features, got '{a}' twice")
    cat_a, va = _grid_values(adapter, x, a, grid_a, grid_size)
    cat_b, vb = _grid_values(adapter, x, b, grid_b, grid_size)
    sample = x.iloc[_sample_positions(len(x), rows, rng(seed))].reset_index(drop=True)
    ia, ib = np.meshgrid(np.arange(va.size), np.arange(vb.size), indexing="ij")
    settings = {a: va[ia.ravel()], b: vb[ib.ravel()]}
    scores = _grid_scores(
        score, sample, settings, ia.size, progress, cancel, f"pair map of {a} and {b}"
    )
    values = scores.mean(axis=1).reshape(va.size, vb.size)
    return PairMap(
        a,
        b,
        "categorical" if cat_a else "numeric",
        "categorical" if cat_b else "numeric",
        va,
        vb,
        values,
        scale,
        scale_units(adapter, scale),
        int(grid_size),
        len(sample),
        int(seed),
    )


# ----------------------------------------------------------------------------- ALE
@dataclass(frozen=True)
class ALECurve:
    """First-order ALE of a numeric feature.

    ``edges`` (K + 1,): bin edges z_0 < ... < z_K (quantiles of the feature, data values);
    ``values`` (K + 1,): the centred ALE at each edge (value at z_0 is minus the centring constant);
    ``uncentred`` (K + 1,): the accumulated effect, 0 at z_0; ``counts`` (K,): rows per bin
    (z_{k-1}, z_k], the first bin also holding z_0. Rows with the feature missing are left out.
    """

    feature: str
    edges: np.ndarray
    values: np.ndarray
    uncentred: np.ndarray
    counts: np.ndarray
    scale: str
    units: str
    bins: int
    rows_used: int


def ale_edges(values: np.ndarray, bins: int) -> np.ndarray:
    """z_k = the k/K quantile of the feature, k = 0..K, taken as data values, duplicates dropped."""
    return np.unique(np.quantile(values, np.linspace(0.0, 1.0, int(bins) + 1), method="lower"))


def accumulated_local_effects(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    feature: str,
    *,
    bins: int = 20,
    scale: str = "output",
    progress=None,
    cancel=None,
) -> ALECurve:
    """First-order ALE (Apley and Zhu 2020, eqs. 15 and 16).

    Uncentred: g(x) = sum over bins k <= k(x) of the mean, over the rows in bin k, of
    f(z_k, x_rest) - f(z_{k-1}, x_rest). Centred: g(x) - (1/n) sum_i g(x_i).
    """
    score = scorer(adapter, scale)
    x = model_frame(adapter, frame)
    check_feature(adapter, x, feature)
    if is_categorical_feature(adapter, x, feature):
        raise InputError(f"ALE needs a numeric feature; '{feature}' is categorical")
    if int(bins) < 1:
        raise InputError(f"ALE needs at least 1 bin, not {bins}")
    v = pd.to_numeric(x[feature], errors="coerce").to_numpy(dtype=float)
    keep = np.flatnonzero(np.isfinite(v))
    if keep.size == 0:
        raise InputError(f"column '{feature}' has no numeric values")
    xv = v[keep]
    edges = ale_edges(xv, bins)
    if edges.size < 2:
        raise InputError(f"column '{feature}' takes one value only; ALE needs at least two")
    k = np.clip(np.searchsorted(edges, xv, side="left"), 1, edges.size - 1)
    n = keep.size
    diff = np.empty(n)
    per_chunk = max(1, CHUNK_ROWS // 2)
    for sl in chunk_slices(n, per_chunk):
        step(progress, cancel, sl.start / n, f"ALE of {feature}: {sl.start} of {n} rows")
        rows = keep[sl]
        base = np.concatenate([rows, rows])
        setting = np.concatenate([edges[k[sl] - 1], edges[k[sl]]])
        s = np.asarray(score(stacked_frame(x, base, column_values={feature: setting})), dtype=float)
        diff[sl] = s[rows.size :] - s[: rows.size]
    step(progress, cancel, 1.0, f"ALE of {feature}: done")
    n_bins = edges.size - 1
    counts = np.bincount(k - 1, minlength=n_bins)
    local = np.bincount(k - 1, weights=diff, minlength=n_bins) / counts  # every bin holds its z_k
    uncentred = np.concatenate([[0.0], np.cumsum(local)])
    values = uncentred - float(counts @ uncentred[1:]) / n
    return ALECurve(
        feature,
        edges,
        values,
        uncentred,
        counts,
        scale,
        scale_units(adapter, scale),
        int(bins),
        int(n),
    )
