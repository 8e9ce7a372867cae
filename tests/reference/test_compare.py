"""Reference checks for workbench.engine.compare (champion against challenger)."""

import copy

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from sklearn import metrics as skm
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.inspection import partial_dependence as sk_partial_dependence
from sklearn.linear_model import LogisticRegression, PoissonRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from workbench.engine.adapter import ModelAdapter
from workbench.engine.compare import compare_versions, effect_overlay, paired_intervals
from workbench.engine.comparestats import paired_bootstrap
from workbench.engine.metrics import metric_function

FEATURES = ["mean radius", "mean texture", "mean smoothness", "mean compactness",
            "mean symmetry", "worst concavity"]


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    X = X[FEATURES]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X, y)
    return model, X, y


def _with_coefficient(model, feature_index: int, value: float):
    """A copy of a fitted scaled logistic pipeline with one coefficient set by hand."""
    other = copy.deepcopy(model)
    other.steps[-1][1].coef_[0, feature_index] = value
    return other


def test_model_against_itself_gives_no_change(cancer):
    """A model compared with itself (identity; common practice, no source): every metric
    difference and every bootstrap draw is 0, Spearman's rho and Kendall's tau are 1 (Kendall,
    Rank Correlation Methods, 1948, chapter 1: tau = 1 for identical rankings), no row swaps
    at the cutoff, no row moves, ranks do not change, DeLong's z is 0 (p = 1) and every double
    lift band has A = B (Goldburd, Khare and Tevet 2016, CAS Monograph 5, section 7.2.2).
    Data: sklearn.datasets.load_breast_cancer."""
    model, X, y = cancer
    a = ModelAdapter(model)
    c = compare_versions(a, ModelAdapter(model), X, y, cutoff=0.5, resamples=50, seed=2)
    assert all(v == 0 for v in c.difference.values())
    assert all(np.all(iv.draws == 0) and iv.low == 0 and iv.high == 0
               for iv in c.intervals.values())
    assert c.spearman == pytest.approx(1.0) and c.kendall == pytest.approx(1.0)
    assert c.swap.swapped == 0 and c.moved_share == 0
    assert c.swap.counts["both_accept"] + c.swap.counts["both_decline"] == len(X)
    assert np.all(c.ranking.rank_change == 0)
    np.testing.assert_allclose(c.ranking.importance_a, c.ranking.importance_b)
    assert c.delong.z == 0 and c.delong.p_value == pytest.approx(1.0)
    np.testing.assert_allclose(c.double_lift.pred_a, c.double_lift.pred_b)


def test_changed_coefficient_leads_the_ranking_shift(cancer):
    """Two logistic models that differ only in one coefficient (set by hand to 0 in B): the
    permuted feature no longer enters B's score, so its permutation importance under B is
    exactly 0 (definition: Breiman 2001, Machine Learning 45(1), section 10; scikit-learn user
    guide, "Permutation feature importance"), it falls to the bottom of B's ranking and leads
    the ranking shift. Data: sklearn.datasets.load_breast_cancer."""
    model, X, y = cancer
    a = ModelAdapter(model)
    coef = model.steps[-1][1].coef_[0]
    top = int(np.argmax(np.abs(coef)))
    b = ModelAdapter(_with_coefficient(model, top, 0.0))
    c = compare_versions(a, b, X, y, cutoff=0.5, resamples=20, importance_repeats=5)
    r = c.ranking
    lead = r.order[0]
    assert r.features[lead] == FEATURES[top]
    assert r.importance_b[lead] == 0.0
    assert r.importance_a[lead] > 0.01
    assert abs(r.rank_change[lead]) == np.max(np.abs(r.rank_change))


def test_rank_agreement_equals_scipy(cancer):
    """Spearman's rho and Kendall's tau-b of the two response vectors equal scipy.stats.spearmanr
    and scipy.stats.kendalltau; the moved share is the share of |p_b - p_a| > threshold."""
    model, X, y = cancer
    b_model = _with_coefficient(model, 0, 0.3)
    c = compare_versions(ModelAdapter(model), ModelAdapter(b_model), X, y, resamples=10,
                         moved_threshold=0.02, importance_repeats=1)
    pa = model.predict_proba(X)[:, 1]
    pb = b_model.predict_proba(X)[:, 1]
    assert c.spearman == pytest.approx(stats.spearmanr(pa, pb).statistic, abs=1e-12)
    assert c.kendall == pytest.approx(stats.kendalltau(pa, pb).statistic, abs=1e-12)
    assert c.moved_share == pytest.approx(np.mean(np.abs(pb - pa) > 0.02))
    assert c.metrics_a["auc"] == pytest.approx(skm.roc_auc_score(y, pa), abs=1e-12)
    assert c.difference["auc"] == pytest.approx(skm.roc_auc_score(y, pb)
                                                - skm.roc_auc_score(y, pa), abs=1e-12)


