"""Data quality of the current rows: missing values, and values outside the reference's range.

Per input column: the missing rate (and its change from the reference), and the share of rows
outside the reference range (numeric: below its minimum or above its maximum; categorical: a
level the reference does not hold). Status (common practice, no source): fail when a column is
missing in more than ``missing_fail`` (0.5) of rows or more than ``outside_fail`` (0.10) of
rows fall outside the reference; warn when a missing rate rose by more than ``missing_rise``
(0.05) or more than ``outside_warn`` (0.01) of rows fall outside; pass otherwise.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.checks.result import CheckResult, worst_status
from workbench.engine.effects import is_categorical_feature, model_frame


def check_data_quality(adapter, frame: pd.DataFrame, reference: pd.DataFrame | None = None, *,
                       missing_fail: float = 0.5, missing_rise: float = 0.05,
                       outside_warn: float = 0.01, outside_fail: float = 0.10) -> CheckResult:
    """``data_quality`` over the model's input columns."""
    x = model_frame(adapter, frame)
    ref = None if reference is None else model_frame(adapter, reference)
    rows, statuses = [], []
    for c in x.columns:
        missing = float(x[c].isna().mean())
        entry = {"column": c, "missing_rate": missing}
        status = "fail" if missing > missing_fail else "pass"
        if ref is not None:
            ref_missing = float(ref[c].isna().mean())
            entry["reference_missing_rate"] = ref_missing
            if status == "pass" and missing - ref_missing > missing_rise:
                status = "warn"
            present = x[c].dropna()
            if is_categorical_feature(adapter, x, c):
                known = set(ref[c].dropna().astype(str))
                outside = ~present.astype(str).isin(known)
                entry["outside_examples"] = [str(v) for v in present[outside].unique()[:3]]
            else:
                v = pd.to_numeric(present, errors="coerce")
                r = pd.to_numeric(ref[c], errors="coerce")
                entry["reference_min"], entry["reference_max"] = float(r.min()), float(r.max())
                outside = (v < r.min()) | (v > r.max())
            share = float(outside.sum()) / max(len(x), 1)
            entry["outside_reference_share"] = share
            if share > outside_fail:
                status = "fail"
            elif share > outside_warn and status == "pass":
                status = "warn"
        entry["status"] = status
        statuses.append(status)
        rows.append(entry)
    status = worst_status(statuses)
    flagged = [r["column"] for r in rows if r["status"] != "pass"]
    if flagged:
        summary = f"{status} for {', '.join(flagged)}"
    else:
        summary = ("missing rates and ranges within limits"
                   + ("" if ref is not None else " (no reference: missing rates only)"))
    most_missing = max(rows, key=lambda r: r["missing_rate"])
    evidence = {"columns": rows, "flagged": flagged,
                "highest_missing_rate": most_missing["missing_rate"],
                "highest_missing_column": most_missing["column"]}
    if ref is not None:
        evidence["highest_outside_share"] = float(np.max([r["outside_reference_share"] for r in rows]))
    parameters = {"missing_fail": missing_fail, "missing_rise": missing_rise,
                  "outside_warn": outside_warn, "outside_fail": outside_fail,
                  "reference": ref is not None, "rows": int(len(x))}
    focus = {"feature": flagged[0]} if flagged else {}
    return CheckResult("data_quality", "Data quality", status, summary, evidence, parameters,
                       "Portfolio", focus)
