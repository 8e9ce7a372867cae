"""``workbench audit`` and ``workbench dossier``: JSON, exit codes, the project file."""

import json

from tests.cli.conftest import run_cli


def test_audit_json_lists_checks_and_exits_zero(cli_files):
    code, out, err = run_cli("audit", cli_files["model"], cli_files["csv"], "--target", "bad",
                             "--expect", "debt_ratio=increasing", "--expect", "income=decreasing",
                             "--json")
    assert code == 0, err
    payload = json.loads(out)
    ids = [c["id"] for c in payload["checks"]]
    assert ids[:2] == ["monotonicity:debt_ratio", "monotonicity:income"]
    assert {"leakage", "calibration", "additivity", "data_quality"} <= set(ids)
    for check in payload["checks"]:
        assert set(check) >= {"id", "title", "status", "evidence"}
        assert check["status"] in ("pass", "warn", "fail")
    assert payload["summary"]["counts"]["pass"] >= 2


def test_fail_on_gives_code_3_and_reference_adds_stability(cli_files, tmp_path):
    frame = cli_files["frame"].copy()
    frame["debt_ratio"] = frame["debt_ratio"] * 0.3 + 0.5  # a drifted copy
    drifted = tmp_path / "drifted.csv"
    frame.to_csv(drifted, index=False)
    args = ["audit", cli_files["model"], drifted, "--target", "bad", "--reference",
            cli_files["csv"], "--json"]
    code, out, err = run_cli(*args)
    assert code == 0, err
    status = {c["id"]: c["status"] for c in json.loads(out)["checks"]}
    assert status["stability:debt_ratio"] == "fail" and status["stability:region"] == "pass"
    code, out, err = run_cli(*args, "--fail-on", "fail")
    assert code == 3, err


def test_bad_input_gives_code_2_with_one_line(cli_files):
    for extra in (["--expect", "debt_ratio"], ["--expect", "debt_ratio=sideways"],
                  ["--expect", "nope=increasing"], ["--group", "region"],
                  ["--group", "missing_column", "--cutoff", "0.5"]):
        code, out, err = run_cli("audit", cli_files["model"], cli_files["csv"], "--target", "bad",
                                 *extra)
        assert code == 2, (extra, err)
        assert err.startswith("workbench: error:") and "Traceback" not in err


def test_group_check_carries_the_caution(cli_files):
    code, out, err = run_cli("audit", cli_files["model"], cli_files["csv"], "--target", "bad",
                             "--group", "region", "--cutoff", "0.3", "--json")
    assert code == 0, err
    check = next(c for c in json.loads(out)["checks"] if c["id"] == "adverse_impact:region")
    assert "screening indicator" in check["caution"]
    assert {g["group"] for g in check["evidence"]["groups"]} == {"north", "south", "west"}


def test_project_then_dossier_and_a_changed_input_is_refused(cli_files, tmp_path):
    data = tmp_path / "data.csv"
    data.write_bytes(cli_files["csv"].read_bytes())
    project = tmp_path / "p.wbench"
    code, _, err = run_cli("audit", cli_files["model"], data, "--target", "bad",
                           "--project", project)
    assert code == 0, err
    doc = json.loads(project.read_text())
    assert doc["checks"] and doc["audit"][0]["what"] == "audit checks"
    assert len(doc["results"]["checks"]) == 64  # the results' cache key
    code, out, err = run_cli("dossier", project, "-o", tmp_path / "d.html")
    assert code == 0, err
    html = (tmp_path / "d.html").read_text()
    assert "Model validation dossier" in html and "audit checks" in html
    assert len(json.loads(project.read_text())["audit"]) > 1  # the dossier's runs recorded
    data.write_text(data.read_text().replace("north", "North", 1))
    code, out, err = run_cli("dossier", project, "-o", tmp_path / "e.html")
    assert code == 2 and "changed" in err and "re-link" in err
    assert not (tmp_path / "e.html").exists()
