"""Adverse impact ratio: favourable-outcome rates across groups of people.

The four-fifths rule (Uniform Guidelines on Employee Selection Procedures, 29 CFR 1607.4(D)):
a group whose selection rate is below 4/5 of the highest group's rate is generally regarded as
evidence of adverse impact; smaller differences can matter in large samples and larger ones
may not in small samples. In credit it is used as a screening indicator only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError

CAUTION = (
    "The adverse impact ratio is a screening indicator, not a legal finding. It describes the "
    "model's decisions on these rows, not the reasons behind them or the world. Any flag must be "
    "reviewed by compliance under the law that applies locally. This is not legal advice."
)


@dataclass(frozen=True)
class AdverseImpact:
    """Favourable-outcome rate per group and its ratio to the most favoured group.

    Arrays have shape (groups,), groups sorted by label. ``flagged``: ratio below ``threshold``.
    Rows with a missing group are left out and counted in ``rows_without_group``.
    """

    groups: list
    counts: np.ndarray
    favourable: np.ndarray
    rates: np.ndarray
    ratios: np.ndarray
    flagged: np.ndarray
    reference_group: object
    threshold: float
    rows_without_group: int
    caution: str = CAUTION

    def as_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"group": self.groups, "rows": self.counts,
                             "favourable": self.favourable, "rate": self.rates,
                             "ratio": self.ratios, "flagged": self.flagged})


def adverse_impact(favourable, groups, *, threshold: float = 0.8) -> AdverseImpact:
    """Rates of the favourable outcome (e.g. accepted) by group, ratio to the highest rate.

    ``favourable``: bool (n,); ``groups``: labels (n,). The reference group is the one with the
    highest rate (the first by label among ties).
    """
    fav = np.asarray(favourable)
    if fav.dtype != bool:
        if not np.all(np.isin(fav, (0, 1))):
            raise InputError("favourable outcomes must be True/False (or 1/0)")
        fav = fav.astype(bool)
    g = pd.Series(np.asarray(groups, dtype=object))
    if fav.ndim != 1 or fav.shape[0] != len(g):
        raise InputError("give one outcome and one group label per row")
    if not 0.0 < threshold <= 1.0:
        raise InputError(f"threshold must lie in (0, 1], not {threshold}")
    known = g.notna().to_numpy()
    codes, labels = pd.factorize(g[known], sort=True)
    if labels.size < 2:
        raise InputError("the adverse impact ratio needs at least two groups")
    counts = np.bincount(codes, minlength=labels.size)
    favoured = np.bincount(codes, weights=fav[known], minlength=labels.size).astype(int)
    rates = favoured / counts
    best = int(np.argmax(rates))
    with np.errstate(invalid="ignore", divide="ignore"):
        ratios = rates / rates[best] if rates[best] > 0 else np.full(labels.size, np.nan)
    return AdverseImpact(list(labels), counts, favoured, rates, ratios,
                         np.asarray(ratios < threshold), labels[best], float(threshold),
                         int((~known).sum()))
