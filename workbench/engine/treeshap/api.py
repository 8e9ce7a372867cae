"""Public functions: SHAP values, interaction values and raw output of a tree ensemble."""

from __future__ import annotations

import time
from collections import Counter

import numba
import numpy as np

from workbench.engine import jobs
from workbench.engine.errors import InputError
from workbench.engine.treeshap import (
    _kernel_interactions,
    _kernel_interventional,
    _kernel_interventional_masks,
    _kernel_path,
    _prepare,
    _route,
)
from workbench.engine.treeshap.ensemble import TreeEnsemble
from workbench.engine.treeshap.results import TreeInteractionResult, TreeShapResult

CHUNK_ROWS = 1000  # rows between progress / cancel checks
FEATURE_BITS = True  # interventional masks over features when there are at most 62 (tests flip)
BLOCK_ROWS = 64  # most rows swept through a tree together (the arithmetic vectorises over them)
BLOCK_SCRATCH = 16 * 2**20  # bytes of sweep tables per task that set a smaller block
LINEAR_SCRATCH_LIMIT = 64 * 2**20  # bytes of one row's sweep tables before a tree goes classic
TABLE_LIMIT = 256 * 2**20  # bytes of row-independent sweep factors held at once (trees grouped)
_Q_NODES, _Q_WEIGHTS = _prepare.quadrature_table()
_ALGORITHM_NAMES = ("linear", "classic")


def _route_of(ens: TreeEnsemble) -> tuple:
    return (ens.left, ens.right, ens.feature, ens.threshold, ens.missing_left, ens.cat_index,
            ens.cat_left_bits, ens.cat_known_bits)


