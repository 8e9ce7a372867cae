"""A corpus of bad inputs: each gets one clear line on stderr and exit code 2, never a traceback."""

import json
import os
import pickle

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn.linear_model import LogisticRegression

from tests.cli.conftest import run_cli


class _OpensAFile:
    """Unpickling this creates a file: proof that opening a pickle runs code."""

    def __init__(self, marker):
        self.marker = str(marker)

    def __reduce__(self):
        return (open, (self.marker, "w"))


def _make_corpus(files, d):
    df = files["frame"]
    model = files["model"]
    feats = df[["income", "debt_ratio", "region"]]
    cases = {}

    def case(name, args, expect):
        cases[name] = (args, expect)

    (d / "model.txt").write_text("not a model")
    case("wrong model file kind", ["info", d / "model.txt"], "unknown model file kind")
    case("missing model file", ["info", d / "nope.skops"], "no such model file")
    raw = model.read_bytes()
    (d / "truncated.skops").write_bytes(raw[: len(raw) // 2])
    case("truncated skops", ["info", d / "truncated.skops", "--trust"], "not a skops model file")
    (d / "garbage.skops").write_bytes(os.urandom(4096))
    case("random bytes as skops", ["info", d / "garbage.skops"], "not a skops model file")
    with open(d / "dict.pkl", "wb") as fh:
        pickle.dump({"weights": [1, 2, 3]}, fh)
    case("pickle of a dict, trusted", ["info", d / "dict.pkl", "--trust"], "not a fitted scikit-learn model")
    case("pickle without trust", ["info", d / "dict.pkl"], "can run any code")
    good_pickle = pickle.dumps(files["estimator"])
    (d / "cut.pkl").write_bytes(good_pickle[: len(good_pickle) // 3])
    case("truncated pickle, trusted", ["info", d / "cut.pkl", "--trust"], "truncated")
    sio.dump({"a": 1}, d / "dict.skops")
    case("skops of a dict", ["info", d / "dict.skops", "--trust"], "not a fitted scikit-learn model")
    sio.dump(LogisticRegression(), d / "unfitted.skops")
    case("unfitted model", ["info", d / "unfitted.skops", "--trust"], "has not been fitted")

    feats.drop(columns=["region"]).to_csv(d / "missing_col.csv", index=False)
    case("missing column", ["info", model, d / "missing_col.csv", "--trust"], "missing column(s) the model needs: region")
    bad = feats.copy().astype({"income": object})
    bad.loc[3, "income"] = "forty thousand"
    bad.loc[7, "income"] = "n/a?"
    bad.to_csv(d / "text_numeric.csv", index=False)
    case("text in numeric column", ["info", model, d / "text_numeric.csv", "--trust"], "'income' should hold numbers but has text in 2 row(s)")
    (d / "empty.csv").write_bytes(b"")
    case("empty data file", ["info", model, d / "empty.csv", "--trust"], "empty")
    (d / "garbage.csv").write_bytes(b"\x00\x01\x02" + os.urandom(2000))
    case("binary garbage as CSV", ["info", model, d / "garbage.csv", "--trust"], "binary file")
    (d / "header_only.csv").write_text("income,debt_ratio,region\n")
    case("header but no rows", ["info", model, d / "header_only.csv", "--trust"], "no rows")
    one = df.copy()
    one["bad"] = 0
    one.to_csv(d / "one_class.csv", index=False)
    case("target with one class", ["info", model, d / "one_class.csv", "--target", "bad", "--trust"], "only one class")
    yes = df.copy()
    yes["bad"] = np.where(df["bad"] == 1, "yes", "no")
    yes.to_csv(d / "yes_no.csv", index=False)
    case("target values not the classes", ["info", model, d / "yes_no.csv", "--target", "bad", "--trust"], "does not know as classes")
    case("target column absent", ["info", model, files["csv"], "--target", "outcome", "--trust"], "no target column 'outcome'")
    case("missing data file", ["info", model, d / "nope.csv", "--trust"], "no such data file")
    case("data file is a folder", ["info", model, d, "--trust"], "is a folder")
    (d / "sheet.xlsx").write_bytes(b"PK\x03\x04 not really")
    case("unknown data kind", ["info", model, d / "sheet.xlsx", "--trust"], "unknown data file kind")
    (d / "fake.parquet").write_text("a,b\n1,2\n")
    case("CSV text named parquet", ["info", model, d / "fake.parquet", "--trust"], "not a readable Parquet file")
    nan = feats.copy()
    nan.loc[0:4, "debt_ratio"] = np.nan
    nan.to_csv(d / "nan.csv", index=False)
    case("missing values the model cannot take", ["info", model, d / "nan.csv", "--trust"], "the model cannot take them")
    unseen = feats.copy()
    unseen.loc[0:2, "region"] = "atlantis"
    unseen.to_csv(d / "unseen.csv", index=False)
    case("unseen categories, encoder refuses", ["info", model, d / "unseen.csv", "--trust"], "categories not seen in training")
    case("class of interest not a class", ["info", model, "--class", "7", "--trust"], "not one of the model's classes")
    from sklearn.ensemble import RandomForestClassifier

    forest = RandomForestClassifier(n_estimators=3, random_state=0).fit(feats[["income", "debt_ratio"]], df["bad"])
    sio.dump(forest, d / "forest.skops")
    case("untrusted skops types without trust", ["info", d / "forest.skops"], "skops does not trust by default: sklearn.tree._tree.Tree")
    case("unknown option", ["info", model, "--frobnicate"], "unrecognized arguments")
    return cases


@pytest.fixture(scope="module")
def corpus(cli_files, tmp_path_factory):
    return _make_corpus(cli_files, tmp_path_factory.mktemp("bad"))


def test_corpus_is_large_enough(corpus):
    assert len(corpus) >= 15


@pytest.mark.parametrize("name", [
    "wrong model file kind", "missing model file", "truncated skops", "random bytes as skops",
    "pickle of a dict, trusted", "pickle without trust", "truncated pickle, trusted", "skops of a dict",
    "unfitted model", "missing column", "text in numeric column", "empty data file",
    "binary garbage as CSV", "header but no rows", "target with one class",
    "target values not the classes", "target column absent", "missing data file",
    "data file is a folder", "unknown data kind", "CSV text named parquet",
    "missing values the model cannot take", "unseen categories, encoder refuses",
    "class of interest not a class", "untrusted skops types without trust", "unknown option",
])
def test_bad_input_gives_clear_message_and_exit_2(corpus, name):
    args, expect = corpus[name]
    code, out, err = run_cli(*args)
    assert code == 2, (name, code, out, err)
    assert "Traceback" not in err
    error_lines = [ln for ln in err.splitlines() if ln.startswith("workbench: error:")]
    assert len(error_lines) == 1, err
    assert expect in error_lines[0], (name, err)


def test_pickle_that_runs_code_is_refused_without_trust(tmp_path):
    marker = tmp_path / "marker.txt"
    path = tmp_path / "evil.pkl"
    path.write_bytes(pickle.dumps(_OpensAFile(marker)))
    code, _, err = run_cli("info", path)
    assert code == 2 and "can run any code" in err
    assert not marker.exists()
    # the same file under --trust really does run its code: the refusal above is what protected us
    code, _, err = run_cli("info", path, "--trust")
    assert marker.exists()
    assert code == 2 and "not a fitted scikit-learn model" in err


def test_info_on_good_files_reports_the_adapter(cli_files):
    code, out, err = run_cli("info", cli_files["model"], cli_files["csv"], "--target", "bad", "--trust", "--json")
    assert code == 0, err
    info = json.loads(out)
    for key in ("sha256", "model_type", "task", "classes", "positive_class", "output", "input_columns",
                "model_columns", "column_map", "findings"):
        assert key in info
    assert info["task"] == "binary" and info["classes"] == [0, 1] and info["output"] == "log-odds"
    assert info["column_map"]["region"] == ["cat__region_north", "cat__region_south", "cat__region_west"]
    assert any("ignored" in f["message"] and "ref" in f["message"] for f in info["findings"])
    import hashlib
    assert info["sha256"] == hashlib.sha256(cli_files["model"].read_bytes()).hexdigest()


def test_info_readable_output(cli_files):
    code, out, _ = run_cli("info", cli_files["model"], cli_files["parquet"], "--trust")
    assert code == 0
    assert "log-odds" in out and "region" in out and "findings" in out


def test_semicolon_cp1252_csv_is_read(cli_files, tmp_path):
    df = cli_files["frame"].copy()
    df.loc[0, "ref"] = "Müller–Lüdenscheid"
    df.to_csv(tmp_path / "euro.csv", sep=";", index=False, encoding="cp1252")
    code, out, err = run_cli("info", cli_files["model"], tmp_path / "euro.csv", "--trust", "--json")
    assert code == 0, err
    data = json.loads(out)["data"]
    assert data["delimiter"] == ";" and data["encoding"] == "cp1252" and data["rows"] == len(df)
    frame = pd.read_csv(tmp_path / "euro.csv", sep=";", encoding="cp1252")
    assert frame.loc[0, "ref"] == "Müller–Lüdenscheid"
