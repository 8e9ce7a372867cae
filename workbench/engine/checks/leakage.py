"""Leakage suspicion: a feature that knows the outcome too well.

Two signs, either of which makes the check ``fail`` (common practice, no source):

- *dominance*: the feature's permutation importance is more than ``dominance`` (default 5)
  times that of the next most important feature;
- *single-feature AUC*: the feature alone separates the classes with an AUC of at least
  ``single_auc`` (default 0.95; binary models). A numeric feature is scored by its value (the
  AUC taken as max(AUC, 1 - AUC), missing values ranked lowest); a categorical one by the
  positive rate of its level on the same rows (in-sample, which favours many levels).

Permutation importance is computed on a seeded sample of ``sample`` rows (3 repeats).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.metrics import roc_auc_score

from workbench.engine.checks.result import CheckResult
from workbench.engine.effects import is_categorical_feature, model_frame
from workbench.engine.importance import permutation_importance


def single_feature_auc(values: pd.Series, y: np.ndarray, *, categorical: bool) -> float:
    """max(AUC, 1 - AUC) of one column alone against 0/1 labels ``y``."""
    if categorical:
        codes, _ = pd.factorize(values.astype(object), use_na_sentinel=False)
        rate = np.bincount(codes, weights=y) / np.bincount(codes)
        score = rate[codes]
    else:
        score = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)
        finite = np.isfinite(score)
        low = np.nanmin(score) - 1.0 if finite.any() else 0.0
        score = np.where(finite, score, low)
    auc = float(roc_auc_score(y, score))
    return max(auc, 1.0 - auc)


def check_leakage(adapter, frame: pd.DataFrame, y, *, sample: int = 2000, seed: int = 0,
                  dominance: float = 5.0, single_auc: float = 0.95, repeats: int = 3,
                  progress=None, cancel=None) -> CheckResult:
    """``leakage``: ``y`` is the target aligned with ``frame`` (no missing values)."""
    x = model_frame(adapter, frame)
    imp = permutation_importance(adapter, x, y, repeats=repeats, seed=seed, max_rows=sample,
                                 progress=progress, cancel=cancel)
    order = imp.order
    top, nxt = order[0], (order[1] if len(order) > 1 else None)
    top_value = float(imp.mean[top])
    next_value = float(imp.mean[nxt]) if nxt is not None else 0.0
    ratio = top_value / next_value if next_value > 0 else (np.inf if top_value > 0 else np.nan)
    suspects: dict[str, list[str]] = {}
    if nxt is not None and ratio > dominance:  # inf (next is 0) counts, NaN does not
        suspects.setdefault(imp.features[top], []).append(
            f"importance {ratio:.3g} times the next ({imp.features[nxt]})")
    aucs: dict[str, float] = {}
    if adapter.task == "binary":
        yy = _binary(adapter, y)
        for c in x.columns:
            aucs[c] = single_feature_auc(x[c], yy, categorical=is_categorical_feature(adapter, x, c))
            if aucs[c] >= single_auc:
                suspects.setdefault(c, []).append(f"alone it has AUC {aucs[c]:.3f}")
    status = "fail" if suspects else "pass"
    if suspects:
        summary = "; ".join(f"{f}: {', '.join(why)}" for f, why in suspects.items())
    else:
        summary = (f"no feature dominates (top {imp.features[top]} is {ratio:.2g} times the "
                   "next) and none alone separates the classes")
    ranked = [{"feature": imp.features[i], "importance": float(imp.mean[i]),
               "spread": float(imp.spread[i]), "single_feature_auc": aucs.get(imp.features[i])}
              for i in order]
    evidence = {"suspects": list(suspects), "reasons": suspects, "importance_ratio": ratio,
                "top_feature": imp.features[top], "ranking": ranked,
                "metric": imp.metric, "baseline": imp.baseline}
    parameters = {"dominance": dominance, "single_auc": single_auc, "repeats": repeats,
                  "rows": imp.rows_used, "rows_in_data": int(len(x)), "seed": int(seed),
                  "sampled": bool(imp.rows_used < len(x)),
                  "single_feature_auc_computed": adapter.task == "binary"}
    plot = {"kind": "bars", "labels": [r["feature"] for r in ranked],
            "values": [r["importance"] for r in ranked], "errors": [r["spread"] for r in ranked],
            "xlabel": f"permutation importance (worsening of {imp.metric})",
            "title": "Permutation importance"}
    focus = {"feature": next(iter(suspects))} if suspects else {}
    return CheckResult("leakage", "Leakage suspicion", status, summary, evidence, parameters,
                       "Ranking", focus, plot)


def _binary(adapter, y) -> np.ndarray:
    from workbench.engine.validation import coerce_target

    series = coerce_target(adapter, pd.Series(np.asarray(y, dtype=object)))
    return (series == adapter.positive_class).to_numpy(dtype=int)
