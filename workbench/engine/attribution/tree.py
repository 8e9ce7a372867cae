"""Exact tree SHAP values in model space, by our numba kernel or by shap.TreeExplainer.

Our kernel (``workbench.engine.treeshap``) is used when it is importable and supports the model;
shap's ``TreeExplainer`` otherwise, and always for the ``tree-reference`` method. Cases where
shap 0.51 is known to be wrong or to refuse the model are listed in :func:`shap_problem`, so the
caller can fall back to the model-agnostic method (and say why) instead of showing wrong values.
"""

from __future__ import annotations

import hashlib
import os
import warnings
import weakref

import numpy as np
from sklearn.ensemble import (
    ExtraTreesClassifier,
    ExtraTreesRegressor,
    GradientBoostingClassifier,
    GradientBoostingRegressor,
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
    RandomForestClassifier,
    RandomForestRegressor,
)
from sklearn.tree import BaseDecisionTree

_HGB = (HistGradientBoostingClassifier, HistGradientBoostingRegressor)
TREE_MODELS = (
    BaseDecisionTree,  # DecisionTree* and ExtraTree*
    RandomForestClassifier,
    RandomForestRegressor,
    ExtraTreesClassifier,
    ExtraTreesRegressor,
    GradientBoostingClassifier,
    GradientBoostingRegressor,
    *_HGB,
)

# Converted ensembles and shap explainers, per fitted estimator: building them walks every node,
# which costs as much as explaining a few rows; the window explains one row at a time.
_CACHE: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_CACHE_PER_MODEL = 4

# Off switch for our kernel (tests of the shap route, comparisons while the kernel changes);
# the environment variable WORKBENCH_TREE_KERNEL=off sets it for a whole process.
KERNEL_ENABLED = os.environ.get("WORKBENCH_TREE_KERNEL", "on").strip().lower() != "off"


class Unsuitable(Exception):
    """Tree SHAP cannot explain this model correctly here; the message says why."""


def is_tree_model(est) -> bool:
    return isinstance(est, TREE_MODELS)


def has_categorical_splits(est) -> bool:
    """True when a HistGradientBoosting model splits on native categories anywhere."""
    if not isinstance(est, _HGB):
        return False
    try:
        return any(
            bool(np.any(pred.nodes["is_categorical"]))
            for per_iter in est._predictors
            for pred in per_iter
        )
    except (AttributeError, KeyError, ValueError):  # private layout changed: assume the worst
        mask = getattr(est, "is_categorical_", None)
        return mask is not None and bool(np.any(mask))


def kernel():
    """Our tree SHAP kernel module, or None when it is switched off or not importable (yet)."""
    if not KERNEL_ENABLED:
        return None
    try:
        from workbench.engine import treeshap
    except ImportError:
        return None
    needed = ("supports", "from_estimator", "shap_values")
    return treeshap if all(hasattr(treeshap, n) for n in needed) else None


def kernel_supports(est) -> bool:
    k = kernel()
    if k is None:
        return False
    try:
        return bool(k.supports(est))
    except Exception:  # noqa: BLE001 - a kernel that cannot judge the model does not support it
        return False


def shap_problem(adapter, form: str) -> str | None:
    """Why shap.TreeExplainer (0.51) would give wrong values or refuse this model; else None."""
    est = adapter.final_estimator
    name = type(est).__name__
    if has_categorical_splits(est):
        return (
            f"shap's TreeExplainer reads the native categorical splits of {name} "
            "as numeric thresholds"
        )
    if isinstance(est, HistGradientBoostingClassifier) and form == "interventional":
        return (
            "shap's interventional TreeExplainer gives wrong values for "
            "HistGradientBoostingClassifier "
            "(it fails its own additivity check)"
        )
    if isinstance(est, GradientBoostingClassifier) and len(adapter.classes) > 2:
        return "shap's TreeExplainer supports GradientBoostingClassifier with two classes only"
    return None


def _cached(est, key, build):
    per_model = _CACHE.setdefault(est, {})
    if key not in per_model:
        if len(per_model) >= _CACHE_PER_MODEL:
            per_model.pop(next(iter(per_model)))
        per_model[key] = build()
    return per_model[key]


def _digest(arr: np.ndarray) -> str:
    return hashlib.sha1(np.ascontiguousarray(arr).tobytes()).hexdigest() + str(arr.shape)


def kernel_ensemble(est):
    k = kernel()
    return _cached(est, ("kernel",), lambda: k.from_estimator(est))


def kernel_model_matrix(est, frame) -> np.ndarray:
    """The kernel's own model-space matrix (HistGradientBoosting fitted on categorical dtypes)."""
    return np.asarray(kernel().model_matrix(kernel_ensemble(est), frame), dtype=float)


def kernel_values(adapter, z_rows, z_background, form: str, *, progress=None, cancel=None):
    """(values (n, m, K), base (K,)) from our numba kernel."""
    k = kernel()
    ensemble = kernel_ensemble(adapter.final_estimator)
    background = z_background if form == "interventional" else None
    result = k.shap_values(
        ensemble, z_rows, method=form, background=background, progress=progress, cancel=cancel
    )
    return _as_outputs(result.values, result.base_value, len(z_rows), z_rows.shape[1])


def shap_values(adapter, z_rows, z_background, form: str):
    """(values (n, m, K), base (K,)) from shap.TreeExplainer on the raw (margin) scale."""
    import shap

    est = adapter.final_estimator
    if form == "path":
        key = ("shap", "path")

        def build():
            return shap.TreeExplainer(
                est, feature_perturbation="tree_path_dependent", model_output="raw"
            )
    else:
        key = ("shap", "interventional", _digest(z_background))

        def build():
            return shap.TreeExplainer(
                est, data=z_background, feature_perturbation="interventional", model_output="raw"
            )

    explainer = _cached(est, key, build)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # feature-name and large-background chatter
        # shap's own check is off because it is wrong for some models (see shap_problem);
        # our residual against adapter.score checks every result instead.
        values = explainer.shap_values(z_rows, check_additivity=False)
    return _as_outputs(values, explainer.expected_value, len(z_rows), z_rows.shape[1])


def _as_outputs(values, base, n: int, m: int):
    values = np.asarray(values, dtype=float)
    if values.ndim == 2:
        values = values[:, :, None]
    elif values.ndim == 3 and values.shape[:2] != (n, m) and values.shape[1:] == (n, m):
        values = np.moveaxis(values, 0, -1)  # older shap: one (n, m) array per output
    base = np.atleast_1d(np.asarray(base, dtype=float)).ravel()
    return values, base


def pick_output(adapter, values: np.ndarray, base: np.ndarray):
    """The explained output's slice: class of interest, or the single output sign-adjusted."""
    n_out = values.shape[2]
    if n_out > 1:
        if not adapter.classes or n_out != len(adapter.classes):
            raise ValueError(
                f"tree SHAP gave {n_out} outputs for a model with classes {adapter.classes}"
            )
        k = adapter.class_index
        return values[:, :, k], float(base[k])
    v, b = values[:, :, 0], float(base[0])
    if adapter.classes and adapter.class_index == 0:
        # a single output describes class 1; class 0 is its mirror image
        if adapter.output_kind == "probability":
            return -v, 1.0 - b
        return -v, -b
    return v, b
