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
from numba.core import types
from numba.cpython.unsafe.numbers import trailing_zeros
from numba.extending import intrinsic

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
        ok = np.int64(1)
        if pe >= 0:
            ok = o[pe - start]
        g = np.int64(gl)  # arithmetic, not branches: directions are unpredictable
        o[left[nd] - start] = ok * g
        o[right[nd] - start] = ok * (1 - g)


@numba.njit(cache=True, nogil=True, inline="always")
def _leaf_mask(o, start, edges, e0, d):
    mask = np.int64(0)
    for s in range(d):
        if o[edges[e0 + s] - start] == 0:
            mask |= np.int64(1) << s
    return mask


@intrinsic
def _bits(typingctx, w):
    """The number of bits set in w (one processor instruction, not a loop over the bits)."""
    if not isinstance(w, types.Integer):
        return None

    def codegen(context, builder, signature, args):
        return builder.ctpop(args[0])

    return w(w), codegen


@numba.njit(cache=True, nogil=True, inline="always")
def _mark_follows(o, follows, start, stop, bit):
    """Set ``bit`` in follows[c] for every node c below the root that the row follows to."""
    for c in range(start + 1, stop):
        if o[c - start] == 1:
            follows[c] |= bit


@numba.njit(cache=True, nogil=True, inline="always")
def _group_masks(masks, lf, n_unique, unique_mask, unique_count, row_group):
    """Leaf lf's distinct fail masks (sorted) from its rows' masks, with how many rows have
    each; when row_group has rows, also which group each row fell in. A mask's size is its bit
    count (it holds no bit beyond the leaf's path), so sizes are not stored."""
    order = np.argsort(masks, kind="mergesort")
    k = -1
    for j in range(order.size):
        m = masks[order[j]]
        if k < 0 or m != unique_mask[lf, k]:
            k += 1
            unique_mask[lf, k] = m
            unique_count[lf, k] = 0
        unique_count[lf, k] += 1
        if row_group.shape[0] > 0:
            row_group[lf, order[j]] = k
    n_unique[lf] = k + 1


@numba.njit(cache=True, nogil=True, parallel=True)
def background_masks(Z, route, prev_same, tree_start, tree_use, leaf_start, edge_start, edges,
                     max_nodes, follows, n_unique, unique_mask, unique_count):
    """For up to 64 background rows z_j: bit j of follows[c] is set when z_j follows every
    split on edge c's feature from the root down to c; per leaf, the distinct fail masks of the
    rows (unique_mask[leaf, :n_unique[leaf]]) and how many rows have each (unique_count).
    Rows with one mask share one leaf share."""
    n_bg = Z.shape[0]
    for t in numba.prange(tree_start.size - 1):
        if tree_use[t] == 0:
            continue
        o = np.zeros(max_nodes, np.int64)
        start = tree_start[t]
        n_lf = leaf_start[t + 1] - leaf_start[t]
        masks = np.zeros((n_lf, n_bg), np.int64)
        no_groups = np.zeros((0, 1), np.int8)
        for c in range(start, tree_start[t + 1]):
            follows[c] = 0
        for j in range(n_bg):
            _follow(Z[j], tree_start, t, route, prev_same, o)
            _mark_follows(o, follows, start, tree_start[t + 1], np.int64(1) << j)
            for lf in range(leaf_start[t], leaf_start[t + 1]):
                d = edge_start[lf + 1] - edge_start[lf]
                masks[lf - leaf_start[t], j] = _leaf_mask(o, start, edges, edge_start[lf], d)
        for lf in range(leaf_start[t], leaf_start[t + 1]):
            _group_masks(masks[lf - leaf_start[t]], lf, n_unique, unique_mask, unique_count,
                         no_groups)


@numba.njit(cache=True, nogil=True, parallel=True)
def interventional_masks(X, route, parent, prev_same, values, tree_start, tree_target, tree_use,
                         leaf_start, leaf_of_node, edge_start, edges, max_nodes, max_depth,
                         max_unique, follows, n_unique, unique_mask, unique_count,
                         n_bg, w_pos, w_neg, scale, out):
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
                for u in range(n_unique[lf]):  # background rows grouped by their fail mask
                    fm = unique_mask[lf, u]
                    if fm & fx != 0:
                        continue  # no hybrid of x with these rows reaches the leaf
                    a = _bits(fm)
                    cnt = unique_count[lf, u]
                    w_b += cnt * w_neg[a, b]
                    if a > 0:
                        wp = cnt * w_pos[a, b]
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


# -- the same with one bit per feature (models with at most MAX_BITS features) ---------------
# The fail mask of x then builds up along the walk (a split x does not follow sets its
# feature's bit for the whole subtree), so a leaf costs only the groups of background rows.


