"""Interventional SHAP values against a background sample.

For one row x, one background row z and one tree, the model with the features in S taken
from x and the rest from z is a game on the features where x and z part ways; a leaf reached
with a features taken from x (set A) and b from z (set B) gives each feature in A the share
v (a-1)! b! / (a+b)! and each feature in B minus v a! (b-1)! / (a+b)! (Lundberg et al. 2020,
Methods, "Interventional Tree SHAP"; the Shapley value of the game with one winning coalition
pattern). One depth-first walk visits every node either path can reach and adds the shares of
each leaf to the features assigned on its path. The background average is the SHAP value of the interventional
(marginal) expectation E_z f(x_S, z_notS) (Janzing, Minorics and Bloebaum 2020).
"""

from __future__ import annotations

import numba
import numpy as np

from workbench.engine.treeshap._route import goes_left


@numba.njit(cache=True, nogil=True)
def _tree(root, x, z, route, values, target, n_out, state, w_pos, w_neg, stack, assigned, phi):
    """Depth-first walk with an explicit stack (numba cannot cache recursive functions safely).

    stack rows: node, level, n from x, n from z, feature assigned on entering (-1 none), side.
    assigned[level] holds the feature assigned on the edge into that level, so that the
    state of every feature on the current path can be undone when the walk backs up.
    """
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    kv = n_out if target < 0 else 1
    stack[0, 0] = root
    stack[0, 1] = 0
    stack[0, 2] = 0
    stack[0, 3] = 0
    stack[0, 4] = -1
    stack[0, 5] = 0
    top = 1
    depth = 0  # levels of `assigned` currently valid
    while top > 0:
        top -= 1
        n = stack[top, 0]
        lv = stack[top, 1]
        nx = stack[top, 2]
        nz = stack[top, 3]
        while depth > lv:  # back up: undo assignments made below the new frame's level
            depth -= 1
            if assigned[depth, 0] >= 0:
                state[assigned[depth, 0]] = 0
        assigned[lv, 0] = stack[top, 4]
        assigned[lv, 1] = stack[top, 5]
        if stack[top, 4] >= 0:
            state[stack[top, 4]] = stack[top, 5]
        depth = lv + 1
        if left[n] < 0:
            wp = w_pos[nx, nz]
            wn = w_neg[nx, nz]
            for d in range(depth):
                f = assigned[d, 0]
                if f < 0:
                    continue
                w = wp if assigned[d, 1] == 1 else -wn
                for k in range(kv):
                    phi[f, target if target >= 0 else k] += values[n, k] * w
            continue
        f = feature[n]
        gx = goes_left(n, x[f], threshold, missing_left, cat_index, cat_left, cat_known)
        gz = goes_left(n, z[f], threshold, missing_left, cat_index, cat_left, cat_known)
        cx = left[n] if gx else right[n]
        cz = left[n] if gz else right[n]
        if cx == cz or state[f] != 0:
            stack[top, 0] = cx if (cx == cz or state[f] == 1) else cz
            stack[top, 1] = lv + 1
            stack[top, 2] = nx
            stack[top, 3] = nz
            stack[top, 4] = -1
            stack[top, 5] = 0
            top += 1
            continue
        for side in (2, 1):
            stack[top, 0] = cx if side == 1 else cz
            stack[top, 1] = lv + 1
            stack[top, 2] = nx + (1 if side == 1 else 0)
            stack[top, 3] = nz + (1 if side == 2 else 0)
            stack[top, 4] = f
            stack[top, 5] = side
            top += 1
    while depth > 0:
        depth -= 1
        if assigned[depth, 0] >= 0:
            state[assigned[depth, 0]] = 0


@numba.njit(cache=True, nogil=True, parallel=True)
def interventional_shap(X, Z, route, values, tree_start, tree_target, tree_use, max_depth, w_pos,
                        w_neg, scale, out):
    """out[i] += scale * mean over background rows z of the interventional SHAP values of row i,
    for the trees with tree_use[t] == 1."""
    n = X.shape[0]
    n_out = out.shape[2]
    n_feat = out.shape[1]
    n_trees = tree_start.size - 1
    inv = 1.0 / Z.shape[0]
    for i in numba.prange(n):
        state = np.zeros(n_feat, np.int64)
        stack = np.zeros((2 * max_depth + 4, 6), np.int64)
        assigned = np.full((max_depth + 2, 2), -1, np.int64)
        acc = np.zeros((n_feat, n_out))
        x = X[i]
        for j in range(Z.shape[0]):
            z = Z[j]
            for t in range(n_trees):
                if tree_use[t] == 0:
                    continue
                _tree(tree_start[t], x, z, route, values, tree_target[t], n_out, state,
                      w_pos, w_neg, stack, assigned, acc)
        for f in range(n_feat):
            for k in range(n_out):
                out[i, f, k] += acc[f, k] * inv * scale


def share_tables(max_unique: int) -> tuple[np.ndarray, np.ndarray]:
    """w_pos[a, b] = (a-1)! b! / (a+b)! (0 if a = 0); w_neg[a, b] = a! (b-1)! / (a+b)!."""
    from scipy.special import beta

    size = max_unique + 2
    a = np.arange(size)[:, None].astype(float)
    b = np.arange(size)[None, :].astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        w_pos = np.where(a > 0, beta(np.maximum(a, 1), b + 1), 0.0)
        w_neg = np.where(b > 0, beta(a + 1, np.maximum(b, 1)), 0.0)
    return np.ascontiguousarray(w_pos), np.ascontiguousarray(w_neg)
