"""Reference checks for workbench.engine.interactions: Friedman's H-statistic.

Source: Friedman and Popescu (2008), "Predictive learning via rule ensembles", Ann. Appl. Stat.
2(3), section 8, eq. 44 (pairwise H^2_jk) and eq. 46 (overall H^2_j).
"""

import numpy as np
import pandas as pd
import pytest
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.ensemble import HistGradientBoostingRegressor
from sklearn.inspection import partial_dependence as sk_partial_dependence

from workbench.engine import effects, interactions
from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import InputError
from workbench.engine.interactions import h_statistics


class FormulaRegressor(RegressorMixin, BaseEstimator):
    """A known function of the columns dressed as a fitted scikit-learn regressor."""

    def __init__(self, formula="add"):
        self.formula = formula

    def fit(self, X, y=None):
        self.feature_names_in_ = np.asarray(X.columns, dtype=object)
        self.n_features_in_ = X.shape[1]
        return self

    def predict(self, X):
        a = np.asarray(X, dtype=float)
        x1, x2, x3 = a[:, 0], a[:, 1], a[:, 2]
        return {
            "one": x1,
            "add": x1 + x2,
            "mul": x1 * x2,
            "mix": x1 + x2 + x1 * x2,
            "mul_plus": x1 * x2 + x3,
            "weak_and_strong": 0.1 * x1 * x2 + 3 * x3 + x2 * x3,
        }[self.formula]


@pytest.fixture(scope="module")
def uniform():
    rng = np.random.default_rng(42)
    n = 2000
    return pd.DataFrame({c: rng.uniform(-1, 1, n) for c in ("x1", "x2", "x3")})


def _h2(formula, X, **kw):
    return h_statistics(
        ModelAdapter(FormulaRegressor(formula).fit(X)), X, sample=len(X), screen=None, **kw
    )


def test_additive_function_has_no_interaction(uniform):
    """f = x1 + x2 with independent U(-1, 1) inputs: H^2_12 = 0 and every H^2_j = 0 (Friedman
    and Popescu 2008, eqs. 44 and 46: an additive f leaves nothing for the interaction)."""
    res = _h2("add", uniform)
    assert res.h2_pairs[0, 1] == pytest.approx(0.0, abs=1e-12)
    np.testing.assert_allclose(res.h2_overall, 0.0, atol=1e-12)


def test_pair_without_any_effect_has_h_zero_not_noise(uniform):
    """f = x1: the pair (x2, x3) has no joint effect at all; eq. 44 is 0/0 there, which we report
    as 0 (no interaction) rather than rounding noise over rounding noise (our convention,
    documented in workbench.engine.interactions)."""
    res = _h2("one", uniform.iloc[:300])
    assert res.h2_pairs[1, 2] == 0.0
    assert np.isnan(res.h2_pairs[0, 0])


def test_pure_product_is_all_interaction(uniform):
    """f = x1 x2 with independent U(-1, 1) inputs: the one-way PD functions vanish (E x = 0),
    so H^2_12 = 1 and H^2_1 = H^2_2 = 1 (Friedman and Popescu 2008, eqs. 44 and 46); sampling
    tolerance on 2000 points. x3 is unused: its overall H^2 is 0 and its pairs have no effect."""
    res = _h2("mul", uniform)
    assert res.h2_pairs[0, 1] == pytest.approx(1.0, abs=0.02)
    assert res.h2_overall[:2] == pytest.approx([1.0, 1.0], abs=0.02)
    assert res.h2_overall[2] == pytest.approx(0.0, abs=1e-12)
    assert res.h_pairs[0, 1] == pytest.approx(np.sqrt(res.h2_pairs[0, 1]))


def test_mixed_function_gives_one_seventh(uniform):
    """f = x1 + x2 + x1 x2 with independent U(-1, 1) inputs: H^2_12 = E[(x1 x2)^2] / E[f^2]
    = (1/9) / (1/3 + 1/3 + 1/9) = 1/7 (Friedman and Popescu 2008, eq. 44, worked by hand);
    within sampling tolerance on 2000 points. The overall H^2 of x1 is also 1/7 (eq. 46)."""
    res = _h2("mix", uniform)
    assert res.h2_pairs[0, 1] == pytest.approx(1 / 7, abs=0.02)
    assert res.h2_overall[0] == pytest.approx(1 / 7, abs=0.02)
    assert res.ranked_pairs()[0][:2] == ("x1", "x2")


