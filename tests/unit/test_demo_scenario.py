"""The invented demo scenario: deterministic, and the planted structure is really there."""

from __future__ import annotations

import os
import re

import numpy as np
import pandas as pd
import pandas.testing as pdt
import pytest
import skops.io
from scipy.stats import spearmanr
from sklearn.metrics import roc_auc_score

from demo_models import write as demo_write
from demo_models.build import (
    LENDING_CHALLENGER_FEATURES,
    LENDING_CHAMPION_FEATURES,
    MOTOR_FEATURES,
    build_lending_challenger,
    build_lending_champion,
    build_motor_frequency,
)
from demo_models.lending import (
    LENDING_CATEGORICAL,
    LENDING_DISPLAY,
    LENDING_GROUP,
    LENDING_ID,
    LENDING_LEAK,
    LENDING_MONTH,
    LENDING_NUMERIC,
    LENDING_TARGET,
    LENDING_TRUTH,
    generate_lending,
)
from demo_models.motor import (
    MOTOR_CATEGORICAL,
    MOTOR_EXPOSURE,
    MOTOR_ID,
    MOTOR_TARGET,
    MOTOR_TRUTH,
    generate_motor,
)
from workbench.engine.errors import Cancelled

SMALL = 3_000


def psi(reference, current, bins: int = 10) -> float:
    """Population stability index on reference-decile bins: sum (q - p) ln(q / p).

    The usual credit-scoring definition (Siddiqi, Credit Risk Scorecards, 2006, chapter on
    scorecard monitoring; quoted from memory). Empty bins are floored at 1e-6.
    """
    reference = np.asarray(reference, dtype=float)
    current = np.asarray(current, dtype=float)
    reference, current = reference[~np.isnan(reference)], current[~np.isnan(current)]
    edges = np.unique(np.quantile(reference, np.linspace(0.0, 1.0, bins + 1)))
    edges[0], edges[-1] = -np.inf, np.inf
    p = np.clip(np.histogram(reference, edges)[0] / reference.size, 1e-6, None)
    q = np.clip(np.histogram(current, edges)[0] / current.size, 1e-6, None)
    return float(np.sum((q - p) * np.log(q / p)))


def categorical_psi(reference: pd.Series, current: pd.Series) -> float:
    """The same index with one bin per category (common practice, no source)."""
    p = reference.value_counts(normalize=True)
    q = current.value_counts(normalize=True).reindex(p.index).fillna(0.0)
    p, q = p.clip(lower=1e-6), q.clip(lower=1e-6)
    return float(((q - p) * np.log(q / p)).sum())


@pytest.fixture(scope="module")
def lending():
    return generate_lending()


@pytest.fixture(scope="module")
def small_lending():
    return generate_lending(seed=7, n_reference=SMALL, n_current=SMALL)


@pytest.fixture(scope="module")
def small_models(small_lending):
    reference, _ = small_lending
    return build_lending_champion(reference), build_lending_challenger(reference)


# ---------------------------------------------------------------- determinism


def test_same_seed_gives_identical_frames_and_another_seed_does_not():
    first = generate_lending(seed=3, n_reference=SMALL, n_current=SMALL)
    second = generate_lending(seed=3, n_reference=SMALL, n_current=SMALL)
    for a, b in zip(first, second, strict=True):
        pdt.assert_frame_equal(a, b)
    pdt.assert_frame_equal(generate_motor(seed=5, n=SMALL), generate_motor(seed=5, n=SMALL))

    other = generate_lending(seed=4, n_reference=SMALL, n_current=SMALL)
    assert not first[0][LENDING_NUMERIC[0]].equals(other[0][LENDING_NUMERIC[0]])
    assert not generate_motor(seed=5, n=SMALL).equals(generate_motor(seed=6, n=SMALL))


def test_reference_period_does_not_depend_on_current_size():
    reference_a, _ = generate_lending(seed=7, n_reference=SMALL, n_current=500)
    reference_b, _ = generate_lending(seed=7, n_reference=SMALL, n_current=5_000)
    pdt.assert_frame_equal(reference_a, reference_b)


def test_same_seed_gives_identical_model_predictions(small_lending, small_models):
    reference, current = small_lending
    champion, challenger = small_models
    np.testing.assert_array_equal(
        champion.predict_proba(current), build_lending_champion(reference).predict_proba(current)
    )
    np.testing.assert_array_equal(
        challenger.predict_proba(current),
        build_lending_challenger(reference).predict_proba(current),
    )
    policies = generate_motor(n=SMALL)
    np.testing.assert_array_equal(
        build_motor_frequency(policies).predict(policies),
        build_motor_frequency(policies).predict(policies),
    )


