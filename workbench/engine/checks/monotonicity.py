"""Does the model move the way the analyst expects with a feature? Checked on ICE lines.

The analyst declares per feature ``increasing``, ``decreasing`` or ``none``. For a declared
direction, every sampled row's ICE line (its explained output as the feature runs over a grid,
other values kept; Goldstein et al. 2015) is checked for moves against that direction: the
*violation* of a line is the largest fall below an earlier point of the line (for
``increasing``; the largest rise for ``decreasing``), i.e. max over i < j of s (L_i - L_j) with
s = +1 or -1. A line violates when its violation exceeds the tolerance.

Tolerance: ``tolerance`` (default 0.01) times the standard deviation of the explained output
over the sampled rows, so that tiny steps of tree models and float noise do not count and the
rule does not depend on the output's units (common practice, no source).

Status: ``fail`` when the effect curve (partial dependence, the mean of the ICE lines) itself
violates the direction beyond the tolerance, or when more than ``fail_share`` (default 0.5) of
the rows' lines do; ``warn`` when more than ``warn_share`` (default 0) of the lines do but the
average effect keeps the direction (the direction holds on average, not row by row); ``pass``
otherwise. A feature declared ``none`` is described (the shares of rising and falling lines)
and always passes.

Grid: ``grid_size`` quantiles of the feature from 0.5 % to 99.5 % (wider than the effect
curves' 5-95 % so that reversals in the tails are seen), duplicates dropped.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.checks.result import CheckResult
from workbench.engine.effects import is_categorical_feature, model_frame, partial_dependence
from workbench.engine.errors import InputError
from workbench.engine.jobs import rng

DIRECTIONS = ("increasing", "decreasing", "none")
GRID_QUANTILES = (0.005, 0.995)


def parse_direction(text: str) -> str:
    word = str(text).strip().lower()
    aliases = {"up": "increasing", "+": "increasing", "inc": "increasing",
               "down": "decreasing", "-": "decreasing", "dec": "decreasing",
               "not monotone": "none", "no": "none", "": "none"}
    word = aliases.get(word, word)
    if word not in DIRECTIONS:
        raise InputError(f"expected direction {text!r} is not one of {', '.join(DIRECTIONS)}")
    return word


def violations(lines: np.ndarray, sign: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per line (rows of ``lines``): the violation, and the grid positions (from, to) where it
    happens. ``sign`` +1 for increasing, -1 for decreasing."""
    z = sign * np.asarray(lines, dtype=float)
    running = np.maximum.accumulate(z, axis=1)
    fall = running - z
    to = np.argmax(fall, axis=1)
    size = fall[np.arange(z.shape[0]), to]
    # where the running maximum was reached before the fall
    start = np.array([int(np.argmax(z[i, : t + 1])) for i, t in enumerate(to)], dtype=int)
    return size, start, to


