"""Where the chunks are explained: in this process, or on a Dask distributed cluster.

Both take chunks one by one and hand back finished ones, with at most ``in_flight`` chunks
sent and not yet returned, so the main process holds a bounded number of chunks whatever the
size of the input (and whatever the number of workers).

- :class:`InProcess`: this process (numba and BLAS use the local cores as they like).
- :class:`DaskCluster`: ``workers=K`` starts a LocalCluster on loopback (127.0.0.1, K worker
  processes of one thread each, no dashboard) and closes it afterwards; ``scheduler=ADDRESS``
  joins a running cluster and leaves it running. The model, the background, the settings and
  the output schemas are sent to every worker once. Each chunk is cut into pieces, about two
  per worker (never below ``MIN_PIECE_ROWS`` rows), so every worker has work while the main
  process reads the next chunk and writes the last one, and the last chunk of the input is
  shared by all the workers instead of leaving all but one idle. A worker keeps numba, OpenMP
  and BLAS to one thread so that workers do not fight over the cores. The pieces of a chunk
  come back as Arrow tables in the output's schema and are joined in row order; a row's values
  do not depend on the piece that held it.
"""

from __future__ import annotations

import logging
from collections import deque
from collections.abc import Callable, Iterator

from workbench.engine.batch.scoring import ChunkJob, ChunkResult, explain_chunk, join_results
from workbench.engine.errors import InputError

MIN_PIECE_ROWS = 2_000  # an explain call costs about as much as 50 rows whatever its size
PIECES_PER_WORKER = 2
CHUNKS_IN_FLIGHT = 2  # one chunk being explained, the next one queued behind it


def piece_bounds(rows: int, workers: int) -> list[tuple[int, int]]:
    """(start, stop) of the consecutive pieces a chunk of ``rows`` rows is cut into."""
    pieces = max(1, min(PIECES_PER_WORKER * max(workers, 1), rows // MIN_PIECE_ROWS))
    edges = [round(i * rows / pieces) for i in range(pieces + 1)]
    return [(a, b) for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a]


class InProcess:
    in_flight = 1
    name = "in this process"

    def __init__(self, adapter, background, settings, schemas):
        self._args = (adapter, background, settings, schemas)
        self._done: deque[ChunkResult] = deque()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def submit(self, job: ChunkJob) -> None:
        self._done.append(explain_chunk(job, *self._args))

    def pending(self) -> int:
        return len(self._done)

    def next_done(self) -> ChunkResult:
        return self._done.popleft()


def _cluster_modules():
    try:
        import distributed
    except ImportError:  # the optional extra "cluster"
        raise InputError("running on several workers needs the 'distributed' package "
                         "(pip install 'workbench[cluster]')") from None
    return distributed


class DaskCluster:
    """Chunks explained on Dask workers; see the module docstring."""

    def __init__(self, adapter, background, settings, schemas, *, workers: int | None = None,
                 scheduler: str | None = None, on_start: Callable[[str], None] | None = None):
        if (workers is None) == (scheduler is None):
            raise InputError("give either a number of workers or a scheduler address, not both")
        if workers is not None and (isinstance(workers, bool) or int(workers) < 1):
            raise InputError(f"the number of workers must be at least 1, not {workers!r}")
        self._args = (adapter, background, settings, schemas)
        self._workers = workers
        self._scheduler = scheduler
        self._on_start = on_start
        self._cluster = None
        self._client = None
        self._futures = None
        self._shared = None
        self._chunks: dict[int, dict] = {}  # chunk index -> its place and finished pieces
        self._finished: deque[ChunkResult] = deque()
        self._n_workers = 1
        self.in_flight = CHUNKS_IN_FLIGHT
        self.name = ""

    def __enter__(self):
        distributed = _cluster_modules()
        try:
            if self._workers is not None:
                self._cluster = distributed.LocalCluster(
                    n_workers=int(self._workers), threads_per_worker=1, processes=True,
                    host="127.0.0.1", scheduler_port=0, dashboard_address=None,
                    silence_logs=logging.ERROR)
                self._client = distributed.Client(self._cluster)
                self.name = f"{self._workers} local worker process(es) on 127.0.0.1"
            else:
                self._client = distributed.Client(self._scheduler, timeout="60s")
                self.name = f"the cluster at {self._scheduler}"
        except (OSError, TimeoutError) as exc:
            self.__exit__(None, None, None)
            where = self._scheduler or "127.0.0.1"
            raise InputError(f"could not reach a Dask scheduler at {where} ({exc})") from None
        self._n_workers = len(self._client.scheduler_info().get("workers", {})) or 1
        self._shared = [self._client.scatter(x, broadcast=True) for x in self._args]
        self._futures = distributed.as_completed()
        if self._on_start is not None:
            self._on_start(self.name)
        return self

    def __exit__(self, *exc):
        for thing in (self._client, self._cluster):
            if thing is not None:
                try:
                    thing.close()
                except Exception:  # noqa: BLE001 - closing must not hide the real error
                    pass
        self._client = self._cluster = None
        return False

    def submit(self, job: ChunkJob) -> None:
        bounds = piece_bounds(len(job.frame), self._n_workers)
        self._chunks[job.index] = {"start": job.start, "left": len(bounds), "done": []}
        for a, b in bounds:
            piece = ChunkJob(job.index, job.start + a, job.frame.iloc[a:b], job.method,
                             one_thread=True)
            data = self._client.scatter(piece, hash=False)  # hashing costs time, gains nothing
            self._futures.add(self._client.submit(explain_chunk, data, *self._shared, pure=False))

    def pending(self) -> int:
        return len(self._chunks) + len(self._finished)

    def next_done(self) -> ChunkResult:
        while not self._finished:
            future = next(self._futures)
            piece = future.result()
            future.release()
            chunk = self._chunks[piece.index]
            chunk["done"].append(piece)
            chunk["left"] -= 1
            if chunk["left"] == 0:
                del self._chunks[piece.index]
                self._finished.append(join_results(piece.index, chunk["start"], chunk["done"]))
        return self._finished.popleft()


def run_chunks(executor, jobs: Iterator[ChunkJob]) -> Iterator[ChunkResult]:
    """Feed ``jobs`` to ``executor`` with a bounded number in flight; yield finished chunks."""
    for job in jobs:
        executor.submit(job)
        while executor.pending() >= executor.in_flight:
            yield executor.next_done()
    while executor.pending():
        yield executor.next_done()