def test_swap_counts_equal_a_hand_count():
    """Swap table worked by hand (our own small example). Rows and probabilities:
    A = .1 .3 .6 .7 .2 .9 .4 .5, B = .2 .6 .3 .8 .1 .95 .7 .45, labels 0 1 0 1 0 1 1 0,
    cutoff A .5 and B .5 (decline at or above). A declines rows 2, 3, 5, 7; B declines
    1, 3, 5, 6. Both accept: 0, 4 (bad rate 0); swap in (A declines, B accepts): 2, 7 (0);
    swap out (A accepts, B declines): 1, 6 (both bad, 1.0); both decline: 3, 5 (1.0).
    With B's own cutoff .65, B declines 3, 5, 6: both accept 0, 1, 4; swap in 2, 7;
    swap out 6; both decline 3, 5."""
    pa = np.array([.1, .3, .6, .7, .2, .9, .4, .5])
    pb = np.array([.2, .6, .3, .8, .1, .95, .7, .45])
    y = np.array([0, 1, 0, 1, 0, 1, 1, 0])
    frame = pd.DataFrame({"s": np.arange(8.0)})
    a, b = _fixed_model(pa), _fixed_model(pb)
    c = compare_versions(a, b, frame, y, cutoff=0.5, resamples=10, importance_repeats=1)
    assert c.swap.counts == {"both_accept": 2, "swap_in": 2, "swap_out": 2, "both_decline": 2}
    assert [list(c.swap.rows[k]) for k in ("both_accept", "swap_in", "swap_out", "both_decline")] \
        == [[0, 4], [2, 7], [1, 6], [3, 5]]
    assert c.swap.bad_rate == {"both_accept": 0.0, "swap_in": 0.0, "swap_out": 1.0,
                               "both_decline": 1.0}
    # one cutoff per model: B at .65 declines 3, 5, 6 only, so row 1 joins both accept
    c2 = compare_versions(a, b, frame, y, cutoff_a=0.5, cutoff_b=0.65, resamples=10,
                          importance_repeats=1)
    assert c2.swap.counts == {"both_accept": 3, "swap_in": 2, "swap_out": 1, "both_decline": 2}


class _Fixed(ClassifierMixin, BaseEstimator):
    """A stand-in classifier whose probability of class 1 is a fixed column 's' of scores."""

    def __init__(self, p):
        self.p = np.asarray(p, dtype=float)
        self.classes_ = np.array([0, 1])
        self.feature_names_in_ = np.array(["s"], dtype=object)
        self.n_features_in_ = 1

    def predict(self, X):
        return (self.predict_proba(X)[:, 1] >= 0.5).astype(int)

    def predict_proba(self, X):
        idx = np.asarray(X["s"], dtype=float).astype(int)
        p = self.p[np.clip(idx, 0, len(self.p) - 1)]
        return np.column_stack([1 - p, p])


def _fixed_model(p):
    return ModelAdapter(_Fixed(p))


def test_bootstrap_draws_equal_paired_bootstrap(cancer):
    """Our one-pass bootstrap (each resample as the original rows weighted by their draw counts)
    gives exactly the draws of comparestats.paired_bootstrap for the same seed, with the
    metrics of scikit-learn (roc_auc_score, brier_score_loss, log_loss) and the KS statistic
    of scipy.stats.ks_2samp (the two-sample Kolmogorov-Smirnov statistic of the scores of
    positives against negatives equals max |TPR - FPR|). Bootstrap: Efron and Tibshirani 1993,
    chapter 13."""
    model, X, y = cancer
    yy = y.to_numpy()
    pa = model.predict_proba(X)[:, 1]
    pb = _with_coefficient(model, 1, 0.0).predict_proba(X)[:, 1]
    ours = paired_intervals("binary", yy, pa, pb, resamples=60, seed=5)
    for name in ("auc", "brier", "log_loss"):
        ref = paired_bootstrap(metric_function(name, "binary"), yy, pa, pb, resamples=60, seed=5)
        np.testing.assert_allclose(ours[name].draws, ref.draws, atol=1e-12, err_msg=name)
        assert ours[name].low == pytest.approx(ref.low, abs=1e-12)
        assert ours[name].high == pytest.approx(ref.high, abs=1e-12)
        assert ours[name].difference == pytest.approx(ref.difference, abs=1e-12)

    def ks(y_, p_, w_):
        return stats.ks_2samp(p_[y_ == 1], p_[y_ == 0]).statistic

    ref = paired_bootstrap(ks, yy, pa, pb, resamples=60, seed=5)
    np.testing.assert_allclose(ours["ks"].draws, ref.draws, atol=1e-12)
    np.testing.assert_allclose(ours["gini"].draws, 2 * ours["auc"].draws, atol=1e-12)


