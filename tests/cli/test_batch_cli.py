"""``workbench batch``: output and summary, rejects, two local workers, a killed run resumed,
plain progress lines when stderr is not a terminal, bad input exits 2."""

from __future__ import annotations

import json
import subprocess
import sys
import time

import pandas as pd
import pytest

from tests.cli.conftest import run_cli, small_frame
from workbench.cli import main
from workbench.engine.batch.parts import parts_folder

N_ROWS = 3_000


@pytest.fixture(scope="module")
def book(tmp_path_factory, cli_files):
    d = tmp_path_factory.mktemp("batch_cli")
    df = small_frame(n=N_ROWS, seed=4)
    df.to_csv(d / "book.csv", index=False)
    bad = df.copy()
    bad["income"] = bad["income"].astype(object)
    bad.loc[11, "income"] = "unknown"
    bad.loc[2_500, "region"] = "east"  # not seen in training: the model's encoder refuses it
    bad.to_csv(d / "bad.csv", index=False)
    return {"dir": d, "csv": d / "book.csv", "bad": d / "bad.csv", "model": cli_files["model"],
            "frame": df}


def test_batch_writes_every_row_and_a_json_summary(book, tmp_path, capsys):
    out = tmp_path / "scores.parquet"
    code = main(["batch", str(book["model"]), str(book["csv"]), "-o", str(out), "--id-column",
                 "ref", "--reasons", "2", "--chunk-rows", "700", "--background", "30", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    summary = json.loads(captured.out)
    assert summary["rows_written"] == N_ROWS and summary["rows_rejected"] == 0
    assert summary["chunks"] == 5 and summary["method"] == "linear"
    assert summary["settings"]["cutoff"] == 0.5 and len(summary["cautions"]) == 3
    got = pd.read_parquet(out)
    assert got["ref"].tolist() == book["frame"]["ref"].tolist()
    assert {"output", "probability", "base_value", "contrib__income", "decision",
            "reason_2_text"} <= set(got.columns)
    assert not parts_folder(out).exists()


def test_bad_rows_are_listed_in_the_rejects_file(book, tmp_path, capsys):
    out = tmp_path / "bad.parquet"
    assert main(["batch", str(book["model"]), str(book["bad"]), "-o", str(out),
                 "--id-column", "ref", "--chunk-rows", "1000"]) == 0
    text = capsys.readouterr().out
    assert "2,998 of 3,000 rows explained, 2 rejected" in text
    rejects = pd.read_csv(tmp_path / "bad.rejects.csv")
    assert rejects["row"].tolist() == [11, 2_500] and rejects["ref"].tolist() == ["r11", "r2500"]
    assert len(pd.read_parquet(out)) == N_ROWS - 2


def test_two_local_workers_write_the_one_process_file(book, tmp_path):
    one, two = tmp_path / "one.parquet", tmp_path / "two.parquet"
    common = ["--chunk-rows", "600", "--background", "30", "--reasons", "3"]
    assert main(["batch", str(book["model"]), str(book["csv"]), "-o", str(one), *common]) == 0
    code, out, err = run_cli("batch", book["model"], book["csv"], "-o", two, *common,
                             "--workers", "2")
    assert code == 0, err
    assert "running on 2 local worker process(es) on 127.0.0.1" in err
    assert "\r" not in err and "\x1b" not in err  # stderr is a pipe here: plain lines
    assert "rows/s" in err
    pd.testing.assert_frame_equal(pd.read_parquet(two), pd.read_parquet(one), check_exact=True)


def test_a_killed_run_resumes_to_the_same_file(book, tmp_path):
    whole, out = tmp_path / "whole.parquet", tmp_path / "killed.parquet"
    args = ["--chunk-rows", "100", "--background", "30", "--reasons", "4", "--id-column", "ref"]
    assert main(["batch", str(book["model"]), str(book["csv"]), "-o", str(whole), *args]) == 0
    cmd = [sys.executable, "-m", "workbench", "batch", str(book["model"]), str(book["csv"]),
           "-o", str(out), *args]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    manifest = parts_folder(out) / "manifest.json"
    try:
        deadline = time.monotonic() + 240
        while time.monotonic() < deadline and proc.poll() is None:
            if manifest.is_file() and json.loads(manifest.read_text() or "{}").get("chunks"):
                break
            time.sleep(0.05)
        proc.kill()
    finally:
        proc.wait()
    assert not out.exists(), "the run finished before it could be killed"
    done = len(json.loads(manifest.read_text())["chunks"])
    assert 1 <= done < N_ROWS // 100
    code, stdout, err = run_cli("batch", book["model"], book["csv"], "-o", out, *args)
    assert code == 0, err
    assert f"resuming: {done} chunk(s)" in err
    assert out.read_bytes() == whole.read_bytes()


@pytest.mark.parametrize("extra, message", [
    (["--id-column", "nope"], "ID column: nope"),
    (["-o", "out.csv"], "written as Parquet"),
    (["--reasons", "--cutoff", "7"], "number from 0 to 1"),
    (["--chunk-rows", "0"], "--chunk-rows must be at least 1"),
])
def test_bad_input_exits_2_with_one_line(book, tmp_path, extra, message):
    output = ["-o", str(tmp_path / "o.parquet")] if "-o" not in extra else []
    code, _, err = run_cli("batch", book["model"], book["csv"], *output, *extra, cwd=tmp_path)
    assert code == 2 and message in err and "Traceback" not in err


def test_workers_and_scheduler_together_are_refused(book, tmp_path):
    code, _, err = run_cli("batch", book["model"], book["csv"], "-o", tmp_path / "o.parquet",
                           "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert code == 2 and "not allowed with argument" in err
