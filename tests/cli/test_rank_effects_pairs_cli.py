"""The rank, effects and pairs commands: JSON shape, agreement with scikit-learn, exit codes."""

import json

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn import metrics as skm
from sklearn.ensemble import HistGradientBoostingRegressor
from sklearn.inspection import partial_dependence as sk_partial_dependence

from tests.cli.conftest import run_cli


@pytest.fixture(scope="module")
def interacting(tmp_path_factory):
    """A boosted regressor of y = x1 * x2 + x3, with x4 a near copy of x3."""
    d = tmp_path_factory.mktemp("pairs")
    rng = np.random.default_rng(0)
    n = 600
    df = pd.DataFrame(
        {"x1": rng.uniform(-1, 1, n), "x2": rng.uniform(-1, 1, n), "x3": rng.uniform(-1, 1, n)}
    )
    df["x4"] = df["x3"] + rng.normal(0, 0.05, n)
    df["y"] = df["x1"] * df["x2"] + df["x3"] + rng.normal(0, 0.05, n)
    model = HistGradientBoostingRegressor(max_iter=80, random_state=0).fit(
        df[["x1", "x2", "x3", "x4"]], df["y"]
    )
    sio.dump(model, d / "hgb.skops")
    df.to_csv(d / "data.csv", index=False)
    return {"model": d / "hgb.skops", "csv": d / "data.csv", "frame": df, "estimator": model}


def _json(*args):
    code, out, err = run_cli(*args, "--json", "--trust")
    assert code == 0, err
    return json.loads(out)


def test_rank_json(cli_files):
    out = _json("rank", cli_files["model"], cli_files["csv"], "--target", "bad", "--repeats", "4")
    df, model = cli_files["frame"], cli_files["estimator"]
    X = df[["income", "debt_ratio", "region"]]
    assert out["metric"] == "auc" and out["higher_is_better"] is True
    assert out["baseline"] == pytest.approx(
        skm.roc_auc_score(df["bad"], model.predict_proba(X)[:, 1])
    )
    names = [f["feature"] for f in out["features"]]
    assert sorted(names) == ["debt_ratio", "income", "region"]
    values = [f["importance"] for f in out["features"]]
    assert values == sorted(values, reverse=True) and names[0] == "debt_ratio"
    assert all(f["spread"] >= 0 for f in out["features"])
    assert isinstance(out["groups"], list) and out["repeats"] == 4 and out["rows"] == len(df)


def test_rank_other_metric_and_no_groups(cli_files):
    out = _json(
        "rank",
        cli_files["model"],
        cli_files["csv"],
        "--target",
        "bad",
        "--metric",
        "log_loss",
        "--groups",
        "none",
        "--repeats",
        "2",
    )
    assert out["metric"] == "log_loss" and out["higher_is_better"] is False
    assert out["groups"] == []


def test_rank_groups_auto_finds_associated_columns(interacting):
    out = _json("rank", interacting["model"], interacting["csv"], "--target", "y", "--repeats", "3")
    assert out["metric"] == "rmse"
    assert any(set(g["features"]) == {"x3", "x4"} for g in out["groups"])
    block = next(g for g in out["groups"] if set(g["features"]) == {"x3", "x4"})
    singles = {f["feature"]: f["importance"] for f in out["features"]}
    assert block["importance"] >= max(singles["x3"], singles["x4"])


def test_rank_bad_input_exits_2(cli_files, tmp_path):
    code, _, err = run_cli(
        "rank",
        cli_files["model"],
        cli_files["csv"],
        "--target",
        "bad",
        "--metric",
        "rmse",
        "--trust",
    )
    assert code == 2 and "does not fit" in err
    one = cli_files["frame"].assign(bad=1)
    one.to_csv(tmp_path / "one.csv", index=False)
    code, _, err = run_cli(
        "rank", cli_files["model"], tmp_path / "one.csv", "--target", "bad", "--trust"
    )
    assert code == 2 and "one class" in err
    assert "Traceback" not in err


