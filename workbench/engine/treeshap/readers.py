"""Read fitted scikit-learn tree models into a :class:`TreeEnsemble`.

Sources read directly: ``tree_`` arrays of scikit-learn decision trees (children_left/right,
feature, threshold, missing_go_to_left, weighted_n_node_samples, value); for
HistGradientBoosting the ``_predictors`` node records (value, count, feature_idx,
num_threshold, missing_go_to_left, is_categorical, bitset_idx), ``raw_left_cat_bitsets``, the
known-category bitsets of ``_bin_mapper`` and ``_baseline_prediction``.
"""

from __future__ import annotations

import numpy as np
from sklearn.dummy import DummyClassifier, DummyRegressor
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
from sklearn.tree import (
    DecisionTreeClassifier,
    DecisionTreeRegressor,
    ExtraTreeClassifier,
    ExtraTreeRegressor,
)

from workbench.engine.treeshap.ensemble import TreeEnsemble

_SINGLE = (DecisionTreeClassifier, DecisionTreeRegressor, ExtraTreeClassifier, ExtraTreeRegressor)
_FOREST = (RandomForestClassifier, RandomForestRegressor, ExtraTreesClassifier, ExtraTreesRegressor)
_GB = (GradientBoostingClassifier, GradientBoostingRegressor)
_HGB = (HistGradientBoostingClassifier, HistGradientBoostingRegressor)
_LOG_LINK = ("poisson", "gamma")


class _Tree:
    """One tree in local numbering, before concatenation."""

    def __init__(self, left, right, feature, threshold, missing_left, cover, values,
                 cat_local=None, cat_left=None, cat_known=None, target=-1):
        self.left = np.asarray(left, np.int64)
        self.right = np.asarray(right, np.int64)
        self.feature = np.asarray(feature, np.int64)
        self.threshold = np.asarray(threshold, np.float64)
        self.missing_left = np.asarray(missing_left, np.int64)
        self.cover = np.asarray(cover, np.float64)
        self.values = np.asarray(values, np.float64)
        n = self.left.size
        self.cat_local = np.full(n, -1, np.int64) if cat_local is None else cat_local
        self.cat_left = np.zeros((0, 8), np.int64) if cat_left is None else cat_left
        self.cat_known = np.zeros((0, 8), np.int64) if cat_known is None else cat_known
        self.target = target


def _is_fitted_tree(est) -> bool:
    return hasattr(est, "tree_")


def supports(estimator) -> bool:
    """True when :func:`from_estimator` can read this fitted estimator."""
    try:
        _check(estimator)
    except TypeError:
        return False
    return True


def _check(est) -> None:
    if isinstance(est, _SINGLE):
        if not _is_fitted_tree(est):
            raise TypeError("the decision tree is not fitted")
        if hasattr(est, "classes_") and est.n_outputs_ > 1:
            raise TypeError("multi-output tree classifiers are not supported")
    elif isinstance(est, _FOREST):
        if not hasattr(est, "estimators_"):
            raise TypeError("the forest is not fitted")
        if hasattr(est, "classes_") and est.n_outputs_ > 1:
            raise TypeError("multi-output forest classifiers are not supported")
    elif isinstance(est, _GB):
        if not hasattr(est, "estimators_"):
            raise TypeError("the gradient boosting model is not fitted")
        if not (est.init_ == "zero" or isinstance(est.init_, DummyClassifier | DummyRegressor)):
            raise TypeError("gradient boosting with a custom init estimator is not supported")
    elif isinstance(est, _HGB):
        if not hasattr(est, "_predictors"):
            raise TypeError("the histogram gradient boosting model is not fitted")
    else:
        raise TypeError(f"{type(est).__name__} is not a supported tree model")


def _sk_tree(est, scale: float, classifier: bool, target: int = -1) -> _Tree:
    tr = est.tree_
    left = tr.children_left.copy()
    right = tr.children_right.copy()
    feature = np.where(left < 0, -1, tr.feature)
    value = tr.value
    if classifier:
        vals = value[:, 0, :]
        total = vals.sum(axis=1, keepdims=True)
        vals = np.divide(vals, total, out=np.zeros_like(vals), where=total > 0)
    else:
        vals = value[:, :, 0]
    missing = getattr(tr, "missing_go_to_left", np.zeros(left.size, np.uint8))
    return _Tree(left, right, feature, tr.threshold, missing, tr.weighted_n_node_samples,
                 vals * scale, target=target)


