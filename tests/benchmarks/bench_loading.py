"""Peak memory and time of loading a 1,000,000 x 50 data file (CSV and Parquet).

Run: python tests/benchmarks/bench_loading.py   (writes the files into a temporary folder)
Each step runs in a fresh child process of a lean parent, so each peak resident memory
(ru_maxrss, which Linux carries over from the parent at fork) is the child's own.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path

MAKER = """
import sys
import numpy as np
import pandas as pd
ROWS, NUMERIC, TEXT = 1_000_000, 45, 5
rng = np.random.default_rng(0)
cols = {f"x{i}": rng.normal(size=ROWS) for i in range(NUMERIC - 1)}
for i in range(TEXT):
    cols[f"c{i}"] = rng.choice(["alpha", "beta", "gamma", "delta"], ROWS)
cols["target"] = rng.integers(0, 2, ROWS)
frame = pd.DataFrame(cols)
frame.to_parquet(sys.argv[1])
frame.to_csv(sys.argv[2], index=False)
print(frame.memory_usage(deep=True).sum() / 2**20)
"""

CHILD = """
import resource, sys, time
t = time.perf_counter()
from workbench.engine.loading import load_data
d = load_data(sys.argv[1], target="target")
print(d.n_rows, len(d.frame.columns), time.perf_counter() - t,
      resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""

BASELINE = """
import resource
import workbench.engine.loading  # noqa: F401
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        paths = {"parquet": Path(tmp) / "big.parquet", "csv": Path(tmp) / "big.csv"}
        in_memory = float(subprocess.check_output(
            [sys.executable, "-c", MAKER, str(paths["parquet"]), str(paths["csv"])]).decode())
        base = float(subprocess.check_output([sys.executable, "-c", BASELINE]).decode())
        print(f"frame in memory: {in_memory:.0f} MiB; interpreter + libraries: {base:.0f} MiB")
        for kind, path in paths.items():
            size = path.stat().st_size / 2**20
            t = time.perf_counter()
            out = subprocess.check_output([sys.executable, "-c", CHILD, str(path)]).decode().split()
            rows, cols, seconds, peak = int(out[0]), int(out[1]), float(out[2]), float(out[3])
            print(f"{kind:8s} file {size:6.0f} MiB  rows {rows} cols {cols}  load {seconds:5.1f} s  "
                  f"peak RSS {peak:6.0f} MiB  (wall {time.perf_counter() - t:.1f} s)")


if __name__ == "__main__":
    main()
