"""``workbench case``: JSON payload, readable table and bad input (exit 2, one line).

The main paths run ``python -m workbench case`` in a child process; the many bad-input cases
call the same ``workbench.cli.main`` in this process (a child costs seconds on a shared machine).
"""

import json

import numpy as np
import pytest
import skops.io as sio
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.neighbors import KNeighborsRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from tests.cli.conftest import run_cli, small_frame
from workbench.cli import main

FEATURES = ["income", "debt_ratio", "region"]


def encoder(numeric):
    return ColumnTransformer(
        [
            ("cat", OneHotEncoder(handle_unknown="ignore"), ["region"]),
            ("num", StandardScaler(), numeric),
        ]
    )


@pytest.fixture(scope="module")
def case_files(tmp_path_factory):
    """A forest and a logistic regression predicting ``bad``, and a k-NN regressor predicting
    ``income`` (so it is neither tree nor linear), saved with skops."""
    d = tmp_path_factory.mktemp("case")
    df = small_frame(n=150, seed=4)
    numeric = ["income", "debt_ratio"]
    knn_inputs = ["debt_ratio", "region", "bad"]
    models = {
        "forest": make_pipeline(
            encoder(numeric), RandomForestClassifier(n_estimators=15, max_depth=4, random_state=0)
        ).fit(df[FEATURES], df["bad"]),
        "logistic": make_pipeline(encoder(numeric), LogisticRegression(max_iter=1000)).fit(
            df[FEATURES], df["bad"]
        ),
        "neighbours": make_pipeline(
            encoder(["debt_ratio", "bad"]), KNeighborsRegressor(n_neighbors=7)
        ).fit(df[knn_inputs], df["income"]),
    }
    paths = {}
    for name, model in models.items():
        paths[name] = d / f"{name}.skops"
        sio.dump(model, paths[name])
    data = d / "data.csv"
    df.to_csv(data, index=False)
    return {"paths": paths, "models": models, "data": data, "frame": df}


def case_json(files, model, *args):
    code, out, err = run_cli(
        "case", files["paths"][model], files["data"], "--trust", "--json", *args
    )
    assert code == 0, err
    return json.loads(out)


def main_json(capsys, files, model, *args):
    """The same command in this process."""
    code = main(
        ["case", str(files["paths"][model]), str(files["data"]), "--trust", "--json", *args]
    )
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out)


def test_payload_of_a_forest_row(case_files):
    p = case_json(case_files, "forest", "--row", "12", "--target", "bad", "--background", "40")
    model, df = case_files["models"]["forest"], case_files["frame"]
    assert p["row"] == 12 and p["task"] == "binary" and p["output"] == "probability"
    prob = model.predict_proba(df[FEATURES].iloc[[12]])[0, 1]
    assert p["prediction"]["probability"] == pytest.approx(prob, abs=1e-12)
    assert p["prediction"]["output"] == pytest.approx(prob, abs=1e-12)
    assert p["background"] == {"rows": 40, "seed": 0}
    assert p["method"] in ("tree-interventional", "tree-reference")
    contributions = [a["contribution"] for a in p["attributions"]]
    assert [a["feature"] for a in p["attributions"]] == sorted(
        FEATURES,
        key=lambda f: -abs(next(a["contribution"] for a in p["attributions"] if a["feature"] == f)),
    )
    assert abs(contributions[0]) >= abs(contributions[-1])
    assert p["base_value"] + sum(contributions) == pytest.approx(
        p["prediction"]["output"], abs=1e-9
    )
    assert abs(p["additivity_residual"]) < 1e-9
    values = {a["feature"]: a["value"] for a in p["attributions"]}
    assert values["region"] == df["region"].iloc[12]
    assert values["income"] == pytest.approx(df["income"].iloc[12])
    assert "the model, not the world" in p["caution"]


