"""Reference checks for workbench.engine.importance against scikit-learn."""

import numpy as np
import pandas as pd
import pytest
from sklearn import metrics as skm
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.inspection import permutation_importance as sk_permutation_importance
from sklearn.linear_model import LogisticRegression, PoissonRegressor, Ridge
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.engine import effects, importance
from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import InputError
from workbench.engine.importance import permutation_importance

REPEATS = 40


def _within_standard_errors(ours, theirs, z=4.5):
    """Both are means over independent permutations: compare within z standard errors."""
    se = np.sqrt(
        ours.importances.var(axis=1) / ours.repeats
        + theirs.importances_std**2 / theirs.importances.shape[1]
    )
    gap = np.abs(ours.mean - theirs.importances_mean)
    assert np.all(gap <= z * se + 1e-9), (gap, se)


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    X = X.iloc[:, :6]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X, y)
    return model, X, y


def test_auc_importance_matches_sklearn(cancer):
    """Permutation importance with AUC equals sklearn.inspection.permutation_importance with
    scoring="roc_auc" in distribution: same baseline exactly, means within a few standard errors
    over 40 repeats (sklearn user guide, "Permutation feature importance"). Data:
    sklearn.datasets.load_breast_cancer."""
    model, X, y = cancer
    ours = permutation_importance(ModelAdapter(model), X, y, metric="auc", repeats=REPEATS, seed=3)
    theirs = sk_permutation_importance(
        model, X, y, scoring="roc_auc", n_repeats=REPEATS, random_state=11
    )
    assert ours.baseline == pytest.approx(
        skm.roc_auc_score(y, model.predict_proba(X)[:, 1]), abs=1e-12
    )
    assert ours.importances.shape == (6, REPEATS)
    _within_standard_errors(ours, theirs)
    assert ours.greater_is_better


def test_log_loss_importance_matches_sklearn(cancer):
    """Log loss: our rise in the loss equals sklearn's drop of scoring="neg_log_loss" in
    distribution (sklearn user guide, "Permutation feature importance")."""
    model, X, y = cancer
    ours = permutation_importance(ModelAdapter(model), X, y, metric="log_loss", repeats=REPEATS)
    theirs = sk_permutation_importance(
        model, X, y, scoring="neg_log_loss", n_repeats=REPEATS, random_state=5
    )
    assert ours.baseline == pytest.approx(skm.log_loss(y, model.predict_proba(X)), abs=1e-12)
    _within_standard_errors(ours, theirs)


def test_rmse_importance_matches_sklearn():
    """Regression with RMSE against scoring="neg_root_mean_squared_error" (sklearn user guide,
    "Permutation feature importance"). Data: sklearn.datasets.load_diabetes."""
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    model = Ridge(alpha=0.1).fit(X, y)
    ours = permutation_importance(ModelAdapter(model), X, y, metric="rmse", repeats=REPEATS, seed=1)
    theirs = sk_permutation_importance(
        model, X, y, scoring="neg_root_mean_squared_error", n_repeats=REPEATS, random_state=2
    )
    assert ours.baseline == pytest.approx(skm.root_mean_squared_error(y, model.predict(X)))
    _within_standard_errors(ours, theirs)
    assert ours.features[int(ours.order[0])] in ("bmi", "s5")


def test_mixed_pipeline_and_weights_match_sklearn():
    """A pipeline with text categories and sample weights against sklearn with sample_weight and
    scoring="neg_brier_score" (sklearn user guide, "Permutation feature importance")."""
    rng = np.random.default_rng(0)
    n = 600
    X = pd.DataFrame(
        {"a": rng.normal(size=n), "b": rng.normal(size=n), "region": rng.choice(["n", "s", "w"], n)}
    )
    logit = 1.2 * X["a"] - 0.4 * X["b"] + (X["region"] == "w") * 1.0
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    w = rng.uniform(0.5, 2.0, n)
    ct = ColumnTransformer(
        [("num", "passthrough", ["a", "b"]), ("cat", OneHotEncoder(), ["region"])]
    )
    model = make_pipeline(ct, LogisticRegression()).fit(X, y)
    ours = permutation_importance(
        ModelAdapter(model), X, y, metric="brier", repeats=REPEATS, sample_weight=w
    )
    theirs = sk_permutation_importance(
        model, X, y, scoring="neg_brier_score", n_repeats=REPEATS, random_state=9, sample_weight=w
    )
    assert ours.baseline == pytest.approx(
        skm.brier_score_loss(y, model.predict_proba(X)[:, 1], sample_weight=w), abs=1e-12
    )
    _within_standard_errors(ours, theirs)


def test_poisson_exposure_baseline_is_weighted_frequency_deviance():
    """Count model with exposure: the metric is the mean Poisson deviance of the observed
    frequency y / exposure, weighted by exposure (the usual frequency set-up, e.g. the
    scikit-learn example "Poisson regression and non-normal loss"); checked against
    sklearn.metrics.mean_poisson_deviance."""
    rng = np.random.default_rng(4)
    n = 800
    X = pd.DataFrame({"age": rng.uniform(18, 80, n), "power": rng.uniform(0, 1, n)})
    e = rng.uniform(0.2, 1.0, n)
    rate = np.exp(-2 + 0.8 * X["power"] - 0.01 * (X["age"] - 40))
    counts = rng.poisson(rate * e)
    model = PoissonRegressor(alpha=1e-6).fit(X, counts / e, sample_weight=e)
    adapter = ModelAdapter(model)
    ours = permutation_importance(adapter, X, counts, repeats=10, exposure=e)
    assert ours.metric == "poisson_deviance" and ours.exposure
    assert ours.baseline == pytest.approx(
        skm.mean_poisson_deviance(counts / e, model.predict(X), sample_weight=e), rel=1e-12
    )
    assert ours.mean[1] > 0  # power drives the frequency


