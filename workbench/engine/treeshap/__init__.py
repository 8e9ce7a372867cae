"""Exact tree SHAP for scikit-learn tree models, in numba (nogil, parallel over rows, cached).

Public API::

    supports(estimator) -> bool                 # the fitted final estimator of a pipeline
    ensemble = from_estimator(estimator)        # TypeError if unsupported
    ensemble.n_features, ensemble.n_outputs, ensemble.output_kind, ensemble.output_names
    shap_values(ensemble, X, *, method="path" | "interventional", background=None,
                algorithm="auto" | "classic", progress=None, cancel=None) -> TreeShapResult
    interaction_values(ensemble, X, *, progress=None, cancel=None) -> TreeInteractionResult
    raw_output(ensemble, X) -> (n, n_outputs)
    model_matrix(ensemble, frame) -> X          # HistGradientBoosting fitted on a DataFrame
                                                # with categorical columns: frame -> codes
    compile_kernels() -> seconds                # compile or load every kernel once

Models: DecisionTree/ExtraTree, RandomForest, ExtraTrees (classifiers: one output per class,
"probability"; regressors: "value", multi-output too), GradientBoosting (binary: 1 output,
"log-odds" of classes_[1] or "raw margin" for the exponential loss; multiclass: "raw margin"
per class; regressor: "value") and HistGradientBoosting (the same, "log of the mean" for the
poisson and gamma losses; numeric and native categorical splits, missing values either way).

X is the float64 matrix the estimator's ``predict`` receives (NaN = missing; for
HistGradientBoosting categorical columns the category codes; for a model fitted on a DataFrame
with categorical dtype, ``model_matrix`` gives that matrix in the frame's column order).

Algorithms, per tree, named in ``TreeShapResult.algorithm_per_tree`` and ``summary``:
path-dependent "linear" (a Linear TreeShap sweep, polynomials held at Gauss-Legendre nodes, see
``_kernel_path``) or "classic" (Lundberg et al. 2020 Algorithm 2) where an edge has zero
cover, a path is deeper than the quadrature table or memory too tight; interventional "masks"
(leaf fail masks against 64-row background words) or "walk" (the per-pair recursion) beyond 62
distinct features on a path or with ``algorithm="classic"``; interaction values per leaf.
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
