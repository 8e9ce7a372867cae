"""Reference checks for workbench.engine.comparestats (champion / challenger statistics)."""

import itertools

import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import roc_auc_score

from workbench.engine.comparestats import (
    delong_covariance,
    delong_test,
    double_lift,
    moved_share,
    paired_bootstrap,
    rank_agreement,
    swap_table,
)
from workbench.engine.errors import Cancelled, InputError
from workbench.engine.metrics import metric_function


def _psi(x, y):
    return 1.0 if x > y else 0.5 if x == y else 0.0


def test_delong_variance_hand_example():
    """DeLong, DeLong and Clarke-Pearson (1988), Biometrics 44:837-845, structural components, worked by hand.
    Positives X = .9, .6, .4; negatives Y = .7, .3, .2.
    V10(X_i) = share of negatives below X_i: 1, 2/3, 2/3 -> AUC = 7/9.
    V01(Y_j) = share of positives above Y_j: 1/3, 1, 1 (mean also 7/9).
    S10 = [(2/9)^2 + (1/9)^2 + (1/9)^2] / (3 - 1) = 1/27.
    S01 = [(4/9)^2 + (2/9)^2 + (2/9)^2] / (3 - 1) = 4/27.
    var(AUC) = S10 / 3 + S01 / 3 = 5/81."""
    y = np.array([1, 1, 1, 0, 0, 0])
    s = np.array([0.9, 0.6, 0.4, 0.7, 0.3, 0.2])
    auc, cov = delong_covariance(y, s)
    assert auc[0] == pytest.approx(7 / 9)
    assert cov[0, 0] == pytest.approx(5 / 81)


def test_delong_covariance_equals_direct_structural_components():
    """DeLong et al. (1988) structural components computed literally with the kernel psi over all
    positive-negative pairs (ties 1/2), against the midrank form of Sun and Xu (2014, IEEE
    Signal Processing Letters 21(11)); scores with ties, covariance of two scores."""
    rng = np.random.default_rng(4)
    y = rng.integers(0, 2, 40)
    a = np.round(rng.normal(size=40) + y, 1)
    b = np.round(rng.normal(size=40) + 0.5 * y, 0)
    X = [np.flatnonzero(y == 1), np.flatnonzero(y == 0)]
    m, n = len(X[0]), len(X[1])
    v10 = np.array([[np.mean([_psi(s[i], s[j]) for j in X[1]]) for i in X[0]] for s in (a, b)])
    v01 = np.array([[np.mean([_psi(s[i], s[j]) for i in X[0]]) for j in X[1]] for s in (a, b)])
    s10 = np.array([[np.sum((v10[r] - v10[r].mean()) * (v10[t] - v10[t].mean())) / (m - 1)
                     for t in range(2)] for r in range(2)])
    s01 = np.array([[np.sum((v01[r] - v01[r].mean()) * (v01[t] - v01[t].mean())) / (n - 1)
                     for t in range(2)] for r in range(2)])
    auc, cov = delong_covariance(y, np.vstack([a, b]))
    np.testing.assert_allclose(auc, [roc_auc_score(y, a), roc_auc_score(y, b)])
    np.testing.assert_allclose(cov, s10 / m + s01 / n)
    r = delong_test(y, a, b)
    assert r.z == pytest.approx((r.auc_b - r.auc_a) / np.sqrt(
        cov[0, 0] + cov[1, 1] - 2 * cov[0, 1]))
    assert r.p_value == pytest.approx(2 * stats.norm.sf(abs(r.z)))


def test_delong_agrees_with_paired_bootstrap():
    """The DeLong standard error of AUC_b - AUC_a agrees with the paired bootstrap's (Efron and
    Tibshirani 1993, chapter 6, from memory) within sampling error: with 500 resamples the bootstrap SE is
    itself uncertain by about 1/sqrt(2*500) = 3%, we allow 12%; hence z agrees too."""
    rng = np.random.default_rng(7)
    n = 1000
    y = rng.integers(0, 2, n)
    latent = rng.normal(size=n) + 0.8 * y
    a = latent + rng.normal(scale=1.0, size=n)
    b = latent + rng.normal(scale=0.6, size=n)
    r = delong_test(y, a, b)
    boot = paired_bootstrap(metric_function("auc", "binary"), y, a, b, resamples=500, seed=1)
    assert boot.difference == pytest.approx(r.difference)
    assert boot.std_error == pytest.approx(r.std_error, rel=0.12)
    assert r.z == pytest.approx(boot.difference / boot.std_error, rel=0.12)
    assert boot.low < r.difference < boot.high


