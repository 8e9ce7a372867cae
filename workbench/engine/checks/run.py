"""Running every audit check that the inputs allow: :func:`run_checks`."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd

from workbench.engine.checks.drift import check_feature_stability, check_score_stability
from workbench.engine.checks.leakage import check_leakage
from workbench.engine.checks.model_checks import check_additivity, check_calibration
from workbench.engine.checks.monotonicity import check_monotonicity, parse_direction
from workbench.engine.checks.quality import check_data_quality
from workbench.engine.checks.result import CheckResult
from workbench.engine.checks.segments import check_adverse_impact
from workbench.engine.effects import model_frame
from workbench.engine.errors import InputError
from workbench.engine.jobs import step
from workbench.engine.metrics import check_direction
from workbench.engine.validation import coerce_target


@dataclass(frozen=True)
class Thresholds:
    """Every limit the checks use; the defaults are documented in each check's module."""

    psi_warn: float = 0.1
    psi_fail: float = 0.25
    psi_bins: int = 10
    monotone_tolerance: float = 0.01
    monotone_warn_share: float = 0.0
    monotone_fail_share: float = 0.5
    monotone_rows: int = 200
    monotone_grid: int = 20
    impact_ratio: float = 0.8
    leak_dominance: float = 5.0
    leak_single_auc: float = 0.95
    additivity_rows: int = 200
    additivity_warn: float = 1e-6
    additivity_fail: float = 1e-3
    calibration_bins: int = 10
    calibration_p_value: float = 0.05
    calibration_gap: float = 0.05
    missing_fail: float = 0.5
    missing_rise: float = 0.05
    outside_warn: float = 0.01
    outside_fail: float = 0.10

    def as_dict(self) -> dict:
        return asdict(self)


def _labels(adapter, frame: pd.DataFrame, y) -> pd.Series | None:
    if y is None:
        return None
    if isinstance(y, str):
        if y not in frame.columns:
            raise InputError(f"no target column '{y}' in the data")
        y = frame[y]
    series = pd.Series(np.asarray(y, dtype=object), index=frame.index)
    if len(series) != len(frame):
        raise InputError(f"{len(series)} target values for {len(frame)} rows")
    return coerce_target(adapter, series)


def _scaled(progress, lo: float, hi: float):
    if progress is None:
        return None
    return lambda f, m="": progress(lo + (hi - lo) * f, m)


