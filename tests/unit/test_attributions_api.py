"""Engine behaviour of explain() and select_background(): choices, notes, errors, progress."""

import dataclasses
import threading

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.decomposition import PCA
from sklearn.ensemble import (
    GradientBoostingClassifier,
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
    RandomForestClassifier,
)
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression
from sklearn.neighbors import KNeighborsRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder

from workbench.engine.adapter import ModelAdapter
from workbench.engine.attribution import agnostic, linear
from workbench.engine.attribution import tree as tree_module
from workbench.engine.attributions import Attributions, explain, select_background
from workbench.engine.errors import Cancelled, InputError


@pytest.fixture
def no_kernel(monkeypatch):
    monkeypatch.setattr(tree_module, "KERNEL_ENABLED", False)


def numeric_data(n=120, p=4, seed=0):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame(rng.normal(size=(n, p)), columns=[f"c{j}" for j in range(p)])
    y = (X["c0"] + X["c1"] * X["c2"] > 0).astype(int)
    return X, y


def mixed_data(n=120, seed=1):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({"amount": rng.gamma(2.0, 3.0, n), "kind": rng.choice(["a", "b", "c"], n)})
    y = (X["amount"] > 6).astype(int) ^ (X["kind"] == "c").astype(int)
    return X, y


# ---- select_background ------------------------------------------------------------------------
def test_select_background_is_seeded_sorted_and_checked():
    X, _ = numeric_data()
    a, b = select_background(X, 30, seed=4), select_background(X, 30, seed=4)
    assert a.index.equals(b.index) and len(a) == 30 and a.index.is_monotonic_increasing
    assert not a.index.equals(select_background(X, 30, seed=5).index)
    assert len(select_background(X, "all")) == len(X) and len(select_background(X, 120)) == 120
    for bad in (0, -3, 2.5, "lots", True):
        with pytest.raises(InputError):
            select_background(X, bad)
    with pytest.raises(InputError, match="only 120 rows"):
        select_background(X, 121)


# ---- method choice ----------------------------------------------------------------------------
def test_auto_chooses_by_model_kind(no_kernel):
    X, y = numeric_data()
    cases = [
        (RandomForestClassifier(n_estimators=5, max_depth=3, random_state=0), "tree-reference"),
        (LogisticRegression(), "linear"),
        (KNeighborsRegressor(n_neighbors=5), "exact"),
    ]
    for model, method in cases:
        res = explain(ModelAdapter(model.fit(X, y)), X.iloc[:3], background=X, background_size=20)
        assert res.method == method
        assert isinstance(res, Attributions) and res.values.shape == (3, 4)
        assert res.background_rows == 20 and res.features == list(X.columns)
        np.testing.assert_allclose(res.residual, 0.0, atol=1e-6)


def test_auto_samples_beyond_twelve_columns():
    X, y = numeric_data(p=13)
    res = explain(
        ModelAdapter(KNeighborsRegressor().fit(X, y)),
        X.iloc[:1],
        background=X,
        background_size=5,
        permutations=4,
    )
    assert res.method == "sampling" and res.permutations == 4


def test_tree_kernel_is_preferred_when_it_supports_the_model():
    X, y = numeric_data()
    model = RandomForestClassifier(n_estimators=5, max_depth=3, random_state=0).fit(X, y)
    if not tree_module.kernel_supports(model):
        pytest.skip("our tree kernel is not available")
    res = explain(ModelAdapter(model), X.iloc[:2], background=X, background_size=20)
    assert res.method == "tree-interventional"
    path = explain(ModelAdapter(model), X.iloc[:2], form="path", background=X)
    assert path.method == "tree-path" and path.background_rows == 0 and path.form == "path"


def test_unmappable_pipeline_uses_the_model_agnostic_method(no_kernel):
    X, y = numeric_data()
    model = make_pipeline(
        PCA(n_components=3), RandomForestClassifier(n_estimators=5, random_state=0)
    ).fit(X, y)
    adapter = ModelAdapter(model)
    assert not adapter.mappable
    res = explain(adapter, X.iloc[:2], background=X, background_size=10)
    assert res.method == "exact" and any("cannot be traced" in n for n in res.notes)
    with pytest.raises(InputError, match="traced"):
        explain(adapter, X.iloc[:2], method="tree", background=X, background_size=10)


