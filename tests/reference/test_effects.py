"""Reference checks for workbench.engine.effects: PD/ICE and pair maps against
sklearn.inspection.partial_dependence, ALE against the closed form for a linear model."""

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_diabetes
from sklearn.ensemble import HistGradientBoostingRegressor, RandomForestClassifier
from sklearn.inspection import partial_dependence as sk_partial_dependence
from sklearn.linear_model import LinearRegression, LogisticRegression, PoissonRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.engine import effects
from workbench.engine.adapter import ModelAdapter
from workbench.engine.effects import (
    accumulated_local_effects,
    centred,
    feature_grid,
    pair_dependence,
    partial_dependence,
)
from workbench.engine.errors import InputError


@pytest.fixture(scope="module")
def lending():
    rng = np.random.default_rng(0)
    n = 300
    X = pd.DataFrame(
        {
            "income": rng.normal(40, 9, n),
            "debt": rng.uniform(0, 0.8, n),
            "region": rng.choice(["north", "south", "west"], n),
        }
    )
    logit = -1 + 3 * X["debt"] - 0.05 * (X["income"] - 40) + (X["region"] == "west") * 0.7
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    ct = ColumnTransformer(
        [("num", StandardScaler(), ["income", "debt"]), ("cat", OneHotEncoder(), ["region"])]
    )
    model = make_pipeline(ct, LogisticRegression()).fit(X, y)
    return model, X


def _sklearn(model, X, feature, grid, method, **kw):
    return sk_partial_dependence(
        model,
        X,
        [feature],
        kind="both",
        method="brute",
        response_method=method,
        custom_values={feature: grid},
        **kw,
    )


def test_pd_and_ice_equal_sklearn_on_both_scales(lending):
    """PD and ICE equal sklearn.inspection.partial_dependence(kind="both", method="brute") on
    the same grid: the response scale against response_method="predict_proba", the log-odds
    against response_method="decision_function" (Friedman 2001, section 8.2; Goldstein et al.
    2015 for ICE; the sklearn user guide, "Partial dependence and ICE plots")."""
    model, X = lending
    adapter = ModelAdapter(model)
    grid = np.linspace(25, 55, 7)
    for scale, method in (("response", "predict_proba"), ("output", "decision_function")):
        ours = partial_dependence(adapter, X, "income", grid=grid, ice_rows=None, scale=scale)
        theirs = _sklearn(model, X, "income", grid, method)
        np.testing.assert_allclose(ours.pd, theirs["average"][0], rtol=0, atol=1e-10)
        np.testing.assert_allclose(ours.ice, theirs["individual"][0], rtol=0, atol=1e-10)
        np.testing.assert_allclose(ours.grid, theirs["grid_values"][0])


def test_categorical_pd_equals_sklearn(lending):
    """A text column: the grid is its observed levels and PD/ICE equal sklearn's with
    categorical_features (sklearn user guide, "Partial dependence and ICE plots")."""
    model, X = lending
    ours = partial_dependence(ModelAdapter(model), X, "region", ice_rows=None, scale="response")
    assert ours.kind == "categorical"
    assert list(ours.grid) == ["north", "south", "west"]
    theirs = _sklearn(
        model,
        X,
        "region",
        np.array(["north", "south", "west"], dtype=object),
        "predict_proba",
        categorical_features=["region"],
    )
    np.testing.assert_allclose(ours.pd, theirs["average"][0], atol=1e-10)
    np.testing.assert_allclose(ours.ice, theirs["individual"][0], atol=1e-10)
    assert ours.counts.sum() == len(X)


def test_tree_regressor_pd_equals_sklearn_brute():
    """A gradient-boosted regressor on sklearn.datasets.load_diabetes: PD and ICE on the default
    grid equal sklearn's brute method given that grid (sklearn user guide, "Partial dependence
    and ICE plots")."""
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    model = HistGradientBoostingRegressor(max_iter=60, random_state=0).fit(X, y)
    ours = partial_dependence(ModelAdapter(model), X, "bmi", grid_size=15, ice_rows=40, seed=3)
    theirs = _sklearn(model, X, "bmi", ours.grid, "auto")
    np.testing.assert_allclose(ours.pd, theirs["average"][0], atol=1e-10)
    np.testing.assert_allclose(ours.ice, theirs["individual"][0][ours.ice_rows], atol=1e-10)
    assert ours.ice.shape == (40, ours.grid.size) and ours.rows_used == len(X)


