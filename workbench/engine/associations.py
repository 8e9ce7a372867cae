"""Association between the input columns of a data set, for mixed types, and their clustering.

Numeric pairs: Pearson or Spearman correlation (signed). Categorical pairs: bias-corrected
Cramer's V (Bergsma 2013). Numeric with categorical: the correlation ratio eta. Missing values
are handled pairwise: each pair uses the rows where both columns are present.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.cluster import hierarchy
from scipy.spatial.distance import squareform

from workbench.engine.errors import InputError

NUMERIC_METHODS = ("pearson", "spearman")
LINKAGE_METHODS = ("average", "complete", "single", "weighted")


@dataclass(frozen=True)
class Associations:
    """A pair matrix of associations between ``p`` columns.

    ``matrix`` (p, p): symmetric, 1 on the diagonal; signed correlation for numeric pairs,
    Cramer's V (0..1) for categorical pairs, eta (0..1) for numeric-categorical pairs; NaN where a
    column is constant (on the rows the pair shares) or fewer than 3 rows are shared.
    ``kind`` (p, p): the measure of each cell ("pearson", "spearman", "cramers_v", "eta").
    ``rows`` (p, p): rows with both values present.
    """

    features: list[str]
    matrix: np.ndarray
    kind: np.ndarray
    rows: np.ndarray
    categorical: list[str]
    numeric_method: str
    bias_corrected: bool

    @property
    def strength(self) -> np.ndarray:
        """|matrix| (p, p): strength regardless of sign, 0..1."""
        return np.abs(self.matrix)


def is_categorical(series: pd.Series) -> bool:
    """Text, category and boolean columns are categorical; numbers are numeric."""
    return not pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)


def _codes(series: pd.Series) -> np.ndarray:
    codes, _ = pd.factorize(series, use_na_sentinel=True)
    return codes  # -1 = missing


def cramers_v(a_codes: np.ndarray, b_codes: np.ndarray, *, bias_corrected: bool = True) -> float:
    """Cramer's V of two integer-coded columns (-1 = missing, dropped pairwise).

    Uncorrected: sqrt(phi2 / min(r - 1, k - 1)) with phi2 = chi2 / n. Corrected (Bergsma 2013,
    J. Korean Stat. Soc. 42(3):323-328, section 2): phi2+ = max(0, phi2 - (k-1)(r-1)/(n-1)),
    r~ = r - (r-1)^2/(n-1), k~ = k - (k-1)^2/(n-1), V~ = sqrt(phi2+ / min(r~ - 1, k~ - 1)).
    r and k count the levels present on the shared rows. NaN when either has one level.
    """
    both = (a_codes >= 0) & (b_codes >= 0)
    a, b = a_codes[both], b_codes[both]
    n = a.shape[0]
    if n < 2:
        return float("nan")
    ka, kb = int(a.max()) + 1, int(b.max()) + 1
    table = np.bincount(a * kb + b, minlength=ka * kb).reshape(ka, kb).astype(float)
    # keep the levels present on the shared rows
    table = table[table.sum(1) > 0][:, table.sum(0) > 0]
    r, k = table.shape
    if r < 2 or k < 2:
        return float("nan")
    expected = np.outer(table.sum(1), table.sum(0)) / n
    phi2 = float(((table - expected) ** 2 / expected).sum()) / n
    if not bias_corrected:
        return float(np.sqrt(phi2 / min(r - 1, k - 1)))
    phi2c = max(0.0, phi2 - (k - 1) * (r - 1) / (n - 1))
    rc = r - (r - 1) ** 2 / (n - 1)
    kc = k - (k - 1) ** 2 / (n - 1)
    denom = min(rc - 1, kc - 1)
    return float(np.sqrt(phi2c / denom)) if denom > 0 else float("nan")


def correlation_ratio(codes: np.ndarray, values: np.ndarray) -> float:
    """eta = sqrt(between-group sum of squares / total sum of squares) on shared rows.

    Pearson's correlation ratio; eta^2 is the R^2 of a one-way analysis of variance.
    NaN when the numeric values are constant or the category has one level.
    """
    both = (codes >= 0) & np.isfinite(values)
    g, x = codes[both], values[both]
    if x.shape[0] < 2:
        return float("nan")
    counts = np.bincount(g)
    sums = np.bincount(g, weights=x)
    seen = counts > 0
    if seen.sum() < 2:
        return float("nan")
    counts, means = counts[seen], sums[seen] / counts[seen]
    centred = x - x.mean()
    total = float(centred @ centred)
    if total <= 0:
        return float("nan")
    between = float(counts @ (means - x.mean()) ** 2)
    return float(np.sqrt(min(between / total, 1.0)))


def _pearson(a: np.ndarray, b: np.ndarray) -> float:
    if a.shape[0] < 3:
        return float("nan")
    a = a - a.mean()
    b = b - b.mean()
    denom = np.sqrt((a @ a) * (b @ b))
    return float(np.clip((a @ b) / denom, -1.0, 1.0)) if denom > 0 else float("nan")


def pairwise_spearman(X: np.ndarray) -> np.ndarray:
    """Spearman correlation (p, p) of the columns of X (n, p), NaN dropped pairwise.

    Each pair is ranked on the rows both share (midranks for ties), as pandas
    ``DataFrame.corr(method="spearman")`` does. To avoid sorting each pair again, every column
    is sorted once; the midranks within a pair's shared rows then follow from counting, along
    that sorted order, the shared rows in each block of tied values.
    """
    n, p = X.shape
    present = ~np.isnan(X)
    orders, blocks = [], []
    for i in range(p):
        o = np.flatnonzero(present[:, i])
        o = o[np.argsort(X[o, i], kind="stable")]
        xs = X[o, i]
        orders.append(o)
        blocks.append(np.concatenate([[0], np.cumsum(xs[1:] != xs[:-1])]).astype(np.intp))

    def ranks_within(i: int, mask: np.ndarray) -> np.ndarray:
        o, b = orders[i], blocks[i]
        eq = np.bincount(b, weights=mask[o])  # shared rows per block of ties
        below = np.cumsum(eq) - eq
        r = np.empty(n)
        r[o] = below[b] + (eq[b] + 1.0) / 2.0
        return r

    out = np.eye(p)
    for i in range(p):
        out[i, i] = 1.0 if np.unique(X[present[:, i], i]).size > 1 else np.nan
        for j in range(i + 1, p):
            shared = present[:, i] & present[:, j]
            ri = ranks_within(i, shared)[shared]
            rj = ranks_within(j, shared)[shared]
            out[i, j] = out[j, i] = _pearson(ri, rj)
    return out


def associations(frame: pd.DataFrame, *, columns: Sequence[str] | None = None,
                 numeric_method: str = "spearman", categorical: Sequence[str] | None = None,
                 bias_corrected: bool = True) -> Associations:
    """Association matrix of the columns of ``frame`` (mixed numeric and categorical).

    ``categorical`` names columns to treat as categorical even if they hold numbers (codes);
    by default text, category and boolean columns are categorical.
    """
    if numeric_method not in NUMERIC_METHODS:
        raise InputError(f"numeric_method must be one of {', '.join(NUMERIC_METHODS)}, "
                         f"not {numeric_method!r}")
    features = list(frame.columns if columns is None else columns)
    missing = [c for c in features if c not in frame.columns]
    if missing:
        raise InputError(f"columns not in the data: {', '.join(map(str, missing))}")
    if not features:
        raise InputError("no columns to associate")
    if len(set(features)) < len(features):
        raise InputError("a column is named twice")
    forced = set(categorical or ())
    cat = [c for c in features if c in forced or is_categorical(frame[c])]
    num = [c for c in features if c not in cat]
    p = len(features)
    pos = {c: i for i, c in enumerate(features)}
    matrix = np.full((p, p), np.nan)
    kind = np.empty((p, p), dtype=object)

    present = frame[features].notna().to_numpy(dtype=float)
    rows = (present.T @ present).astype(int)

    if num:
        numeric = frame[num].apply(pd.to_numeric, errors="coerce").astype(float)
        if numeric_method == "pearson":
            # pandas computes pairwise-complete Pearson (NaN for constant columns).
            corr = numeric.corr(method="pearson", min_periods=3).to_numpy()
        else:
            corr = pairwise_spearman(numeric.to_numpy())
        idx = [pos[c] for c in num]
        matrix[np.ix_(idx, idx)] = corr
        kind[np.ix_(idx, idx)] = numeric_method
    codes = {c: _codes(frame[c]) for c in cat}
    for i, a in enumerate(cat):
        for b in cat[i + 1:]:
            v = cramers_v(codes[a], codes[b], bias_corrected=bias_corrected)
            matrix[pos[a], pos[b]] = matrix[pos[b], pos[a]] = v
        kind[pos[a], [pos[c] for c in cat]] = "cramers_v"
    if num and cat:
        values = {c: numeric[c].to_numpy() for c in num}
        for a in cat:
            for b in num:
                v = correlation_ratio(codes[a], values[b])
                matrix[pos[a], pos[b]] = matrix[pos[b], pos[a]] = v
                kind[pos[a], pos[b]] = kind[pos[b], pos[a]] = "eta"
    np.fill_diagonal(matrix, 1.0)
    return Associations(features, matrix, kind.astype(str), rows, cat, numeric_method,
                        bias_corrected)


# ----------------------------------------------------------------------------- clustering
@dataclass(frozen=True)
class Clustering:
    """Hierarchical clustering of features by a similarity matrix.

    ``order``: features in leaf order (optimal leaf ordering); ``order_index`` (p,): their
    positions in the input. ``blocks``: groups of two or more features whose clusters merge at
    distance <= 1 - threshold (similarity >= threshold), in leaf order; singletons are left out
    (``labels`` (p,) in input order holds every feature's flat cluster number, singletons too).
    ``linkage`` (p - 1, 4): scipy linkage matrix. ``icoord``, ``dcoord`` (p - 1, 4): the
    dendrogram's segment coordinates (scipy.cluster.hierarchy.dendrogram, no_plot=True), with
    leaf k at x = 10 k + 5 and heights in distance units; ``leaves``: leaf order as positions.
    """

    features: list[str]
    order: list[str]
    order_index: np.ndarray
    blocks: list[list[str]]
    labels: np.ndarray
    linkage: np.ndarray
    icoord: np.ndarray
    dcoord: np.ndarray
    leaves: list[int]
    distance: np.ndarray  # (p, p) the distance clustered: 1 - |similarity|, clipped to [0, 1]
    threshold: float
    method: str


def similarity_distance(matrix) -> np.ndarray:
    """1 - |similarity|, clipped to [0, 1], symmetric, 0 on the diagonal; NaN counts as 0 similarity."""
    s = np.abs(np.asarray(matrix, dtype=float))
    if s.ndim != 2 or s.shape[0] != s.shape[1]:
        raise InputError(f"a pair matrix must be square, got shape {s.shape}")
    s = np.nan_to_num(s, nan=0.0)
    d = np.clip(1.0 - (s + s.T) / 2.0, 0.0, 1.0)
    np.fill_diagonal(d, 0.0)
    return d


def cluster_order(matrix, features: Sequence[str], *, threshold: float = 0.5,
                  method: str = "average") -> Clustering:
    """Order features so that strongly associated ones sit together, and find their blocks.

    Works for any symmetric similarity in [0, 1] (associations, H-statistics, ...): the distance
    1 - |similarity| goes to scipy.cluster.hierarchy.linkage, then optimal_leaf_ordering (Bar-Joseph
    et al. 2001) so neighbours in the order are similar. Only linkage methods valid for arbitrary
    distances are offered: average, complete, single, weighted.
    """
    if method not in LINKAGE_METHODS:
        raise InputError(f"method must be one of {', '.join(LINKAGE_METHODS)}, not {method!r}")
    if not 0.0 <= threshold <= 1.0:
        raise InputError(f"threshold must lie between 0 and 1, not {threshold}")
    features = list(features)
    d = similarity_distance(matrix)
    p = d.shape[0]
    if p != len(features) or p == 0:
        raise InputError(f"{len(features)} feature names for a {p} x {p} matrix")
    if p == 1:
        empty = np.empty((0, 4))
        return Clustering(features, features, np.array([0]), [], np.array([1]), empty, empty,
                          empty, [0], d, threshold, method)
    condensed = squareform(d, checks=False)
    link = hierarchy.optimal_leaf_ordering(hierarchy.linkage(condensed, method=method), condensed)
    tree = hierarchy.dendrogram(link, no_plot=True)
    leaves = list(tree["leaves"])
    labels = hierarchy.fcluster(link, t=1.0 - threshold, criterion="distance")
    blocks: list[list[str]] = []
    seen: set[int] = set()
    for leaf in leaves:
        lab = labels[leaf]
        if lab in seen:
            continue
        seen.add(lab)
        members = [features[i] for i in leaves if labels[i] == lab]
        if len(members) > 1:
            blocks.append(members)
    return Clustering(features, [features[i] for i in leaves], np.asarray(leaves), blocks,
                      labels, link, np.asarray(tree["icoord"]), np.asarray(tree["dcoord"]),
                      leaves, d, float(threshold), method)
