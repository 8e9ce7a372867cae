"""``workbench open MODEL DATA --target COL --snapshot DIR``: one PNG per level, then exit."""

import os
import subprocess
import sys

LEVELS = ["portfolio", "case", "effect", "ranking", "pairs", "versions", "checks", "dossier"]


def test_open_snapshot_writes_one_png_per_level(cli_files, tmp_path):
    out = tmp_path / "shots"
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}
    proc = subprocess.run(
        [sys.executable, "-m", "workbench", "open", str(cli_files["model"]), str(cli_files["csv"]),
         "--target", "bad", "--snapshot", str(out)],
        capture_output=True, text=True, env=env, timeout=600)
    assert proc.returncode == 0, proc.stderr[-2000:]
    expected = [f"{i}_{name}.png" for i, name in enumerate(LEVELS, 1)]
    assert sorted(p.name for p in out.iterdir()) == expected
    assert proc.stdout.split() == [str(out / name) for name in expected]
    # A real picture of the window, not an empty file (PNG signature, at 1440 x 900).
    first = (out / expected[0]).read_bytes()
    assert first[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = int.from_bytes(first[16:20], "big"), int.from_bytes(first[20:24], "big")
    assert (width, height) == (1440, 900)


def test_open_snapshot_help_names_the_option(cli_files):
    proc = subprocess.run([sys.executable, "-m", "workbench", "open", "--help"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and "--snapshot DIR" in proc.stdout


def test_open_snapshot_never_waits_on_the_trust_question(cli_files, tmp_path):
    """Unattended, a file that needs trust is refused with the reason on stderr, exit 2, and no
    snapshot of a window without its model (a dialog would have waited for ever)."""
    import joblib

    pickled = tmp_path / "model.joblib"
    joblib.dump(cli_files["estimator"], pickled)
    out = tmp_path / "shots"
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}
    proc = subprocess.run(
        [sys.executable, "-m", "workbench", "open", str(pickled), str(cli_files["csv"]),
         "--target", "bad", "--snapshot", str(out)],
        capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert "model.joblib was not opened: it needs trust" in proc.stderr
    assert "Pass --trust only if you trust where the file came from" in proc.stderr
    assert "not saving snapshots: model.joblib did not open" in proc.stderr
    assert not out.exists() and proc.stdout == ""
