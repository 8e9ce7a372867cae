"""Run every benchmark script in this folder, one after another, each in its own process.

    python tests/benchmarks/run_all.py            # all of them
    python tests/benchmarks/run_all.py treeshap   # only those whose name contains 'treeshap'

Each script prints its own table of ratios against the reference library measured in the same
run (min, median and max over repeats). Nothing here asserts a time; the figures are for reading.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    wanted = argv[1:] or [""]
    scripts = sorted(p for p in HERE.glob("bench_*.py") if any(w in p.stem for w in wanted))
    failed = []
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        code = subprocess.call([sys.executable, str(script)], cwd=HERE.parents[1])
        if code:
            failed.append(script.stem)
    if failed:
        print(f"\nbenchmarks that failed to run: {', '.join(failed)}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
