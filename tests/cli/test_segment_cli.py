"""--segment on rank, effects and pairs: the commands use only the segment's rows, say so, and
refuse segments that cannot be used (exit code 2, one line)."""

import json

import numpy as np
import pytest
from sklearn import metrics as skm
from sklearn.inspection import partial_dependence as sk_partial_dependence

from tests.cli.conftest import run_cli

INPUTS = ["income", "debt_ratio", "region"]


def _json(*args):
    code, out, err = run_cli(*args, "--json")
    assert code == 0, err
    return json.loads(out)


def test_rank_on_a_segment_scores_its_rows_only(cli_files):
    """The baseline AUC is sklearn.metrics.roc_auc_score on the segment's rows."""
    df, model = cli_files["frame"], cli_files["estimator"]
    out = _json("rank", cli_files["model"], cli_files["csv"], "--target", "bad",
                "--repeats", "2", "--segment", "region = west", "--segment", "income >= 35000")
    part = df[(df["region"] == "west") & (df["income"] >= 35_000)]
    assert 0 < len(part) < len(df)
    assert out["segment"] == {"where": "region = west and income ≥ 35000",
                              "rows": len(part), "of": len(df)}
    assert out["rows"] == len(part)
    assert out["baseline"] == pytest.approx(
        skm.roc_auc_score(part["bad"], model.predict_proba(part[INPUTS])[:, 1])
    )


def test_rank_without_a_segment_says_so(cli_files):
    out = _json("rank", cli_files["model"], cli_files["csv"], "--target", "bad", "--repeats", "1",
                "--groups", "none")
    assert out["segment"] is None and out["rows"] == len(cli_files["frame"])


def test_effects_on_a_segment_equal_sklearn_on_its_rows(cli_files):
    """Partial dependence on the segment equals sklearn.inspection.partial_dependence (brute) on
    the same rows and grid; ICE rows are positions in the data file, all inside the segment."""
    df, model = cli_files["frame"], cli_files["estimator"]
    out = _json("effects", cli_files["model"], cli_files["csv"], "--feature", "debt_ratio",
                "--grid", "7", "--segment", "region != north", "--scale", "response")
    part = df[df["region"] != "north"]
    assert out["segment"]["rows"] == len(part) and out["rows"] == len(part)
    grid = np.asarray(out["grid"])
    ref = sk_partial_dependence(model, part[INPUTS], ["debt_ratio"], method="brute",
                                kind="average", custom_values={"debt_ratio": grid},
                                response_method="predict_proba")
    np.testing.assert_allclose(out["pd"], ref["average"][0], rtol=1e-9, atol=1e-12)
    ice_rows = out["ice"]["rows"]
    assert ice_rows and set(ice_rows) <= set(part.index)


def test_pairs_on_a_segment(cli_files):
    out = _json("pairs", cli_files["model"], cli_files["csv"], "--sample", "50",
                "--segment", "debt_ratio < 0.4")
    n = int((cli_files["frame"]["debt_ratio"] < 0.4).sum())
    assert out["segment"] == {"where": "debt_ratio < 0.4", "rows": n, "of": 400}
    assert out["sample"] == 50
    assert out["background"] is None  # the default 100 is more than the sample: all of it


@pytest.mark.parametrize(
    ("command", "segment", "message"),
    [
        ("rank", "income > 1e9", "holds no rows"),
        ("rank", "region != North", "has no value 'North' (its values: north, south, west)"),
        ("rank", "colour = red", "no column 'colour'"),
        ("effects", "income > lots", "holds numbers"),
        ("pairs", "region", "not a condition"),
        ("rank", "bad = 1", "one class only"),
    ],
)
def test_unusable_segments_are_refused(cli_files, command, segment, message):
    extra = {"rank": ["--target", "bad"], "effects": ["--feature", "income"], "pairs": []}
    code, out, err = run_cli(command, cli_files["model"], cli_files["csv"], *extra[command],
                             "--segment", segment)
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("workbench: error:") and message in lines[0]
    assert "Traceback" not in err


def test_pairs_background_option(cli_files):
    out = _json("pairs", cli_files["model"], cli_files["csv"], "--sample", "150")
    assert out["background"] == 100  # the default
    out = _json("pairs", cli_files["model"], cli_files["csv"], "--sample", "150",
                "--background", "all")
    assert out["background"] is None
    code, _, err = run_cli("pairs", cli_files["model"], cli_files["csv"], "--background", "many")
    assert code == 2 and "whole number of rows or 'all'" in err
