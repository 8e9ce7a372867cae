"""Audit checks against hand computations, published rules and the planted demo scenario."""

import math

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder

from workbench.engine.adapter import ModelAdapter
from workbench.engine.checks import (
    check_adverse_impact,
    check_feature_stability,
    check_leakage,
    check_monotonicity,
    check_score_stability,
    run_checks,
    single_feature_auc,
    violations,
)
from workbench.engine.errors import InputError


# ----------------------------------------------------------------------------- PSI
def _grade_model():
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"grade": rng.choice(["A", "B", "C"], 300), "x": rng.normal(size=300)})
    y = (rng.random(300) < 0.3).astype(int)
    ct = ColumnTransformer([("g", OneHotEncoder(), ["grade"])], remainder="passthrough")
    return ModelAdapter(make_pipeline(ct, LogisticRegression()).fit(df, y))


def _frame(grades: dict, n=100):
    values = [g for g, share in grades.items() for _ in range(round(share * n))]
    return pd.DataFrame({"grade": values, "x": np.zeros(len(values))})


def test_feature_psi_equals_hand_computation_on_levels():
    """PSI = sum((a - e) ln(a / e)) over bins (common practice, no source). Reference shares
    A 0.5, B 0.3, C 0.2; current A 0.3, B 0.3, C 0.4: 0.2 ln(5/3) + 0 + 0.2 ln 2 = 0.24079."""
    adapter = _grade_model()
    ref, cur = _frame({"A": 0.5, "B": 0.3, "C": 0.2}), _frame({"A": 0.3, "B": 0.3, "C": 0.4})
    hand = (0.3 - 0.5) * math.log(0.3 / 0.5) + (0.4 - 0.2) * math.log(0.4 / 0.2)
    result = check_feature_stability(adapter, cur, ref, "grade")
    assert result.id == "stability:grade"
    assert result.evidence["psi"] == pytest.approx(hand, abs=1e-12)
    assert hand == pytest.approx(0.24079, abs=1e-5)
    assert result.status == "warn"  # 0.1 <= PSI < 0.25 (common practice, no source)
    stricter = check_feature_stability(adapter, cur, ref, "grade", warn=0.1, fail=0.2)
    assert stricter.status == "fail"


def test_score_psi_equals_hand_computation_on_two_bins():
    """Two bins cut at the reference median (49.5 for 0..99): shares 0.5/0.5 against 0.7/0.3,
    PSI = 0.2 ln(1.4) - 0.2 ln(0.6) = 0.16946 (common practice, no source)."""
    adapter = _grade_model()
    expected = np.arange(100.0)
    actual = np.concatenate([np.full(70, 10.0), np.full(30, 80.0)])
    result = check_score_stability(adapter, None, None, bins=2, expected=expected, actual=actual)
    hand = (0.7 - 0.5) * math.log(0.7 / 0.5) + (0.3 - 0.5) * math.log(0.3 / 0.5)
    assert result.evidence["psi"] == pytest.approx(hand, abs=1e-12)
    assert result.status == "warn"
    same = check_score_stability(adapter, None, None, expected=expected, actual=expected)
    assert same.evidence["psi"] == pytest.approx(0.0, abs=1e-12) and same.status == "pass"


# ----------------------------------------------------------------------------- adverse impact
def _sigmoid_model():
    """A logistic regression whose probability is exactly sigmoid(x)."""
    x = pd.DataFrame({"x": [-1.0, 1.0, -2.0, 2.0]})
    model = LogisticRegression().fit(x, [0, 1, 0, 1])
    model.coef_ = np.array([[1.0]])
    model.intercept_ = np.array([0.0])
    return ModelAdapter(model)