def test_unnormalised_strength_is_the_rms_of_the_interaction_part(uniform):
    """The interaction part of f = x1 + x2 + x1 x2 (and of f = x1 x2) is x1 x2, whose root mean
    square with independent U(-1, 1) inputs is sqrt(E x1^2 E x2^2) = 1/3, worked by hand from
    the numerator of Friedman and Popescu 2008, eq. 44; sampling tolerance on 2000 points.
    An additive f has none."""
    for formula in ("mix", "mul"):
        res = _h2(formula, uniform)
        assert res.pair_strength[0, 1] == pytest.approx(1 / 3, abs=0.02)
        assert res.ranked_strengths()[0][:2] == ("x1", "x2")
    assert _h2("add", uniform).pair_strength[0, 1] == pytest.approx(0.0, abs=1e-9)


def test_strength_ranks_pairs_by_how_much_they_move_the_output(uniform):
    """f = 0.1 x1 x2 + 3 x3 + x2 x3, independent U(-1, 1) inputs, worked by hand from eq. 44 of
    Friedman and Popescu 2008: the pair (x1, x2) is all interaction, H^2_12 = 1, but its part
    0.1 x1 x2 has rms 0.1/3; the pair (x2, x3) has the part x2 x3 (rms 1/3) inside a large joint
    effect, H^2_23 = (1/9) / (3 + 1/9) = 1/28. H ranks (x1, x2) first, the unnormalised
    strength (x2, x3)."""
    res = _h2("weak_and_strong", uniform)
    # the sample means of x1 and x3 (about 0.02 on 2000 points) leak the strong x2 x3 term into
    # F_2, which is large next to the weak pair's 0.1 x1 x2: a wide tolerance on H^2_12 alone
    assert res.h2_pairs[0, 1] == pytest.approx(1.0, abs=0.15)
    assert res.h2_pairs[1, 2] == pytest.approx(1 / 28, abs=0.01)
    assert res.pair_strength[0, 1] == pytest.approx(0.1 / 3, abs=0.003)
    assert res.pair_strength[1, 2] == pytest.approx(1 / 3, abs=0.02)
    assert res.ranked_pairs()[0][:2] == ("x1", "x2")
    assert res.ranked_strengths()[0][:2] == ("x2", "x3")


def test_screening_computes_pairs_among_the_strongest_only(uniform):
    """f = x1 x2 + x3: overall H^2 of x1 and x2 is (1/9) / (1/9 + 1/3) = 1/4 (eq. 46), of x3 is
    0, so screening to 2 features computes only the pair (x1, x2)."""
    X = uniform.iloc[:600]
    res = h_statistics(ModelAdapter(FormulaRegressor("mul_plus").fit(X)), X, sample=600, screen=2)
    assert res.h2_overall[:2] == pytest.approx([0.25, 0.25], abs=0.04)
    assert res.screened == ["x1", "x2"]
    assert np.isfinite(res.h2_pairs[0, 1]) and res.h2_pairs[0, 1] == res.h2_pairs[1, 0]
    assert np.isnan(res.h2_pairs[0, 2]) and np.isnan(res.h2_pairs[1, 2])
    assert res.sample == 600 and res.screen == 2