def _quadrature_sizes(ens: TreeEnsemble) -> np.ndarray:
    # an m-point rule is exact to degree 2m - 1; the integrands have degree < d
    return np.maximum(1, (ens.paths.tree_unique + 1) // 2).astype(np.int64)


def choose_algorithms(ens: TreeEnsemble, algorithm: str = "auto") -> np.ndarray:
    """Per tree 0 = linear sweep, 1 = classic Algorithm 2.

    "auto": linear, except classic where an edge has zero cover (its ratio would be divided
    out), where a path has more distinct features than the quadrature table covers, or where
    the sweep tables of one tree would exceed LINEAR_SCRATCH_LIMIT.
    """
    if algorithm not in ("auto", "classic", "linear"):
        raise ValueError(f"algorithm must be 'auto', 'linear' or 'classic'; got {algorithm!r}")
    n_trees = ens.n_trees
    if algorithm == "classic":
        return np.ones(n_trees, np.int64)
    m = _quadrature_sizes(ens)
    sizes = np.diff(ens.tree_start)
    width = np.where(ens.tree_target < 0, ens.n_outputs, 1)
    scratch = sizes * m * (2 + width) * 8  # bytes of one row's state, G and H tables
    classic = (ens.paths.tree_zero_cover == 1) | (m > _prepare.MAX_QUADRATURE)
    classic |= scratch > LINEAR_SCRATCH_LIMIT
    return classic.astype(np.int64)


def _block_rows(ens: TreeEnsemble, n_rows: int, m_max: int) -> int:
    """Rows per parallel task: as many as fit the scratch budget, but enough tasks for all
    threads."""
    max_nodes = int(np.diff(ens.tree_start).max())
    per_row = max_nodes * m_max * (ens.n_outputs + 1) * 8
    block = int(np.clip(BLOCK_SCRATCH // max(per_row, 1), 4, BLOCK_ROWS))
    threads = numba.get_num_threads()
    return max(1, min(block, -(-n_rows // threads)))


def _tree_groups(ens: TreeEnsemble, m_max: int) -> list[tuple[int, int]]:
    """Consecutive trees whose linear-sweep tables (6 m_max doubles per node) fit TABLE_LIMIT."""
    per_node = 6 * m_max * 8
    groups, t0, size = [], 0, 0
    for t, nodes in enumerate(np.diff(ens.tree_start)):
        if size and size + nodes * per_node > TABLE_LIMIT:
            groups.append((t0, t))
            t0, size = t, 0
        size += nodes * per_node
    groups.append((t0, ens.n_trees))
    return groups


def _summary(algos: list[str]) -> str:
    counts = Counter(algos)
    return ", ".join(f"{name}: {counts[name]} trees" for name in sorted(counts))


def raw_output(ens: TreeEnsemble, X) -> np.ndarray:
    """The model's raw output (n, n_outputs) as the kernel reads the trees."""
    X = ens.prepare_input(X)
    out = np.empty((X.shape[0], ens.n_outputs))
    _route.raw_output(X, _route_of(ens), ens.values, ens.tree_start, ens.tree_target,
                      ens.offset, out)
    if ens.binary_complement:
        out[:, 0] = 1.0 - out[:, 1]
    return out


def _complete(ens: TreeEnsemble, values: np.ndarray) -> None:
    """Fill output 0 of a two-class probability model: its SHAP values are minus output 1's."""
    if ens.binary_complement:
        values[..., 0] = -values[..., 1]


def model_matrix(ens: TreeEnsemble, frame) -> np.ndarray:
    """For HistGradientBoosting fitted on a DataFrame with categorical columns: the frame's
    columns in their own order with categories replaced by the model's internal codes."""
    if ens.preprocessor is None:
        return np.asarray(frame, dtype=np.float64)
    internal = np.asarray(ens.preprocessor.transform(frame), dtype=np.float64)
    X = np.empty_like(internal)
    X[:, ens.internal_columns] = internal
    return X


def shap_values(ens: TreeEnsemble, X, *, method: str = "path", background=None,
                algorithm: str = "auto", progress=None, cancel=None) -> TreeShapResult:
    """SHAP values (n, n_features, n_outputs) on the model's raw scale.

    method="path": tree path-dependent (conditional expectation by training cover,
    Lundberg et al. 2020); ``algorithm`` picks per tree (see :func:`choose_algorithms`).
    method="interventional": marginal expectation over ``background`` (a matrix like X).
    Local accuracy: ``values.sum(axis=1) + base_value == raw_output(ens, X)``.
    """
    X = ens.prepare_input(X)
    n = X.shape[0]
    out = np.zeros((n, ens.n_features, ens.n_outputs))
    route = _route_of(ens)
    if method == "path":
        if background is not None:
            raise ValueError("background is only used with method='interventional'")
        algo = choose_algorithms(ens, algorithm)
        tree_m = _quadrature_sizes(ens)
        m_max = int(max(1, tree_m[algo == 0].max(initial=1)))
        q_nodes = np.ascontiguousarray(_Q_NODES[: m_max + 1, :m_max])
        q_weights = np.ascontiguousarray(_Q_WEIGHTS[: m_max + 1, :m_max])
        max_nodes = int(np.diff(ens.tree_start).max())
        groups = _tree_groups(ens, m_max)
        block = _block_rows(ens, min(n, CHUNK_ROWS), m_max)
        for g, (t0, t1) in enumerate(groups):
            D, C = _kernel_path.linear_tables(ens.tree_start, t0, t1, ens.parent,
                                              ens.paths.prev_same, ens.paths.r_comb, tree_m,
                                              algo, q_nodes, q_weights)
            for sl in jobs.chunk_slices(n, CHUNK_ROWS):
                jobs.step(progress, cancel, (g * n + sl.start) / max(n * len(groups), 1),
                          "tree SHAP values")
                _kernel_path.path_shap(X[sl], block, route, ens.parent, ens.cover, ens.values,
                                       ens.tree_start, ens.tree_target, algo, tree_m,
                                       ens.paths.prev_same, t0, t1, D, C, max_nodes,
                                       ens.max_depth, out[sl])
        names = [_ALGORITHM_NAMES[a] for a in algo]
        base = _base_value(ens)
        bg_rows = 0
    elif method == "interventional":
        if background is None:
            raise ValueError("method='interventional' needs a background matrix")
        Z = ens.prepare_input(background)
        if Z.shape[0] == 0:
            raise InputError("the background sample for interventional SHAP values has no rows")
        w_pos, w_neg = _kernel_interventional.share_tables(ens.max_depth)
        p = ens.paths
        use_masks = (p.tree_unique <= _kernel_interventional_masks.MAX_BITS).astype(np.int64)
        if algorithm == "classic":  # the per-pair tree walk everywhere
            use_masks[:] = 0
        use_walk = (1 - use_masks).astype(np.int64)
        max_nodes = int(np.diff(ens.tree_start).max())
        max_unique = int(p.tree_unique.max(initial=0))
        n_leaves = p.leaf_nodes.size
        leaf_of_node = np.full(ens.left.size, -1, np.int64)
        leaf_of_node[p.leaf_nodes] = np.arange(n_leaves)
        word = _kernel_interventional_masks.BACKGROUND_WORD
        feature_bits = FEATURE_BITS and ens.n_features <= _kernel_interventional_masks.MAX_BITS
        bg_chunks = list(jobs.chunk_slices(Z.shape[0], word))
        follows = np.zeros(ens.left.size, np.int64)
        n_unique = np.zeros(n_leaves, np.int64)
        unique_mask = np.zeros((n_leaves, word), np.int64)
        # small types keep the per-leaf tables within a core's own cache (they are read for
        # every row; two workers on one machine otherwise contend for the shared cache)
        unique_count = np.zeros((n_leaves, word), np.int32)
        row_group = np.zeros((n_leaves, word) if feature_bits else (0, word), np.int8)
        row_chunk = max(1, CHUNK_ROWS * 100 // Z.shape[0])
        row_chunks = list(jobs.chunk_slices(n, row_chunk))
        steps = len(bg_chunks) * len(row_chunks)
        done = 0
        for zs in bg_chunks:
            Zc = np.ascontiguousarray(Z[zs])
            if use_masks.any() and feature_bits:
                _kernel_interventional_masks.background_feature_masks(
                    Zc, route, ens.parent, p.prev_same, ens.tree_start, use_masks,
                    p.leaf_start, p.leaf_edge_start, p.leaf_edges, max_nodes, follows,
                    n_unique, unique_mask, unique_count, row_group)
            elif use_masks.any():
                _kernel_interventional_masks.background_masks(
                    Zc, route, p.prev_same, ens.tree_start, use_masks, p.leaf_start,
                    p.leaf_edge_start, p.leaf_edges, max_nodes, follows, n_unique, unique_mask,
                    unique_count)
            for sl in row_chunks:
                jobs.step(progress, cancel, done / steps, "interventional SHAP values")
                done += 1
                if use_masks.any() and feature_bits:
                    _kernel_interventional_masks.interventional_feature_masks(
                        X[sl], route, p.prev_same, ens.values, ens.tree_start,
                        ens.tree_target, use_masks, leaf_of_node, max_nodes, ens.max_depth,
                        follows, n_unique, unique_mask, unique_count, row_group, Zc.shape[0],
                        w_pos, w_neg, 1.0 / Z.shape[0], out[sl])
                elif use_masks.any():
                    _kernel_interventional_masks.interventional_masks(
                        X[sl], route, ens.parent, p.prev_same, ens.values, ens.tree_start,
                        ens.tree_target, use_masks, p.leaf_start, leaf_of_node,
                        p.leaf_edge_start, p.leaf_edges, max_nodes, ens.max_depth, max_unique,
                        follows, n_unique, unique_mask, unique_count, Zc.shape[0],
                        w_pos, w_neg, 1.0 / Z.shape[0], out[sl])
                if use_walk.any():
                    _kernel_interventional.interventional_shap(
                        X[sl], Zc, route, ens.values, ens.tree_start, ens.tree_target,
                        use_walk, ens.max_depth, w_pos, w_neg, Zc.shape[0] / Z.shape[0],
                        out[sl])
        names = ["masks" if u else "walk" for u in use_masks]
        base = raw_output(ens, Z).mean(axis=0)
        bg_rows = int(Z.shape[0])
    else:
        raise ValueError(f"method must be 'path' or 'interventional'; got {method!r}")
    _complete(ens, out)
    jobs.step(progress, cancel, 1.0, "tree SHAP values")
    return TreeShapResult(values=out, base_value=base, method=method,
                          algorithm_per_tree=tuple(names), summary=_summary(names),
                          background_rows=bg_rows, output_kind=ens.output_kind,
                          output_names=ens.output_names)


def _base_value(ens: TreeEnsemble) -> np.ndarray:
    """Cover-weighted expected raw output (the path-dependent base value)."""
    base = ens.offset + _expected_per_output(ens)
    if ens.binary_complement:
        base[0] = 1.0 - base[1]
    return base


def _expected_per_output(ens: TreeEnsemble) -> np.ndarray:
    base = np.zeros(ens.n_outputs)
    exp = ens.paths.expected
    for t in range(ens.n_trees):
        tgt = ens.tree_target[t]
        if tgt >= 0:
            base[tgt] += exp[t, 0]
        else:
            base += exp[t, : ens.n_outputs]
    return base


def interaction_values(ens: TreeEnsemble, X, *, progress=None,
                       cancel=None) -> TreeInteractionResult:
    """Path-dependent SHAP interaction values (n, n_features, n_features, n_outputs)."""
    X = ens.prepare_input(X)
    n = X.shape[0]
    out = np.zeros((n, ens.n_features, ens.n_features, ens.n_outputs))
    tree_m = _quadrature_sizes(ens)
    if tree_m.max(initial=1) > _prepare.MAX_QUADRATURE:
        raise ValueError("a tree path has more distinct features than the kernel supports")
    m_max = int(tree_m.max(initial=1))
    q_nodes = np.ascontiguousarray(_Q_NODES[: m_max + 1, :m_max])
    q_weights = np.ascontiguousarray(_Q_WEIGHTS[: m_max + 1, :m_max])
    p = ens.paths
    max_nodes = int(np.diff(ens.tree_start).max())
    max_unique = int(p.tree_unique.max(initial=0))
    chunk = max(1, CHUNK_ROWS // 10)
    for sl in jobs.chunk_slices(n, chunk):
        jobs.step(progress, cancel, sl.start / max(n, 1), "tree SHAP interaction values")
        _kernel_interactions.interaction_shap(
            X[sl], _route_of(ens), ens.parent, ens.values, ens.tree_start, ens.tree_target,
            tree_m, p.r_comb, p.prev_same, p.leaf_start, p.leaf_nodes, p.leaf_edge_start,
            p.leaf_edges, max_nodes, max_unique, q_nodes, q_weights, out[sl])
    _complete(ens, out)
    jobs.step(progress, cancel, 1.0, "tree SHAP interaction values")
    return TreeInteractionResult(values=out, base_value=_base_value(ens),
                                 method="path", summary=f"per-leaf: {ens.n_trees} trees",
                                 output_kind=ens.output_kind, output_names=ens.output_names)


def compile_kernels() -> float:
    """Compile (or load from the on-disk cache) every kernel on a tiny model; seconds taken."""
    from sklearn.tree import DecisionTreeRegressor

    from workbench.engine.treeshap.readers import from_estimator

    t0 = time.perf_counter()
    rng = np.random.default_rng(0)
    X = rng.normal(size=(40, 3))
    model = DecisionTreeRegressor(max_depth=3, random_state=0).fit(X, X[:, 0] + X[:, 1])
    ens = from_estimator(model)
    shap_values(ens, X[:4])
    shap_values(ens, X[:4], algorithm="classic")
    shap_values(ens, X[:4], method="interventional", background=X[:5])
    interaction_values(ens, X[:4])
    return time.perf_counter() - t0
