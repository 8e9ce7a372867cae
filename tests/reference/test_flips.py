"""Nearest flip, checked against the model itself, Gower's distance and the logistic algebra.

Sources: counterfactual explanations as the closest input decided the other way (Wachter,
Mittelstadt and Russell 2017, Harvard Journal of Law & Technology 31(2)); the distance is
Gower's (1971, Biometrics 27:857-871) over the model's inputs, computed independently here by
:func:`workbench.engine.gower.gower_distances`; the exact single-feature flip of a logistic
regression follows from its log-odds being linear in each raw input (a standard property of
the model, e.g. Hastie, Tibshirani and Friedman, The Elements of Statistical Learning, 2nd ed.,
section 4.4). The demo model is the invented lending champion (a scaled logistic regression).
"""

import numpy as np
import pandas as pd
import pytest
from scipy.special import logit
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OrdinalEncoder

from demo_models.write import ensure_demo
from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import InputError
from workbench.engine.flips import nearest_flips
from workbench.engine.gower import gower_distances
from workbench.engine.loading import load_model

ACTIONABLE = ["debt_to_income", "loan_amount", "term_months", "revolving_utilisation",
              "loan_purpose", "home_status"]


@pytest.fixture(scope="module")
def demo():
    paths = ensure_demo()
    adapter = ModelAdapter(load_model(paths["lending_champion"], trust=True).estimator)
    frame = pd.read_parquet(paths["lending_current"]).iloc[:4000].reset_index(drop=True)
    r = adapter.response(frame)
    complete = frame[adapter.input_columns].notna().all(axis=1).to_numpy()
    adverse = int(np.flatnonzero((r >= 0.5) & complete)[0])
    return adapter, frame, adverse


def _check_option(adapter, frame, row, option, result, *, immutable=(), cutoff=0.5):
    original = frame.iloc[[row]][adapter.input_columns]
    changed = original.copy()
    for feature, before, after in option.changes:
        assert feature in result.actionable and feature not in immutable
        assert before == original[feature].iloc[0] or (pd.isna(before) and pd.isna(original[feature].iloc[0]))
        changed[feature] = pd.Series([after], index=changed.index).astype(
            changed[feature].dtype if not isinstance(after, float) else float)
        if feature in result.bounds:
            lo, hi = result.bounds[feature]
            assert lo <= after <= hi
        else:
            assert after in set(frame[feature].dropna())  # categorical: an observed level
    was = float(adapter.response(original)[0])
    now = float(adapter.response(changed)[0])
    assert (was >= cutoff) != (now >= cutoff), "the change must move the case across the cutoff"
    assert now == pytest.approx(option.new_response, abs=1e-12)
    assert float(adapter.score(changed)[0]) == pytest.approx(option.new_output, abs=1e-12)
    return original, changed


def test_every_flip_crosses_the_cutoff_within_bounds_and_matches_gower(demo):
    """Re-scored by the model, each option lies on the other side of the cutoff (Wachter et al.
    2017: the counterfactual is decided the other way); only actionable features change, numeric
    values stay in the default 1st-99th percentile bounds (common practice, no source),
    categorical values are observed levels, and the distance equals Gower's (1971) distance
    between the changed and the original case with the data's ranges."""
    adapter, frame, row = demo
    result = nearest_flips(adapter, frame.iloc[[row]], frame, cutoff=0.5, actionable=ACTIONABLE,
                           immutable=["home_status"])
    assert result.found and 1 <= len(result.options) <= 3
    assert "home_status" not in result.actionable
    distances = [o.distance for o in result.options]
    assert distances == sorted(distances)
    assert len({o.features for o in result.options}) == len(result.options)  # diverse feature sets
    x = frame[adapter.input_columns]
    ranges = {c: float(x[c].max() - x[c].min()) for c in x.columns
              if c not in adapter.categorical_columns}
    for option in result.options:
        original, changed = _check_option(adapter, frame, row, option, result, immutable=["home_status"])
        gower = gower_distances(changed, original.iloc[0], ranges=ranges,
                                categorical=adapter.categorical_columns)[0]
        assert option.distance == pytest.approx(gower, rel=1e-9)
        for feature, lo_q, hi_q in [(f, 0.01, 0.99) for f in result.bounds]:
            lo, hi = np.quantile(frame[feature].dropna(), [lo_q, hi_q], method="inverted_cdf")
            assert result.bounds[feature] == (pytest.approx(lo), pytest.approx(hi))


