"""Champion against challenger: two models scored on the same rows, side by side.

``a`` is the champion and ``b`` the challenger throughout; every difference is ``b - a``.

- :func:`compatibility` says whether two models can be compared (same task, same classes, same
  class of interest) and which input columns one needs that the other does not.
- :func:`compare_versions` scores the same rows with both and gathers: the headline metrics of
  each (``metrics.metrics_for_task``) with their difference and a paired bootstrap interval;
  DeLong's test for AUC; score agreement (Spearman, Kendall, share of rows that moved); the swap
  table at the cutoff(s); the ranking shift (permutation importance under A and under B); and
  the double lift chart.
- :func:`effect_overlay` puts both models' partial dependence of one feature on one grid.

All scores compared here are on the **response scale** (probability of the class of interest,
or the predicted mean / value), because that is the scale both models share whatever their
explained output is. The moved share counts rows with ``|response_b - response_a| >
moved_threshold`` (an absolute difference on that scale, e.g. 0.05 = five percentage points).

The paired bootstrap draws the same resamples as ``comparestats.paired_bootstrap`` (same seed,
same random stream, chunks of 50), but evaluates every metric of a resample at once: a resample
is the original rows weighted by how often each was drawn, so each metric is computed as a
weighted metric of the original rows with those counts as weights, which lets the rows be sorted
once instead of once per resample and metric. The draws equal paired_bootstrap's (tested).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats
from sklearn import metrics as skm

from workbench.engine import jobs
from workbench.engine.adapter import ModelAdapter
from workbench.engine.comparestats import (
    BootstrapInterval,
    DeLongResult,
    DoubleLift,
    RankAgreement,
    SwapTable,
    delong_test,
    double_lift,
    moved_share,
    rank_agreement,
    swap_table,
)
from workbench.engine.effects import (
    feature_grid,
    is_categorical_feature,
    model_frame,
    partial_dependence,
)
from workbench.engine.errors import InputError
from workbench.engine.importance import Importance, permutation_importance
from workbench.engine.metrics import (
    as_weights,
    check_direction,
    lorenz_curve,
    macro_auc,
    metrics_for_task,
)
from workbench.engine.validation import target_array

# The figures compared per task (keys of metrics.metrics_for_task), and whether higher is better.
COMPARED_METRICS: dict[str, tuple[tuple[str, bool], ...]] = {
    "binary": (("auc", True), ("gini", True), ("ks", True), ("brier", False), ("log_loss", False)),
    "multiclass": (("auc_macro", True), ("log_loss", False), ("accuracy", True)),
    "regression": (("rmse", False), ("mae", False), ("r2", True)),
    "count": (("poisson_deviance", False), ("lorenz_gini", True), ("rmse", False), ("mae", False)),
}
BOOTSTRAP_CHUNK = 50  # resamples drawn per call of the generator, as comparestats.paired_bootstrap
_EPS = np.finfo(float).eps  # log loss clipping, as sklearn.metrics.log_loss for float64


def _plain(v):
    return v.item() if isinstance(v, np.generic) else v


# ----------------------------------------------------------------------------- compatibility
@dataclass(frozen=True)
class CompatibilityReport:
    """What two models share. ``only_a``: input columns A needs and B does not; ``only_b``
    the reverse; ``shared``: needed by both (in A's order); ``columns``: every column either
    needs (A's order, then B's extras)."""

    task: str
    classes: tuple
    positive_class: object
    only_a: tuple[str, ...]
    only_b: tuple[str, ...]
    shared: tuple[str, ...]
    response_units: str
    output_a: str
    output_b: str

    @property
    def columns(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys((*self.shared, *self.only_a, *self.only_b)))

    @property
    def same_columns(self) -> bool:
        return not self.only_a and not self.only_b


def compatibility(adapter_a: ModelAdapter, adapter_b: ModelAdapter) -> CompatibilityReport:
    """Check that A and B can be compared; InputError with the reason when they cannot.

    They must have the same task, the same classes and the same class of interest. Different
    input columns are allowed (a challenger often adds some): both models score the same rows,
    so the data must hold the columns of both.
    """
    if adapter_a.task != adapter_b.task:
        raise InputError(f"the models do different tasks (A: {adapter_a.task}, B: "
                         f"{adapter_b.task}); only models of the same task can be compared")
    ca = [str(c) for c in adapter_a.classes]
    cb = [str(c) for c in adapter_b.classes]
    if sorted(ca) != sorted(cb):
        raise InputError(f"the models predict different classes (A: {ca}, B: {cb})")
    if adapter_a.classes and str(adapter_a.positive_class) != str(adapter_b.positive_class):
        raise InputError(f"the class of interest differs (A: {adapter_a.positive_class!r}, "
                         f"B: {adapter_b.positive_class!r}); choose the same class for both")
    cols_a, cols_b = list(adapter_a.input_columns), list(adapter_b.input_columns)
    if not adapter_a.named_columns or not adapter_b.named_columns:
        if cols_a != cols_b:
            raise InputError("a model without column names can only be compared with one that "
                             "takes the same number of unnamed columns")
    set_b = set(cols_b)
    set_a = set(cols_a)
    return CompatibilityReport(
        task=adapter_a.task,
        classes=tuple(_plain(c) for c in adapter_a.classes),
        positive_class=_plain(adapter_a.positive_class),
        only_a=tuple(c for c in cols_a if c not in set_b),
        only_b=tuple(c for c in cols_b if c not in set_a),
        shared=tuple(c for c in cols_a if c in set_b),
        response_units=adapter_a.response_units,
        output_a=adapter_a.output_kind,
        output_b=adapter_b.output_kind,
    )


def _check_columns(adapter_a, adapter_b, frame: pd.DataFrame) -> None:
    problems = []
    for slot, adapter in (("A", adapter_a), ("B", adapter_b)):
        if not adapter.named_columns:
            continue
        missing = [c for c in adapter.input_columns if c not in frame.columns]
        if missing:
            problems.append(f"model {slot} needs {', '.join(missing)}")
    if problems:
        raise InputError("both models score the same rows, but the data lacks columns: "
                         + "; ".join(problems))


# ----------------------------------------------------------------------------- bootstrap
class _SortedBinary:
    """One model's probabilities sorted once; weighted AUC, KS, Brier and log loss from it."""

    def __init__(self, y: np.ndarray, p: np.ndarray) -> None:
        self.order = np.argsort(p, kind="stable")
        ps = p[self.order]
        self.group = np.concatenate([[0], np.cumsum(ps[1:] != ps[:-1])])  # tied scores share one
        self.groups = int(self.group[-1]) + 1
        self.y_sorted = y[self.order].astype(float)
        yf = y.astype(float)
        clipped = np.clip(p, _EPS, 1 - _EPS)
        self.squared = (p - yf) ** 2
        self.log_terms = -(yf * np.log(clipped) + (1 - yf) * np.log1p(-clipped))

    def figures(self, w: np.ndarray) -> dict[str, float]:
        ws = w[self.order]
        pos = np.bincount(self.group, weights=ws * self.y_sorted, minlength=self.groups)
        neg = np.bincount(self.group, weights=ws * (1 - self.y_sorted), minlength=self.groups)
        tp, tn = pos.sum(), neg.sum()
        total = w.sum()
        if tp <= 0 or tn <= 0:
            nan = float("nan")
            return {"auc": nan, "gini": nan, "ks": nan, "brier": nan, "log_loss": nan}
        below = np.cumsum(neg) - neg  # negatives strictly below each group of tied scores
        auc = float(np.sum(pos * (below + neg / 2.0)) / (tp * tn))
        ks = float(np.max(np.abs(np.cumsum(pos) / tp - np.cumsum(neg) / tn)))
        # np.sum of a product, not a BLAS dot: on a busy machine BLAS threads cost 100x here
        return {"auc": auc, "gini": 2.0 * auc - 1.0, "ks": ks,
                "brier": float(np.sum(w * self.squared) / total),
                "log_loss": float(np.sum(w * self.log_terms) / total)}


def _weighted_figures(task: str, y, response, w: np.ndarray, classes) -> dict[str, float]:
    """The compared figures of one model with row weights ``w`` (sklearn, scipy)."""
    if task == "multiclass":
        labels = np.asarray(classes)
        keep = w > 0
        yk, pk, wk = y[keep], response[keep], w[keep]
        if np.unique(yk).size < 2:
            return {k: float("nan") for k, _ in COMPARED_METRICS[task]}
        return {"auc_macro": macro_auc(yk, pk, labels, wk),
                "log_loss": float(skm.log_loss(yk, pk, sample_weight=wk, labels=labels)),
                "accuracy": float(skm.accuracy_score(yk, labels[np.argmax(pk, axis=1)],
                                                     sample_weight=wk))}
    out = {"rmse": float(skm.root_mean_squared_error(y, response, sample_weight=w)),
           "mae": float(skm.mean_absolute_error(y, response, sample_weight=w))}
    if task == "regression":
        out["r2"] = float(skm.r2_score(y, response, sample_weight=w))
        return out
    out["poisson_deviance"] = float(skm.mean_poisson_deviance(y, response, sample_weight=w))
    out["lorenz_gini"] = float(lorenz_curve(y * w, response, w)[2])
    return out


def paired_intervals(task: str, y, response_a, response_b, *, weight=None, resamples: int = 1000,
                     seed: int = 0, level: float = 0.95, classes=None, progress=None,
                     cancel=None) -> dict[str, BootstrapInterval]:
    """Paired bootstrap intervals of metric(b) - metric(a) for every compared figure of ``task``.

    The resamples are those ``comparestats.paired_bootstrap`` draws for the same ``seed`` (rows
    drawn with replacement, the same rows for both models); percentile intervals (Efron and
    Tibshirani, An Introduction to the Bootstrap, 1993, chapter 13). ``y`` and ``weight`` as the
    metrics take them (for count models: observed rates and exposure). A resample where a
    figure cannot be computed (one class only) leaves NaN in its draws.
    """
    if int(resamples) < 2:
        raise InputError("resamples must be at least 2")
    if not 0.0 < level < 1.0:
        raise InputError(f"level must lie between 0 and 1, not {level}")
    resamples = int(resamples)
    yy = np.asarray(y)
    A, B = np.asarray(response_a, dtype=float), np.asarray(response_b, dtype=float)
    n = yy.shape[0]
    base = np.ones(n) if weight is None else as_weights(weight, n)
    names = [k for k, _ in COMPARED_METRICS[task]]
    if task == "binary":
        sa, sb = _SortedBinary(yy, A), _SortedBinary(yy, B)

        def figures(w: np.ndarray) -> tuple[dict, dict]:
            return sa.figures(w), sb.figures(w)
    else:
        def figures(w: np.ndarray) -> tuple[dict, dict]:
            return (_weighted_figures(task, yy, A, w, classes),
                    _weighted_figures(task, yy, B, w, classes))

    full_a, full_b = figures(base)
    draws = {k: np.full(resamples, np.nan) for k in names}
    rng = jobs.rng(seed)
    for part in jobs.chunk_slices(resamples, BOOTSTRAP_CHUNK):
        jobs.step(progress, cancel, part.start / resamples, "resampling rows")
        indices = rng.integers(0, n, size=(part.stop - part.start, n))
        for k, idx in zip(range(part.start, part.stop), indices, strict=True):
            fa, fb = figures(base * np.bincount(idx, minlength=n))
            for name in names:
                draws[name][k] = fb[name] - fa[name]
    jobs.step(progress, cancel, 1.0, "resampling done")
    tail = (1.0 - level) / 2.0 * 100.0
    out = {}
    for name in names:
        d = draws[name]
        valid = int(np.isfinite(d).sum())
        low, high = (np.nanpercentile(d, [tail, 100.0 - tail]) if valid >= 2
                     else (float("nan"), float("nan")))
        out[name] = BootstrapInterval(float(full_b[name] - full_a[name]), float(low), float(high),
                                      resamples, int(seed), float(level), valid, d)
    return out


# ----------------------------------------------------------------------------- ranking shift
@dataclass(frozen=True)
class RankingShift:
    """Permutation importance of every feature either model uses, under A and under B.

    Arrays have shape (p,) over ``features`` (A's columns, then B's extras). A feature a model
    does not use has importance 0 there (``used_a`` / ``used_b`` False). Ranks: 1 = most
    important, ties share the best rank (``scipy.stats.rankdata(method="min")``).
    ``order``: positions by largest |rank change| first, then largest |importance change|.
    """

    features: list[str]
    importance_a: np.ndarray
    importance_b: np.ndarray
    spread_a: np.ndarray
    spread_b: np.ndarray
    rank_a: np.ndarray
    rank_b: np.ndarray
    used_a: np.ndarray
    used_b: np.ndarray
    order: np.ndarray
    metric: str
    repeats: int
    rows_used: int
    seed: int

    @property
    def rank_change(self) -> np.ndarray:
        """rank_b - rank_a: negative means the feature matters more to B."""
        return self.rank_b - self.rank_a

    @property
    def importance_change(self) -> np.ndarray:
        return self.importance_b - self.importance_a


def ranking_shift(importance_a: Importance, importance_b: Importance) -> RankingShift:
    """Line up two permutation importance results on the union of their features."""
    features = list(dict.fromkeys([*importance_a.features, *importance_b.features]))
    p = len(features)

    def spread_out(result: Importance):
        imp, spread, used = np.zeros(p), np.zeros(p), np.zeros(p, dtype=bool)
        where = {f: i for i, f in enumerate(features)}
        for j, f in enumerate(result.features):
            imp[where[f]], spread[where[f]], used[where[f]] = result.mean[j], result.spread[j], True
        return imp, spread, used

    ia, sa, ua = spread_out(importance_a)
    ib, sb, ub = spread_out(importance_b)
    ra = stats.rankdata(-ia, method="min").astype(int)
    rb = stats.rankdata(-ib, method="min").astype(int)
    order = np.lexsort((-np.abs(ib - ia), -np.abs(rb - ra)))
    return RankingShift(features, ia, ib, sa, sb, ra, rb, ua, ub, order, importance_a.metric,
                        importance_a.repeats, importance_a.rows_used, importance_a.seed)


# ----------------------------------------------------------------------------- the comparison
@dataclass(frozen=True)
class Comparison:
    """Champion (A) against challenger (B) on the same ``n`` rows; differences are B - A.

    ``metrics_a`` / ``metrics_b``: ``metrics.metrics_for_task`` of each; ``difference`` and
    ``intervals``: per compared figure (``COMPARED_METRICS[task]``), B - A and its paired
    bootstrap interval. ``delong``: DeLong's test of equal AUC (binary models only).
    ``response_a`` / ``response_b`` (n,): both on the response scale (``units``).
    ``swap``: the swap table at the cutoffs (None without a cutoff); its row indices are
    positions 0..n-1 in the rows compared. ``double_lift``: None where it does not apply
    (multiclass, or predictions that are not positive), with the reason in ``notes``.
    """

    task: str
    units: str
    n: int
    compatibility: CompatibilityReport
    metrics_a: dict
    metrics_b: dict
    difference: dict[str, float]
    intervals: dict[str, BootstrapInterval]
    higher_is_better: dict[str, bool]
    delong: DeLongResult | None
    response_a: np.ndarray
    response_b: np.ndarray
    agreement: RankAgreement
    moved_share: float
    moved_threshold: float
    swap: SwapTable | None
    ranking: RankingShift
    double_lift: DoubleLift | None
    cutoff_a: float | None
    cutoff_b: float | None
    adverse_if: str
    resamples: int
    seed: int
    bands: int
    weighted: bool
    importance_repeats: int
    importance_rows: int
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def spearman(self) -> float:
        return self.agreement.spearman

    @property
    def kendall(self) -> float:
        return self.agreement.kendall


def resolve_cutoffs(task: str, cutoff, cutoff_a, cutoff_b) -> tuple[float | None, float | None]:
    """One cutoff for both, or one per model; probabilities need a cutoff strictly inside (0, 1)."""
    if cutoff is not None and (cutoff_a is not None or cutoff_b is not None):
        raise InputError("give either one cutoff for both models or a cutoff for each, not both")
    if (cutoff_a is None) != (cutoff_b is None):
        raise InputError("a cutoff for each model needs both: the cutoff of A and the cutoff of B")
    if cutoff is not None:
        cutoff_a = cutoff_b = cutoff
    if cutoff_a is None:
        return None, None
    pair = (float(cutoff_a), float(cutoff_b))
    for slot, c in zip("AB", pair, strict=True):
        if not np.isfinite(c):
            raise InputError(f"the cutoff of model {slot} must be a number, not {c}")
        if task in ("binary", "multiclass") and not 0.0 < c < 1.0:
            raise InputError(f"the cutoff of model {slot} is {c:g}, but its scores are "
                             "probabilities: choose a cutoff between 0 and 1")
    return pair


def _scaled(progress, lo: float, hi: float):
    if progress is None:
        return None
    return lambda fraction, message="": progress(lo + (hi - lo) * fraction, message)


def compare_versions(adapter_a: ModelAdapter, adapter_b: ModelAdapter, frame: pd.DataFrame, y, *,
                     cutoff: float | None = None, cutoff_a: float | None = None,
                     cutoff_b: float | None = None, adverse_if: str = "above",
                     moved_threshold: float = 0.05, resamples: int = 1000, seed: int = 0,
                     bands: int = 10, weight=None, importance_repeats: int = 3,
                     importance_rows: int = 5000, progress=None, cancel=None) -> Comparison:
    """Compare champion A and challenger B on the same rows of ``frame`` with targets ``y``.

    ``cutoff`` (both) or ``cutoff_a`` and ``cutoff_b`` (one each), on the response scale;
    ``adverse_if`` as in ``metrics.adverse_decision``. ``weight``: sample weights, except for
    count models, where it is the exposure (``y`` holds counts and the models predict a rate
    per unit of exposure). ``resamples`` paired bootstrap resamples drawn with ``seed``;
    ``importance_repeats`` shuffles per feature on at most ``importance_rows`` rows (the same
    rows and shuffles for both models); ``bands`` of the double lift chart (equal weight).
    """
    check_direction(adverse_if)
    report = compatibility(adapter_a, adapter_b)
    task = report.task
    cut_a, cut_b = resolve_cutoffs(task, cutoff, cutoff_a, cutoff_b)
    if not isinstance(frame, pd.DataFrame):
        raise InputError("the data must be a table with named columns")
    _check_columns(adapter_a, adapter_b, frame)
    frame = frame.reset_index(drop=True)
    n = len(frame)
    if n < 2:
        raise InputError("a comparison needs at least two rows")
    if not float(moved_threshold) >= 0:
        raise InputError(f"the moved threshold must not be negative, not {moved_threshold}")
    target = target_array(adapter_a, y, n)
    w = as_weights(weight, n)
    notes: list[str] = []
    jobs.step(progress, cancel, 0.0, "scoring the rows with both models")
    response_a = np.asarray(adapter_a.response(frame), dtype=float)
    response_b = np.asarray(adapter_b.response(frame), dtype=float)
    multiclass = task == "multiclass"
    if multiclass:
        proba_a, proba_b = adapter_a.probabilities(frame), adapter_b.probabilities(frame)
        order_b = [[str(c) for c in adapter_b.classes].index(str(c)) for c in adapter_a.classes]
        proba_b = proba_b[:, order_b]  # B's columns in A's class order
    jobs.step(progress, cancel, 0.04, "metrics of both models")

    # metrics side by side: for count models, metrics on rates weighted by exposure
    metric_target, metric_weight = target, w
    if task == "count" and w is not None:
        if np.any(w <= 0):
            raise InputError("exposure must be positive in every row")
        metric_target = target / w
    classes = list(adapter_a.classes) if multiclass else None

    def headline(resp, cut):
        if task == "count":
            return metrics_for_task(task, target, resp, exposure=w)
        # the confusion counts at the cutoff exist for binary models only
        return metrics_for_task(task, target, resp, sample_weight=w, classes=classes,
                                cutoff=cut if task == "binary" else None,
                                adverse_if=adverse_if)

    metrics_a = headline(proba_a if multiclass else response_a, cut_a)
    metrics_b = headline(proba_b if multiclass else response_b, cut_b)
    compared = COMPARED_METRICS[task]
    difference = {k: float(metrics_b[k] - metrics_a[k]) for k, _ in compared}
    intervals = paired_intervals(
        task, metric_target, proba_a if multiclass else response_a,
        proba_b if multiclass else response_b, weight=metric_weight, resamples=resamples,
        seed=seed, classes=classes, progress=_scaled(progress, 0.05, 0.45), cancel=cancel)

    delong = None
    if task == "binary":
        if w is not None:
            notes.append("DeLong's test ignores the sample weights (it is defined for counts)")
        delong = delong_test(target, response_a, response_b)

    jobs.step(progress, cancel, 0.46, "score agreement")
    agreement = rank_agreement(response_a, response_b)
    moved = moved_share(response_a, response_b, float(moved_threshold))

    swap = None
    if cut_a is not None:
        labels = target.astype(float) if task == "binary" else None
        swap = swap_table(response_a, response_b, cutoff_a=cut_a, cutoff_b=cut_b, y=labels,
                          adverse_if=adverse_if)
        if task != "binary":
            notes.append("the swap table shows no bad rates: the target is not a 0/1 outcome")

    # ranking shift: same rows and the same shuffles for both models (same seed)
    imp_kwargs = dict(repeats=int(importance_repeats), seed=seed,
                      max_rows=int(importance_rows) if importance_rows else None)
    if multiclass:
        # macro AUC: importance's log loss path hands sklearn object-dtype labels it refuses
        imp_kwargs["metric"] = "auc"
    if task == "count":
        imp_kwargs["exposure"] = w
    else:
        imp_kwargs["sample_weight"] = w
    imp_a = permutation_importance(adapter_a, frame, pd.Series(_target_values(adapter_a, y, n)),
                                   progress=_scaled(progress, 0.48, 0.72), cancel=cancel,
                                   **imp_kwargs)
    imp_b = permutation_importance(adapter_b, frame, pd.Series(_target_values(adapter_b, y, n)),
                                   progress=_scaled(progress, 0.72, 0.96), cancel=cancel,
                                   **imp_kwargs)
    ranking = ranking_shift(imp_a, imp_b)

    jobs.step(progress, cancel, 0.97, "double lift chart")
    lift = None
    if multiclass:
        notes.append("no double lift chart for a multiclass model")
    elif np.any(response_a <= 0) or np.any(response_b < 0):
        notes.append("no double lift chart: it sorts by the ratio of the predictions, "
                     "which needs positive predictions")
    else:
        actual = metric_target if task == "count" else target.astype(float)
        if int(bands) > n:
            notes.append(f"the double lift chart has {n} bands, one per row (fewer rows than "
                         f"the {int(bands)} bands asked for)")
        lift = double_lift(actual, response_a, response_b, bands=min(int(bands), n), weight=w)
    jobs.step(progress, cancel, 1.0, "comparison done")
    return Comparison(
        task=task, units=report.response_units, n=n, compatibility=report,
        metrics_a=metrics_a, metrics_b=metrics_b, difference=difference, intervals=intervals,
        higher_is_better={k: h for k, h in compared}, delong=delong,
        response_a=response_a, response_b=response_b, agreement=agreement, moved_share=moved,
        moved_threshold=float(moved_threshold), swap=swap, ranking=ranking, double_lift=lift,
        cutoff_a=cut_a, cutoff_b=cut_b, adverse_if=adverse_if, resamples=int(resamples),
        seed=int(seed), bands=int(bands), weighted=w is not None,
        importance_repeats=int(importance_repeats), importance_rows=int(importance_rows or n),
        notes=tuple(notes))


def _target_values(adapter: ModelAdapter, y, n: int) -> np.ndarray:
    """The targets as given (one per row), for permutation importance to read itself."""
    values = y.to_numpy() if isinstance(y, pd.Series) else np.asarray(y)
    if values.shape[0] != n:
        raise InputError(f"{values.shape[0]} target values for {n} rows")
    return values


# ----------------------------------------------------------------------------- effect overlay
@dataclass(frozen=True)
class EffectOverlay:
    """Partial dependence of one feature under A and under B on one grid, response scale.

    ``grid`` (g,); ``pd_a`` and ``pd_b`` (g,). A model that does not use the feature has a
    flat curve at its mean response (``used_a`` / ``used_b`` False).
    """

    feature: str
    kind: str
    grid: np.ndarray
    pd_a: np.ndarray
    pd_b: np.ndarray
    used_a: bool
    used_b: bool
    units: str
    grid_size: int
    rows_used: int

    @property
    def difference(self) -> np.ndarray:
        return self.pd_b - self.pd_a


def effect_overlay(adapter_a: ModelAdapter, adapter_b: ModelAdapter, frame: pd.DataFrame,
                   feature: str, grid_size: int = 20, *, progress=None,
                   cancel=None) -> EffectOverlay:
    """Both models' effect curves (partial dependence) of ``feature`` on the same grid.

    The grid comes from the data's values of the feature (``effects.feature_grid``), treated as
    categorical when either model treats it so. Curves are on the response scale, so that a
    log-odds champion and a probability challenger can be read on one axis.
    """
    report = compatibility(adapter_a, adapter_b)
    _check_columns(adapter_a, adapter_b, frame)
    if feature not in report.columns:
        raise InputError(f"'{feature}' is an input column of neither model")
    frame = frame.reset_index(drop=True)
    if len(frame) == 0:
        raise InputError("the data has no rows")
    users = [a for a in (adapter_a, adapter_b) if feature in a.input_columns]
    categorical = any(is_categorical_feature(a, model_frame(a, frame), feature) for a in users)
    grid = feature_grid(frame[feature], categorical=categorical, grid_size=grid_size)
    curves = []
    for k, adapter in enumerate((adapter_a, adapter_b)):
        if feature in adapter.input_columns:
            curve = partial_dependence(adapter, frame, feature, grid=grid, ice_rows=1,
                                       scale="response", progress=_scaled(progress, k / 2,
                                                                          (k + 1) / 2),
                                       cancel=cancel)
            curves.append(np.asarray(curve.pd, dtype=float))
        else:
            jobs.step(progress, cancel, (k + 1) / 2, f"model {'AB'[k]} does not use {feature}")
            curves.append(np.full(grid.shape[0], float(np.mean(adapter.response(frame)))))
    return EffectOverlay(feature, "categorical" if categorical else "numeric", grid, curves[0],
                         curves[1], feature in adapter_a.input_columns,
                         feature in adapter_b.input_columns, report.response_units,
                         int(grid_size), len(frame))


__all__ = [
    "COMPARED_METRICS",
    "Comparison",
    "CompatibilityReport",
    "EffectOverlay",
    "RankingShift",
    "compare_versions",
    "compatibility",
    "effect_overlay",
    "paired_intervals",
    "ranking_shift",
    "resolve_cutoffs",
]

