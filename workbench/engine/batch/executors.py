"""Where the chunks are explained: in this process, or on a Dask distributed cluster.

Both take chunks one by one and hand back finished ones, with at most ``in_flight`` chunks
sent and not yet returned, so the main process holds a bounded number of chunks whatever the
size of the input.

- :class:`InProcess`: this process (numba and BLAS use the local cores as they like).
- :class:`DaskCluster`: ``workers=K`` starts a LocalCluster on loopback (127.0.0.1, K worker
  processes of one thread each, no dashboard) and closes it afterwards; ``scheduler=ADDRESS``
  joins a running cluster and leaves it running. The model, the background and the settings
  are sent to every worker once; each chunk goes to one worker, and its worker keeps numba to
  one thread so that workers do not fight over the cores.
"""

from __future__ import annotations

import logging
from collections import deque
from collections.abc import Callable, Iterator

from workbench.engine.batch.scoring import ChunkJob, ChunkResult, explain_chunk
from workbench.engine.errors import InputError


class InProcess:
    in_flight = 1
    name = "in this process"

    def __init__(self, adapter, background, settings):
        self._args = (adapter, background, settings)
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

    def __init__(self, adapter, background, settings, *, workers: int | None = None,
                 scheduler: str | None = None, on_start: Callable[[str], None] | None = None):
        if (workers is None) == (scheduler is None):
            raise InputError("give either a number of workers or a scheduler address, not both")
        if workers is not None and (isinstance(workers, bool) or int(workers) < 1):
            raise InputError(f"the number of workers must be at least 1, not {workers!r}")
        self._args = (adapter, background, settings)
        self._workers = workers
        self._scheduler = scheduler
        self._on_start = on_start
        self._cluster = None
        self._client = None
        self._futures = None
        self._shared = None
        self.in_flight = 2
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
        n = len(self._client.scheduler_info().get("workers", {})) or 1
        self.in_flight = 2 * n
        adapter, background, settings = self._args
        self._shared = [self._client.scatter(x, broadcast=True) for x in (adapter, background, settings)]
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
        job = ChunkJob(job.index, job.start, job.frame, job.method, one_thread=True)
        data = self._client.scatter(job, hash=False)  # hashing a chunk costs time and gains nothing
        self._futures.add(self._client.submit(explain_chunk, data, *self._shared, pure=False))

    def pending(self) -> int:
        return self._futures.count()

    def next_done(self) -> ChunkResult:
        future = next(self._futures)
        result = future.result()
        future.release()
        return result


def run_chunks(executor, jobs: Iterator[ChunkJob]) -> Iterator[ChunkResult]:
    """Feed ``jobs`` to ``executor`` with a bounded number in flight; yield finished chunks."""
    for job in jobs:
        executor.submit(job)
        while executor.pending() >= executor.in_flight:
            yield executor.next_done()
    while executor.pending():
        yield executor.next_done()
