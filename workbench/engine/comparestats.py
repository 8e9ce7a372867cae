"""Statistics that compare two models' scores on the same rows (champion / challenger).

Throughout, ``a`` is the champion and ``b`` the challenger; differences are ``b - a``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
from scipy import stats

from workbench.engine import jobs
from workbench.engine.errors import InputError
from workbench.engine.metrics import adverse_decision, as_vector, as_weights, binary_labels


def _same_length(*arrays: np.ndarray) -> None:
    if len({a.shape[0] for a in arrays}) > 1:
        raise InputError("the scores and labels must have one value per row for the same rows")


# ----------------------------------------------------------------------------- DeLong
@dataclass(frozen=True)
class DeLongResult:
    """Two correlated AUCs on the same rows and the test of their difference (b - a)."""

    auc_a: float
    auc_b: float
    var_a: float
    var_b: float
    cov: float
    z: float
    p_value: float  # two-sided
    positives: int
    negatives: int

    @property
    def difference(self) -> float:
        return self.auc_b - self.auc_a

    @property
    def std_error(self) -> float:
        return float(np.sqrt(max(self.var_a + self.var_b - 2.0 * self.cov, 0.0)))


def delong_components(y, scores) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """AUCs (k,) and structural components V10 (k, m) and V01 (k, n) of k scores.

    V10[r, i] = share of negatives that positive i outranks in score r (ties count one half);
    V01[r, j] = share of positives that outrank negative j (DeLong, DeLong and Clarke-Pearson
    1988, Biometrics 44:837-845). Computed from midranks as in Sun and Xu (2014,
    IEEE Signal Processing Letters 21(11):1389-1393): V10 = (rank in all - rank among
    positives) / n, without forming the m x n comparison matrix.
    """
    yy = binary_labels(y)
    S = np.atleast_2d(np.asarray(scores, dtype=float))
    if S.shape[1] != yy.shape[0]:
        raise InputError("the scores and labels must have one value per row for the same rows")
    if not np.all(np.isfinite(S)):
        raise InputError("scores must not be missing")
    pos, neg = S[:, yy == 1], S[:, yy == 0]
    m, n = pos.shape[1], neg.shape[1]
    combined = np.concatenate([pos, neg], axis=1)
    tz = stats.rankdata(combined, axis=1)
    tx = stats.rankdata(pos, axis=1)
    ty = stats.rankdata(neg, axis=1)
    v10 = (tz[:, :m] - tx) / n
    v01 = 1.0 - (tz[:, m:] - ty) / m
    auc = v10.mean(axis=1)
    return auc, v10, v01


def delong_covariance(y, scores) -> tuple[np.ndarray, np.ndarray]:
    """AUCs (k,) and their covariance matrix (k, k): S10 / m + S01 / n (DeLong et al. 1988)."""
    auc, v10, v01 = delong_components(y, scores)
    m, n = v10.shape[1], v01.shape[1]
    if m < 2 or n < 2:
        raise InputError("the DeLong test needs at least two positives and two negatives")
    s10 = np.atleast_2d(np.cov(v10))
    s01 = np.atleast_2d(np.cov(v01))
    return auc, s10 / m + s01 / n


def delong_test(y, score_a, score_b) -> DeLongResult:
    """DeLong test of AUC(b) = AUC(a) for two scores of the same rows.

    z = (AUC_b - AUC_a) / sqrt(var_a + var_b - 2 cov), two-sided p-value from the normal.
    """
    a = as_vector(score_a, "score_a")
    b = as_vector(score_b, "score_b")
    _same_length(a, b)
    auc, cov = delong_covariance(y, np.vstack([a, b]))
    var_diff = cov[0, 0] + cov[1, 1] - 2.0 * cov[0, 1]
    diff = auc[1] - auc[0]
    if var_diff <= 0:
        z = 0.0 if diff == 0 else float(np.sign(diff) * np.inf)
    else:
        z = float(diff / np.sqrt(var_diff))
    yy = binary_labels(y)
    return DeLongResult(float(auc[0]), float(auc[1]), float(cov[0, 0]), float(cov[1, 1]),
                        float(cov[0, 1]), z, float(2.0 * stats.norm.sf(abs(z))),
                        int(yy.sum()), int((yy == 0).sum()))


# ----------------------------------------------------------------------------- bootstrap
@dataclass(frozen=True)
class BootstrapInterval:
    """Percentile interval of metric(b) - metric(a) over paired resamples of the rows.

    ``draws`` (resamples,): the difference in each resample (NaN where the metric could not be
    computed, e.g. a resample with one class); ``valid`` counts the others.
    """

    difference: float
    low: float
    high: float
    resamples: int
    seed: int
    level: float
    valid: int
    draws: np.ndarray = field(repr=False)

    @property
    def std_error(self) -> float:
        return float(np.nanstd(self.draws, ddof=1))


def paired_bootstrap(metric_fn: Callable[..., float], y, a, b, *, resamples: int = 1000,
                     seed: int = 0, sample_weight=None, level: float = 0.95, progress=None,
                     cancel=None, chunk: int = 50) -> BootstrapInterval:
    """Bootstrap the difference metric(b) - metric(a) with the same resampled rows for both.

    ``metric_fn(y, response, sample_weight) -> float`` (e.g. ``metrics.metric_function``);
    ``a`` and ``b`` are the two models' responses, (n,) or (n, classes). Percentile interval
    (Efron and Tibshirani, An Introduction to the Bootstrap, 1993, chapter 13; from memory).
    """
    yy = np.asarray(y)
    A, B = np.asarray(a), np.asarray(b)
    _same_length(yy, A, B)
    n = yy.shape[0]
    w = as_weights(sample_weight, n)
    if int(resamples) < 2:
        raise InputError("resamples must be at least 2")
    if not 0.0 < level < 1.0:
        raise InputError(f"level must lie between 0 and 1, not {level}")
    resamples = int(resamples)
    difference = float(metric_fn(yy, B, w) - metric_fn(yy, A, w))
    rng = jobs.rng(seed)
    draws = np.full(resamples, np.nan)
    for part in jobs.chunk_slices(resamples, chunk):
        jobs.step(progress, cancel, part.start / resamples, "resampling rows")
        indices = rng.integers(0, n, size=(part.stop - part.start, n))
        for k, idx in zip(range(part.start, part.stop), indices, strict=True):
            wk = None if w is None else w[idx]
            try:
                draws[k] = metric_fn(yy[idx], B[idx], wk) - metric_fn(yy[idx], A[idx], wk)
            except (ValueError, InputError):
                pass  # e.g. one class in the resample: leave NaN
    jobs.step(progress, cancel, 1.0, "resampling done")
    valid = int(np.isfinite(draws).sum())
    if valid < 2:
        raise InputError("the metric could not be computed on the resampled rows")
    tail = (1.0 - level) / 2.0 * 100.0
    low, high = np.nanpercentile(draws, [tail, 100.0 - tail])
    return BootstrapInterval(difference, float(low), float(high), resamples, int(seed),
                             float(level), valid, draws)


# ----------------------------------------------------------------------------- agreement
class RankAgreement(NamedTuple):
    spearman: float
    kendall: float


def rank_agreement(a, b) -> RankAgreement:
    """Spearman's rho and Kendall's tau-b of two scores (scipy.stats.spearmanr, kendalltau)."""
    x, y = as_vector(a, "score_a"), as_vector(b, "score_b")
    _same_length(x, y)
    return RankAgreement(float(stats.spearmanr(x, y).statistic),
                         float(stats.kendalltau(x, y).statistic))


def moved_share(a, b, threshold: float, *, scale: str = "score") -> float:
    """Share of rows whose score moved by more than ``threshold`` between a and b.

    ``scale="score"`` compares the scores themselves; ``scale="percentile"`` compares their
    percentile ranks (average rank / n, 0..1), for models whose scores are on different scales.
    """
    x, y = as_vector(a, "score_a"), as_vector(b, "score_b")
    _same_length(x, y)
    if scale == "percentile":
        x, y = stats.rankdata(x) / x.shape[0], stats.rankdata(y) / y.shape[0]
    elif scale != "score":
        raise InputError(f'scale must be "score" or "percentile", not {scale!r}')
    return float(np.mean(np.abs(y - x) > threshold))


# ----------------------------------------------------------------------------- swap table
SWAP_CELLS = ("both_accept", "swap_in", "swap_out", "both_decline")


@dataclass(frozen=True)
class SwapTable:
    """Rows by the decisions of A and B at their cutoffs.

    Cells: ``both_accept``; ``swap_in`` (declined by A, accepted by B); ``swap_out`` (accepted
    by A, declined by B); ``both_decline``. ``counts``, ``labelled`` (rows with a known label),
    ``bad_rate`` (share of label 1 among labelled rows, NaN without labels) and ``rows``
    (positions, ascending) are dicts keyed by cell.
    """

    counts: dict[str, int]
    labelled: dict[str, int]
    bad_rate: dict[str, float]
    rows: dict[str, np.ndarray]
    cutoff_a: float
    cutoff_b: float
    adverse_if: str
    n: int

    @property
    def swapped(self) -> int:
        return self.counts["swap_in"] + self.counts["swap_out"]


def swap_table(score_a, score_b, *, cutoff_a: float, cutoff_b: float, y=None,
               adverse_if: str = "above") -> SwapTable:
    """Cross the two models' decisions. ``y``: optional labels 0/1, NaN where unknown (for
    instance declined applicants with no outcome)."""
    a, b = as_vector(score_a, "score_a"), as_vector(score_b, "score_b")
    _same_length(a, b)
    decline_a = adverse_decision(a, cutoff_a, adverse_if)
    decline_b = adverse_decision(b, cutoff_b, adverse_if)
    masks = {
        "both_accept": ~decline_a & ~decline_b,
        "swap_in": decline_a & ~decline_b,
        "swap_out": ~decline_a & decline_b,
        "both_decline": decline_a & decline_b,
    }
    if y is not None:
        yy = as_vector(y, "labels")
        _same_length(a, yy)
        known = np.isfinite(yy)
        if not np.all(np.isin(yy[known], (0.0, 1.0))):
            raise InputError("labels for the swap table must be 0/1 (or missing)")
    labelled, bad = {}, {}
    for cell, mask in masks.items():
        if y is None:
            labelled[cell], bad[cell] = 0, float("nan")
            continue
        sel = mask & known
        labelled[cell] = int(sel.sum())
        bad[cell] = float(yy[sel].mean()) if sel.any() else float("nan")
    return SwapTable(
        counts={c: int(m.sum()) for c, m in masks.items()},
        labelled=labelled,
        bad_rate=bad,
        rows={c: np.flatnonzero(m) for c, m in masks.items()},
        cutoff_a=float(cutoff_a),
        cutoff_b=float(cutoff_b),
        adverse_if=adverse_if,
        n=int(a.shape[0]),
    )


# ----------------------------------------------------------------------------- double lift
@dataclass(frozen=True)
class DoubleLift:
    """Double lift chart data; arrays have shape (bands,) unless noted.

    Bands are ordered by the sort ratio pred_b / pred_a, lowest first. ``actual``, ``pred_a``,
    ``pred_b``: weighted means in each band; the ``*_relative`` versions are divided by their
    own overall weighted mean, so 1.0 is the portfolio average. ``band_of_row`` (n,).
    """

    weight: np.ndarray
    ratio_low: np.ndarray
    ratio_high: np.ndarray
    actual: np.ndarray
    pred_a: np.ndarray
    pred_b: np.ndarray
    actual_relative: np.ndarray
    pred_a_relative: np.ndarray
    pred_b_relative: np.ndarray
    band_of_row: np.ndarray
    bands: int


def equal_weight_bands(order: np.ndarray, weight: np.ndarray, bands: int) -> np.ndarray:
    """Band (0..bands-1) of each row when rows, taken in ``order``, are cut into bands of equal
    total weight; a row belongs to the band holding the midpoint of its cumulative weight."""
    w = weight[order]
    cum = np.cumsum(w)
    mid = (cum - w / 2.0) / cum[-1]
    band = np.empty(order.shape[0], dtype=np.intp)
    band[order] = np.minimum((mid * bands).astype(np.intp), bands - 1)
    return band


def double_lift(actual, pred_a, pred_b, *, bands: int = 10, weight=None) -> DoubleLift:
    """Double lift chart: where the two models disagree, which one tracks the actuals.

    Goldburd, Khare and Tevet, Generalized Linear Models for Insurance Rating, CAS Monograph 5
    (2016), section 7.2.2: sort by the ratio of the two predictions, cut into bands of equal
    weight (exposure), and compare per band the average actual with each model's average
    prediction, each relative to its overall average (the normalisation as we recall the
    monograph's; the raw means are kept too). For a frequency model pass rates and
    ``weight=exposure``. Ties in the ratio keep row order (stable sort).
    """
    y = as_vector(actual, "actual")
    pa, pb = as_vector(pred_a, "pred_a"), as_vector(pred_b, "pred_b")
    _same_length(y, pa, pb)
    if int(bands) < 1 or int(bands) > y.shape[0]:
        raise InputError(f"bands must be between 1 and the number of rows ({y.shape[0]})")
    if not (np.all(np.isfinite(y)) and np.all(np.isfinite(pa)) and np.all(np.isfinite(pb))):
        raise InputError("actuals and predictions must not be missing")
    if np.any(pa <= 0) or np.any(pb < 0):
        raise InputError("the double lift chart needs positive predictions (it sorts by their ratio)")
    w = np.ones_like(y) if weight is None else as_weights(weight, y.shape[0])
    if w.sum() <= 0:
        raise InputError("the weights sum to zero")
    bands = int(bands)
    ratio = pb / pa
    order = np.argsort(ratio, kind="stable")
    band = equal_weight_bands(order, w, bands)
    wt = np.bincount(band, weights=w, minlength=bands)

    def band_mean(v: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.bincount(band, weights=w * v, minlength=bands) / wt

    lo = np.full(bands, np.inf)
    hi = np.full(bands, -np.inf)
    np.minimum.at(lo, band, ratio)
    np.maximum.at(hi, band, ratio)
    means = {k: band_mean(v) for k, v in (("actual", y), ("pred_a", pa), ("pred_b", pb))}
    overall = {k: float(np.average(v, weights=w)) for k, v in (("actual", y), ("pred_a", pa),
                                                               ("pred_b", pb))}
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = {k: means[k] / overall[k] for k in means}
    return DoubleLift(wt, lo, hi, means["actual"], means["pred_a"], means["pred_b"],
                      rel["actual"], rel["pred_a"], rel["pred_b"], band, bands)