# ---------------------------------------------------------------- shape of the lending data


def test_lending_columns_and_types(lending):
    reference, current = lending
    features = LENDING_NUMERIC + LENDING_CATEGORICAL
    assert 12 <= len(features) <= 16
    expected = {LENDING_ID, LENDING_MONTH, LENDING_TARGET, LENDING_GROUP, LENDING_LEAK, *features}
    for frame in (reference, current):
        assert set(frame.columns) == expected
        assert set(frame[LENDING_TARGET].unique()) == {0, 1}
        assert frame[LENDING_TARGET].dtype == np.int64
        for column in (*LENDING_CATEGORICAL, LENDING_GROUP, LENDING_ID, LENDING_MONTH):
            assert pd.api.types.is_string_dtype(frame[column]), column
        for column in LENDING_NUMERIC:
            assert pd.api.types.is_numeric_dtype(frame[column]), column
        assert frame[LENDING_MONTH].str.fullmatch(r"\d{4}-(0[1-9]|1[0-2])").all()
    assert reference[LENDING_MONTH].min() == LENDING_TRUTH["periods"]["reference"][0]
    assert current[LENDING_MONTH].max() == LENDING_TRUTH["periods"]["current"][1]
    assert reference[LENDING_MONTH].max() < current[LENDING_MONTH].min()
    ids = pd.concat([reference[LENDING_ID], current[LENDING_ID]])
    assert ids.is_unique
    assert set(LENDING_DISPLAY) >= set(features) | {LENDING_LEAK, LENDING_GROUP}


def test_lending_values_are_in_plausible_ranges(lending):
    for frame in lending:
        assert frame["age_years"].between(18, 100).all()
        assert frame["annual_income"].between(5_000, 1_000_000).all()
        assert frame["loan_amount"].between(500, 100_000).all()
        assert frame["debt_to_income"].between(0.0, 1.0).all()
        assert frame["revolving_utilisation"].dropna().between(0.0, 1.0).all()
        assert set(frame["term_months"].unique()) <= {12, 24, 36, 48, 60}
        assert (frame["credit_history_months"] <= (frame["age_years"] - 18) * 12).all()


def test_missing_values_only_where_planted(lending):
    reference, current = lending
    for frame in (reference, current):
        share = frame.isna().mean()
        assert set(share[share > 0].index) == set(LENDING_TRUTH["missing"])
        assert (share[list(LENDING_TRUTH["missing"])] < 0.1).all()


def test_default_rate_in_the_stated_range(lending):
    low, high = LENDING_TRUTH["default_rate_range"]
    for frame in lending:
        assert low <= frame[LENDING_TARGET].mean() <= high


def test_models_see_the_features_they_should():
    assert LENDING_LEAK in LENDING_CHALLENGER_FEATURES
    assert LENDING_LEAK not in LENDING_CHAMPION_FEATURES
    for features in (LENDING_CHAMPION_FEATURES, LENDING_CHALLENGER_FEATURES):
        assert LENDING_GROUP not in features
        assert LENDING_ID not in features and LENDING_MONTH not in features
        assert LENDING_TARGET not in features
    assert set(LENDING_CHALLENGER_FEATURES) - set(LENDING_CHAMPION_FEATURES) == {LENDING_LEAK}


# ---------------------------------------------------------------- planted structure


def test_leak_is_strongly_associated_with_the_label(lending):
    reference, _ = lending
    label = reference[LENDING_TARGET]

    def single_auc(column):
        auc = roc_auc_score(label, reference[column].fillna(reference[column].median()))
        return max(auc, 1.0 - auc)

    assert LENDING_TRUTH["leak"] == LENDING_LEAK
    assert single_auc(LENDING_LEAK) > 0.9
    assert max(single_auc(column) for column in LENDING_NUMERIC) < 0.75


def test_associated_pair_is_the_only_strongly_associated_pair(lending):
    reference, _ = lending
    first, second = LENDING_TRUTH["associated_pair"]
    rho = spearmanr(reference[first], reference[second]).statistic
    assert abs(rho) > 0.8

    # Pairwise-complete rank correlations (two columns have a few missing values).
    matrix = reference[list(LENDING_NUMERIC)].corr(method="spearman").abs().to_numpy(copy=True)
    np.fill_diagonal(matrix, 0.0)
    pair = {LENDING_NUMERIC.index(first), LENDING_NUMERIC.index(second)}
    others = [
        matrix[i, j]
        for i in range(len(LENDING_NUMERIC))
        for j in range(i + 1, len(LENDING_NUMERIC))
        if {i, j} != pair
    ]
    assert max(others) < 0.8


