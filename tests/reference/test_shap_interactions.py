"""SHAP interaction strengths per raw column against shap's TreeExplainer.

Sources: Lundberg et al. 2020, "From local explanations to global understanding with
explainable AI for trees", Nature Machine Intelligence 2:56-67 (interaction values sum over j
to the SHAP values); shap.TreeExplainer.shap_interaction_values as the reference library on
numeric splits.
"""

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import GradientBoostingClassifier, RandomForestRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder

from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain
from workbench.engine.errors import InputError
from workbench.engine.shap_interactions import shap_interaction_strength


def test_equals_shap_interaction_values_on_numeric_splits():
    shap = pytest.importorskip("shap")
    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    X = X.iloc[:, :6]
    model = GradientBoostingClassifier(n_estimators=20, max_depth=3, random_state=0).fit(X, y)
    a = ModelAdapter(model)
    res = shap_interaction_strength(a, X, sample=40, seed=1)
    ref = shap.TreeExplainer(model).shap_interaction_values(X.iloc[res.rows])
    np.testing.assert_allclose(res.values, ref, atol=1e-6)
    # rows sum to the path-dependent SHAP values (local accuracy of the interaction split)
    attr = explain(a, X.iloc[res.rows], form="path")
    np.testing.assert_allclose(res.values.sum(axis=2), attr.values, atol=1e-6)


def test_one_hot_parts_are_summed_into_their_raw_column():
    rng = np.random.default_rng(0)
    n = 400
    df = pd.DataFrame({"x": rng.normal(size=n), "c": rng.choice(["a", "b", "c"], n)})
    y = df["x"] * (df["c"] == "b") + rng.normal(0, 0.1, n)
    ct = ColumnTransformer([("oh", OneHotEncoder(sparse_output=False), ["c"])], remainder="passthrough")
    model = make_pipeline(ct, RandomForestRegressor(n_estimators=10, max_depth=4, random_state=0)).fit(df, y)
    a = ModelAdapter(model)
    res = shap_interaction_strength(a, df, sample=50)
    assert res.values.shape == (50, 2, 2)
    attr = explain(a, df.iloc[res.rows], form="path")
    np.testing.assert_allclose(res.values.sum(axis=2), attr.values, atol=1e-6)
    np.testing.assert_allclose(res.matrix, res.matrix.T)
    assert np.isnan(np.diag(res.matrix)).all() and (res.main_effects > 0).all()
    assert res.matrix[0, 1] > 0.05  # the planted x by c interaction


def test_non_tree_model_is_refused():
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    a = ModelAdapter(LogisticRegression(max_iter=200).fit(X.iloc[:, :3], y))
    with pytest.raises(InputError):
        shap_interaction_strength(a, X.iloc[:, :3])