def test_shap_gaps_fall_back_with_a_note(no_kernel):
    X, y = numeric_data()
    y3 = np.digitize(X["c0"], [-0.5, 0.5])
    gb3 = GradientBoostingClassifier(n_estimators=5, random_state=0).fit(X, y3)
    res = explain(ModelAdapter(gb3), X.iloc[:2], background=X, background_size=10)
    assert res.method == "exact" and any("two classes only" in n for n in res.notes)
    hgb = HistGradientBoostingClassifier(max_iter=5).fit(X, y)
    res = explain(ModelAdapter(hgb), X.iloc[:2], background=X, background_size=10)
    assert res.method == "exact" and any("HistGradientBoostingClassifier" in n for n in res.notes)
    with pytest.raises(InputError, match="cannot explain this model"):
        explain(
            ModelAdapter(hgb), X.iloc[:2], method="tree-reference", background=X, background_size=10
        )
    path = explain(ModelAdapter(hgb), X.iloc[:2], form="path")  # shap's path form is right here
    assert path.method == "tree-reference" and path.max_abs_residual < 1e-9


def test_native_categorical_splits_refuse_the_reference_library():
    X, y = mixed_data()
    codes = X.assign(kind=X["kind"].map({"a": 0, "b": 1, "c": 2}))
    model = HistGradientBoostingRegressor(max_iter=10, categorical_features=[1]).fit(codes, y)
    assert tree_module.has_categorical_splits(model)
    with pytest.raises(InputError, match="categorical splits"):
        explain(
            ModelAdapter(model),
            codes.iloc[:2],
            method="tree-reference",
            background=codes,
            background_size=10,
        )


def test_tree_on_one_hot_parts_says_what_the_sum_means(no_kernel):
    X, y = mixed_data()
    ct = ColumnTransformer([("k", OneHotEncoder(), ["kind"])], remainder="passthrough")
    model = make_pipeline(ct, RandomForestClassifier(n_estimators=5, random_state=0)).fit(X, y)
    res = explain(ModelAdapter(model), X.iloc[:2], background=X, background_size=20)
    assert any(n.startswith("kind:") and "model-space parts" in n for n in res.notes)
    np.testing.assert_allclose(res.residual, 0.0, atol=1e-6)


def test_residual_guard_distrusts_a_wrong_model_space_result(monkeypatch):
    X, y = numeric_data()
    model = LogisticRegression().fit(X, y)
    real = linear.linear_values
    monkeypatch.setattr(linear, "linear_values", lambda *a: (real(*a)[0], real(*a)[1] + 0.5))
    res = explain(ModelAdapter(model), X.iloc[:2], background=X, background_size=20)
    assert res.method == "exact" and any("residual" in n for n in res.notes)
    forced = explain(
        ModelAdapter(model), X.iloc[:2], method="linear", background=X, background_size=20
    )
    assert forced.method == "linear" and forced.max_abs_residual == pytest.approx(0.5)
    assert any("do not add up" in n for n in forced.notes)


# ---- errors -----------------------------------------------------------------------------------
def test_bad_requests_raise_input_error():
    X, y = numeric_data()
    forest = ModelAdapter(RandomForestClassifier(n_estimators=3, random_state=0).fit(X, y))
    knn = ModelAdapter(KNeighborsRegressor().fit(X, y))
    with pytest.raises(InputError, match="unknown attribution method"):
        explain(forest, X, method="magic")
    with pytest.raises(InputError, match="unknown attribution form"):
        explain(forest, X, form="sideways")
    with pytest.raises(InputError, match="needs a linear model"):
        explain(forest, X.iloc[:1], method="linear")
    with pytest.raises(InputError, match="needs a tree ensemble"):
        explain(knn, X.iloc[:1], method="tree")
    with pytest.raises(InputError, match="tree methods only"):
        explain(knn, X.iloc[:1], method="exact", form="path")
    with pytest.raises(InputError, match="no rows"):
        explain(knn, X.iloc[:0])
    with pytest.raises(InputError, match="lacks column"):
        explain(knn, X.drop(columns="c1"))
    with pytest.raises(InputError, match="only 1 row"):
        explain(knn, X.iloc[:1])  # the default background is drawn from the row itself
    wide, yw = numeric_data(p=17)
    with pytest.raises(InputError, match="sampling"):
        explain(
            ModelAdapter(KNeighborsRegressor().fit(wide, yw)),
            wide.iloc[:1],
            method="exact",
            background=wide,
            background_size=3,
        )


def test_result_is_frozen():
    X, y = numeric_data()
    res = explain(
        ModelAdapter(LogisticRegression().fit(X, y)), X.iloc[:2], background=X, background_size=10
    )
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.method = "other"


