"""The tree SHAP kernel against Shapley values computed by brute force over all coalitions.

Sources: Shapley 1953, "A value for n-person games" (the value as the weighted sum over
coalitions, weights |S|! (M - |S| - 1)! / M!); Lundberg et al. 2020, Nature Machine
Intelligence 2, "From local explanations to global understanding with explainable AI for
trees": the tree path-dependent game v(S) = E[f(x) | x_S] computed by following x at splits on
features in S and averaging the children by training cover elsewhere (Methods, Algorithm 1),
the interventional game v(S) = mean over background z of f(x_S, z_rest) (Methods), and the
Shapley interaction index (Methods, "SHAP interaction values", after Fujimoto, Kojadinovic and
Marichal 2006). The path-dependent games are evaluated by walking the estimator's own arrays
(sklearn ``tree_``, HistGradientBoosting ``_predictors``) with routing checked against the
estimator's own prediction; the interventional games call the estimator's own raw prediction.
This is where shap cannot be the reference: HistGradientBoosting with native categorical
splits, GradientBoosting with several classes, and HistGradientBoosting interventional.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from sklearn.ensemble import (
    ExtraTreesClassifier,
    GradientBoostingClassifier,
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
    RandomForestClassifier,
)
from sklearn.tree import DecisionTreeRegressor

from workbench.engine import treeshap

M = 5


def _data(seed=0, n=400, categorical=False, missing=False):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, M))
    if categorical:  # columns 1 and 3 hold category codes 0..6 and 0..3
        X[:, 1] = rng.integers(0, 7, n)
        X[:, 3] = rng.integers(0, 4, n)
    effect1 = np.array([0.0, 1.5, -1.0, 0.5, 2.0, -2.0, 0.3])[X[:, 1].astype(int) % 7]
    y = X[:, 0] + (effect1 if categorical else X[:, 1]) * (1 + (X[:, 3] > 1)) + X[:, 2] * X[:, 4]
    y = y + 0.3 * rng.normal(size=n)
    if missing:
        X[rng.random(X.shape) < 0.1] = np.nan
    return X, y


# -- the estimator's own trees, walked independently of the kernel ---------------------------

class _Walk:
    """One tree: children, cover, leaf values (per output) and the estimator's routing rule."""

    def __init__(self, left, right, cover, value, go_left, target):
        self.left, self.right, self.cover, self.value = left, right, cover, value
        self.go_left, self.target = go_left, target

    def expectation(self, x, S, node=0):
        if self.left[node] < 0:
            return self.value[node]
        if self._feature(node) in S:
            return self.expectation(x, S, self.left[node] if self.go_left(node, x)
                                    else self.right[node])
        lc, rc = self.left[node], self.right[node]
        return (self.cover[lc] * self.expectation(x, S, lc)
                + self.cover[rc] * self.expectation(x, S, rc)) / self.cover[node]


def _sk_walks(model):
    members = getattr(model, "estimators_", [model])
    if isinstance(model, GradientBoostingClassifier):
        K = model.estimators_.shape[1]
        trees = [(model.estimators_[i, k], k, model.learning_rate)
                 for i in range(model.estimators_.shape[0]) for k in range(K)]
        offset = model._raw_predict_init(np.zeros((1, M), np.float32))[0]
    else:
        trees = [(m, -1, 1.0 / len(members)) for m in members]
        offset = 0.0
    walks = []
    for est, target, scale in trees:
        t = est.tree_
        value = t.value[:, 0, :] if hasattr(est, "classes_") else t.value[:, :, 0]
        if hasattr(est, "classes_"):
            value = value / value.sum(axis=1, keepdims=True)

        def go_left(node, x, t=t):
            v = np.float32(x[t.feature[node]])  # scikit-learn compares float32 copies
            if np.isnan(v):
                return bool(t.missing_go_to_left[node])
            return v <= t.threshold[node]

        w = _Walk(t.children_left, t.children_right, t.weighted_n_node_samples, value * scale,
                  go_left, target)
        w._feature = lambda node, t=t: t.feature[node]
        walks.append(w)
    return walks, offset