def _hgb_tree(predictor, known_bits, feature_map, target: int) -> _Tree:
    nodes = predictor.nodes
    leaf = nodes["is_leaf"].astype(bool)
    left = np.where(leaf, -1, nodes["left"].astype(np.int64))
    right = np.where(leaf, -1, nodes["right"].astype(np.int64))
    internal_feature = nodes["feature_idx"].astype(np.int64)
    feature = np.where(leaf, -1, feature_map[internal_feature])
    is_cat = nodes["is_categorical"].astype(bool) & ~leaf
    cat_local = np.full(left.size, -1, np.int64)
    cat_local[is_cat] = np.arange(int(is_cat.sum()))
    raw_bits = predictor.raw_left_cat_bitsets.astype(np.int64)
    cat_left = raw_bits[nodes["bitset_idx"][is_cat].astype(np.int64)].reshape(-1, 8)
    cat_known = known_bits[internal_feature[is_cat]].reshape(-1, 8)
    return _Tree(left, right, feature, nodes["num_threshold"], nodes["missing_go_to_left"],
                 nodes["count"], nodes["value"][:, None], cat_local, cat_left, cat_known,
                 target=target)


def _hgb_known_bits(est, n_internal: int) -> np.ndarray:
    """Known-category bitset per internal feature (zeros for numeric features)."""
    bits = np.zeros((n_internal, 8), np.int64)
    known, f_idx_map = est._bin_mapper.make_known_categories_bitsets()
    is_cat = est._bin_mapper.is_categorical
    if is_cat is not None:
        for f in np.flatnonzero(is_cat):
            bits[f] = known[f_idx_map[f]].astype(np.int64)
    return bits


def _hgb_feature_map(est) -> np.ndarray:
    """Internal column -> column of the estimator's input (the internal encoder puts the
    categorical columns first)."""
    n = est.n_features_in_
    if getattr(est, "_preprocessor", None) is None:
        return np.arange(n)
    is_cat = np.asarray(est.is_categorical_, bool)
    return np.concatenate([np.flatnonzero(is_cat), np.flatnonzero(~is_cat)])


def _ordered(tree: _Tree) -> _Tree:
    """Renumber nodes depth-first if some child does not come after its parent."""
    internal = np.flatnonzero(tree.left >= 0)
    idx = internal
    if np.all(tree.left[idx] > idx) and np.all(tree.right[idx] > idx):
        return tree
    order = []
    stack = [0]
    while stack:
        n = stack.pop()
        order.append(n)
        if tree.left[n] >= 0:
            stack.append(int(tree.right[n]))
            stack.append(int(tree.left[n]))
    order = np.asarray(order, np.int64)
    new_of = np.full(tree.left.size, -1, np.int64)
    new_of[order] = np.arange(order.size)

    def remap(children):
        c = children[order]
        return np.where(c >= 0, new_of[np.maximum(c, 0)], -1)

    return _Tree(remap(tree.left), remap(tree.right), tree.feature[order], tree.threshold[order],
                 tree.missing_left[order], tree.cover[order], tree.values[order],
                 tree.cat_local[order], tree.cat_left, tree.cat_known, tree.target)


