"""Behaviour of workbench.engine.compare: refusals, cutoffs, determinism, progress and cancel.

(Named test_compare_engine.py: tests/reference/test_compare.py holds the same basename and
pytest, without __init__.py in these folders, cannot collect two modules of one name.)
"""

import threading

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_diabetes, load_iris
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LinearRegression, LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.engine.adapter import ModelAdapter
from workbench.engine.compare import (
    compare_versions,
    compatibility,
    effect_overlay,
    ranking_shift,
    resolve_cutoffs,
)
from workbench.engine.errors import Cancelled, InputError
from workbench.engine.importance import Importance


def _frame(n=300, seed=0):
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({
        "income": rng.normal(40, 9, n),
        "debt": rng.uniform(0, 1, n),
        "region": rng.choice(["north", "south"], n),
        "extra": rng.normal(size=n),
    })
    logit = -1 + 3 * df["debt"] - (df["income"] - 40) / 10 + df["extra"]
    df["bad"] = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    return df


@pytest.fixture(scope="module")
def pair():
    df = _frame()
    ct = ColumnTransformer([("n", StandardScaler(), ["income", "debt"]),
                            ("c", OneHotEncoder(), ["region"])])
    a = make_pipeline(ct, LogisticRegression()).fit(df[["income", "debt", "region"]], df["bad"])
    b = HistGradientBoostingClassifier(max_iter=30, random_state=0).fit(
        df[["income", "debt", "extra"]], df["bad"])
    return ModelAdapter(a), ModelAdapter(b), df


def test_compatibility_lists_the_columns_each_needs(pair):
    a, b, _ = pair
    report = compatibility(a, b)
    assert report.task == "binary" and report.positive_class == 1
    assert report.only_a == ("region",) and report.only_b == ("extra",)
    assert report.shared == ("income", "debt")
    assert report.columns == ("income", "debt", "region", "extra")
    assert not report.same_columns


def test_compatibility_refuses_what_cannot_be_compared(pair):
    a, _, df = pair
    reg = ModelAdapter(LinearRegression().fit(df[["income"]], df["debt"]))
    with pytest.raises(InputError, match="different tasks"):
        compatibility(a, reg)
    other = ModelAdapter(LogisticRegression().fit(df[["income"]], df["region"]))
    with pytest.raises(InputError, match="different classes"):
        compatibility(a, other)
    with pytest.raises(InputError, match="class of interest differs"):
        compatibility(a, a.with_class(0))


def test_missing_columns_name_the_model(pair):
    a, b, df = pair
    with pytest.raises(InputError, match="model B needs extra"):
        compare_versions(a, b, df.drop(columns="extra"), df["bad"], resamples=5)


@pytest.mark.parametrize("kwargs, message", [
    ({"cutoff": 1.5}, "between 0 and 1"),
    ({"cutoff": 0.0}, "between 0 and 1"),
    ({"cutoff_a": 0.3}, "needs both"),
    ({"cutoff": 0.3, "cutoff_b": 0.4}, "not both"),
])
def test_bad_cutoffs_are_refused(kwargs, message):
    with pytest.raises(InputError, match=message):
        resolve_cutoffs("binary", kwargs.get("cutoff"), kwargs.get("cutoff_a"),
                        kwargs.get("cutoff_b"))


def test_regression_cutoff_may_lie_outside_zero_one():
    assert resolve_cutoffs("regression", 250.0, None, None) == (250.0, 250.0)
    assert resolve_cutoffs("binary", None, None, None) == (None, None)


def test_no_cutoff_means_no_swap_table_and_missing_target_refused(pair):
    a, b, df = pair
    c = compare_versions(a, b, df, df["bad"], resamples=5, importance_repeats=1)
    assert c.swap is None and c.cutoff_a is None
    y = df["bad"].astype(float)
    y.iloc[3] = np.nan
    with pytest.raises(InputError, match="missing in 1 row"):
        compare_versions(a, b, df, y, resamples=5)


def test_per_model_cutoffs_are_used(pair):
    a, b, df = pair
    c = compare_versions(a, b, df, df["bad"], cutoff_a=0.3, cutoff_b=0.6, resamples=5,
                         importance_repeats=1)
    pa, pb = c.response_a, c.response_b
    assert c.swap.counts["swap_out"] == int(np.sum((pa < 0.3) & (pb >= 0.6)))
    assert c.swap.counts["swap_in"] == int(np.sum((pa >= 0.3) & (pb < 0.6)))
    assert c.metrics_a["cutoff"] == 0.3 and c.metrics_b["cutoff"] == 0.6


