"""Favourable-outcome rates by group and the adverse impact ratio, with AUC and calibration per
group.

Favourable = not the adverse decision at the cutoff (``metrics.adverse_decision``). The ratio of a
group's rate to the most favoured group's is flagged below 0.8, the four-fifths rule of the
Uniform Guidelines on Employee Selection Procedures (29 CFR 1607.4(D)); in credit it serves as a
screening indicator only. The group column need not be a model input. A flagged group makes the
check ``fail`` (it needs review); the caution ``fairness.CAUTION`` travels with the result.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.checks.result import CheckResult, table
from workbench.engine.effects import model_frame
from workbench.engine.errors import InputError
from workbench.engine.fairness import CAUTION, adverse_impact
from workbench.engine.metrics import adverse_decision, binary_metrics


def check_adverse_impact(adapter, frame: pd.DataFrame, group: str, *, cutoff: float,
                         adverse_if: str = "above", labels=None,
                         threshold: float = 0.8, response=None) -> CheckResult:
    """``adverse_impact:<group>``. ``labels``: 0/1 outcomes (NaN where unknown) for the AUC
    and calibration per group (binary models), or None. ``response``: the model's response on
    ``frame`` when already computed."""
    if group not in frame.columns:
        raise InputError(f"no group column '{group}' in the data")
    if cutoff is None:
        raise InputError("the adverse impact check needs a cutoff (the decision it compares)")
    if response is None:
        response = adapter.response(model_frame(adapter, frame))
    response = np.asarray(response, dtype=float)
    favourable = ~adverse_decision(response, cutoff, adverse_if)
    groups = frame[group].astype(object).where(frame[group].notna(), None).to_numpy()
    result = adverse_impact(favourable, groups, threshold=threshold)
    t = result.as_frame()
    extra = []
    for g in result.groups:
        rows = np.asarray(groups == g)
        entry = {"mean_predicted": float(response[rows].mean())}
        if labels is not None:
            y = np.asarray(labels, dtype=float)[rows]
            p = response[rows]
            known = np.isfinite(y)
            entry["observed_rate"] = float(y[known].mean()) if known.any() else np.nan
            try:
                entry["auc"] = binary_metrics(y[known].astype(int), p[known]).auc
            except InputError:
                entry["auc"] = np.nan  # one class only in this group
        extra.append(entry)
    t = pd.concat([t, pd.DataFrame(extra)], axis=1)
    flagged = [str(g) for g, f in zip(result.groups, result.flagged, strict=True) if f]
    lowest = float(np.nanmin(result.ratios))
    if flagged:
        status = "fail"
        summary = (f"ratio below {threshold:g} for {', '.join(flagged)} (lowest {lowest:.3f}) "
                   f"against {result.reference_group}: review needed (screening indicator)")
    else:
        status = "pass"
        summary = f"every group's ratio is at least {threshold:g} (lowest {lowest:.3f})"
    evidence = {"groups": table(t), "reference_group": result.reference_group,
                "lowest_ratio": lowest, "flagged": flagged,
                "rows_without_group": result.rows_without_group}
    parameters = {"group": group, "cutoff": float(cutoff), "adverse_if": adverse_if,
                  "threshold": float(threshold), "favourable": "not the adverse decision",
                  "rule": "four-fifths rule, 29 CFR 1607.4(D)"}
    plot = {"kind": "bars", "labels": [str(g) for g in result.groups],
            "values": result.rates.tolist(), "xlabel": "favourable-outcome rate",
            "title": f"Favourable-outcome rate by {group}"}
    return CheckResult(f"adverse_impact:{group}", f"Adverse impact ratio by {group}", status,
                       summary, evidence, parameters, "Portfolio", {"group": group}, plot,
                       CAUTION)
