"""Reference checks for workbench.engine.stability (PSI) against hand computations.

The PSI formula sum (a - e) ln(a / e) and the 0.1 / 0.25 thresholds are common practice,
no source."""

import numpy as np
import pandas as pd
import pytest

from workbench.engine.errors import InputError
from workbench.engine.stability import psi, psi_status


def test_psi_categorical_hand_example():
    """Common practice, no source (formula). Worked by hand: reference shares a .5, b .3, c .2;
    new shares .4, .3, .3: PSI = (.4-.5) ln(.8) + 0 + (.3-.2) ln(1.5) = .0223144 + .0405465."""
    e = ["a"] * 50 + ["b"] * 30 + ["c"] * 20
    a = ["a"] * 40 + ["b"] * 30 + ["c"] * 30
    r = psi(e, a, categorical=True)
    assert r.value == pytest.approx(-0.1 * np.log(0.8) + 0.1 * np.log(1.5))
    assert list(r.table["bin"]) == ["a", "b", "c"]
    np.testing.assert_allclose(r.table["expected_share"], [0.5, 0.3, 0.2])
    assert r.table["contribution"][1] == 0.0


def test_psi_numeric_hand_example():
    """Common practice, no source (formula); bins at the reference's quantiles. Worked by hand:
    reference 1..10, 5 bins, numpy's linear quantiles give edges 2.8, 4.6, 6.4, 8.2, so each
    reference bin holds 2 of 10. New sample 1,1,1,3,5,7,9,9,9,10 gives shares .3 .1 .1 .1 .4:
    PSI = .1 ln 1.5 + 3 (.1) ln 2 + .2 ln 2 = .0405465 + .2079442 + .1386294 = .3871201."""
    r = psi(np.arange(1, 11), [1, 1, 1, 3, 5, 7, 9, 9, 9, 10], bins=5)
    np.testing.assert_allclose(r.edges, [2.8, 4.6, 6.4, 8.2])
    np.testing.assert_allclose(r.table["expected_share"], [0.2] * 5)
    np.testing.assert_allclose(r.table["actual_share"], [0.3, 0.1, 0.1, 0.1, 0.4])
    assert r.value == pytest.approx(0.1 * np.log(1.5) + 0.5 * np.log(2))
    assert r.value == pytest.approx(0.3871201, abs=1e-7)
    assert psi_status(r.value) == "fail"


def test_psi_empty_bin_uses_epsilon_and_missing_bin():
    """Hand computation with the documented epsilon 1e-4 for an empty bin: reference levels
    x .5, y .5; new x 1.0, y 0 -> (1 - .5) ln(1/.5) + (1e-4 - .5) ln(1e-4/.5).
    Missing values form their own bin: reference 1 of 4 missing, new 0 of 4."""
    r = psi(["x", "y"], ["x", "x"], categorical=True)
    expected = 0.5 * np.log(2) + (1e-4 - 0.5) * np.log(1e-4 / 0.5)
    assert r.value == pytest.approx(expected)
    m = psi(pd.Series(["x", "y", "y", None]), ["x", "y", "y", "y"], categorical=True)
    assert list(m.table["bin"]) == ["x", "y", "(missing)"]
    by_hand = 0.0 + (0.75 - 0.5) * np.log(0.75 / 0.5) + (1e-4 - 0.25) * np.log(1e-4 / 0.25)
    assert m.value == pytest.approx(by_hand)


def test_psi_same_distribution_is_small_and_status_thresholds():
    """Identical samples give 0; thresholds 0.1 / 0.25 (common practice, no source), with the
    boundaries going to the worse status."""
    x = np.random.default_rng(0).normal(size=5000)
    assert psi(x, x).value == pytest.approx(0.0, abs=1e-12)
    assert psi(x, x).table.shape[0] == 10
    assert [psi_status(v) for v in (0.05, 0.1, 0.2, 0.25, 0.4)] == [
        "pass", "warn", "warn", "fail", "fail"]
    assert psi_status(0.15, warn=0.2, fail=0.3) == "pass"
    with pytest.raises(InputError):
        psi_status(float("nan"))
    with pytest.raises(InputError):
        psi(["a", "b"], ["a", "c"])