def _hgb_walks(model):
    known, f_idx_map = model._bin_mapper.make_known_categories_bitsets()
    feature_map = np.arange(M)
    if getattr(model, "_preprocessor", None) is not None:
        cat = np.asarray(model.is_categorical_, bool)
        feature_map = np.concatenate([np.flatnonzero(cat), np.flatnonzero(~cat)])
    walks = []
    for it in model._predictors:
        for k, p in enumerate(it):
            nd = p.nodes

            def in_bits(bits, c):
                return (int(bits[c // 32]) >> (c % 32)) & 1 == 1

            def go_left(node, x, nd=nd, p=p):
                r = nd[node]
                v = x[feature_map[r["feature_idx"]]]
                if np.isnan(v):
                    return bool(r["missing_go_to_left"])
                if r["is_categorical"]:
                    c = int(v)
                    if v < 0 or c > 255:
                        return bool(r["missing_go_to_left"])
                    if in_bits(p.raw_left_cat_bitsets[r["bitset_idx"]], c):
                        return True
                    if in_bits(known[f_idx_map[r["feature_idx"]]], c):
                        return False
                    return bool(r["missing_go_to_left"])
                return v <= r["num_threshold"]

            left = np.where(nd["is_leaf"], -1, nd["left"].astype(int))
            right = np.where(nd["is_leaf"], -1, nd["right"].astype(int))
            w = _Walk(left, right, nd["count"].astype(float), nd["value"][:, None], go_left, k)
            w._feature = lambda node, nd=nd: feature_map[nd[node]["feature_idx"]]
            walks.append(w)
    return walks, np.asarray(model._baseline_prediction).reshape(-1)


def _walks(model):
    if isinstance(model, HistGradientBoostingClassifier | HistGradientBoostingRegressor):
        return _hgb_walks(model)
    return _sk_walks(model)


def _path_game(model, n_outputs):
    walks, offset = _walks(model)

    def v(x, S):
        out = np.zeros(n_outputs) + offset
        for w in walks:
            e = w.expectation(x, set(S))
            if w.target >= 0:
                out[w.target] += e[0]
            else:
                out += e[:n_outputs]
        return out

    return v


def _raw_predict(model, X):
    if isinstance(model, HistGradientBoostingClassifier | HistGradientBoostingRegressor):
        return np.asarray(model._raw_predict(X))
    if isinstance(model, GradientBoostingClassifier):
        return model.decision_function(X).reshape(len(X), -1)
    if hasattr(model, "predict_proba"):
        return model.predict_proba(X)
    return model.predict(X).reshape(len(X), -1)


def _interventional_game(model, background):
    def v(x, S):
        hybrid = background.copy()
        if isinstance(hybrid, pd.DataFrame):
            for j in S:
                hybrid.iloc[:, j] = x.iloc[j]
        else:
            hybrid[:, list(S)] = x[list(S)]
        return _raw_predict(model, hybrid).mean(axis=0)

    return v


def _shapley(v, x, n_features):
    """Shapley 1953: phi_i = sum_S |S|! (M-|S|-1)! / M! [v(S + i) - v(S)]."""
    cache = {}

    def val(S):
        key = tuple(sorted(S))
        if key not in cache:
            cache[key] = v(x, key)
        return cache[key]

    phi = []
    for i in range(n_features):
        others = [j for j in range(n_features) if j != i]
        total = 0.0
        for k in range(n_features):
            w = math.factorial(k) * math.factorial(n_features - k - 1) / math.factorial(n_features)
            for S in itertools.combinations(others, k):
                total = total + w * (val(S + (i,)) - val(S))
        phi.append(total)
    return np.array(phi), val(()), val(tuple(range(n_features)))


def _interaction_index(v, x, n_features):
    """Shapley interaction index, i != j: sum_S |S|!(M-|S|-2)!/(2 (M-1)!) Delta_ij v(S)."""
    out = {}
    for i, j in itertools.combinations(range(n_features), 2):
        rest = [k for k in range(n_features) if k not in (i, j)]
        total = 0.0
        for k in range(n_features - 1):
            w = (math.factorial(k) * math.factorial(n_features - k - 2)
                 / (2 * math.factorial(n_features - 1)))
            for S in itertools.combinations(rest, k):
                total = total + w * (v(x, S + (i, j)) - v(x, S + (i,)) - v(x, S + (j,)) + v(x, S))
        out[i, j] = total
    return out


def _models():
    num_X, num_y = _data()
    cat_X, cat_y = _data(categorical=True, missing=True)
    cats = [1, 3]
    hgb_cat = dict(max_iter=8, categorical_features=cats, random_state=0)
    return {
        "dt_reg": (DecisionTreeRegressor(max_depth=6, random_state=0).fit(num_X, num_y), num_X),
        "rf_bin_missing": (RandomForestClassifier(3, max_depth=5, random_state=0).fit(
            _data(missing=True)[0], _data()[1] > 0), _data(missing=True)[0]),
        "et_multi": (ExtraTreesClassifier(3, max_depth=5, random_state=0).fit(
            num_X, np.digitize(num_y, [-1, 1])), num_X),
        "gb_multi": (GradientBoostingClassifier(n_estimators=4, max_depth=3, random_state=0).fit(
            num_X, np.digitize(num_y, [-1, 1])), num_X),
        "hgb_cat_bin": (HistGradientBoostingClassifier(**hgb_cat).fit(cat_X, cat_y > 0), cat_X),
        "hgb_cat_multi": (HistGradientBoostingClassifier(**hgb_cat).fit(
            cat_X, np.digitize(cat_y, [-1, 1])), cat_X),
        "hgb_cat_poisson": (HistGradientBoostingRegressor(loss="poisson", **hgb_cat).fit(
            cat_X, np.random.default_rng(1).poisson(np.exp(0.2 * np.nan_to_num(cat_y)))), cat_X),
    }


MODELS = _models()


def _rows(X, name):
    rows = X[300:304].copy()
    if name.startswith("hgb_cat"):
        rows[0, 1] = 9.0  # a category never seen in training: goes the missing way
        rows[1, 3] = np.nan
        rows[2, 1] = -1.0  # negative code: treated as missing by scikit-learn
    return rows


@pytest.mark.parametrize("name", list(MODELS))
def test_path_dependent_equals_brute_force(name):
    """Path-dependent SHAP values equal the Shapley values of v(S) = E[f(x) | x_S] by cover
    (Lundberg et al. 2020, Algorithm 1), summed over all 2^5 coalitions (Shapley 1953); local
    accuracy (Lundberg and Lee 2017, Property 1)."""
    model, X = MODELS[name]
    ens = treeshap.from_estimator(model)
    rows = _rows(X, name)
    game = _path_game(model, ens.n_outputs)
    raw = _raw_predict(model, rows)
    for algorithm in ("auto", "classic"):
        res = treeshap.shap_values(ens, rows, algorithm=algorithm)
        for r, x in enumerate(rows):
            phi, v_empty, v_full = _shapley(game, x, M)
            np.testing.assert_allclose(v_full, raw[r], atol=1e-10)  # the walk routes as sklearn
            np.testing.assert_allclose(res.values[r], phi, rtol=1e-9, atol=1e-10)
            np.testing.assert_allclose(res.base_value, v_empty, rtol=1e-9, atol=1e-10)
        np.testing.assert_allclose(res.values.sum(axis=1) + res.base_value, raw, atol=1e-10)


@pytest.mark.parametrize("name", list(MODELS))
def test_interventional_equals_brute_force(name):
    """Interventional SHAP values equal the Shapley values of v(S) = mean over a 70-row
    background of f(x_S, z_rest), with f the estimator's own raw prediction (Lundberg et al.
    2020, Methods; Shapley 1953); local accuracy against the estimator's raw output."""
    model, X = MODELS[name]
    ens = treeshap.from_estimator(model)
    rows, background = _rows(X, name), X[:70]  # more than one 64-row word of background
    game = _interventional_game(model, background)
    raw = _raw_predict(model, rows)
    expected = [_shapley(game, x, M)[:2] for x in rows]
    for algorithm in ("auto", "classic"):  # path masks, then the per-pair tree walk
        res = treeshap.shap_values(ens, rows, method="interventional", background=background,
                                   algorithm=algorithm)
        for r, (phi, v_empty) in enumerate(expected):
            np.testing.assert_allclose(res.values[r], phi, rtol=1e-9, atol=1e-10)
            np.testing.assert_allclose(res.base_value, v_empty, rtol=1e-9, atol=1e-10)
        np.testing.assert_allclose(res.values.sum(axis=1) + res.base_value, raw, atol=1e-10)


@pytest.mark.parametrize("name", ["dt_reg", "gb_multi", "hgb_cat_multi"])
def test_interaction_values_equal_brute_force(name):
    """Off-diagonal interaction values equal the Shapley interaction index of the path-dependent
    game (Lundberg et al. 2020, Methods); rows of the matrix sum to the SHAP values."""
    model, X = MODELS[name]
    ens = treeshap.from_estimator(model)
    rows = _rows(X, name)[:2]
    res = treeshap.interaction_values(ens, rows)
    game = _path_game(model, ens.n_outputs)
    for r, x in enumerate(rows):
        for (i, j), value in _interaction_index(game, x, M).items():
            np.testing.assert_allclose(res.values[r, i, j], value, rtol=1e-9, atol=1e-10)
            np.testing.assert_allclose(res.values[r, j, i], value, rtol=1e-9, atol=1e-10)
    phi = treeshap.shap_values(ens, rows).values
    np.testing.assert_allclose(res.values.sum(axis=2), phi, atol=1e-10)


def _category_frame(seed=0, n=400):
    X, y = _data(seed, n, categorical=True, missing=True)
    frame = pd.DataFrame(X, columns=[f"c{j}" for j in range(M)])
    names = np.array(["north", "east", "south", "west", "centre", "coast", "hills"])
    codes = frame["c1"].to_numpy()
    frame["c1"] = pd.Categorical(np.where(np.isnan(codes), None, names[np.nan_to_num(
        codes).astype(int) % 7]))
    return frame, y


def test_dataframe_categories_through_internal_encoder():
    """HistGradientBoosting fitted on a DataFrame with a categorical dtype encodes and reorders
    columns internally (its ``_preprocessor``); model_matrix maps a frame to codes in the frame's
    own column order, and the SHAP values equal brute force on the estimator's own predictions
    (Shapley 1953; Lundberg et al. 2020 interventional game)."""
    frame, y = _category_frame()
    model = HistGradientBoostingClassifier(max_iter=6, categorical_features="from_dtype",
                                           random_state=0).fit(frame, y > 0)
    ens = treeshap.from_estimator(model)
    rows_frame, background = frame.iloc[300:303], frame.iloc[:15]
    rows = treeshap.model_matrix(ens, rows_frame)
    raw = np.asarray(model._raw_predict(rows_frame))
    np.testing.assert_allclose(treeshap.raw_output(ens, rows), raw, atol=1e-12)
    res = treeshap.shap_values(ens, rows, method="interventional",
                               background=treeshap.model_matrix(ens, background))
    game = _interventional_game(model, background)
    for r in range(len(rows_frame)):
        phi, _, _ = _shapley(game, rows_frame.iloc[r], M)
        np.testing.assert_allclose(res.values[r], phi, rtol=1e-9, atol=1e-10)
    path = treeshap.shap_values(ens, rows)
    np.testing.assert_allclose(path.values.sum(axis=1) + path.base_value, raw, atol=1e-10)
