"""Behaviour of the tree SHAP kernel's public API: what it reads, what it refuses, the shape and
scale of its results, progress and cancel, and the per-tree algorithm choice."""

from __future__ import annotations

import dataclasses

import numba
import numpy as np
import pytest
from sklearn.ensemble import (
    GradientBoostingClassifier,
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
    RandomForestClassifier,
    RandomForestRegressor,
)
from sklearn.linear_model import LogisticRegression
from sklearn.tree import DecisionTreeRegressor

from workbench.engine import treeshap
from workbench.engine.errors import Cancelled, InputError
from workbench.engine.treeshap import api, readers


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(300, 4))
    y = X[:, 0] - X[:, 1] * X[:, 2] + 0.2 * rng.normal(size=300)
    return X, y


def test_supports_and_refuses(data):
    X, y = data
    assert treeshap.supports(DecisionTreeRegressor(max_depth=2).fit(X, y))
    assert treeshap.supports(HistGradientBoostingRegressor(max_iter=3).fit(X, y))
    assert not treeshap.supports(DecisionTreeRegressor())  # not fitted
    assert not treeshap.supports(LogisticRegression().fit(X, y > 0))
    multi = RandomForestClassifier(3, max_depth=2).fit(X, np.c_[y > 0, y > 1])
    assert not treeshap.supports(multi)
    with pytest.raises(TypeError):
        treeshap.from_estimator(LogisticRegression().fit(X, y > 0))
    custom_init = GradientBoostingClassifier(n_estimators=2, init=LogisticRegression())
    with pytest.raises(TypeError):
        treeshap.from_estimator(custom_init.fit(X, y > 0))


@pytest.mark.parametrize(
    ("make", "target", "n_outputs", "kind"),
    [
        (lambda: HistGradientBoostingClassifier(max_iter=3), "bin", 1, "log-odds"),
        (lambda: HistGradientBoostingClassifier(max_iter=3), "multi", 3, "raw margin"),
        (lambda: HistGradientBoostingRegressor(max_iter=3, loss="poisson"), "count", 1,
         "log of the mean"),
        (lambda: GradientBoostingClassifier(n_estimators=3), "multi", 3, "raw margin"),
        (lambda: RandomForestClassifier(3, max_depth=3), "bin", 2, "probability"),
        (lambda: RandomForestRegressor(3, max_depth=3), "reg", 1, "value"),
        (lambda: DecisionTreeRegressor(max_depth=3), "two", 2, "value"),
    ],
)
def test_outputs_and_local_accuracy(data, make, target, n_outputs, kind):
    X, y = data
    ys = {"bin": y > 0, "multi": np.digitize(y, [-1, 1]), "count": np.round(np.exp(y / 3)),
          "reg": y, "two": np.c_[y, -2 * y]}
    ens = treeshap.from_estimator(make().fit(X, ys[target]))
    assert (ens.n_features, ens.n_outputs, ens.output_kind) == (4, n_outputs, kind)
    res = treeshap.shap_values(ens, X[:30])
    assert res.values.shape == (30, 4, n_outputs) and res.base_value.shape == (n_outputs,)
    raw = treeshap.raw_output(ens, X[:30])
    np.testing.assert_allclose(res.values.sum(axis=1) + res.base_value, raw, atol=1e-10)
    assert res.method == "path" and res.background_rows == 0
    assert len(res.algorithm_per_tree) == ens.n_trees


def test_result_is_frozen(data):
    X, y = data
    res = treeshap.shap_values(treeshap.from_estimator(DecisionTreeRegressor(max_depth=2).fit(
        X, y)), X[:3])
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.method = "other"


def test_progress_and_cancel(data, monkeypatch):
    X, y = data
    ens = treeshap.from_estimator(RandomForestRegressor(3, max_depth=4).fit(X, y))
    monkeypatch.setattr(api, "CHUNK_ROWS", 50)
    seen = []
    treeshap.shap_values(ens, X, progress=lambda f, msg: seen.append(f))
    assert len(seen) == 7 and seen == sorted(seen) and seen[-1] == 1.0
    with pytest.raises(Cancelled):
        treeshap.shap_values(ens, X, cancel=lambda: True)
    with pytest.raises(Cancelled):
        treeshap.interaction_values(ens, X, cancel=lambda: True)
    with pytest.raises(Cancelled):
        treeshap.shap_values(ens, X, method="interventional", background=X[:5],
                             cancel=lambda: True)


