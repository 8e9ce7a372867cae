"""``workbench rank`` and ``workbench audit`` on large data: they work on a stated, seeded row
sample where the method allows it and say so ("sampled N of M rows, seed S") in the JSON and
in the table."""

from __future__ import annotations

import json

import pytest

from workbench.cli import main
from workbench.engine.batch import sample_rows


def _run(capsys, *args) -> tuple[int, str, str]:
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _rank(capsys, cli_files, *extra, data=None):
    code, out, err = _run(capsys, "rank", cli_files["model"], data or cli_files["csv"],
                          "--target", "bad", "--repeats", "2", "--groups", "none", *extra)
    assert code == 0, err
    return out


def test_rank_states_its_sample_in_the_json_and_the_table(cli_files, capsys):
    payload = json.loads(_rank(capsys, cli_files, "--sample", "150", "--seed", "3", "--json"))
    n = len(cli_files["frame"])
    assert payload["sample"] == {"sampled": True, "rows": 150, "rows_in_data": n, "seed": 3,
                                 "what": None,
                                 "statement": f"sampled 150 of {n} rows, seed 3"}
    assert payload["rows"] == 150
    text = _rank(capsys, cli_files, "--sample", "150", "--seed", "3")
    assert f"sampled 150 of {n} rows, seed 3" in text.splitlines()[0]


def test_rank_below_the_cap_uses_every_row_and_says_so(cli_files, capsys):
    n = len(cli_files["frame"])
    default = json.loads(_rank(capsys, cli_files, "--json"))  # default cap 50,000 rows
    every = json.loads(_rank(capsys, cli_files, "--sample", "0", "--json"))
    for payload in (default, every):
        assert payload["sample"]["sampled"] is False and payload["rows"] == n
        assert payload["sample"]["statement"] == f"all {n} rows"
    assert default["features"] == every["features"]


def test_the_stated_sample_is_the_rows_ranked(cli_files, capsys, tmp_path):
    """Ranking the sample written out as its own file gives the same numbers: the statement
    names the rows that were used."""
    sampled = json.loads(_rank(capsys, cli_files, "--sample", "120", "--seed", "5", "--json"))
    alias = json.loads(_rank(capsys, cli_files, "--max-rows", "120", "--seed", "5", "--json"))
    rows = sample_rows(cli_files["frame"], 120, seed=5)
    rows.to_csv(tmp_path / "sample.csv", index=False)
    direct = json.loads(_rank(capsys, cli_files, "--sample", "0", "--seed", "5", "--json",
                              data=tmp_path / "sample.csv"))
    assert sampled["features"] == direct["features"] == alias["features"]
    assert sampled["baseline"] == direct["baseline"]


def test_rank_refuses_a_sample_of_one_row(cli_files, capsys):
    code, out, err = _run(capsys, "rank", cli_files["model"], cli_files["csv"], "--target", "bad",
                          "--sample", "1")
    assert code == 2 and "--sample must be at least 2 rows" in err


@pytest.fixture(scope="module")
def audit_payload(cli_files):
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-m", "workbench", "audit", str(cli_files["model"]),
                           str(cli_files["csv"]), "--target", "bad", "--expect",
                           "debt_ratio=increasing", "--sample", "100", "--seed", "2", "--json"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def test_audit_lists_the_checks_that_sampled(audit_payload, cli_files):
    n = len(cli_files["frame"])
    assert audit_payload["rows_in_data"] == n
    by_check = {s["what"]: s for s in audit_payload["sampling"]}
    assert by_check["leakage"] == {"sampled": True, "rows": 100, "rows_in_data": n, "seed": 2,
                                   "what": "leakage",
                                   "statement": f"sampled 100 of {n} rows, seed 2"}
    checks = {c["id"]: c for c in audit_payload["checks"]}
    for name, s in by_check.items():  # every listed sample is what the check recorded
        assert checks[name]["parameters"]["rows"] == s["rows"] < s["rows_in_data"]
    unlisted = [c for c in checks.values() if c["id"] not in by_check]
    assert all(not c["parameters"].get("sampled") for c in unlisted)


def test_audit_table_says_which_checks_sampled(cli_files, capsys):
    code, out, err = _run(capsys, "audit", cli_files["model"], cli_files["csv"], "--target",
                          "bad", "--sample", "100")
    assert code in (0, 3), err
    n = len(cli_files["frame"])
    assert f"leakage: sampled 100 of {n} rows, seed 0" in out
    assert f"the other checks used all {n} rows" in out
