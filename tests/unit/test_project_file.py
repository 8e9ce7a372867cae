"""The project file: round trip, atomic saves under interruption, changed inputs, schemas,
autosave and recovery, the audit trail."""

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from workbench.engine.errors import InputError
from workbench.session.audit import library_versions, record
from workbench.session.migrate import SCHEMA_VERSION
from workbench.session.project import (
    InputsChanged,
    Project,
    autosave,
    autosave_path,
    open_project,
    read_project,
    recovery_candidate,
    save_project,
)


@pytest.fixture
def files(tmp_path):
    model = tmp_path / "model.skops"
    data = tmp_path / "data.csv"
    model.write_bytes(b"model bytes")
    data.write_text("a,b\n1,2\n")
    return {"dir": tmp_path, "model": model, "data": data}


def _project(files) -> Project:
    p = Project()
    p.set_input("model_a", files["model"], trust=True)
    p.set_input("data", files["data"])
    p.settings.update(target="b", cutoff=0.3, seed=7)
    p.expectations = {"a": "increasing"}
    p.display_names = {"a": {"name": "Amount", "units": "currency"}}
    p.reason_templates = {"a": "Amount too high"}
    p.notes = "First note.\n\nSecond note."
    p.focus = {"level": "Case", "row": 3}
    p.cases = [3, 9]
    p.results = {"ranking": "abc123"}
    p.signoff = {"name": "R. Analyst", "decision": "approve"}
    return p


def test_round_trip_keeps_everything(files):
    p = _project(files)
    record(p, "ranking", {"repeats": 5, "seed": 7})
    path = save_project(p, files["dir"] / "v.wbench")
    q = open_project(path)
    for attr in ("inputs", "settings", "expectations", "display_names", "reason_templates",
                 "notes", "focus", "cases", "results", "signoff", "audit"):
        assert getattr(q, attr) == getattr(p, attr), attr
    doc = json.loads(path.read_text())
    assert doc["schema_version"] == SCHEMA_VERSION and doc["format"] == "workbench-project"
    assert doc["inputs"]["model_a"]["sha256"] == p.inputs["model_a"]["sha256"]
    assert len(doc["inputs"]["data"]["sha256"]) == 64


def test_audit_entry_names_what_parameters_seed_time_and_versions(files):
    p = _project(files)
    entry = record(p, "effect curve", {"feature": "a", "grid_size": 20})
    assert entry["seed"] == 7  # from the settings when the parameters have none
    assert entry["when"].endswith("+00:00")
    for lib in ("numpy", "pandas", "scikit-learn", "shap", "workbench"):
        assert lib in entry["versions"]
    assert library_versions()["numpy"] == np.__version__
    assert p.audit[-1] is entry


def test_changed_input_is_detected_and_can_be_relinked(files):
    path = save_project(_project(files), files["dir"] / "v.wbench")
    files["data"].write_text("a,b\n1,3\n")
    with pytest.raises(InputsChanged) as info:
        open_project(path)
    changes = info.value.changes
    assert [c.role for c in changes] == ["data"] and changes[0].reason == "changed"
    assert "data" in str(info.value) and "changed" in str(info.value)
    project = info.value.project
    project.relink("data", files["data"])
    assert project.changed_inputs() == []
    assert project.audit[-1]["what"] == "re-link input"
    save_project(project)
    assert open_project(path).inputs["data"]["sha256"] == project.inputs["data"]["sha256"]


def test_missing_input_is_reported(files):
    path = save_project(_project(files), files["dir"] / "v.wbench")
    files["model"].unlink()
    with pytest.raises(InputsChanged) as info:
        open_project(path)
    assert info.value.changes[0].reason == "missing"
    assert open_project(path, allow_changed=True).changed_inputs()[0].role == "model_a"


def test_older_schema_is_migrated(tmp_path):
    old = {"format": "workbench-project", "schema_version": 1,
           "inputs": {}, "settings": {"seed": 3}, "notes": ["one", "two"]}
    path = tmp_path / "old.wbench"
    path.write_text(json.dumps(old))
    p = open_project(path)
    assert p.notes == "one\n\ntwo" and p.migrated_from == [1] and p.settings["seed"] == 3
    assert p.expectations == {} and p.cases == []