def test_deterministic_for_a_seed_and_different_for_another(pair):
    a, b, df = pair
    one = compare_versions(a, b, df, df["bad"], resamples=40, seed=3, importance_repeats=2)
    two = compare_versions(a, b, df, df["bad"], resamples=40, seed=3, importance_repeats=2)
    three = compare_versions(a, b, df, df["bad"], resamples=40, seed=4, importance_repeats=2)
    np.testing.assert_array_equal(one.intervals["auc"].draws, two.intervals["auc"].draws)
    np.testing.assert_array_equal(one.ranking.importance_b, two.ranking.importance_b)
    assert not np.array_equal(one.intervals["auc"].draws, three.intervals["auc"].draws)
    assert one.intervals["auc"].resamples == 40 and one.intervals["auc"].seed == 3


def test_progress_reaches_one_and_cancel_stops(pair):
    a, b, df = pair
    seen = []
    compare_versions(a, b, df, df["bad"], resamples=60, importance_repeats=1,
                     progress=lambda f, m: seen.append(f))
    assert seen[-1] == 1.0 and seen == sorted(seen)
    stop = threading.Event()
    stop.set()
    with pytest.raises(Cancelled):
        compare_versions(a, b, df, df["bad"], resamples=60, cancel=stop)


def test_ranking_shift_fills_unused_features_with_zero():
    def imp(features, means):
        m = np.asarray(means, dtype=float)
        return Importance(features, m[:, None], m, np.zeros_like(m), 0.8, "auc", True, 1, 0,
                          100)

    shift = ranking_shift(imp(["x", "y", "z"], [0.3, 0.1, 0.05]),
                          imp(["x", "y", "w"], [0.02, 0.1, 0.4]))
    assert shift.features == ["x", "y", "z", "w"]
    np.testing.assert_array_equal(shift.importance_a, [0.3, 0.1, 0.05, 0.0])
    np.testing.assert_array_equal(shift.importance_b, [0.02, 0.1, 0.0, 0.4])
    np.testing.assert_array_equal(shift.rank_a, [1, 2, 3, 4])
    np.testing.assert_array_equal(shift.rank_b, [3, 2, 4, 1])
    assert list(shift.used_a) == [True, True, True, False]
    # |rank change|: x 2, y 0, z 1, w 3 -> w, x, z, y
    assert [shift.features[i] for i in shift.order] == ["w", "x", "z", "y"]


def test_multiclass_models_compare_without_double_lift():
    X, y = load_iris(return_X_y=True, as_frame=True)
    a = ModelAdapter(LogisticRegression(max_iter=500).fit(X, y))
    b = ModelAdapter(LogisticRegression(max_iter=500, C=0.05).fit(X, y))
    c = compare_versions(a, b, X, y, resamples=10, importance_repeats=1)
    assert set(c.difference) == {"auc_macro", "log_loss", "accuracy"}
    assert c.double_lift is None and c.delong is None
    assert any("multiclass" in note for note in c.notes)


def test_effect_overlay_of_a_feature_one_model_lacks(pair):
    a, b, df = pair
    overlay = effect_overlay(a, b, df, "extra", grid_size=6)
    assert not overlay.used_a and overlay.used_b
    assert np.ptp(overlay.pd_a) == 0
    assert overlay.pd_a[0] == pytest.approx(np.mean(a.response(df)))
    assert overlay.grid.shape == overlay.pd_b.shape
    with pytest.raises(InputError, match="neither model"):
        effect_overlay(a, b, df, "bad")
    cat = effect_overlay(a, b, df, "region")
    assert cat.kind == "categorical" and list(cat.grid) == ["north", "south"]


def test_regression_models_compare_with_value_cutoff_and_double_lift():
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    a = ModelAdapter(LinearRegression().fit(X[["bmi", "bp"]], y))
    b = ModelAdapter(LinearRegression().fit(X, y))
    c = compare_versions(a, b, X, y, cutoff=200.0, resamples=20, importance_repeats=1, bands=5)
    assert c.task == "regression" and set(c.difference) == {"rmse", "mae", "r2"}
    assert c.delong is None
    assert c.swap is not None and all(np.isnan(v) for v in c.swap.bad_rate.values())
    assert sum(c.swap.counts.values()) == len(X)
    assert c.double_lift is not None and c.double_lift.bands == 5
    assert c.difference["r2"] > 0  # the model with every column fits its own data better
    assert c.ranking.features[:2] == ["bmi", "bp"] and len(c.ranking.features) == X.shape[1]