def test_chunks_and_threads_do_not_change_values(data, monkeypatch):
    """Sequential equals parallel, one chunk equals many."""
    X, y = data
    ens = treeshap.from_estimator(HistGradientBoostingRegressor(max_iter=5).fit(X, y))
    whole = treeshap.shap_values(ens, X).values
    monkeypatch.setattr(api, "CHUNK_ROWS", 7)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        single = treeshap.shap_values(ens, X).values
        inter = treeshap.shap_values(ens, X[:20], method="interventional", background=X[:9])
    finally:
        numba.set_num_threads(threads)
    np.testing.assert_allclose(single, whole, rtol=1e-12, atol=1e-14)
    again = treeshap.shap_values(ens, X[:20], method="interventional", background=X[:9])
    np.testing.assert_allclose(inter.values, again.values, rtol=1e-12, atol=1e-14)


def test_bad_input(data):
    X, y = data
    ens = treeshap.from_estimator(DecisionTreeRegressor(max_depth=2).fit(X, y))
    with pytest.raises(InputError):
        treeshap.shap_values(ens, X[:, :3])
    with pytest.raises(InputError):
        treeshap.shap_values(ens, X[:3], method="interventional", background=X[:0])
    with pytest.raises(ValueError):
        treeshap.shap_values(ens, X[:3], method="interventional")
    with pytest.raises(ValueError):
        treeshap.shap_values(ens, X[:3], method="sampling")
    with pytest.raises(ValueError):
        treeshap.shap_values(ens, X[:3], algorithm="fastest")


def _zero_cover_ensemble():
    """A depth-2 tree whose right-left leaf saw no training weight."""
    tree = readers._Tree(
        left=[1, 3, 5, -1, -1, -1, -1], right=[2, 4, 6, -1, -1, -1, -1],
        feature=[0, 1, 1, -1, -1, -1, -1], threshold=[0.0, 0.5, -0.5, 0, 0, 0, 0],
        missing_left=[1] * 7, cover=[10.0, 6.0, 4.0, 2.0, 4.0, 0.0, 4.0],
        values=[[0.0], [0.0], [0.0], [1.0], [2.0], [7.0], [3.0]])
    return readers._assemble([tree], model_name="handmade", n_features=2, n_outputs=1,
                             output_kind="value", output_names=["value"], offset=[0.0],
                             input_float32=False)


def test_zero_cover_tree_goes_classic():
    ens = _zero_cover_ensemble()
    X = np.array([[1.0, -1.0], [-1.0, 1.0], [1.0, 1.0], [np.nan, 0.0]])
    res = treeshap.shap_values(ens, X)
    assert res.algorithm_per_tree == ("classic",) and res.summary == "classic: 1 trees"
    assert np.isfinite(res.values).all()
    np.testing.assert_allclose(res.values.sum(axis=1) + res.base_value,
                               treeshap.raw_output(ens, X), atol=1e-12)
    inter = treeshap.interaction_values(ens, X)
    np.testing.assert_allclose(inter.values.sum(axis=2), res.values, atol=1e-12)


def test_interactions_symmetric(data):
    X, y = data
    ens = treeshap.from_estimator(HistGradientBoostingClassifier(max_iter=4).fit(X, y > 0))
    res = treeshap.interaction_values(ens, X[:10])
    assert res.values.shape == (10, 4, 4, 1)
    np.testing.assert_allclose(res.values, np.swapaxes(res.values, 1, 2), atol=1e-14)


def test_compile_kernels_returns_seconds():
    assert treeshap.compile_kernels() >= 0.0


def test_interventional_variants_agree(data, monkeypatch):
    """Feature-bit masks, path-slot masks (used beyond 62 features) and the per-pair walk give
    the same values; the brute-force reference tests check the default one."""
    X, y = data
    ens = treeshap.from_estimator(RandomForestRegressor(4, max_depth=6, random_state=0).fit(X, y))
    rows, background = X[:25], X[100:200]  # two background words
    by_features = treeshap.shap_values(ens, rows, method="interventional", background=background)
    walk = treeshap.shap_values(ens, rows, method="interventional", background=background,
                                algorithm="classic")
    monkeypatch.setattr(api, "FEATURE_BITS", False)
    by_slots = treeshap.shap_values(ens, rows, method="interventional", background=background)
    np.testing.assert_allclose(by_features.values, walk.values, atol=1e-12)
    np.testing.assert_allclose(by_slots.values, walk.values, atol=1e-12)
    assert by_features.summary == "masks: 4 trees" and walk.summary == "walk: 4 trees"


def test_tree_groups_do_not_change_values(data, monkeypatch):
    """Large ensembles are swept in groups of trees whose factor tables fit a memory limit."""
    X, y = data
    ens = treeshap.from_estimator(RandomForestRegressor(6, max_depth=5, random_state=0).fit(X, y))
    whole = treeshap.shap_values(ens, X[:40])
    monkeypatch.setattr(api, "TABLE_LIMIT", 1)  # one tree per group
    assert len(api._tree_groups(ens, 3)) == 6
    grouped = treeshap.shap_values(ens, X[:40])
    np.testing.assert_allclose(grouped.values, whole.values, rtol=1e-12, atol=1e-14)
