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


@numba.njit(cache=True, nogil=True, parallel=True)
def linear_tables(tree_start, t0, t1, parent, prev_same, r_comb, tree_m, tree_algo, q_nodes,
                  q_weights):
    """Row-independent factors of the linear sweep, per edge c and per state of (o_prev, o_c).

    With A_o(t) = r_comb (1 - t) + o t (the edge's factor when the path is followed, o = 1, or
    not, o = 0) and the previous same-feature edge p (its factor divided out):
      D[c, s, q] = A_oc(t_q) / A_op(t_q)                       (down sweep multiplier)
      C[c, s, q] = w_q [(o_c - r_c) / A_oc(t_q) - (o_p - r_p) / A_op(t_q)]  (share weights)
    for s = 0: (o_p, o_c) = (1, 1); s = 1: (1, 0); s = 2: (0, 0). (0, 1) cannot happen.
    Only for trees t0 <= t < t1; row c of the tables is node tree_start[t0] + c.
    """
    node0 = tree_start[t0]
    n = tree_start[t1] - node0
    m_max = q_nodes.shape[1]
    D = np.zeros((n, 3, m_max))
    C = np.zeros((n, 3, m_max))
    for t in numba.prange(t0, t1):
        if tree_algo[t] != LINEAR:
            continue
        m = tree_m[t]
        tq = q_nodes[m]
        wq = q_weights[m]
        for c in range(tree_start[t] + 1, tree_start[t + 1]):
            pe = prev_same[c]
            rc = r_comb[c]
            rp = r_comb[pe] if pe >= 0 else 1.0
            for s in range(3):
                oc = 1.0 if s == 0 else 0.0
                op = 0.0 if s == 2 else 1.0
                for q in range(m):
                    ac = rc * (1.0 - tq[q]) + oc * tq[q]
                    if pe >= 0:
                        ap = rp * (1.0 - tq[q]) + op * tq[q]
                        D[c - node0, s, q] = ac / ap
                        C[c - node0, s, q] = wq[q] * ((oc - rc) / ac - (op - rp) / ap)
                    else:
                        D[c - node0, s, q] = ac
                        C[c - node0, s, q] = wq[q] * (oc - rc) / ac
    return D, C


@numba.njit(cache=True, nogil=True, inline="always")
def _pick(s, a0, a1, a2):
    return a0 if s == 0 else (a1 if s == 1 else a2)


