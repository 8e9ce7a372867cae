"""Reference checks for workbench.engine.associations against scipy, pandas, sklearn and
worked examples."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.cluster import hierarchy
from scipy.spatial.distance import squareform
from scipy.stats.contingency import association
from sklearn.linear_model import LinearRegression

from workbench.engine.associations import (
    associations,
    cluster_order,
    correlation_ratio,
    cramers_v,
    pairwise_spearman,
)
from workbench.engine.errors import InputError


@pytest.fixture(scope="module")
def mixed():
    rng = np.random.default_rng(5)
    n = 600
    x = rng.normal(size=n)
    y = x + rng.normal(scale=0.7, size=n)
    z = np.exp(rng.normal(size=n))
    grade = np.where(x + rng.normal(scale=0.8, size=n) > 0, "A", np.where(z > 1, "B", "C"))
    region = rng.choice(["north", "south", "east"], n)
    frame = pd.DataFrame({"x": x, "y": y, "z": z, "grade": grade, "region": region,
                          "flag": x > 0.5})
    for col, share in (("x", 0.1), ("y", 0.05), ("grade", 0.08)):
        frame.loc[rng.uniform(size=n) < share, col] = None
    return frame


def _pairwise(frame, a, b):
    both = frame[[a, b]].dropna()
    return both[a], both[b]


def test_numeric_pairs_match_scipy_pairwise(mixed):
    """Spearman and Pearson on pairwise-complete rows equal scipy.stats.spearmanr / pearsonr
    (signed); the matrix is symmetric with unit diagonal."""
    for method, ref in (("spearman", stats.spearmanr), ("pearson", stats.pearsonr)):
        a = associations(mixed, numeric_method=method)
        i = {f: k for k, f in enumerate(a.features)}
        for u, v in (("x", "y"), ("x", "z"), ("y", "z")):
            s, t = _pairwise(mixed, u, v)
            assert a.matrix[i[u], i[v]] == pytest.approx(ref(s, t).statistic, abs=1e-12)
            assert a.kind[i[u], i[v]] == method
        np.testing.assert_allclose(a.matrix, a.matrix.T)
        np.testing.assert_allclose(np.diag(a.matrix), 1.0)
        assert np.all(a.strength >= 0) and a.matrix[i["x"], i["y"]] > 0


def test_spearman_with_ties_and_missing_matches_pandas():
    """Heavy ties and scattered missing values: equal to pandas DataFrame.corr("spearman"),
    which ranks each pair on its pairwise-complete rows with average ranks."""
    rng = np.random.default_rng(1)
    X = rng.integers(0, 4, size=(400, 6)).astype(float)
    X[:, 1] += X[:, 0]
    X[rng.uniform(size=X.shape) < 0.2] = np.nan
    frame = pd.DataFrame(X, columns=list("abcdef"))
    ours = associations(frame).matrix
    ref = frame.corr(method="spearman").to_numpy()
    np.testing.assert_allclose(ours, ref, atol=1e-12)


def test_uncorrected_cramers_v_matches_scipy(mixed):
    """Uncorrected Cramer's V equals scipy.stats.contingency.association(method="cramer")
    on the pairwise-complete contingency table (Cramer 1946, Mathematical Methods of
    Statistics; the definition sqrt(chi2 / (n (min(r, k) - 1))))."""
    s, t = _pairwise(mixed, "grade", "region")
    table = pd.crosstab(s, t).to_numpy()
    ours = associations(mixed, bias_corrected=False)
    i = {f: k for k, f in enumerate(ours.features)}
    assert ours.matrix[i["grade"], i["region"]] == pytest.approx(
        association(table, method="cramer"), abs=1e-12)
    assert ours.kind[i["grade"], i["region"]] == "cramers_v"


def test_bias_corrected_cramers_v_hand_example():
    """Bergsma (2013), J. Korean Stat. Soc. 42(3):323-328, section 2. Worked by hand for the
    2 x 2 table [[3, 1], [1, 3]] (n = 8): chi2 = 2, phi2 = 1/4; phi2+ = 1/4 - 1/7 = 3/28;
    r~ = k~ = 2 - 1/7 = 13/7; V~ = sqrt((3/28) / (6/7)) = sqrt(1/8). Uncorrected: 1/2."""
    a = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    b = np.array([0, 0, 0, 1, 0, 1, 1, 1])
    assert cramers_v(a, b, bias_corrected=False) == pytest.approx(0.5)
    assert cramers_v(a, b) == pytest.approx(np.sqrt(1 / 8))


def test_corrected_cramers_v_is_near_zero_for_independent_columns():
    """Bergsma (2013): the uncorrected V is biased upwards under independence, the corrected
    one much less so (here 20 x 20 levels on 500 rows)."""
    rng = np.random.default_rng(2)
    a, b = rng.integers(0, 20, 500), rng.integers(0, 20, 500)
    assert cramers_v(a, b) < 0.05 < 0.15 < cramers_v(a, b, bias_corrected=False)


def test_eta_equals_anova_r_squared(mixed):
    """eta^2 = between / total sum of squares = R^2 of the least-squares fit on the category's
    indicators (sklearn LinearRegression), and = F (k-1) / (F (k-1) + n - k) with F from
    scipy.stats.f_oneway (one-way analysis of variance)."""
    a = associations(mixed)
    i = {f: k for k, f in enumerate(a.features)}
    g, x = _pairwise(mixed, "grade", "z")
    dummies = pd.get_dummies(g).to_numpy(float)
    r2 = LinearRegression().fit(dummies, x).score(dummies, x)
    eta = a.matrix[i["grade"], i["z"]]
    assert eta**2 == pytest.approx(r2, abs=1e-10)
    assert a.matrix[i["z"], i["grade"]] == eta and a.kind[i["z"], i["grade"]] == "eta"
    groups = [x[g == lev] for lev in np.unique(g)]
    f = stats.f_oneway(*groups).statistic
    k, n = len(groups), len(x)
    assert eta**2 == pytest.approx(f * (k - 1) / (f * (k - 1) + n - k), abs=1e-10)


def test_eta_hand_example():
    """Worked by hand: values 1, 3 in group a and 5, 7 in group b; mean 4, total SS = 20,
    between SS = 2*(2-4)^2 + 2*(6-4)^2 = 16, eta = sqrt(0.8)."""
    assert correlation_ratio(np.array([0, 0, 1, 1]), np.array([1.0, 3, 5, 7])) == pytest.approx(
        np.sqrt(0.8))


def test_booleans_are_categorical_and_constant_columns_are_nan():
    """Not a reference value: a boolean column is treated as categorical; a constant column has
    NaN associations (off the diagonal)."""
    frame = pd.DataFrame({"a": [1.0, 2, 3, 4, 5], "b": [1.0] * 5, "c": [True, False, True, True, False],
                          "d": ["u", "u", "u", "u", "u"]})
    a = associations(frame)
    assert a.categorical == ["c", "d"]
    assert np.isnan(a.matrix[0, 1]) and np.isnan(a.matrix[2, 3]) and np.isnan(a.matrix[1, 2])
    assert not np.isnan(a.matrix[0, 2])
    with pytest.raises(InputError):
        associations(frame, columns=["a", "nope"])
    with pytest.raises(InputError):
        associations(frame, numeric_method="kendall-ish")


def test_cluster_order_matches_scipy_and_finds_blocks():
    """Order and tree equal scipy.cluster.hierarchy (linkage + optimal_leaf_ordering +
    dendrogram) on 1 - |similarity|. Blocks worked by hand: {a, b} (0.9) and {c, d} (0.8)
    associate above 0.5; e associates with nothing above 0.2, so it is a singleton left out."""
    names = list("abcde")
    S = np.array([
        [1.0, 0.9, 0.1, 0.1, 0.0],
        [0.9, 1.0, 0.2, 0.1, 0.1],
        [0.1, 0.2, 1.0, -0.8, 0.2],
        [0.1, 0.1, -0.8, 1.0, 0.1],
        [0.0, 0.1, 0.2, 0.1, 1.0],
    ])
    c = cluster_order(S, names, threshold=0.5)
    condensed = squareform(1 - np.abs(S), checks=False)
    z = hierarchy.optimal_leaf_ordering(hierarchy.linkage(condensed, "average"), condensed)
    np.testing.assert_allclose(c.linkage, z)
    tree = hierarchy.dendrogram(z, no_plot=True)
    assert c.leaves == tree["leaves"] and c.order == [names[k] for k in tree["leaves"]]
    np.testing.assert_allclose(c.icoord, tree["icoord"])
    np.testing.assert_allclose(c.dcoord, tree["dcoord"])
    assert sorted(sorted(b) for b in c.blocks) == [["a", "b"], ["c", "d"]]
    assert c.linkage.shape == (4, 4) and c.icoord.shape == (4, 4)
    # threshold 0.14 (distance 0.86): e joins {c, d} at average distance (0.8 + 0.9) / 2 = 0.85,
    # while {a, b} meets {c, d, e} only at 5.4 / 6 = 0.9
    low = cluster_order(S, names, threshold=0.14)
    assert sorted(sorted(b) for b in low.blocks) == [["a", "b"], ["c", "d", "e"]]


def test_cluster_order_handles_nan_and_one_feature():
    """Not a reference value: NaN similarity counts as none; one feature gives a trivial order;
    a non-distance linkage (ward) is refused."""
    S = np.array([[1.0, np.nan], [np.nan, 1.0]])
    c = cluster_order(S, ["a", "b"])
    assert c.blocks == [] and c.linkage[0, 2] == pytest.approx(1.0)
    assert cluster_order(np.ones((1, 1)), ["a"]).order == ["a"]
    with pytest.raises(InputError):
        cluster_order(S, ["a", "b"], method="ward")


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(5, 60), levels=st.integers(2, 6),
       missing=st.floats(0.0, 0.4))
def test_pairwise_spearman_matches_pandas_on_random_data(seed, n, levels, missing):
    """Random tied, partly missing data: equal to pandas DataFrame.corr("spearman")
    (pairwise-complete rows, average ranks) wherever pandas gives a number."""
    rng = np.random.default_rng(seed)
    X = rng.integers(0, levels, size=(n, 4)).astype(float)
    X[rng.uniform(size=X.shape) < missing] = np.nan
    ours = pairwise_spearman(X)
    ref = pd.DataFrame(X).corr(method="spearman", min_periods=3).to_numpy()
    off = ~np.eye(4, dtype=bool)
    np.testing.assert_array_equal(np.isnan(ours[off]), np.isnan(ref[off]))
    np.testing.assert_allclose(ours[off], ref[off], atol=1e-10)