def test_single_feature_flip_of_a_logistic_model_meets_the_algebra(demo):
    """With one actionable numeric feature, the log-odds s(x) = s0 + slope * (x - x0) is linear
    in it (logistic regression on scaled inputs; Hastie et al., ESL 2nd ed., section 4.4), so
    the nearest flip is x* = x0 + (logit(cutoff) - s0) / slope. The search returns the first
    value past x* on the column's recorded grid (three decimals for debt_to_income)."""
    adapter, frame, row = demo
    case = frame.iloc[[row]][adapter.input_columns]
    x0 = float(case["debt_to_income"].iloc[0])
    s0 = float(adapter.score(case)[0])
    moved = case.copy()
    moved["debt_to_income"] = x0 + 1.0
    slope = float(adapter.score(moved)[0]) - s0
    x_star = x0 + (logit(0.5) - s0) / slope
    result = nearest_flips(adapter, case, frame, cutoff=0.5, actionable=["debt_to_income"])
    (option,) = result.options
    ((feature, before, after),) = option.changes
    assert feature == "debt_to_income" and before == x0
    assert after < x_star <= after + 0.001 + 1e-12  # lower side flips (slope > 0), one step away
    assert slope > 0


def test_monotone_direction_and_immutable_are_respected(demo):
    """A feature marked "increase only" never decreases; an immutable feature never changes,
    even when listed as actionable (our rule: immutable wins)."""
    adapter, frame, row = demo
    result = nearest_flips(adapter, frame.iloc[[row]], frame, cutoff=0.5,
                           actionable=ACTIONABLE, immutable=["loan_purpose"],
                           monotone={"debt_to_income": "increase only", "loan_amount": "decrease only"})
    assert result.found
    for option in result.options:
        for feature, before, after in option.changes:
            assert feature != "loan_purpose"
            if feature == "debt_to_income":
                assert after > before
            if feature == "loan_amount":
                assert after < before
        _check_option(adapter, frame, row, option, result, immutable=["loan_purpose"])


def test_clear_messages_for_impossible_requests(demo):
    adapter, frame, row = demo
    case = frame.iloc[[row]]
    with pytest.raises(InputError, match="no actionable features"):
        nearest_flips(adapter, case, frame, cutoff=0.5, actionable=[])
    with pytest.raises(InputError, match="also immutable"):
        nearest_flips(adapter, case, frame, cutoff=0.5, actionable=["region"], immutable=["region"])
    with pytest.raises(InputError, match="not among the model's inputs"):
        nearest_flips(adapter, case, frame, cutoff=0.5, actionable=["shoe_size"])
    with pytest.raises(InputError, match="categorical"):
        nearest_flips(adapter, case, frame, cutoff=0.5, actionable=["region"],
                      monotone={"region": "increase only"})
    x0 = float(case["term_months"].iloc[0])
    narrow = nearest_flips(adapter, case, frame, cutoff=0.5, actionable=["term_months"],
                           bounds={"term_months": (x0 - 1, x0 + 1)})
    assert not narrow.found and narrow.options == ()
    assert "No change of at most 3" in narrow.message and "within the bounds" in narrow.message


def test_tree_model_with_text_categories_flips_both_ways():
    """A gradient-boosted tree on a text column: options verified by re-scoring (Wachter et al.
    2017), categorical values from the observed levels; a favourable case flips to adverse."""
    rng = np.random.default_rng(1)
    n = 600
    df = pd.DataFrame({"ratio": rng.uniform(0, 1, n).round(2),
                       "years": rng.integers(0, 30, n),
                       "kind": rng.choice(["a", "b", "c"], n)})
    y = (df["ratio"] * 3 + (df["kind"] == "c") * 1.5 - df["years"] / 15
         + rng.normal(0, 0.3, n) > 1.2).astype(int)
    prep = ColumnTransformer([("kind", OrdinalEncoder(), ["kind"])], remainder="passthrough")
    model = make_pipeline(prep, HistGradientBoostingClassifier(max_iter=40, random_state=0)).fit(df, y)
    adapter = ModelAdapter(model)
    r = adapter.response(df)
    for row in (int(np.argmax(r)), int(np.argmin(r))):
        result = nearest_flips(adapter, df.iloc[[row]], df, cutoff=0.5,
                               actionable=["ratio", "years", "kind"])
        assert result.found
        for option in result.options:
            _check_option(adapter, df, row, option, result)
