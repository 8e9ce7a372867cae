"""Path-dependent SHAP values, two exact algorithms chosen per tree.

``linear``: the summary-polynomial idea of Linear TreeShap (Yu, Xu, Bifet and Read 2022,
arXiv 2209.08192): one sweep down the tree builds, for every node, the polynomial
prod_j (r_j (1 - t) + o_j t) over the distinct features j on its root path (r_j the cover
ratio, o_j whether x follows the path); one sweep up sums leaf value times polynomial. The
Shapley weight |S|! (d - |S| - 1)! / d! is the Beta integral of t^|S| (1 - t)^(d - |S| - 1) on
[0, 1], so feature i's share of a leaf is v (o_i - r_i) * integral of the polynomial divided by
its i factor. We hold each polynomial by its values at Gauss-Legendre nodes on [0, 1]
(exact for degree <= 2m - 1), instead of the coefficient basis whose instability for deep trees
the Linear TreeShap authors report: every value and weight here is positive, so nothing cancels.
A repeated feature's earlier factor is divided out and its earlier share subtracted
(telescoping), as Linear TreeShap does. Cost per row and tree: O(n_nodes * m).

``classic``: Algorithm 2 of Lundberg et al. 2020 (Nature Machine Intelligence 2, "From local
explanations to global understanding with explainable AI for trees"), EXTEND / UNWIND on the
path of unique features, O(n_leaves * depth^2). Used where an edge carries zero cover (the
linear sweep would divide by zero there) or a path has more distinct features than the
quadrature table covers.
"""

from __future__ import annotations

import numba
import numpy as np

from workbench.engine.treeshap._route import goes_left

LINEAR = 0
CLASSIC = 1


@numba.njit(cache=True, nogil=True)
def _linear_tree(x, t, route, parent, prev_same, r_comb, values, tree_start, target, n_out,
                 tq, wq, m, phi, o, Fv, G, H):
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    start = tree_start[t]
    end = tree_start[t + 1]
    kv = n_out if target < 0 else 1
    for q in range(m):
        G[0, q] = 1.0
    o[0] = 1
    for n in range(start, end):
        ln = n - start
        if left[n] < 0:
            for q in range(m):
                g = G[ln, q]
                for k in range(kv):
                    H[ln, q, k] = g * values[n, k]
            continue
        for q in range(m):
            for k in range(kv):
                H[ln, q, k] = 0.0
        gl = goes_left(n, x[feature[n]], threshold, missing_left, cat_index, cat_left, cat_known)
        for side in range(2):
            c = left[n] if side == 0 else right[n]
            sat = gl if side == 0 else not gl
            lc = c - start
            pe = prev_same[c]
            if pe >= 0:
                sat = sat and o[pe - start] == 1
            o[lc] = 1 if sat else 0
            r = r_comb[c]
            for q in range(m):
                f = r * (1.0 - tq[q])
                if sat:
                    f += tq[q]
                Fv[lc, q] = f
                if pe >= 0:
                    G[lc, q] = G[ln, q] * f / Fv[pe - start, q]
                else:
                    G[lc, q] = G[ln, q] * f
    for c in range(end - 1, start, -1):
        lc = c - start
        p = parent[c]
        lp = p - start
        f_idx = feature[p]
        a = o[lc] - r_comb[c]
        pe = prev_same[c]
        for k in range(kv):
            s = 0.0
            for q in range(m):
                s += wq[q] * H[lc, q, k] / Fv[lc, q]
            share = a * s
            if pe >= 0:
                s2 = 0.0
                lpe = pe - start
                for q in range(m):
                    s2 += wq[q] * H[lc, q, k] / Fv[lpe, q]
                share -= (o[lpe] - r_comb[pe]) * s2
            phi[f_idx, target if target >= 0 else k] += share
            for q in range(m):
                H[lp, q, k] += H[lc, q, k]


@numba.njit(cache=True, nogil=True, inline="always")
def _extend(pf, pz, po, pw, lv, ud, zero, one, feat):
    pf[lv, ud] = feat
    pz[lv, ud] = zero
    po[lv, ud] = one
    pw[lv, ud] = 1.0 if ud == 0 else 0.0
    for i in range(ud - 1, -1, -1):
        pw[lv, i + 1] += one * pw[lv, i] * (i + 1) / (ud + 1)
        pw[lv, i] = zero * pw[lv, i] * (ud - i) / (ud + 1)


@numba.njit(cache=True, nogil=True, inline="always")
def _unwind(pf, pz, po, pw, lv, ud, idx):
    one = po[lv, idx]
    zero = pz[lv, idx]
    nxt = pw[lv, ud]
    for i in range(ud - 1, -1, -1):
        if one != 0.0:
            tmp = pw[lv, i]
            pw[lv, i] = nxt * (ud + 1) / ((i + 1) * one)
            nxt = tmp - pw[lv, i] * zero * (ud - i) / (ud + 1)
        else:
            pw[lv, i] = pw[lv, i] * (ud + 1) / (zero * (ud - i))
    for i in range(idx, ud):
        pf[lv, i] = pf[lv, i + 1]
        pz[lv, i] = pz[lv, i + 1]
        po[lv, i] = po[lv, i + 1]


