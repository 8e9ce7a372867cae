"""Nearest flip and explanation stability follow the job conventions: deterministic for a seed,
progress reported in [0, 1], cancel honoured."""

import threading

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression

from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import Cancelled
from workbench.engine.explanation_stability import reason_stability
from workbench.engine.flips import nearest_flips, score_text


@pytest.fixture(scope="module")
def small():
    rng = np.random.default_rng(4)
    n = 400
    x = pd.DataFrame({"a": rng.uniform(0, 1, n).round(2), "b": rng.integers(0, 10, n),
                      "c": rng.normal(0, 1, n).round(3)})
    y = (x["a"] * 3 + x["b"] / 5 + x["c"] + rng.normal(0, 0.5, n) > 2.5).astype(int)
    adapter = ModelAdapter(LogisticRegression(max_iter=1000).fit(x, y))
    r = adapter.response(x)
    return adapter, x, int(np.flatnonzero((r > 0.5) & (r < 0.8))[0])


def test_nearest_flips_is_deterministic_and_reports_progress(small):
    adapter, x, row = small
    seen = []
    first = nearest_flips(adapter, x.iloc[[row]], x, cutoff=0.5, actionable=["a", "b", "c"],
                          progress=lambda f, m: seen.append(f))
    again = nearest_flips(adapter, x.iloc[[row]], x, cutoff=0.5, actionable=["a", "b", "c"])
    assert first.found and first.options == again.options
    assert seen[0] == 0.0 and seen[-1] == 1.0 and seen == sorted(seen)
    assert all(isinstance(to, int) for f, _, to in
               (c for o in first.options for c in o.changes) if f == "b")  # integer column


def test_cancel_stops_both_jobs(small):
    adapter, x, row = small
    stop = threading.Event()
    stop.set()
    with pytest.raises(Cancelled):
        nearest_flips(adapter, x.iloc[[row]], x, cutoff=0.5, actionable=["a"], cancel=stop)
    with pytest.raises(Cancelled):
        reason_stability(adapter, x.iloc[[row]], x, background_size=50, cancel=stop)


def test_score_text_never_reads_as_the_cutoff():
    assert score_text(0.1999961, 0.2) == "0.199996"
    assert score_text(0.4998, 0.5) == "0.4998"
    assert score_text(0.2, 0.2) == "0.2"