# ---- batching, progress, cancel, types --------------------------------------------------------
def test_chunked_scoring_equals_one_batch(monkeypatch):
    X, y = mixed_data()
    model = make_pipeline(
        ColumnTransformer([("k", OneHotEncoder(), ["kind"])], remainder="passthrough"),
        KNeighborsRegressor(),
    ).fit(X, y)
    adapter = ModelAdapter(model)
    whole = explain(adapter, X.iloc[:3], background=X, background_size=15)
    monkeypatch.setattr(agnostic, "CHUNK_ROWS", 7)
    calls = []
    real = adapter.score
    monkeypatch.setattr(adapter, "score", lambda f: calls.append(len(f)) or real(f))
    chunked = explain(adapter, X.iloc[:3], background=X, background_size=15)
    np.testing.assert_allclose(chunked.values, whole.values, atol=1e-12)
    assert max(calls) <= 15 and len(calls) > 3  # hybrid batches of at most 7 rows, plus output/base


def test_progress_rises_to_one_and_cancel_stops():
    X, y = numeric_data()
    adapter = ModelAdapter(KNeighborsRegressor().fit(X, y))
    seen = []
    explain(
        adapter, X.iloc[:2], background=X, background_size=30, progress=lambda f, m: seen.append(f)
    )
    assert seen[-1] == 1.0 and all(b >= a for a, b in zip(seen, seen[1:], strict=False))
    stop = threading.Event()
    stop.set()
    with pytest.raises(Cancelled):
        explain(adapter, X.iloc[:2], background=X, background_size=30, cancel=stop)


def test_text_category_and_missing_values_keep_their_types():
    rng = np.random.default_rng(3)
    n = 80
    X = pd.DataFrame(
        {
            "kind": pd.Series(rng.choice(["a", "b"], n), dtype="category"),
            "label": pd.array(rng.choice(["x", "y", "z"], n), dtype="str"),
            "amount": np.where(rng.uniform(size=n) < 0.2, np.nan, rng.normal(size=n)),
        }
    )
    y = (X["label"] == "x").astype(int) + X["amount"].fillna(0)
    seen_dtypes = []
    ct = ColumnTransformer(
        [("cat", OneHotEncoder(handle_unknown="ignore"), ["kind", "label"])],
        remainder=SimpleImputer(),
    )
    model = make_pipeline(ct, KNeighborsRegressor()).fit(X, y)
    adapter = ModelAdapter(model)
    real = adapter.score
    adapter.score = lambda f: seen_dtypes.append(tuple(str(t) for t in f.dtypes)) or real(f)
    res = explain(adapter, X.iloc[:2], background=X, background_size=10)
    assert res.method == "exact"
    np.testing.assert_allclose(res.residual, 0.0, atol=1e-12)
    assert all(d[0] == "category" and d[1] == "str" and d[2] == "float64" for d in seen_dtypes)


def test_hgb_on_pandas_categories_without_kernel_falls_back(no_kernel):
    rng = np.random.default_rng(0)
    n = 200
    X = pd.DataFrame({"a": rng.normal(size=n), "k": pd.Categorical(rng.choice(["x", "y", "z"], n))})
    y = ((X["a"] > 0) ^ (X["k"] == "z")).astype(int)
    model = HistGradientBoostingClassifier(max_iter=8).fit(X, y)  # categories from the dtype
    res = explain(ModelAdapter(model), X.iloc[:2], background=X, background_size=20, form="path")
    assert res.method == "exact" and res.notes
    np.testing.assert_allclose(res.residual, 0.0, atol=1e-12)


def test_sampling_with_one_column_or_one_pair():
    X = pd.DataFrame({"c0": np.linspace(-1, 1, 40)})
    y = X["c0"] ** 2
    res = explain(
        ModelAdapter(KNeighborsRegressor().fit(X, y)),
        X.iloc[:3],
        method="sampling",
        background=X,
        background_size=10,
    )
    np.testing.assert_allclose(res.values[:, 0], res.output - res.base_value, atol=1e-12)
    X, y = numeric_data(p=3)
    one_pair = explain(
        ModelAdapter(KNeighborsRegressor().fit(X, y)),
        X.iloc[:2],
        method="sampling",
        permutations=2,
        background=X,
        background_size=10,
    )
    assert np.isnan(one_pair.standard_error).all() and one_pair.max_abs_residual < 1e-12


def test_a_series_row_and_a_matrix_background_are_accepted():
    X, y = numeric_data()
    adapter = ModelAdapter(LogisticRegression().fit(X, y))
    as_frames = explain(adapter, X.iloc[[4]], background=X, background_size="all")
    as_series = explain(adapter, X.iloc[4], background=X.to_numpy(), background_size="all")
    np.testing.assert_allclose(as_series.values, as_frames.values, atol=1e-12)
    with pytest.raises(InputError, match="columns"):
        explain(adapter, X.iloc[[4]], background=np.zeros((5, 2)))
