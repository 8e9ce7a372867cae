"""The flat, numba-friendly form of a fitted tree ensemble.

Every supported estimator is read into one :class:`TreeEnsemble`: all trees' nodes concatenated,
children as global node indices, parents before children inside each tree (the kernels rely on
that order for their forward and backward sweeps), and each leaf's contribution already scaled
(learning rate, 1 / n_trees) so that the model's raw output is ``offset + sum of leaf values``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from workbench.engine.errors import InputError
from workbench.engine.treeshap import _prepare


@dataclass(frozen=True, eq=False)
class TreeEnsemble:
    """A fitted ensemble as the kernels see it.

    Node arrays have one entry per node of every tree (``n_nodes`` in total):
    ``left``/``right`` (global index, -1 at leaves), ``feature`` (column of X, -1 at leaves),
    ``threshold`` (go left when ``x <= threshold``), ``missing_left`` (1 when NaN goes left),
    ``cat_index`` (row of ``cat_left_bits``/``cat_known_bits`` for a categorical split, else -1),
    ``cover`` (training weight that reached the node) and ``values`` (n_nodes, value_width).
    ``tree_start`` has n_trees + 1 entries; ``tree_target[t]`` is the output the tree adds to,
    or -1 when the tree's leaf vector holds one value per output.
    """

    model_name: str
    n_features: int
    n_outputs: int
    output_kind: str
    output_names: tuple[str, ...]
    offset: np.ndarray
    input_float32: bool
    tree_start: np.ndarray
    tree_target: np.ndarray
    left: np.ndarray
    right: np.ndarray
    parent: np.ndarray
    feature: np.ndarray
    threshold: np.ndarray
    missing_left: np.ndarray
    cat_index: np.ndarray
    cat_left_bits: np.ndarray
    cat_known_bits: np.ndarray
    cover: np.ndarray
    values: np.ndarray
    preprocessor: object = None
    internal_columns: np.ndarray | None = None  # input column of each internal column
    binary_complement: bool = False  # trees hold output 1 only; output 0 is 1 - output 1
    paths: _prepare.PathTables = field(init=False, repr=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "paths", _prepare.path_tables(self))

    @property
    def n_trees(self) -> int:
        return int(self.tree_start.size - 1)

    @property
    def max_depth(self) -> int:
        return int(self.paths.depth.max()) if self.paths.depth.size else 0

    def prepare_input(self, X) -> np.ndarray:
        """X as a C-ordered float64 matrix, rounded to float32 where the model compares in it."""
        X = np.asarray(X, dtype=np.float64)
        if X.ndim != 2 or X.shape[1] != self.n_features:
            raise InputError(f"the {self.model_name} model takes {self.n_features} columns; "
                             f"the matrix given has shape {X.shape}")
        if self.input_float32:
            # scikit-learn's trees compare float32 copies of X with their thresholds.
            X = X.astype(np.float32).astype(np.float64)
        return np.ascontiguousarray(X)
