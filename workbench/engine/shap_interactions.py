"""SHAP interaction values of tree models, per raw input column, and their strength matrix.

Path-dependent SHAP interaction values (Lundberg et al. 2020, Nature Machine Intelligence 2:56-67,
section "SHAP interaction values") come from our tree kernel in model space. A raw column that
becomes several model columns (one-hot parts) gets the sum of its parts' block: with the 0/1
aggregation matrix M (model columns x raw columns), Phi_raw = M^T Phi_model M, which keeps the
row sums equal to the raw SHAP values. The strength of a pair is the mean absolute interaction
value over a seeded row sample, counted once per ordered pair (Phi_ij + Phi_ji = 2 Phi_ij).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.adapter import ModelAdapter
from workbench.engine.attribution import tree
from workbench.engine.errors import InputError


@dataclass(frozen=True)
class InteractionStrength:
    """Mean |SHAP interaction value| per pair of raw columns.

    features: raw input columns (p,); matrix: (p, p) symmetric, off-diagonal = mean over rows of
    |Phi_ij + Phi_ji|, diagonal NaN (a feature is no pair with itself); main_effects: (p,) mean
    |Phi_ii|; values: (n, p, p) per row;
    base_value; rows: positions of the sampled rows; units of the explained output.
    """

    features: list[str]
    matrix: np.ndarray
    main_effects: np.ndarray
    values: np.ndarray
    base_value: float
    rows: np.ndarray
    sample: int
    seed: int
    units: str
    method: str = "tree-path interaction values"


def supports(adapter: ModelAdapter) -> bool:
    return (
        adapter.mappable
        and tree.is_tree_model(adapter.final_estimator)
        and tree.kernel_supports(adapter.final_estimator)
    )


def shap_interaction_strength(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    *,
    sample: int = 200,
    seed: int = 0,
    progress=None,
    cancel=None,
) -> InteractionStrength:
    """SHAP interaction strengths of a tree model on a seeded sample of ``frame``'s rows."""
    if not supports(adapter):
        raise InputError(
            f"SHAP interaction values need a tree model our kernel reads (this is {adapter.model_type})"
        )
    n = len(frame)
    if n == 0:
        raise InputError("no rows to compute SHAP interaction values on")
    take = min(int(sample), n)
    rows = np.sort(jobs.rng(seed).choice(n, size=take, replace=False))
    subset = frame.iloc[rows]
    est = adapter.final_estimator
    try:
        z = adapter.transform(subset)
    except (ValueError, TypeError):
        if adapter.preprocessor is not None:
            raise
        z = tree.kernel_model_matrix(est, adapter.prepare(subset))
    k = tree.kernel()
    result = k.interaction_values(tree.kernel_ensemble(est), z, progress=progress, cancel=cancel)
    values = np.asarray(result.values, dtype=float)  # (n, m, m, K)
    base = np.atleast_1d(np.asarray(result.base_value, dtype=float))
    n_out = values.shape[3]
    if n_out > 1:
        per_row, b = values[..., adapter.class_index], float(base[adapter.class_index])
    else:
        per_row, b = values[..., 0], float(base[0])
        if adapter.classes and adapter.class_index == 0:
            per_row = -per_row
            b = 1.0 - b if adapter.output_kind == "probability" else -b
    agg = adapter.column_map.aggregation_matrix()  # (m, p)
    raw = np.einsum("mi,nmk,kj->nij", agg, per_row, agg)
    strength = np.abs(raw + np.swapaxes(raw, 1, 2)).mean(axis=0)
    main = np.abs(np.einsum("nii->ni", raw)).mean(axis=0)
    np.fill_diagonal(strength, np.nan)
    jobs.step(progress, cancel, 1.0, "SHAP interaction strengths")
    return InteractionStrength(
        features=list(adapter.input_columns), matrix=strength, main_effects=main, values=raw, base_value=b,
        rows=rows, sample=take, seed=seed, units=adapter.output_units,
    )
