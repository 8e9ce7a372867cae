"""Speed of permutation importance, PD/ICE and H-statistics, as ratios measured in the same run.

Run: ``python tests/benchmarks/bench_engine.py [rows] [features]`` (defaults 2000 rows, 8 features);
on a shared machine set ``OMP_NUM_THREADS=1`` so that contention does not swamp the ratios.
Each figure is the min / median / max of 5 runs in seconds; ratios use the medians.

- permutation importance vs one batched prediction of the same total rows (the floor: every
  shuffled copy must be scored once) and vs sklearn.inspection.permutation_importance;
- PD + ICE vs sklearn.inspection.partial_dependence(kind="both", method="brute") on the same grid;
- H-statistics of a 20-feature model with the default sample and screen (time only).
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.inspection import partial_dependence as sk_partial_dependence
from sklearn.inspection import permutation_importance as sk_permutation_importance

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from timing import timed_together  # noqa: E402

from workbench.engine.adapter import ModelAdapter  # noqa: E402
from workbench.engine.effects import model_frame, partial_dependence, stacked_frame  # noqa: E402
from workbench.engine.importance import permutation_importance  # noqa: E402
from workbench.engine.interactions import h_statistics  # noqa: E402

RUNS = 5
REPEATS = 5


def timed(fn, runs: int = RUNS) -> tuple[float, float, float]:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times), statistics.median(times), max(times)


def spread(times: list[float]) -> tuple[float, float, float]:
    return min(times), statistics.median(times), max(times)


def show(name: str, t: tuple[float, float, float]) -> None:
    print(f"{name:<52} min {t[0]:8.3f}  median {t[1]:8.3f}  max {t[2]:8.3f} s", flush=True)


def permuted_copies(x: pd.DataFrame, repeats: int, seed: int = 0) -> pd.DataFrame:
    """The rows permutation importance scores: per column and repeat, a copy of x with that
    column shuffled. Scoring shuffled rows is slower than scoring the same rows repeated in
    order (caches and branch prediction), so this, not a tiled copy, is the fair floor."""
    n = len(x)
    generator = np.random.default_rng(seed)
    base = np.tile(np.arange(n), x.shape[1] * repeats)
    column_index = {}
    for t in range(x.shape[1] * repeats):
        idx = column_index.setdefault(x.columns[t // repeats], base.copy())
        idx[t * n : (t + 1) * n] = generator.permutation(n)
    return stacked_frame(x, base, column_index=column_index)


def problem(n: int, p: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({f"x{j}": rng.normal(size=n) for j in range(p)})
    logit = X.iloc[:, : min(p, 5)].sum(axis=1) + X["x0"] * X["x1"]
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    model = HistGradientBoostingClassifier(max_iter=100, random_state=0).fit(X, y)
    return model, X, y


def main(n: int = 2000, p: int = 8) -> None:
    print(f"{n} rows, {p} features, HistGradientBoostingClassifier(max_iter=100); {RUNS} runs each")
    model, X, y = problem(n, p)
    adapter = ModelAdapter(model)

    x = model_frame(adapter, X)
    copies = p * REPEATS
    # the floor scores what permutation importance must score: the rows as they are (for the
    # baseline) and every shuffled copy, in one batch
    stacked = pd.concat([x, permuted_copies(x, REPEATS)], ignore_index=True)
    times = timed_together(
        [
            ("ours", lambda: permutation_importance(adapter, X, y, metric="auc",
                                                    repeats=REPEATS), None),
            ("floor", lambda: adapter.response(stacked), None),
            ("sklearn", lambda: sk_permutation_importance(
                model, X, y, scoring="roc_auc", n_repeats=REPEATS, random_state=0), None),
        ],
        RUNS,
    )
    ours, floor, theirs = (spread(times[k]) for k in ("ours", "floor", "sklearn"))
    show(f"workbench permutation_importance ({copies} shuffles)", ours)
    show(f"one batched prediction of the same {(copies + 1) * n} rows", floor)
    show("sklearn permutation_importance", theirs)
    print(f"  ratio to one batched prediction: {ours[1] / floor[1]:.2f} (target <= 1.2)")
    print(f"  ratio to sklearn:                {ours[1] / theirs[1]:.2f} (target <= 1)")

    curve = partial_dependence(adapter, X, "x0", grid_size=20, ice_rows=None)
    grid = curve.grid
    ours = timed(
        lambda: partial_dependence(adapter, X, "x0", grid=grid, ice_rows=None, scale="response")
    )
    theirs = timed(
        lambda: sk_partial_dependence(
            model,
            X,
            ["x0"],
            kind="both",
            method="brute",
            response_method="predict_proba",
            custom_values={"x0": grid},
        )
    )
    show(f"workbench partial_dependence + ICE ({grid.size} points)", ours)
    show("sklearn partial_dependence kind=both brute", theirs)
    print(f"  ratio to sklearn:                {ours[1] / theirs[1]:.2f}")

    model20, X20, _ = problem(n, 20, seed=1)
    adapter20 = ModelAdapter(model20)
    x20 = model_frame(adapter20, X20)
    t = timed(lambda: h_statistics(adapter20, X20, sample=300, screen=8), runs=3)
    show("h_statistics, 20 features, sample 300, screen 8 (3 runs)", t)
    evaluations = (20 + 28) * 300 * 300  # model rows the default H-statistics score
    batch = stacked_frame(x20, np.tile(np.arange(n), 200_000 // n))
    per_row = timed(lambda: adapter20.score(batch), runs=3)[1] / len(batch)
    print(
        f"  floor: {evaluations} rows at {per_row * 1e6:.2f} us a row (one batch of "
        f"{len(batch)}) = {evaluations * per_row:.2f} s",
        flush=True,
    )
    print(f"  ratio to the floor: {t[1] / (evaluations * per_row):.2f}")
    t = timed(lambda: h_statistics(adapter20, X20, sample=300, screen=8, background=100), runs=3)
    show("h_statistics, same, background 100 (3 runs)", t)


if __name__ == "__main__":
    args = [int(a) for a in sys.argv[1:3]]
    main(*args)