def run_checks(adapter, frame: pd.DataFrame, y=None, *, reference: pd.DataFrame | None = None,
               expectations: dict | None = None, group: str | None = None,
               cutoff: float | None = None, adverse_if: str = "above", seed: int = 0,
               sample: int = 2000, background_size: int = 100,
               thresholds: Thresholds | None = None, ids=None, progress=None,
               cancel=None) -> list[CheckResult]:
    """Every check the inputs allow, in a fixed order.

    - ``monotonicity:<F>`` for each feature in ``expectations`` (increasing/decreasing/none);
    - ``stability:score`` and ``stability:<F>`` for each input column, when ``reference`` is given;
    - ``adverse_impact:<group>`` when ``group`` and ``cutoff`` are given;
    - ``leakage`` and ``calibration`` (binary) when ``y`` is given (column name or values);
    - ``additivity`` and ``data_quality`` always.

    ``sample``: rows used by permutation importance (leakage); ICE lines and attributions use
    the smaller samples in ``thresholds`` (``monotone_rows``, ``additivity_rows``); each check
    says in its parameters whether it sampled. Rows with a missing target are left out of the
    checks that need it.
    """
    t = thresholds or Thresholds()
    check_direction(adverse_if)
    expectations = {str(k): parse_direction(v) for k, v in (expectations or {}).items()}
    x = model_frame(adapter, frame)
    unknown = [f for f in expectations if f not in x.columns]
    if unknown:
        raise InputError(f"expected direction(s) given for column(s) the model does not use: "
                         f"{', '.join(unknown)}")
    if group is not None and cutoff is None:
        raise InputError("the adverse impact check by group needs a cutoff (--cutoff)")
    labels = _labels(adapter, frame, y)
    frame = frame.reset_index(drop=True)
    if labels is not None:
        labels = labels.reset_index(drop=True)
    ref = None if reference is None else reference.reset_index(drop=True)
    response = np.asarray(adapter.response(x), dtype=float)  # scored once, used by several checks
    ref_response = None if ref is None else np.asarray(adapter.response(model_frame(adapter, ref)))
    plan: list[tuple[str, object]] = []
    for feature, direction in expectations.items():
        plan.append((f"monotonicity of {feature}", lambda p, c, f=feature, d=direction:
                     check_monotonicity(adapter, frame, f, d, rows=t.monotone_rows,
                                        grid_size=t.monotone_grid,
                                        tolerance=t.monotone_tolerance,
                                        warn_share=t.monotone_warn_share,
                                        fail_share=t.monotone_fail_share, seed=seed, ids=ids,
                                        progress=p, cancel=c)))
    if ref is not None:
        plan.append(("stability of the score", lambda p, c: check_score_stability(
            adapter, frame, ref, bins=t.psi_bins, warn=t.psi_warn, fail=t.psi_fail,
            expected=ref_response, actual=response)))
        for feature in x.columns:
            plan.append((f"stability of {feature}", lambda p, c, f=feature: check_feature_stability(
                adapter, frame, ref, f, bins=t.psi_bins, warn=t.psi_warn, fail=t.psi_fail)))
    binary01 = None
    known = None
    if labels is not None:
        known = labels.notna().to_numpy()
        if adapter.task == "binary":
            binary01 = np.where(known, (labels == adapter.positive_class).to_numpy(dtype=float),
                                np.nan)
    if group is not None:
        plan.append((f"adverse impact by {group}", lambda p, c: check_adverse_impact(
            adapter, frame, group, cutoff=cutoff, adverse_if=adverse_if, labels=binary01,
            threshold=t.impact_ratio, response=response)))
    if labels is not None:
        kept = frame.loc[known].reset_index(drop=True)
        kept_y = labels[known].reset_index(drop=True)
        plan.append(("leakage", lambda p, c: check_leakage(
            adapter, kept, kept_y, sample=sample, seed=seed, dominance=t.leak_dominance,
            single_auc=t.leak_single_auc, progress=p, cancel=c)))
        if adapter.task == "binary":
            plan.append(("calibration", lambda p, c: check_calibration(
                adapter, kept, binary01[known].astype(int), bins=t.calibration_bins,
                p_value=t.calibration_p_value, gap=t.calibration_gap,
                response=response[known])))
    plan.append(("additivity", lambda p, c: check_additivity(
        adapter, frame, background=ref, rows=t.additivity_rows, background_size=background_size,
        seed=seed, warn=t.additivity_warn, fail=t.additivity_fail, progress=p, cancel=c)))
    plan.append(("data quality", lambda p, c: check_data_quality(
        adapter, frame, ref, missing_fail=t.missing_fail, missing_rise=t.missing_rise,
        outside_warn=t.outside_warn, outside_fail=t.outside_fail)))
    results = []
    for k, (label, run) in enumerate(plan):
        lo, hi = k / len(plan), (k + 1) / len(plan)
        step(progress, cancel, lo, f"checks: {label}")
        results.append(run(_scaled(progress, lo, hi), cancel))
    step(progress, cancel, 1.0, "checks: done")
    return results


def summarise(results: list[CheckResult]) -> dict:
    """Counts of each status and the ids that did not pass."""
    counts = {s: sum(r.status == s for r in results) for s in ("pass", "warn", "fail")}
    return {"counts": counts, "failed": [r.id for r in results if r.status == "fail"],
            "warned": [r.id for r in results if r.status == "warn"]}