def test_log_link_response_pd_equals_sklearn_predict():
    """Poisson GLM: the response-scale PD is the mean predicted count, as sklearn's predict
    (sklearn user guide, "Partial dependence and ICE plots")."""
    rng = np.random.default_rng(1)
    X = pd.DataFrame({"a": rng.uniform(size=200), "b": rng.uniform(size=200)})
    model = PoissonRegressor().fit(X, rng.poisson(np.exp(X["a"] + 0.5 * X["b"])))
    grid = np.array([0.1, 0.5, 0.9])
    ours = partial_dependence(ModelAdapter(model), X, "a", grid=grid, scale="response")
    theirs = _sklearn(model, X, "a", grid, "auto")
    np.testing.assert_allclose(ours.pd, theirs["average"][0], atol=1e-10)


def test_integer_codes_and_native_categories_equal_sklearn():
    """Integer-coded levels one-hot encoded, and pandas categories read natively by
    HistGradientBoosting: the grid keeps the column's kind and PD equals sklearn's
    (sklearn user guide, "Partial dependence and ICE plots")."""
    rng = np.random.default_rng(5)
    n = 300
    X = pd.DataFrame({"grade": rng.integers(1, 5, n), "x": rng.normal(size=n)})
    y = (X["grade"] * 0.5 + X["x"] + rng.normal(size=n) > 1.5).astype(int)
    ct = ColumnTransformer([("cat", OneHotEncoder(), ["grade"]), ("num", "passthrough", ["x"])])
    model = make_pipeline(ct, LogisticRegression()).fit(X, y)
    ours = partial_dependence(ModelAdapter(model), X, "grade", ice_rows=None, scale="response")
    assert ours.kind == "categorical" and list(ours.grid) == [1, 2, 3, 4]
    theirs = _sklearn(
        model, X, "grade", np.array([1, 2, 3, 4]), "predict_proba", categorical_features=["grade"]
    )
    np.testing.assert_allclose(ours.pd, theirs["average"][0], atol=1e-10)

    Xc = X.assign(grade=X["grade"].map({1: "a", 2: "b", 3: "c", 4: "d"}).astype("category"))
    hgb = HistGradientBoostingRegressor(max_iter=20, categorical_features="from_dtype").fit(Xc, y)
    ours = partial_dependence(ModelAdapter(hgb), Xc, "grade", ice_rows=None)
    theirs = _sklearn(
        hgb,
        Xc,
        "grade",
        np.array(["a", "b", "c", "d"], dtype=object),
        "auto",
        categorical_features=["grade"],
    )
    np.testing.assert_allclose(ours.pd, theirs["average"][0], atol=1e-10)
    with pytest.raises(InputError, match="not categories"):
        partial_dependence(ModelAdapter(hgb), Xc, "grade", grid=["a", "z"])


def test_pair_map_equals_sklearn_two_way():
    """Two-feature PD equals sklearn's partial_dependence on a feature pair with the same grids
    (Friedman 2001, section 8.2). Classifier without a margin: the probability."""
    rng = np.random.default_rng(2)
    X = pd.DataFrame(
        {"a": rng.normal(size=150), "b": rng.normal(size=150), "c": rng.normal(size=150)}
    )
    y = (X["a"] * X["b"] + X["c"] > 0).astype(int)
    model = RandomForestClassifier(n_estimators=20, random_state=0).fit(X, y)
    ga, gb = np.array([-1.0, 0.0, 1.0]), np.array([-0.5, 0.5])
    ours = pair_dependence(ModelAdapter(model), X, "a", "b", grid_a=ga, grid_b=gb, rows=None)
    theirs = sk_partial_dependence(
        model, X, ("a", "b"), kind="average", method="brute", custom_values={"a": ga, "b": gb}
    )
    assert ours.values.shape == (3, 2)
    np.testing.assert_allclose(ours.values, theirs["average"][0], atol=1e-10)


def test_centred_ice_starts_at_zero_and_keeps_shape(lending):
    """Centred ICE: each line minus its value at the first grid point (Goldstein et al. 2015,
    J. Comput. Graph. Statist. 24(1), the c-ICE plot)."""
    model, X = lending
    curve = partial_dependence(ModelAdapter(model), X, "debt", ice_rows=25)
    c = curve.centred()
    assert np.all(c[:, 0] == 0)
    np.testing.assert_allclose(c + curve.ice[:, :1], curve.ice)
    np.testing.assert_array_equal(centred(curve.ice), c)


def test_default_grid_rule():
    """Our grid rule (documented in workbench.engine.effects; common practice, no source): the
    unique values when there are at most grid_size of them, as sklearn does; otherwise the
    quantiles at equally spaced probabilities from 5 % to 95 %."""
    few = pd.Series([3.0, 1.0, 2.0, 2.0, np.nan], name="k")
    np.testing.assert_array_equal(feature_grid(few, categorical=False, grid_size=5), [1, 2, 3])
    v = pd.Series(np.random.default_rng(0).exponential(size=1000), name="v")
    grid = feature_grid(v, categorical=False, grid_size=10)
    np.testing.assert_allclose(grid, np.quantile(v, np.linspace(0.05, 0.95, 10)))