def test_methods_agree_where_they_should(case_files, capsys):
    """Linear closed form = exact enumeration for a logistic regression on one-hot columns."""
    lin = main_json(
        capsys, case_files, "logistic", "--row", "5", "--background", "30", "--seed", "3"
    )
    exact = main_json(
        capsys,
        case_files,
        "logistic",
        "--row",
        "5",
        "--background",
        "30",
        "--seed",
        "3",
        "--method",
        "exact",
    )
    assert lin["method"] == "linear" and exact["method"] == "exact"
    a = {x["feature"]: x["contribution"] for x in lin["attributions"]}
    b = {x["feature"]: x["contribution"] for x in exact["attributions"]}
    for f in FEATURES:
        assert a[f] == pytest.approx(b[f], abs=1e-9)
    assert lin["output"] == "log-odds"
    assert lin["prediction"]["output"] == pytest.approx(
        float(
            case_files["models"]["logistic"].decision_function(
                case_files["frame"][FEATURES].iloc[[5]]
            )[0]
        )
    )


def test_path_form_and_all_rows_background(case_files):
    path = case_json(
        case_files, "forest", "--row", "0", "--method", "tree-reference", "--form", "path"
    )
    assert path["method"] == "tree-reference" and path["form"] == "path"
    assert path["background"]["rows"] == 0
    every = case_json(
        case_files,
        "neighbours",
        "--row",
        "1",
        "--background",
        "all",
        "--method",
        "sampling",
        "--permutations",
        "8",
        "--seed",
        "2",
    )
    assert every["background"] == {"rows": 150, "seed": 2}
    assert every["method"] == "sampling" and every["permutations"] == 8
    assert all(a["standard_error"] >= 0 for a in every["attributions"])
    assert all("standard_error" not in a for a in path["attributions"])
    assert every["task"] == "regression" and every["prediction"]["probability"] is None
    assert abs(every["additivity_residual"]) < 1e-9


def test_readable_table(case_files):
    code, out, err = run_cli(
        "case",
        case_files["paths"]["logistic"],
        case_files["data"],
        "--row",
        "2",
        "--trust",
        "--background",
        "20",
    )
    assert code == 0, err
    assert "contribution" in out and "region" in out and "additivity residual" in out
    assert "the model, not the world" in out
    assert "log-odds" in out


def test_row_beyond_the_file_exits_2_in_a_child_process(case_files):
    code, _, err = run_cli(
        "case", case_files["paths"]["forest"], case_files["data"], "--trust", "--row", "150"
    )
    assert code == 2 and "outside the data" in err and "Traceback" not in err


@pytest.mark.parametrize(
    "model, args, expect",
    [
        ("forest", ["--row", "-1"], "outside the data"),
        ("forest", ["--row", "0", "--background", "151"], "only 150 rows"),
        ("forest", ["--row", "0", "--background", "many"], "--background"),
        ("forest", ["--row", "0", "--method", "magic"], "unknown --method"),
        ("forest", ["--row", "0", "--method", "linear"], "needs a linear model"),
        ("neighbours", ["--row", "0", "--method", "tree"], "needs a tree ensemble"),
        ("forest", ["--row", "0", "--method", "exact", "--form", "path"], "tree methods only"),
        ("forest", ["--row", "0", "--form", "sideways"], "unknown attribution form"),
        (
            "forest",
            ["--row", "0", "--method", "sampling", "--permutations", "1"],
            "at least 2 permutations",
        ),
    ],
)
def test_bad_input_exits_2_with_one_line(case_files, capsys, model, args, expect):
    code = main(
        ["case", str(case_files["paths"][model]), str(case_files["data"]), "--trust", *args]
    )
    _, err = capsys.readouterr()
    assert code == 2
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and expect in lines[0], err


def test_sampled_values_are_deterministic(case_files, capsys):
    args = ("--row", "7", "--method", "sampling", "--permutations", "6")
    a = main_json(capsys, case_files, "neighbours", *args)
    b = main_json(capsys, case_files, "neighbours", *args)
    assert a["attributions"] == b["attributions"]
    assert np.isfinite(a["base_value"])
