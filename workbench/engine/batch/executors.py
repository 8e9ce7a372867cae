"""Where the chunks are explained: in this process, or on a Dask distributed cluster.

Both take chunks one by one and hand back finished ones, with at most ``in_flight`` chunks
sent and not yet returned, so the main process holds a bounded number of chunks whatever the
size of the input (and whatever the number of workers).

- :class:`InProcess`: this process (numba and BLAS use the local cores as they like).
- :class:`DaskCluster`: ``workers=K`` starts a LocalCluster on loopback (127.0.0.1, K worker
  processes of one thread each, no dashboard) and closes it afterwards; ``scheduler=ADDRESS``
  joins a running cluster and leaves it running. The model, the background, the settings and
  the output schemas are sent to every worker once, and every worker explains a few background
  rows before the first chunk (:meth:`DaskCluster.warm_up`: imports and compiled kernels), so
  the first chunk does not wait for the slowest start. Each chunk is cut into pieces, about two
  per worker (never below ``MIN_PIECE_ROWS`` rows), and the pieces wait in this process until a
  worker has fewer than ``PIECES_PER_WORKER_QUEUED`` per thread: each worker pulls work at its own
  speed, so a worker that shares its core with something else does not hold the others up (with
  pieces dealt out in turn, the fast worker ran dry while the slow one finished its share). A
  worker keeps numba, OpenMP and BLAS to one thread so that workers do not fight over the
  cores. The pieces of a chunk come back as Arrow tables in the output's schema and are joined
  in row order; a row's values do not depend on the piece or the worker that held it.
"""

from __future__ import annotations

import logging
from collections import deque
from collections.abc import Callable, Iterator

from workbench.engine.batch.scoring import (
    ChunkJob,
    ChunkResult,
    explain_chunk,
    join_results,
    warm_up_rows,
)
from workbench.engine.errors import InputError

MIN_PIECE_ROWS = 2_000  # an explain call costs about as much as 50 rows whatever its size
PIECES_PER_WORKER = 2
PIECES_PER_WORKER_QUEUED = 2  # one being explained, the next one waiting on the worker
CHUNKS_IN_FLIGHT = 3  # chunks read and not yet written: enough pieces to keep every worker fed


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

    def warm_up(self, job: ChunkJob) -> None:
        """Nothing to do: this process explained the probe rows when the method was chosen."""

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
        self._waiting: deque[ChunkJob] = deque()  # pieces no worker has been given yet
        self._queued: dict[str, int] = {}  # worker address -> pieces given and not returned
        self._room: dict[str, int] = {}  # worker address -> pieces it may hold at once
        self._given: dict = {}  # future -> the worker it was given to
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
        found = self._client.scheduler_info().get("workers", {})
        if not found:
            self.__exit__(None, None, None)
            raise InputError(f"{self.name} has no workers")
        threads = {address: max(int(info.get("nthreads", 1)), 1) for address, info in found.items()}
        self._room = {address: PIECES_PER_WORKER_QUEUED * n for address, n in threads.items()}
        self._queued = dict.fromkeys(threads, 0)
        self._n_workers = sum(threads.values())  # pieces are cut for every thread
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

    def warm_up(self, job: ChunkJob) -> None:
        """Every worker explains ``job``'s rows once and the result is thrown away."""
        job = ChunkJob(job.index, job.start, job.frame, job.method, one_thread=True)
        futures = [self._client.submit(warm_up_rows, job, *self._shared, workers=[address],
                                       pure=False) for address in self._queued]
        self._client.gather(futures)

    def submit(self, job: ChunkJob) -> None:
        bounds = piece_bounds(len(job.frame), self._n_workers)
        self._chunks[job.index] = {"start": job.start, "left": len(bounds), "done": []}
        for a, b in bounds:
            self._waiting.append(ChunkJob(job.index, job.start + a, job.frame.iloc[a:b],
                                          job.method, one_thread=True))
        self._hand_out()

    def _hand_out(self) -> None:
        """Give waiting pieces to the workers with room in their queue, most room first."""
        while self._waiting:
            address = max(self._queued, key=lambda a: self._room[a] - self._queued[a])
            if self._queued[address] >= self._room[address]:
                return
            piece = self._waiting.popleft()
            # hashing the piece costs time and gains nothing; the data goes where it is used
            data = self._client.scatter(piece, workers=[address], hash=False)
            future = self._client.submit(explain_chunk, data, *self._shared, workers=[address],
                                         allow_other_workers=True, pure=False)
            self._queued[address] += 1
            self._given[future] = address
            self._futures.add(future)

    def pending(self) -> int:
        return len(self._chunks) + len(self._finished)

    def next_done(self) -> ChunkResult:
        while not self._finished:
            future = next(self._futures)
            piece = future.result()
            address = self._given.pop(future)
            if address in self._queued:
                self._queued[address] -= 1
            future.release()
            self._hand_out()
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
