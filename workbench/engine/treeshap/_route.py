"""Which child a value goes to: numeric threshold, NaN direction, HistGradientBoosting bitsets.

Mirrors scikit-learn's own prediction rules (``sklearn/tree/_tree.pyx`` ``apply`` and
``sklearn/ensemble/_hist_gradient_boosting/_predictor.pyx``): NaN follows ``missing_left``;
a categorical value goes left when its bit is set in the split's left bitset, right when it is
a known category, and otherwise (negative, unknown, beyond the 256-bit set) the missing way.
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, inline="always")
def goes_left(node, value, threshold, missing_left, cat_index, cat_left_bits, cat_known_bits):
    if np.isnan(value):
        return missing_left[node] == 1
    ci = cat_index[node]
    if ci < 0:
        return value <= threshold[node]
    if value < 0.0 or value >= 256.0:
        return missing_left[node] == 1
    code = np.int64(value)  # truncation, as the C cast in scikit-learn
    word = code >> 5
    bit = code & 31
    if (cat_left_bits[ci, word] >> bit) & 1:
        return True
    if (cat_known_bits[ci, word] >> bit) & 1:
        return False
    return missing_left[node] == 1


@numba.njit(cache=True, nogil=True)
def child_of(node, x, route):
    left, right, feature, threshold, missing_left, cat_index, cat_left, cat_known = route
    if goes_left(node, x[feature[node]], threshold, missing_left, cat_index, cat_left, cat_known):
        return left[node]
    return right[node]


@numba.njit(cache=True, nogil=True, parallel=True)
def raw_output(X, route, values, tree_start, tree_target, offset, out):
    """out[i, k] = offset[k] + sum over trees of the leaf value row i reaches."""
    left = route[0]
    n_outputs = offset.size
    for i in numba.prange(X.shape[0]):
        x = X[i]
        for k in range(n_outputs):
            out[i, k] = offset[k]
        for t in range(tree_start.size - 1):
            node = tree_start[t]
            while left[node] >= 0:
                node = child_of(node, x, route)
            tgt = tree_target[t]
            if tgt >= 0:
                out[i, tgt] += values[node, 0]
            else:
                for k in range(n_outputs):
                    out[i, k] += values[node, k]