def test_old_schema_model_becomes_model_a(files):
    entry = {"path": str(files["model"]), "sha256": "0" * 64, "trust": False}
    path = files["dir"] / "old.wbench"
    path.write_text(json.dumps({"format": "workbench-project", "schema_version": 1,
                                "inputs": {"model": entry}}))
    p = open_project(path, allow_changed=True)
    assert p.inputs["model_a"]["path"] == str(files["model"])


@pytest.mark.parametrize("doc, words", [
    ({"format": "workbench-project", "schema_version": SCHEMA_VERSION + 1}, "newer workbench"),
    ({"format": "something else", "schema_version": 1}, "not a workbench project"),
    ({"format": "workbench-project", "schema_version": "two"}, "no valid schema version"),
])
def test_newer_or_unknown_schema_is_refused(tmp_path, doc, words):
    path = tmp_path / "x.wbench"
    path.write_text(json.dumps(doc))
    with pytest.raises(InputError, match=words):
        open_project(path)


def test_damaged_file_is_refused_clearly(tmp_path):
    path = tmp_path / "x.wbench"
    path.write_text('{"format": "workbench-project", "schema')
    with pytest.raises(InputError, match="damaged"):
        open_project(path)
    with pytest.raises(InputError, match="must end in"):
        save_project(Project(), tmp_path / "x.json")


def test_autosave_newer_than_project_is_offered_and_recovered(files):
    path = save_project(_project(files), files["dir"] / "v.wbench")
    assert recovery_candidate(path) is None
    p = open_project(path)
    p.notes = "typed after the last save"
    time.sleep(0.01)
    autosave(p)
    assert recovery_candidate(path) == autosave_path(path)
    assert open_project(path).notes != p.notes
    recovered = open_project(path, recover=True)
    assert recovered.notes == "typed after the last save" and recovered.path == path
    save_project(recovered)
    assert not autosave_path(path).exists() and recovery_candidate(path) is None


_WRITER = r"""
import sys
from workbench.session.project import Project, save_project
path = sys.argv[1]
big = "x" * 400_000
i = 0
print("ready", flush=True)
while True:
    p = Project(notes=f"version {i % 2}\n" + big)
    p.cases = list(range(i % 2, 20_000, 2))
    save_project(p, path)
    i += 1
"""


def test_save_interrupted_at_random_points_leaves_old_or_new(tmp_path):
    """A child process saves two versions in turn and is killed (SIGKILL) at a random moment,
    30 times: every time, the project opens and holds one whole version."""
    path = tmp_path / "p.wbench"
    save_project(Project(notes="version 0\n" + "x" * 400_000, cases=list(range(0, 20_000, 2))), path)
    rng = np.random.default_rng(0)
    for _ in range(30):
        child = subprocess.Popen([sys.executable, "-c", _WRITER, str(path)],
                                 stdout=subprocess.PIPE, text=True)
        assert child.stdout.readline().strip() == "ready"
        time.sleep(float(rng.uniform(0.0, 0.15)))
        os.kill(child.pid, signal.SIGKILL)
        child.wait()
        child.stdout.close()
        project = read_project(path)
        version = int(project.notes.split("\n", 1)[0].split()[1])
        assert project.cases == list(range(version, 20_000, 2))
    leftovers = [p for p in tmp_path.iterdir() if p.name != "p.wbench"]
    assert all(p.name.startswith(".p.wbench.") and p.suffix == ".tmp" for p in leftovers)


def test_old_leftovers_of_killed_saves_are_removed(tmp_path):
    path = tmp_path / "p.wbench"
    old = tmp_path / ".p.wbench.abc123.tmp"
    young = tmp_path / ".p.wbench.def456.tmp"
    other = tmp_path / ".q.wbench.abc123.tmp"
    for f in (old, young, other):
        f.write_text("{half")
    long_ago = time.time() - 3600
    os.utime(old, (long_ago, long_ago))
    os.utime(other, (long_ago, long_ago))
    save_project(Project(), path)
    assert not old.exists() and young.exists() and other.exists()
