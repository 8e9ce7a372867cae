"""Friedman's H-statistic: how much of the model's variation comes from interactions.

Definitions from Friedman and Popescu (2008), "Predictive learning via rule ensembles",
Ann. Appl. Stat. 2(3), section 8 (equation numbers as given in our brief), on a sample
x_1..x_m of rows, with every partial dependence function centred to mean zero over the sample:

- pairwise (eq. 44): H^2_jk = sum_i [F_jk(x_ij, x_ik) - F_j(x_ij) - F_k(x_ik)]^2
  / sum_i F_jk(x_ij, x_ik)^2;
- overall (eq. 46): H^2_j = sum_i [F(x_i) - F_j(x_ij) - F_\\j(x_i\\j)]^2 / sum_i F(x_i)^2,

where F_S(z) = (1/m) sum_l f(z, x_l,rest) is the partial dependence on the features S,
estimated on the same sample. One m x m block of model calls per feature gives both F_j and F_\\j
(its column and row means); one more per pair gives F_jk. Pairs are computed only among the
``screen`` features with the strongest overall H, which keeps a 20-feature model to seconds.

H^2_j is the share of the variance of f that is not explained by j and the rest separately; it is
0 for a feature that acts additively. H^2_jk can exceed 1 when the pair's joint effect is small
next to its parts; it is reported as computed. Because H is a share, a pair whose joint effect
is weak can rank high; the unnormalised strength, the root mean square of the numerator
sqrt((1/m) sum_i [F_jk - F_j - F_k]^2), is in the units of the output and ranks pairs by how
much they move it (Friedman and Popescu discuss the unnormalised form beside eq. 44; from
memory, section not checked). The functions are taken on the explained output
by default (log-odds for classifiers with a margin), where effects add up.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.adapter import ModelAdapter
from workbench.engine.effects import (
    CHUNK_ROWS,
    check_feature,
    model_frame,
    scale_units,
    scorer,
    stacked_frame,
)
from workbench.engine.errors import InputError
from workbench.engine.jobs import rng, step

NIL_SHARE = 1e-12  # an effect whose sum of squares is below this share of the model's is nil


@dataclass(frozen=True)
class Interactions:
    """H-statistics of ``features``.

    ``h2_overall`` (p,): H^2_j; ``h2_pairs`` (p, p): H^2_jk, symmetric, NaN on the diagonal and
    where the pair was not computed (outside the screened features); 0 for a pair whose joint
    effect is nil (sum of squares below ``NIL_SHARE`` of the model's);
    ``screened``: the features whose pairs were computed; ``sample``: rows in the sample;
    ``pair_strength`` (p, p): the unnormalised pairwise strength, the root mean square of the
    interaction part F_jk - F_j - F_k over the sample, in the output's units (NaN as h2_pairs).
    """

    features: list[str]
    h2_overall: np.ndarray
    h2_pairs: np.ndarray
    screened: list[str]
    sample: int
    screen: int | None
    seed: int
    scale: str
    units: str
    background: int | None = None  # rows averaged over; None = the sample itself
    pair_strength: np.ndarray | None = None

    @property
    def h_overall(self) -> np.ndarray:
        return np.sqrt(self.h2_overall)

    @property
    def h_pairs(self) -> np.ndarray:
        return np.sqrt(self.h2_pairs)

    def ranked_strengths(self) -> list[tuple[str, str, float]]:
        """Computed pairs as (a, b, unnormalised strength), strongest first."""
        return _ranked(self.features, self.pair_strength)

    def ranked_pairs(self) -> list[tuple[str, str, float]]:
        """Computed pairs as (a, b, H), strongest first."""
        return _ranked(self.features, self.h_pairs)


def _ranked(features: list[str], matrix: np.ndarray) -> list[tuple[str, str, float]]:
    out = [
        (features[i], features[j], float(matrix[i, j]))
        for i in range(len(features))
        for j in range(i + 1, len(features))
        if np.isfinite(matrix[i, j])
    ]
    return sorted(out, key=lambda t: -t[2])


def _centre(v: np.ndarray) -> np.ndarray:
    return v - v.mean()


def _ratio(numerator: np.ndarray, denominator: np.ndarray, scale: float) -> float:
    """sum(numerator^2) / sum(denominator^2); 0 when the denominator is nil next to ``scale``.

    A pair (or feature) whose effect is nil has no interaction to speak of; without the guard
    its H^2 would be rounding noise divided by rounding noise.
    """
    d = float(np.sum(denominator**2))
    if d <= NIL_SHARE * scale:
        return 0.0
    return float(np.sum(numerator**2)) / d


def _replaced_scores(
    score,
    s: pd.DataFrame,
    columns: list[str],
    background: np.ndarray,
    *,
    progress,
    cancel,
    start: float,
    width: float,
    label: str,
) -> np.ndarray:
    """M (m, b): M[i, l] = f(row ``background[l]`` of ``s`` with ``columns`` from row i)."""
    m, b = len(s), background.size
    out = np.empty((m, b))
    per_chunk = max(1, CHUNK_ROWS // b)
    for i0 in range(0, m, per_chunk):
        i1 = min(i0 + per_chunk, m)
        step(progress, cancel, start + width * i0 / m, label)
        own = np.repeat(np.arange(i0, i1), b)
        others = np.tile(background, i1 - i0)
        frame = stacked_frame(s, others, column_index={c: own for c in columns})
        out[i0:i1] = np.asarray(score(frame), dtype=float).reshape(i1 - i0, b)
    return out


def h_statistics(
    adapter: ModelAdapter,
    frame: pd.DataFrame,
    *,
    sample: int = 300,
    screen: int | None = 8,
    features: Sequence[str] | None = None,
    seed: int = 0,
    scale: str = "output",
    background: int | None = None,
    progress=None,
    cancel=None,
) -> Interactions:
    """Overall H for every feature and pairwise H among the ``screen`` strongest.

    ``sample`` rows are drawn with ``seed`` (all rows when there are fewer); each partial
    dependence function is evaluated at the sample points and averaged over the sample itself
    (the estimator of Friedman and Popescu), costing (p + screen (screen - 1) / 2) * sample^2
    model evaluations. ``background=b`` averages over b of the sample rows instead (a Monte Carlo
    estimate of the same functions), costing (2 p + screen (screen - 1) / 2) * sample * b; it
    pays when b < sample / 2. ``screen=None`` computes every pair.
    """
    score = scorer(adapter, scale)
    x = model_frame(adapter, frame)
    feats = list(x.columns) if features is None else list(dict.fromkeys(features))
    for f in feats:
        check_feature(adapter, x, f)
    if not feats:
        raise InputError("no features to compute H-statistics for")
    if int(sample) < 2:
        raise InputError(f"the H-statistic needs a sample of at least 2 rows, not {sample}")
    n = len(x)
    pos = np.arange(n) if n <= sample else np.sort(rng(seed).choice(n, int(sample), replace=False))
    s = x.iloc[pos].reset_index(drop=True)
    m = len(s)
    exact = background is None or int(background) >= m
    if not exact and int(background) < 2:
        raise InputError(f"the background needs at least 2 rows, not {background}")
    bg = np.arange(m) if exact else np.sort(rng(seed + 1).choice(m, int(background), replace=False))
    f_all = _centre(np.asarray(score(s), dtype=float))
    total_ss = float(np.sum(f_all**2))
    if total_ss <= 0:
        raise InputError(
            "the model gives the same output for every row of the sample; "
            "there is nothing to split into effects"
        )
    p = len(feats)
    n_screen = p if screen is None else max(0, min(int(screen), p))
    n_pairs = n_screen * (n_screen - 1) // 2
    total = p + n_pairs
    one_way = np.empty((p, m))
    h2 = np.empty(p)
    for j, f in enumerate(feats):
        where = dict(
            progress=progress,
            cancel=cancel,
            start=j / total,
            width=1 / total,
            label=f"H-statistic: {f}",
        )
        # M[i, l] = f(x_l with feature j from row i): its row means are F_j(x_ij).
        mat = _replaced_scores(score, s, [f], bg, **where)
        one_way[j] = _centre(mat.mean(axis=1))
        if exact:  # the same matrix read by columns: F_\j(x_l,rest) = mean_i f(x_ij, x_l,rest)
            rest = _centre(mat.mean(axis=0))
        else:  # F_\j(x_i,rest) = mean_l f(x_lj, x_i,rest): row i keeps all but j
            others = [c for c in s.columns if c != f]
            rest = _centre(_replaced_scores(score, s, others, bg, **where).mean(axis=1))
        h2[j] = _ratio(f_all - one_way[j] - rest, f_all, total_ss)
    pairs = np.full((p, p), np.nan)
    strength = np.full((p, p), np.nan)
    ranked = np.where(np.isfinite(h2), h2, -np.inf)
    chosen = sorted(np.argsort(-ranked, kind="stable")[:n_screen].tolist())
    done = p
    for a_pos, j in enumerate(chosen):
        for k in chosen[a_pos + 1 :]:
            mat = _replaced_scores(
                score,
                s,
                [feats[j], feats[k]],
                bg,
                progress=progress,
                cancel=cancel,
                start=done / total,
                width=1 / total,
                label=f"H-statistic: {feats[j]} x {feats[k]}",
            )
            joint = _centre(mat.mean(axis=1))
            part = joint - one_way[j] - one_way[k]
            pairs[j, k] = pairs[k, j] = _ratio(part, joint, total_ss)
            strength[j, k] = strength[k, j] = float(np.sqrt(np.mean(part**2)))
            done += 1
    step(progress, cancel, 1.0, "H-statistics: done")
    return Interactions(
        feats,
        h2,
        pairs,
        [feats[j] for j in chosen],
        int(m),
        None if screen is None else int(screen),
        int(seed),
        scale,
        scale_units(adapter, scale),
        None if exact else int(bg.size),
        strength,
    )
