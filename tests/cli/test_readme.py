"""The README's test command is the one CI runs."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_ci_runs_the_readme_test_command():
    readme = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```bash\n(.*?)\n```", readme, flags=re.S)
    test_line = next(b for b in blocks if "pytest" in b)
    ci = (ROOT / ".ci" / "run").read_text()
    assert test_line.strip() in ci


def test_readme_opens_with_the_job():
    readme = (ROOT / "README.md").read_text()
    first = readme.split("\n\n")[1]
    assert "sign off" in first and "scikit-learn" in first
