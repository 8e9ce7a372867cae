"""Model-agnostic interventional Shapley values on raw, mixed-type columns.

The game of row x is v(S) = mean over background rows b of f(x_S, b_rest): columns in S take the
row's values, the others the background row's (Lundberg and Lee 2017, eq. 11, with features
treated as independent). Shapley (1953) gives each column

    phi_j = sum over S not holding j of |S|! (p - |S| - 1)! / p! * (v(S + j) - v(S)).

- ``exact``: every coalition is enumerated (2^p - 2 besides the empty and the full one).
- ``sampling``: random orders of the columns, each with its reverse (antithetic pairs), each
  order adding the columns one at a time; phi_j is the mean change when j joins. Every order
  sums to f(x) - v(empty), so local accuracy holds exactly for any number of orders.

The hybrid rows are built column by column from the raw values (``take`` on each column's own
array), so text, categorical and nullable columns keep their type, and all hybrid rows of a chunk
are scored by one ``adapter.score`` call.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.errors import InputError

CHUNK_ROWS = 200_000  # hybrid rows per model call: about the memory of a few hundred MB at most
EXACT_AUTO_MAX_COLUMNS = 12  # auto chooses exact enumeration up to here (4094 coalitions)
EXACT_MAX_COLUMNS = 16  # beyond this, exact enumeration is refused (65534 coalitions per row)
DEFAULT_PERMUTATIONS = 64


def as_frame(adapter, data) -> pd.DataFrame:
    """A DataFrame of ``data``: a one-row Series (one case) or a matrix in input-column order."""
    if isinstance(data, pd.DataFrame):
        return data
    if isinstance(data, pd.Series):
        return data.to_frame().T.infer_objects()
    arr = np.asarray(data)
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != len(adapter.input_columns):
        raise InputError(
            f"expected rows of {len(adapter.input_columns)} columns, "
            f"got an array of shape {arr.shape}"
        )
    return pd.DataFrame(arr, columns=adapter.input_columns)


def raw_columns(adapter, frame: pd.DataFrame) -> pd.DataFrame:
    """The model's raw input columns of ``frame``, in order, with a fresh 0..n-1 index."""
    frame = as_frame(adapter, frame)
    if adapter.named_columns:
        missing = [c for c in adapter.input_columns if c not in frame.columns]
        if missing:
            raise InputError(f"the data lacks column(s) the model needs: {', '.join(missing)}")
        out = frame[adapter.input_columns]
    else:
        if frame.shape[1] != len(adapter.input_columns):
            raise InputError(
                f"the model takes {len(adapter.input_columns)} unnamed columns; "
                f"the data has {frame.shape[1]}"
            )
        out = frame.set_axis(adapter.input_columns, axis=1)
    return out.reset_index(drop=True)