@numba.njit(cache=True, nogil=True)
def _linear_block(X, r0, R, t, route, parent, prev_same, values, tree_start, target, n_out, m,
                  D, C, node0, acc, state, G, H, sh):
    """One tree, R rows at once (the row index innermost, so the arithmetic vectorises).

    acc[f, k, r] += share of feature f in output k for row r0 + r.
    """
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    start = tree_start[t]
    end = tree_start[t + 1]
    kv = n_out if target < 0 else 1
    for q in range(m):
        for r in range(R):
            G[0, q, r] = 1.0
    # down: G[c] = product over the distinct path features of their factor at the nodes t_q
    for n in range(start, end):
        if left[n] < 0:
            continue
        ln = n - start
        for q in range(m):
            for k in range(kv):
                for r in range(R):
                    H[ln, q, k, r] = 0.0
        f = feature[n]
        cl = left[n]
        cr = right[n]
        lcl = cl - start
        lcr = cr - start
        pe = prev_same[cl]  # the same for both children
        for r in range(R):
            # arithmetic, not branches: the direction is unpredictable from row to row
            g = np.int64(goes_left(n, X[r0 + r, f], threshold, missing_left, cat_index,
                                   cat_left, cat_known))
            off = np.int64(0)
            if pe >= 0:
                off = np.int64(state[pe - start, r] != 0)  # f's earlier split not followed
            state[lcl, r] = 2 * off + (1 - off) * (1 - g)
            state[lcr, r] = 2 * off + (1 - off) * g
        for q in range(m):
            dl0 = D[cl - node0, 0, q]
            dl1 = D[cl - node0, 1, q]
            dl2 = D[cl - node0, 2, q]
            dr0 = D[cr - node0, 0, q]
            dr1 = D[cr - node0, 1, q]
            dr2 = D[cr - node0, 2, q]
            for r in range(R):
                g = G[ln, q, r]
                G[lcl, q, r] = g * _pick(state[lcl, r], dl0, dl1, dl2)
                G[lcr, q, r] = g * _pick(state[lcr, r], dr0, dr1, dr2)
    # up: H[n] = sum over the leaves below n of value * G[leaf]; each edge adds its share
    for c in range(end - 1, start, -1):
        lc = c - start
        lp = parent[c] - start
        f = feature[parent[c]]
        if left[c] < 0:
            for r in range(R):
                sh[r] = 0.0
            for q in range(m):
                c0 = C[c - node0, 0, q]
                c1 = C[c - node0, 1, q]
                c2 = C[c - node0, 2, q]
                for r in range(R):
                    sh[r] += G[lc, q, r] * _pick(state[lc, r], c0, c1, c2)
            for k in range(kv):
                v = values[c, k]
                kk = target if target >= 0 else k
                for r in range(R):
                    acc[f, kk, r] += v * sh[r]
                for q in range(m):
                    for r in range(R):
                        H[lp, q, k, r] += v * G[lc, q, r]
        else:
            for k in range(kv):
                kk = target if target >= 0 else k
                for r in range(R):
                    sh[r] = 0.0
                for q in range(m):
                    c0 = C[c - node0, 0, q]
                    c1 = C[c - node0, 1, q]
                    c2 = C[c - node0, 2, q]
                    for r in range(R):
                        h = H[lc, q, k, r]
                        sh[r] += h * _pick(state[lc, r], c0, c1, c2)
                        H[lp, q, k, r] += h
                for r in range(R):
                    acc[f, kk, r] += sh[r]


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
              tree_algo, tree_m, prev_same, t0, t1, D, C, max_nodes, max_depth, out):
    """out[i] (n_features, n_outputs) += path-dependent SHAP values of row i, trees t0..t1-1
    (D, C: their linear_tables)."""
    n = X.shape[0]
    n_feat = out.shape[1]
    n_out = out.shape[2]
    m_max = max(1, D.shape[2])
    node0 = tree_start[t0]
    B = rows_per_block
    n_blocks = (n + B - 1) // B
    for b in numba.prange(n_blocks):
        r0 = b * B
        R = min(n, r0 + B) - r0
        state = np.zeros((max_nodes, B), np.int64)
        G = np.ones((max_nodes, m_max, B))
        H = np.zeros((max_nodes, m_max, n_out, B))
        sh = np.zeros(B)
        acc = np.zeros((n_feat, n_out, B))
        levels = max_depth + 2
        pf = np.zeros((levels, levels), np.int64)
        pz = np.zeros((levels, levels))
        po = np.zeros((levels, levels))
        pw = np.zeros((levels, levels))
        stack = (np.zeros((2 * levels + 2, 4), np.int64), np.zeros((2 * levels + 2, 2)))
        phi = np.zeros((n_feat, n_out))
        for t in range(t0, t1):
            if tree_algo[t] == LINEAR:
                _linear_block(X, r0, R, t, route, parent, prev_same, values, tree_start,
                              tree_target[t], n_out, tree_m[t], D, C, node0, acc, state, G, H,
                              sh)
            else:
                for r in range(R):
                    phi[:, :] = 0.0
                    _classic_tree(tree_start[t], X[r0 + r], route, cover, values,
                                  tree_target[t], n_out, phi, pf, pz, po, pw, stack)
                    for f in range(n_feat):
                        for k in range(n_out):
                            acc[f, k, r] += phi[f, k]
        for r in range(R):
            for f in range(n_feat):
                for k in range(n_out):
                    out[r0 + r, f, k] += acc[f, k, r]
