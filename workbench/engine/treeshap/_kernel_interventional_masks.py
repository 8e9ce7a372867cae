"""Interventional SHAP values by path masks: the leaf-wise form of the interventional game.

For a row x, a background row z and a leaf l, call x's (z's) fail mask the set of distinct
features on l's path whose splits x (z) does not all follow. A hybrid (x_S, z_rest) reaches l
exactly when the masks are disjoint; then the features in z's mask must come from x (set A) and
those in x's mask from z (set B), the others do not matter, and the leaf gives each feature in A
the share v (|A|-1)! |B|! / (|A|+|B|)! and each feature in B minus v |A|! (|B|-1)! / (|A|+|B|)!
(Lundberg et al. 2020, Methods, "Interventional Tree SHAP"; the same shares as the recursion in
``_kernel_interventional``). The background masks do not depend on x and are computed once per
64 background rows; per row a walk down the tree carries those rows as bits of one word and
only visits nodes some hybrid can reach. Used for trees with at most MAX_BITS distinct features on a path.
"""

from __future__ import annotations

import numba
import numpy as np
from numba.cpython.unsafe.numbers import trailing_zeros

from workbench.engine.treeshap._route import goes_left

MAX_BITS = 62  # distinct features on a path held in one int64 mask
BACKGROUND_WORD = 64  # background rows per bit word


@numba.njit(cache=True, nogil=True, inline="always")
def _follow(x, tree_start, t, route, prev_same, o):
    """o[c - start] = 1 when x follows every split on c's feature from the root down to c."""
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    start = tree_start[t]
    o[0] = 1
    for nd in range(start, tree_start[t + 1]):
        if left[nd] < 0:
            continue
        gl = goes_left(nd, x[feature[nd]], threshold, missing_left, cat_index, cat_left,
                       cat_known)
        pe = prev_same[left[nd]]
        ok = pe < 0 or o[pe - start] == 1
        o[left[nd] - start] = 1 if (ok and gl) else 0
        o[right[nd] - start] = 1 if (ok and not gl) else 0


@numba.njit(cache=True, nogil=True, inline="always")
def _leaf_mask(o, start, edges, e0, d):
    mask = np.int64(0)
    for s in range(d):
        if o[edges[e0 + s] - start] == 0:
            mask |= np.int64(1) << s
    return mask


@numba.njit(cache=True, nogil=True)
def background_masks(Z, route, prev_same, tree_start, tree_use, leaf_start, edge_start, edges,
                     max_nodes, masks, counts, follows):
    """For up to 64 background rows z_j: masks[leaf, j] is z_j's fail mask on the leaf's path,
    counts[leaf, j] its size, and bit j of follows[c] is set when z_j follows every split on
    edge c's feature from the root down to c."""
    o = np.zeros(max_nodes, np.int64)
    for t in range(tree_start.size - 1):
        if tree_use[t] == 0:
            continue
        start = tree_start[t]
        for c in range(start, tree_start[t + 1]):
            follows[c] = 0
        for j in range(Z.shape[0]):
            _follow(Z[j], tree_start, t, route, prev_same, o)
            bit = np.int64(1) << j
            for c in range(start + 1, tree_start[t + 1]):
                if o[c - start] == 1:
                    follows[c] |= bit
            for lf in range(leaf_start[t], leaf_start[t + 1]):
                d = edge_start[lf + 1] - edge_start[lf]
                mk = _leaf_mask(o, start, edges, edge_start[lf], d)
                masks[lf, j] = mk
                cnt = 0
                for s in range(d):
                    cnt += (mk >> s) & 1
                counts[lf, j] = cnt


@numba.njit(cache=True, nogil=True, parallel=True)
def interventional_masks(X, route, parent, prev_same, values, tree_start, tree_target, tree_use,
                         leaf_start, leaf_of_node, edge_start, edges, max_nodes, max_depth,
                         max_unique, masks, counts, follows, n_bg, w_pos, w_neg, scale, out):
    """out[i] += scale * sum over (up to 64) background rows of the interventional shares of
    row i. A depth-first walk carries the set of background rows (one bit each) whose hybrids
    with x can still reach the node: a row drops out at an edge that neither x nor it follows
    (on that edge's feature, all the way down), and a subtree no row can reach is skipped."""
    left, right, feature = route[0], route[1], route[2]
    n_out = out.shape[2]
    everyone = np.int64(-1) if n_bg == 64 else (np.int64(1) << n_bg) - 1
    for i in numba.prange(X.shape[0]):
        x = X[i]
        o = np.zeros(max_nodes, np.int64)
        acc = np.zeros(max_unique + 1)
        st_node = np.zeros(2 * max_depth + 4, np.int64)
        st_alive = np.zeros(2 * max_depth + 4, np.int64)
        for t in range(tree_start.size - 1):
            if tree_use[t] == 0:
                continue
            start = tree_start[t]
            target = tree_target[t]
            kv = n_out if target < 0 else 1
            _follow(x, tree_start, t, route, prev_same, o)
            st_node[0] = start
            st_alive[0] = everyone
            top = 1
            while top > 0:
                top -= 1
                nd = st_node[top]
                alive = st_alive[top]
                if left[nd] >= 0:
                    for side in range(2):
                        c = left[nd] if side == 0 else right[nd]
                        w = alive if o[c - start] == 1 else alive & follows[c]
                        if w != 0:
                            st_node[top] = c
                            st_alive[top] = w
                            top += 1
                    continue
                lf = leaf_of_node[nd]
                e0 = edge_start[lf]
                d = edge_start[lf + 1] - e0
                fx = _leaf_mask(o, start, edges, e0, d)
                b = 0
                for s in range(d):
                    b += (fx >> s) & 1
                    acc[s] = 0.0
                w_b = 0.0
                while alive != 0:
                    j = trailing_zeros(alive)
                    alive &= alive - 1
                    a = counts[lf, j]
                    w_b += w_neg[a, b]
                    if a > 0:
                        wp = w_pos[a, b]
                        fm = masks[lf, j]
                        while fm != 0:
                            acc[trailing_zeros(fm)] += wp
                            fm &= fm - 1
                for s in range(d):
                    share = acc[s]
                    if (fx >> s) & 1:
                        share -= w_b
                    if share == 0.0:
                        continue
                    f = feature[parent[edges[e0 + s]]]
                    for k in range(kv):
                        out[i, f, target if target >= 0 else k] += scale * share * values[nd, k]
