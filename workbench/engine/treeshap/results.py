"""Frozen results of the tree SHAP kernel: arrays plus the parameters that made them."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class TreeShapResult:
    """SHAP values of n rows.

    values: (n, n_features, n_outputs) on the model's raw scale (``output_kind``);
    base_value: (n_outputs,), so that ``values.sum(axis=1) + base_value`` is the raw output;
    method: "path" (tree path-dependent, Lundberg et al. 2020) or "interventional";
    algorithm_per_tree: per tree "linear" or "classic" (path) / "interventional";
    summary: one line saying which algorithm ran on how many trees;
    background_rows: number of background rows (0 for "path").
    """

    values: np.ndarray
    base_value: np.ndarray
    method: str
    algorithm_per_tree: tuple[str, ...]
    summary: str
    background_rows: int
    output_kind: str
    output_names: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class TreeInteractionResult:
    """SHAP interaction values of n rows (tree path-dependent, Lundberg et al. 2020).

    values: (n, n_features, n_features, n_outputs), symmetric in the two feature axes;
    ``values.sum(axis=2)`` equals the SHAP values; base_value: (n_outputs,).
    """

    values: np.ndarray
    base_value: np.ndarray
    method: str
    summary: str
    output_kind: str
    output_names: tuple[str, ...]
