"""Engine work off the main thread: one job per request, progress, cancel, a result cache.

A job is ``fn(progress, cancel) -> result``; ``cancel`` is a ``threading.Event`` the engine
polls through ``workbench.engine.jobs.step``. A job whose ``fn`` is a picklable
:class:`~workbench.ui.pool_tasks.PoolTask` runs in a worker process (heavy engine work: in a
thread it would hold Python's lock and freeze the window); any other callable runs on a small
thread pool. Results are cached by key (model, data, segment, parameters), so going back to a
view shows it at once. A result whose requester no longer wants it (``relevant()`` is False on
arrival: the focus has moved on) is cached but not shown. A cancelled job ends for the window
within :data:`CANCEL_GRACE_MS` even if its worker has not reached its next step yet.
``synchronous=True`` runs every job in the calling thread, for tests and snapshots.
"""

from __future__ import annotations

import itertools
import threading
import time
import traceback
from collections import OrderedDict
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field

from PySide6.QtCore import (
    QCoreApplication,
    QEventLoop,
    QObject,
    QRunnable,
    QThreadPool,
    QTimer,
    Signal,
)

from workbench.engine.errors import Cancelled
from workbench.ui.pool_tasks import PoolTask

CACHE_LIMIT = 96
CANCEL_GRACE_MS = 900  # a cancelled job is over for the window after this, whatever the worker
_PROGRESS_INTERVAL_S = 0.05
_PROGRESS_POLL_MS = 50
_ids = itertools.count(1)


@dataclass
class Job:
    """One running computation; ``cancel`` stops it at the engine's next step."""

    key: Hashable
    title: str
    fn: Callable
    id: int = field(default_factory=lambda: next(_ids))
    cancel: threading.Event = field(default_factory=threading.Event)
    waiters: list = field(default_factory=list)  # (on_done, on_error, relevant)
    fraction: float = 0.0
    message: str = ""
    started_at: float = field(default_factory=time.perf_counter)
    result: object = None
    error: BaseException | None = None
    future: object = None  # concurrent.futures.Future of a job in a worker process
    where: str = "thread"  # "thread" | "process" | "here"


class _Signals(QObject):
    # Only plain numbers and text cross threads: the result or error waits on the Job itself,
    # so no Python object travels through Qt's queued connections.
    progressed = Signal(float, str)
    returned = Signal()
    errored = Signal()


class _Runnable(QRunnable):
    def __init__(self, job: Job, signals: _Signals) -> None:
        super().__init__()
        self.job = job
        self.signals = signals

    def run(self) -> None:  # worker thread
        last = [0.0]

        def progress(fraction: float, message: str = "") -> None:
            now = time.perf_counter()
            if now - last[0] >= _PROGRESS_INTERVAL_S or fraction >= 1.0:
                last[0] = now
                self.signals.progressed.emit(float(fraction), str(message))

        try:
            self.job.result = self.job.fn(progress, self.job.cancel)
        except BaseException as exc:  # noqa: BLE001 - handed to the main thread
            exc.__traceback_text__ = traceback.format_exc()
            self.job.error = exc
            self.signals.errored.emit()
        else:
            self.signals.returned.emit()


def spin_events(ms: int) -> None:
    """Handle the window's events for about ``ms`` milliseconds (waiting loops, benchmarks).

    Not ``QCoreApplication.processEvents()``: in PySide6 6.12 every call of it takes one
    reference from ``None`` (measured with ``sys.getrefcount(None)``), so a loop calling it a few
    hundred times a second ends the interpreter within minutes ("none_dealloc").
    """
    loop = QEventLoop()
    QTimer.singleShot(max(int(ms), 0), loop.quit)
    loop.exec()


