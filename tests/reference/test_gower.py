"""Reference checks for workbench.engine.gower against the definition in Gower (1971),
Biometrics 27:857-871, worked by hand."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.engine.errors import InputError
from workbench.engine.gower import gower_distances, nearest


@pytest.fixture
def frame():
    return pd.DataFrame(
        {
            "income": [20.0, 60.0, 40.0, np.nan, 100.0],
            "age": [30.0, 50.0, 30.0, 40.0, 70.0],
            "home": ["rent", "own", "rent", "own", None],
        },
        index=["r0", "r1", "r2", "r3", "r4"],
    )


def test_gower_hand_example_with_missing_values(frame):
    """Gower (1971), the general coefficient: distance = sum_k d_k / sum_k delta_k over columns present in
    both rows; numeric d = |x - y| / range, categorical d = 0 if equal else 1. Ranges: income
    100 - 20 = 80, age 70 - 30 = 40. Distances to row 0 (20, 30, rent):
    r0: 0.
    r1: (40/80 + 20/40 + 1) / 3 = 2/3.
    r2: (20/80 + 0 + 0) / 3 = 1/12.
    r3: income missing -> (10/40 + 1) / 2 = 5/8.
    r4: home missing -> (80/80 + 40/40) / 2 = 1."""
    d = gower_distances(frame, 0)
    np.testing.assert_allclose(d, [0, 2 / 3, 1 / 12, 5 / 8, 1])


def test_gower_record_ranges_and_missing_in_the_record(frame):
    """Gower (1971) with given ranges (income 200, age 40) and a record missing its income:
    only age and home count. To (income NaN, age 40, own): r0 (10/40 + 1) / 2 = 5/8;
    r1 (10/40 + 0) / 2 = 1/8; r3 0; r4 home missing -> 30/40 / 1 = 3/4."""
    rec = {"income": np.nan, "age": 40.0, "home": "own"}
    d = gower_distances(frame, rec, ranges={"income": 200.0})
    np.testing.assert_allclose(d, [5 / 8, 1 / 8, 5 / 8, 0, 3 / 4])
    d2 = gower_distances(frame, {"income": 60.0, "age": 40.0, "home": "own"},
                         ranges={"income": 200.0, "age": 40.0})
    # r0: (40/200 + 10/40 + 1) / 3 = 1.45 / 3
    assert d2[0] == pytest.approx(1.45 / 3)


def test_gower_forced_categorical_and_zero_range():
    """Gower (1971): a numeric code declared categorical compares as a label (0/1). A column
    of zero range counts 0 for equal values (our rule for the undefined 0/0)."""
    f = pd.DataFrame({"code": [1, 2, 3], "const": [5.0, 5.0, 5.0]})
    np.testing.assert_allclose(gower_distances(f, 0, categorical=["code"]), [0, 0.5, 0.5])
    # as numbers: |1-2|/2 = .5, |1-3|/2 = 1, averaged with the constant column's 0
    np.testing.assert_allclose(gower_distances(f, 0), [0, 0.25, 0.5])


def test_nearest_orders_by_distance_and_skips_self(frame):
    """From the hand example above: nearest to row 0 are r2 (1/12), r3 (5/8), r1 (2/3)."""
    nb = nearest(frame, 0, k=3)
    assert nb.labels == ["r2", "r3", "r1"]
    np.testing.assert_allclose(nb.distances, [1 / 12, 5 / 8, 2 / 3])
    np.testing.assert_array_equal(nb.positions, [2, 3, 1])
    assert nearest(frame, 0, k=1, exclude_self=False).labels == ["r0"]
    with pytest.raises(InputError):
        nearest(frame, 9, k=2)
    with pytest.raises(InputError):
        gower_distances(frame, {"age": 3})


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(2, 25), missing=st.floats(0.0, 0.5))
def test_gower_equals_the_definition_row_by_row(seed, n, missing):
    """Gower (1971), computed literally row by row and column by column (numeric |x - y| / range
    over the frame, categorical 0/1, mean over the columns present in both rows)."""
    rng = np.random.default_rng(seed)
    f = pd.DataFrame({
        "a": rng.normal(size=n), "b": rng.integers(0, 5, n).astype(float),
        "c": rng.choice(["p", "q", "r"], n).astype(object),
    })
    for col in f.columns:
        f.loc[rng.uniform(size=n) < missing, col] = None
    ranges = {c: f[c].max() - f[c].min() for c in ("a", "b")}
    target = f.iloc[0]
    expected = []
    for _, other in f.iterrows():
        terms = []
        for col in f.columns:
            if pd.isna(target[col]) or pd.isna(other[col]):
                continue
            if col == "c":
                terms.append(float(target[col] != other[col]))
            elif ranges[col] > 0:
                terms.append(abs(target[col] - other[col]) / ranges[col])
            else:
                terms.append(0.0)
        expected.append(np.mean(terms) if terms else np.nan)
    np.testing.assert_allclose(gower_distances(f, 0), expected, atol=1e-12)