def test_weighted_bootstrap_equals_paired_bootstrap(cancer):
    """With sample weights, the draws still equal comparestats.paired_bootstrap with the
    weighted sklearn metric (roc_auc_score with sample_weight)."""
    model, X, y = cancer
    yy = y.to_numpy()
    w = np.random.default_rng(3).uniform(0.5, 2.0, len(yy))
    pa = model.predict_proba(X)[:, 1]
    pb = _with_coefficient(model, 2, 0.0).predict_proba(X)[:, 1]
    ours = paired_intervals("binary", yy, pa, pb, weight=w, resamples=30, seed=1)
    ref = paired_bootstrap(metric_function("auc", "binary"), yy, pa, pb, resamples=30, seed=1,
                           sample_weight=w)
    np.testing.assert_allclose(ours["auc"].draws, ref.draws, atol=1e-12)


def test_count_models_bootstrap_and_double_lift():
    """Poisson GLMs with exposure on sklearn.datasets.load_diabetes (target turned into counts):
    the deviance draws equal comparestats.paired_bootstrap with sklearn's
    mean_poisson_deviance on rates weighted by exposure; double lift bands (Goldburd, Khare and
    Tevet 2016, CAS Monograph 5, section 7.2.2) each hold one tenth of the exposure, and the
    exposure-weighted mean actual rate over the bands is the overall rate."""
    X, target = load_diabetes(return_X_y=True, as_frame=True)
    rng = np.random.default_rng(0)
    exposure = rng.uniform(0.2, 1.0, len(X))
    counts = rng.poisson(exposure * np.exp((target - target.mean()) / target.std() * 0.5))
    rate = counts / exposure
    a = PoissonRegressor(alpha=1e-3, max_iter=500).fit(X[["bmi", "bp"]], rate,
                                                       sample_weight=exposure)
    b = PoissonRegressor(alpha=1e-3, max_iter=500).fit(X[["bmi", "bp", "s5"]], rate,
                                                       sample_weight=exposure)
    c = compare_versions(ModelAdapter(a), ModelAdapter(b), X, counts, weight=exposure,
                         cutoff=1.0, resamples=40, seed=4, importance_repeats=2)
    assert c.task == "count"
    ra, rb = a.predict(X[["bmi", "bp"]]), b.predict(X[["bmi", "bp", "s5"]])
    ref = paired_bootstrap(metric_function("poisson_deviance", "count"), rate, ra, rb,
                           resamples=40, seed=4, sample_weight=exposure)
    np.testing.assert_allclose(c.intervals["poisson_deviance"].draws, ref.draws, atol=1e-12)
    assert c.difference["poisson_deviance"] == pytest.approx(
        skm.mean_poisson_deviance(rate, rb, sample_weight=exposure)
        - skm.mean_poisson_deviance(rate, ra, sample_weight=exposure), abs=1e-12)
    lift = c.double_lift
    np.testing.assert_allclose(lift.weight, exposure.sum() / 10, rtol=0.02)
    assert np.sum(lift.weight * lift.actual) / lift.weight.sum() == pytest.approx(
        np.sum(counts) / exposure.sum())
    assert c.ranking.importance_a[c.ranking.features.index("s5")] == 0.0
    assert not c.ranking.used_a[c.ranking.features.index("s5")]


def test_double_lift_bands_hold_equal_weight(cancer):
    """Double lift chart bands of equal weight (Goldburd, Khare and Tevet 2016, CAS Monograph 5,
    section 7.2.2): 569 rows in 5 bands hold 113 or 114 rows each, bands are ordered by the
    ratio B / A, and each band's mean actual equals the hand mean of its rows."""
    model, X, y = cancer
    b_model = _with_coefficient(model, 3, 0.0)
    c = compare_versions(ModelAdapter(model), ModelAdapter(b_model), X, y, bands=5,
                         resamples=10, importance_repeats=1)
    lift = c.double_lift
    assert lift.weight.sum() == len(X)
    assert set(lift.weight.astype(int)) <= {113, 114}
    assert np.all(np.diff(lift.ratio_low) > 0)
    yy = y.to_numpy()
    for k in range(5):
        assert lift.actual[k] == pytest.approx(yy[lift.band_of_row == k].mean())


def test_effect_overlay_equals_sklearn_partial_dependence(cancer):
    """Both curves equal sklearn.inspection.partial_dependence (brute method, predict_proba) on
    the same grid (Friedman 2001, Ann. Statist. 29(5), section 8.2)."""
    model, X, y = cancer
    b_model = _with_coefficient(model, 0, -1.0)
    overlay = effect_overlay(ModelAdapter(model), ModelAdapter(b_model), X, "mean radius",
                             grid_size=8)
    for pd_ours, est in ((overlay.pd_a, model), (overlay.pd_b, b_model)):
        theirs = sk_partial_dependence(est, X, ["mean radius"], kind="average", method="brute",
                                       response_method="predict_proba",
                                       custom_values={"mean radius": overlay.grid})
        np.testing.assert_allclose(pd_ours, theirs["average"][0], atol=1e-10)
    assert overlay.units == "probability of 1"