def coalition_values(
    adapter, rows, background, masks, *, progress=None, cancel=None, span=(0.0, 1.0)
) -> np.ndarray:
    """v[i, k] = mean over background rows of f(row i on columns masks[k], background elsewhere).

    ``rows`` and ``background`` are raw frames (see :func:`raw_columns`); ``masks`` is (K, p) bool.
    """
    n, n_bg, n_coal = len(rows), len(background), len(masks)
    total = n * n_coal * n_bg
    sums = np.zeros(n * n_coal)
    if total == 0:
        return sums.reshape(n, n_coal)
    pool = pd.concat([rows, background], ignore_index=True)
    arrays = [pool[c].array for c in pool.columns]
    per_row = n_coal * n_bg
    lo, hi = span
    for sl in jobs.chunk_slices(total, CHUNK_ROWS):
        flat = np.arange(sl.start, sl.stop)
        i = flat // per_row
        k = (flat // n_bg) % n_coal
        b = flat % n_bg
        hybrid = pd.DataFrame(
            {
                col: arr.take(np.where(masks[k, j], i, n + b))
                for j, (col, arr) in enumerate(zip(pool.columns, arrays, strict=True))
            }
        )
        sums += np.bincount(i * n_coal + k, weights=adapter.score(hybrid), minlength=n * n_coal)
        jobs.step(progress, cancel, lo + (hi - lo) * sl.stop / total, "scoring hybrid rows")
    return (sums / n_bg).reshape(n, n_coal)


def shapley_weights(p: int) -> np.ndarray:
    """w[s] = s! (p - s - 1)! / p! for coalitions of size s = 0 .. p-1 (Shapley 1953)."""
    return np.array(
        [math.factorial(s) * math.factorial(p - s - 1) / math.factorial(p) for s in range(p)]
    )


def exact_values(
    adapter, rows, background, base: float, output: np.ndarray, *, progress=None, cancel=None
) -> np.ndarray:
    """Shapley values (n, p) by enumerating every coalition of the p raw columns."""
    p = rows.shape[1]
    if p > EXACT_MAX_COLUMNS:
        raise InputError(
            f"exact enumeration of {p} columns needs {2**p} coalitions per row; "
            f"use the sampling method (exact is offered up to {EXACT_MAX_COLUMNS} columns)"
        )
    full = (1 << p) - 1
    codes = np.arange(1, full)  # coalitions other than the empty and the full one
    masks = ((codes[:, None] >> np.arange(p)) & 1).astype(bool)
    v = np.empty((len(rows), full + 1))
    v[:, 0] = base
    v[:, full] = output
    v[:, codes] = coalition_values(
        adapter, rows, background, masks, progress=progress, cancel=cancel
    )
    weights = shapley_weights(p)
    all_codes = np.arange(full + 1)
    sizes = np.array([bin(c).count("1") for c in all_codes])
    phi = np.empty((len(rows), p))
    for j in range(p):
        without = all_codes[(all_codes >> j) & 1 == 0]
        phi[:, j] = (v[:, without | (1 << j)] - v[:, without]) @ weights[sizes[without]]
    return phi


def sampling_values(
    adapter,
    rows,
    background,
    base: float,
    output: np.ndarray,
    *,
    permutations: int,
    seed: int,
    progress=None,
    cancel=None,
) -> tuple[np.ndarray, np.ndarray]:
    """Shapley values (n, p) estimated from ``permutations`` orders, and their standard errors.

    The orders come in antithetic pairs (an order and its reverse); the pairs are independent
    draws, so the standard error of each value is the spread of the pair means over
    sqrt(number of pairs) (NaN with a single pair).
    """
    n, p = rows.shape
    if p == 1:  # one column takes the whole difference
        return (output - base)[:, None], np.zeros((n, 1))
    gen = jobs.rng(seed)
    half = [gen.permutation(p) for _ in range(permutations // 2)]
    orders = [o for perm in half for o in (perm, perm[::-1])]
    # interior prefixes of each order: sizes 1 .. p-1 (empty and full are known)
    prefix_masks = np.zeros((len(orders), p - 1, p), dtype=bool)
    for t, order in enumerate(orders):
        for r in range(1, p):
            prefix_masks[t, r - 1, order[:r]] = True
    unique, inverse = np.unique(prefix_masks.reshape(-1, p), axis=0, return_inverse=True)
    v_unique = coalition_values(adapter, rows, background, unique, progress=progress, cancel=cancel)
    v_prefix = v_unique[:, inverse.ravel()].reshape(n, len(orders), p - 1)
    chain = np.concatenate(
        [
            np.full((n, len(orders), 1), base),
            v_prefix,
            np.repeat(output[:, None, None], len(orders), 1),
        ],
        axis=2,
    )
    gains = np.diff(chain, axis=2)  # (n, orders, p): gain of the column added at each position
    by_order = np.empty_like(gains)
    for t, order in enumerate(orders):
        by_order[:, t, order] = gains[:, t, :]
    pairs = by_order.reshape(n, len(half), 2, p).mean(axis=2)  # (n, pairs, p)
    values = pairs.mean(axis=1)
    if len(half) < 2:
        return values, np.full((n, p), np.nan)
    return values, pairs.std(axis=1, ddof=1) / np.sqrt(len(half))