def test_equals_the_definition_built_from_sklearn_partial_dependence():
    """H^2 from eqs. 44 and 46 with each partial dependence function computed by
    sklearn.inspection.partial_dependence (brute) on the sample itself, for a boosted model
    with interactions: equal to 1e-9."""
    rng = np.random.default_rng(0)
    n = 400
    X = pd.DataFrame({"a": rng.normal(size=n), "b": rng.normal(size=n), "c": rng.normal(size=n)})
    y = X["a"] * X["b"] + np.sin(X["c"]) + 0.1 * rng.normal(size=n)
    model = HistGradientBoostingRegressor(max_iter=30, random_state=0).fit(X, y)
    res = h_statistics(ModelAdapter(model), X, sample=20, seed=1, screen=None)
    pos = np.sort(np.random.default_rng(1).choice(n, 20, replace=False))
    S = X.iloc[pos].reset_index(drop=True)

    def pd_at_sample(cols):
        pdr = sk_partial_dependence(
            model,
            S,
            cols,
            kind="average",
            method="brute",
            custom_values={c: np.unique(S[c]) for c in cols},
        )
        grids = pdr["grid_values"]
        where = tuple(np.searchsorted(g, S[c]) for g, c in zip(grids, cols, strict=True))
        v = pdr["average"][0][where]
        return v - v.mean()

    f = model.predict(S)
    f = f - f.mean()
    one = {c: pd_at_sample([c]) for c in "abc"}
    rest = {
        "a": pd_at_sample(["b", "c"]),
        "b": pd_at_sample(["a", "c"]),
        "c": pd_at_sample(["a", "b"]),
    }
    for j, c in enumerate("abc"):
        expected = np.sum((f - one[c] - rest[c]) ** 2) / np.sum(f**2)
        assert res.h2_overall[j] == pytest.approx(expected, abs=1e-9)
    joint = pd_at_sample(["a", "b"])
    expected = np.sum((joint - one["a"] - one["b"]) ** 2) / np.sum(joint**2)
    assert res.h2_pairs[0, 1] == pytest.approx(expected, abs=1e-9)


def test_batched_equals_row_by_row(uniform, monkeypatch):
    """Stacked model calls give the same H as one sample row per call (batching is ours)."""
    X = uniform.iloc[:200]
    adapter = ModelAdapter(FormulaRegressor("mix").fit(X))
    big = h_statistics(adapter, X, sample=50, seed=3)
    monkeypatch.setattr(interactions, "CHUNK_ROWS", 1)
    monkeypatch.setattr(effects, "CHUNK_ROWS", 1)
    small = h_statistics(adapter, X, sample=50, seed=3)
    np.testing.assert_allclose(big.h2_overall, small.h2_overall, atol=1e-12)
    np.testing.assert_allclose(big.h2_pairs, small.h2_pairs, atol=1e-12)


def test_bad_input(uniform):
    adapter = ModelAdapter(FormulaRegressor("add").fit(uniform))
    with pytest.raises(InputError, match="not an input column"):
        h_statistics(adapter, uniform, features=["x1", "nope"])
    with pytest.raises(InputError, match="at least 2"):
        h_statistics(adapter, uniform, sample=1)


def test_background_keeps_an_additive_function_at_zero(uniform):
    """With a background smaller than the sample, both one-way functions of an additive f are
    still exact up to a constant, so H^2 = 0 exactly (Friedman and Popescu 2008, eqs. 44 and 46):
    a check that the two matrices of the background path are read the right way round."""
    X = uniform.iloc[:200]
    adapter = ModelAdapter(FormulaRegressor("add").fit(X))
    res = h_statistics(adapter, X, sample=200, screen=None, background=30)
    assert res.background == 30
    np.testing.assert_allclose(res.h2_overall, 0.0, atol=1e-12)
    assert res.h2_pairs[0, 1] == pytest.approx(0.0, abs=1e-12)


def test_background_sample_estimates_the_same_h(uniform):
    """A background of 300 of 2000 sample rows: H^2_12 of f = x1 + x2 + x1 x2 is still 1/7
    within sampling tolerance (Friedman and Popescu 2008, eq. 44, worked by hand)."""
    adapter = ModelAdapter(FormulaRegressor("mix").fit(uniform))
    res = h_statistics(adapter, uniform, sample=2000, screen=None, background=300)
    assert res.background == 300
    assert res.h2_pairs[0, 1] == pytest.approx(1 / 7, abs=0.03)
    assert res.h2_overall[0] == pytest.approx(1 / 7, abs=0.03)
    assert res.h2_overall[2] == pytest.approx(0.0, abs=1e-12)
