"""Exact SHAP values of linear models, in closed form.

For a model that is linear in its model-space inputs, f(z) = beta . z + b, and a background
treated as independent of the row (interventional form), the SHAP value of model column j is

    phi_j = beta_j * (z_j - mean_bg z_j)          (Lundberg and Lee 2017, section 5, "Linear SHAP")

and the base value is f(mean_bg z) = mean_bg f(z). Summing phi over the model columns a raw
column becomes is exact here: the model is additive across columns, so the sum equals the Shapley
value of the raw column played as one player. GLMs are explained on their link scale (log of the
mean), where they are linear; classifiers on their margin.
"""

from __future__ import annotations

import numpy as np
from sklearn.svm import LinearSVC, LinearSVR

# Estimators outside sklearn.linear_model whose output is linear in model space.
_OTHER_LINEAR = (LinearSVC, LinearSVR)


def is_linear_model(est) -> bool:
    """True for fitted scikit-learn linear models (coef_ and intercept_, linear margin)."""
    module = type(est).__module__
    linear = module.startswith("sklearn.linear_model") or isinstance(est, _OTHER_LINEAR)
    return linear and hasattr(est, "coef_") and hasattr(est, "intercept_")


def coefficients(adapter) -> tuple[np.ndarray, float]:
    """(beta, intercept) of the explained output of ``adapter``, in model space."""
    est = adapter.final_estimator
    coef = np.atleast_2d(np.asarray(est.coef_, dtype=float))
    intercept = np.atleast_1d(np.asarray(est.intercept_, dtype=float))
    if adapter.classes and coef.shape[0] > 1:
        k = adapter.class_index
        return coef[k], float(intercept[k])
    beta, b = coef[0], float(intercept[0])
    if adapter.classes and adapter.class_index == 0:
        # one margin row means "class 1 vs class 0": the class of interest 0 flips its sign
        return -beta, -b
    return beta, b


def linear_values(adapter, z_rows: np.ndarray, z_background: np.ndarray):
    """Model-space SHAP values (n, m) and the base value."""
    beta, b = coefficients(adapter)
    centre = z_background.mean(axis=0)
    values = (z_rows - centre) * beta
    return values, float(centre @ beta + b)