def test_delong_refuses_one_class():
    """Not a reference value: one class, or one positive only, cannot be tested."""
    with pytest.raises(InputError):
        delong_test([1, 1, 1], [0.1, 0.2, 0.3], [0.3, 0.2, 0.1])
    with pytest.raises(InputError):
        delong_test([1, 0, 0], [0.1, 0.2, 0.3], [0.3, 0.2, 0.1])


def test_paired_bootstrap_uses_the_same_rows_for_both_models():
    """Definition of the paired bootstrap (Efron and Tibshirani 1993, chapter 6, from memory): each
    resample's difference is metric(b) - metric(a) on the same resampled rows; replayed here
    with numpy's default_rng(seed).integers, chunk by chunk. Same seed, same result."""
    rng = np.random.default_rng(0)
    y = rng.normal(size=60)
    a, b = y + rng.normal(size=60), y + 0.5 * rng.normal(size=60)
    f = metric_function("rmse", "regression")
    res = paired_bootstrap(f, y, a, b, resamples=30, seed=3, chunk=10)
    g = np.random.default_rng(3)
    expected = []
    for _ in range(3):
        for idx in g.integers(0, 60, size=(10, 60)):
            expected.append(f(y[idx], b[idx]) - f(y[idx], a[idx]))
    np.testing.assert_allclose(res.draws, expected)
    assert res.low == pytest.approx(np.percentile(expected, 2.5))
    assert res.high == pytest.approx(np.percentile(expected, 97.5))
    assert res.difference == pytest.approx(f(y, b) - f(y, a))
    again = paired_bootstrap(f, y, a, b, resamples=30, seed=3, chunk=10)
    np.testing.assert_array_equal(res.draws, again.draws)


def test_paired_bootstrap_progress_and_cancel():
    """Not a reference value: progress reaches 1; cancel raises Cancelled."""
    y = np.arange(20.0)
    seen = []
    f = metric_function("mae", "regression")
    paired_bootstrap(f, y, y + 1, y + 2, resamples=20, chunk=5,
                     progress=lambda frac, msg: seen.append(frac))
    assert seen[-1] == 1.0 and len(seen) == 5
    with pytest.raises(Cancelled):
        paired_bootstrap(f, y, y + 1, y + 2, resamples=20, cancel=lambda: True)


def test_rank_agreement_and_moved_share():
    """Spearman and Kendall equal scipy.stats.spearmanr / kendalltau; moved share counted by
    hand: moves 0, .05, .3, .2 with threshold .1 -> 2 of 4 rows."""
    a = np.array([0.1, 0.2, 0.3, 0.4])
    b = np.array([0.1, 0.25, 0.6, 0.2])
    r = rank_agreement(a, b)
    assert r.spearman == pytest.approx(stats.spearmanr(a, b).statistic)
    assert r.kendall == pytest.approx(stats.kendalltau(a, b).statistic)
    assert moved_share(a, b, 0.1) == 0.5
    # percentile ranks a: .25 .5 .75 1; b: .25 .75 1 .5 -> moves 0 .25 .25 .5 -> 1 of 4 above .3
    assert moved_share(a, b, 0.3, scale="percentile") == 0.25


def test_swap_table_hand_count():
    """Counted by hand. Cutoff .5 on both, adverse when score >= cutoff (decline):
    row: a    b    y    A        B
    0   .2   .3   0    accept   accept   both_accept
    1   .6   .4   1    decline  accept   swap_in
    2   .7   .2   0    decline  accept   swap_in
    3   .3   .8   1    accept   decline  swap_out
    4   .9   .9   1    decline  decline  both_decline
    5   .1   .5   nan  accept   decline  swap_out (no label)
    Bad rates: swap_in 1/2, swap_out 1/1 (row 5 unlabelled), both_accept 0, both_decline 1."""
    a = [0.2, 0.6, 0.7, 0.3, 0.9, 0.1]
    b = [0.3, 0.4, 0.2, 0.8, 0.9, 0.5]
    y = [0, 1, 0, 1, 1, np.nan]
    t = swap_table(a, b, cutoff_a=0.5, cutoff_b=0.5, y=y)
    assert t.counts == {"both_accept": 1, "swap_in": 2, "swap_out": 2, "both_decline": 1}
    assert t.bad_rate == {"both_accept": 0.0, "swap_in": 0.5, "swap_out": 1.0, "both_decline": 1.0}
    assert t.labelled["swap_out"] == 1
    np.testing.assert_array_equal(t.rows["swap_in"], [1, 2])
    np.testing.assert_array_equal(t.rows["swap_out"], [3, 5])
    assert t.swapped == 4
    # a higher-is-better score: decline below the cutoff, so the cells mirror
    u = swap_table(a, b, cutoff_a=0.5, cutoff_b=0.5, adverse_if="below")
    assert u.counts == {"both_accept": 1, "swap_in": 2, "swap_out": 2, "both_decline": 1}
    np.testing.assert_array_equal(u.rows["swap_in"], [3, 5])
    assert np.isnan(u.bad_rate["swap_in"])