def test_batched_equals_one_shuffle_at_a_time(cancer, monkeypatch):
    """Stacking many permuted copies into one frame gives the same numbers as scoring each
    permuted copy alone (the definition, sklearn user guide, "Permutation feature importance";
    batching is ours)."""
    model, X, y = cancer
    adapter = ModelAdapter(model)
    big = permutation_importance(
        adapter, X, y, repeats=3, seed=7, groups=[["mean radius", "mean area"]]
    )
    monkeypatch.setattr(effects, "CHUNK_ROWS", 1)
    monkeypatch.setattr(importance, "CHUNK_ROWS", 1)
    small = permutation_importance(
        adapter, X, y, repeats=3, seed=7, groups=[["mean radius", "mean area"]]
    )
    np.testing.assert_allclose(big.importances, small.importances, rtol=0, atol=1e-12)
    np.testing.assert_allclose(big.groups[0].importances, small.groups[0].importances, atol=1e-12)


def test_group_permutation_uses_one_permutation_for_the_block():
    """Permuting a block applies one row permutation to all its columns, so a block of two copies
    of one column is shuffled as a whole (grouped permutation importance, common practice, no
    source): the rise in RMSE equals that of a frame permuted by hand with the same permutation."""
    rng = np.random.default_rng(2)
    n = 300
    x1 = rng.normal(size=n)
    X = pd.DataFrame({"x1": x1, "x2": x1.copy(), "x3": rng.normal(size=n)})
    y = 2 * x1 + 0.1 * X["x3"]
    model = Ridge(alpha=1e-9).fit(X, y)
    adapter = ModelAdapter(model)
    res = permutation_importance(
        adapter, X, y, metric="rmse", repeats=1, seed=0, groups=[["x1", "x2"]]
    )
    gen = np.random.default_rng(0)
    perms = [gen.permutation(n) for _ in range(4)]
    hand = X.copy()
    hand[["x1", "x2"]] = X[["x1", "x2"]].to_numpy()[perms[3]]
    expected = skm.root_mean_squared_error(y, model.predict(hand)) - res.baseline
    assert res.groups[0].mean == pytest.approx(expected, rel=1e-10)


def test_deterministic_for_a_seed_and_max_rows(cancer):
    """Same seed, same numbers; a row sample reports its size (common practice, no source)."""
    model, X, y = cancer
    adapter = ModelAdapter(model)
    a = permutation_importance(adapter, X, y, repeats=2, seed=5, max_rows=200)
    b = permutation_importance(adapter, X, y, repeats=2, seed=5, max_rows=200)
    assert a.rows_used == 200
    np.testing.assert_array_equal(a.importances, b.importances)


def test_bad_input_is_an_input_error(cancer):
    """A metric that does not fit the task, or AUC on one class, is the user's to fix."""
    model, X, y = cancer
    adapter = ModelAdapter(model)
    with pytest.raises(InputError, match="does not fit"):
        permutation_importance(adapter, X, y, metric="rmse")
    ones = y[y == 1]
    with pytest.raises(InputError, match="one class"):
        permutation_importance(adapter, X.loc[ones.index], ones, metric="auc")
    with pytest.raises(InputError, match="not input columns"):
        permutation_importance(adapter, X, y, groups=[["no such column"]])


def test_rank_auc_equals_sklearn_with_ties():
    """The per-shuffle AUC from mid-ranks (Mann-Whitney U / (n1 n0); Hanley and McNeil 1982)
    equals sklearn.metrics.roc_auc_score, ties included."""
    rng = np.random.default_rng(8)
    y = rng.integers(0, 2, 500)
    score = np.round(rng.normal(size=500) + y, 1)  # many ties
    assert importance.auc_by_ranks(y == 1, score) == pytest.approx(
        skm.roc_auc_score(y, score), abs=1e-12
    )


def test_multiclass_log_loss_matches_sklearn():
    """Multiclass: log loss on the probability matrix against scoring="neg_log_loss" (sklearn
    user guide, "Permutation feature importance"). Data: sklearn.datasets.load_iris."""
    from sklearn.datasets import load_iris

    X, y = load_iris(return_X_y=True, as_frame=True)
    model = LogisticRegression(max_iter=2000).fit(X, y)
    ours = permutation_importance(ModelAdapter(model), X, y, repeats=REPEATS, seed=2)
    assert ours.metric == "log_loss"
    theirs = sk_permutation_importance(
        model, X, y, scoring="neg_log_loss", n_repeats=REPEATS, random_state=0
    )
    assert ours.baseline == pytest.approx(skm.log_loss(y, model.predict_proba(X)), abs=1e-12)
    _within_standard_errors(ours, theirs)
