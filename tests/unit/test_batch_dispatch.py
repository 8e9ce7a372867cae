"""How ``DaskCluster`` hands pieces to workers: each worker pulls at its own pace.

A fake client stands in for Dask, so the order in which workers finish is chosen by the test:
here worker "b" never finishes, as a worker sharing its core with a busy process would lag.
Dealt out in turn, half the pieces would wait behind "b"; pulled, "b" keeps only what it was
given first and "a" takes the rest.
"""

from __future__ import annotations

import pandas as pd
import pyarrow as pa

from workbench.engine.batch import executors
from workbench.engine.batch.scoring import ChunkJob, ChunkResult


class _Future:
    def __init__(self, result, worker):
        self._result, self.worker = result, worker

    def result(self):
        return self._result

    def release(self):
        pass


class _Client:
    def __init__(self):
        self.given: list[str] = []

    def scatter(self, piece, workers, hash):
        return piece, workers[0]

    def submit(self, fn, data, *shared, workers, allow_other_workers, pure):
        piece, where = data
        assert workers == [where] and allow_other_workers and not pure
        self.given.append(where)
        rows = pa.table({"row": pa.array(range(piece.start, piece.start + len(piece.frame)))})
        return _Future(ChunkResult(piece.index, piece.start, rows, rows.slice(0, 0)), where)


class _Finished:
    """``as_completed`` where the futures of worker "a" always finish first."""

    def __init__(self):
        self.futures: list[_Future] = []

    def add(self, future):
        self.futures.append(future)

    def __next__(self):
        first = next((f for f in self.futures if f.worker == "a"), self.futures[0])
        self.futures.remove(first)
        return first


def _cluster(monkeypatch, threads=None):
    threads = threads or {"a": 1, "b": 1}
    monkeypatch.setattr(executors, "MIN_PIECE_ROWS", 10)
    cluster = executors.DaskCluster(None, None, None, None, workers=2)
    cluster._client, cluster._futures = _Client(), _Finished()
    cluster._queued, cluster._n_workers, cluster._shared = dict.fromkeys(threads, 0), 2, []
    cluster._room = {a: executors.PIECES_PER_WORKER_QUEUED * n for a, n in threads.items()}
    return cluster


def _chunk(index, rows=40):
    return ChunkJob(index, index * rows, pd.DataFrame({"x": range(rows)}), "tree")


def test_a_lagging_worker_keeps_only_the_pieces_it_was_first_given(monkeypatch):
    cluster = _cluster(monkeypatch)
    cluster.submit(_chunk(0))  # 4 pieces of 10 rows: two queued on each worker
    cluster.submit(_chunk(1))  # 4 more wait in this process
    assert cluster._client.given == ["a", "b", "a", "b"] and len(cluster._waiting) == 4
    done = cluster.next_done()  # chunk 1 cannot finish: two of its pieces are on "b"
    assert done.index == 1 and done.rows.column("row").to_pylist() == list(range(40, 80))
    assert cluster._client.given == ["a", "b", "a", "b", "a", "a", "a", "a"]
    assert cluster._queued == {"a": 0, "b": 2} and not cluster._waiting


def test_no_worker_is_given_more_than_its_queue_holds(monkeypatch):
    cluster = _cluster(monkeypatch)
    for index in range(3):
        cluster.submit(_chunk(index))
    assert max(cluster._queued.values()) == executors.PIECES_PER_WORKER_QUEUED
    assert len(cluster._waiting) == 12 - 2 * executors.PIECES_PER_WORKER_QUEUED


def test_a_worker_with_more_threads_holds_more_pieces(monkeypatch):
    cluster = _cluster(monkeypatch, threads={"a": 1, "b": 3})
    for index in range(3):
        cluster.submit(_chunk(index))
    assert cluster._queued == {"a": executors.PIECES_PER_WORKER_QUEUED,
                               "b": 3 * executors.PIECES_PER_WORKER_QUEUED}
