"""Row-independent tables the kernels share: depths, repeated features on a path, cover ratios.

For every non-root node c (the edge parent -> c) we keep:
``prev_same[c]``: the nearest edge above c that splits on the same feature (-1 if none);
``r_comb[c]``: the product of the cover ratios of all edges on the root path with that feature,
i.e. the chance of reaching c's side of every such split when the feature is unknown
(Lundberg et al. 2020, the "zero fraction" of Algorithm 2);
``unique[c]``: how many distinct features split on the path from the root to c.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

MAX_QUADRATURE = 40  # Gauss-Legendre points; enough for 80 distinct features on one path


@dataclass(frozen=True)
class PathTables:
    depth: np.ndarray  # per node
    prev_same: np.ndarray  # per node
    r_comb: np.ndarray  # per node
    unique: np.ndarray  # per node
    tree_unique: np.ndarray  # per tree: most distinct features on one root-leaf path
    tree_depth: np.ndarray  # per tree
    tree_zero_cover: np.ndarray  # per tree: 1 if some edge has cover ratio 0
    leaf_start: np.ndarray  # per tree, into leaf_nodes (n_trees + 1)
    leaf_nodes: np.ndarray
    leaf_edge_start: np.ndarray  # per leaf (n_leaves + 1), into leaf_edges
    leaf_edges: np.ndarray  # the deepest edge of each distinct feature on the leaf's path
    expected: np.ndarray  # per tree and value column: cover-weighted mean leaf value


@numba.njit(cache=True, nogil=True)
def _node_tables(tree_start, left, parent, feature, cover):
    n = left.size
    depth = np.zeros(n, np.int64)
    prev_same = np.full(n, -1, np.int64)
    r_comb = np.ones(n, np.float64)
    unique = np.zeros(n, np.int64)
    n_trees = tree_start.size - 1
    tree_unique = np.zeros(n_trees, np.int64)
    tree_depth = np.zeros(n_trees, np.int64)
    tree_zero = np.zeros(n_trees, np.int64)
    for t in range(n_trees):
        for c in range(tree_start[t] + 1, tree_start[t + 1]):
            p = parent[c]
            f = feature[p]
            depth[c] = depth[p] + 1
            ratio = cover[c] / cover[p] if cover[p] > 0 else 0.0
            if ratio <= 0.0:
                tree_zero[t] = 1
            e = p
            while e != tree_start[t]:
                if feature[parent[e]] == f:
                    prev_same[c] = e
                    break
                e = parent[e]
            if prev_same[c] >= 0:
                r_comb[c] = ratio * r_comb[prev_same[c]]
                unique[c] = unique[p]
            else:
                r_comb[c] = ratio
                unique[c] = unique[p] + 1
            if left[c] < 0:
                tree_unique[t] = max(tree_unique[t], unique[c])
                tree_depth[t] = max(tree_depth[t], depth[c])
    return depth, prev_same, r_comb, unique, tree_unique, tree_depth, tree_zero


@numba.njit(cache=True, nogil=True)
def _leaf_tables(tree_start, left, parent, feature, unique):
    n_trees = tree_start.size - 1
    n_leaves = 0
    n_edges = 0
    for c in range(left.size):
        if left[c] < 0:
            n_leaves += 1
            n_edges += unique[c]
    leaf_start = np.zeros(n_trees + 1, np.int64)
    leaf_nodes = np.empty(n_leaves, np.int64)
    edge_start = np.zeros(n_leaves + 1, np.int64)
    edges = np.empty(n_edges, np.int64)
    seen = np.empty(64, np.int64)
    j = 0
    k = 0
    for t in range(n_trees):
        for c in range(tree_start[t], tree_start[t + 1]):
            if left[c] >= 0:
                continue
            leaf_nodes[j] = c
            if seen.size < unique[c] + 1:
                seen = np.empty(2 * unique[c] + 2, np.int64)
            n_seen = 0
            e = c
            while e != tree_start[t]:  # walk up: the first edge met per feature is the deepest
                f = feature[parent[e]]
                found = False
                for s in range(n_seen):
                    if seen[s] == f:
                        found = True
                        break
                if not found:
                    seen[n_seen] = f
                    n_seen += 1
                    edges[k] = e
                    k += 1
                e = parent[e]
            j += 1
            edge_start[j] = k
        leaf_start[t + 1] = j
    return leaf_start, leaf_nodes, edge_start, edges


def path_tables(ens) -> PathTables:
    depth, prev_same, r_comb, unique, t_unique, t_depth, t_zero = _node_tables(
        ens.tree_start, ens.left, ens.parent, ens.feature, ens.cover
    )
    leaf_start, leaf_nodes, edge_start, edges = _leaf_tables(
        ens.tree_start, ens.left, ens.parent, ens.feature, unique
    )
    roots = ens.tree_start[:-1]
    tree_of_leaf = np.repeat(np.arange(ens.n_trees), np.diff(leaf_start))
    weight = ens.cover[leaf_nodes] / ens.cover[roots][tree_of_leaf]
    expected = np.zeros((ens.n_trees, ens.values.shape[1]))
    np.add.at(expected, tree_of_leaf, ens.values[leaf_nodes] * weight[:, None])
    return PathTables(
        depth=depth, prev_same=prev_same, r_comb=r_comb, unique=unique,
        tree_unique=t_unique, tree_depth=t_depth, tree_zero_cover=t_zero,
        leaf_start=leaf_start, leaf_nodes=leaf_nodes, leaf_edge_start=edge_start,
        leaf_edges=edges, expected=expected,
    )


def quadrature_table() -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [0, 1]; row m holds the m-point rule."""
    nodes = np.zeros((MAX_QUADRATURE + 1, MAX_QUADRATURE))
    weights = np.zeros((MAX_QUADRATURE + 1, MAX_QUADRATURE))
    for m in range(1, MAX_QUADRATURE + 1):
        x, w = np.polynomial.legendre.leggauss(m)
        nodes[m, :m] = (x + 1.0) / 2.0
        weights[m, :m] = w / 2.0
    return nodes, weights