def test_drift_on_the_drifted_features_only(lending):
    reference, current = lending
    drifted = LENDING_TRUTH["drifted"]
    shifts = {f: psi(reference[f], current[f]) for f in LENDING_NUMERIC}
    shifts |= {f: categorical_psi(reference[f], current[f]) for f in LENDING_CATEGORICAL}
    assert set(LENDING_TRUTH["undrifted"]) | set(drifted) == set(shifts)
    for feature in drifted:
        assert shifts[feature] > 0.1, (feature, shifts[feature])
    for feature in LENDING_TRUTH["undrifted"]:
        assert shifts[feature] < 0.02, (feature, shifts[feature])
    assert min(shifts[f] for f in drifted) > 5 * max(shifts[f] for f in LENDING_TRUTH["undrifted"])


def test_champion_score_drifts(small_lending, small_models):
    reference, current = small_lending
    champion, _ = small_models
    shift = psi(champion.predict_proba(reference)[:, 1], champion.predict_proba(current)[:, 1])
    assert shift > 0.1


def test_age_effect_is_u_shaped(lending):
    reference, _ = lending
    assert LENDING_TRUTH["non_monotone"]["feature"] == "age_years"
    rate = reference.groupby(
        pd.cut(reference["age_years"], [20, 30, 40, 50, 60, 76]), observed=True
    )[LENDING_TARGET].mean()
    middle = rate.iloc[2]
    assert rate.iloc[0] > middle and rate.iloc[-1] > middle


def test_debt_to_income_matters_more_for_the_self_employed(lending):
    reference, _ = lending
    feature, partner = LENDING_TRUTH["interaction_pair"]
    tertile = pd.qcut(reference[feature], 3, labels=False)
    rate = reference.groupby([reference[partner], tertile])[LENDING_TARGET].mean().unstack()
    rise = rate[2] - rate[0]
    assert rise["self-employed"] > 3 * rise["permanent"]


def test_challenger_beats_champion_on_current_data(small_lending, small_models):
    _, current = small_lending
    champion, challenger = small_models
    label = current[LENDING_TARGET]
    champion_auc = roc_auc_score(label, champion.predict_proba(current)[:, 1])
    challenger_auc = roc_auc_score(label, challenger.predict_proba(current)[:, 1])
    assert 0.65 < champion_auc < challenger_auc


def test_models_take_only_their_raw_columns(small_models):
    champion, challenger = small_models
    assert list(champion.feature_names_in_) == list(LENDING_CHAMPION_FEATURES)
    assert list(challenger.feature_names_in_) == list(LENDING_CHALLENGER_FEATURES)
    hgb = challenger.named_steps["hgb"]
    assert hgb.is_categorical_.sum() == len(LENDING_CATEGORICAL)


def test_challenger_scores_unseen_categories(small_lending, small_models):
    _, current = small_lending
    _, challenger = small_models
    odd = current.head(5).copy()
    odd["employment_type"] = "apprentice"
    assert np.isfinite(challenger.predict_proba(odd)).all()


# ---------------------------------------------------------------- motor


def test_motor_book_shape():
    policies = generate_motor(n=SMALL)
    assert policies[MOTOR_ID].is_unique
    assert ((policies[MOTOR_EXPOSURE] > 0) & (policies[MOTOR_EXPOSURE] <= 1)).all()
    assert (policies[MOTOR_TARGET] >= 0).all() and policies[MOTOR_TARGET].dtype == np.int64
    assert 8 <= len(MOTOR_FEATURES) <= 10
    assert MOTOR_EXPOSURE not in MOTOR_FEATURES
    for column in MOTOR_CATEGORICAL:
        assert pd.api.types.is_string_dtype(policies[column])
    assert set(MOTOR_TRUTH["monotone"]) <= set(MOTOR_FEATURES)


def test_motor_young_drivers_claim_more_than_middle_aged():
    policies = generate_motor()
    band = pd.cut(policies["driver_age"], [17, 25, 45, 60, 91])
    totals = policies.groupby(band, observed=True)[[MOTOR_TARGET, MOTOR_EXPOSURE]].sum()
    frequency = totals[MOTOR_TARGET] / totals[MOTOR_EXPOSURE]
    assert frequency.iloc[0] > 2 * frequency.iloc[2]