def test_adverse_impact_ratios_and_four_fifths_flag_equal_hand_computation():
    """Four-fifths rule, 29 CFR 1607.4(D): a rate below 4/5 of the highest group's is flagged.
    Favourable = probability below the cutoff 0.5 (x < 0). Rates: A 5/10 = 0.5, B 4/10 = 0.4,
    C 3/10 = 0.3; ratios to A: 1, 0.8 (not below 0.8, not flagged), 0.6 (flagged)."""
    adapter = _sigmoid_model()
    rows = []
    for group, favourable in (("A", 5), ("B", 4), ("C", 3)):
        rows += [(group, -1.0)] * favourable + [(group, 1.0)] * (10 - favourable)
    frame = pd.DataFrame(rows, columns=["group", "x"])
    labels = np.tile([0, 1], len(frame) // 2).astype(float)
    result = check_adverse_impact(adapter, frame, "group", cutoff=0.5, labels=labels)
    table = {r["group"]: r for r in result.evidence["groups"]}
    assert [table[g]["rate"] for g in "ABC"] == pytest.approx([0.5, 0.4, 0.3])
    assert [table[g]["ratio"] for g in "ABC"] == pytest.approx([1.0, 0.8, 0.6])
    assert [table[g]["flagged"] for g in "ABC"] == [False, False, True]
    assert result.evidence["reference_group"] == "A"
    assert result.status == "fail" and result.evidence["flagged"] == ["C"]
    assert "screening indicator" in result.caution and "not a legal finding" in result.caution
    p = 1 / (1 + np.exp(-frame["x"].to_numpy()))
    for g in "ABC":
        rows_g = (frame["group"] == g).to_numpy()
        assert table[g]["auc"] == pytest.approx(roc_auc_score(labels[rows_g], p[rows_g]))
        assert table[g]["mean_predicted"] == pytest.approx(p[rows_g].mean())


def test_adverse_impact_below_means_higher_scores_are_favourable():
    """adverse_if="below": adverse when the response is under the cutoff, so favourable is x >= 0
    and the rates reverse (A 0.5, B 0.6, C 0.7; ratios 5/7, 6/7, 1): A is flagged (29 CFR 1607.4(D))."""
    adapter = _sigmoid_model()
    rows = []
    for group, low in (("A", 5), ("B", 4), ("C", 3)):
        rows += [(group, -1.0)] * low + [(group, 1.0)] * (10 - low)
    frame = pd.DataFrame(rows, columns=["group", "x"])
    result = check_adverse_impact(adapter, frame, "group", cutoff=0.5, adverse_if="below")
    table = {r["group"]: r for r in result.evidence["groups"]}
    assert [table[g]["ratio"] for g in "ABC"] == pytest.approx([5 / 7, 6 / 7, 1.0])
    assert result.evidence["flagged"] == ["A"]


# ----------------------------------------------------------------------------- monotonicity
def test_violation_of_a_line_is_its_largest_fall_below_an_earlier_point():
    """Hand example (definition in checks.monotonicity): [0, 1, 0.5, 2, 1.2] rises overall; its
    largest fall below an earlier point is 2 - 1.2 = 0.8, from position 3 to 4; as a decreasing
    line its largest rise is 2 - 0 = 2, from position 0 to 3 (common practice, no source)."""
    line = np.array([[0.0, 1.0, 0.5, 2.0, 1.2]])
    size, start, to = violations(line, +1)
    assert size[0] == pytest.approx(0.8) and (start[0], to[0]) == (3, 4)
    size, start, to = violations(line, -1)
    assert size[0] == pytest.approx(2.0) and (start[0], to[0]) == (0, 3)


def _monotone_data(n=3000, seed=1):
    rng = np.random.default_rng(seed)
    x = pd.DataFrame({"x1": rng.uniform(0, 1, n), "x2": rng.uniform(0, 1, n)})
    return x, rng


def test_model_built_monotone_passes():
    """HistGradientBoosting with monotonic_cst=[1, -1] is increasing in x1 and decreasing in x2
    for every row by construction (scikit-learn user guide, "Monotonic Constraints"), so no
    ICE line may violate the declared directions."""
    x, rng = _monotone_data()
    logit = 3 * x["x1"] - 3 * x["x2"] + np.sin(6 * x["x1"])
    y = (rng.random(len(x)) < 1 / (1 + np.exp(-logit))).astype(int)
    model = HistGradientBoostingClassifier(monotonic_cst=[1, -1], max_iter=60, random_state=0).fit(x, y)
    results = run_checks(ModelAdapter(model), x, y, expectations={"x1": "increasing",
                                                                  "x2": "decreasing"})
    mono = {r.id: r for r in results if r.id.startswith("monotonicity:")}
    assert set(mono) == {"monotonicity:x1", "monotonicity:x2"}
    for r in mono.values():
        assert r.status == "pass", r.summary
        assert r.evidence["share_of_rows_violating"] == 0.0
        assert r.evidence["worst_violation"] <= r.parameters["tolerance_output_units"]


def test_planted_reversal_fails_and_names_the_feature():
    """Risk falls and then rises with x2 (a V with its low at 0.5); declared increasing, the
    effect curve itself moves against the direction, so the check fails (definition in
    checks.monotonicity; common practice, no source). x1 stays monotone and passes."""
    x, rng = _monotone_data()
    logit = 3 * x["x1"] + 6 * np.abs(x["x2"] - 0.5) - 2
    y = (rng.random(len(x)) < 1 / (1 + np.exp(-logit))).astype(int)
    model = HistGradientBoostingClassifier(monotonic_cst=[1, 0], max_iter=80, random_state=0).fit(x, y)
    adapter = ModelAdapter(model)
    bad = check_monotonicity(adapter, x, "x2", "increasing")
    assert bad.status == "fail" and bad.id == "monotonicity:x2" and "x2" in bad.title
    assert bad.evidence["effect_curve_violation"] > 1.0
    lo, hi = bad.evidence["effect_curve_between"]
    assert lo < 0.55 and lo < hi
    assert 0 <= bad.evidence["worst_row"] < len(x) and bad.focus["feature"] == "x2"
    assert check_monotonicity(adapter, x, "x1", "increasing").status == "pass"
    with pytest.raises(InputError):
        check_monotonicity(adapter, x, "x3", "increasing")
    with pytest.raises(InputError):
        check_monotonicity(adapter, x, "x1", "sideways")


# ----------------------------------------------------------------------------- leakage
def test_single_feature_auc_equals_sklearn():
    """single_feature_auc is max(AUC, 1 - AUC) of sklearn.metrics.roc_auc_score on the values;
    for levels, on each level's positive rate."""
    rng = np.random.default_rng(3)
    y = rng.integers(0, 2, 500)
    v = rng.normal(size=500) - y
    assert single_feature_auc(pd.Series(v), y, categorical=False) == pytest.approx(
        max(roc_auc_score(y, v), 1 - roc_auc_score(y, v)))
    levels = pd.Series(np.where(rng.random(500) < 0.5, "p", "q"))
    rate = levels.map(pd.Series(y).groupby(levels).mean())
    auc = roc_auc_score(y, rate)
    assert single_feature_auc(levels, y, categorical=True) == pytest.approx(max(auc, 1 - auc))


def test_leak_is_found_and_honest_features_are_not():
    """A copy of the outcome with 3 % of it flipped has AUC about 0.97 alone (>= 0.95) and
    dominates the importance; the check fails naming it (common practice, no source)."""
    rng = np.random.default_rng(5)
    n = 2000
    x = pd.DataFrame({"a": rng.normal(size=n), "b": rng.normal(size=n)})
    y = (rng.random(n) < 1 / (1 + np.exp(-(x["a"] + 0.5 * x["b"])))).astype(int)
    honest = ModelAdapter(LogisticRegression().fit(x, y))
    assert check_leakage(honest, x, y).status == "pass"
    x["after"] = np.where(rng.random(n) < 0.03, 1 - y, y) + rng.normal(0, 0.01, n)
    leaky = ModelAdapter(LogisticRegression().fit(x, y))
    result = check_leakage(leaky, x, y)
    assert result.status == "fail" and result.evidence["suspects"] == ["after"]
    assert result.evidence["ranking"][0]["single_feature_auc"] >= 0.95


# ----------------------------------------------------------------------------- the demo
@pytest.fixture(scope="module")
def demo():
    from demo_models.write import ensure_demo
    from workbench.engine.loading import load_data, load_model

    paths = ensure_demo()
    return {
        "champion": ModelAdapter(load_model(paths["lending_champion"], trust=True).estimator),
        "challenger": ModelAdapter(load_model(paths["lending_challenger"], trust=True).estimator),
        "reference": load_data(paths["lending_reference"]).frame,
        "current": load_data(paths["lending_current"]).frame,
    }


@pytest.mark.slow
def test_demo_champion_checks_find_the_drift_and_nothing_else_fails(demo):
    """demo_models.lending plants drift in debt_to_income and credit_enquiries_6m (PSI about 0.3
    and 0.2) and leaves the other columns undrifted; the champion has no leak and is monotone in
    each feature as the truth table says (age declared decreasing: the champion cannot see the
    U). PSI thresholds 0.1 / 0.25 (common practice, no source)."""
    from demo_models.lending import LENDING_GROUP, LENDING_TARGET, LENDING_TRUTH

    adapter = demo["champion"]
    expectations = {f: d for f, d in LENDING_TRUTH["monotone"].items()
                    if f in adapter.input_columns and d != "not monotone"}
    expectations["age_years"] = "decreasing"
    results = run_checks(adapter, demo["current"], LENDING_TARGET, reference=demo["reference"],
                         expectations=expectations, group=LENDING_GROUP, cutoff=0.25)
    status = {r.id: r.status for r in results}
    drifted = {f"stability:{f}" for f in LENDING_TRUTH["drifted"]}
    assert all(status[c] in ("warn", "fail") for c in drifted)
    assert status["stability:debt_to_income"] == "fail"
    assert {c for c, s in status.items() if s == "fail"} == {"stability:debt_to_income"}
    for f in LENDING_TRUTH["undrifted"]:
        if f in adapter.input_columns:
            assert status[f"stability:{f}"] == "pass", f
    assert status["leakage"] == "pass" and status["additivity"] == "pass"
    assert all(status[f"monotonicity:{f}"] == "pass" for f in expectations)


@pytest.mark.slow
def test_demo_challenger_leak_and_non_monotone_age_are_found(demo):
    """The challenger was trained with collections_contacts_6m, recorded after the outcome
    (demo_models.lending), is constrained to the declared directions except for age, and can see
    the U-shape of age (lowest risk at 45): the leakage check fails naming the leak, age declared
    decreasing fails because risk rises again after 45, the planted drift of debt_to_income
    fails, and nothing else fails (PSI thresholds 0.1 / 0.25, common practice, no source)."""
    from demo_models.lending import LENDING_GROUP, LENDING_LEAK, LENDING_TARGET, LENDING_TRUTH

    adapter, cur = demo["challenger"], demo["current"]
    expectations = {f: d for f, d in LENDING_TRUTH["monotone"].items()
                    if f in adapter.input_columns and d != "not monotone"}
    expectations["age_years"] = "decreasing"
    results = run_checks(adapter, cur, LENDING_TARGET, reference=demo["reference"],
                         expectations=expectations, group=LENDING_GROUP, cutoff=0.25)
    by_id = {r.id: r for r in results}
    failed = {r.id for r in results if r.status == "fail"}
    assert failed == {"leakage", "monotonicity:age_years", "stability:debt_to_income"}
    leak = by_id["leakage"]
    assert leak.evidence["suspects"] == [LENDING_LEAK] and leak.evidence["top_feature"] == LENDING_LEAK
    lo, hi = by_id["monotonicity:age_years"].evidence["effect_curve_between"]
    assert 35 <= lo <= 55 and hi > lo
    assert by_id[f"monotonicity:{LENDING_LEAK}"].status == "pass"


# ----------------------------------------------------------------------------- calibration
def test_calibration_check_passes_a_calibrated_model_and_fails_a_shifted_one():
    """Labels drawn as Bernoulli(p) from the model's own probability are calibrated by
    construction; labels drawn from sigmoid(x + 1) are under-predicted by about 10 points in the
    upper deciles. Hosmer-Lemeshow statistic as in Hosmer and Lemeshow, Applied Logistic
    Regression, 2nd ed., 2000, section 5.2.2, recomputed here by hand; the status limits are
    common practice, no source."""
    from workbench.engine.checks import check_calibration

    adapter = _sigmoid_model()
    rng = np.random.default_rng(11)
    x = pd.DataFrame({"x": rng.normal(-1.0, 1.5, 20_000)})
    p = 1 / (1 + np.exp(-x["x"].to_numpy()))
    calibrated = (rng.random(len(x)) < p).astype(int)
    good = check_calibration(adapter, x, calibrated)
    assert good.status in ("pass", "warn")
    shifted = (rng.random(len(x)) < 1 / (1 + np.exp(-(x["x"].to_numpy() + 1)))).astype(int)
    bad = check_calibration(adapter, x, shifted)
    assert bad.status == "fail" and bad.evidence["p_value"] < 1e-6
    groups = bad.evidence["groups"]
    hand = sum((g["observed"] * g["rows"] - g["expected"] * g["rows"]) ** 2
               / (g["expected"] * g["rows"] * (1 - g["expected"])) for g in groups)
    assert bad.evidence["hosmer_lemeshow"] == pytest.approx(hand, rel=1e-9)
    assert bad.evidence["dof"] == len(groups) - 2
