"""Overhead of explain(method="tree-reference") over calling shap.TreeExplainer directly.

Run: ``python tests/benchmarks/bench_attributions.py [rows]`` (default 300 rows to explain).
Same model, same rows, same background, same run. Each figure is the min / median / max of
5 runs in seconds; the ratio uses the medians (target: at most 1.1).

- cold: explainer caches emptied before every run, so both sides build the TreeExplainer;
- warm: explain() keeps its cached explainer (as the window does row after row); shap direct
  still builds one per call, as a script calling shap would.
explain() also scores the rows once (adapter.score) for the additivity residual, as shap does by
default (check_additivity=True, one model call); the like-for-like ratio is against shap with
its check on. The ratio against shap with its check off, and ours without the model call, are
shown too. Our numba kernel (method="tree") is timed
alongside when present.
"""

from __future__ import annotations

import os
import statistics
import sys
import warnings
from pathlib import Path

import numpy as np
import shap
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from timing import timed_together  # noqa: E402

from workbench.engine.adapter import ModelAdapter  # noqa: E402
from workbench.engine.attribution import tree as tree_module  # noqa: E402
from workbench.engine.attributions import explain, select_background  # noqa: E402

RUNS = int(os.environ.get("BENCH_RUNS", "5"))


def show(label, times):
    print(
        f"  {label:<38} min {min(times):8.4f}  median {statistics.median(times):8.4f}  "
        f"max {max(times):8.4f} s"
    )
    return statistics.median(times)


def bench(name, model, X, rows, form):
    adapter = ModelAdapter(model)
    bg = select_background(X, 100, seed=0)
    z_rows, z_bg = rows.to_numpy(), bg.to_numpy()

    def direct(check=False):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if form == "path":
                e = shap.TreeExplainer(
                    model, feature_perturbation="tree_path_dependent", model_output="raw"
                )
            else:
                e = shap.TreeExplainer(
                    model, data=z_bg, feature_perturbation="interventional", model_output="raw"
                )
            e.shap_values(z_rows, check_additivity=check)

    def ours(method="tree-reference"):
        explain(adapter, rows, method=method, form=form, background=X, background_size=100, seed=0)

    print(f"{name}, {form} form, {len(rows)} rows, background {0 if form == 'path' else 100}")
    direct()
    ours()  # warm-up: imports and first calls
    steps = [
        ("shap.TreeExplainer directly", direct, None),
        ("shap directly, its additivity check on", lambda: direct(True), None),
        ("explain(tree-reference), cold", ours, tree_module._CACHE.clear),
        ("explain(tree-reference), warm", ours, None),
        ("adapter.score alone (residual check)", lambda: adapter.score(rows), None),
    ]
    if tree_module.kernel_supports(model):
        ours("tree")
        steps.append(("explain(tree), our kernel, warm", lambda: ours("tree"), None))
    times = timed_together(steps, RUNS)
    med = {label: show(label, t) for label, t in times.items()}
    t_shap = med["shap.TreeExplainer directly"]
    t_cold, t_warm = med["explain(tree-reference), cold"], med["explain(tree-reference), warm"]
    t_score = med["adapter.score alone (residual check)"]
    t_checked = med["shap directly, its additivity check on"]
    print(
        f"  like for like (both check additivity with one model call): cold "
        f"{t_cold / t_checked:.3f}x, warm {t_warm / t_checked:.3f}x (target <= 1.1x)"
    )
    print(
        f"  against shap with its check off: cold {t_cold / t_shap:.3f}x, warm "
        f"{t_warm / t_shap:.3f}x; without our model call for the residual: cold "
        f"{(t_cold - t_score) / t_shap:.3f}x, warm {(t_warm - t_score) / t_shap:.3f}x"
    )
    kernel = med.get("explain(tree), our kernel, warm")
    if kernel is not None:
        print(f"  our kernel vs shap directly {kernel / t_shap:.3f}x")


def main() -> None:
    # one OpenMP/BLAS thread: HistGradientBoosting's predict otherwise spins on a shared machine
    with threadpool_limits(1):
        run(int(sys.argv[1]) if len(sys.argv) > 1 else 300)


def run(n_rows: int) -> None:
    X, y = load_breast_cancer(return_X_y=True, as_frame=True)
    rows = X.iloc[np.resize(np.arange(len(X)), n_rows)]
    forest = RandomForestClassifier(n_estimators=100, max_depth=8, random_state=0, n_jobs=1).fit(
        X, y
    )
    boosting = HistGradientBoostingClassifier(max_iter=100, random_state=0).fit(X, y)
    bench("RandomForestClassifier(100 trees, depth 8)", forest, X, rows, "path")
    bench("RandomForestClassifier(100 trees, depth 8)", forest, X, rows.iloc[:60], "interventional")
    bench("HistGradientBoostingClassifier(100 iterations)", boosting, X, rows, "path")


if __name__ == "__main__":
    main()