def test_motor_predictions_are_positive_claims_per_year():
    policies = generate_motor(n=SMALL)
    predicted = build_motor_frequency(policies).predict(policies)
    assert np.isfinite(predicted).all() and (predicted > 0).all()
    observed = policies[MOTOR_TARGET].sum() / policies[MOTOR_EXPOSURE].sum()
    expected = np.average(predicted, weights=policies[MOTOR_EXPOSURE])
    assert expected == pytest.approx(observed, rel=0.1)


# ---------------------------------------------------------------- writing and caching


_write_demo = demo_write.write_demo  # the real one, before any test patches it


def _small_write(directory, **kwargs):
    return _write_demo(directory, n_reference=1_500, n_current=1_500, n_motor=2_000, **kwargs)


def test_write_demo_writes_six_files_that_reload(tmp_path):
    fractions = []
    paths = _small_write(tmp_path / "demo", progress=lambda f, _m: fractions.append(f))
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == sorted(demo_write.DEMO_FILES)
    assert set(paths) == {name.split(".")[0] for name in demo_write.DEMO_FILES}
    assert fractions == sorted(fractions) and fractions[-1] == 1.0

    reference, current = generate_lending(7, n_reference=1_500, n_current=1_500)
    pdt.assert_frame_equal(pd.read_parquet(paths["lending_reference"]), reference)
    pdt.assert_frame_equal(pd.read_parquet(paths["lending_current"]), current)
    policies = pd.read_parquet(paths["motor_policies"])
    pdt.assert_frame_equal(policies, generate_motor(11, n=2_000))

    for stem in ("lending_champion", "lending_challenger", "motor_frequency"):
        untrusted = skops.io.get_untrusted_types(file=paths[stem])
        assert set(untrusted) <= demo_write.DEMO_TRUSTED_TYPES
        model = skops.io.load(paths[stem], trusted=untrusted)
        frame = policies if stem == "motor_frequency" else current
        again = demo_write.load_demo_model(paths[stem])
        np.testing.assert_array_equal(model.predict(frame), again.predict(frame))

    champion = skops.io.load(
        paths["lending_champion"],
        trusted=skops.io.get_untrusted_types(file=paths["lending_champion"]),
    )
    np.testing.assert_array_equal(
        champion.predict_proba(current), build_lending_champion(reference).predict_proba(current)
    )


def test_demo_cache_dir_honours_the_environment(monkeypatch, tmp_path):
    monkeypatch.setenv("WORKBENCH_CACHE", str(tmp_path))
    cache = demo_write.demo_cache_dir()
    assert cache.parent == tmp_path
    assert re.fullmatch(r"demo-s\d+-[\w.]+-sklearn[\w.]+", cache.name)
    monkeypatch.delenv("WORKBENCH_CACHE")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert demo_write.demo_cache_dir().parent == tmp_path / "xdg" / "workbench"


def test_ensure_demo_builds_once_into_the_cache(monkeypatch, tmp_path):
    monkeypatch.setenv("WORKBENCH_CACHE", str(tmp_path))
    calls = []

    def counted(directory, **kwargs):
        calls.append(directory)
        return _small_write(directory, **kwargs)

    monkeypatch.setattr(demo_write, "write_demo", counted)
    first = demo_write.ensure_demo()
    second = demo_write.ensure_demo()
    assert len(calls) == 1
    assert first == second
    assert all(
        path.is_file() and path.parent == demo_write.demo_cache_dir() for path in first.values()
    )
    # Nothing but the finished cache is left beside it.
    assert os.listdir(tmp_path) == [demo_write.demo_cache_dir().name]


def test_ensure_demo_completes_a_partial_directory(monkeypatch, tmp_path):
    monkeypatch.setattr(demo_write, "write_demo", _small_write)
    target = tmp_path / "demo"
    target.mkdir()
    (target / "notes.txt").write_text("kept")
    (target / "lending_champion.skops").write_bytes(b"half written")
    paths = demo_write.ensure_demo(target)
    assert (target / "notes.txt").read_text() == "kept"
    demo_write.load_demo_model(paths["lending_champion"])
    assert sorted(os.listdir(tmp_path)) == ["demo"]


def test_cancelled_ensure_demo_leaves_nothing(monkeypatch, tmp_path):
    monkeypatch.setattr(demo_write, "write_demo", _small_write)
    target = tmp_path / "demo"
    with pytest.raises(Cancelled):
        demo_write.ensure_demo(target, cancel=lambda: True)
    assert os.listdir(tmp_path) == []
