"""``workbench case --reasons/--flip/--similar/--sheet``: JSON, the sheet file, clear errors.

The commands run in this process through ``workbench.cli.main`` (the same entry point as
``python -m workbench``), so the libraries load once for the whole file.
"""

import json

import numpy as np
import pytest

from workbench.cli import main


@pytest.fixture
def run_cli(capsys):
    def run(*args):
        code = main([str(a) for a in args])
        captured = capsys.readouterr()
        return code, captured.out, captured.err
    return run

FEATURES = ["income", "debt_ratio", "region"]


@pytest.fixture(scope="module")
def adverse_row(cli_files):
    """A row just over the 0.5 cutoff, and one far below it."""
    model, frame = cli_files["estimator"], cli_files["frame"]
    p = model.predict_proba(frame[FEATURES])[:, 1]
    over = int(np.flatnonzero((p >= 0.5) & (p < 0.7))[0])
    return over, int(np.argmin(p)), p


def test_reasons_flip_similar_and_sheet_in_one_run(run_cli, cli_files, adverse_row, tmp_path):
    row, _low, p = adverse_row
    sheet = tmp_path / "case.html"
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row,
                             "--target", "bad", "--reasons", "--flip", "--actionable",
                             "debt_ratio,income", "--immutable", "income", "--sheet", sheet, "--json")
    assert code == 0, err
    payload = json.loads(out)
    assert payload["cutoff"] == 0.5 and payload["cutoff_source"].startswith("default")
    assert payload["decision"] == "adverse"
    assert 1 <= len(payload["reasons"]) <= 4  # Regulation B commentary 9(b)(2)-1: four at most
    contributions = {a["feature"]: a["contribution"] for a in payload["attributions"]}
    expected = sorted((f for f in contributions if contributions[f] > 0), key=lambda f: -contributions[f])
    assert [r["feature"] for r in payload["reasons"]] == expected[:4]
    assert all(r["text"] and "contribution" in r and "value" in r for r in payload["reasons"])
    assert payload["flip"], payload["flip_message"]
    model, frame = cli_files["estimator"], cli_files["frame"]
    for option in payload["flip"]:
        changed = frame.loc[[row], FEATURES].copy()
        for change in option["changes"]:
            assert change["feature"] == "debt_ratio"  # income is immutable, region not actionable
            changed[change["feature"]] = change["to"]
        now = model.predict_proba(changed)[0, 1]
        assert now < 0.5 and now == pytest.approx(option["new_prediction"], abs=1e-12)
        assert option["distance"] > 0
    assert len(payload["similar"]) == 5 and row not in [s["row"] for s in payload["similar"]]
    for s in payload["similar"]:
        assert s["prediction"] == pytest.approx(p[s["row"]], abs=1e-12)
        assert s["label"] == int(frame["bad"].iloc[s["row"]])
    assert payload["sheet"] == str(sheet) and sheet.exists()
    html = sheet.read_text(encoding="utf-8")
    assert all(r["text"] in html for r in payload["reasons"])
    assert any("legal advice" in c for c in payload["cautions"])


def test_favourable_case_and_not_allowed(run_cli, cli_files, adverse_row):
    _row, low, _p = adverse_row
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", low,
                             "--reasons", "2", "--not-allowed", "region", "--json")
    assert code == 0, err
    payload = json.loads(out)
    assert payload["decision"] == "favourable" and payload["reasons"] == []
    assert "favourable side" in payload["reasons_message"]
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", low,
                             "--reasons", "2", "--on-request", "--not-allowed", "region", "--json")
    payload = json.loads(out)
    assert code == 0 and len(payload["reasons"]) <= 2
    assert "region" not in [r["feature"] for r in payload["reasons"]]


@pytest.mark.parametrize("extra, message", [
    (["--flip"], "--flip needs --actionable"),
    (["--flip", "--actionable", "shoe_size"], "not among the model's inputs"),
    (["--flip", "--actionable", "region", "--immutable", "region"], "no actionable features"),
    (["--reasons", "--cutoff", "7"], "give a number from 0 to 1"),
])
def test_bad_requests_exit_2_with_one_line(run_cli, cli_files, adverse_row, extra, message):
    row, _low, _p = adverse_row
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row, *extra)
    assert code == 2 and message in err, err
    assert "Traceback" not in err


def test_row_outside_the_data_and_flip_not_found(run_cli, cli_files, adverse_row):
    row, _low, _p = adverse_row
    code, _out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", 10_000, "--reasons")
    assert code == 2 and "outside the data" in err
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row, "--flip",
                             "--actionable", "income", "--bounds", "income=1:2", "--json")
    assert code == 0, err
    payload = json.loads(out)
    assert payload["flip"] == [] and "No change of at most 3" in payload["flip_message"]


def test_wording_file_names_the_features_and_the_sheet_escapes_them(run_cli, cli_files, adverse_row,
                                                                     tmp_path):
    row, _low, _p = adverse_row
    wording = tmp_path / "wording.json"
    wording.write_text(json.dumps({"outcome": "the estimated risk", "features": {
        "debt_ratio": {"display_name": "<script>x</script>Debt ratio", "number_format": "{:.0%}"},
        "income": {"display_name": "Income", "unit": "per year", "number_format": "{:,.0f}"}}}))
    sheet = tmp_path / "case.html"
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row,
                             "--reasons", "--wording", wording, "--sheet", sheet, "--json")
    assert code == 0, err
    texts = [r["text"] for r in json.loads(out)["reasons"]]
    assert all("the estimated risk" in t for t in texts)
    html = sheet.read_text(encoding="utf-8")
    assert "<script>" not in html and "&lt;script&gt;x&lt;/script&gt;Debt ratio" in html
    wording.write_text("{not json")
    code, _out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row,
                              "--reasons", "--wording", wording)
    assert code == 2 and "not a readable JSON wording file" in err


def test_stability_marks_the_stated_reasons_only(run_cli, cli_files, adverse_row):
    """Rank changes counted over background resamples; the 20 % threshold is common practice,
    no source."""
    row, low, _p = adverse_row
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", row,
                             "--reasons", "--stability", "3", "--background", "50", "--json")
    assert code == 0, err
    payload = json.loads(out)
    stated = [r["feature"] for r in payload["reasons"]]
    assert all(isinstance(r["stable"], bool) for r in payload["reasons"])
    assert payload["reasons_stability"]["resamples"] == 3
    assert set(payload["reasons_stability"]["unstable"]) <= set(stated)
    code, out, err = run_cli("case", cli_files["model"], cli_files["csv"], "--row", low,
                             "--reasons", "--stability", "3", "--json")
    assert code == 0 and "reasons_stability" not in json.loads(out)
