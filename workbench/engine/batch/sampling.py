"""Uniform samples of rows: of a frame in memory, or of a file read chunk by chunk.

Both give every row the same chance and keep the rows in file order. The streamed form
(:func:`reservoir_sample`) is a bottom-k sample: every row gets a key from one seeded stream of
uniform numbers, drawn in file order, and the ``size`` rows with the smallest keys are kept
(the "order sampling" view of reservoir sampling: Efraimidis and Spirakis 2006, with equal
weights). The keys depend on a row's position only, so the sample is the same whatever the
chunk size.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.errors import InputError


def sample_rows(frame: pd.DataFrame, max_rows: int, seed: int = 0) -> pd.DataFrame:
    """``frame`` itself when it has at most ``max_rows`` rows, else a seeded uniform sample of
    ``max_rows`` rows without replacement, in their original order.

    Meant for commands whose method allows a sample on large data (ranking, checks); the caller
    says so when ``len(result) < len(frame)``.
    """
    if isinstance(max_rows, bool) or int(max_rows) != max_rows or int(max_rows) < 1:
        raise InputError(f"the largest sample must be a whole number of rows of at least 1, "
                         f"not {max_rows!r}")
    if len(frame) <= max_rows:
        return frame
    picked = np.sort(jobs.rng(seed).choice(len(frame), size=int(max_rows), replace=False))
    return frame.iloc[picked]


def reservoir_sample(chunks: Iterable[tuple[pd.DataFrame, np.ndarray]], size: int,
                     seed: int = 0) -> tuple[pd.DataFrame, np.ndarray, int]:
    """A uniform sample of ``size`` usable rows from a stream of chunks.

    ``chunks`` yields (frame, usable) pairs in file order, ``usable`` a boolean mask of the rows
    that may be drawn. Returns the sample (fresh index, file order), the row positions it came
    from and the number of rows seen.
    """
    gen = jobs.rng(seed)
    kept: pd.DataFrame | None = None
    kept_keys = np.zeros(0)
    kept_rows = np.zeros(0, dtype=np.int64)
    seen = 0
    for frame, usable in chunks:
        n = len(frame)
        keys = gen.random(n)  # drawn for every row, usable or not, so positions fix the keys
        rows = np.arange(seen, seen + n, dtype=np.int64)
        seen += n
        take = np.flatnonzero(np.asarray(usable, dtype=bool))
        if kept is not None and len(kept_keys) >= size:
            take = take[keys[take] < kept_keys.max()]
        if len(take) == 0:
            continue
        pool = frame.iloc[take] if kept is None else pd.concat([kept, frame.iloc[take]])
        pool_keys = np.concatenate([kept_keys, keys[take]])
        pool_rows = np.concatenate([kept_rows, rows[take]])
        best = np.lexsort((pool_rows, pool_keys))[:size]
        kept, kept_keys, kept_rows = pool.iloc[best], pool_keys[best], pool_rows[best]
    if kept is None:
        raise InputError("the data has no rows that can be used as background")
    order = np.argsort(kept_rows, kind="stable")
    return kept.iloc[order].reset_index(drop=True), kept_rows[order], seen
