"""Exact tree SHAP for scikit-learn tree models, in numba.

Public API::

    supports(estimator) -> bool
    ensemble = from_estimator(estimator)          # TypeError if unsupported
    ensemble.n_features, ensemble.n_outputs, ensemble.output_kind
    shap_values(ensemble, X, *, method="path", background=None, algorithm="auto",
                progress=None, cancel=None) -> TreeShapResult
    interaction_values(ensemble, X, *, progress=None, cancel=None) -> TreeInteractionResult
    raw_output(ensemble, X) -> (n, n_outputs)
    model_matrix(ensemble, frame) -> X          # only for HistGradientBoosting fitted on a
                                                # DataFrame with categorical columns

X is the float64 matrix the estimator's ``predict`` receives (NaN = missing; for
HistGradientBoosting categorical columns the category codes).
"""

from workbench.engine.treeshap.api import (
    compile_kernels,
    interaction_values,
    model_matrix,
    raw_output,
    shap_values,
)
from workbench.engine.treeshap.ensemble import TreeEnsemble
from workbench.engine.treeshap.readers import from_estimator, supports
from workbench.engine.treeshap.results import TreeInteractionResult, TreeShapResult

__all__ = [
    "TreeEnsemble",
    "TreeInteractionResult",
    "TreeShapResult",
    "compile_kernels",
    "from_estimator",
    "interaction_values",
    "model_matrix",
    "raw_output",
    "shap_values",
    "supports",
]