@numba.njit(cache=True, nogil=True, inline="always")
def _unwound_sum(pz, po, pw, lv, ud, idx):
    one = po[lv, idx]
    zero = pz[lv, idx]
    nxt = pw[lv, ud]
    total = 0.0
    for i in range(ud - 1, -1, -1):
        if one != 0.0:
            tmp = nxt * (ud + 1) / ((i + 1) * one)
            total += tmp
            nxt = pw[lv, i] - tmp * zero * ((ud - i) / (ud + 1))
        elif zero != 0.0:
            total += (pw[lv, i] / zero) / ((ud - i) / (ud + 1))
    return total


@numba.njit(cache=True, nogil=True)
def _classic_tree(root, x, route, cover, values, target, n_out, phi, pf, pz, po, pw, stack):
    """Algorithm 2 with an explicit stack (numba cannot cache recursive functions safely).

    Depth-first order keeps the parent's path intact at level lv - 1 while each child,
    popped later, copies it into level lv.
    """
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    kv = n_out if target < 0 else 1
    fstack = stack[1]
    istack = stack[0]
    top = 0
    istack[0, 0] = root
    istack[0, 1] = 0  # level
    istack[0, 2] = 0  # unique depth
    istack[0, 3] = -1  # feature of the incoming split
    fstack[0, 0] = 1.0  # zero fraction
    fstack[0, 1] = 1.0  # one fraction
    top = 1
    while top > 0:
        top -= 1
        n = istack[top, 0]
        lv = istack[top, 1]
        ud = istack[top, 2]
        feat = istack[top, 3]
        zero = fstack[top, 0]
        one = fstack[top, 1]
        if lv > 0:
            for i in range(ud):
                pf[lv, i] = pf[lv - 1, i]
                pz[lv, i] = pz[lv - 1, i]
                po[lv, i] = po[lv - 1, i]
                pw[lv, i] = pw[lv - 1, i]
        _extend(pf, pz, po, pw, lv, ud, zero, one, feat)
        if left[n] < 0:
            for i in range(1, ud + 1):
                scale = _unwound_sum(pz, po, pw, lv, ud, i) * (po[lv, i] - pz[lv, i])
                for k in range(kv):
                    phi[pf[lv, i], target if target >= 0 else k] += scale * values[n, k]
            continue
        f = feature[n]
        if goes_left(n, x[f], threshold, missing_left, cat_index, cat_left, cat_known):
            hot, cold = left[n], right[n]
        else:
            hot, cold = right[n], left[n]
        w = cover[n]
        hz = cover[hot] / w if w > 0 else 0.0
        cz = cover[cold] / w if w > 0 else 0.0
        iz = 1.0
        io = 1.0
        idx = -1
        for i in range(ud + 1):
            if pf[lv, i] == f:
                idx = i
                break
        if idx >= 0:
            iz = pz[lv, idx]
            io = po[lv, idx]
            _unwind(pf, pz, po, pw, lv, ud, idx)
            ud -= 1
        for side in range(2):  # cold first so that hot is processed first
            istack[top, 0] = cold if side == 0 else hot
            istack[top, 1] = lv + 1
            istack[top, 2] = ud + 1
            istack[top, 3] = f
            fstack[top, 0] = (cz if side == 0 else hz) * iz
            fstack[top, 1] = 0.0 if side == 0 else io
            top += 1


@numba.njit(cache=True, nogil=True, parallel=True)
def path_shap(X, rows_per_block, route, parent, cover, values, tree_start, tree_target,
              tree_algo, tree_m, prev_same, r_comb, max_nodes, max_depth, q_nodes, q_weights,
              out):
    """out[i] (n_features, n_outputs) += path-dependent SHAP values of row i, all trees."""
    n = X.shape[0]
    n_out = out.shape[2]
    n_trees = tree_start.size - 1
    m_max = max(1, q_nodes.shape[1])
    n_blocks = (n + rows_per_block - 1) // rows_per_block
    for b in numba.prange(n_blocks):
        o = np.zeros(max_nodes, np.int64)
        Fv = np.ones((max_nodes, m_max))
        G = np.ones((max_nodes, m_max))
        H = np.zeros((max_nodes, m_max, n_out))
        levels = max_depth + 2
        pf = np.zeros((levels, levels), np.int64)
        pz = np.zeros((levels, levels))
        po = np.zeros((levels, levels))
        pw = np.zeros((levels, levels))
        stack = (np.zeros((2 * levels + 2, 4), np.int64), np.zeros((2 * levels + 2, 2)))
        for i in range(b * rows_per_block, min(n, (b + 1) * rows_per_block)):
            x = X[i]
            phi = out[i]
            for t in range(n_trees):
                if tree_algo[t] == LINEAR:
                    m = tree_m[t]
                    _linear_tree(x, t, route, parent, prev_same, r_comb, values, tree_start,
                                 tree_target[t], n_out, q_nodes[m], q_weights[m], m, phi,
                                 o, Fv, G, H)
                else:
                    _classic_tree(tree_start[t], x, route, cover, values, tree_target[t],
                                  n_out, phi, pf, pz, po, pw, stack)