def test_double_lift_hand_example():
    """Goldburd, Khare and Tevet, CAS Monograph 5 (2016), section 7.2.2: sort by the ratio of the
    predictions, equal-weight bands, per band average actual and predictions. Worked by hand,
    4 rows unit weight, 2 bands:
    row  actual  pred_a  pred_b  ratio b/a
    0    1       1       2       2
    1    0       2       1       .5
    2    3       2       3       1.5
    3    2       4       2       .5
    Sorted ratios .5 (1), .5 (3), 1.5 (2), 2 (0): band 0 = rows 1, 3; band 1 = rows 2, 0.
    Band means: actual 1, 2; pred_a 3, 1.5; pred_b 1.5, 2.5. Overall means: actual 1.5,
    pred_a 2.25, pred_b 2 -> relative actual 2/3, 4/3; pred_a 4/3, 2/3; pred_b .75, 1.25."""
    d = double_lift([1, 0, 3, 2], [1, 2, 2, 4], [2, 1, 3, 2], bands=2)
    np.testing.assert_array_equal(d.band_of_row, [1, 0, 1, 0])
    np.testing.assert_allclose(d.actual, [1, 2])
    np.testing.assert_allclose(d.pred_a, [3, 1.5])
    np.testing.assert_allclose(d.pred_b, [1.5, 2.5])
    np.testing.assert_allclose(d.actual_relative, [2 / 3, 4 / 3])
    np.testing.assert_allclose(d.pred_a_relative, [4 / 3, 2 / 3])
    np.testing.assert_allclose(d.pred_b_relative, [0.75, 1.25])
    np.testing.assert_allclose(d.ratio_low, [0.5, 1.5])


def test_double_lift_bands_have_equal_weight():
    """Equal-weight bands (Goldburd et al. 2016, section 7.2.2):
    with unit weights and n divisible by the bands each band holds n / bands rows; with unequal
    weights each band's weight is within one row's weight of total / bands; the bands follow
    the sort ratio; weighted means use the weights (np.average)."""
    rng = np.random.default_rng(9)
    n = 1000
    actual = rng.poisson(0.2, n).astype(float)
    pa, pb = rng.uniform(0.1, 0.3, n), rng.uniform(0.1, 0.3, n)
    d = double_lift(actual, pa, pb)
    np.testing.assert_array_equal(d.weight, np.full(10, 100.0))
    assert np.all(d.ratio_high[:-1] <= d.ratio_low[1:])
    w = rng.uniform(0.1, 1.0, n)
    dw = double_lift(actual, pa, pb, weight=w)
    assert np.all(np.abs(dw.weight - w.sum() / 10) <= w.max())
    band3 = dw.band_of_row == 3
    assert dw.actual[3] == pytest.approx(np.average(actual[band3], weights=w[band3]))
    assert dw.pred_b_relative[3] == pytest.approx(
        np.average(pb[band3], weights=w[band3]) / np.average(pb, weights=w))
    with pytest.raises(InputError):
        double_lift(actual, pa * 0, pb)


@pytest.mark.parametrize("bands", [1, 3, 7])
def test_double_lift_band_sizes(bands):
    """Equal-weight cutting by hand: 21 unit rows into 1, 3, 7 bands give 21, 7, 3 rows each."""
    d = double_lift(np.ones(21), np.ones(21), np.arange(1, 22.0), bands=bands)
    np.testing.assert_array_equal(d.weight, np.full(bands, 21 / bands))
    groups = [list(g) for _, g in itertools.groupby(d.band_of_row)]
    assert len(groups) == bands
