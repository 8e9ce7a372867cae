"""The adapter's scores against the estimators' own outputs on scikit-learn's bundled datasets.

Source: scikit-learn's documented estimator API (``decision_function``, ``predict_proba``,
``predict``) and the logistic function p = 1 / (1 + exp(-margin)) for logistic regression
(Hastie, Tibshirani and Friedman, The Elements of Statistical Learning, 2nd ed., section 4.4).
"""

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_breast_cancer, load_diabetes, load_iris
from sklearn.ensemble import HistGradientBoostingRegressor, RandomForestClassifier
from sklearn.linear_model import LinearRegression, LogisticRegression, PoissonRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, OrdinalEncoder, StandardScaler

from workbench.engine.adapter import ModelAdapter


@pytest.fixture(scope="module")
def cancer():
    return load_breast_cancer(return_X_y=True, as_frame=True)


def test_binary_logistic_margin_is_decision_function_and_probability_is_logistic(cancer):
    X, y = cancer
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X, y)
    a = ModelAdapter(model)
    assert a.task == "binary" and a.output_kind == "log-odds" and a.positive_class == 1
    np.testing.assert_allclose(a.score(X), model.decision_function(X), rtol=0, atol=1e-12)
    np.testing.assert_allclose(a.probability(X), model.predict_proba(X)[:, 1], rtol=0, atol=1e-12)
    np.testing.assert_allclose(a.probability(X), expit(a.score(X)), rtol=0, atol=1e-12)


def test_binary_other_class_of_interest_flips_the_margin(cancer):
    X, y = cancer
    model = LogisticRegression(max_iter=5000).fit(X, y)
    a = ModelAdapter(model, positive_class=0)
    np.testing.assert_allclose(a.score(X), -model.decision_function(X), atol=1e-12)
    np.testing.assert_allclose(a.probability(X), model.predict_proba(X)[:, 0], atol=1e-12)


def test_forest_explains_probability(cancer):
    X, y = cancer
    model = RandomForestClassifier(n_estimators=10, random_state=0).fit(X, y)
    a = ModelAdapter(model)
    assert a.output_kind == "probability"
    np.testing.assert_allclose(a.score(X), model.predict_proba(X)[:, 1], atol=1e-12)


def test_multiclass_class_of_interest():
    X, y = load_iris(return_X_y=True, as_frame=True)
    model = LogisticRegression(max_iter=2000).fit(X, y)
    for k in range(3):
        a = ModelAdapter(model, positive_class=k)
        assert a.task == "multiclass" and a.class_index == k
        np.testing.assert_allclose(a.score(X), model.decision_function(X)[:, k], atol=1e-12)
        np.testing.assert_allclose(a.probability(X), model.predict_proba(X)[:, k], atol=1e-12)


def test_regression_value():
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    model = LinearRegression().fit(X, y)
    a = ModelAdapter(model)
    assert a.task == "regression" and a.output_kind == "value"
    np.testing.assert_allclose(a.score(X), model.predict(X), atol=1e-9)


def test_log_link_regressors_explain_log_of_mean():
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    counts = np.round(y / 50)
    for model in (PoissonRegressor(max_iter=500), HistGradientBoostingRegressor(loss="poisson", max_iter=20)):
        model.fit(X, counts)
        a = ModelAdapter(model)
        assert a.task == "count" and a.output_kind == "log of the mean"
        np.testing.assert_allclose(a.score(X), np.log(model.predict(X)), atol=1e-9)
        np.testing.assert_allclose(a.response_from_output(a.score(X)), model.predict(X), rtol=1e-9)


def test_column_map_matches_feature_names_out():
    """The raw -> model column map agrees with ColumnTransformer.get_feature_names_out.

    Source: scikit-learn's ColumnTransformer documentation: output names are
    ``<transformer name>__<feature>`` and OneHotEncoder names are ``<input>_<category>``.
    """
    rng = np.random.default_rng(0)
    n = 300
    df = pd.DataFrame({
        "age": rng.integers(18, 80, n).astype(float),
        "region": rng.choice(["north", "south", "east"], n),
        "plan": rng.choice(["basic", "plus"], n),
        "income": rng.normal(50, 10, n),
        "unused": rng.normal(size=n),
        "grade": rng.choice(["a", "b", "c", "d"], n),
    })
    y = (df["age"] > 40).astype(int)
    ct = ColumnTransformer([
        ("num", make_pipeline(StandardScaler()), ["age", "income"]),
        ("onehot", OneHotEncoder(handle_unknown="ignore"), ["region", "plan"]),
        ("ord", OrdinalEncoder(), ["grade"]),
        ("gone", "drop", ["unused"]),
    ])
    model = make_pipeline(ct, LogisticRegression(max_iter=1000)).fit(df, y)
    a = ModelAdapter(model)
    names = list(ct.get_feature_names_out())
    assert a.model_columns == names
    expected = {
        "age": ["num__age"], "income": ["num__income"],
        "region": [n for n in names if n.startswith("onehot__region_")],
        "plan": [n for n in names if n.startswith("onehot__plan_")],
        "grade": ["ord__grade"], "unused": [],
    }
    assert a.column_map_dict == {k: expected[k] for k in a.input_columns}
    assert set(a.categorical_columns) == {"region", "plan", "grade"}
    # the aggregation matrix sums model-space columns back to raw columns
    m = a.column_map.aggregation_matrix()
    assert m.shape == (len(names), len(a.input_columns))
    assert np.all(m.sum(axis=1) == 1)


def test_unmappable_step_is_reported():
    from sklearn.decomposition import PCA

    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    model = make_pipeline(StandardScaler(), PCA(3), LogisticRegression()).fit(X, y)
    a = ModelAdapter(model)
    assert not a.mappable
    assert any("model-agnostic" in f.message for f in a.findings)