@numba.njit(cache=True, nogil=True, parallel=True)
def background_feature_masks(Z, route, parent, prev_same, tree_start, tree_use, leaf_start,
                             edge_start, edges, max_nodes, follows, n_unique, unique_mask,
                             unique_count, row_group):
    """As background_masks, with masks over feature indices instead of path slots; also the
    group of each row (row_group: one byte, where the row's own mask would take eight), for
    leaves few rows reach."""
    feature = route[2]
    n_bg = Z.shape[0]
    for t in numba.prange(tree_start.size - 1):
        if tree_use[t] == 0:
            continue
        o = np.zeros(max_nodes, np.int64)
        start = tree_start[t]
        n_lf = leaf_start[t + 1] - leaf_start[t]
        masks = np.zeros((n_lf, n_bg), np.int64)
        for c in range(start, tree_start[t + 1]):
            follows[c] = 0
        for j in range(n_bg):
            _follow(Z[j], tree_start, t, route, prev_same, o)
            _mark_follows(o, follows, start, tree_start[t + 1], np.int64(1) << j)
            for lf in range(leaf_start[t], leaf_start[t + 1]):
                mk = np.int64(0)
                for s in range(edge_start[lf], edge_start[lf + 1]):
                    if o[edges[s] - start] == 0:
                        mk |= np.int64(1) << feature[parent[edges[s]]]
                masks[lf - leaf_start[t], j] = mk
        for lf in range(leaf_start[t], leaf_start[t + 1]):
            _group_masks(masks[lf - leaf_start[t]], lf, n_unique, unique_mask, unique_count,
                         row_group)


@numba.njit(cache=True, nogil=True, parallel=True)
def interventional_feature_masks(X, route, prev_same, values, tree_start, tree_target,
                                 tree_use, leaf_of_node, max_nodes, max_depth, follows,
                                 n_unique, unique_mask, unique_count, row_group, n_bg, w_pos,
                                 w_neg, scale, out):
    """As interventional_masks, with x's fail mask carried down the walk as feature bits."""
    left, right, feature = route[0], route[1], route[2]
    n_out = out.shape[2]
    everyone = np.int64(-1) if n_bg == 64 else (np.int64(1) << n_bg) - 1
    for i in numba.prange(X.shape[0]):
        x = X[i]
        o = np.zeros(max_nodes, np.int64)
        st_node = np.zeros(2 * max_depth + 4, np.int64)
        st_alive = np.zeros(2 * max_depth + 4, np.int64)
        st_fail = np.zeros(2 * max_depth + 4, np.int64)
        for t in range(tree_start.size - 1):
            if tree_use[t] == 0:
                continue
            start = tree_start[t]
            target = tree_target[t]
            kv = n_out if target < 0 else 1
            _follow(x, tree_start, t, route, prev_same, o)
            st_node[0] = start
            st_alive[0] = everyone
            st_fail[0] = 0
            top = 1
            while top > 0:
                top -= 1
                nd = st_node[top]
                alive = st_alive[top]
                fx = st_fail[top]
                if left[nd] >= 0:
                    bit = np.int64(1) << feature[nd]
                    for side in range(2):
                        c = left[nd] if side == 0 else right[nd]
                        if o[c - start] == 1:
                            w = alive
                            fc = fx
                        else:
                            w = alive & follows[c]
                            fc = fx | bit
                        if w != 0:
                            st_node[top] = c
                            st_alive[top] = w
                            st_fail[top] = fc
                            top += 1
                    continue
                lf = leaf_of_node[nd]
                b = _bits(fx)
                n_alive = _bits(alive)
                w_b = 0.0
                if n_alive <= n_unique[lf]:
                    # few rows reach the leaf: take them one by one (all compatible)
                    while alive != 0:
                        j = trailing_zeros(alive)
                        alive &= alive - 1
                        fm = unique_mask[lf, row_group[lf, j]]
                        a = _bits(fm)
                        w_b += w_neg[a, b]
                        if a > 0:
                            wp = w_pos[a, b] * scale
                            while fm != 0:
                                f = trailing_zeros(fm)
                                fm &= fm - 1
                                for k in range(kv):
                                    out[i, f, target if target >= 0 else k] += wp * values[nd, k]
                else:
                    # many rows: take them by groups with one fail mask
                    for u in range(n_unique[lf]):
                        fm = unique_mask[lf, u]
                        if fm & fx != 0:
                            continue
                        a = _bits(fm)
                        cnt = unique_count[lf, u]
                        w_b += cnt * w_neg[a, b]
                        if a > 0:
                            wp = cnt * w_pos[a, b] * scale
                            while fm != 0:
                                f = trailing_zeros(fm)
                                fm &= fm - 1
                                for k in range(kv):
                                    out[i, f, target if target >= 0 else k] += wp * values[nd, k]
                if w_b != 0.0:
                    w_b *= scale
                    while fx != 0:
                        f = trailing_zeros(fx)
                        fx &= fx - 1
                        for k in range(kv):
                            out[i, f, target if target >= 0 else k] -= w_b * values[nd, k]