def _assemble(trees, *, model_name, n_features, n_outputs, output_kind, output_names, offset,
              input_float32, preprocessor=None, internal_columns=None,
              binary_complement=False) -> TreeEnsemble:
    trees = [_ordered(t) for t in trees]
    sizes = np.array([t.left.size for t in trees], np.int64)
    start = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    width = max(t.values.shape[1] for t in trees)
    left, right, parent, cat_index, values = [], [], [], [], []
    cat_base = 0
    for t, s in zip(trees, start[:-1], strict=False):
        lf = np.where(t.left >= 0, t.left + s, -1)
        rt = np.where(t.right >= 0, t.right + s, -1)
        par = np.full(t.left.size, -1, np.int64)
        internal = np.flatnonzero(t.left >= 0)
        par[t.left[internal]] = internal + s
        par[t.right[internal]] = internal + s
        left.append(lf)
        right.append(rt)
        parent.append(par)
        cat_index.append(np.where(t.cat_local >= 0, t.cat_local + cat_base, -1))
        cat_base += t.cat_left.shape[0]
        v = np.zeros((t.left.size, width))
        v[:, : t.values.shape[1]] = t.values
        values.append(v)
    return TreeEnsemble(
        model_name=model_name,
        n_features=int(n_features),
        n_outputs=int(n_outputs),
        output_kind=output_kind,
        output_names=tuple(str(s) for s in output_names),
        offset=np.asarray(offset, np.float64).reshape(n_outputs),
        input_float32=input_float32,
        tree_start=start,
        tree_target=np.array([t.target for t in trees], np.int64),
        left=np.concatenate(left),
        right=np.concatenate(right),
        parent=np.concatenate(parent),
        feature=np.concatenate([t.feature for t in trees]),
        threshold=np.concatenate([t.threshold for t in trees]),
        missing_left=np.concatenate([t.missing_left for t in trees]),
        cat_index=np.concatenate(cat_index),
        cat_left_bits=np.ascontiguousarray(np.concatenate([t.cat_left for t in trees])),
        cat_known_bits=np.ascontiguousarray(np.concatenate([t.cat_known for t in trees])),
        cover=np.concatenate([t.cover for t in trees]),
        values=np.ascontiguousarray(np.concatenate(values)),
        preprocessor=preprocessor,
        internal_columns=internal_columns,
        binary_complement=bool(binary_complement),
    )


def from_estimator(est) -> TreeEnsemble:
    """Read a fitted tree model (the final estimator of a pipeline); TypeError if unsupported."""
    _check(est)
    name = type(est).__name__
    if isinstance(est, _SINGLE + _FOREST):
        members = [est] if isinstance(est, _SINGLE) else list(est.estimators_)
        classifier = hasattr(est, "classes_")
        scale = 1.0 / len(members)
        trees = [_sk_tree(m, scale, classifier) for m in members]
        complement = classifier and len(est.classes_) == 2 and all(
            np.all(t.values[t.left < 0].sum(axis=1) > 0) for t in trees)
        if complement:
            # two class probabilities sum to one in every leaf: explain the second only and
            # take the first as its complement (halves the work)
            for t in trees:
                t.values = t.values[:, 1:2]
                t.target = 1
        if classifier:
            names = est.classes_
            kind = "probability"
        else:
            names = [f"output {k}" for k in range(est.n_outputs_)] if est.n_outputs_ > 1 else ["value"]
            kind = "value"
        return _assemble(trees, model_name=name, n_features=est.n_features_in_,
                         n_outputs=len(names), output_kind=kind, output_names=names,
                         offset=np.zeros(len(names)), input_float32=True,
                         binary_complement=complement)
    if isinstance(est, _GB):
        n_out = est.estimators_.shape[1]
        trees = [_sk_tree(est.estimators_[i, k], est.learning_rate, False, target=k)
                 for i in range(est.estimators_.shape[0]) for k in range(n_out)]
        offset = est._raw_predict_init(np.zeros((1, est.n_features_in_), np.float32))[0]
        kind, names = _boosting_output(est, n_out)
        return _assemble(trees, model_name=name, n_features=est.n_features_in_,
                         n_outputs=n_out, output_kind=kind, output_names=names,
                         offset=offset, input_float32=True)
    n_out = est.n_trees_per_iteration_
    feature_map = _hgb_feature_map(est)
    known = _hgb_known_bits(est, feature_map.size)
    trees = [_hgb_tree(p, known, feature_map, k) for it in est._predictors
             for k, p in enumerate(it)]
    kind, names = _boosting_output(est, n_out)
    return _assemble(trees, model_name=name, n_features=est.n_features_in_, n_outputs=n_out,
                     output_kind=kind, output_names=names,
                     offset=np.asarray(est._baseline_prediction).reshape(-1),
                     input_float32=False, preprocessor=getattr(est, "_preprocessor", None),
                     internal_columns=feature_map)


def _boosting_output(est, n_out: int) -> tuple[str, list]:
    if hasattr(est, "classes_"):
        if n_out == 1:
            loss = getattr(est, "loss", "log_loss")
            kind = "log-odds" if loss in ("log_loss", "deviance") else "raw margin"
            return kind, [est.classes_[1]]
        return "raw margin", list(est.classes_)
    loss = getattr(est, "loss", "squared_error")
    return ("log of the mean" if loss in _LOG_LINK else "value"), ["value"]
