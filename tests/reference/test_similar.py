"""Similar rows: Gower's (1971) distance on a hand-worked example.

Gower, J. C. (1971), "A general coefficient of similarity and some of its properties",
Biometrics 27:857-871: numeric terms |x - y| / range, categorical terms 0 (same) or 1
(different), averaged over the columns present in both rows.
"""

import numpy as np
import pandas as pd
import pytest

from workbench.engine.errors import InputError
from workbench.engine.similar import similar_rows, similar_summary

FRAME = pd.DataFrame({
    "age": [30.0, 40.0, 30.0, 50.0, 30.0],
    "income": [100.0, 100.0, 300.0, 200.0, np.nan],
    "region": ["n", "n", "s", "n", "s"],
})


def test_distances_equal_the_hand_worked_example():
    """Ranges: age 50 - 30 = 20, income 300 - 100 = 200. To row 0:
    row 1: (10/20 + 0 + 0) / 3 = 1/6; row 2: (0 + 200/200 + 1) / 3 = 2/3;
    row 3: (20/20 + 100/200 + 0) / 3 = 1/2; row 4: income missing, so (0 + 1) / 2 = 1/2.
    Nearest first, ties by row position, the row itself left out (Gower 1971)."""
    rows = similar_rows(FRAME, 0, k=4, scores=[0.1, 0.2, 0.9, 0.6, 0.4], labels=[0, 0, 1, 1, None])
    assert [r.row for r in rows] == [1, 3, 4, 2]
    np.testing.assert_allclose([r.distance for r in rows], [1 / 6, 1 / 2, 1 / 2, 2 / 3], rtol=1e-12)
    assert [r.prediction for r in rows] == [0.2, 0.6, 0.4, 0.9]
    assert [r.label for r in rows] == [0, 1, None, 1]
    text = similar_summary(rows, cutoff=0.5)
    assert "4 most similar rows" in text and "2 of 4 on the adverse side" in text


def test_columns_limit_the_comparison_and_bad_rows_are_refused():
    """Over age and region only: row 1 is (10/20 + 0) / 2 = 1/4 away, rows 2 and 4 (0 + 1) / 2."""
    rows = similar_rows(FRAME, 0, k=1, columns=["age", "region"])
    assert rows[0].row == 1 and rows[0].distance == pytest.approx(0.25)
    with pytest.raises(InputError, match="outside the data"):
        similar_rows(FRAME, 5)
    with pytest.raises(InputError, match="lacks column"):
        similar_rows(FRAME, 0, columns=["shoe_size"])
    with pytest.raises(InputError, match="scores hold"):
        similar_rows(FRAME, 0, scores=[0.1])
