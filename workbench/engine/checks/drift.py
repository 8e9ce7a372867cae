"""Stability of the score and of each input column between a reference data set and the
current one, by PSI (``engine.stability.psi``; thresholds 0.1 and 0.25 by default, common
practice, no source)."""

from __future__ import annotations

import numpy as np

from workbench.engine.checks.result import CheckResult, table
from workbench.engine.effects import model_frame
from workbench.engine.stability import psi, psi_status


def _verdict(value: float, warn: float, fail: float) -> tuple[str, str]:
    status = psi_status(value, warn, fail)
    word = {"pass": "stable", "warn": "some shift", "fail": "large shift"}[status]
    return status, f"PSI {value:.3f}: {word} (warn from {warn:g}, fail from {fail:g})"


def _result(check_id, title, result, bins, warn, fail, focus, what) -> CheckResult:
    status, summary = _verdict(result.value, warn, fail)
    t = result.table
    evidence = {"psi": result.value, "bins": table(t)}
    parameters = {"bins": int(bins), "warn": warn, "fail": fail, "epsilon": result.epsilon,
                  "categorical": result.categorical, "compared": what}
    plot = {"kind": "shares", "labels": [str(b) for b in t["bin"]],
            "reference": t["expected_share"].tolist(), "current": t["actual_share"].tolist(),
            "xlabel": "bin", "ylabel": "share of rows"}
    return CheckResult(check_id, title, status, summary, evidence, parameters, "Portfolio",
                       focus, plot)


def check_score_stability(adapter, frame, reference, *, bins: int = 10, warn: float = 0.1,
                          fail: float = 0.25, expected=None, actual=None) -> CheckResult:
    """``stability:score``: PSI of the model's response on ``frame`` against ``reference``
    (``expected`` / ``actual``: those responses when already computed)."""
    if expected is None:
        expected = adapter.response(model_frame(adapter, reference))
    if actual is None:
        actual = adapter.response(model_frame(adapter, frame))
    expected, actual = np.asarray(expected, dtype=float), np.asarray(actual, dtype=float)
    result = psi(expected, actual, bins=bins)
    return _result("stability:score", f"Stability of the score ({adapter.response_units})",
                   result, bins, warn, fail, {}, "response on reference vs current rows")


def check_feature_stability(adapter, frame, reference, feature: str, *, bins: int = 10,
                            warn: float = 0.1, fail: float = 0.25) -> CheckResult:
    """``stability:<feature>``: PSI of one input column (levels for categorical columns)."""
    from workbench.engine.effects import is_categorical_feature

    x = model_frame(adapter, frame)
    categorical = is_categorical_feature(adapter, x, feature)
    result = psi(reference[feature], frame[feature], bins=bins, categorical=categorical)
    return _result(f"stability:{feature}", f"Stability of {feature}", result, bins, warn, fail,
                   {"feature": feature}, "column values on reference vs current rows")
