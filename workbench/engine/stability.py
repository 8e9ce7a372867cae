"""Population stability index (PSI) of a score or a column between a reference and a new sample.

PSI = sum over bins of (a - e) ln(a / e), with e and a the shares of the reference ("expected")
and new ("actual") rows in each bin (common practice, no source). Thresholds 0.1 and 0.25 are
likewise common practice with no source.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError

EPSILON = 1e-4  # share used in place of an empty bin's 0, so ln(a / e) stays finite
MISSING = "(missing)"


@dataclass(frozen=True)
class PSIResult:
    """PSI and its table, one row per bin.

    ``table`` columns: bin (label), lower, upper (numeric bins [lower, upper); NaN for levels),
    expected_count, actual_count, expected_share, actual_share (unfloored), contribution.
    Missing values form their own bin when either sample has any. ``edges`` (bins - 1,): the
    inner edges taken from the reference sample's quantiles (empty for categorical).
    """

    value: float
    table: pd.DataFrame
    edges: np.ndarray
    bins: int
    categorical: bool
    epsilon: float


def _numeric_bins(expected: np.ndarray, actual: np.ndarray, bins: int):
    e_ok, a_ok = expected[np.isfinite(expected)], actual[np.isfinite(actual)]
    if e_ok.size == 0:
        raise InputError("the reference sample has no values to take bins from")
    edges = np.unique(np.quantile(e_ok, np.linspace(0, 1, bins + 1)[1:-1]))
    k = edges.size + 1
    e_counts = np.bincount(np.searchsorted(edges, e_ok, side="right"), minlength=k)
    a_counts = np.bincount(np.searchsorted(edges, a_ok, side="right"), minlength=k)
    lower = np.concatenate([[-np.inf], edges])
    upper = np.concatenate([edges, [np.inf]])
    labels = [f"[{lo:.6g}, {hi:.6g})" for lo, hi in zip(lower, upper, strict=True)]
    return labels, lower, upper, e_counts, a_counts, edges


def _level_bins(expected: pd.Series, actual: pd.Series):
    e_counts = expected.dropna().astype(str).value_counts(sort=False)
    a_counts = actual.dropna().astype(str).value_counts(sort=False)
    levels = list(e_counts.index) + [lev for lev in a_counts.index if lev not in e_counts.index]
    e = e_counts.reindex(levels, fill_value=0).to_numpy()
    a = a_counts.reindex(levels, fill_value=0).to_numpy()
    nan = np.full(len(levels), np.nan)
    return levels, nan, nan, e, a, np.empty(0)


def _series(values) -> pd.Series:
    if isinstance(values, pd.Series):
        return values.reset_index(drop=True)
    return pd.Series(np.asarray(values))


def psi(expected, actual, *, bins: int = 10, categorical: bool = False,
        epsilon: float = EPSILON) -> PSIResult:
    """PSI of ``actual`` against the reference ``expected``.

    Numeric: bins are cut at the reference's quantiles (tied quantiles merged, so there may be
    fewer than ``bins``); a value equal to an edge goes to the upper bin. Categorical: one bin
    per level seen in either sample. A share of 0 is replaced by ``epsilon`` (1e-4) in the
    contribution only.
    """
    e_ser, a_ser = _series(expected), _series(actual)
    if len(e_ser) == 0 or len(a_ser) == 0:
        raise InputError("both samples need rows to compare")
    if categorical:
        labels, lower, upper, e_counts, a_counts, edges = _level_bins(e_ser, a_ser)
    else:
        if int(bins) < 2:
            raise InputError("PSI needs at least 2 bins")
        try:
            e_num = pd.to_numeric(e_ser).to_numpy(dtype=float)
            a_num = pd.to_numeric(a_ser).to_numpy(dtype=float)
        except (TypeError, ValueError):
            raise InputError("the values are not numbers; use categorical=True") from None
        labels, lower, upper, e_counts, a_counts, edges = _numeric_bins(e_num, a_num, int(bins))
    e_missing, a_missing = int(e_ser.isna().sum()), int(a_ser.isna().sum())
    if e_missing or a_missing:
        labels = [*labels, MISSING]
        lower, upper = np.append(lower, np.nan), np.append(upper, np.nan)
        e_counts, a_counts = np.append(e_counts, e_missing), np.append(a_counts, a_missing)
    e_share = e_counts / len(e_ser)
    a_share = a_counts / len(a_ser)
    e_f, a_f = np.maximum(e_share, epsilon), np.maximum(a_share, epsilon)
    contribution = (a_f - e_f) * np.log(a_f / e_f)
    table = pd.DataFrame({
        "bin": labels, "lower": lower, "upper": upper,
        "expected_count": e_counts.astype(int), "actual_count": a_counts.astype(int),
        "expected_share": e_share, "actual_share": a_share, "contribution": contribution,
    })
    return PSIResult(float(contribution.sum()), table, edges, int(bins), bool(categorical),
                     float(epsilon))


def psi_status(value: float, warn: float = 0.1, fail: float = 0.25) -> str:
    """"pass" below ``warn``, "warn" from ``warn`` up to ``fail``, "fail" from ``fail`` on
    (thresholds: common practice, no source)."""
    if not np.isfinite(value):
        raise InputError("PSI is not a number; check the samples")
    if warn > fail:
        raise InputError("the warn threshold must not exceed the fail threshold")
    return "pass" if value < warn else "warn" if value < fail else "fail"
