"""Speed of "why this decision" on the demo (20,000 rows): nearest flip and similar rows.

Run: ``python tests/benchmarks/bench_why.py [runs]`` (default 3 runs). Figures are the
min / median / max in seconds, with BLAS and OpenMP held to one thread (the machine is shared).

- ``nearest_flips`` of one adverse case (6 actionable features, at most 3 changes) for the
  champion (logistic regression) and the challenger (gradient-boosted trees), against scoring the
  same number of candidate rows with scikit-learn's ``predict_proba`` in one call: the ratio is
  the search's overhead over the model calls it cannot avoid;
- ``similar_rows`` (Gower distance of one row to all rows, 15 mixed columns) against
  ``sklearn.metrics.pairwise_distances`` (manhattan) on the same data already encoded as
  range-scaled numerics and one-hot categoricals, which gives the same ranking when no value is
  missing; the encoding is left out of the reference's time, so the ratio flatters it.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from timing import show, timed  # noqa: E402 - the scripts' own folder

from demo_models.write import ensure_demo  # noqa: E402
from workbench.engine.adapter import ModelAdapter  # noqa: E402
from workbench.engine.flips import nearest_flips  # noqa: E402
from workbench.engine.loading import load_model  # noqa: E402
from workbench.engine.similar import similar_rows  # noqa: E402

ACTIONABLE = ["debt_to_income", "loan_amount", "term_months", "revolving_utilisation",
              "loan_purpose", "home_status"]


def main(runs: int = 3) -> None:
    paths = ensure_demo()
    frame = pd.read_parquet(paths["lending_current"])
    for name in ("lending_champion", "lending_challenger"):
        adapter = ModelAdapter(load_model(paths[name], trust=True).estimator)
        r = adapter.response(frame)
        row = int(np.flatnonzero(r >= 0.5)[0])
        case = frame.iloc[[row]]
        result = nearest_flips(adapter, case, frame, cutoff=0.5, actionable=ACTIONABLE)
        n = result.candidates_scored
        batch = case.loc[case.index.repeat(n)].reset_index(drop=True)[adapter.input_columns]
        print(f"{name}: {len(result.options)} option(s), {n} candidate rows in "
              f"{result.model_calls} model calls")
        ours = show("nearest_flips", timed(lambda a=adapter, c=case: nearest_flips(
            a, c, frame, cutoff=0.5, actionable=ACTIONABLE), runs))
        ref = show(f"sklearn predict_proba of {n} rows in one call",
                   timed(lambda a=adapter, b=batch: a.estimator.predict_proba(b), runs))
        print(f"  ratio (nearest_flips / one batch of its rows): {ours / ref:.1f}")

    adapter = ModelAdapter(load_model(paths["lending_champion"], trust=True).estimator)
    x = frame[adapter.input_columns]
    complete = x.dropna().reset_index(drop=True)
    cats = adapter.categorical_columns
    nums = [c for c in complete.columns if c not in cats]
    span = complete[nums].max() - complete[nums].min()
    encoded = np.hstack([(complete[nums] / span).to_numpy(dtype=float),
                         pd.get_dummies(complete[cats]).to_numpy(dtype=float) / 2])
    from sklearn.metrics import pairwise_distances

    print("similar rows, one case against all rows")
    ours = show("similar_rows (Gower)", timed(lambda: similar_rows(
        complete, 0, k=5, categorical=cats), runs))
    ref = show("sklearn pairwise_distances manhattan (pre-encoded)",
               timed(lambda: np.argsort(pairwise_distances(encoded[:1], encoded,
                                                           metric="manhattan")[0])[:6], runs))
    print(f"  ratio (similar_rows / pairwise_distances): {ours / ref:.1f}")


if __name__ == "__main__":
    with threadpool_limits(1):
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
