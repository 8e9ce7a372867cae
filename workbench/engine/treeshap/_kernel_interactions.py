"""Path-dependent SHAP interaction values (Lundberg et al. 2020, Methods, "SHAP interaction
values"): for i != j, Phi_ij = (phi_i with j always known - phi_i with j never known) / 2, and
Phi_ii = phi_i - sum_{j != i} Phi_ij, so each row of the matrix sums to the SHAP value.

With the Beta-integral form of the Shapley weights (see ``_kernel_path``), a leaf with value v
and distinct path features k (cover ratio r_k, path followed o_k, factor
F_k(t) = r_k (1 - t) + o_k t, product g = prod_k F_k) gives
    phi_i   += v (o_i - r_i) * integral_0^1 g / F_i dt
    Phi_ij  += v (o_i - r_i) (o_j - r_j) / 2 * integral_0^1 g / (F_i F_j) dt,
because fixing j known or unknown multiplies the leaf's reach by o_j or r_j and removes j from
the players. Both integrands are polynomials of degree < d, integrated exactly by an m-point
Gauss-Legendre rule (2m - 1 >= d - 1). Cost per row and tree: O(n_leaves * d^2 * m).
"""

from __future__ import annotations

import numba
import numpy as np

from workbench.engine.treeshap._route import goes_left


@numba.njit(cache=True, nogil=True, parallel=True)
def interaction_shap(X, route, parent, values, tree_start, tree_target, tree_m, r_comb,
                     prev_same, leaf_start, leaf_nodes, edge_start, edges, max_nodes,
                     max_unique, q_nodes, q_weights, out):
    """out[i] (n_features, n_features, n_outputs) = interaction values of row i."""
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    n = X.shape[0]
    n_feat = out.shape[1]
    n_out = out.shape[3]
    n_trees = tree_start.size - 1
    m_max = q_nodes.shape[1]
    for i in numba.prange(n):
        x = X[i]
        o = np.zeros(max_nodes, np.int64)
        Fk = np.ones((max_unique + 1, m_max))
        g = np.ones(m_max)
        a = np.zeros(max_unique + 1)
        fk = np.zeros(max_unique + 1, np.int64)
        phi = np.zeros((n_feat, n_out))
        res = out[i]
        for t in range(n_trees):
            start = tree_start[t]
            target = tree_target[t]
            kv = n_out if target < 0 else 1
            m = tree_m[t]
            tq = q_nodes[m]
            wq = q_weights[m]
            o[0] = 1
            for nd in range(start, tree_start[t + 1]):
                if left[nd] < 0:
                    continue
                gl = goes_left(nd, x[feature[nd]], threshold, missing_left, cat_index,
                               cat_left, cat_known)
                for side in range(2):
                    c = left[nd] if side == 0 else right[nd]
                    sat = gl if side == 0 else not gl
                    pe = prev_same[c]
                    if pe >= 0:
                        sat = sat and o[pe - start] == 1
                    o[c - start] = 1 if sat else 0
            for j in range(leaf_start[t], leaf_start[t + 1]):
                leaf = leaf_nodes[j]
                d = edge_start[j + 1] - edge_start[j]
                for q in range(m):
                    g[q] = 1.0
                for s in range(d):
                    e = edges[edge_start[j] + s]
                    fk[s] = feature[parent[e]]
                    oe = o[e - start]
                    re = r_comb[e]
                    a[s] = oe - re
                    for q in range(m):
                        f = re * (1.0 - tq[q]) + oe * tq[q]
                        Fk[s, q] = f
                        g[q] *= f
                for s in range(d):
                    if a[s] == 0.0:
                        continue
                    single = 0.0
                    for q in range(m):
                        single += wq[q] * g[q] / Fk[s, q]
                    for k in range(kv):
                        phi[fk[s], target if target >= 0 else k] += (
                            values[leaf, k] * a[s] * single)
                    for u in range(s + 1, d):
                        if a[u] == 0.0:
                            continue
                        pair = 0.0
                        for q in range(m):
                            pair += wq[q] * g[q] / (Fk[s, q] * Fk[u, q])
                        half = 0.5 * a[s] * a[u] * pair
                        for k in range(kv):
                            kk = target if target >= 0 else k
                            val = values[leaf, k] * half
                            res[fk[s], fk[u], kk] += val
                            res[fk[u], fk[s], kk] += val
        for f in range(n_feat):
            for k in range(n_out):
                off = 0.0
                for u in range(n_feat):
                    if u != f:
                        off += res[f, u, k]
                res[f, f, k] = phi[f, k] - off
