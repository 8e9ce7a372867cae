"""`workbench demo --write` and `workbench info` on every demo model, with and without data."""

import json

import pytest

from tests.cli.conftest import run_cli


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    from demo_models.write import write_demo

    d = tmp_path_factory.mktemp("demo")
    write_demo(d, n_reference=1500, n_current=1500, n_motor=1500)
    return d


def test_demo_write_command_writes_the_six_files(tmp_path):
    code, out, err = run_cli("demo", "--write", tmp_path / "d")
    assert code == 0, err
    names = sorted(p.name for p in (tmp_path / "d").iterdir())
    assert names == sorted([
        "lending_champion.skops", "lending_challenger.skops", "lending_reference.parquet",
        "lending_current.parquet", "motor_frequency.skops", "motor_policies.parquet",
    ])


@pytest.mark.parametrize("model, data, target, task, output", [
    ("lending_champion", "lending_current", "defaulted_12m", "binary", "log-odds"),
    ("lending_challenger", "lending_current", "defaulted_12m", "binary", "log-odds"),
    ("motor_frequency", "motor_policies", "claim_count", "count", "log of the mean"),
])
def test_info_on_demo_models(demo_dir, model, data, target, task, output):
    code, out, err = run_cli("info", demo_dir / f"{model}.skops", "--trust", "--json")
    assert code == 0, err
    info = json.loads(out)
    assert info["task"] == task and info["output"] == output
    assert set(info["column_map"]) == set(info["input_columns"])
    code, out, err = run_cli("info", demo_dir / f"{model}.skops", demo_dir / f"{data}.parquet",
                             "--target", target, "--trust", "--json")
    assert code == 0, err
    info = json.loads(out)
    assert not [f for f in info["findings"] if f["level"] == "error"]
    assert info["data"]["rows"] == 1500
