"""The linear closed form and local accuracy.

Source: Lundberg and Lee, "A unified approach to interpreting model predictions" (NeurIPS 2017):
section 5.1 ("Linear SHAP": for f(x) = sum_j w_j x_j + b with independent features,
phi_0 = b + sum_j w_j E[x_j] and phi_j = w_j (x_j - E[x_j])) and Property 1 (local accuracy:
f(x) = phi_0 + sum_j phi_j). E is the mean over the background rows. Data: load_diabetes.
"""

import numpy as np
import pytest
from sklearn.datasets import load_diabetes, load_iris
from sklearn.linear_model import LinearRegression, LogisticRegression, Ridge, TweedieRegressor

from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain, select_background


@pytest.fixture(scope="module")
def diabetes():
    return load_diabetes(return_X_y=True, as_frame=True)


def test_closed_form_by_hand(diabetes):
    """phi_j = w_j (x_j - mean x_j), phi_0 = b + w . mean x (Lundberg and Lee 2017, section 5.1)."""
    X, y = diabetes
    model = LinearRegression().fit(X, y)
    rows = X.iloc[:7]
    res = explain(ModelAdapter(model), rows, background=X, background_size="all")
    mean = X.to_numpy().mean(axis=0)
    np.testing.assert_allclose(res.values, model.coef_ * (rows.to_numpy() - mean), atol=1e-9)
    assert res.base_value == pytest.approx(model.intercept_ + model.coef_ @ mean, abs=1e-9)


def test_local_accuracy_on_a_sampled_background(diabetes):
    """Property 1, local accuracy: output = base value + sum of contributions, for every row; and
    the base value is the mean prediction over the named background (Lundberg and Lee 2017)."""
    X, y = diabetes
    model = Ridge(alpha=0.5).fit(X, y)
    res = explain(ModelAdapter(model), X, background=X, background_size=50, seed=11)
    np.testing.assert_allclose(res.output, model.predict(X), atol=1e-9)
    np.testing.assert_allclose(res.residual, 0.0, atol=1e-9)
    bg = select_background(X, 50, seed=11)
    assert res.base_value == pytest.approx(float(model.predict(bg).mean()), abs=1e-9)
    assert res.background_rows == 50 and res.seed == 11


def test_tweedie_glm_on_the_log_link(diabetes):
    """A log-link GLM is linear in eta = log(mean): phi_j = w_j (x_j - mean x_j) on that scale
    (Lundberg and Lee 2017, section 5.1, applied to the linear predictor)."""
    X, y = diabetes
    model = TweedieRegressor(power=1.5, link="log", alpha=1e-3, max_iter=1000).fit(X, y)
    adapter = ModelAdapter(model)
    assert adapter.output_kind == "log of the mean"
    res = explain(adapter, X.iloc[:5], background=X, background_size="all")
    mean = X.to_numpy().mean(axis=0)
    np.testing.assert_allclose(res.values, model.coef_ * (X.iloc[:5].to_numpy() - mean), atol=1e-9)
    np.testing.assert_allclose(res.output, np.log(model.predict(X.iloc[:5])), atol=1e-9)
    np.testing.assert_allclose(res.residual, 0.0, atol=1e-9)


def test_multiclass_uses_the_class_of_interest_row():
    """Multinomial logistic regression on load_iris: the class of interest's margin is linear with
    coefficients coef_[k] (Lundberg and Lee 2017, section 5.1)."""
    X, y = load_iris(return_X_y=True, as_frame=True)
    model = LogisticRegression(max_iter=2000).fit(X, y)
    mean = X.to_numpy().mean(axis=0)
    for k in (0, 2):
        adapter = ModelAdapter(model).with_class(k)
        res = explain(adapter, X.iloc[::30], background=X, background_size="all")
        np.testing.assert_allclose(
            res.values, model.coef_[k] * (X.iloc[::30].to_numpy() - mean), atol=1e-9
        )
        np.testing.assert_allclose(
            res.output, model.decision_function(X.iloc[::30])[:, k], atol=1e-9
        )
        np.testing.assert_allclose(res.residual, 0.0, atol=1e-9)