def test_effects_json_matches_sklearn(cli_files):
    out = _json(
        "effects",
        cli_files["model"],
        cli_files["csv"],
        "--feature",
        "debt_ratio",
        "--grid",
        "8",
        "--ice-rows",
        "15",
    )
    model = cli_files["estimator"]
    X = cli_files["frame"][["income", "debt_ratio", "region"]]
    grid = np.asarray(out["grid"])
    assert out["kind"] == "numeric" and len(grid) == 8 and out["units"] == "log-odds of 1"
    theirs = sk_partial_dependence(
        model,
        X,
        ["debt_ratio"],
        kind="average",
        method="brute",
        response_method="decision_function",
        custom_values={"debt_ratio": grid},
    )
    np.testing.assert_allclose(out["pd"], theirs["average"][0], atol=1e-10)
    assert np.asarray(out["ice"]["values"]).shape == (15, 8) and len(out["ice"]["rows"]) == 15
    assert len(out["ale"]["values"]) == len(out["ale"]["edges"])
    assert np.all(np.diff(out["ale"]["values"]) > 0)  # the model's log-odds rise with debt_ratio


def test_effects_categorical_has_no_ale(cli_files):
    out = _json(
        "effects",
        cli_files["model"],
        cli_files["csv"],
        "--feature",
        "region",
        "--scale",
        "response",
    )
    assert out["kind"] == "categorical" and out["grid"] == ["north", "south", "west"]
    assert out["ale"] is None and out["units"] == "probability of 1"


def test_effects_unknown_feature_exits_2(cli_files):
    code, _, err = run_cli(
        "effects", cli_files["model"], cli_files["csv"], "--feature", "age", "--trust"
    )
    assert code == 2 and "'age' is not an input column" in err


def test_pairs_json(interacting):
    out = _json(
        "pairs", interacting["model"], interacting["csv"], "--sample", "120", "--screen", "3"
    )
    assert out["features"] == ["x1", "x2", "x3", "x4"]
    assert sorted(out["order"]) == sorted(out["features"])
    h = [p["h"] for p in out["h_pairs"]]
    assert h == sorted(h, reverse=True)
    assert {out["h_pairs"][0]["a"], out["h_pairs"][0]["b"]} == {"x1", "x2"}
    assert len(out["h_pairs"]) == 3  # screen 3 -> three pairs
    # the strength of the planted pair leads too (its value is checked against a worked
    # example in tests/reference/test_interactions.py; a boosted fit shrinks it)
    strengths = [p["strength"] for p in out["h_pairs"]]
    assert strengths[0] == max(strengths) > 0.1 and min(strengths) >= 0
    # H^2 of x1 is (1/9) / (1/9 + 1/3) = 1/4 for x1 x2 + x3 (Friedman and Popescu 2008, eq. 46)
    assert 0.3 < out["h_overall"]["x1"] < 0.7 and out["h_overall"]["x3"] < out["h_overall"]["x1"]
    assert np.asarray(out["association"]["matrix"]).shape == (4, 4)
    assert ["x3", "x4"] in out["blocks"] or ["x4", "x3"] in out["blocks"]


def test_pairs_readable_table(interacting):
    code, out, err = run_cli(
        "pairs",
        interacting["model"],
        interacting["csv"],
        "--sample",
        "60",
        "--background",
        "20",
        "--trust",
    )
    assert code == 0, err
    assert "x1 x x2" in out and "overall H" in out


def test_rank_and_effects_on_a_model_without_column_names(tmp_path):
    """A model fitted on a bare array takes the data's columns in order, target and ID aside."""
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(3)
    df = pd.DataFrame({"id": range(200), "a": rng.normal(size=200), "b": rng.normal(size=200)})
    df["y"] = (df["a"] + 0.1 * rng.normal(size=200) > 0).astype(int)
    model = LogisticRegression().fit(df[["a", "b"]].to_numpy(), df["y"])
    sio.dump(model, tmp_path / "bare.skops")
    df[["a", "y", "b", "id"]].to_csv(tmp_path / "bare.csv", index=False)
    out = _json(
        "rank",
        tmp_path / "bare.skops",
        tmp_path / "bare.csv",
        "--target",
        "y",
        "--id-column",
        "id",
        "--repeats",
        "2",
    )
    assert [f["feature"] for f in out["features"]][0] == "x0"
    out = _json(
        "effects",
        tmp_path / "bare.skops",
        tmp_path / "bare.csv",
        "--feature",
        "x1",
        "--target",
        "y",
        "--id-column",
        "id",
    )
    assert out["feature"] == "x1" and len(out["pd"]) == len(out["grid"])
