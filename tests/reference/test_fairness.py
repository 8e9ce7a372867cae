"""Reference checks for workbench.engine.fairness against hand computations."""

import numpy as np
import pytest

from workbench.engine.errors import InputError
from workbench.engine.fairness import CAUTION, adverse_impact


def test_adverse_impact_hand_example():
    """Uniform Guidelines on Employee Selection Procedures, 29 CFR 1607.4(D), four-fifths rule,
    worked by hand: group A 48 of 80 favourable (.60), B 12 of 30 (.40), C 22 of 40 (.55).
    Ratios to A: 1, .4/.6 = .667 (below .8, flagged), .55/.6 = .917."""
    fav = np.r_[np.ones(48), np.zeros(32), np.ones(12), np.zeros(18), np.ones(22), np.zeros(18)]
    grp = ["A"] * 80 + ["B"] * 30 + ["C"] * 40
    r = adverse_impact(fav.astype(bool), grp)
    assert r.groups == ["A", "B", "C"] and r.reference_group == "A"
    np.testing.assert_array_equal(r.counts, [80, 30, 40])
    np.testing.assert_array_equal(r.favourable, [48, 12, 22])
    np.testing.assert_allclose(r.rates, [0.6, 0.4, 0.55])
    np.testing.assert_allclose(r.ratios, [1, 2 / 3, 0.55 / 0.6])
    np.testing.assert_array_equal(r.flagged, [False, True, False])
    assert r.as_frame().shape == (3, 6)


def test_adverse_impact_threshold_missing_groups_and_caution():
    """Hand example: rates .5 (x) and .45 (y), ratio .9: flagged at threshold .95, not at .8
    (the 29 CFR 1607.4(D) default). A row without group is left out and counted."""
    fav = [1] * 10 + [0] * 10 + [1] * 9 + [0] * 11 + [1]
    grp = ["x"] * 20 + ["y"] * 20 + [None]
    assert not adverse_impact(fav, grp).flagged.any()
    r = adverse_impact(fav, grp, threshold=0.95)
    np.testing.assert_array_equal(r.flagged, [False, True])
    assert r.ratios[1] == pytest.approx(0.9)
    assert r.rows_without_group == 1
    assert "screening indicator" in CAUTION and "not a legal finding" in CAUTION
    assert "compliance" in r.caution
    with pytest.raises(InputError):
        adverse_impact([1, 0], ["x", "x"])
