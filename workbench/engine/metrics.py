"""Performance figures of a model's responses against labels: binary, multiclass, regression, count.

Plain functions on numpy arrays; no model is called here. Sources are named per function; the
numbers come from scikit-learn / scipy wherever those have them.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass
from typing import Literal

import numpy as np
from scipy import stats
from sklearn import metrics as skm

from workbench.engine.errors import InputError

Task = Literal["binary", "multiclass", "regression", "count"]
TASKS = ("binary", "multiclass", "regression", "count")


# ----------------------------------------------------------------------------- small helpers
def as_vector(values, name: str) -> np.ndarray:
    """1-D float array; InputError if it is not one."""
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise InputError(f"{name} must be one value per row, got an array of shape {arr.shape}")
    return arr


def as_weights(sample_weight, n: int) -> np.ndarray | None:
    if sample_weight is None:
        return None
    w = as_vector(sample_weight, "sample_weight")
    if w.shape[0] != n:
        raise InputError(f"sample_weight has {w.shape[0]} values for {n} rows")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise InputError("sample_weight must be finite and not negative")
    return w


def binary_labels(y) -> np.ndarray:
    """Labels as 0/1 integers; InputError for other values or a single class."""
    arr = np.asarray(y)
    if arr.dtype == bool:
        arr = arr.astype(int)
    try:
        values = arr.astype(float)
    except (TypeError, ValueError):
        raise InputError("binary labels must be 0/1 or True/False") from None
    if values.ndim != 1 or not np.all(np.isin(values, (0.0, 1.0))):
        raise InputError("binary labels must be one 0/1 value per row (no missing labels)")
    if np.unique(values).size < 2:
        raise InputError("the labels hold one class only; AUC and KS need both classes")
    return values.astype(int)


def adverse_decision(score, cutoff: float, adverse_if: str = "above") -> np.ndarray:
    """True where the decision is adverse (decline / flag).

    ``adverse_if="above"``: adverse when ``score >= cutoff`` (a default-risk probability);
    ``adverse_if="below"``: adverse when ``score < cutoff`` (a score where higher is better),
    so that in both cases a row exactly at the cutoff goes the same way as the riskier side.
    """
    s = np.asarray(score, dtype=float)
    return s >= cutoff if check_direction(adverse_if) == "above" else s < cutoff


def check_direction(adverse_if: str) -> str:
    if adverse_if not in ("above", "below"):
        raise InputError(f'adverse_if must be "above" or "below", not {adverse_if!r}')
    return adverse_if


def _check_probability(p: np.ndarray, name: str = "probability") -> None:
    if not np.all(np.isfinite(p)) or np.any(p < 0) or np.any(p > 1):
        raise InputError(f"{name} values must lie between 0 and 1 (no missing values)")


# ----------------------------------------------------------------------------- binary
@dataclass(frozen=True)
class BinaryMetrics:
    """Figures of a probability ``p`` (n,) of the positive class against labels ``y`` (n,).

    ``n`` and ``positives`` are row counts; with ``sample_weight`` every other figure (including
    the confusion counts) is weighted. Confusion counts refer to the adverse decision at
    ``cutoff`` (``tp`` = adverse and positive, ``fp`` = adverse and negative, ...); they are
    ``None`` when no cutoff was given.
    """

    auc: float
    gini: float
    ks: float
    ks_score: float  # the score at which |TPR - FPR| is largest
    brier: float
    log_loss: float
    n: int
    positives: int
    weighted: bool
    cutoff: float | None = None
    adverse_if: str = "above"
    tp: float | None = None
    fp: float | None = None
    tn: float | None = None
    fn: float | None = None


def binary_metrics(y, p, *, cutoff: float | None = None, sample_weight=None,
                   adverse_if: str = "above") -> BinaryMetrics:
    """AUC, Gini, KS, Brier score, log loss and the confusion counts at a cutoff.

    Gini = 2 AUC - 1 (common practice, no source). KS = max over thresholds of |TPR - FPR|,
    which equals the two-sample Kolmogorov-Smirnov statistic of the scores of positives against
    those of negatives (weighted when ``sample_weight`` is given).
    """
    check_direction(adverse_if)
    yy = binary_labels(y)
    pp = as_vector(p, "probability")
    if pp.shape[0] != yy.shape[0]:
        raise InputError(f"{pp.shape[0]} probabilities for {yy.shape[0]} labels")
    _check_probability(pp)
    w = as_weights(sample_weight, yy.shape[0])
    auc = float(skm.roc_auc_score(yy, pp, sample_weight=w))
    fpr, tpr, thresholds = skm.roc_curve(yy, pp, sample_weight=w, drop_intermediate=False)
    gap = np.abs(tpr - fpr)
    best = int(np.argmax(gap))
    out = dict(
        auc=auc,
        gini=2.0 * auc - 1.0,
        ks=float(gap[best]),
        ks_score=float(thresholds[best]),
        brier=float(skm.brier_score_loss(yy, pp, sample_weight=w)),
        log_loss=float(skm.log_loss(yy, pp, sample_weight=w, labels=[0, 1])),
        n=int(yy.shape[0]),
        positives=int(yy.sum()),
        weighted=w is not None,
        adverse_if=adverse_if,
    )
    if cutoff is not None:
        flag = adverse_decision(pp, float(cutoff), adverse_if)
        ww = np.ones_like(pp) if w is None else w
        pos = yy == 1
        out.update(
            cutoff=float(cutoff),
            tp=float(ww[flag & pos].sum()),
            fp=float(ww[flag & ~pos].sum()),
            tn=float(ww[~flag & ~pos].sum()),
            fn=float(ww[~flag & pos].sum()),
        )
    return BinaryMetrics(**out)


@dataclass(frozen=True)
class CalibrationTable:
    """Observed against predicted by score group; all arrays have shape (groups,).

    ``groups`` can be fewer than ``bins`` when tied scores make quantile edges coincide.
    ``hosmer_lemeshow`` has ``groups - 2`` degrees of freedom.
    """

    lower: np.ndarray  # smallest score in the group
    upper: np.ndarray  # largest score in the group
    count: np.ndarray  # rows (weighted total when weights are given)
    positives: np.ndarray  # observed positives (weighted)
    mean_predicted: np.ndarray
    observed_rate: np.ndarray
    hosmer_lemeshow: float
    dof: int
    p_value: float
    bins: int
    weighted: bool


def weighted_quantile_edges(values: np.ndarray, bins: int, weight: np.ndarray | None) -> np.ndarray:
    """Inner quantile edges (bins - 1,) at equal steps of (weighted) cumulative share."""
    probs = np.linspace(0, 1, bins + 1)[1:-1]
    if weight is None:
        return np.quantile(values, probs)
    order = np.argsort(values, kind="mergesort")
    cum = np.cumsum(weight[order])
    pos = np.searchsorted(cum, probs * cum[-1], side="left")
    return values[order][np.minimum(pos, values.shape[0] - 1)]


def calibration_table(y, p, *, bins: int = 10, sample_weight=None) -> CalibrationTable:
    """Calibration by score quantile group with the Hosmer-Lemeshow statistic.

    Groups are quantiles of the predicted probability ("deciles of risk"); rows tied at an edge
    go to the upper group so tied scores stay together. The statistic is
    C = sum_g (O_g - E_g)^2 / (E_g (1 - E_g / n_g)) with O_g observed positives, E_g the sum of
    predicted probabilities and n_g the rows of group g, referred to chi-square with g - 2
    degrees of freedom (Hosmer and Lemeshow, Applied Logistic Regression, 2nd ed., 2000,
    section 5.2.2).
    """
    if int(bins) < 3:
        raise InputError("calibration needs at least 3 groups (the test has groups - 2 degrees of freedom)")
    yy = binary_labels(y)
    pp = as_vector(p, "probability")
    if pp.shape[0] != yy.shape[0]:
        raise InputError(f"{pp.shape[0]} probabilities for {yy.shape[0]} labels")
    _check_probability(pp)
    w = as_weights(sample_weight, yy.shape[0])
    ww = np.ones_like(pp) if w is None else w
    edges = np.unique(weighted_quantile_edges(pp, int(bins), w))
    group = np.searchsorted(edges, pp, side="right")
    _, group = np.unique(group, return_inverse=True)  # drop empty groups
    k = int(group.max()) + 1
    count = np.bincount(group, weights=ww, minlength=k)
    observed = np.bincount(group, weights=ww * yy, minlength=k)
    expected = np.bincount(group, weights=ww * pp, minlength=k)
    lower = np.full(k, np.inf)
    upper = np.full(k, -np.inf)
    np.minimum.at(lower, group, pp)
    np.maximum.at(upper, group, pp)
    mean_p = expected / count
    denom = expected * (1.0 - mean_p)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(denom > 0, (observed - expected) ** 2 / denom, 0.0)
    dof = k - 2
    hl = float(terms.sum())
    p_value = float(stats.chi2.sf(hl, dof)) if dof > 0 else float("nan")
    return CalibrationTable(lower, upper, count, observed, mean_p, observed / count, hl, dof,
                            p_value, int(bins), w is not None)


# ----------------------------------------------------------------------------- regression, count
@dataclass(frozen=True)
class RegressionMetrics:
    rmse: float
    mae: float
    r2: float
    n: int
    weighted: bool


def regression_metrics(y, pred, *, sample_weight=None) -> RegressionMetrics:
    """RMSE, MAE and R^2 as scikit-learn computes them (sklearn.metrics)."""
    yy, pr = _paired(y, pred)
    w = as_weights(sample_weight, yy.shape[0])
    return RegressionMetrics(
        rmse=float(skm.root_mean_squared_error(yy, pr, sample_weight=w)),
        mae=float(skm.mean_absolute_error(yy, pr, sample_weight=w)),
        r2=float(skm.r2_score(yy, pr, sample_weight=w)),
        n=int(yy.shape[0]),
        weighted=w is not None,
    )


@dataclass(frozen=True)
class CountMetrics:
    """Figures of a count model. With exposure, ``pred_mean`` was a rate per unit of exposure."""

    poisson_deviance: float
    lorenz_gini: float
    lorenz_exposure: np.ndarray  # (m + 1,) cumulative exposure share, from 0 to 1
    lorenz_claims: np.ndarray  # (m + 1,) cumulative claims share at the same points
    rmse: float
    mae: float
    n: int
    total_exposure: float
    total_claims: float


def _paired(y, pred) -> tuple[np.ndarray, np.ndarray]:
    yy = as_vector(y, "target")
    pr = as_vector(pred, "prediction")
    if yy.shape != pr.shape:
        raise InputError(f"{pr.shape[0]} predictions for {yy.shape[0]} targets")
    if not (np.all(np.isfinite(yy)) and np.all(np.isfinite(pr))):
        raise InputError("targets and predictions must not be missing")
    return yy, pr


def lorenz_curve(claims, rate, exposure) -> tuple[np.ndarray, np.ndarray, float]:
    """Ordered Lorenz curve and its Gini index.

    Rows are sorted by predicted rate, lowest first; the curve runs through (cumulative share
    of exposure, cumulative share of claims). Gini = 1 - 2 * (area under the curve, trapezoidal),
    i.e. twice the area between the line of equality and the curve (Frees, Meyers and Cummings
    2011, "Summarizing insurance scores using a Gini index", JASA 106 (pages from memory), with a constant
    base premium per unit exposure so the premium axis becomes exposure). Rows with tied
    predicted rates are merged into one step so the result does not depend on row order.
    """
    c = np.asarray(claims, dtype=float)
    r = np.asarray(rate, dtype=float)
    e = np.asarray(exposure, dtype=float)
    levels, inverse = np.unique(r, return_inverse=True)
    exp_by = np.bincount(inverse, weights=e, minlength=levels.size)
    clm_by = np.bincount(inverse, weights=c, minlength=levels.size)
    x = np.concatenate([[0.0], np.cumsum(exp_by)]) / exp_by.sum()
    ysh = np.concatenate([[0.0], np.cumsum(clm_by)])
    if ysh[-1] <= 0:
        return x, np.full_like(x, np.nan), float("nan")
    ysh = ysh / ysh[-1]
    area = float(np.sum(np.diff(x) * (ysh[1:] + ysh[:-1]) / 2.0))
    return x, ysh, 1.0 - 2.0 * area


def count_metrics(y_counts, pred_mean, *, exposure=None) -> CountMetrics:
    """Mean Poisson deviance and the Lorenz-curve Gini of a count (or rate) model.

    Without ``exposure``: ``pred_mean`` is the expected count of each row. With ``exposure``:
    ``pred_mean`` is the expected rate per unit exposure, and the deviance is that of the
    observed rates ``y_counts / exposure`` weighted by exposure (sklearn mean_poisson_deviance
    with sample_weight=exposure, the usual frequency set-up). RMSE and MAE are on the same scale.
    """
    counts, pred = _paired(y_counts, pred_mean)
    if np.any(counts < 0):
        raise InputError("counts must not be negative")
    if np.any(pred <= 0):
        raise InputError("predicted means must be positive for the Poisson deviance")
    if exposure is None:
        e = np.ones_like(counts)
        target, w = counts, None
    else:
        e = as_vector(exposure, "exposure")
        if e.shape != counts.shape or not np.all(np.isfinite(e)) or np.any(e <= 0):
            raise InputError("exposure must be one positive value per row")
        target, w = counts / e, e
    x, ysh, gini = lorenz_curve(counts, pred, e)
    return CountMetrics(
        poisson_deviance=float(skm.mean_poisson_deviance(target, pred, sample_weight=w)),
        lorenz_gini=gini,
        lorenz_exposure=x,
        lorenz_claims=ysh,
        rmse=float(skm.root_mean_squared_error(target, pred, sample_weight=w)),
        mae=float(skm.mean_absolute_error(target, pred, sample_weight=w)),
        n=int(counts.shape[0]),
        total_exposure=float(e.sum()),
        total_claims=float(counts.sum()),
    )


# ----------------------------------------------------------------------------- multiclass
def _class_labels(y, n_columns: int, classes: Sequence | None) -> np.ndarray:
    labels = np.unique(np.asarray(y)) if classes is None else np.asarray(classes)
    if labels.shape[0] != n_columns:
        raise InputError(f"the probability matrix has {n_columns} columns but there are "
                         f"{labels.shape[0]} classes; pass classes= in column order")
    return labels


def _probability_matrix(response) -> np.ndarray:
    proba = np.asarray(response, dtype=float)
    if proba.ndim != 2 or proba.shape[1] < 2:
        raise InputError("multiclass metrics need a probability matrix of shape (rows, classes)")
    _check_probability(proba, "class probability")
    return proba


def macro_auc(y, proba: np.ndarray, labels: np.ndarray, sample_weight=None) -> float:
    """Unweighted mean of one-vs-rest AUCs over the classes present in ``y``: what sklearn's
    roc_auc_score(multi_class="ovr", average="macro") gives when every class is present;
    classes absent from ``y`` (a small segment) are skipped instead of failing."""
    yy = np.asarray(y)
    aucs = [skm.roc_auc_score(yy == c, proba[:, j], sample_weight=sample_weight)
            for j, c in enumerate(labels) if np.any(yy == c)]
    return float(np.mean(aucs))


def multiclass_metrics(y, proba, *, classes: Sequence | None = None, sample_weight=None) -> dict:
    """One-vs-rest macro AUC, log loss and accuracy from a probability matrix (n, classes)."""
    P = _probability_matrix(proba)
    labels = _class_labels(y, P.shape[1], classes)
    yy = np.asarray(y)
    if np.unique(yy).size < 2:
        raise InputError("the labels hold one class only")
    w = as_weights(sample_weight, yy.shape[0])
    present = np.isin(labels, yy)
    return dict(
        auc_macro=macro_auc(yy, P, labels, w),
        log_loss=float(skm.log_loss(yy, P, sample_weight=w, labels=labels)),
        accuracy=float(skm.accuracy_score(yy, labels[np.argmax(P, axis=1)], sample_weight=w)),
        n=int(yy.shape[0]),
        classes=list(labels.tolist()),
        classes_scored=int(present.sum()),
    )


def metrics_for_task(task: str, y, output_response, *, cutoff: float | None = None,
                     sample_weight=None, exposure=None, classes: Sequence | None = None,
                     adverse_if: str = "above") -> dict:
    """Headline figures for a task as a plain dict (for tables, JSON and the dossier).

    ``output_response`` is the business-scale response: probability of the class of interest
    (binary), a probability matrix (multiclass), the mean prediction (regression) or the
    expected count / rate (count).
    """
    if task == "binary":
        return asdict(binary_metrics(y, output_response, cutoff=cutoff,
                                     sample_weight=sample_weight, adverse_if=adverse_if))
    if task == "multiclass":
        return multiclass_metrics(y, output_response, classes=classes, sample_weight=sample_weight)
    if task == "regression":
        return asdict(regression_metrics(y, output_response, sample_weight=sample_weight))
    if task == "count":
        if sample_weight is not None:
            raise InputError("count models are weighted by exposure; pass exposure= instead")
        out = asdict(count_metrics(y, output_response, exposure=exposure))
        out.pop("lorenz_exposure")
        out.pop("lorenz_claims")
        return out
    raise InputError(f"unknown task {task!r}; expected one of {', '.join(TASKS)}")


# ----------------------------------------------------------------------------- scorers
@dataclass(frozen=True)
class MetricFunction:
    """A scorer ``(y, response, sample_weight) -> float`` for permutation importance.

    ``greater_is_better`` tells the caller the sign: the drop in a higher-is-better metric and
    the rise in a loss both mean the permuted feature mattered.
    """

    name: str
    task: str
    greater_is_better: bool
    fn: Callable[..., float]

    def __call__(self, y, response, sample_weight=None) -> float:
        return float(self.fn(y, response, sample_weight))


_METRIC_TASKS = {
    "auc": ("binary", "multiclass"),
    "log_loss": ("binary", "multiclass"),
    "brier": ("binary",),
    "rmse": ("regression", "count"),
    "mae": ("regression", "count"),
    "poisson_deviance": ("count",),
}
_GREATER_IS_BETTER = {"auc": True}
_DEFAULT_METRIC = {"binary": "auc", "multiclass": "log_loss", "regression": "rmse",
                   "count": "poisson_deviance"}


def default_metric(task: str) -> str:
    """The metric permutation importance uses unless told otherwise."""
    if task not in _DEFAULT_METRIC:
        raise InputError(f"unknown task {task!r}; expected one of {', '.join(TASKS)}")
    return _DEFAULT_METRIC[task]


def metric_function(name: str, task: str, *, classes: Sequence | None = None) -> MetricFunction:
    """A scorer for ``name`` on ``task``; InputError when the metric does not fit the task.

    Binary scorers take the positive-class probability (n,); multiclass ones the probability
    matrix (n, classes) with columns in the order of ``classes`` (default: sorted labels). For
    a count model with exposure pass rates as ``y`` and exposure as ``sample_weight``.
    """
    if name not in _METRIC_TASKS:
        raise InputError(f"unknown metric {name!r}; expected one of {', '.join(_METRIC_TASKS)}")
    if task not in TASKS:
        raise InputError(f"unknown task {task!r}; expected one of {', '.join(TASKS)}")
    if task not in _METRIC_TASKS[name]:
        raise InputError(f"metric {name!r} does not fit a {task} model; "
                         f"use one of {', '.join(k for k, v in _METRIC_TASKS.items() if task in v)}")

    def fn(y, response, sample_weight):
        if task == "multiclass":
            P = _probability_matrix(response)
            labels = _class_labels(y, P.shape[1], classes)
            if name == "log_loss":
                return skm.log_loss(y, P, sample_weight=sample_weight, labels=labels)
            return macro_auc(y, P, labels, sample_weight)
        if name == "auc":
            return skm.roc_auc_score(y, response, sample_weight=sample_weight)
        if name == "log_loss":
            return skm.log_loss(y, response, sample_weight=sample_weight, labels=[0, 1])
        if name == "brier":
            return skm.brier_score_loss(y, response, sample_weight=sample_weight)
        if name == "rmse":
            return skm.root_mean_squared_error(y, response, sample_weight=sample_weight)
        if name == "mae":
            return skm.mean_absolute_error(y, response, sample_weight=sample_weight)
        return skm.mean_poisson_deviance(y, response, sample_weight=sample_weight)

    return MetricFunction(name, task, _GREATER_IS_BETTER.get(name, False), fn)
