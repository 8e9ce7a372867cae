"""Speed of the champion / challenger comparison on the demo (20,000 rows).

Run: ``python tests/benchmarks/bench_compare.py [runs]`` (default 3 runs). Figures are the
min / median / max in seconds, with BLAS and OpenMP held to one thread (the machine is shared).

- the whole ``compare_versions`` of the demo champion and challenger (1000 resamples, cutoff
  0.20, permutation importance 3 repeats on 5,000 rows);
- its paired bootstrap alone against ``comparestats.paired_bootstrap`` with scikit-learn's
  metrics (AUC, Brier score, log loss: one call per metric, as a plain script would do) on the
  same responses, both per resample; the ratio uses the medians.
"""

from __future__ import annotations

import sys
from pathlib import Path

from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from timing import show, timed  # noqa: E402 - the scripts' own folder

from demo_models.write import ensure_demo  # noqa: E402
from workbench.engine.adapter import ModelAdapter  # noqa: E402
from workbench.engine.compare import compare_versions, paired_intervals  # noqa: E402
from workbench.engine.comparestats import paired_bootstrap  # noqa: E402
from workbench.engine.loading import load_data, load_model  # noqa: E402
from workbench.engine.metrics import metric_function  # noqa: E402

RESAMPLES = 1000
REFERENCE_RESAMPLES = 50  # paired_bootstrap with sklearn is slow; timed on fewer, per resample


def main(runs: int = 3) -> None:
    paths = ensure_demo()
    a = ModelAdapter(load_model(paths["lending_champion"], trust=True).estimator)
    b = ModelAdapter(load_model(paths["lending_challenger"], trust=True).estimator)
    frame = load_data(paths["lending_current"]).frame
    y = frame["defaulted_12m"]
    print(f"champion against challenger on {len(frame):,} rows, {runs} runs, one thread")
    with threadpool_limits(limits=1):
        show("compare_versions (whole comparison)",
             timed(lambda: compare_versions(a, b, frame, y, cutoff=0.20, resamples=RESAMPLES),
                   runs))
        pa, pb = a.response(frame), b.response(frame)
        yy = y.to_numpy()
        ours = show(f"paired_intervals, 5 metrics, {RESAMPLES} resamples",
                    timed(lambda: paired_intervals("binary", yy, pa, pb, resamples=RESAMPLES),
                          runs)) / RESAMPLES

        def reference():
            for name in ("auc", "brier", "log_loss"):
                paired_bootstrap(metric_function(name, "binary"), yy, pa, pb,
                                 resamples=REFERENCE_RESAMPLES)

        theirs = show(f"paired_bootstrap + sklearn, 3 metrics, {REFERENCE_RESAMPLES} resamples",
                      timed(reference, runs)) / REFERENCE_RESAMPLES
    print(f"  per resample: ours {1e3 * ours:.2f} ms (5 metrics), paired_bootstrap with "
          f"sklearn {1e3 * theirs:.2f} ms (3 metrics); ratio ours / reference "
          f"{ours / theirs:.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
