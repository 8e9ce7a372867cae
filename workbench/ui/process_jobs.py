"""Heavy engine jobs in worker processes, so the window's main thread keeps the interpreter lock.

In threads, numpy, pandas, scikit-learn and numba code holds Python's global lock for hundreds
of milliseconds at a time (sklearn's encoders, pandas' arrow conversions, numba kernels compiled
without ``nogil``), and the window froze for up to 0.9 s while an Effect level filled. In a worker
process the same work holds a lock of its own.

A :class:`ProcessLane` runs :class:`~workbench.ui.pool_tasks.PoolTask` jobs on a
``ProcessPoolExecutor`` of 'spawn' workers (Qt's threads make 'fork' unsafe); a worker
leaves when the window's process is gone. Shared inputs are written to a private folder once and read once per worker. Progress
comes back through a multiprocessing queue; cancelling sets a byte in shared memory that the
worker's ``cancel`` reads at every engine step. Quick tasks (``PoolTask.quick``: one row's
contributions after an edit) go to one more worker of their own, at the window's priority, so
an edit is answered while H-statistics keep the other workers busy.
"""

from __future__ import annotations

import itertools
import multiprocessing
import os
import queue
import shutil
import tempfile
import threading
from collections import OrderedDict
from concurrent.futures import CancelledError, Future, ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from workbench.ui import pool_tasks
from workbench.ui.pool_tasks import PoolTask, Shared, SharedRef

SLOTS = 256  # cancel flags; a slot is reused once its job has ended
QUICK_NICENESS = 0  # the quick worker runs ahead of the heavy ones (niceness 5)
SHARED_LIMIT = 12  # inputs kept on disk for the workers (files of the oldest are removed)


def default_workers() -> int:
    """Two workers at most: the window needs a core of its own on small machines."""
    return max(1, min(2, (os.cpu_count() or 2)))


def _context():
    # 'spawn': fresh interpreters, children of the window (so they can tell when it is gone);
    # 'fork' would copy Qt's threads and locks mid-use.
    return multiprocessing.get_context("spawn")


class ProcessLane:
    """A process pool for picklable engine tasks, started on first use."""

    def __init__(self, workers: int | None = None) -> None:
        self.workers = workers or default_workers()
        self._ctx = _context()
        self._executor: ProcessPoolExecutor | None = None
        self._quick: ProcessPoolExecutor | None = None  # one worker for quick tasks
        self._flags = self._ctx.RawArray("b", SLOTS)
        self.progress = self._ctx.Queue()
        self._free = list(range(SLOTS))
        self._slot_of: dict[int, int] = {}  # job id -> cancel slot
        # id of a shared object -> (the object, kept alive so its id stays its own; its file)
        self._shared: OrderedDict[int, tuple[object, SharedRef]] = OrderedDict()
        self._written = itertools.count(1)
        self._folder = tempfile.mkdtemp(prefix="workbench-shared-")
        self._lock = threading.Lock()

    # ---- pool ------------------------------------------------------------------------------------
    def _pool(self, quick: bool = False) -> ProcessPoolExecutor:
        if quick:
            if self._quick is None:
                self._quick = self._start(1, threads=1, niceness=QUICK_NICENESS)
            return self._quick
        if self._executor is None:
            threads = max(1, (os.cpu_count() or 1) // self.workers)
            self._executor = self._start(self.workers, threads=threads,
                                         niceness=pool_tasks.WORKER_NICENESS)
        return self._executor

    def _start(self, workers: int, *, threads: int, niceness: int) -> ProcessPoolExecutor:
        return ProcessPoolExecutor(
            max_workers=workers, mp_context=self._ctx, initializer=pool_tasks.init_worker,
            initargs=(self._flags, self.progress, threads, os.getpid(), niceness))

    def _forget(self, quick: bool) -> None:
        if quick:
            self._quick = None
        else:
            self._executor = None

    def warm_up(self) -> None:
        """Start the workers and import the engine in them, without waiting."""
        pool = self._pool()
        for _ in range(self.workers):
            pool.submit(pool_tasks.warm_up)
        self._pool(quick=True).submit(pool_tasks.warm_up)

    def share(self, shared: Shared) -> None:
        """Write a shared object ahead of the first task that needs it."""
        self._ref(shared)

    def _ref(self, shared: Shared) -> SharedRef:
        ident = id(shared.obj)
        held = self._shared.get(ident)
        if held is None:
            # a fresh key per write: a worker never mistakes a new object for an old one
            key = f"{os.getpid()}-{next(self._written)}"
            held = (shared.obj, pool_tasks.write_shared(shared.obj, key, self._folder))
            self._shared[ident] = held
            while len(self._shared) > SHARED_LIMIT:
                _old, ref = self._shared.popitem(last=False)[1]
                _remove(ref.path)
        self._shared.move_to_end(ident)
        return held[1]

    # ---- jobs ------------------------------------------------------------------------------------
    def submit(self, job_id: int, task: PoolTask) -> Future:
        """Start ``task``; the future's result is the task's (or its exception)."""
        task = task.with_refs(self._ref)
        with self._lock:
            slot = self._free.pop()
            self._slot_of[job_id] = slot
        self._flags[slot] = 0
        try:
            future = self._pool(task.quick).submit(pool_tasks.run_in_worker, job_id, slot, task)
        except BrokenProcessPool:
            self._forget(task.quick)  # a worker died (killed, out of memory): a fresh pool
            future = self._pool(task.quick).submit(pool_tasks.run_in_worker, job_id, slot, task)
        future.add_done_callback(lambda _f, j=job_id: self._release(j))
        return future

    def cancel(self, job_id: int, future: Future | None) -> None:
        if future is not None and future.cancel():
            return  # never started
        slot = self._slot_of.get(job_id)
        if slot is not None:
            self._flags[slot] = 1

    def _release(self, job_id: int) -> None:
        with self._lock:
            slot = self._slot_of.pop(job_id, None)
            if slot is not None:
                self._free.append(slot)

    def progress_updates(self) -> list[tuple[int, float, str]]:
        """Progress reported since the last call (main thread, never blocks)."""
        out = []
        while True:
            try:
                out.append(self.progress.get_nowait())
            except (queue.Empty, OSError, ValueError):
                return out

    def shutdown(self, *, wait: bool = False) -> None:
        for slot in list(self._slot_of.values()):
            self._flags[slot] = 1
        for pool in (self._executor, self._quick):
            if pool is not None:
                pool.shutdown(wait=wait, cancel_futures=True)
        self._executor = self._quick = None
        shutil.rmtree(self._folder, ignore_errors=True)


def outcome_of(future: Future):
    """(result, None) or (None, exception) of a finished future; a pool cancel is Cancelled."""
    from workbench.engine.errors import Cancelled

    try:
        return future.result(), None
    except CancelledError:
        return None, Cancelled("cancelled before it started")
    except BaseException as exc:  # noqa: BLE001 - handed to the waiters
        return None, exc


def _remove(path: str) -> None:
    try:
        os.remove(path)
    except OSError:
        pass