def monotonicity_grid(series: pd.Series, grid_size: int) -> np.ndarray:
    v = pd.to_numeric(series, errors="coerce").to_numpy(dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        raise InputError(f"column '{series.name}' has no numeric values")
    unique = np.unique(v)
    if unique.size <= grid_size:
        return unique
    return np.unique(np.quantile(v, np.linspace(*GRID_QUANTILES, int(grid_size))))


def check_monotonicity(adapter, frame: pd.DataFrame, feature: str, direction: str, *,
                       rows: int = 200, grid_size: int = 20, tolerance: float = 0.01,
                       warn_share: float = 0.0, fail_share: float = 0.5, seed: int = 0,
                       ids=None, progress=None, cancel=None) -> CheckResult:
    """The ``monotonicity:<feature>`` check on a seeded sample of ``rows`` rows of ``frame``.

    ``ids``: optional row labels (aligned with ``frame``) named in the evidence.
    """
    direction = parse_direction(direction)
    x = model_frame(adapter, frame)
    if feature not in x.columns:
        raise InputError(f"expected direction given for '{feature}', which is not an input "
                         f"column of the model")
    if is_categorical_feature(adapter, x, feature):
        raise InputError(f"'{feature}' is categorical; a direction needs a numeric feature")
    n = len(x)
    picked = np.arange(n)
    if rows is not None and n > rows:
        picked = np.sort(rng(seed).choice(n, size=int(rows), replace=False))
    sample = x.iloc[picked].reset_index(drop=True)
    grid = monotonicity_grid(x[feature], grid_size)
    curve = partial_dependence(adapter, sample, feature, grid=grid, ice_rows=None, seed=seed,
                               progress=progress, cancel=cancel)
    ice = curve.ice
    spread = float(np.std(adapter.score(sample)))
    tol = max(float(tolerance) * spread, 1e-9)
    parameters = {"direction": direction, "rows": int(len(sample)), "rows_in_data": int(n),
                  "grid_points": int(grid.size), "tolerance": float(tolerance),
                  "tolerance_output_units": tol, "warn_share": warn_share,
                  "fail_share": fail_share, "seed": int(seed), "units": curve.units,
                  "sampled": bool(len(sample) < n)}
    plot = {"kind": "curves", "x": grid.tolist(), "xlabel": feature, "ylabel": curve.units,
            "series": {"effect curve (mean of the ICE lines)": curve.pd.tolist()}}
    if direction == "none":
        rising = np.mean(violations(ice, -1)[0] <= tol)
        falling = np.mean(violations(ice, +1)[0] <= tol)
        evidence = {"share_of_lines_never_falling": float(rising),
                    "share_of_lines_never_rising": float(falling),
                    "effect_curve_range": float(np.ptp(curve.pd))}
        return CheckResult(f"monotonicity:{feature}", f"Direction of {feature}", "pass",
                           f"no direction declared; {rising:.0%} of the sampled lines never "
                           f"fall, {falling:.0%} never rise", evidence, parameters, "Effect",
                           {"feature": feature}, plot)
    sign = 1 if direction == "increasing" else -1
    size, start, to = violations(ice, sign)
    bad = size > tol
    share = float(bad.mean())
    pd_size, pd_start, pd_to = (v[0] for v in violations(curve.pd[None, :], sign))
    worst = int(np.argmax(size))
    worst_row = int(picked[worst])
    evidence = {
        "share_of_rows_violating": share,
        "rows_violating": int(bad.sum()),
        "worst_violation": float(size[worst]),
        "worst_row": worst_row,
        "worst_row_id": None if ids is None else _label(ids, worst_row),
        "worst_between": [_value(grid[start[worst]]), _value(grid[to[worst]])],
        "effect_curve_violation": float(pd_size),
        "effect_curve_between": [_value(grid[pd_start]), _value(grid[pd_to])],
        "effect_curve_change": float(curve.pd[-1] - curve.pd[0]),
    }
    plot["series"][f"row {worst_row} (worst line)"] = ice[worst].tolist()
    if pd_size > tol or share > fail_share:
        status = "fail"
        where = (f"the effect curve moves against it by {pd_size:.3g} between "
                 f"{_value(grid[pd_start]):g} and {_value(grid[pd_to]):g}; " if pd_size > tol else "")
        summary = f"expected {direction}: {where}{share:.0%} of sampled rows violate it"
    elif share > warn_share:
        status = "warn"
        summary = (f"expected {direction}: holds on average, but {share:.0%} of sampled rows "
                   f"violate it (worst {size[worst]:.3g} at row {worst_row})")
    else:
        status = "pass"
        summary = f"expected {direction}: no sampled row moves against it beyond the tolerance"
    return CheckResult(f"monotonicity:{feature}", f"Direction of {feature}", status, summary,
                       evidence, parameters, "Effect", {"feature": feature, "row": worst_row},
                       plot)


def _value(v):
    return float(v)


def _label(ids, position: int):
    value = ids.iloc[position] if isinstance(ids, pd.Series) else np.asarray(ids)[position]
    return value.item() if isinstance(value, np.generic) else value
