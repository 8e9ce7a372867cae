"""Speed of the tree SHAP kernel against shap.TreeExplainer, measured in one process.

Run as a script: ``python tests/benchmarks/bench_treeshap.py [--quick]``. Same model, same rows
for both; each timing is repeated (>= 3 runs) and the ratio shap time / kernel time is given
as min, median and max over the runs. The kernel uses numba's parallel loops over rows on all
cores numba sees (2 on the development machine); shap's TreeExplainer runs its single-threaded
C++ code. Other work on a shared machine slows both, so the load average is printed with the
table. Writes the table to tests/benchmarks/results_treeshap.md.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numba
import numpy as np
import shap
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from workbench.engine import treeshap  # noqa: E402

RESULTS = Path(__file__).with_name("results_treeshap.md")
COMPILE_SNIPPET = (
    "import time; t=time.perf_counter(); "
    "from workbench.engine import treeshap; s=treeshap.compile_kernels(); "
    "print(time.perf_counter()-t)"
)


def _data(n=6000, n_features=20, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, n_features))
    logit = X[:, 0] + X[:, 1] * X[:, 2] + np.sin(2 * X[:, 3]) - np.abs(X[:, 4])
    y = (logit + rng.normal(size=n) > 0).astype(int)
    X[rng.random(X.shape) < 0.02] = np.nan  # some missing values; both models accept them
    return X, y


def _timed(fn, runs):
    out, times = None, []
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return out, np.array(times)


def _compare(label, kernel_fn, shap_fn, runs, rows):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        shap_fn_out, t_shap = _timed(shap_fn, runs)
        kern_out, t_kern = _timed(kernel_fn, runs)
    ratios = t_shap / t_kern  # run i of shap against run i of the kernel
    diff = float(np.max(np.abs(np.asarray(kern_out) - np.asarray(shap_fn_out))))
    return dict(label=label, rows=rows, kernel=np.median(t_kern), shap=np.median(t_shap),
                rmin=ratios.min(), rmed=np.median(ratios), rmax=ratios.max(), diff=diff)


def _compile_times():
    """Seconds for the first call in a fresh process: with an empty numba cache, then cached."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    with tempfile.TemporaryDirectory() as cache:
        env["NUMBA_CACHE_DIR"] = cache
        cold, warm = (float(subprocess.run([sys.executable, "-c", COMPILE_SNIPPET], env=env,
                                           capture_output=True, text=True, check=True)
                            .stdout.strip().splitlines()[-1]) for _ in range(2))
    return cold, warm


def main(quick: bool = False) -> None:
    runs = 3
    n_path = 500 if quick else 2000
    X, y = _data()
    t0 = time.perf_counter()
    hgb = HistGradientBoostingClassifier(max_iter=300, max_leaf_nodes=31, early_stopping=False,
                                         random_state=0).fit(X, y)
    rf = RandomForestClassifier(n_estimators=100, max_depth=12, random_state=0,
                                n_jobs=2).fit(X, y)
    fit_s = time.perf_counter() - t0
    rows = X[-n_path:]
    background = X[:100]
    ens_hgb, ens_rf = treeshap.from_estimator(hgb), treeshap.from_estimator(rf)
    treeshap.compile_kernels()
    e_hgb, e_rf = shap.TreeExplainer(hgb), shap.TreeExplainer(rf)
    ei_hgb = shap.TreeExplainer(hgb, data=background, feature_perturbation="interventional")
    ei_rf = shap.TreeExplainer(rf, data=background, feature_perturbation="interventional")

    def path(ens, rws):
        return lambda: treeshap.shap_values(ens, rws).values[..., -1]

    def inter(ens, rws):
        return lambda: treeshap.shap_values(ens, rws, method="interventional",
                                            background=background).values[..., -1]

    def sh(explainer, rws, **kw):
        def run():
            v = np.asarray(explainer.shap_values(rws, check_additivity=False, **kw))
            return v[..., -1] if v.ndim == 3 else v
        return run

    n_int = 50 if quick else 200
    n_ivh = 50 if quick else 200
    n_ivr = 25 if quick else 100
    table = [
        _compare("path-dependent, HGB 300 iter x 31 leaves", path(ens_hgb, rows),
                 sh(e_hgb, rows), runs, n_path),
        _compare("path-dependent, RF 100 trees depth 12", path(ens_rf, rows),
                 sh(e_rf, rows), runs, n_path),
        _compare("interactions, HGB", lambda: treeshap.interaction_values(
            ens_hgb, rows[:n_int]).values[..., 0],
                 lambda: np.asarray(e_hgb.shap_interaction_values(rows[:n_int])), runs, n_int),
        _compare("interventional (100 bg), HGB [shap wrong here]", inter(ens_hgb, rows[:n_ivh]),
                 sh(ei_hgb, rows[:n_ivh]), runs, n_ivh),
        _compare("interventional (100 bg), RF", inter(ens_rf, rows[:n_ivr]),
                 sh(ei_rf, rows[:n_ivr]), runs, n_ivr),
    ]
    scaling = []
    for name, ens in (("HGB", ens_hgb), ("RF", ens_rf)):
        small, big = rows[: n_path // 4], rows
        _, t_small = _timed(lambda e=ens, s=small: treeshap.shap_values(e, s), runs)
        _, t_big = _timed(lambda e=ens, b=big: treeshap.shap_values(e, b), runs)
        scaling.append((name, len(small), len(big), np.median(t_big) / np.median(t_small)))
    cold, warm = _compile_times()
    summary = treeshap.shap_values(ens_hgb, rows[:10]).summary
    summary_rf = treeshap.shap_values(ens_rf, rows[:10]).summary
    load = os.getloadavg()

    lines = [
        "# Tree SHAP kernel vs shap.TreeExplainer",
        "",
        f"shap {shap.__version__}, numba {numba.__version__}, kernel threads: "
        f"{numba.get_num_threads()} (numba prange over rows); shap TreeExplainer: one thread.",
        f"Data: 6000 x 20 synthetic, 2% missing; models fitted in {fit_s:.1f} s. "
        f"Load average while measuring: {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f} "
        f"(machine shared with other developers; {os.cpu_count()} cores).",
        f"Algorithms chosen: HGB {summary}; RF {summary_rf}.",
        "",
        "| task | rows | kernel s (median) | shap s (median) | speed-up min | median | max "
        "| max abs diff |",
        "|---|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in table:
        lines.append(f"| {r['label']} | {r['rows']} | {r['kernel']:.3f} | {r['shap']:.3f} | "
                     f"{r['rmin']:.1f}x | {r['rmed']:.1f}x | {r['rmax']:.1f}x | {r['diff']:.1e} |")
    lines += ["", "| cost in rows (path-dependent) | rows | rows x4 | time ratio (target <= 4.4) |",
              "|---|---:|---:|---:|"]
    for name, a, b, ratio in scaling:
        lines.append(f"| {name} | {a} | {b} | {ratio:.2f} |")
    lines += ["", f"First call in a fresh process (all kernels on a tiny model): "
                  f"{cold:.1f} s with an empty numba cache (compiling), {warm:.1f} s with the "
                  f"on-disk cache (loading).", ""]
    text = "\n".join(lines)
    print(text)
    if not quick:
        RESULTS.write_text(text)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer rows; do not write results")
    main(parser.parse_args().quick)