def test_batched_chunks_give_the_same_curve(lending, monkeypatch):
    """Scoring one grid point per chunk equals the stacked batch (sequential equals batched)."""
    model, X = lending
    adapter = ModelAdapter(model)
    big = partial_dependence(adapter, X, "income", ice_rows=None)
    monkeypatch.setattr(effects, "CHUNK_ROWS", 1)
    small = partial_dependence(adapter, X, "income", ice_rows=None)
    np.testing.assert_allclose(big.ice, small.ice, atol=1e-12)


def test_ale_of_a_linear_model_is_beta_times_x_centred():
    """For f = b0 + sum_j b_j x_j the first-order ALE of x_j is b_j (x - c) with c the centring
    constant, and the centred estimator averages to zero over the rows (Apley and Zhu 2020,
    J. R. Statist. Soc. B 82(4), section 2.2, eqs. 15-16; numbering from memory)."""
    rng = np.random.default_rng(3)
    n = 2000
    x1 = rng.normal(size=n)
    X = pd.DataFrame({"x1": x1, "x2": 0.8 * x1 + 0.6 * rng.normal(size=n)})  # correlated
    y = 1.5 + 2.5 * X["x1"] - 1.2 * X["x2"]
    model = LinearRegression().fit(X, y)
    ale = accumulated_local_effects(ModelAdapter(model), X, "x1", bins=10)
    beta = model.coef_[0]
    np.testing.assert_allclose(ale.uncentred, beta * (ale.edges - ale.edges[0]), atol=1e-9)
    offset = ale.values - beta * ale.edges
    np.testing.assert_allclose(offset, offset[0], atol=1e-9)
    assert float(ale.counts @ ale.values[1:]) == pytest.approx(0.0, abs=1e-9)
    assert ale.counts.sum() == n and ale.edges.size == 11


def test_ale_local_effects_follow_the_definition():
    """ALE of f = x1 * x2 (Apley and Zhu 2020, eq. 15): the local effect in bin k is the mean over
    its rows of (z_k - z_{k-1}) x2, computed here by hand."""
    from sklearn.base import BaseEstimator, RegressorMixin

    class Product(RegressorMixin, BaseEstimator):
        def fit(self, X, y=None):
            self.feature_names_in_ = np.asarray(X.columns, dtype=object)
            self.n_features_in_ = X.shape[1]
            return self

        def predict(self, X):
            a = np.asarray(X, dtype=float)
            return a[:, 0] * a[:, 1]

    rng = np.random.default_rng(4)
    X = pd.DataFrame({"x1": rng.uniform(size=500), "x2": rng.normal(size=500)})
    ale = accumulated_local_effects(ModelAdapter(Product().fit(X)), X, "x1", bins=5)
    z = ale.edges
    k = np.clip(np.searchsorted(z, X["x1"], side="left"), 1, z.size - 1)
    local = [np.mean((z[b] - z[b - 1]) * X["x2"][k == b]) for b in range(1, z.size)]
    np.testing.assert_allclose(ale.uncentred, np.concatenate([[0], np.cumsum(local)]), atol=1e-12)


def test_bad_features_are_input_errors(lending):
    model, X = lending
    adapter = ModelAdapter(model)
    with pytest.raises(InputError, match="not an input column"):
        partial_dependence(adapter, X, "no_such")
    with pytest.raises(InputError, match="categorical"):
        accumulated_local_effects(adapter, X, "region")
    with pytest.raises(InputError, match="scale"):
        partial_dependence(adapter, X, "income", scale="odds")


def test_progress_rises_and_cancel_stops(lending, monkeypatch):
    """Engine convention (DEVELOPERS.md; no outside source): progress fractions rise to 1 between
    chunks, and a cancel request raises Cancelled."""
    from workbench.engine.errors import Cancelled
    from workbench.engine.importance import permutation_importance
    from workbench.engine.interactions import h_statistics

    model, X = lending
    adapter = ModelAdapter(model)
    monkeypatch.setattr(effects, "CHUNK_ROWS", len(X) * 2)
    seen = []
    partial_dependence(adapter, X, "income", progress=lambda f, m: seen.append(f))
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 2
    y = (X["debt"] > 0.4).astype(int)
    for run in (
        lambda c: partial_dependence(adapter, X, "income", cancel=c),
        lambda c: accumulated_local_effects(adapter, X, "income", cancel=c),
        lambda c: permutation_importance(adapter, X, y, cancel=c),
        lambda c: h_statistics(adapter, X, sample=20, cancel=c),
    ):
        with pytest.raises(Cancelled):
            run(lambda: True)
