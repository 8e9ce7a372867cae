"""workbench.engine.batch: chunked, resumable attributions of a whole file.

The checks: the output does not depend on the chunk size, the input format, the executor (a
two-worker Dask LocalCluster on loopback against this process) or an interruption; every row
equals what ``explain`` gives for it against the same background; bad rows go to the rejects
and all the others are written.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.commands.batch_progress import BatchProgressDisplay
from workbench.engine import jobs
from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain
from workbench.engine.batch import (
    BatchProgress,
    BatchSettings,
    reservoir_sample,
    run_batch,
    sample_rows,
)
from workbench.engine.batch.parts import parts_folder, rejects_path
from workbench.engine.errors import InputError
from workbench.engine.reasons import reason_statements

N_ROWS = 1_500
FEATURES = ["income", "debt_ratio", "age", "region"]


def portfolio(n=N_ROWS, seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({
        "account": [f"A{i:06d}" for i in range(n)],
        "income": rng.normal(40_000, 9_000, n).round(0),
        "debt_ratio": rng.uniform(0, 0.8, n).round(3),
        "age": rng.integers(18, 80, n).astype(float),
        "region": rng.choice(["north", "south", "west"], n),
    })
    logit = -1 + 4 * df["debt_ratio"] - (df["income"] - 40_000) / 15_000 + (df["region"] == "west") * 0.7
    df["bad"] = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    return df


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("batch")
    df = portfolio()
    df.to_parquet(d / "book.parquet", index=False, row_group_size=400)
    df.to_csv(d / "book.csv", index=False)
    return {"dir": d, "frame": df, "parquet": d / "book.parquet", "csv": d / "book.csv"}


@pytest.fixture(scope="module")
def linear_adapter(files):
    df = files["frame"]
    prepare = ColumnTransformer([("num", StandardScaler(), ["income", "debt_ratio", "age"]),
                                 ("cat", OneHotEncoder(handle_unknown="error"), ["region"])])
    model = make_pipeline(prepare, LogisticRegression(max_iter=1000)).fit(df[FEATURES], df["bad"])
    return ModelAdapter(model)


@pytest.fixture(scope="module")
def tree_adapter(files):
    df = files["frame"]
    cols = ["income", "debt_ratio", "age"]
    model = HistGradientBoostingClassifier(max_iter=12, max_leaf_nodes=6, random_state=0)
    return ModelAdapter(model.fit(df[cols], df["bad"]))


def batch(adapter, data, out, **options):
    kwargs = {k: options.pop(k) for k in ("workers", "scheduler", "stop_after_chunks", "on_event")
              if k in options}
    settings = BatchSettings(**{"background_size": 40, "chunk_rows": 500,
                                "id_column": "account", **options})
    return run_batch(adapter, data, out, settings=settings, model_sha256="test-model", **kwargs)


def read(path) -> pd.DataFrame:
    return pd.read_parquet(path)


# ---- the background ---------------------------------------------------------------------------
def test_reservoir_sample_is_the_bottom_k_of_one_key_stream_whatever_the_chunks():
    """Bottom-k order sampling (Efraimidis and Spirakis 2006, equal weights): the sample is the
    k rows with the smallest of n seeded uniform keys, computed here directly."""
    frame = pd.DataFrame({"x": np.arange(1_000)})
    expected = np.sort(np.argsort(jobs.rng(5).random(1_000), kind="stable")[:30])
    for size in (1, 7, 64, 1_000):
        chunks = ((frame.iloc[i:i + size], np.ones(len(frame.iloc[i:i + size]), bool))
                  for i in range(0, 1_000, size))
        sample, rows, seen = reservoir_sample(chunks, 30, seed=5)
        assert seen == 1_000
        np.testing.assert_array_equal(rows, expected)
        np.testing.assert_array_equal(sample["x"].to_numpy(), expected)


def test_reservoir_sample_never_draws_unusable_rows():
    frame = pd.DataFrame({"x": np.arange(200)})
    usable = frame["x"].to_numpy() % 2 == 0
    _, rows, _ = reservoir_sample([(frame, usable)], 50, seed=1)
    assert len(rows) == 50 and np.all(rows % 2 == 0)


def test_sample_rows_keeps_small_frames_and_samples_large_ones_in_order():
    frame = pd.DataFrame({"x": np.arange(100)})
    assert sample_rows(frame, 100, seed=0) is frame
    picked = sample_rows(frame, 10, seed=3)
    assert len(picked) == 10 and picked["x"].is_monotonic_increasing
    pd.testing.assert_frame_equal(picked, sample_rows(frame, 10, seed=3))
    with pytest.raises(InputError, match="at least 1"):
        sample_rows(frame, 0)


# ---- what is written ------------------------------------------------------------------------
def test_every_row_equals_explain_against_the_same_background(files, linear_adapter, tmp_path):
    summary = batch(linear_adapter, files["parquet"], tmp_path / "out.parquet")
    got = read(summary.output)
    df = files["frame"]
    background = df.iloc[list(summary.background_positions)]
    assert len(background) == 40
    expected = explain(linear_adapter, df, background=background, background_size="all")
    assert summary.method == "linear" and summary.rows_written == N_ROWS
    np.testing.assert_array_equal(got["row"], np.arange(N_ROWS))
    assert got["account"].tolist() == df["account"].tolist()
    contrib = got[[f"contrib__{f}" for f in FEATURES]].to_numpy()
    np.testing.assert_allclose(contrib, expected.values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(got["output"], expected.output, rtol=0, atol=1e-12)
    np.testing.assert_allclose(got["base_value"], expected.base_value, rtol=0, atol=1e-12)
    np.testing.assert_allclose(got["probability"], linear_adapter.probability(df), atol=1e-12)
    assert np.max(np.abs(got["residual"])) < 1e-9
    meta = pq.read_schema(summary.output).metadata[b"workbench"]
    assert b'"method": "linear"' in meta
    assert not parts_folder(summary.output).exists()


def test_chunk_size_does_not_change_the_output(files, tree_adapter, tmp_path):
    outs = [read(batch(tree_adapter, files["parquet"], tmp_path / f"c{c}.parquet",
                       chunk_rows=c).output) for c in (170, 500, 5_000)]
    assert outs[0].shape == (N_ROWS, 2 + 4 + 3)
    for other in outs[1:]:
        pd.testing.assert_frame_equal(outs[0], other, check_exact=True)


def test_csv_and_parquet_inputs_agree(files, tree_adapter, tmp_path):
    a = read(batch(tree_adapter, files["parquet"], tmp_path / "p.parquet").output)
    b = read(batch(tree_adapter, files["csv"], tmp_path / "c.parquet", chunk_rows=333).output)
    pd.testing.assert_frame_equal(a, b, check_exact=True)


def test_reason_columns_are_the_reason_statements_of_each_row(files, linear_adapter, tmp_path):
    summary = batch(linear_adapter, files["parquet"], tmp_path / "r.parquet", reasons=2,
                    cutoff=0.4, not_allowed=("region",))
    got = read(summary.output)
    df = files["frame"]
    assert set(got["decision"]) == {"adverse", "favourable"}
    for i in np.flatnonzero(got["decision"].to_numpy() == "adverse")[:25].tolist() + [0, 1]:
        contributions = {f: got.at[i, f"contrib__{f}"] for f in FEATURES}
        ref = reason_statements(contributions, df.iloc[i][FEATURES].to_dict(),
                                adapter=linear_adapter, cutoff=0.4, k=2,
                                not_allowed=("region",), response=got.at[i, "probability"])
        assert got.at[i, "decision"] == ("adverse" if ref.adverse else "favourable")
        for r in (1, 2):
            want = ref.reasons[r - 1] if len(ref.reasons) >= r else None
            for part in ("feature", "text"):
                cell = got.at[i, f"reason_{r}_{part}"]
                assert (None if pd.isna(cell) else cell) == (
                    None if want is None else getattr(want, part))
    assert "region" not in set(got["reason_1_feature"].dropna())


# ---- rejects ----------------------------------------------------------------------------------
def test_bad_rows_go_to_the_rejects_and_every_other_row_is_written(files, linear_adapter, tmp_path):
    df = files["frame"].copy()
    df["income"] = df["income"].astype(object)
    df.loc[7, "income"] = "forty thousand"
    df.loc[1_203, "region"] = "atlantis"  # unseen category: the encoder refuses it
    df.loc[1_204, "region"] = "atlantis"
    df.to_csv(tmp_path / "bad.csv", index=False)
    summary = batch(linear_adapter, tmp_path / "bad.csv", tmp_path / "bad.parquet", chunk_rows=400)
    assert (summary.rows_written, summary.rows_rejected, summary.rows_read) == (N_ROWS - 3, 3, N_ROWS)
    rejects = pd.read_csv(summary.rejects)
    assert summary.rejects == rejects_path(tmp_path / "bad.parquet")
    assert rejects["row"].tolist() == [7, 1_203, 1_204]
    assert rejects["account"].tolist() == ["A000007", "A001203", "A001204"]
    assert "income" in rejects["reason"][0] and "forty thousand" in rejects["reason"][0]
    assert "could not use this row" in rejects["reason"][1]
    got = read(summary.output)
    assert got["row"].tolist() == [i for i in range(N_ROWS) if i not in (7, 1_203, 1_204)]
    clean = files["frame"].drop(index=[7, 1_203, 1_204])
    background = files["frame"].iloc[list(summary.background_positions)]
    expected = explain(linear_adapter, clean, background=background, background_size="all")
    np.testing.assert_allclose(got[[f"contrib__{f}" for f in FEATURES]].to_numpy(),
                               expected.values, rtol=0, atol=1e-12)


def test_a_clean_rerun_removes_the_stale_rejects_file(files, linear_adapter, tmp_path):
    out = tmp_path / "x.parquet"
    rejects_path(out).write_text("row,reason\n1,old\n")
    assert batch(linear_adapter, files["csv"], out).rejects is None
    assert not rejects_path(out).exists()


# ---- resuming ---------------------------------------------------------------------------------
def test_an_interrupted_run_resumes_and_gives_the_same_file(files, tree_adapter, tmp_path):
    whole = batch(tree_adapter, files["csv"], tmp_path / "whole.parquet", chunk_rows=200)
    out = tmp_path / "resumed.parquet"
    with pytest.raises(RuntimeError, match="test hook"):
        batch(tree_adapter, files["csv"], out, chunk_rows=200, stop_after_chunks=3)
    assert not out.exists() and (parts_folder(out) / "manifest.json").is_file()
    events = []
    resumed = batch(tree_adapter, files["csv"], out, chunk_rows=200, on_event=events.append)
    assert resumed.chunks_resumed == 3 and resumed.chunks == whole.chunks
    assert any(e.startswith("resuming: 3 chunk(s), 600 rows") for e in events)
    pd.testing.assert_frame_equal(read(out), read(whole.output), check_exact=True)
    assert out.read_bytes() == whole.output.read_bytes()


def test_a_changed_argument_or_input_starts_over_and_says_so(files, tree_adapter, tmp_path):
    out = tmp_path / "o.parquet"
    with pytest.raises(RuntimeError):
        batch(tree_adapter, files["csv"], out, stop_after_chunks=1)
    events = []
    summary = batch(tree_adapter, files["csv"], out, seed=9, on_event=events.append)
    assert summary.chunks_resumed == 0 and "--seed (0 then, 9 now)" in summary.started_over
    assert any("starting over" in e for e in events)

    changed = tmp_path / "changed.csv"
    files["frame"].iloc[:-1].to_csv(changed, index=False)
    out2 = tmp_path / "o2.parquet"
    with pytest.raises(RuntimeError):
        batch(tree_adapter, changed, out2, stop_after_chunks=1)
    files["frame"].iloc[:-2].to_csv(changed, index=False)
    summary = batch(tree_adapter, changed, out2)
    assert "the input file (SHA-256" in summary.started_over and summary.rows_read == N_ROWS - 2


def _interrupted(adapter, data, out, **options):
    with pytest.raises(RuntimeError, match="test hook"):
        batch(adapter, data, out, chunk_rows=300, stop_after_chunks=2, **options)
    assert (parts_folder(out) / "manifest.json").is_file()


def _no_part_reused(summary, whole):
    assert summary.chunks_resumed == 0 and summary.chunks == whole.chunks
    pd.testing.assert_frame_equal(read(summary.output), read(whole.output), check_exact=True)


def test_a_resume_under_another_workbench_version_reuses_no_part(files, tree_adapter, tmp_path,
                                                                 monkeypatch):
    import workbench

    whole = batch(tree_adapter, files["csv"], tmp_path / "whole.parquet", chunk_rows=300)
    out = tmp_path / "o.parquet"
    monkeypatch.setattr(workbench, "__version__", "0.0.1-old")
    _interrupted(tree_adapter, files["csv"], out)
    monkeypatch.setattr(workbench, "__version__", "0.0.2-new")
    summary = batch(tree_adapter, files["csv"], out, chunk_rows=300)
    assert "the workbench version (0.0.1-old then, 0.0.2-new now)" in summary.started_over
    assert "2 finished chunk(s) were discarded" in summary.started_over
    _no_part_reused(summary, whole)


def test_a_resume_with_another_model_or_library_reuses_no_part(files, tree_adapter, tmp_path,
                                                               monkeypatch):
    from workbench.engine.batch import identity

    whole = batch(tree_adapter, files["csv"], tmp_path / "whole.parquet", chunk_rows=300)
    out = tmp_path / "o.parquet"
    _interrupted(tree_adapter, files["csv"], out)
    settings = BatchSettings(background_size=40, chunk_rows=300, id_column="account")
    summary = run_batch(tree_adapter, files["csv"], out, settings=settings,
                        model_sha256="another-model")
    assert "the model file (SHA-256" in summary.started_over
    _no_part_reused(summary, whole)

    _interrupted(tree_adapter, files["csv"], out)
    real = identity.library_versions()
    monkeypatch.setattr(identity, "library_versions", lambda: {**real, "scikit-learn": "0.0"})
    summary = batch(tree_adapter, files["csv"], out, chunk_rows=300)
    assert f"the scikit-learn version ({real['scikit-learn']} then, 0.0 now)" in summary.started_over
    _no_part_reused(summary, whole)


@pytest.mark.parametrize("changed, named", [
    ({"background_size": 41}, "--background (40 then, 41 now)"),
    ({"id_column": None}, '--id-column ("account" then, null now)'),
    ({"form": "path"}, '--form ("interventional" then, "path" now)'),
])
def test_a_resume_with_another_argument_reuses_no_part(files, tree_adapter, tmp_path, changed,
                                                       named):
    whole = batch(tree_adapter, files["csv"], tmp_path / "whole.parquet", chunk_rows=300,
                  **changed)
    out = tmp_path / "o.parquet"
    _interrupted(tree_adapter, files["csv"], out)
    summary = batch(tree_adapter, files["csv"], out, chunk_rows=300, **changed)
    assert named in summary.started_over
    _no_part_reused(summary, whole)


def test_a_resume_for_another_class_of_interest_reuses_no_part(files, tmp_path):
    df = files["frame"]
    model = HistGradientBoostingClassifier(max_iter=8, max_leaf_nodes=5, random_state=0)
    model.fit(df[["income", "debt_ratio", "age"]], df["region"])
    north, west = ModelAdapter(model, positive_class="north"), ModelAdapter(model,
                                                                             positive_class="west")
    whole = batch(west, files["csv"], tmp_path / "whole.parquet", chunk_rows=300)
    out = tmp_path / "o.parquet"
    _interrupted(north, files["csv"], out)
    summary = batch(west, files["csv"], out, chunk_rows=300)
    assert "the class of interest, --class (north then, west now)" in summary.started_over
    _no_part_reused(summary, whole)


def test_a_manifest_of_an_older_format_is_not_trusted(files, tree_adapter, tmp_path):
    import json

    whole = batch(tree_adapter, files["csv"], tmp_path / "whole.parquet", chunk_rows=300)
    out = tmp_path / "o.parquet"
    _interrupted(tree_adapter, files["csv"], out)
    manifest = parts_folder(out) / "manifest.json"
    body = json.loads(manifest.read_text())
    manifest.write_text(json.dumps({**body, "format": 1}))
    summary = batch(tree_adapter, files["csv"], out, chunk_rows=300)
    assert "manifest format 1" in summary.started_over
    _no_part_reused(summary, whole)


# ---- on a cluster -----------------------------------------------------------------------------
@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    local = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                     host="127.0.0.1", dashboard_address=None,
                                     silence_logs=50)
    try:
        yield local
    finally:
        local.close()


def test_two_workers_on_loopback_give_the_one_process_output(files, tree_adapter, cluster,
                                                             tmp_path):
    one = read(batch(tree_adapter, files["parquet"], tmp_path / "one.parquet",
                     chunk_rows=150).output)
    events = []
    summary = batch(tree_adapter, files["parquet"], tmp_path / "two.parquet", chunk_rows=150,
                    scheduler=cluster.scheduler_address, on_event=events.append)
    assert summary.chunks == 10 and "cluster at tcp://127.0.0.1" in summary.executor
    pd.testing.assert_frame_equal(read(summary.output), one, check_exact=True)


def test_piece_bounds_cover_the_chunk_in_order_with_about_two_pieces_per_worker():
    from workbench.engine.batch.executors import MIN_PIECE_ROWS, piece_bounds

    assert piece_bounds(20_000, 2) == [(0, 5_000), (5_000, 10_000), (10_000, 15_000),
                                       (15_000, 20_000)]
    assert piece_bounds(MIN_PIECE_ROWS - 1, 8) == [(0, MIN_PIECE_ROWS - 1)]  # too few to cut
    assert piece_bounds(3 * MIN_PIECE_ROWS, 8) == [(0, MIN_PIECE_ROWS),
                                                   (MIN_PIECE_ROWS, 2 * MIN_PIECE_ROWS),
                                                   (2 * MIN_PIECE_ROWS, 3 * MIN_PIECE_ROWS)]
    bounds = piece_bounds(10_001, 3)
    assert bounds[0][0] == 0 and bounds[-1][1] == 10_001 and len(bounds) == 5
    assert all(a[1] == b[0] for a, b in zip(bounds[:-1], bounds[1:], strict=True))


def test_chunks_cut_into_pieces_on_two_workers_give_the_one_process_output_and_rejects(
        files, linear_adapter, cluster, tmp_path, monkeypatch):
    from workbench.engine.batch import executors

    df = files["frame"].copy()
    df["income"] = df["income"].astype(object)
    df.loc[[7, 451], "income"] = "n/a"
    df.loc[[299, 300, 1_203], "region"] = "atlantis"
    df.to_csv(tmp_path / "bad.csv", index=False)
    options = {"chunk_rows": 400, "reasons": 2, "cutoff": 0.5}
    one = batch(linear_adapter, tmp_path / "bad.csv", tmp_path / "one.parquet", **options)
    monkeypatch.setattr(executors, "MIN_PIECE_ROWS", 90)  # 4 pieces of each 400-row chunk
    sent = []
    real_submit = executors.DaskCluster.submit

    def counting_submit(self, job):
        sent.append(len(executors.piece_bounds(len(job.frame), self._n_workers)))
        return real_submit(self, job)

    monkeypatch.setattr(executors.DaskCluster, "submit", counting_submit)
    two = batch(linear_adapter, tmp_path / "bad.csv", tmp_path / "two.parquet",
                scheduler=cluster.scheduler_address, **options)
    assert sent == [4, 4, 4, 3] and two.processes_used == 2
    assert 0 < two.cpu_seconds and 0 < two.worker_seconds
    pd.testing.assert_frame_equal(read(two.output), read(one.output), check_exact=True)
    assert pd.read_csv(two.rejects).equals(pd.read_csv(one.rejects))
    assert pd.read_csv(two.rejects)["row"].tolist() == [7, 299, 300, 451, 1_203]


# ---- refusals and progress ---------------------------------------------------------------------
def test_refusals_name_the_problem(files, linear_adapter, tmp_path):
    with pytest.raises(InputError, match="ID column: nope"):
        batch(linear_adapter, files["csv"], tmp_path / "a.parquet", id_column="nope")
    with pytest.raises(InputError, match="Parquet"):
        batch(linear_adapter, files["csv"], tmp_path / "a.csv")
    with pytest.raises(InputError, match="cutoff"):
        batch(linear_adapter, files["csv"], tmp_path / "a.parquet", reasons=2)
    with pytest.raises(InputError, match="chunk size"):
        batch(linear_adapter, files["csv"], tmp_path / "a.parquet", chunk_rows=0)
    with pytest.raises(InputError, match="not both"):
        batch(linear_adapter, files["csv"], tmp_path / "a.parquet", workers=2, scheduler="x")


def _status(done, total=1_000, estimate=False, resumed=0, seconds=2.0):
    return BatchProgress(done, total, estimate, resumed, 0, 1, seconds)


def test_progress_on_a_terminal_redraws_one_line():
    stream = io.StringIO()
    display = BatchProgressDisplay(stream, tty=True)
    display(_status(200))
    display(_status(400, seconds=4.0))
    display.close()
    text = stream.getvalue()
    assert text.count("\r") == 2 and text.endswith("\n")
    assert "400 of 1,000 rows" in text and "100 rows/s" in text and "00:06 left" in text


def test_progress_in_a_log_is_plain_periodic_lines():
    stream = io.StringIO()
    now = [0.0]
    display = BatchProgressDisplay(stream, tty=False, every=10, clock=lambda: now[0])
    for done in range(100, 1_001, 100):
        now[0] += 3
        display(_status(done, estimate=True, resumed=100, seconds=now[0]))
    display.close()
    lines = stream.getvalue().splitlines()
    assert "\r" not in stream.getvalue() and "\x1b" not in stream.getvalue()
    assert len(lines) == 4 and lines[-1].startswith("1,000 of ~1,000 rows")
    assert "30 rows/s" in lines[-1]  # (1000 - 100 resumed) rows in 30 s
