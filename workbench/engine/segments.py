"""Segments: rows picked by column conditions (several ANDed). Plain pandas, no Qt.

The window builds conditions from its segment filter; the headless commands parse them from
text such as ``"region = North"`` or ``"income >= 30000"`` (:func:`parse_condition`)."""

from __future__ import annotations

import operator
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError

OPERATORS = {
    "=": operator.eq,
    "≠": operator.ne,
    "<": operator.lt,
    "≤": operator.le,
    ">": operator.gt,
    "≥": operator.ge,
}


# typed forms of the operators, for a keyboard without the mathematical signs
ASCII_OPERATORS = {"==": "=", "!=": "≠", "<=": "≤", ">=": "≥"}
_CONDITION = re.compile(r"^\s*(?P<column>.+?)\s*(?P<op>==|!=|<=|>=|=|≠|≤|≥|<|>)\s*(?P<value>.*?)\s*$")


@dataclass(frozen=True)
class Condition:
    """One condition ``column operator value``; ``value`` is kept as the user typed it."""

    column: str
    op: str
    value: str

    def describe(self) -> str:
        return f"{self.column} {self.op} {self.value}"


def _typed_value(series: pd.Series, condition: Condition):
    if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
        try:
            return float(condition.value)
        except ValueError:
            raise InputError(
                f"segment: column '{condition.column}' holds numbers; "
                f"{condition.value!r} is not a number"
            ) from None
    if condition.op not in ("=", "≠"):
        raise InputError(
            f"segment: column '{condition.column}' holds text; use = or ≠, not {condition.op}"
        )
    return condition.value


def _check_level(series: pd.Series, condition: Condition) -> None:
    """A text value the column never takes is a slip (a wrong case, say), not a wish: "= x"
    would pick nothing and "≠ x" everything, without a word."""
    levels = series.dropna().unique()
    if condition.value in set(levels):
        return
    shown = sorted(map(str, levels))
    listed = ", ".join(shown[:12]) + (f" and {len(shown) - 12} more" if len(shown) > 12 else "")
    raise InputError(
        f"segment: column '{condition.column}' has no value {condition.value!r} "
        f"(its values: {listed})"
    )


def segment_mask(frame: pd.DataFrame, conditions: tuple[Condition, ...]) -> np.ndarray:
    """True for the rows meeting every condition (missing values meet none)."""
    mask = np.ones(len(frame), dtype=bool)
    for cond in conditions:
        if cond.column not in frame.columns:
            raise InputError(f"segment: the data has no column '{cond.column}'")
        if cond.op not in OPERATORS:
            raise InputError(f"segment: unknown operator {cond.op!r}")
        series = frame[cond.column]
        value = _typed_value(series, cond)
        if isinstance(value, str):
            series = series.astype(str).where(series.notna())
            _check_level(series, cond)
        hit = OPERATORS[cond.op](series, value)
        mask &= np.asarray(hit.fillna(False), dtype=bool) & series.notna().to_numpy()
    return mask


def segment_rows(frame: pd.DataFrame, conditions: tuple[Condition, ...]) -> np.ndarray:
    """Positions (0-based) of the rows in the segment."""
    return np.flatnonzero(segment_mask(frame, conditions))


def describe_segment(conditions: tuple[Condition, ...]) -> str:
    return " and ".join(c.describe() for c in conditions) if conditions else "all rows"


def parse_condition(text: str) -> Condition:
    """``"COLUMN OP VALUE"`` with OP one of = != < <= > >= (or ≠ ≤ ≥) as a :class:`Condition`."""
    match = _CONDITION.match(text or "")
    if match is None or not match["value"]:
        raise InputError(
            f"segment: {text!r} is not a condition; write COLUMN OP VALUE with OP one of "
            "= != < <= > >= (for example \"region = North\")"
        )
    op = ASCII_OPERATORS.get(match["op"], match["op"])
    value = match["value"]
    if len(value) >= 2 and value[0] == value[-1] and value[0] in "'\"":
        value = value[1:-1]  # a quoted value keeps its spaces
    return Condition(match["column"], op, value)