class JobRunner(QObject):
    """Runs jobs on a small thread pool and tells the window about them."""

    job_started = Signal(object)  # Job
    job_progressed = Signal(object)  # Job (fraction and message updated)
    job_ended = Signal(object, str)  # Job, "done" | "cancelled" | "failed: <message>"

    def __init__(self, parent: QObject | None = None, *, synchronous: bool = False,
                 max_threads: int = 2, processes: int | None = None) -> None:
        """``processes``: worker processes for PoolTask jobs (None: up to two; 0: threads)."""
        super().__init__(parent)
        self.synchronous = synchronous
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(max_threads)
        self.processes = processes
        self._lane = None  # ProcessLane, started with the first PoolTask
        self._poll = QTimer(self)
        self._poll.setInterval(_PROGRESS_POLL_MS)
        self._poll.timeout.connect(self._poll_progress)
        self._cache: OrderedDict = OrderedDict()
        self._running: dict[Hashable, Job] = {}
        self._signals: dict[int, _Signals] = {}
        self.dropped = 0  # results that arrived after their requester moved on
        app = QCoreApplication.instance()
        if app is not None:
            app.aboutToQuit.connect(self.shutdown)

    # ---- cache ------------------------------------------------------------------------------
    def cached(self, key: Hashable):
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        return None

    def has(self, key: Hashable) -> bool:
        return key in self._cache

    def clear_cache(self) -> None:
        self._cache.clear()

    def _store(self, key: Hashable, result) -> None:
        self._cache[key] = result
        self._cache.move_to_end(key)
        while len(self._cache) > CACHE_LIMIT:
            self._cache.popitem(last=False)

    # ---- jobs ---------------------------------------------------------------------------------
    @property
    def running(self) -> list[Job]:
        return list(self._running.values())

    def request(self, key: Hashable, title: str, fn: Callable, on_done: Callable, *,
                on_error: Callable | None = None,
                relevant: Callable[[], bool] | None = None) -> Job | None:
        """Deliver the result for ``key`` to ``on_done``: from the cache, a running job or a new one."""
        if key in self._cache:
            on_done(self.cached(key))
            return None
        waiter = (on_done, on_error, relevant)
        if key in self._running:
            self._running[key].waiters.append(waiter)
            return self._running[key]
        job = Job(key, title, fn, waiters=[waiter])
        self._running[key] = job
        self.job_started.emit(job)
        if self.synchronous:
            job.where = "here"
            self._run_here(job)
            return job
        if isinstance(fn, PoolTask) and self.processes != 0:
            self._run_in_process(job)
            return job
        signals = _Signals()
        signals.progressed.connect(lambda f, m, j=job: self._on_progress(j, f, m))
        signals.returned.connect(lambda j=job: self._on_returned(j, j.result))
        signals.errored.connect(lambda j=job: self._on_errored(j, j.error))
        self._signals[job.id] = signals
        self.pool.start(_Runnable(job, signals))
        return job

    def _run_here(self, job: Job) -> None:
        def progress(fraction: float, message: str = "") -> None:
            self._on_progress(job, fraction, message)

        try:
            result = job.fn(progress, job.cancel)
        except BaseException as exc:  # noqa: BLE001
            exc.__traceback_text__ = traceback.format_exc()
            self._on_errored(job, exc)
        else:
            self._on_returned(job, result)

    # ---- worker processes ------------------------------------------------------------------
    @property
    def lane(self):
        """The process pool (created, not yet started, on first use)."""
        if self._lane is None:
            from workbench.ui.process_jobs import ProcessLane

            self._lane = ProcessLane(self.processes)
        return self._lane

    def warm_up(self) -> None:
        """Start the worker processes now, so the first heavy job does not wait for them."""
        if not self.synchronous and self.processes != 0:
            self.lane.warm_up()

    def share_ahead(self, obj) -> None:
        """Write ``obj`` for the worker processes now (models, data: pickled once, 10-20 ms
        each), so that the first job using it does not pay for it on a visit."""
        if not self.synchronous and self.processes != 0 and obj is not None:
            from workbench.ui.pool_tasks import Shared

            self.lane.share(Shared(obj))

    def _run_in_process(self, job: Job) -> None:
        # The main thread polls the futures (every 50 ms while any runs) rather than being told
        # from the pool's own thread: PySide 6.12 signals emitted from a plain Python thread
        # crashed the interpreter here now and then (none_dealloc).
        job.where = "process"
        job.future = self.lane.submit(job.id, job.fn)
        if not self._poll.isActive():
            self._poll.start()

    def _process_ended(self, job: Job) -> None:
        if self._running.get(job.key) is not job:
            return  # given up after a cancel: the window has moved on
        from workbench.ui.process_jobs import outcome_of

        result, exc = outcome_of(job.future)
        if exc is None:
            self._on_returned(job, result)
            return
        cause = exc.__cause__
        exc.__traceback_text__ = str(cause) if cause is not None else "".join(
            traceback.format_exception(exc))
        self._on_errored(job, exc)

    def _poll_progress(self) -> None:
        """Main thread: progress and endings of the jobs in worker processes."""
        by_id = {j.id: j for j in self._running.values() if j.where == "process"}
        if not by_id or self._lane is None:
            self._poll.stop()
            return
        latest = {}
        for job_id, fraction, message in self._lane.progress_updates():
            latest[job_id] = (fraction, message)  # only the newest of each job is shown
        for job_id, (fraction, message) in latest.items():
            if job_id in by_id:
                self._on_progress(by_id[job_id], fraction, message)
        for job in by_id.values():
            if job.future.done():
                # One ending per tick: each redraws a level, and two or three in one tick froze
                # the window for 200 ms; the rest wait for the next tick, painting in between.
                self._process_ended(job)
                break

    def shutdown(self, *, wait: bool = False) -> None:
        """Cancel everything and stop the worker processes (the application is closing);
        ``wait``: until they have ended and their queues are released."""
        self.cancel_all()
        if self._lane is not None:
            self._lane.shutdown(wait=wait)
            self._lane = None

    # ---- cancelling ---------------------------------------------------------------------------
    def cancel(self, job: Job) -> None:
        job.cancel.set()
        if job.future is not None and self._lane is not None:
            self._lane.cancel(job.id, job.future)
        if job.where != "here":
            QTimer.singleShot(CANCEL_GRACE_MS, self, lambda j=job: self._give_up(j))

    def _give_up(self, job: Job) -> None:
        """A cancelled job still running after the grace period ends for the window now."""
        if self._running.get(job.key) is job:
            self._on_errored(job, Cancelled("cancelled"))

    def cancel_all(self) -> None:
        for job in self.running:
            self.cancel(job)

    def wait_idle(self, timeout_s: float = 60.0) -> bool:
        """Process events until no job runs and no shown level has draws waiting (snapshots and
        tests); False on timeout."""
        from workbench.ui.draw_queue import draws_waiting

        end = time.perf_counter() + timeout_s
        while self._running or draws_waiting():
            if time.perf_counter() > end:
                return False
            spin_events(20)
        spin_events(0)
        return True

    # ---- arrivals (main thread) -------------------------------------------------------------
    def _on_progress(self, job: Job, fraction: float, message: str) -> None:
        job.fraction, job.message = fraction, message
        self.job_progressed.emit(job)

    def _finish(self, job: Job) -> list:
        self._running.pop(job.key, None)
        self._signals.pop(job.id, None)
        return job.waiters

    def _on_returned(self, job: Job, result) -> None:
        if self._running.get(job.key) is not job:
            return  # ended already (given up after a cancel)
        self._store(job.key, result)
        waiters = self._finish(job)
        self.job_ended.emit(job, "done")
        for on_done, _on_error, relevant in waiters:
            if relevant is not None and not relevant():
                self.dropped += 1
                continue
            on_done(result)

    def _on_errored(self, job: Job, exc: BaseException) -> None:
        if self._running.get(job.key) is not job:
            return
        waiters = self._finish(job)
        if isinstance(exc, Cancelled):
            outcome = "cancelled"
        else:
            text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            outcome = f"failed: {text}"
        self.job_ended.emit(job, outcome)
        for _on_done, on_error, relevant in waiters:
            if relevant is not None and not relevant():
                continue
            if on_error is not None:
                on_error(exc)
