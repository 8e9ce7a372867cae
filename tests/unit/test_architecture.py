"""The layer rules of DEVELOPERS.md, checked with import-linter's contracts in pyproject.toml."""

import ast
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_import_contracts_hold():
    exe = shutil.which("lint-imports") or str(Path(sys.executable).with_name("lint-imports"))
    proc = subprocess.run([exe, "--config", str(ROOT / "pyproject.toml")], cwd=ROOT, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_engine_never_imports_qt_even_lazily():
    """import-linter sees module-level and function-level imports; this also covers importlib strings."""
    for path in (ROOT / "workbench" / "engine").rglob("*.py"):
        text = path.read_text()
        tree = ast.parse(text)
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str):
                assert not node.value.startswith(("PySide6", "pyqtgraph")), path
