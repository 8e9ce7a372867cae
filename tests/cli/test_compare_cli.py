"""``workbench compare``: JSON shape, readable tables and exit codes, on small skops models."""

import json

import numpy as np
import pytest
import skops.io as sio
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LinearRegression, LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from tests.cli.conftest import run_cli, small_frame


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("compare")
    df = small_frame(n=300, seed=1)
    ct = ColumnTransformer([("num", StandardScaler(), ["income", "debt_ratio"]),
                            ("cat", OneHotEncoder(handle_unknown="ignore"), ["region"])])
    champion = make_pipeline(ct, LogisticRegression(max_iter=1000)).fit(
        df[["income", "debt_ratio", "region"]], df["bad"])
    challenger = HistGradientBoostingClassifier(max_iter=20, random_state=0).fit(
        df[["income", "debt_ratio"]], df["bad"])
    regressor = LinearRegression().fit(df[["income"]], df["debt_ratio"])
    paths = {"a": d / "champion.skops", "b": d / "challenger.skops", "r": d / "reg.skops",
             "data": d / "data.csv"}
    sio.dump(champion, paths["a"])
    sio.dump(challenger, paths["b"])
    sio.dump(regressor, paths["r"])
    df.to_csv(paths["data"], index=False)
    return {**paths, "frame": df, "champion": champion, "challenger": challenger}


def _compare(files, *extra):
    return run_cli("compare", files["a"], files["b"], files["data"], "--target", "bad",
                   "--trust", "--resamples", "30", "--importance-repeats", "1", *extra)


def test_json_has_every_part(files):
    code, out, err = _compare(files, "--cutoff", "0.3", "--json", "--seed", "2")
    assert code == 0, err
    payload = json.loads(out)
    assert set(payload["metrics"]) >= {"a", "b", "difference", "interval"}
    assert payload["metrics"]["difference"]["auc"] == pytest.approx(
        payload["metrics"]["b"]["auc"] - payload["metrics"]["a"]["auc"])
    iv = payload["metrics"]["interval"]["auc"]
    assert iv["low"] <= iv["high"]
    assert set(payload["delong"]) >= {"z", "p"}
    assert set(payload["agreement"]) >= {"spearman", "kendall", "moved_share"}
    swap = payload["swap"]
    assert set(swap) >= {"both_accept", "both_decline", "swap_in", "swap_out", "bad_rates"}
    df = files["frame"]
    pa = files["champion"].predict_proba(df[["income", "debt_ratio", "region"]])[:, 1]
    pb = files["challenger"].predict_proba(df[["income", "debt_ratio"]])[:, 1]
    assert swap["swap_out"] == int(np.sum((pa < 0.3) & (pb >= 0.3)))
    assert swap["both_accept"] + swap["both_decline"] + swap["swap_in"] + swap["swap_out"] == 300
    features = [r["feature"] for r in payload["ranking_shift"]]
    assert sorted(features) == ["debt_ratio", "income", "region"]
    region = next(r for r in payload["ranking_shift"] if r["feature"] == "region")
    assert region["importance_b"] == 0 and {"rank_a", "rank_b", "importance_a"} <= set(region)
    assert [r["band"] for r in payload["double_lift"]] == list(range(1, 11))
    assert {"actual", "predicted_a", "predicted_b"} <= set(payload["double_lift"][0])
    assert payload["resamples"] == 30 and payload["seed"] == 2
    assert payload["columns_only_a"] == ["region"]


def test_readable_tables(files):
    code, out, err = _compare(files, "--cutoff-a", "0.3", "--cutoff-b", "0.4")
    assert code == 0, err
    for text in ("metrics (paired bootstrap, 30 resamples", "DeLong test", "swap table",
                 "A's cutoff 0.3, B's cutoff 0.4", "ranking shift", "double lift chart",
                 "compliance under local law"):
        assert text in out


@pytest.mark.parametrize("extra, message", [
    (("--cutoff", "1.5"), "between 0 and 1"),
    (("--cutoff-a", "0.3"), "needs both"),
])
def test_bad_cutoffs_exit_2(files, extra, message):
    code, out, err = _compare(files, *extra)
    assert code == 2 and message in err and "Traceback" not in err


def test_incompatible_models_exit_2(files):
    code, _, err = run_cli("compare", files["a"], files["r"], files["data"], "--target", "bad",
                           "--trust", "--resamples", "5")
    assert code == 2 and "different tasks" in err


def test_missing_target_exit_2(files):
    code, _, err = run_cli("compare", files["a"], files["b"], files["data"], "--trust")
    assert code == 2 and "--target" in err
    code, _, err = run_cli("compare", files["a"], files["b"], files["data"], "--target", "nope",
                           "--trust")
    assert code == 2 and "no target column 'nope'" in err
