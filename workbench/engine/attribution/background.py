"""The background sample: the rows whose average stands for "feature unknown".

Interventional SHAP values (tree, linear and model-agnostic alike) are defined against a
background distribution; we name it as a seeded sample of rows so that a result can be
reproduced and cited, and its base value checked as the mean output of those rows.
"""

from __future__ import annotations

import pandas as pd

from workbench.engine import jobs
from workbench.engine.errors import InputError


def select_background(frame: pd.DataFrame, size: int | str = 100, *, seed: int = 0) -> pd.DataFrame:
    """``size`` rows of ``frame`` drawn without replacement (``"all"``: every row), in file order.

    Raises :class:`InputError` when ``size`` is not a positive whole number or ``"all"``, or
    asks for more rows than ``frame`` holds.
    """
    n = len(frame)
    if n == 0:
        raise InputError("the background data has no rows")
    if isinstance(size, str):
        if size.strip().lower() != "all":
            raise InputError(
                f"background size must be a whole number of rows or 'all', not {size!r}"
            )
        return frame
    if isinstance(size, bool) or not float(size).is_integer() or int(size) < 1:
        raise InputError(
            f"background size must be a whole number of rows of at least 1, not {size!r}"
        )
    size = int(size)
    if size > n:
        rows = "row" if n == 1 else "rows"
        raise InputError(
            f"a background of {size} rows was asked for, but the data has only {n} {rows}"
        )
    if size == n:
        return frame
    picked = jobs.rng(seed).choice(n, size=size, replace=False)
    picked.sort()
    return frame.iloc[picked]
