"""How much a case's reason statements depend on the background sample.

Interventional SHAP values are defined against a background sample; a different seeded draw
of it gives slightly different contributions, and the ranking of close reasons can swap. We
recompute the case's attributions over ``resamples`` background draws (seeds ``seed + 1`` to
``seed + resamples``) and report per feature the spread (standard deviation) of its
contribution and how often its reason rank differs from the rank stated with the background of
``seed`` (rank 0 = not among the ``k`` stated reasons). A stated reason whose rank changes in
more than ``threshold`` of the resamples (default 20 %: common practice, no source) is marked
not stable.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.attributions import explain
from workbench.engine.errors import InputError
from workbench.engine.reasons import (
    CREDIT_SIDES,
    DEFAULT_REASONS,
    CutoffSides,
    case_response,
    check_cutoff,
    check_side,
    is_adverse,
)

DEFAULT_RESAMPLES = 10
DEFAULT_THRESHOLD = 0.2  # common practice, no source


@dataclass(frozen=True)
class StabilityResult:
    """Attributions of one case over background resamples.

    Attributes
    ----------
    features : the model's raw input columns (columns of the arrays below).
    reference : (p,) contributions with the background drawn with ``seed``.
    contributions : (resamples, p) contributions with the backgrounds of seeds seed+1, ...
    std : (p,) standard deviation over the resamples (ddof 0).
    reference_ranks : (p,) reason rank with the reference background (1 = strongest, 0 = none).
    ranks : (resamples, p) reason rank in each resample.
    change_rate : (p,) share of resamples whose rank differs from the reference rank.
    unstable : stated reasons (reference rank > 0) with change_rate > threshold.
    """

    features: list[str]
    reference: np.ndarray
    contributions: np.ndarray
    std: np.ndarray
    reference_ranks: np.ndarray
    ranks: np.ndarray
    change_rate: np.ndarray
    unstable: tuple[str, ...]
    resamples: int
    background_size: int
    seed: int
    k: int
    threshold: float
    method: str
    adverse_if: str
    not_allowed: tuple[str, ...]

    def is_stable(self, feature: str) -> bool:
        return feature not in self.unstable

    def rows(self) -> list[dict]:
        """Per feature, strongest reference rank first, then by spread: plain data for reports."""
        order = sorted(range(len(self.features)),
                       key=lambda j: (self.reference_ranks[j] == 0, self.reference_ranks[j],
                                      -self.std[j]))
        return [{"feature": self.features[j], "reference_rank": int(self.reference_ranks[j]),
                 "contribution": float(self.reference[j]), "std": float(self.std[j]),
                 "rank_change_rate": float(self.change_rate[j]),
                 "stable": self.features[j] not in self.unstable} for j in order]


def reason_ranks(contributions: np.ndarray, features: Sequence[str], *, k: int, adverse_if: str,
                 not_allowed: Sequence[str] = ()) -> np.ndarray:
    """Reason rank of every feature for each row of ``contributions`` (n, p): 1..k, 0 = none.

    Same rule as :func:`workbench.engine.reasons.reason_statements`: adverse-signed pushes,
    largest first, not-allowed features skipped, ties by column order.
    """
    c = np.atleast_2d(np.asarray(contributions, dtype=float))
    push = c if adverse_if == "above" else -c
    blocked = np.isin(np.asarray(features, dtype=object), list(not_allowed))
    ranks = np.zeros(c.shape, dtype=int)
    for i in range(c.shape[0]):
        order = [j for j in np.argsort(-push[i], kind="stable") if push[i, j] > 0 and not blocked[j]]
        for rank, j in enumerate(order[:k], start=1):
            ranks[i, j] = rank
    return ranks


def reason_stability(adapter, frame_row: pd.DataFrame, background_pool: pd.DataFrame, *,
                     resamples: int = DEFAULT_RESAMPLES, background_size: int = 100, seed: int = 0,
                     k: int = DEFAULT_REASONS, adverse_if: str = "above",
                     not_allowed: Sequence[str] = (), threshold: float = DEFAULT_THRESHOLD,
                     method: str = "auto", cutoff: float | None = None, on_request: bool = True,
                     sides: CutoffSides = CREDIT_SIDES, progress=None,
                     cancel=None) -> StabilityResult:
    """Spread of one case's contributions and reason ranks over background resamples.

    ``frame_row``: the case (one row, raw columns). ``background_pool``: the rows the
    backgrounds are drawn from (the reference data, or the data). With a ``cutoff``, a case on
    the favourable side raises :class:`InputError` unless ``on_request`` (reasons are only
    stated for adverse cases unless asked for); ``sides`` names the cutoff's sides there.
    """
    check_side(adverse_if)
    if not isinstance(frame_row, pd.DataFrame) or len(frame_row) != 1:
        raise InputError("explanation stability is computed for one case (a one-row table)")
    if int(resamples) < 2:
        raise InputError(f"explanation stability needs at least 2 resamples, not {resamples!r}")
    if not 0 <= float(threshold) <= 1:
        raise InputError(f"the rank-change threshold must lie between 0 and 1, not {threshold!r}")
    if isinstance(background_size, int) and background_size >= len(background_pool):
        raise InputError(f"backgrounds of {background_size} rows drawn from {len(background_pool)} "
                         "rows would all be the same; use a smaller background or a larger pool")
    if cutoff is not None and not on_request:
        values = {c: frame_row[c].iloc[0] for c in frame_row.columns}
        response = case_response(adapter, values)
        if not is_adverse(response, check_cutoff(cutoff), adverse_if):
            raise InputError(f"the case is on {sides.other} (score {response:.4g}, cutoff "
                             f"{cutoff:g}): no reasons to check")
    resamples = int(resamples)
    runs = []
    used_method = ""
    for i in range(resamples + 1):
        jobs.step(progress, cancel, i / (resamples + 1),
                  f"attributions with background {i} of {resamples}")
        att = explain(adapter, frame_row, method=method, background=background_pool,
                      background_size=background_size, seed=seed + i)
        used_method = att.method
        runs.append(np.asarray(att.values, dtype=float).reshape(-1))
    jobs.step(progress, cancel, 1.0, "explanation stability done")
    features = list(adapter.input_columns)
    all_c = np.vstack(runs)
    reference, others = all_c[0], all_c[1:]
    blocked = tuple(dict.fromkeys(map(str, not_allowed)))
    ref_ranks = reason_ranks(reference, features, k=k, adverse_if=adverse_if, not_allowed=blocked)[0]
    ranks = reason_ranks(others, features, k=k, adverse_if=adverse_if, not_allowed=blocked)
    change = (ranks != ref_ranks).mean(axis=0)
    unstable = tuple(features[j] for j in np.flatnonzero((ref_ranks > 0) & (change > threshold)))
    return StabilityResult(
        features=features, reference=reference, contributions=others, std=others.std(axis=0),
        reference_ranks=ref_ranks, ranks=ranks, change_rate=change, unstable=unstable,
        resamples=resamples, background_size=int(background_size) if isinstance(background_size, int)
        else len(background_pool), seed=int(seed), k=int(k), threshold=float(threshold),
        method=used_method, adverse_if=adverse_if, not_allowed=blocked)


__all__ = ["DEFAULT_RESAMPLES", "DEFAULT_THRESHOLD", "StabilityResult", "reason_ranks",
           "reason_stability"]
