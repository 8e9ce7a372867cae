"""Reference checks for workbench.engine.metrics against scikit-learn, scipy and worked examples."""

import numpy as np
import pytest
from scipy import stats
from sklearn import metrics as skm
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.linear_model import LogisticRegression

from workbench.engine.errors import InputError
from workbench.engine.metrics import (
    binary_metrics,
    calibration_table,
    count_metrics,
    default_metric,
    metric_function,
    metrics_for_task,
    regression_metrics,
)


@pytest.fixture(scope="module")
def cancer_scores():
    X, y = load_breast_cancer(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    p = LogisticRegression(C=0.05, max_iter=2000).fit(X[:, :5], y).predict_proba(X[:, :5])[:, 1]
    return y, p


def test_binary_metrics_match_sklearn_and_scipy(cancer_scores):
    """AUC, Brier and log loss equal sklearn.metrics; KS equals scipy.stats.ks_2samp of the scores
    of positives vs negatives (the KS statistic's definition); Gini = 2 AUC - 1 (common practice,
    no source). Data: sklearn.datasets.load_breast_cancer."""
    y, p = cancer_scores
    m = binary_metrics(y, p)
    assert m.auc == pytest.approx(skm.roc_auc_score(y, p), abs=1e-12)
    assert m.gini == pytest.approx(2 * m.auc - 1, abs=1e-12)
    assert m.ks == pytest.approx(stats.ks_2samp(p[y == 1], p[y == 0]).statistic, abs=1e-12)
    assert m.brier == pytest.approx(skm.brier_score_loss(y, p), abs=1e-12)
    assert m.log_loss == pytest.approx(skm.log_loss(y, p), abs=1e-12)
    assert (m.n, m.positives) == (len(y), int(y.sum()))
    assert m.tp is None


def test_weighted_ks_equals_ks_of_repeated_rows():
    """Integer weights act as repeated rows: the weighted KS equals scipy.stats.ks_2samp on the
    data with rows repeated (definition of a frequency weight)."""
    rng = np.random.default_rng(3)
    y = rng.integers(0, 2, 300)
    p = np.clip(0.3 * y + rng.uniform(0, 0.7, 300), 0, 1)
    w = rng.integers(1, 4, 300)
    m = binary_metrics(y, p, sample_weight=w)
    yr, pr = np.repeat(y, w), np.repeat(p, w)
    assert m.ks == pytest.approx(stats.ks_2samp(pr[yr == 1], pr[yr == 0]).statistic, abs=1e-12)
    assert m.auc == pytest.approx(skm.roc_auc_score(yr, pr), abs=1e-12)


def test_confusion_counts_at_cutoff_match_sklearn(cancer_scores):
    """Confusion counts equal sklearn.metrics.confusion_matrix of the adverse decision p >= cutoff;
    with adverse_if="below" the decision is p < cutoff."""
    y, p = cancer_scores
    m = binary_metrics(y, p, cutoff=0.5)
    tn, fp, fn, tp = skm.confusion_matrix(y, (p >= 0.5).astype(int)).ravel()
    assert (m.tp, m.fp, m.tn, m.fn) == (tp, fp, tn, fn)
    b = binary_metrics(y, p, cutoff=0.5, adverse_if="below")
    tn, fp, fn, tp = skm.confusion_matrix(y, (p < 0.5).astype(int)).ravel()
    assert (b.tp, b.fp, b.tn, b.fn) == (tp, fp, tn, fn)


def test_binary_metrics_hand_example():
    """Worked by hand: y = 1,1,0,0, p = .9,.4,.6,.1. Pairs (pos, neg): (.9,.6) (.9,.1) (.4,.1)
    correctly ordered, (.4,.6) not: AUC = 3/4. ECDFs at t=.4: positives 1/2, negatives 1/2;
    the largest gap is 1/2 (at t=.1 or t=.6). Brier = (.01+.36+.36+.01)/4 = .185."""
    m = binary_metrics([1, 1, 0, 0], [0.9, 0.4, 0.6, 0.1], cutoff=0.5)
    assert m.auc == pytest.approx(0.75)
    assert m.ks == pytest.approx(0.5)
    assert m.brier == pytest.approx(0.185)
    assert (m.tp, m.fp, m.tn, m.fn) == (1, 1, 1, 1)


def test_binary_metrics_refuse_one_class_and_bad_input():
    """Not a reference value: one class only, labels other than 0/1, probabilities outside [0, 1]."""
    with pytest.raises(InputError, match="one class"):
        binary_metrics([1, 1, 1], [0.2, 0.3, 0.4])
    with pytest.raises(InputError):
        binary_metrics([0, 2, 1], [0.2, 0.3, 0.4])
    with pytest.raises(InputError):
        binary_metrics([0, 1, 1], [0.2, 1.3, 0.4])
    with pytest.raises(InputError):
        binary_metrics([0, 1, 1], [0.2, 0.3, 0.4], cutoff=0.5, adverse_if="sideways")


def test_hosmer_lemeshow_hand_example():
    """Hosmer and Lemeshow, Applied Logistic Regression, 2nd ed., section 5.2.2:
    C = sum_g (O_g - n_g pbar_g)^2 / (n_g pbar_g (1 - pbar_g)), chi-square with g - 2 df.
    Worked by hand, three groups of four rows with p = .1, .5, .8 and observed 1, 2, 2 positives:
    (1 - .4)^2/(.4*.9) + 0 + (2 - 3.2)^2/(3.2*.2) = 1 + 2.25 = 3.25 on 1 df."""
    p = np.repeat([0.1, 0.5, 0.8], 4)
    y = np.array([1, 0, 0, 0, 1, 1, 0, 0, 1, 1, 0, 0])
    t = calibration_table(y, p, bins=3)
    np.testing.assert_allclose(t.count, [4, 4, 4])
    np.testing.assert_allclose(t.mean_predicted, [0.1, 0.5, 0.8])
    np.testing.assert_allclose(t.observed_rate, [0.25, 0.5, 0.5])
    assert t.hosmer_lemeshow == pytest.approx(3.25)
    assert t.dof == 1
    assert t.p_value == pytest.approx(stats.chi2.sf(3.25, 1))


def test_hosmer_lemeshow_is_near_chi_square_g_minus_2_for_a_fitted_logit():
    """Hosmer and Lemeshow (2nd ed., section 5.2.2) report that for a correctly specified fitted
    logistic model C is approximately chi-square with g - 2 = 8 df: its mean over simulated data
    sets is near 8 (standard error of the mean here about 4 / sqrt(150) = 0.33)."""
    rng = np.random.default_rng(11)
    values = []
    for _ in range(150):
        x = rng.normal(size=(800, 1))
        y = rng.uniform(size=800) < 1 / (1 + np.exp(-(0.3 + 1.2 * x[:, 0])))
        p = LogisticRegression(C=1e6).fit(x, y).predict_proba(x)[:, 1]
        values.append(calibration_table(y.astype(int), p).hosmer_lemeshow)
    assert np.mean(values) == pytest.approx(8.0, abs=1.2)


def test_calibration_groups_are_deciles_and_weights_act_as_repeats(cancer_scores):
    """Deciles of risk (Hosmer and Lemeshow, 2nd ed., section 5.2.2): ten groups of about n/10
    rows; integer weights give the same table as repeated rows (frequency weight definition)."""
    y, p = cancer_scores
    t = calibration_table(y, p)
    assert t.count.size == 10 and t.count.sum() == len(y)
    assert np.all(np.abs(t.count - len(y) / 10) <= 2)
    assert np.all(t.upper[:-1] < t.lower[1:])
    w = np.random.default_rng(0).integers(1, 4, len(y))
    tw = calibration_table(y, p, sample_weight=w)
    tr = calibration_table(np.repeat(y, w), np.repeat(p, w))
    np.testing.assert_allclose(tw.count, tr.count)
    assert tw.hosmer_lemeshow == pytest.approx(tr.hosmer_lemeshow)


def test_regression_metrics_match_sklearn():
    """RMSE, MAE, R^2 equal sklearn.metrics (root_mean_squared_error, mean_absolute_error,
    r2_score), weighted and not; RMSE also equals sqrt(mean squared error) computed directly."""
    rng = np.random.default_rng(1)
    y = rng.normal(size=200)
    pred = y + rng.normal(scale=0.5, size=200)
    w = rng.uniform(0.5, 2, 200)
    m = regression_metrics(y, pred)
    assert m.rmse == pytest.approx(np.sqrt(np.mean((y - pred) ** 2)))
    assert m.mae == pytest.approx(skm.mean_absolute_error(y, pred))
    assert m.r2 == pytest.approx(skm.r2_score(y, pred))
    mw = regression_metrics(y, pred, sample_weight=w)
    assert mw.rmse == pytest.approx(np.sqrt(np.average((y - pred) ** 2, weights=w)))
    assert mw.r2 == pytest.approx(skm.r2_score(y, pred, sample_weight=w))


def test_lorenz_gini_hand_example():
    """Frees, Meyers and Cummings (2011, JASA 106; pages from memory), ordered Lorenz curve with constant
    base premium: sort by predicted rate, cumulative exposure share vs cumulative claims share,
    Gini = 1 - 2 * area. Worked by hand: claims 0,1,0,2 with predictions .1,.4,.2,.3 and unit
    exposure; sorted claims 0,0,2,1 give points (0,0)(.25,0)(.5,0)(.75,2/3)(1,1); trapezoid area
    = .25*(1/3) + .25*(5/6) = 7/24, Gini = 1 - 14/24 = 5/12."""
    m = count_metrics([0, 1, 0, 2], [0.1, 0.4, 0.2, 0.3])
    np.testing.assert_allclose(m.lorenz_exposure, [0, 0.25, 0.5, 0.75, 1])
    np.testing.assert_allclose(m.lorenz_claims, [0, 0, 0, 2 / 3, 1])
    assert m.lorenz_gini == pytest.approx(5 / 12)


def test_count_metrics_deviance_matches_sklearn_with_exposure():
    """Poisson deviance of rates weighted by exposure equals sklearn.metrics.mean_poisson_deviance
    and the Poisson deviance formula 2 sum w (y log(y/mu) - (y - mu)) / sum w (McCullagh and
    Nelder, Generalized Linear Models, 2nd ed., 1989, chapter 2; from memory). Exposure x rate orders as rate."""
    rng = np.random.default_rng(2)
    e = rng.uniform(0.2, 1.0, 500)
    rate = np.exp(rng.normal(-2, 0.5, 500))
    counts = rng.poisson(rate * e)
    m = count_metrics(counts, rate, exposure=e)
    freq = counts / e
    assert m.poisson_deviance == pytest.approx(
        skm.mean_poisson_deviance(freq, rate, sample_weight=e))
    with np.errstate(divide="ignore", invalid="ignore"):
        ylog = np.where(freq > 0, freq * np.log(freq / rate), 0.0)
    by_hand = 2 * np.sum(e * (ylog - (freq - rate))) / e.sum()
    assert m.poisson_deviance == pytest.approx(by_hand)
    assert 0 < m.lorenz_gini < 1
    assert m.total_exposure == pytest.approx(e.sum())


def test_metrics_for_task_multiclass_matches_sklearn():
    """Macro one-vs-rest AUC and log loss equal sklearn roc_auc_score(multi_class="ovr") and
    log_loss. Data: sklearn.datasets.load_iris."""
    X, y = load_iris(return_X_y=True)
    P = LogisticRegression(max_iter=500).fit(X[:, :2], y).predict_proba(X[:, :2])
    out = metrics_for_task("multiclass", y, P)
    assert out["auc_macro"] == pytest.approx(skm.roc_auc_score(y, P, multi_class="ovr"))
    assert out["log_loss"] == pytest.approx(skm.log_loss(y, P))
    assert out["accuracy"] == pytest.approx(skm.accuracy_score(y, P.argmax(1)))
    assert metric_function("auc", "multiclass")(y, P) == pytest.approx(out["auc_macro"])
    # a segment without class 2: the mean of the one-vs-rest AUCs of the classes present
    seg = y < 2
    part = metrics_for_task("multiclass", y[seg], P[seg], classes=[0, 1, 2])
    assert part["auc_macro"] == pytest.approx(np.mean(
        [skm.roc_auc_score(y[seg] == c, P[seg, c]) for c in (0, 1)]))
    assert part["log_loss"] == pytest.approx(skm.log_loss(y[seg], P[seg], labels=[0, 1, 2]))


def test_metrics_for_task_dispatch(cancer_scores):
    """Each task gives the same numbers as its own function (and those are checked above
    against sklearn); an unknown task is refused."""
    y, p = cancer_scores
    assert metrics_for_task("binary", y, p, cutoff=0.3)["auc"] == pytest.approx(
        skm.roc_auc_score(y, p))
    assert metrics_for_task("regression", y, p)["r2"] == pytest.approx(skm.r2_score(y, p))
    assert metrics_for_task("count", y, p + 0.01)["poisson_deviance"] == pytest.approx(
        skm.mean_poisson_deviance(y, p + 0.01))
    with pytest.raises(InputError):
        metrics_for_task("survival", y, p)
    with pytest.raises(InputError, match="exposure"):
        metrics_for_task("count", y, p + 0.01, sample_weight=np.ones(len(y)))


@pytest.mark.parametrize(
    "name,task,reference,greater",
    [
        ("auc", "binary", skm.roc_auc_score, True),
        ("log_loss", "binary", skm.log_loss, False),
        ("brier", "binary", skm.brier_score_loss, False),
        ("rmse", "regression", skm.root_mean_squared_error, False),
        ("mae", "count", skm.mean_absolute_error, False),
        ("poisson_deviance", "count", skm.mean_poisson_deviance, False),
    ],
)
def test_metric_functions_equal_sklearn(cancer_scores, name, task, reference, greater):
    """Each scorer equals its sklearn.metrics function, weighted, and says its direction."""
    y, p = cancer_scores
    p = np.clip(p, 0.01, 0.99)
    w = np.linspace(0.5, 1.5, len(y))
    f = metric_function(name, task)
    assert f.greater_is_better is greater
    assert f(y, p, w) == pytest.approx(reference(y, p, sample_weight=w))


def test_metric_function_refuses_unfit_metric():
    """Not a reference value: AUC for a regression model and unknown names are refused."""
    with pytest.raises(InputError, match="does not fit"):
        metric_function("auc", "regression")
    with pytest.raises(InputError):
        metric_function("accuracy-ish", "binary")
    assert [default_metric(t) for t in ("binary", "multiclass", "regression", "count")] == [
        "auc", "log_loss", "rmse", "poisson_deviance"]
