"""Segments from column conditions: parsing the headless form and picking the rows."""

import numpy as np
import pandas as pd
import pytest

from workbench.engine.errors import InputError
from workbench.engine.segments import (
    Condition,
    describe_segment,
    parse_condition,
    segment_mask,
    segment_rows,
)


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("region = North", Condition("region", "=", "North")),
        ("region == North", Condition("region", "=", "North")),
        ("income>=30000", Condition("income", "≥", "30000")),
        ("income <= 1e4", Condition("income", "≤", "1e4")),
        ("age < 30", Condition("age", "<", "30")),
        ("age > 30", Condition("age", ">", "30")),
        ("job kind != 'part time'", Condition("job kind", "≠", "part time")),
        ("age ≥ 30", Condition("age", "≥", "30")),
    ],
)
def test_parse_condition(text, expected):
    assert parse_condition(text) == expected


@pytest.mark.parametrize("text", ["", "region", "region =", "= North", "   "])
def test_parse_condition_refuses_what_is_not_a_condition(text):
    with pytest.raises(InputError, match="not a condition"):
        parse_condition(text)


@pytest.fixture
def frame():
    return pd.DataFrame(
        {
            "age": [25, 40, np.nan, 61, 33],
            "region": pd.Series(["north", "south", "north", None, "west"], dtype="str"),
        }
    )


def test_conditions_are_anded_and_missing_values_meet_none(frame):
    conds = (parse_condition("age >= 30"), parse_condition("region != south"))
    assert segment_mask(frame, conds).tolist() == [False, False, False, False, True]
    assert segment_rows(frame, (parse_condition("region = north"),)).tolist() == [0, 2]
    assert segment_rows(frame, (parse_condition("age < 100"),)).tolist() == [0, 1, 3, 4]
    assert describe_segment(conds) == "age ≥ 30 and region ≠ south"
    assert describe_segment(()) == "all rows"


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("height > 2", "no column 'height'"),
        ("age > young", "holds numbers"),
        ("region < n", "holds text"),
    ],
)
def test_bad_conditions_say_what_is_wrong(frame, text, message):
    with pytest.raises(InputError, match=message):
        segment_mask(frame, (parse_condition(text),))


def test_a_text_value_the_column_never_takes_is_refused(frame):
    """'region ≠ North' on a column holding 'north' would silently keep every row."""
    with pytest.raises(InputError, match=r"no value 'North' \(its values: north, south, west\)"):
        segment_mask(frame, (parse_condition("region != North"),))
