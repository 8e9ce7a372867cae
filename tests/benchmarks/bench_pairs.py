"""The full pair analysis of the lending demo's challenger (HistGradientBoosting with native
categorical columns): what the Pairs level and ``workbench pairs`` compute.

Run: ``python tests/benchmarks/bench_pairs.py [runs]`` (default 3). Same process, same rows:

* Friedman's H-statistic on a 300-row sample with the default screen of 8, each partial
  dependence averaged over 100 sample rows (the default) and over the whole sample;
* associations of the input columns and their clustering into blocks;
* SHAP interaction strength on 300 rows (tree models; the Pairs level's second matrix);
* the floor: the model rows the H-statistics must score, timed as one batched prediction.

There is no reference library for the H-statistic (scikit-learn and shap do not compute it),
so the figure is a time against that floor, min / median / max over the runs.

One OpenMP thread: HistGradientBoosting's predict opens a parallel region per tree, and on a
machine whose other core is busy each region waits for a descheduled thread; measured here with
the other core loaded, the same H call took 4 s once and 39 s the next time with two threads,
5 s and 6 s with one.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from timing import show, timed_together  # noqa: E402

from demo_models.write import ensure_demo, load_demo_model  # noqa: E402
from workbench.commands.rank import association_blocks  # noqa: E402
from workbench.engine.adapter import ModelAdapter  # noqa: E402
from workbench.engine.effects import model_frame, stacked_frame  # noqa: E402
from workbench.engine.interactions import h_statistics  # noqa: E402
from workbench.engine.shap_interactions import shap_interaction_strength  # noqa: E402


def main(runs: int = 3) -> None:
    paths = ensure_demo()
    adapter = ModelAdapter(load_demo_model(paths["lending_challenger"]))
    frame = pd.read_parquet(paths["lending_current"])
    x = model_frame(adapter, frame)
    p, screen, sample, background = x.shape[1], 8, 300, 100
    print(f"demo challenger, {p} inputs, {len(x)} rows; H on {sample} rows, screen {screen}")
    h_statistics(adapter, x, sample=20, screen=2, background=10)  # warm-up
    batch = stacked_frame(x, np.arange(200_000) % len(x))
    steps = [
        ("H, background 100 (default)",
         lambda: h_statistics(adapter, x, sample=sample, screen=screen, background=background),
         None),
        ("H, whole sample as background",
         lambda: h_statistics(adapter, x, sample=sample, screen=screen), None),
        ("associations and blocks", lambda: association_blocks(adapter, x), None),
        ("SHAP interaction strength, 300 rows",
         lambda: shap_interaction_strength(adapter, x.iloc[:300], sample=300), None),
        ("one batch of 200,000 rows", lambda: adapter.score(batch), None),
    ]
    times = timed_together(steps, runs)
    med = {label: show(label, t, width=40) for label, t in times.items()}
    per_row = med["one batch of 200,000 rows"] / 200_000
    pairs = screen * (screen - 1) // 2
    for label, rows in (
        ("H, background 100 (default)", (2 * p + pairs) * sample * background),
        ("H, whole sample as background", (p + pairs) * sample * sample),
    ):
        floor = rows * per_row
        print(f"  {label}: {rows} model rows, floor {floor:.2f} s, "
              f"ratio to the floor {med[label] / floor:.2f}")
    analysis = med["H, background 100 (default)"] + med["associations and blocks"]
    print(f"  full pair analysis (default H + associations): {analysis:.2f} s (median)")


if __name__ == "__main__":
    with threadpool_limits(1):
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
