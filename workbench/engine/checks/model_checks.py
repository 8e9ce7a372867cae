"""Checks of the model's own numbers: additivity of the attributions and calibration."""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.attributions import explain
from workbench.engine.checks.result import CheckResult
from workbench.engine.effects import model_frame
from workbench.engine.errors import InputError
from workbench.engine.jobs import rng
from workbench.engine.metrics import calibration_table


def check_additivity(adapter, frame: pd.DataFrame, *, background=None, rows: int = 200,
                     background_size: int = 100, seed: int = 0, warn: float = 1e-6,
                     fail: float = 1e-3, progress=None, cancel=None) -> CheckResult:
    """``additivity``: the largest |output - base value - sum of attributions| on a sample.

    Local accuracy (Lundberg and Lee 2017, NeurIPS, property 1) says it is zero; the limits are
    relative to max(1, largest |output|): pass below ``warn`` (1e-6, rounding), warn up to
    ``fail`` (1e-3), fail beyond (common practice, no source).
    """
    x = model_frame(adapter, frame)
    n = len(x)
    picked = np.arange(n)
    if n > rows:
        picked = np.sort(rng(seed).choice(n, size=int(rows), replace=False))
    result = explain(adapter, x.iloc[picked].reset_index(drop=True), background=background,
                     background_size=background_size, seed=seed, progress=progress,
                     cancel=cancel)
    worst = result.max_abs_residual
    scale = max(1.0, float(np.max(np.abs(result.output))))
    relative = worst / scale
    status = "pass" if relative <= warn else "warn" if relative <= fail else "fail"
    worst_row = int(picked[int(np.argmax(np.abs(result.residual)))])
    summary = (f"largest residual {worst:.3g} ({result.method}, {len(picked)} rows): "
               + {"pass": "the attributions add up to the output",
                  "warn": "small departures from additivity",
                  "fail": "the attributions do not add up to the output"}[status])
    evidence = {"max_abs_residual": worst, "relative_residual": relative,
                "mean_abs_residual": float(np.mean(np.abs(result.residual))),
                "worst_row": worst_row, "method": result.method, "notes": list(result.notes),
                "base_value": result.base_value}
    parameters = {"rows": int(len(picked)), "rows_in_data": int(n), "seed": int(seed),
                  "background_rows": result.background_rows, "warn": warn, "fail": fail,
                  "sampled": bool(len(picked) < n)}
    return CheckResult("additivity", "Additivity of the attributions", status, summary,
                       evidence, parameters, "Case", {"row": worst_row})


def check_calibration(adapter, frame: pd.DataFrame, y01: np.ndarray, *, bins: int = 10,
                      p_value: float = 0.05, gap: float = 0.05, response=None) -> CheckResult:
    """``calibration``: expected against observed by decile of risk, Hosmer-Lemeshow test
    (Hosmer and Lemeshow, Applied Logistic Regression, 2nd ed., 2000, section 5.2.2).

    With many rows the test rejects departures too small to matter (a known property of the
    test in large samples), so a failure also needs a decile whose observed rate is ``gap``
    (default 0.05, five percentage points) or more away from the mean prediction *and* more
    than two binomial standard errors, sqrt(e (1 - e) / n) with e the decile's mean
    prediction and n its rows, so that a small decile's noise is not taken for a fault: pass
    when the test's p-value is at least ``p_value`` (0.05); warn when it is lower but no decile
    is off by that much; fail otherwise (common practice, no source).
    """
    if adapter.task != "binary":
        raise InputError("the calibration check needs a binary classifier")
    if response is None:
        response = adapter.response(model_frame(adapter, frame))
    p = np.asarray(response, dtype=float)
    t = calibration_table(y01, p, bins=bins)
    gaps = t.observed_rate - t.mean_predicted
    worst = int(np.argmax(np.abs(gaps)))
    std_error = np.sqrt(t.mean_predicted * (1 - t.mean_predicted) / t.count)
    big = bool(np.any((np.abs(gaps) >= gap) & (np.abs(gaps) > 2 * std_error)))
    if not t.p_value < p_value:
        status = "pass"
    else:
        status = "fail" if big else "warn"
    summary = (f"Hosmer-Lemeshow {t.hosmer_lemeshow:.3g} on {t.dof} df (p = {t.p_value:.3g}); "
               f"largest gap {gaps[worst]:+.3f} in group {worst + 1} of {len(gaps)}")
    groups = [{"group": i + 1, "lowest_score": float(t.lower[i]), "highest_score": float(t.upper[i]),
               "rows": float(t.count[i]), "expected": float(t.mean_predicted[i]),
               "observed": float(t.observed_rate[i]), "gap": float(gaps[i]),
               "standard_error": float(std_error[i])}
              for i in range(len(gaps))]
    evidence = {"hosmer_lemeshow": t.hosmer_lemeshow, "dof": t.dof, "p_value": t.p_value,
                "largest_gap": float(gaps[worst]), "groups": groups,
                "mean_predicted": float(p.mean()), "observed_rate": float(np.mean(y01))}
    parameters = {"bins": int(bins), "p_value": p_value, "gap": gap, "rows": int(len(p))}
    plot = {"kind": "calibration", "expected": t.mean_predicted.tolist(),
            "observed": t.observed_rate.tolist(), "xlabel": "mean predicted probability",
            "ylabel": "observed rate"}
    return CheckResult("calibration", "Calibration by decile of risk", status, summary,
                       evidence, parameters, "Portfolio", {}, plot)
